package causal_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// boxesScores fits the score on scenario.OverlapBoxes with one covariate:
// treated x ~ U(0, 1), controls x ~ U(shift, 1 + shift).
func boxesScores(t *testing.T, seed uint64, n int, shift float64) *causal.Scores {
	t.Helper()
	d, err := scenario.OverlapBoxes(seed, n, 1, shift)
	if err != nil {
		t.Fatal(err)
	}
	sc := causal.FromSource(scenarioFrame(t, d)).Treat("t").Adjust("x1").Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return sc
}

// pooledSD is √((s1² + s0²)/2) of x by arm.
func pooledSD(x, tr []float64) float64 {
	var v [2]float64
	for a := 0; a < 2; a++ {
		var s, q, k float64
		for i, xi := range x {
			if int(tr[i]) == a {
				s += xi
				k++
			}
		}
		m := s / k
		for i, xi := range x {
			if int(tr[i]) == a {
				q += (xi - m) * (xi - m)
			}
		}
		v[a] = q / (k - 1)
	}
	return math.Sqrt((v[0] + v[1]) / 2)
}

// TestCaliperRecoversNonOverlapShare: in OverlapBoxes with one covariate the
// treated with x < shift have no control at all, and the logit score is
// linear in x, so a caliper of c SD of the logit is c·SD(x) on x. The
// treated farther than that from every control — a known share
// p = shift − c·SD(x) — must be the ones left unmatched, within binomial
// error (3 SD, plus one unit for the gap between shift and the lowest
// control); the share grows as overlap shrinks.
func TestCaliperRecoversNonOverlapShare(t *testing.T) {
	const n = 20000
	prev := -1.0
	for _, shift := range []float64{0.1, 0.2, 0.3, 0.4} {
		sc := boxesScores(t, 7, n, shift)
		m := sc.Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
		if err := m.Err(); err != nil {
			t.Fatal(err)
		}
		d := sc.Design
		p := shift - causal.AustinCaliper*pooledSD(d.Col(1), d.T)
		n1 := float64(d.Treated)
		want := n1 * p
		tol := 3*math.Sqrt(n1*p*(1-p)) + 1
		got := float64(m.UnmatchedTreated)
		t.Logf("shift %.1f: %d of %d treated unmatched (%.2f%%); expected %.1f ± %.1f", shift, m.UnmatchedTreated, d.Treated, 100*got/n1, want, tol)
		if math.Abs(got-want) > tol {
			t.Errorf("shift %.1f: %v treated unmatched, expected %.1f ± %.1f", shift, got, want, tol)
		}
		if share := got / n1; share <= prev {
			t.Errorf("shift %.1f: unmatched share %.4f did not grow (before %.4f)", shift, share, prev)
		} else {
			prev = share
		}
		for _, s := range m.Sets {
			if s.Distance > m.CaliperWidth {
				t.Fatalf("a set beyond the caliper: %g > %g", s.Distance, m.CaliperWidth)
			}
		}
		f := m.Findings()
		if len(f) != 1 || f[0].Arm != "treated" || f[0].Units != m.UnmatchedTreated || len(f[0].Who) == 0 || f[0].Who[0].Term != "x1" || f[0].Who[0].SMD >= 0 {
			t.Errorf("finding %+v: want the treated, who have lower x1", f)
		}
	}
}

// TestCaliperFalseAlarmsAndPower is the simulation behind using unmatched
// units as a positivity finding: more than 5% of the treated unmatched at a
// caliper of 0.2 SD (the verdict's MaxShareOutside) counts as an alarm.
// Randomised designs (scenario.RandomisedSimple, n = 2000): alarms must be
// rare; a built-in violation (OverlapBoxes, shift 0.3, n = 2000: 30% of the
// treated have no control): the alarm must fire.
func TestCaliperFalseAlarmsAndPower(t *testing.T) {
	const reps = 20
	alarm := func(sc *causal.Scores) bool {
		m := sc.Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
		if err := m.Err(); err != nil {
			t.Fatal(err)
		}
		return float64(m.UnmatchedTreated)/float64(m.TargetTreated) > 0.05
	}
	falseAlarms, hits := 0, 0
	for r := 0; r < reps; r++ {
		d, err := scenario.RandomisedSimple(uint64(100+r), 2000, 1)
		if err != nil {
			t.Fatal(err)
		}
		sc := causal.FromSource(scenarioFrame(t, d)).Treat("t").Outcome("y").Adjust("x1", "x2", "x3").Propensity()
		if alarm(sc) {
			falseAlarms++
		}
		if alarm(boxesScores(t, uint64(200+r), 2000, 0.3)) {
			hits++
		}
	}
	t.Logf("unmatched treated > 5%% at caliper 0.2 SD: %d of %d randomised designs (false alarms), %d of %d designs with 30%% of the treated without controls (power)", falseAlarms, reps, hits, reps)
	if falseAlarms > 1 {
		t.Errorf("%d false alarms in %d randomised designs", falseAlarms, reps)
	}
	if hits < reps {
		t.Errorf("power %d of %d", hits, reps)
	}
}

// TestWithoutReplacementControlsRunOut: 300 treated and 100 controls on the
// same covariate distribution. 1:1 without replacement can match 100
// treated; the other 200 must be reported unmatched (controls used up),
// each control used once, and with a caliper no set may exceed it.
func TestWithoutReplacementControlsRunOut(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 3))
	x := make([]float64, 400)
	tr := make([]float64, 400)
	for i := range x {
		x[i] = r.NormFloat64()
		if i < 300 {
			tr[i] = 1
		}
	}
	sc := causal.FromColumns([]string{"x", "t"}, map[string][]float64{"x": x, "t": tr}, nil).Treat("t").Adjust("x").Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	for _, caliper := range []float64{0, causal.AustinCaliper} {
		m := sc.Match(causal.MatchOptions{WithoutReplacement: true, Caliper: caliper})
		if err := m.Err(); err != nil {
			t.Fatal(err)
		}
		if m.UnmatchedTreated+m.MatchedTreated != 300 || m.UnmatchedTreated < 200 {
			t.Errorf("caliper %g: %d matched, %d unmatched treated", caliper, m.MatchedTreated, m.UnmatchedTreated)
		}
		if caliper == 0 && (m.MatchedTreated != 100 || m.Reasons[0].Code != "other_arm_used_up" || m.Reasons[0].Units != 200) {
			t.Errorf("no caliper: %d matched, reasons %+v", m.MatchedTreated, m.Reasons)
		}
		used := map[int]int{}
		for _, s := range m.Sets {
			if len(s.Matches) != 1 {
				t.Fatalf("set of %d", len(s.Matches))
			}
			used[s.Matches[0]]++
			if used[s.Matches[0]] > 1 {
				t.Fatalf("control %d used twice", s.Matches[0])
			}
			if s.Distance > m.CaliperWidth {
				t.Fatalf("caliper %g: a set at %g beyond the width %g", caliper, s.Distance, m.CaliperWidth)
			}
		}
		if !strings.Contains(m.String(), "greedy") || m.MaxReuse != 1 {
			t.Errorf("caliper %g: order not reported or reuse %d:\n%s", caliper, m.MaxReuse, m)
		}
	}
}

// TestExactMatchingStaysInCells: with exact matching on pool, every match
// has its unit's pool value (water-audit scenario).
func TestExactMatchingStaysInCells(t *testing.T) {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").Adjust("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
	sc := s.Propensity()
	m := sc.Match(causal.MatchOptions{Estimand: causal.ATE, Exact: []string{"pool"}, K: 2})
	if err := m.Err(); err != nil {
		t.Fatal(err)
	}
	d := sc.Design
	j := -1
	for k, tm := range d.Terms {
		if tm.Column == "pool" {
			j = k
		}
	}
	for _, set := range m.Sets {
		for _, q := range set.Matches {
			if d.X[set.Unit*d.P+j] != d.X[q*d.P+j] || d.T[q] == d.T[set.Unit] {
				t.Fatalf("unit %d matched across pool cells or within its arm", set.Unit)
			}
		}
	}
	if e := m.Effect(); e.Err() != nil || math.IsNaN(e.SE) {
		t.Errorf("effect %v", e)
	}
	if err := sc.Match(causal.MatchOptions{Exact: []string{"district"}}).Err(); err == nil || !strings.Contains(err.Error(), "district") {
		t.Errorf("exact on a column not adjusted for: %v", err)
	}
}

// TestMatchingPinnedScoresAndErrors: units scored exactly 1 by separation
// are never matched (reason score_0_or_1); bad options name the option.
func TestMatchingPinnedScoresAndErrors(t *testing.T) {
	sc := causal.Load("../testdata/reference/separation.csv").Treat("treat").Adjust("x1", "gate").Propensity()
	if !sc.Separated() {
		t.Fatal("expected separation")
	}
	m := sc.Match(causal.MatchOptions{})
	if err := m.Err(); err != nil {
		t.Fatal(err)
	}
	pinned := 0
	for i, e := range sc.E {
		if e == 1 && sc.Design.T[i] == 1 {
			pinned++
		}
	}
	if pinned == 0 || len(m.Reasons) == 0 || m.Reasons[0].Code != "score_0_or_1" || m.Reasons[0].Units != pinned {
		t.Errorf("%d pinned treated; reasons %+v", pinned, m.Reasons)
	}
	for _, c := range []struct {
		o    causal.MatchOptions
		want string
	}{
		{causal.MatchOptions{K: -1}, "K = -1"},
		{causal.MatchOptions{Caliper: -0.2}, "caliper"},
		{causal.MatchOptions{Estimand: causal.ATO}, "ATO"},
		{causal.MatchOptions{Exact: []string{"nope"}}, "nope"},
	} {
		if err := sc.Match(c.o).Err(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v", c.o, err)
		}
	}
	if e := sc.Match(causal.MatchOptions{}).Effect(); e.Err() == nil || !strings.Contains(e.Err().Error(), "outcome") {
		t.Errorf("no outcome: %v", e.Err())
	}
}

// TestSubclassificationEmptyArm: in OverlapBoxes with shift 0.6, 60% of
// each arm lies outside the other arm's range, so the strata at both ends of
// the score hold one arm only: every estimand needs an empty arm somewhere
// and is not supported, its estimate restricted to the other strata.
func TestSubclassificationEmptyArm(t *testing.T) {
	d, err := scenario.OverlapBoxes(5, 2000, 1, 0.6)
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, 2000)
	for i := range y {
		y[i] = d.Num["x1"][i] + d.Num["t"][i]
	}
	sc := causal.FromColumns([]string{"x1", "t", "y"}, map[string][]float64{"x1": d.Num["x1"], "t": d.Num["t"], "y": y}, nil).
		Treat("t").Outcome("y").Adjust("x1").Propensity()
	st := sc.Subclassify(5)
	if err := st.Err(); err != nil {
		t.Fatal(err)
	}
	var treatedOnly, controlOnly int
	for _, r := range st.Strata {
		switch r.EmptyArm() {
		case "control":
			treatedOnly++
		case "treated":
			controlOnly++
		}
	}
	if treatedOnly == 0 || controlOnly == 0 {
		t.Fatalf("strata %+v: with 60%% of each arm outside the other's range, expected strata with one arm", st.Strata)
	}
	for _, target := range []causal.Estimand{causal.ATE, causal.ATT, causal.ATC} {
		e := st.Effect(target)
		if e.Err() != nil {
			t.Fatal(e.Err())
		}
		if e.Supported || !e.HasFlag("restricted_population") || len(st.Violations(target)) == 0 {
			t.Errorf("%s: supported %v, flags %+v", target, e.Supported, e.Flags)
		}
	}
	if len(st.Violations(causal.ATT)) != treatedOnly || len(st.Violations(causal.ATC)) != controlOnly {
		t.Errorf("violations ATT %v ATC %v", st.Violations(causal.ATT), st.Violations(causal.ATC))
	}
	for _, target := range []causal.Estimand{causal.ATE, causal.ATT} {
		units := 0
		for _, j := range st.Violations(target) {
			units += st.Strata[j].Treated + st.Strata[j].Control
		}
		r := st.Remedy(target)
		if r.Action != "subclassify" || r.DropsTreated+r.DropsControl != units || len(r.Who) == 0 || !strings.Contains(r.Text, "left out") {
			t.Errorf("%s remedy %+v: want the %d units of the violating strata", target, r, units)
		}
	}
	if err := sc.Subclassify(1).Err(); err == nil || !strings.Contains(err.Error(), "1 strata") {
		t.Errorf("1 stratum: %v", err)
	}
}

// TestMatchingCoverageRandomised: the 95% intervals of 1:1 matching with
// replacement (Abadie–Imbens SE, ATT and ATE) and of subclassification
// (stratified variance, ATE) on 300 replicates of the covariates of
// scenario.RandomisedSimple (n = 1000, seeds 1..300; the effect is 2 for
// every unit).
//
//   - With an outcome unrelated to the covariates (y = 2t + N(0, 1), drawn
//     here with seed 9) the estimated score carries no information about y,
//     and the intervals must cover 2 in 91%–98.5% of the replicates (nominal
//     95%, Monte Carlo SD about 1.3%).
//   - With the scenario's own outcome (y depends on x1, x2, x3) the score
//     fitted in each sample captures its chance imbalance in the covariates,
//     so matching and stratifying on it adjust for that imbalance; the
//     standard errors, which take the score as known, are then conservative
//     (as Abadie & Imbens 2016 show for the ATE): coverage at least 93%.
func TestMatchingCoverageRandomised(t *testing.T) {
	const reps, n, ate = 300, 1000, 2.0
	noise := rand.New(rand.NewPCG(9, 9))
	for _, prognostic := range []bool{false, true} {
		cover := map[string]int{}
		sum := map[string]float64{}
		for r := 1; r <= reps; r++ {
			d, err := scenario.RandomisedSimple(uint64(r), n, ate)
			if err != nil {
				t.Fatal(err)
			}
			if !prognostic {
				y := make([]float64, n)
				for i := range y {
					y[i] = ate*d.Num["t"][i] + noise.NormFloat64()
				}
				d.Num["y"] = y
			}
			sc := causal.FromSource(scenarioFrame(t, d)).Treat("t").Outcome("y").Adjust("x1", "x2", "x3").Propensity()
			for name, e := range map[string]*causal.Effect{
				"matching ATT":          sc.Effect(causal.NearestNeighbourMatching, causal.ATT),
				"matching ATE":          sc.Effect(causal.NearestNeighbourMatching, causal.ATE),
				"subclassification ATE": sc.Effect(causal.Subclassification, causal.ATE),
			} {
				if e.Err() != nil {
					t.Fatal(e.Err())
				}
				if e.CI95.Lo <= ate && ate <= e.CI95.Hi {
					cover[name]++
				}
				sum[name] += e.Value
			}
		}
		if len(cover) != 3 {
			t.Errorf("coverage counted for %d estimators", len(cover))
		}
		for name, k := range cover {
			c := float64(k) / reps
			t.Logf("prognostic covariates %v, %s: 95%% CI coverage %.1f%% over %d replicates; mean estimate %.4f (true %g)", prognostic, name, 100*c, reps, sum[name]/reps, ate)
			if lo, hi := 0.91, 0.985; !prognostic && (c < lo || c > hi) {
				t.Errorf("%s: coverage %.3f outside [%g, %g]", name, c, lo, hi)
			}
			if prognostic && c < 0.93 {
				t.Errorf("%s: coverage %.3f below 0.93", name, c)
			}
			if math.Abs(sum[name]/reps-ate) > 0.05 {
				t.Errorf("%s: mean estimate %.4f, true %g", name, sum[name]/reps, ate)
			}
		}
	}
}
