package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/floats"
)

// Estimand is the population whose average treatment effect is estimated.
// The zero value is not an estimand (it gives an error wherever one is needed).
type Estimand int

const (
	// ATE is the average treatment effect over all units, E[Y(1) − Y(0)].
	ATE Estimand = iota + 1
	// ATT is the average effect on the treated, E[Y(1) − Y(0) | T = 1].
	ATT
	// ATC is the average effect on the controls, E[Y(1) − Y(0) | T = 0].
	ATC
	// ATO is the average effect in the overlap population, the units
	// weighted by e(x)(1 − e(x)): E[e(1−e)(Y(1) − Y(0))] / E[e(1−e)]
	// (Li, Morgan & Zaslavsky 2018). It concentrates on units that could
	// plausibly have been in either arm.
	ATO
)

var estimandNames = map[Estimand]string{ATE: "ATE", ATT: "ATT", ATC: "ATC", ATO: "ATO"}

// String is "ATE", "ATT", "ATC" or "ATO".
func (e Estimand) String() string {
	if s, ok := estimandNames[e]; ok {
		return s
	}
	return fmt.Sprintf("Estimand(%d)", int(e))
}

// MarshalJSON writes the name ("ATE", …).
func (e Estimand) MarshalJSON() ([]byte, error) { return json.Marshal(e.String()) }

func (e Estimand) valid() bool { _, ok := estimandNames[e]; return ok }

// population describes the target population in words.
func (e Estimand) population() string {
	switch e {
	case ATE:
		return "all units"
	case ATT:
		return "the treated units"
	case ATC:
		return "the control units"
	case ATO:
		return "the overlap population (units weighted by e(1 − e))"
	}
	return "?"
}

// ParseEstimand reads "ATE", "ATT", "ATC" or "ATO" (any case).
func ParseEstimand(s string) (Estimand, error) {
	for e, name := range estimandNames {
		if strings.EqualFold(strings.TrimSpace(s), name) {
			return e, nil
		}
	}
	return 0, fmt.Errorf("unknown estimand %s: use ATE, ATT, ATC or ATO", quoteValue(s))
}

func checkEstimand(e Estimand) error {
	if !e.valid() {
		return fmt.Errorf("estimand %v is not set or unknown: use causal.ATE, causal.ATT, causal.ATC or causal.ATO", e)
	}
	return nil
}

// Weights are per-unit weights that make each arm resemble a target
// population, with their effective sample sizes. For the propensity score
// e = e(x) and treatment T (1 treated, 0 control):
//
//	ATE  w = T/e + (1−T)/(1−e)                  (inverse probability; Horvitz & Thompson 1952)
//	ATT  w = T + (1−T)·e/(1−e)                  (treated as they are, controls by their odds)
//	ATC  w = T·(1−e)/e + (1−T)
//	ATO  w = T·(1−e) + (1−T)·e                  (overlap weights; Li, Morgan & Zaslavsky 2018)
//
// The effective sample size of an arm is Kish's (Σw)²/Σw² (Kish 1965): the
// number of equally weighted units that would give the weighted mean the
// same variance.
//
// Build with Scores.Weights (or Scores.WithWeights for weights from
// elsewhere); Truncate caps them at percentiles; Balance checks covariate
// balance before and after.
type Weights struct {
	Scores   *Scores
	Estimand Estimand // 0 for weights given with WithWeights
	Label    string   // e.g. "ATE weights"
	// W holds one weight per used row (design order).
	W []float64
	// Per arm: number of units, sum of weights, largest weight, Kish ESS.
	Treated, Control       int
	SumTreated, SumControl float64
	MaxTreated, MaxControl float64
	ESSTreated, ESSControl float64
	// Zero counts units whose weight is exactly 0 (they drop out of every
	// weighted statistic): e.g. ATT weights of controls scored exactly 0,
	// or overlap weights of units whose score is pinned at 0 or 1.
	Zero int
	// Truncation is set when the weights were truncated.
	Truncation *Truncation
	err        error
}

// Truncation records how weights were truncated (Weights.Truncate,
// Weights.TruncateWithinArms).
type Truncation struct {
	// Percentiles (0–100) used as floor and cap: of the pooled stabilised
	// weights when Pooled, else of each arm's weights.
	LoPercentile, HiPercentile float64
	Pooled                     bool
	// Stabilised holds the pooled percentiles of the stabilised weights
	// (when Pooled).
	Stabilised Interval
	// Bounds applied per arm, on the weights' own scale.
	Treated, Control Interval
	// Changed counts the weights moved to a bound.
	Changed int
}

// Err returns why the weights could not be computed, or nil.
func (w *Weights) Err() error {
	if w == nil {
		return errors.New("nil Weights")
	}
	if w.err == nil && (w.Scores == nil || w.Scores.Design == nil) {
		return errors.New("weights not computed: use Scores.Weights(estimand)")
	}
	return w.err
}

// rawWeight is the weight of one unit with score e and treatment t.
func rawWeight(target Estimand, t, e float64) float64 {
	switch target {
	case ATE:
		if t == 1 {
			return 1 / e
		}
		return 1 / (1 - e)
	case ATT:
		if t == 1 {
			return 1
		}
		return e / (1 - e)
	case ATC:
		if t == 1 {
			return (1 - e) / e
		}
		return 1
	case ATO:
		if t == 1 {
			return 1 - e
		}
		return e
	}
	return math.NaN()
}

func weightLabel(target Estimand) string {
	if target == ATO {
		return "overlap weights (ATO)"
	}
	return target.String() + " weights"
}

// Weights computes the weights for an estimand from the propensity scores.
// Units whose weight would be infinite (a treated unit scored exactly 0 for
// the ATE or ATC, a control scored exactly 1 for the ATE or ATT) make an
// error that names them: positivity fails there, and no weighting can
// represent them; use ATO or trim.
func (sc *Scores) Weights(target Estimand) *Weights {
	if err := sc.Err(); err != nil {
		return &Weights{err: err}
	}
	if err := checkEstimand(target); err != nil {
		return &Weights{err: err}
	}
	d := sc.Design
	w := make([]float64, d.N)
	var bad []int
	for i, e := range sc.E {
		w[i] = rawWeight(target, d.T[i], e)
		if math.IsInf(w[i], 0) || math.IsNaN(w[i]) {
			bad = append(bad, i)
		}
	}
	if len(bad) > 0 {
		return &Weights{err: infiniteWeightsError(d, sc.E, bad, target.String()+" weights")}
	}
	out := &Weights{Scores: sc, Estimand: target, Label: weightLabel(target), W: w}
	out.summarise()
	return out
}

func infiniteWeightsError(d *Design, e []float64, bad []int, what string) error {
	var shown []string
	for k, i := range bad {
		if k == 5 {
			shown = append(shown, "…")
			break
		}
		arm := "control"
		if d.T[i] == 1 {
			arm = "treated"
		}
		shown = append(shown, fmt.Sprintf("row %d (%s, score %g)", d.Rows[i]+1, arm, e[i]))
	}
	return fmt.Errorf("%s: %d unit%s scored exactly 0 (treated) or 1 (control) would get an infinite weight: %s. Positivity fails there; estimate the ATO (overlap weights), or trim (Scores.Trim)",
		what, len(bad), plural(len(bad), "", "s"), strings.Join(shown, ", "))
}

// WithWeights wraps weights computed elsewhere (one per used row, in design
// order) so that their effective sample sizes and balance can be checked.
// Weights must be finite and non-negative; a zero weight drops the unit (the
// count is reported in Zero); each arm needs a positive total.
func (sc *Scores) WithWeights(w []float64, label string) *Weights {
	if err := sc.Err(); err != nil {
		return &Weights{err: err}
	}
	d := sc.Design
	if len(w) != d.N {
		return &Weights{err: fmt.Errorf("weights: %d values given for %d rows in use; give one weight per used row (design order)", len(w), d.N)}
	}
	for i, v := range w {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return &Weights{err: fmt.Errorf("weights: the weight of row %d is %g: weights must be finite numbers", d.Rows[i]+1, v)}
		}
		if v < 0 {
			return &Weights{err: fmt.Errorf("weights: the weight of row %d is negative (%g): weights must be non-negative; a negative weight has no meaning as a share of a population", d.Rows[i]+1, v)}
		}
	}
	if label == "" {
		label = "custom weights"
	}
	out := &Weights{Scores: sc, Label: label, W: append([]float64(nil), w...)}
	out.summarise()
	if out.SumTreated == 0 || out.SumControl == 0 {
		arm := "treated"
		if out.SumControl == 0 {
			arm = "control"
		}
		return &Weights{err: fmt.Errorf("weights: every %s unit has weight 0: the %s arm would vanish; give that arm positive weights", arm, arm)}
	}
	return out
}

func (w *Weights) summarise() {
	d := w.Scores.Design
	var s2t, s2c float64
	w.Treated, w.Control = d.Treated, d.Control
	w.SumTreated, w.SumControl, w.MaxTreated, w.MaxControl, w.Zero = 0, 0, 0, 0, 0
	for i, v := range w.W {
		if v == 0 {
			w.Zero++
		}
		if d.T[i] == 1 {
			w.SumTreated += v
			s2t += v * v
			w.MaxTreated = math.Max(w.MaxTreated, v)
		} else {
			w.SumControl += v
			s2c += v * v
			w.MaxControl = math.Max(w.MaxControl, v)
		}
	}
	w.ESSTreated = kish(w.SumTreated, s2t)
	w.ESSControl = kish(w.SumControl, s2c)
}

// kish is (Σw)²/Σw² (Kish 1965); 0 for an arm with no weight.
func kish(sum, sum2 float64) float64 {
	if sum2 == 0 {
		return 0
	}
	return sum * sum / sum2
}

// Truncate returns a copy of the weights floored at the lo-th and capped at
// the hi-th percentile (0 ≤ lo < hi ≤ 100, e.g. Truncate(1, 99)) of the
// pooled distribution of the stabilised weights, as Cole & Hernán (2008, Am.
// J. Epidemiol. 168(6), 656–664) truncate stabilised weights at percentiles
// of their distribution over all units. Stabilising puts the arms on one
// scale: arm a's weights are divided by their mean m_a (over its positive
// weights), s = w/m_a; for ATE weights 1/e and 1/(1−e) this is the
// stabilised weight P̂(T=a)/P(T=a | x) with P̂(T=a) = n_a/Σ_a w, the Hájek
// estimate of the marginal share. With L and U the pooled percentiles of s,
// arm a's weights are moved into [L·m_a, U·m_a] (Truncation.Treated and
// .Control give these bounds on the weights' own scale, which the
// normalised estimators and the balance do not depend on). Percentiles
// interpolate linearly between order statistics (Hyndman & Fan 1996,
// definition 7, R's default). Truncating trades bias for variance: the
// weighted arms no longer represent the target population exactly. Zero
// weights stay zero and do not enter the percentiles: the floor never brings
// back a unit the estimand excludes. TruncateWithinArms is the per-arm
// alternative.
func (w *Weights) Truncate(lo, hi float64) *Weights { return w.truncate(lo, hi, true) }

// TruncateWithinArms floors and caps each arm's weights at the lo-th and
// hi-th percentiles of that arm's own weights (zero weights included in the
// percentiles, and kept at zero). It is not the convention of Cole & Hernán
// (2008), which Truncate follows; it guarantees that each arm has its own
// share of truncated weights (at most about lo% + hi% of each arm), whatever
// the arms' scales.
func (w *Weights) TruncateWithinArms(lo, hi float64) *Weights { return w.truncate(lo, hi, false) }

func (w *Weights) truncate(lo, hi float64, pooled bool) *Weights {
	if err := w.Err(); err != nil {
		return &Weights{err: err}
	}
	if math.IsNaN(lo) || math.IsNaN(hi) || lo < 0 || hi > 100 || lo >= hi {
		return &Weights{err: fmt.Errorf("truncate: percentiles (%g, %g) must satisfy 0 <= lo < hi <= 100, e.g. Truncate(1, 99)", lo, hi)}
	}
	d := w.Scores.Design
	var w1, w0 []float64
	for i, v := range w.W {
		if pooled && v == 0 {
			continue
		}
		if d.T[i] == 1 {
			w1 = append(w1, v)
		} else {
			w0 = append(w0, v)
		}
	}
	tr := &Truncation{LoPercentile: lo, HiPercentile: hi, Pooled: pooled}
	if pooled {
		m1, m0 := floats.Sum(w1)/float64(len(w1)), floats.Sum(w0)/float64(len(w0))
		s := make([]float64, 0, len(w1)+len(w0))
		for _, v := range w1 {
			s = append(s, v/m1)
		}
		for _, v := range w0 {
			s = append(s, v/m0)
		}
		sort.Float64s(s)
		l, u := quantileSorted(s, lo/100), quantileSorted(s, hi/100)
		tr.Stabilised = Interval{l, u}
		tr.Treated, tr.Control = Interval{l * m1, u * m1}, Interval{l * m0, u * m0}
		if len(w1) == 0 {
			tr.Treated = Interval{}
		}
		if len(w0) == 0 {
			tr.Control = Interval{}
		}
	} else {
		sort.Float64s(w1)
		sort.Float64s(w0)
		tr.Treated = Interval{quantileSorted(w1, lo/100), quantileSorted(w1, hi/100)}
		tr.Control = Interval{quantileSorted(w0, lo/100), quantileSorted(w0, hi/100)}
	}
	scope := "pooled percentiles"
	if !pooled {
		scope = "percentiles within arms"
	}
	out := &Weights{Scores: w.Scores, Estimand: w.Estimand, W: make([]float64, len(w.W)), Truncation: tr,
		Label: fmt.Sprintf("%s truncated at %s %g–%g", w.Label, scope, lo, hi)}
	for i, v := range w.W {
		b := tr.Control
		if d.T[i] == 1 {
			b = tr.Treated
		}
		nv := math.Min(math.Max(v, b.Lo), b.Hi)
		if v == 0 {
			nv = 0 // a unit the estimand excludes (e.g. a score pinned at 0 or 1) stays excluded
		}
		if nv != v {
			tr.Changed++
		}
		out.W[i] = nv
	}
	out.summarise()
	return out
}

// Description says how the weights were truncated, for the text and HTML views.
func (t *Truncation) Description() string {
	if t.Pooled {
		return fmt.Sprintf("truncated at the pooled percentiles %g and %g of the stabilised weights (Cole & Hernán 2008)", t.LoPercentile, t.HiPercentile)
	}
	return fmt.Sprintf("truncated within each arm at percentiles %g and %g", t.LoPercentile, t.HiPercentile)
}

// quantileSorted is the type-7 quantile (linear interpolation between order
// statistics; Hyndman & Fan 1996) of sorted x at probability p in [0, 1].
func quantileSorted(x []float64, p float64) float64 {
	n := len(x)
	if n == 0 {
		return math.NaN()
	}
	h := p * float64(n-1)
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return x[n-1]
	}
	if lo < 0 {
		return x[0]
	}
	return x[lo] + (h-float64(lo))*(x[lo+1]-x[lo])
}

// Balance is the covariate balance before and after these weights.
func (w *Weights) Balance() *BalanceSheet {
	if err := w.Err(); err != nil {
		return &BalanceSheet{err: err}
	}
	return balanceFor(w.Scores.Design, w.W, w.Label)
}

// String is the terminal view.
func (w *Weights) String() string {
	if err := w.Err(); err != nil {
		return "weights: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%s, n = %d\n", w.Label, w.Treated+w.Control)
	fmt.Fprintf(&b, "  %-8s %7s %12s %12s %12s\n", "arm", "n", "sum of w", "largest w", "ESS (Kish)")
	fmt.Fprintf(&b, "  %-8s %7d %12.4g %12.4g %12.1f\n", "treated", w.Treated, w.SumTreated, w.MaxTreated, w.ESSTreated)
	fmt.Fprintf(&b, "  %-8s %7d %12.4g %12.4g %12.1f\n", "control", w.Control, w.SumControl, w.MaxControl, w.ESSControl)
	if w.Zero > 0 {
		fmt.Fprintf(&b, "  %d unit%s weight 0 and drop%s out\n", w.Zero, plural(w.Zero, " has", "s have"), plural(w.Zero, "s", ""))
	}
	if t := w.Truncation; t != nil {
		fmt.Fprintf(&b, "  %s: %d weight%s moved (treated [%.4g, %.4g], control [%.4g, %.4g])\n",
			t.Description(), t.Changed, plural(t.Changed, "", "s"), t.Treated.Lo, t.Treated.Hi, t.Control.Lo, t.Control.Hi)
	}
	return b.String()
}

// MarshalJSON is the pipeline view: summaries per arm (not the per-unit
// weights, so the size stays bounded).
func (w *Weights) MarshalJSON() ([]byte, error) {
	if err := w.Err(); err != nil {
		return failedJSON(err)
	}
	type arm struct {
		N   int `json:"n"`
		Sum Num `json:"sum"`
		Max Num `json:"max"`
		ESS Num `json:"ess"`
	}
	type trunc struct {
		Lo      float64  `json:"lo_percentile"`
		Hi      float64  `json:"hi_percentile"`
		Treated Interval `json:"treated_bounds"`
		Control Interval `json:"control_bounds"`
		Changed int      `json:"changed"`
		Scope   string   `json:"scope"`
	}
	out := struct {
		Estimand   string `json:"estimand,omitempty"`
		Label      string `json:"label"`
		Treated    arm    `json:"treated"`
		Control    arm    `json:"control"`
		Zero       int    `json:"zero_weights"`
		Truncation *trunc `json:"truncation,omitempty"`
	}{Label: w.Label, Zero: w.Zero,
		Treated: arm{w.Treated, Num(w.SumTreated), Num(w.MaxTreated), Num(w.ESSTreated)},
		Control: arm{w.Control, Num(w.SumControl), Num(w.MaxControl), Num(w.ESSControl)}}
	if w.Estimand.valid() {
		out.Estimand = w.Estimand.String()
	}
	if t := w.Truncation; t != nil {
		scope := "within_arms"
		if t.Pooled {
			scope = "pooled_stabilised"
		}
		out.Truncation = &trunc{t.LoPercentile, t.HiPercentile, t.Treated, t.Control, t.Changed, scope}
	}
	return json.Marshal(out)
}
