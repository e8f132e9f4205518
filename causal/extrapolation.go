package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
)

// Sizes of the extrapolation curve data (bounded whatever n is).
const (
	// CurvePoints is the number of grid points of each fitted line.
	CurvePoints = 101
	// MaxCurvePoints caps the observed points shown per arm (a deterministic
	// subsample: every k-th unit of the arm in row order).
	MaxCurvePoints = 400
	// CurveBins is the number of bins along the covariate for the binned
	// means and the unsupported regions.
	CurveBins = 40
)

// LeverageRule names the leverage test of the extrapolation audit in its
// text and JSON views (see ExtrapolationAudit).
const LeverageRule = "leverage above the largest of the fitting arm (max h_ii): outside the ellipsoid that contains the regressor variable hull (Montgomery, Peck & Vining)"

// ExtrapolationAudit shows how much of a regression-adjusted estimate rests
// on extrapolation. Regression adjustment predicts f1 (fitted on the treated)
// for the controls in the target population and f0 (fitted on the controls)
// for the treated units. A prediction is unsupported when the unit lies
// outside the data the model was fitted on:
//
//   - outside the range of the fitting arm on some design term (a level the
//     arm does not have counts as outside), or
//   - with leverage h = x'(X_a'X_a)⁻¹x above h_max, the largest leverage
//     h_ii of the arm's own units (the hat-matrix diagonal; Hoaglin &
//     Welsch 1978). This is the check for hidden extrapolation against the
//     regressor variable hull (RVH), the convex hull of the fitting units'
//     design rows, described by Montgomery, Peck & Vining (Introduction to
//     Linear Regression Analysis, Wiley; the section on hidden extrapolation
//     in multiple regression — edition and section cited from memory): the
//     ellipsoid {x : x'(X'X)⁻¹x ≤ h_max} contains the RVH, so a point with
//     h > h_max lies outside the hull and its prediction is extrapolation.
//     The test is one-sided: h is convex in x, so no point of the hull
//     exceeds h_max (TestLeverageRuleHull), but a point outside the hull can
//     lie inside the ellipsoid and pass. With an intercept,
//     h = 1/n_a + d²/(n_a − 1), d the Mahalanobis distance from the arm's
//     mean: the point is farther from the arm's centre, in the metric of its
//     covariance, than any unit the model was fitted on. (King & Zeng 2006
//     test membership of the convex hull itself, which is exact but costly.)
//
// Models[0] audits f1, Models[1] f0. Restricted is the estimate over the
// target units whose counterfactual predictions are all supported: a
// different (smaller) population, said in its Population.
type ExtrapolationAudit struct {
	Estimand   Estimand
	Models     [2]ModelAudit
	Supported  []bool // per design row: a target unit whose predictions are supported
	TargetN    int
	SupportedN int
	Full       *Effect
	Restricted *Effect
	scores     *Scores
	m1, m0     *olsFit
	err        error
}

// ModelAudit is the audit of one arm's outcome model.
type ModelAudit struct {
	Model string // "f1" (fitted on the treated) or "f0" (fitted on the controls)
	Arm   string // the arm it was fitted on
	FitN  int
	// Predictions is the number of counterfactual predictions the model
	// makes for the target population (units of the other arm in it).
	Predictions  int
	OutsideRange int // of those, outside the arm's range on some term
	HighLeverage int // of those, with leverage above MaxLeverage
	Unsupported  int // either
	Share        float64
	MaxLeverage  float64
	Terms        []TermRange
}

// TermRange is the range of one design term in the fitting arm and the
// counterfactual predictions below and above it.
type TermRange struct {
	Term   string  `json:"term"`
	Lo     float64 `json:"lo"`
	Hi     float64 `json:"hi"`
	Below  int     `json:"below"`
	Above  int     `json:"above"`
	Binary bool    `json:"binary"`
}

// Err returns why the audit could not be made, or nil.
func (a *ExtrapolationAudit) Err() error {
	if a == nil {
		return errors.New("nil ExtrapolationAudit")
	}
	if a.err == nil && (a.scores == nil) {
		return errors.New("extrapolation audit not computed: use Scores.Extrapolation(estimand)")
	}
	return a.err
}

// Extrapolation audits the regression-adjustment estimate of the estimand
// (ATE, ATT or ATC).
func (sc *Scores) Extrapolation(target Estimand) *ExtrapolationAudit {
	a := &ExtrapolationAudit{Estimand: target, scores: sc}
	if err := sc.Err(); err != nil {
		a.err = err
		return a
	}
	if err := checkEstimator(RegressionAdjustment, target); err != nil {
		a.err = err
		return a
	}
	d := sc.Design
	if d.Y == nil {
		a.err = settingErr("Outcome", "column", "extrapolation audit: no outcome: set one with ", "")
		return a
	}
	m1, m0, err := outcomeModels(d, nil, true)
	if err != nil {
		a.err = fmt.Errorf("extrapolation audit: %w", err)
		return a
	}
	a.m1, a.m0 = m1, m0
	unsup := make([]bool, d.N)
	a.Models[0] = auditModel(d, m1, "f1", 1, target, unsup)
	a.Models[1] = auditModel(d, m0, "f0", 0, target, unsup)
	a.Supported = make([]bool, d.N)
	for i := 0; i < d.N; i++ {
		if inTarget(target, d.T[i]) {
			a.TargetN++
			if !unsup[i] {
				a.Supported[i] = true
				a.SupportedN++
			}
		}
	}
	a.Full = sc.Effect(RegressionAdjustment, target)
	a.Restricted = a.restricted()
	return a
}

// auditModel checks the counterfactual predictions of the model fitted on
// arm t for the target units of the other arm, marking unsupported ones.
func auditModel(d *Design, m *olsFit, name string, t float64, target Estimand, unsup []bool) ModelAudit {
	p := d.P
	arm := "treated"
	if t == 0 {
		arm = "control"
	}
	ma := ModelAudit{Model: name, Arm: arm, Share: math.NaN()}
	lo := make([]float64, p)
	hi := make([]float64, p)
	for j := range lo {
		lo[j], hi[j] = math.Inf(1), math.Inf(-1)
	}
	lev := func(row []float64) float64 {
		var h float64
		for j := 0; j < p; j++ {
			var s float64
			for k := 0; k < p; k++ {
				s += m.xtxInv[j*p+k] * row[k]
			}
			h += row[j] * s
		}
		return h
	}
	for i := 0; i < d.N; i++ {
		if d.T[i] != t {
			continue
		}
		ma.FitN++
		row := d.X[i*p : (i+1)*p]
		for j, v := range row {
			lo[j], hi[j] = math.Min(lo[j], v), math.Max(hi[j], v)
		}
		ma.MaxLeverage = math.Max(ma.MaxLeverage, lev(row))
	}
	ma.Terms = make([]TermRange, 0, p-1)
	for j := 1; j < p; j++ {
		ma.Terms = append(ma.Terms, TermRange{Term: d.Terms[j].Name, Lo: lo[j], Hi: hi[j], Binary: d.Terms[j].Binary})
	}
	// Leverages of the fitting units equal MaxLeverage at most; a relative
	// tolerance keeps rounding from flagging a unit on the boundary.
	limit := ma.MaxLeverage * (1 + 1e-9)
	for i := 0; i < d.N; i++ {
		if d.T[i] == t || !inTarget(target, d.T[i]) {
			continue
		}
		ma.Predictions++
		row := d.X[i*p : (i+1)*p]
		outside := false
		for j := 1; j < p; j++ {
			if row[j] < lo[j] {
				ma.Terms[j-1].Below++
				outside = true
			} else if row[j] > hi[j] {
				ma.Terms[j-1].Above++
				outside = true
			}
		}
		high := lev(row) > limit
		if outside {
			ma.OutsideRange++
		}
		if high {
			ma.HighLeverage++
		}
		if outside || high {
			ma.Unsupported++
			unsup[i] = true
		}
	}
	if ma.Predictions > 0 {
		ma.Share = float64(ma.Unsupported) / float64(ma.Predictions)
	}
	return ma
}

func (a *ExtrapolationAudit) restricted() *Effect {
	sc := a.scores
	d := sc.Design
	e := &Effect{Estimator: RegressionAdjustment, Estimand: a.Estimand, SEMethod: RegressionAdjustment.seMethod(), Supported: true,
		Value: math.NaN(), SE: math.NaN(), CI95: Interval{math.NaN(), math.NaN()}, Mu1: math.NaN(), Mu0: math.NaN()}
	// The units averaged over: the supported target units.
	for i, ok := range a.Supported {
		if ok {
			e.N++
			if d.T[i] == 1 {
				e.NTreated++
			} else {
				e.NControl++
			}
		}
	}
	e.Population = fmt.Sprintf("%s whose counterfactual predictions stay within the other arm's data (%d of %d)", a.Estimand.population(), a.SupportedN, a.TargetN)
	if a.SupportedN == 0 {
		e.err = fmt.Errorf("extrapolation audit: every prediction for the %s rests on extrapolation: no supported unit is left", a.Estimand)
		return e
	}
	out := regressionAdjustment(d, a.m1, a.m0, a.Estimand, nil, a.Supported, true)
	e.Value, e.Mu1, e.Mu0 = out.value, out.mu1, out.mu0
	e.MuCov = [3]float64{out.v11, out.v00, out.v10}
	e.SE = out.se()
	if !math.IsNaN(e.SE) {
		e.CI95 = Interval{e.Value - z975*e.SE, e.Value + z975*e.SE}
	}
	if a.SupportedN < a.TargetN {
		e.flag("restricted_population", fmt.Sprintf("averaged over the %d of %d target units whose predictions are supported: the estimand is that subpopulation's", a.SupportedN, a.TargetN))
	}
	e.Notes = append(e.Notes, "SE: "+RegressionAdjustment.seDescription()+", over the supported units (the models are fitted on all units)")
	return e
}

// String is the terminal view.
func (a *ExtrapolationAudit) String() string {
	if err := a.Err(); err != nil {
		return "extrapolationaudit: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Extrapolation audit of regression adjustment (%s)\n", a.Estimand)
	fmt.Fprintf(&b, "  unsupported: outside the fitting arm's range on a term, or %s\n", LeverageRule)
	for _, m := range a.Models {
		if m.Predictions == 0 {
			fmt.Fprintf(&b, "  %s (fitted on %d %s units): no counterfactual predictions for the %s\n", m.Model, m.FitN, m.Arm, a.Estimand)
			continue
		}
		fmt.Fprintf(&b, "  %s (fitted on %d %s units) predicts for %d units: %d (%.1f%%) unsupported — %d outside its ranges, %d with leverage above its maximum %.4g\n",
			m.Model, m.FitN, m.Arm, m.Predictions, m.Unsupported, 100*m.Share, m.OutsideRange, m.HighLeverage, m.MaxLeverage)
		for _, t := range m.Terms {
			if t.Below+t.Above > 0 {
				fmt.Fprintf(&b, "      %-24s %s range [%s, %s]: %d below, %d above\n", t.Term, m.Arm, fmtG(t.Lo), fmtG(t.Hi), t.Below, t.Above)
			}
		}
	}
	if a.Full != nil && a.Full.Err() == nil {
		fmt.Fprintf(&b, "  estimate over all %d target units: %s (SE %s)\n", a.TargetN, fmtG(a.Full.Value), fmtG(a.Full.SE))
	}
	if a.Restricted.Err() != nil {
		fmt.Fprintf(&b, "  %v\n", a.Restricted.Err())
	} else {
		fmt.Fprintf(&b, "  estimate over the %d supported units: %s (SE %s) — a different population\n", a.SupportedN, fmtG(a.Restricted.Value), fmtG(a.Restricted.SE))
	}
	return b.String()
}

// MarshalJSON is the pipeline view.
func (a *ExtrapolationAudit) MarshalJSON() ([]byte, error) {
	if err := a.Err(); err != nil {
		return failedJSON(err)
	}
	type model struct {
		Model        string      `json:"model"`
		Arm          string      `json:"fitted_on"`
		FitN         int         `json:"n_fit"`
		Predictions  int         `json:"counterfactual_predictions"`
		OutsideRange int         `json:"outside_range"`
		HighLeverage int         `json:"high_leverage"`
		Unsupported  int         `json:"unsupported"`
		Share        Num         `json:"share_unsupported"`
		MaxLeverage  Num         `json:"max_leverage"`
		Terms        []TermRange `json:"terms"`
	}
	ms := make([]model, 0, 2)
	for _, m := range a.Models {
		ms = append(ms, model{m.Model, m.Arm, m.FitN, m.Predictions, m.OutsideRange, m.HighLeverage, m.Unsupported, Num(m.Share), Num(m.MaxLeverage), m.Terms})
	}
	return json.Marshal(struct {
		Estimand     string  `json:"estimand"`
		LeverageRule string  `json:"leverage_rule"`
		Models       []model `json:"models"`
		TargetN      int     `json:"n_target"`
		SupportedN   int     `json:"n_supported"`
		Full         *Effect `json:"estimate"`
		Restricted   *Effect `json:"estimate_supported"`
	}{a.Estimand.String(), LeverageRule, ms, a.TargetN, a.SupportedN, a.Full, a.Restricted})
}

// ExtrapolationCurve is chart data for f1 and f0 along one covariate, the
// other design terms held at fixed values, with the observed points of each
// arm and the regions of the covariate where an arm has no units (there
// that arm's line is extrapolation). Sizes are bounded: CurvePoints grid
// points, at most MaxCurvePoints observed points per arm, CurveBins bins.
type ExtrapolationCurve struct {
	Covariate string
	X         []float64 // grid from the smallest to the largest value
	F1, F0    []float64
	// Pointwise 95% confidence bands of the fitted lines, x'b ± 1.96·√(x'Vx).
	F1Band, F0Band []Interval
	// Held lists the values the other terms are held at: numeric terms at
	// their mean over all units, indicators of categorical levels at 0 (the
	// reference level).
	Held []HeldValue
	// Observed points (a deterministic subsample when an arm has more than
	// MaxCurvePoints units) and the arms' sizes.
	Treated, Control           []CurvePoint
	TreatedTotal, ControlTotal int
	// Binned means of the outcome per arm over CurveBins equal bins.
	TreatedBins, ControlBins []CurveBin
	// Unsupported1 (Unsupported0): covariate intervals without treated
	// (control) units, where f1 (f0) extrapolates.
	Unsupported1, Unsupported0 []Interval
	err                        error
}

// HeldValue is a term held fixed along the curve.
type HeldValue struct {
	Term  string  `json:"term"`
	Value float64 `json:"value"`
}

// CurvePoint is one observed unit.
type CurvePoint struct {
	X float64 `json:"x"`
	Y float64 `json:"y"`
}

// CurveBin is the mean outcome of one arm's units in a bin of the covariate.
type CurveBin struct {
	Lo    float64 `json:"lo"`
	Hi    float64 `json:"hi"`
	N     int     `json:"n"`
	MeanY Num     `json:"mean_y"` // null when the bin is empty
}

// Err returns why the curve could not be made, or nil.
func (c *ExtrapolationCurve) Err() error {
	if c == nil {
		return errors.New("nil ExtrapolationCurve")
	}
	if c.err == nil && (len(c.X) == 0 || len(c.F1) != len(c.X) || len(c.F0) != len(c.X)) {
		return errors.New("extrapolation curve not computed: use ExtrapolationAudit.Curve(covariate)")
	}
	return c.err
}

// Curve returns the chart data of f1 and f0 along the numeric covariate.
func (a *ExtrapolationAudit) Curve(covariate string) *ExtrapolationCurve {
	c := &ExtrapolationCurve{Covariate: covariate}
	if err := a.Err(); err != nil {
		c.err = err
		return c
	}
	d := a.scores.Design
	p := d.P
	col := -1
	for j, t := range d.Terms {
		if t.Column == covariate && t.Level == "" {
			col = j
		}
	}
	if col < 0 {
		var names []string
		for _, t := range d.Terms[1:] {
			if t.Level == "" {
				names = append(names, t.Name)
			}
		}
		for _, t := range d.Terms {
			if t.Column == covariate {
				c.err = fmt.Errorf("extrapolation curve: %q is categorical; choose a numeric covariate (%s)", covariate, strings.Join(names, ", "))
				return c
			}
		}
		c.err = fmt.Errorf("extrapolation curve: %q is not a covariate of the model; choose one of %s", covariate, strings.Join(names, ", "))
		return c
	}
	held := make([]float64, p)
	held[0] = 1
	for j := 1; j < p; j++ {
		if j == col {
			continue
		}
		if d.Terms[j].Level != "" {
			c.Held = append(c.Held, HeldValue{d.Terms[j].Name, 0})
			continue
		}
		var s float64
		for i := 0; i < d.N; i++ {
			s += d.X[i*p+j]
		}
		held[j] = s / float64(d.N)
		c.Held = append(c.Held, HeldValue{d.Terms[j].Name, held[j]})
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := 0; i < d.N; i++ {
		v := d.X[i*p+col]
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	x := append([]float64(nil), held...)
	band := func(m *olsFit) (float64, Interval) {
		f := m.predict(x)
		var v float64
		for j := 0; j < p; j++ {
			for k := 0; k < p; k++ {
				v += x[j] * m.cov(j, k) * x[k]
			}
		}
		s := z975 * math.Sqrt(math.Max(v, 0))
		return f, Interval{f - s, f + s}
	}
	for g := 0; g < CurvePoints; g++ {
		v := lo + (hi-lo)*float64(g)/float64(CurvePoints-1)
		x[col] = v
		c.X = append(c.X, v)
		f1, b1 := band(a.m1)
		f0, b0 := band(a.m0)
		c.F1, c.F0 = append(c.F1, f1), append(c.F0, f0)
		c.F1Band, c.F0Band = append(c.F1Band, b1), append(c.F0Band, b0)
	}
	// Observed points and bins.
	width := (hi - lo) / CurveBins
	binOf := func(v float64) int {
		if width == 0 {
			return 0
		}
		return min(CurveBins-1, int((v-lo)/width))
	}
	var n1, n0 [CurveBins]int
	var s1, s0 [CurveBins]float64
	for i := 0; i < d.N; i++ {
		b := binOf(d.X[i*p+col])
		if d.T[i] == 1 {
			c.TreatedTotal++
			n1[b]++
			s1[b] += d.Y[i]
		} else {
			c.ControlTotal++
			n0[b]++
			s0[b] += d.Y[i]
		}
	}
	pick := func(t float64, total int) []CurvePoint {
		out := []CurvePoint{}
		k := 0
		next := 0
		for i := 0; i < d.N; i++ {
			if d.T[i] != t {
				continue
			}
			if total <= MaxCurvePoints || k == next {
				out = append(out, CurvePoint{d.X[i*p+col], d.Y[i]})
				next = (len(out) * total) / MaxCurvePoints
			}
			k++
		}
		return out
	}
	c.Treated = pick(1, c.TreatedTotal)
	c.Control = pick(0, c.ControlTotal)
	for b := 0; b < CurveBins; b++ {
		blo, bhi := lo+width*float64(b), lo+width*float64(b+1)
		m1, m0 := math.NaN(), math.NaN()
		if n1[b] > 0 {
			m1 = s1[b] / float64(n1[b])
		}
		if n0[b] > 0 {
			m0 = s0[b] / float64(n0[b])
		}
		c.TreatedBins = append(c.TreatedBins, CurveBin{blo, bhi, n1[b], Num(m1)})
		c.ControlBins = append(c.ControlBins, CurveBin{blo, bhi, n0[b], Num(m0)})
	}
	c.Unsupported1 = emptyRuns(c.TreatedBins)
	c.Unsupported0 = emptyRuns(c.ControlBins)
	return c
}

// emptyRuns merges consecutive empty bins into intervals.
func emptyRuns(bins []CurveBin) []Interval {
	out := []Interval{}
	for b := 0; b < len(bins); b++ {
		if bins[b].N > 0 {
			continue
		}
		start := b
		for b+1 < len(bins) && bins[b+1].N == 0 {
			b++
		}
		out = append(out, Interval{bins[start].Lo, bins[b].Hi})
	}
	return out
}

// String is a short terminal summary of the curve data.
func (c *ExtrapolationCurve) String() string {
	if err := c.Err(); err != nil {
		return "extrapolationcurve: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "f1 and f0 along %s (%d grid points from %s to %s; other terms held at mean / reference level)\n",
		c.Covariate, len(c.X), fmtG(c.X[0]), fmtG(c.X[len(c.X)-1]))
	for _, r := range []struct {
		name string
		iv   []Interval
	}{{"f1 (no treated units)", c.Unsupported1}, {"f0 (no controls)", c.Unsupported0}} {
		if len(r.iv) == 0 {
			fmt.Fprintf(&b, "  %s: data across the whole range\n", r.name)
			continue
		}
		var parts []string
		for _, iv := range r.iv {
			parts = append(parts, fmt.Sprintf("[%s, %s]", fmtG(iv.Lo), fmtG(iv.Hi)))
		}
		fmt.Fprintf(&b, "  %s extrapolates on %s\n", r.name, strings.Join(parts, ", "))
	}
	fmt.Fprintf(&b, "  observed points shown: %d of %d treated, %d of %d controls\n", len(c.Treated), c.TreatedTotal, len(c.Control), c.ControlTotal)
	return b.String()
}

// MarshalJSON is the chart payload.
func (c *ExtrapolationCurve) MarshalJSON() ([]byte, error) {
	if err := c.Err(); err != nil {
		return failedJSON(err)
	}
	return json.Marshal(struct {
		Covariate    string       `json:"covariate"`
		X            []float64    `json:"x"`
		F1           []float64    `json:"f1"`
		F0           []float64    `json:"f0"`
		F1Band       []Interval   `json:"f1_band"`
		F0Band       []Interval   `json:"f0_band"`
		Held         []HeldValue  `json:"held"`
		Treated      []CurvePoint `json:"treated_points"`
		Control      []CurvePoint `json:"control_points"`
		TreatedTotal int          `json:"treated_total"`
		ControlTotal int          `json:"control_total"`
		TreatedBins  []CurveBin   `json:"treated_bins"`
		ControlBins  []CurveBin   `json:"control_bins"`
		Unsupported1 []Interval   `json:"f1_unsupported"`
		Unsupported0 []Interval   `json:"f0_unsupported"`
	}{c.Covariate, c.X, c.F1, c.F0, c.F1Band, c.F0Band, c.Held, c.Treated, c.Control, c.TreatedTotal, c.ControlTotal,
		c.TreatedBins, c.ControlBins, c.Unsupported1, c.Unsupported0})
}
