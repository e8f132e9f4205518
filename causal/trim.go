package causal

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
)

// TrimRule says which units to keep by their propensity scores. Build one
// with Symmetric, CrumpOptimal or Percentile.
type TrimRule struct {
	kind   string // "symmetric", "crump", "percentile"
	alpha  float64
	lo, hi float64
}

// Symmetric keeps the units with scores in [α, 1 − α], 0 ≤ α < 0.5.
// α = 0.1 is the rule of thumb of Crump, Hotz, Imbens & Mitnik (2009).
func Symmetric(alpha float64) TrimRule { return TrimRule{kind: "symmetric", alpha: alpha} }

// CrumpOptimal keeps the units with scores in [α, 1 − α] for the α of
// Crump, Hotz, Imbens & Mitnik (2009), computed from the estimated scores:
// with γ(x) = 1/(e(x)(1 − e(x))), no trimming (α = 0) if max γ ≤ 2·mean γ;
// otherwise the kept set {γ ≤ c} minimises the asymptotic variance of the
// efficient ATE estimator under homoscedasticity, proportional to
// E[γ·1(γ ≤ c)] / P(γ ≤ c)², whose first-order condition is their
// c = 2·E[γ | γ ≤ c]; α = 1/2 − √(1/4 − 1/c).
func CrumpOptimal() TrimRule { return TrimRule{kind: "crump"} }

// Percentile keeps units whose score is at least the lo-th percentile of
// the treated units' scores and at most the hi-th percentile of the
// controls' scores (0 ≤ lo < hi ≤ 100; e.g. Percentile(1, 99) or
// Percentile(5, 95)): it drops the units treated contrary to prediction at
// both tails (Stürmer, Rothman, Avorn & Glynn 2010). Percentiles
// interpolate linearly between order statistics (Hyndman & Fan 1996,
// definition 7).
func Percentile(lo, hi float64) TrimRule { return TrimRule{kind: "percentile", lo: lo, hi: hi} }

// String describes the rule.
func (r TrimRule) String() string {
	switch r.kind {
	case "symmetric":
		return fmt.Sprintf("symmetric trimming at α = %g (keep scores in [%g, %g])", r.alpha, r.alpha, 1-r.alpha)
	case "crump":
		return "optimal symmetric trimming (Crump, Hotz, Imbens & Mitnik 2009)"
	case "percentile":
		return fmt.Sprintf("percentile trimming (Stürmer et al. 2010): keep scores from the %gth percentile of the treated to the %gth percentile of the controls", r.lo, r.hi)
	}
	return "no trimming rule (use causal.Symmetric, causal.CrumpOptimal or causal.Percentile)"
}

func (r TrimRule) check() error {
	switch r.kind {
	case "symmetric":
		if math.IsNaN(r.alpha) || r.alpha < 0 || r.alpha >= 0.5 {
			return fmt.Errorf("trim: α = %g must be in [0, 0.5): it keeps scores in [α, 1 − α]", r.alpha)
		}
	case "crump":
	case "percentile":
		if math.IsNaN(r.lo) || math.IsNaN(r.hi) || r.lo < 0 || r.hi > 100 || r.lo >= r.hi {
			return fmt.Errorf("trim: percentiles (%g, %g) must satisfy 0 <= lo < hi <= 100, e.g. Percentile(5, 95)", r.lo, r.hi)
		}
	default:
		return errors.New("trim: no rule given: use causal.Symmetric(0.1), causal.CrumpOptimal() or causal.Percentile(5, 95)")
	}
	return nil
}

// crumpAlpha returns the optimal α of Crump et al. (2009) for the scores
// (0 when no trimming is advised) and the threshold c on γ = 1/(e(1−e)).
func crumpAlpha(e []float64) (alpha, c float64) {
	n := len(e)
	g := make([]float64, n)
	var sum, maxG float64
	for i, v := range e {
		g[i] = 1 / (v * (1 - v)) // +Inf at scores of exactly 0 or 1
		sum += g[i]
		maxG = math.Max(maxG, g[i])
	}
	if !math.IsInf(sum, 0) && maxG <= 2*sum/float64(n) {
		return 0, math.Inf(1)
	}
	sort.Float64s(g)
	// Minimise V_k = (Σ_{i≤k} γ_(i)) / k² over k (the empirical form of
	// E[γ 1(γ≤c)]/P(γ≤c)²); ties in γ are kept together.
	best, bestV := 0, math.Inf(1)
	var s float64
	for k := 1; k <= n; k++ {
		s += g[k-1]
		if math.IsInf(s, 0) {
			break
		}
		if k < n && g[k] == g[k-1] {
			continue
		}
		v := s / (float64(k) * float64(k))
		if v < bestV {
			best, bestV = k, v
		}
	}
	if best == 0 {
		return 0.5, 4 // nothing finite: everything is trimmed
	}
	if best == n {
		return 0, math.Inf(1)
	}
	// The root of c = 2·mean(γ | γ ≤ c) in [γ_(k), γ_(k+1)); the kept set is
	// the same anywhere in that interval.
	s = 0
	for _, v := range g[:best] {
		s += v
	}
	c = 2 * s / float64(best)
	if c < g[best-1] || c >= g[best] {
		c = g[best-1] * (1 + 1e-9) // just above the last unit kept
	}
	alpha = 0.5 - math.Sqrt(0.25-1/c)
	return alpha, c
}

// Trimmed is the result of trimming by propensity scores: which units were
// kept, who was dropped, and the kept units with their propensity model
// refitted.
//
// The estimand changes with trimming: effects estimated on a Trimmed value
// are averages over the kept units (the population whose scores lie in
// Keep), not over the original population. Every Effect from Trimmed.Effect
// says so (flag trimmed_population).
//
// Scores are refitted on the kept units (same covariates and options; terms
// that became constant among them are left out and listed in DroppedTerms),
// so that the refitted model is the maximum-likelihood fit on the sample the
// estimators use — the stacked-equation standard errors and the exact
// balance of overlap weights rely on that. The standard errors treat the
// trimmed sample as given (as Crump et al. 2009 do); the selection by
// estimated scores is not propagated. With nothing to drop, Scores is the
// original.
type Trimmed struct {
	Rule  TrimRule
	Alpha float64  // the α applied by Symmetric and CrumpOptimal; NaN for Percentile
	Keep  Interval // scores kept: Keep.Lo ≤ e ≤ Keep.Hi
	// Kept marks the kept rows of the original design.
	Kept                           []bool
	KeptTreated, KeptControl       int
	DroppedTreated, DroppedControl int
	// Profile compares the dropped units (MeanOutside) with the kept ones
	// (MeanInside) on every design term; nil when nothing or everything
	// was dropped.
	Profile      []ProfileRow
	DroppedTerms []string
	Original     *Scores
	Design       *Design // the kept units
	Scores       *Scores // refitted on the kept units
	// Population states the new target population.
	Population string
	err        error
}

// Err returns why trimming failed, or nil.
func (t *Trimmed) Err() error {
	if t == nil {
		return errors.New("nil Trimmed")
	}
	if t.err == nil && (t.Original == nil || t.Scores == nil || t.Design == nil) {
		return errors.New("trimming not computed: use Scores.Trim(rule)")
	}
	return t.err
}

// Trim drops the units whose scores fall outside the rule's range and
// refits the propensity model on the rest. It is an error when every unit,
// or every unit of one arm, would be dropped.
func (sc *Scores) Trim(rule TrimRule) *Trimmed {
	tr := &Trimmed{Rule: rule, Alpha: math.NaN(), Original: sc}
	if err := sc.Err(); err != nil {
		tr.err = err
		return tr
	}
	if err := rule.check(); err != nil {
		tr.err = err
		return tr
	}
	d := sc.Design
	switch rule.kind {
	case "symmetric":
		tr.Alpha = rule.alpha
		tr.Keep = Interval{rule.alpha, 1 - rule.alpha}
	case "crump":
		a, _ := crumpAlpha(sc.E)
		tr.Alpha = a
		tr.Keep = Interval{a, 1 - a}
	case "percentile":
		var e1, e0 []float64
		for i, e := range sc.E {
			if d.T[i] == 1 {
				e1 = append(e1, e)
			} else {
				e0 = append(e0, e)
			}
		}
		sort.Float64s(e1)
		sort.Float64s(e0)
		tr.Keep = Interval{quantileSorted(e1, rule.lo/100), quantileSorted(e0, rule.hi/100)}
	}
	tr.Kept = make([]bool, d.N)
	var rows []int
	for i, e := range sc.E {
		keep := e >= tr.Keep.Lo && e <= tr.Keep.Hi
		if tr.Alpha == 0 {
			keep = true // α = 0 keeps every unit, scores of exactly 0 or 1 included
		}
		tr.Kept[i] = keep
		if keep {
			rows = append(rows, i)
			if d.T[i] == 1 {
				tr.KeptTreated++
			} else {
				tr.KeptControl++
			}
		} else if d.T[i] == 1 {
			tr.DroppedTreated++
		} else {
			tr.DroppedControl++
		}
	}
	where := fmt.Sprintf("scores in [%.4g, %.4g]", tr.Keep.Lo, tr.Keep.Hi)
	if len(rows) == 0 {
		tr.err = fmt.Errorf("trim: %s drops every unit (%d treated, %d control): no unit has %s; use a smaller α or overlap weights (ATO)", rule, d.Treated, d.Control, where)
		return tr
	}
	if tr.KeptTreated == 0 || tr.KeptControl == 0 {
		arm := "treated"
		if tr.KeptControl == 0 {
			arm = "control"
		}
		tr.err = fmt.Errorf("trim: %s drops every %s unit (%d treated and %d controls kept): there is nothing to compare; use a smaller α or overlap weights (ATO)", rule, arm, tr.KeptTreated, tr.KeptControl)
		return tr
	}
	if tr.DroppedTreated+tr.DroppedControl == 0 {
		tr.Design, tr.Scores = d, sc
		tr.Population = fmt.Sprintf("no unit dropped: the population is unchanged (all %d units have %s)", d.N, where)
		return tr
	}
	tr.Profile = profile(d, invert(tr.Kept))
	sub, ks, dropped := sc.keptPopulation(rows)
	tr.DroppedTerms = dropped
	tr.Design = sub
	tr.Scores = ks
	if !math.IsNaN(tr.Alpha) && tr.Alpha > 0 {
		tr.Scores.trimAlpha = tr.Alpha
	}
	if err := tr.Scores.Err(); err != nil {
		tr.err = fmt.Errorf("trim: refitting the propensity model on the %d kept units: %w", sub.N, err)
		return tr
	}
	tr.Population = fmt.Sprintf("the estimand has changed: effects now refer to the %d units (%d treated, %d control) with %s, not to the original %d units; %d treated and %d controls were dropped",
		sub.N, tr.KeptTreated, tr.KeptControl, where, d.N, tr.DroppedTreated, tr.DroppedControl)
	return tr
}

// keptPopulation is the population of the design rows kept (a remedy's
// units): a design of its own with the propensity model refitted on it for
// estimation, judged by the scores that defined it (the original scores of
// the kept units), so that the refit cannot re-trigger the rule that chose
// the units. It returns the names of terms that no longer vary.
func (sc *Scores) keptPopulation(rows []int) (*Design, *Scores, []string) {
	d := sc.Design
	sub, kc, _ := subDesign(d, rows, nil)
	sub.parent = nil // a design of its own (propensityFor indexes it from 0)
	sub.RowsDropped = d.RowsDropped
	if d.Y != nil {
		sub.Y = make([]float64, sub.N)
		for r, k := range rows {
			sub.Y[r] = d.Y[k]
		}
	}
	var dropped []string
	for _, j := range kcDropped(d, kc) {
		dropped = append(dropped, d.Terms[j].Name)
	}
	ks := propensityFor(sub, sc.opts)
	ks.defE = make([]float64, 0, len(rows))
	for _, k := range rows {
		ks.defE = append(ks.defE, sc.judgedScores()[k])
	}
	return sub, ks, dropped
}

func invert(b []bool) []bool {
	out := make([]bool, len(b))
	for i, v := range b {
		out[i] = !v
	}
	return out
}

// Effect estimates on the kept units (see Scores.Effect); the effect's
// population and a trimmed_population flag say that the estimand changed.
func (t *Trimmed) Effect(est Estimator, target Estimand, cells ...*Cells) *Effect {
	if err := t.Err(); err != nil {
		return &Effect{Estimator: est, Estimand: target, err: err, Value: math.NaN(), SE: math.NaN(),
			CI95: Interval{math.NaN(), math.NaN()}, Mu1: math.NaN(), Mu0: math.NaN()}
	}
	e := t.Scores.Effect(est, target, cells...)
	t.mark(e)
	return e
}

func (t *Trimmed) mark(e *Effect) {
	if t.DroppedTreated+t.DroppedControl == 0 {
		return
	}
	where := fmt.Sprintf("scores in [%.4g, %.4g]", t.Keep.Lo, t.Keep.Hi)
	switch e.Estimand {
	case ATT:
		e.Population = fmt.Sprintf("the %d kept treated units (%s)", t.KeptTreated, where)
	case ATC:
		e.Population = fmt.Sprintf("the %d kept control units (%s)", t.KeptControl, where)
	case ATO:
		e.Population = fmt.Sprintf("the overlap population of the %d kept units (%s)", t.KeptTreated+t.KeptControl, where)
	default:
		e.Population = fmt.Sprintf("the %d kept units (%s)", t.KeptTreated+t.KeptControl, where)
	}
	e.flag("trimmed_population", t.Population)
}

// Effects estimates with every estimator that targets the estimand, on the
// kept units.
func (t *Trimmed) Effects(target Estimand, cells ...*Cells) *Estimates {
	if err := t.Err(); err != nil {
		return &Estimates{Estimand: target, err: err}
	}
	es := t.Scores.Effects(target, cells...)
	for _, e := range es.Items {
		t.mark(e)
	}
	return es
}

// Bootstrap runs the bootstrap on the kept units (see Scores.Bootstrap). The
// kept sample is taken as given, as in Crump et al. (2009): the trimming is
// not redone in each replicate.
func (t *Trimmed) Bootstrap(ctx context.Context, est Estimator, target Estimand, o BootstrapOptions) *Bootstrap {
	if err := t.Err(); err != nil {
		nan := math.NaN()
		return &Bootstrap{Estimator: est, Estimand: target, err: err, Estimate: nan, SE: nan, Bias: nan, Percentile: Interval{nan, nan}, Normal: Interval{nan, nan}}
	}
	bs := t.Scores.Bootstrap(ctx, est, target, o)
	if t.DroppedTreated+t.DroppedControl > 0 {
		e := &Effect{Estimand: target}
		t.mark(e)
		bs.Population = e.Population
		bs.Notes = append(bs.Notes, t.Population+"; the kept sample is taken as given (trimming is not redone per replicate)")
	}
	return bs
}

// Weights are the estimand's weights on the kept units.
func (t *Trimmed) Weights(target Estimand) *Weights {
	if err := t.Err(); err != nil {
		return &Weights{err: err}
	}
	return t.Scores.Weights(target)
}

// Balance is the covariate balance among the kept units (unweighted).
func (t *Trimmed) Balance() *BalanceSheet {
	if err := t.Err(); err != nil {
		return &BalanceSheet{err: err}
	}
	return balanceFor(t.Design, nil, "")
}

// String is the terminal view.
func (t *Trimmed) String() string {
	if err := t.Err(); err != nil {
		return "trimmed: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Trimming: %s\n", t.Rule)
	if !math.IsNaN(t.Alpha) && t.Rule.kind == "crump" {
		fmt.Fprintf(&b, "  optimal α = %.4f\n", t.Alpha)
	}
	fmt.Fprintf(&b, "  kept scores in [%.4f, %.4f]\n", t.Keep.Lo, t.Keep.Hi)
	fmt.Fprintf(&b, "  dropped: %d treated, %d control; kept: %d treated, %d control\n", t.DroppedTreated, t.DroppedControl, t.KeptTreated, t.KeptControl)
	if len(t.Profile) > 0 {
		fmt.Fprintf(&b, "  dropped vs kept units (largest differences):\n")
		for _, r := range topProfile(t.Profile, 5) {
			fmt.Fprintf(&b, "    %-24s dropped %10.4g  kept %10.4g  SMD %+.2f\n", r.Term, r.MeanOutside, r.MeanInside, r.SMD)
		}
	}
	if len(t.DroppedTerms) > 0 {
		fmt.Fprintf(&b, "  constant among the kept units, left out of the refit: %s\n", strings.Join(t.DroppedTerms, ", "))
	}
	fmt.Fprintf(&b, "  %s\n", t.Population)
	return b.String()
}

// MarshalJSON is the pipeline view.
func (t *Trimmed) MarshalJSON() ([]byte, error) {
	if err := t.Err(); err != nil {
		return failedJSON(err)
	}
	type arm struct {
		Treated int `json:"treated"`
		Control int `json:"control"`
	}
	prof := append([]ProfileRow{}, t.Profile...)
	for i := range prof {
		if Num(prof[i].SMD).IsNull() {
			prof[i].SMD = 0
		}
	}
	return json.Marshal(struct {
		Rule         string       `json:"rule"`
		Alpha        Num          `json:"alpha"`
		Keep         Interval     `json:"keep"`
		Dropped      arm          `json:"dropped"`
		Kept         arm          `json:"kept"`
		Profile      []ProfileRow `json:"profile_dropped"`
		DroppedTerms []string     `json:"terms_left_out"`
		Population   string       `json:"population"`
		Refitted     bool         `json:"refitted"`
	}{t.Rule.String(), Num(t.Alpha), t.Keep, arm{t.DroppedTreated, t.DroppedControl}, arm{t.KeptTreated, t.KeptControl},
		prof, append([]string{}, t.DroppedTerms...), t.Population, t.Scores != t.Original})
}
