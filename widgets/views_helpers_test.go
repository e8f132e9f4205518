package widgets

import (
	"context"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// The hostile labels of the escaping tests: a column name that is an HTML
// element with a handler, and a category level that closes a script element
// and opens another.
const (
	hostileColumn = `<img src=x onerror=alert(1)>`
	hostileLevel  = `</script><script>alert(1)</script>`
)

var (
	waterOnce sync.Once
	water     resultSet
)

// waterResults are the results of waterStudy, computed once per test run
// (the views do not modify results).
func waterResults(t testing.TB) resultSet {
	waterOnce.Do(func() { water = resultsOf(t, waterStudy(), "district", "lot_m2", "pool") })
	if water.Scores == nil {
		t.Fatal("the water scenario results could not be built (see the first failure)")
	}
	return water
}

// waterStudy is the demo scenario shipped in testdata (simulated water audits).
func waterStudy() *causal.Study {
	return causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
}

// syntheticFrame makes n rows: a numeric covariate x, a categorical g with
// four levels, a 0/1 covariate b, a treatment with logit 0.8x + level
// effects, and an outcome. names lets the tests rename x and one level.
func syntheticFrame(t testing.TB, n int, seed uint64, xName, oddLevel string) *causal.Frame {
	t.Helper()
	r := rand.New(rand.NewPCG(seed, 0x77696467657473))
	x := make([]float64, n)
	b := make([]float64, n)
	tr := make([]float64, n)
	y := make([]float64, n)
	g := make([]string, n)
	levels := []string{"north", "south", oddLevel, "east"}
	effect := []float64{-0.4, 0.2, 0.9, 0}
	for i := 0; i < n; i++ {
		x[i] = r.NormFloat64()
		k := r.IntN(len(levels))
		g[i] = levels[k]
		if r.Float64() < 0.3 {
			b[i] = 1
		}
		p := 1 / (1 + math.Exp(-(-0.5 + 0.8*x[i] + effect[k] + 0.3*b[i])))
		if r.Float64() < p {
			tr[i] = 1
		}
		y[i] = 1 + 2*x[i] + 1.5*tr[i] + r.NormFloat64()
	}
	f, err := causal.NewFrame([]string{xName, "g", "b", "t", "y"},
		map[string][]float64{xName: x, "b": b, "t": tr, "y": y}, map[string][]string{"g": g})
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// resultSet is one of every result type computed from one study.
type resultSet struct {
	Scores    *causal.Scores
	Support   *causal.Support
	Cells2    *causal.Cells // two covariates: heatmap
	Cells3    *causal.Cells // three: table only
	Erosion   *causal.Erosion
	Balance   *causal.BalanceSheet
	Weighted  *causal.BalanceSheet
	Weights   *causal.Weights
	Verdict   *causal.Verdict
	Effect    *causal.Effect
	Estimates *causal.Estimates
	Trimmed   *causal.Trimmed
	TrimmedEs *causal.Estimates
	Bootstrap *causal.Bootstrap
	Sweep     *causal.Sweep
	Audit     *causal.ExtrapolationAudit
	Curve     *causal.ExtrapolationCurve
	Matching  *causal.Matching
	Strata    *causal.Strata
}

func (r resultSet) all() []any {
	return []any{r.Scores, r.Support, r.Cells2, r.Cells3, r.Erosion, r.Balance, r.Weighted, r.Weights, r.Verdict,
		r.Effect, r.Estimates, r.Trimmed, r.TrimmedEs, r.Bootstrap, r.Sweep, r.Audit, r.Curve, r.Matching, r.Strata}
}

// resultsOf computes every result of s: c1 and c2 are the covariates of
// the two-way positivity table (c1 numeric, drawn as the extrapolation
// curve when the outcome models can be fitted), c3 a third; alphas is the
// sweep's grid (nil for the default).
func resultsOf(t testing.TB, s *causal.Study, c1, c2, c3 string, alphas ...float64) resultSet {
	t.Helper()
	sc := s.Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	cells := s.Cells(c1, c2)
	w := sc.Weights(causal.ATE)
	r := resultSet{Scores: sc, Support: sc.Support(), Cells2: cells, Cells3: s.Cells(c1, c2, c3), Erosion: s.Erosion(),
		Balance: s.Balance(), Weighted: w.Balance(), Weights: w, Verdict: sc.Verdict(causal.VerdictOptions{}, cells),
		Effect: sc.Effect(causal.IPWNormalized, causal.ATE), Estimates: sc.Effects(causal.ATE, cells)}
	r.Trimmed = sc.Trim(causal.Symmetric(0.05))
	r.TrimmedEs = r.Trimmed.Effects(causal.ATE)
	reps := 12
	if sc.Design.N > 100_000 {
		reps = 4 // the chart's size does not depend on the number of replicates
	}
	r.Bootstrap = sc.Bootstrap(context.Background(), causal.IPWNormalized, causal.ATE, causal.BootstrapOptions{Replicates: reps, Seed: 5})
	r.Sweep = sc.Sweep(causal.IPWNormalized, causal.ATE, alphas...)
	r.Audit = sc.Extrapolation(causal.ATE)
	r.Curve = r.Audit.Curve(c1)
	r.Matching = sc.Match(causal.MatchOptions{Estimand: causal.ATE, Caliper: causal.AustinCaliper})
	r.Strata = sc.Subclassify(0)
	for _, x := range r.all() {
		if x == any(r.Audit) || x == any(r.Curve) {
			continue // regression adjustment can fail where positivity does (checked where it matters)
		}
		if err := resultErr(x); err != nil {
			t.Fatalf("%T: %v", x, err)
		}
	}
	return r
}

func hostileStudy(t testing.TB) *causal.Study {
	f := syntheticFrame(t, 3000, 7, hostileColumn, hostileLevel)
	return causal.FromSource(f).Treat("t").Outcome("y").Adjust(hostileColumn, "g", "b")
}

var (
	millionOnce sync.Once
	million     resultSet
)

// millionResults is a synthetic study of 1e6 rows, computed once per test run.
func millionResults(t testing.TB) resultSet {
	millionOnce.Do(func() {
		f := syntheticFrame(t, 1_000_000, 11, "x", "west")
		s := causal.FromSource(f).Treat("t").Outcome("y").Adjust("x", "g", "b")
		million = resultsOf(t, s, "x", "g", "b", 0, 0.1)
	})
	if million.Scores == nil {
		t.Fatal("the 1e6-row study could not be built (see the first failure)")
	}
	return million
}

// extrapolationStudy is the scenario built to show extrapolation: one
// covariate, arms two standard deviations apart, a curved outcome.
func extrapolationStudy(t testing.TB, n int) *causal.Study {
	t.Helper()
	d, err := scenario.Extrapolation(3, n, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	f, err := causal.NewFrame(d.Names, d.Num, d.Str)
	if err != nil {
		t.Fatal(err)
	}
	return causal.FromSource(f).Treat("t").Outcome("y").Adjust("x")
}
