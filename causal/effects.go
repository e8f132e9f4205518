package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
)

// z975 is the 0.975 quantile of the standard normal distribution.
const z975 = 1.959963984540054

// Estimator identifies an effect estimator. Its String is the id used in
// every output (the report JSON contract, README.md and causal/report.schema.json): difference_in_means, regression_adjustment, ipw,
// ipw_normalized, aipw, overlap_weighted. The zero value is not an estimator.
//
// Notation: T ∈ {0, 1} treatment, y outcome, e = e(x) the fitted propensity
// (logistic maximum likelihood), n units, n1 treated, n0 controls, o = e/(1−e)
// the odds; f1 and f0 are least-squares fits of y on x (with intercept) in the
// treated and the control arm.
type Estimator int

const (
	// DifferenceInMeans: ȳ1 − ȳ0, SE √(s1²/n1 + s0²/n0) (unpooled
	// variances). No adjustment: it estimates the ATE (and ATT, ATC) only
	// when treatment is randomised; it is the unadjusted baseline.
	DifferenceInMeans Estimator = iota + 1

	// RegressionAdjustment averages f1(x) − f0(x) over the target units
	// (the adjustment formula; Rubin 1977, Imbens 2004): all units for the
	// ATE, the treated for the ATT, the controls for the ATC. With x̄ the
	// target mean of x and S the target covariance of x (m units, n−1 form),
	//
	//	τ = x̄'(b1 − b0),  Var = x̄'(V1 + V0)x̄ + (b1 − b0)'S(b1 − b0)/m
	//
	// (delta method; V_a = σ̂_a²(X_a'X_a)⁻¹, the classical OLS covariance, or
	// with EffectWith a heteroskedasticity-robust HC0/HC1/HC3 covariance,
	// White 1980, MacKinnon & White 1985; see OLSCovariance).
	// It predicts f1 for controls and f0 for treated units: see
	// Scores.Extrapolation for how much of that is extrapolation.
	RegressionAdjustment

	// IPW is the Horvitz–Thompson inverse-probability-weighted estimator
	// (Horvitz & Thompson 1952):
	//
	//	ATE = (1/n) Σ [T y/e − (1−T) y/(1−e)]
	//	ATT = (1/n1) Σ [T y − (1−T) y e/(1−e)]
	//	ATC = (1/n0) Σ [T y (1−e)/e − (1−T) y]
	//
	// SE: sandwich of the stacked estimating equations (propensity score
	// equations and the two arm means), which accounts for the estimated
	// propensity (Lunceford & Davidian 2004). Not invariant to a shift of y.
	IPW

	// IPWNormalized is the Hájek estimator: weights normalised to sum to one
	// within each arm (Hájek 1971):
	//
	//	ATE = Σ(T y/e)/Σ(T/e) − Σ((1−T) y/(1−e))/Σ((1−T)/(1−e))
	//	ATT = ȳ1 − Σ((1−T) o y)/Σ((1−T) o)
	//	ATC = Σ(T y/o)/Σ(T/o) − ȳ0
	//
	// SE: stacked-equation sandwich (Lunceford & Davidian 2004).
	IPWNormalized

	// AIPW is the augmented IPW, doubly robust estimator (Robins, Rotnitzky
	// & Zhao 1994; Lunceford & Davidian 2004): consistent if either the
	// propensity or the outcome models are right.
	//
	//	ATE = (1/n) Σ φ_i,  φ = f1 − f0 + T(y − f1)/e − (1−T)(y − f0)/(1−e),
	//	SE = √(Σ (φ_i − ATE)²)/n   (influence function)
	//	ATT = Σ [T (y − f0) − (1−T) o (y − f0)] / n1,
	//	SE = √(Σ ψ_i²)/n,  ψ = (T (y − f0 − ATT) − (1−T) o (y − f0)) / (n1/n)
	//
	// and the ATC by exchanging the arms.
	AIPW

	// OverlapWeighted estimates the ATO with overlap weights (1−e for
	// treated, e for controls; Li, Morgan & Zaslavsky 2018):
	//
	//	ATO = Σ T(1−e)y/Σ T(1−e) − Σ (1−T)e y/Σ (1−T)e
	//
	// With a logistic propensity fitted by maximum likelihood the weighted
	// means of every model covariate are equal in the two arms exactly.
	// SE: stacked-equation sandwich.
	OverlapWeighted

	// NearestNeighbourMatching is 1:1 matching on the logit of the score,
	// with replacement, no caliper (Abadie & Imbens 2006 estimator and
	// variance; formula at Matching.Effect). Scores.Match offers K, a
	// caliper, exact covariates and matching without replacement.
	NearestNeighbourMatching

	// Subclassification averages within-stratum differences in means over
	// five strata at the quintiles of the score (Rosenbaum & Rubin 1984;
	// formula at Strata.Effect). Scores.Subclassify chooses the number.
	Subclassification
)

var estimatorIDs = map[Estimator]string{
	DifferenceInMeans:    "difference_in_means",
	RegressionAdjustment: "regression_adjustment",
	IPW:                  "ipw",
	IPWNormalized:        "ipw_normalized",
	AIPW:                 "aipw",
	OverlapWeighted:      "overlap_weighted",

	NearestNeighbourMatching: "nearest_neighbour_matching",
	Subclassification:        "subclassification",
}

// AllEstimators lists the estimators in report order.
var AllEstimators = []Estimator{DifferenceInMeans, RegressionAdjustment, IPW, IPWNormalized, AIPW, OverlapWeighted}

// String is the estimator id (e.g. "aipw").
func (e Estimator) String() string {
	if s, ok := estimatorIDs[e]; ok {
		return s
	}
	return fmt.Sprintf("Estimator(%d)", int(e))
}

// MarshalJSON writes the id.
func (e Estimator) MarshalJSON() ([]byte, error) { return json.Marshal(e.String()) }

// ParseEstimator reads an estimator id such as "aipw".
func ParseEstimator(id string) (Estimator, error) {
	for e, s := range estimatorIDs {
		if strings.EqualFold(strings.TrimSpace(id), s) {
			return e, nil
		}
	}
	return 0, fmt.Errorf("unknown estimator %q: use one of difference_in_means, regression_adjustment, ipw, ipw_normalized, aipw, overlap_weighted, nearest_neighbour_matching, subclassification", id)
}

// Estimands lists the estimands the estimator targets.
func (e Estimator) Estimands() []Estimand {
	switch e {
	case DifferenceInMeans, RegressionAdjustment, IPW, IPWNormalized, AIPW, NearestNeighbourMatching, Subclassification:
		return []Estimand{ATE, ATT, ATC}
	case OverlapWeighted:
		return []Estimand{ATO}
	}
	return nil
}

func (e Estimator) targets(t Estimand) bool {
	for _, x := range e.Estimands() {
		if x == t {
			return true
		}
	}
	return false
}

func (e Estimator) usesScores() bool {
	return e == IPW || e == IPWNormalized || e == AIPW || e == OverlapWeighted
}

func (e Estimator) usesOutcomeModels() bool { return e == RegressionAdjustment || e == AIPW }

// seMethod names how the standard error is computed (same names as the R
// reference script).
func (e Estimator) seMethod() string {
	switch e {
	case DifferenceInMeans:
		return "unpooled variances"
	case RegressionAdjustment:
		return "delta method"
	case AIPW:
		return "influence function"
	}
	return "sandwich"
}

func (e Estimator) seDescription() string {
	switch e {
	case DifferenceInMeans:
		return "unpooled variances √(s1²/n1 + s0²/n0)"
	case RegressionAdjustment:
		return "delta method with the classical OLS covariances of both arm models"
	case AIPW:
		return "influence function (propensity and outcome models taken as known)"
	}
	return "sandwich of the stacked estimating equations, accounting for the estimated propensity"
}

func checkEstimator(est Estimator, target Estimand) error {
	if _, ok := estimatorIDs[est]; !ok {
		return fmt.Errorf("estimator %v is not set or unknown: use causal.DifferenceInMeans, RegressionAdjustment, IPW, IPWNormalized, AIPW or OverlapWeighted", est)
	}
	if err := checkEstimand(target); err != nil {
		return err
	}
	if !est.targets(target) {
		if target == ATO {
			return fmt.Errorf("%s does not estimate the ATO: use causal.OverlapWeighted (the normalised estimator with overlap weights)", est)
		}
		return fmt.Errorf("%s estimates the ATO only; for the %s use ipw_normalized, aipw or regression_adjustment", est, target)
	}
	return nil
}

// Flag marks something about an Effect that a reader must see.
type Flag struct {
	// Code is one of: unsupported_estimand, constant_outcome,
	// se_unavailable, trimmed_population, extrapolation,
	// restricted_population.
	Code    string `json:"code"`
	Message string `json:"message"`
}

// Effect is one estimand estimated by one estimator: the value, its
// standard error (SEMethod says how), a normal 95% interval value ± 1.96·SE,
// the units used, and flags. When the data do not support the estimand
// (separation or cells without one arm, see Verdict), Supported is false,
// Unsupported gives the reason and a flag is set: the number is then an
// extrapolation, not an estimate the data back.
type Effect struct {
	Estimator Estimator
	Estimand  Estimand
	Value     float64
	SE        float64
	SEMethod  string
	CI95      Interval
	// N units used (NTreated + NControl).
	N, NTreated, NControl int
	// Mu1 and Mu0 estimate the means of Y(1) and Y(0) in the target
	// population (Value = Mu1 − Mu0); MuCov is their covariance
	// [Var μ1, Var μ0, Cov(μ1, μ0)] from the same method as SE.
	Mu1, Mu0 float64
	MuCov    [3]float64
	// Population says whose average effect this is.
	Population string
	// Supported says whether the data support the estimand, judged by the
	// verdict's rules with the default VerdictOptions and the positivity
	// cells passed to Effect/Effects; Unsupported gives the reasons. A
	// Verdict built with other options may judge differently.
	Supported   bool
	Unsupported string
	Flags       []Flag
	Notes       []string

	outcomeBinary bool
	sdPooled      float64 // pooled within-arm SD of the outcome
	err           error
}

// Err returns why the effect could not be estimated, or nil.
func (e *Effect) Err() error {
	if e == nil {
		return errors.New("nil Effect")
	}
	return e.err
}

// HasFlag reports whether the effect carries the flag code.
func (e *Effect) HasFlag(code string) bool {
	if e == nil {
		return false
	}
	for _, f := range e.Flags {
		if f.Code == code {
			return true
		}
	}
	return false
}

func (e *Effect) flag(code, msg string) { e.Flags = append(e.Flags, Flag{code, msg}) }

// estOut is the result of one estimator evaluation.
type estOut struct {
	value, mu1, mu0 float64
	v11, v00, v10   float64 // covariance of (μ1, μ0); NaN when not computed
}

func (o estOut) se() float64 {
	v := o.v11 + o.v00 - 2*o.v10
	if v < 0 && v > -1e-12*(o.v11+o.v00) {
		v = 0
	}
	return math.Sqrt(v)
}

// Effect estimates the estimand with the estimator. Positivity tables may
// be given (as for Verdict): a cell without one arm withdraws the ATE and
// the ATT or ATC, which is then flagged. Errors (no outcome, an estimator
// that does not target the estimand, infinite weights, an outcome model that
// cannot be fitted) are returned by Err and shown by every view.
func (sc *Scores) Effect(est Estimator, target Estimand, cells ...*Cells) *Effect {
	return sc.effect(EffectOptions{}, est, target, cells, nil)
}

// EffectOptions tune how an Effect is computed.
type EffectOptions struct {
	// OutcomeCovariance is the covariance of the outcome models'
	// coefficients in the regression-adjustment SE: ClassicalOLS (the
	// default) or a heteroskedasticity-robust HC0, HC1 or HC3 (see
	// OLSCovariance). Other estimators ignore it.
	OutcomeCovariance OLSCovariance
}

// EffectWith is Effect with options; the SE method then names the
// covariance used (e.g. "delta method (HC3)").
func (sc *Scores) EffectWith(o EffectOptions, est Estimator, target Estimand, cells ...*Cells) *Effect {
	return sc.effect(o, est, target, cells, nil)
}

// effect is EffectWith; why, when not nil, returns the reason the data do
// not support the target (sc.unsupported), so that Effects judges it once.
func (sc *Scores) effect(o EffectOptions, est Estimator, target Estimand, cells []*Cells, why func() string) *Effect {
	if why == nil {
		why = func() string { return sc.unsupported(target, cells) }
	}
	eff := &Effect{Estimator: est, Estimand: target, SEMethod: est.seMethod(), Supported: true,
		Value: math.NaN(), SE: math.NaN(), CI95: Interval{math.NaN(), math.NaN()}, Mu1: math.NaN(), Mu0: math.NaN(),
		Population: target.population()}
	if err := sc.Err(); err != nil {
		eff.err = err
		return eff
	}
	if err := checkEstimator(est, target); err != nil {
		eff.err = err
		return eff
	}
	switch est {
	case NearestNeighbourMatching:
		return sc.Match(MatchOptions{Estimand: target}).Effect(cells...)
	case Subclassification:
		return sc.Subclassify(0).Effect(target, cells...)
	}
	for _, c := range cells {
		if err := c.Err(); err != nil {
			eff.err = err
			return eff
		}
		if err := c.sameRows(sc.Design); err != nil {
			eff.err = err
			return eff
		}
	}
	d := sc.Design
	if d.Y == nil {
		eff.err = settingErr("Outcome", "column", est.String()+": no outcome: set one with ", "")
		return eff
	}
	eff.N, eff.NTreated, eff.NControl = d.N, d.Treated, d.Control
	if why := why(); why != "" {
		eff.Supported = false
		eff.Unsupported = why
		eff.flag("unsupported_estimand", fmt.Sprintf("the data do not support the %s: %s", target, why))
	}
	eff.outcomeBinary, eff.sdPooled = outcomeSummary(d)
	if constantOutcome(d.Y) {
		eff.flag("constant_outcome", fmt.Sprintf("the outcome %q takes the single value %g in every row used: every effect is 0 and has no sampling variability; check the outcome column", d.roles.Outcome, d.Y[0]))
	}
	var oc *outcomes
	if est.usesOutcomeModels() {
		m1, m0, err := outcomeModels(d, nil, true)
		if err != nil {
			eff.err = fmt.Errorf("%s: %w", est, err)
			return eff
		}
		oc = &outcomes{m1: m1, m0: m0}
		if est == AIPW {
			oc.f1, oc.f0 = predictInto(nil, d, m1, nil), predictInto(nil, d, m0, nil)
		}
		if est == RegressionAdjustment && o.OutcomeCovariance != ClassicalOLS {
			switch o.OutcomeCovariance {
			case HC0, HC1, HC3:
			default:
				eff.err = fmt.Errorf("%s: unknown outcome covariance %v: use causal.ClassicalOLS, HC0, HC1 or HC3", est, o.OutcomeCovariance)
				return eff
			}
			m1.useRobust(d, 1, o.OutcomeCovariance)
			m0.useRobust(d, 0, o.OutcomeCovariance)
			eff.SEMethod = fmt.Sprintf("%s (%s)", eff.SEMethod, o.OutcomeCovariance)
		}
		eff.aliasFlags(d, oc)
	}
	out, err := evaluate(sc, est, target, nil, oc, nil, true)
	if err != nil {
		eff.err = err
		return eff
	}
	eff.Value, eff.Mu1, eff.Mu0 = out.value, out.mu1, out.mu0
	eff.MuCov = [3]float64{out.v11, out.v00, out.v10}
	eff.SE = out.se()
	if math.IsNaN(eff.SE) {
		why := "the propensity model's information matrix could not be inverted (separation); use Scores.Bootstrap, or trim"
		if !est.usesScores() {
			why = "too few units for a variance (each arm, and the target population, needs at least 2)"
		}
		eff.flag("se_unavailable", "the standard error could not be computed: "+why)
	} else {
		eff.CI95 = Interval{eff.Value - z975*eff.SE, eff.Value + z975*eff.SE}
	}
	if desc := est.seDescription(); eff.SEMethod != est.seMethod() {
		eff.Notes = append(eff.Notes, "SE: delta method with the heteroskedasticity-robust "+o.OutcomeCovariance.String()+" covariances of both arm models")
	} else {
		eff.Notes = append(eff.Notes, "SE: "+desc)
	}
	if est == DifferenceInMeans {
		eff.Notes = append(eff.Notes, "unadjusted contrast: it estimates the "+target.String()+" only if treatment is independent of the potential outcomes (a randomised design)")
	}
	return eff
}

// outcomes are the two arm models with their predictions f1(x_i), f0(x_i)
// (computed where fw > 0).
type outcomes struct {
	m1, m0 *olsFit
	f1, f0 []float64
}

// aliasFlags flags predictions of an arm model that left out a term constant
// in its arm, for units with another value of that term: there the model
// cannot know the term's effect and extrapolates.
func (eff *Effect) aliasFlags(d *Design, oc *outcomes) {
	for a, m := range []*olsFit{oc.m1, oc.m0} {
		if len(m.aliased) == 0 {
			continue
		}
		name, other := "f1", "treated"
		if a == 1 {
			name, other = "f0", "control"
		}
		used := func(t float64) bool {
			if eff.Estimator == RegressionAdjustment {
				return inTarget(eff.Estimand, t)
			}
			// AIPW: f1 enters the ATE and ATC, f0 the ATE and ATT.
			return eff.Estimand == ATE || (a == 0 && eff.Estimand == ATC) || (a == 1 && eff.Estimand == ATT)
		}
		k := 0
		for i := 0; i < d.N; i++ {
			if !used(d.T[i]) {
				continue
			}
			for c, j := range m.aliased {
				if d.X[i*d.P+j] != m.aliasValue[c] {
					k++
					break
				}
			}
		}
		var terms []string
		for c, j := range m.aliased {
			terms = append(terms, fmt.Sprintf("%s (%g for every %s unit)", d.Terms[j].Name, m.aliasValue[c], other))
		}
		msg := fmt.Sprintf("%s, the %s-arm outcome model, leaves out %s: it cannot be estimated in that arm", name, other, strings.Join(terms, ", "))
		if k > 0 {
			eff.flag("extrapolation", fmt.Sprintf("%s; its predictions for %d unit%s with other values assume the term has no effect — extrapolation beyond the %s units' data", msg, k, plural(k, "", "s"), other))
		} else {
			eff.Notes = append(eff.Notes, msg+"; no prediction needs it")
		}
	}
}

// evaluate computes the estimator on the scores' design. e, oc and fw may
// override the full-sample scores, outcome models and unit weights (the
// bootstrap passes refitted ones and multinomial counts); withSE asks for the
// covariance of the arm means (only without fw).
func evaluate(sc *Scores, est Estimator, target Estimand, e []float64, oc *outcomes, fw []float64, withSE bool) (estOut, error) {
	d := sc.Design
	if est == NearestNeighbourMatching || est == Subclassification {
		return estOut{}, fmt.Errorf("%s is not resampled by the bootstrap: use its own standard error (Scores.Match, Scores.Subclassify); for matching with replacement the bootstrap is not valid (Abadie & Imbens 2008)", est)
	}
	if e == nil {
		e = sc.E
	}
	if est.usesScores() && est != OverlapWeighted && fw == nil {
		// (A bootstrap replicate checks that its estimate is finite instead.)
		if err := checkFiniteWeights(d, e, target, est); err != nil {
			return estOut{}, err
		}
	}
	if est.usesOutcomeModels() && oc == nil {
		m1, m0, err := outcomeModels(d, fw, withSE)
		if err != nil {
			return estOut{}, fmt.Errorf("%s: %w", est, err)
		}
		oc = &outcomes{m1: m1, m0: m0}
		if est == AIPW {
			oc.f1, oc.f0 = predictInto(nil, d, m1, fw), predictInto(nil, d, m0, fw)
		}
	}
	nan := math.NaN()
	switch est {
	case DifferenceInMeans:
		return diffMeans(d.T, d.Y, fw, withSE), nil
	case RegressionAdjustment:
		return regressionAdjustment(d, oc.m1, oc.m0, target, fw, nil, withSE), nil
	case AIPW:
		if oc.f1 == nil {
			return aipwFromModels(d, func(i int) float64 { return e[i] }, oc.m1, oc.m0, target, fw), nil
		}
		f1, f0 := oc.f1, oc.f0
		if target == ATC {
			t, ef := flipped(d.T, e)
			o := aipwATT(t, d.Y, ef, f0, f1, fw, withSE)
			return estOut{-o.value, o.mu0, o.mu1, o.v00, o.v11, o.v10}, nil
		}
		if target == ATT {
			return aipwATT(d.T, d.Y, e, f1, f0, fw, withSE), nil
		}
		return aipwATE(d.T, d.Y, e, f1, f0, fw, withSE), nil
	}
	// Weighting estimators.
	t, ee, sign := d.T, e, 1.0
	tt := target
	if target == ATC {
		t, ee = flipped(d.T, e)
		sign, tt = -1, ATT
	}
	var f1, f0 weightForm
	switch {
	case est == IPW && tt == ATE:
		f1, f0 = formHTATE1, formHTATE0
	case est == IPW && tt == ATT:
		f1, f0 = formHTATT1, formHTATT0
	case est == IPWNormalized && tt == ATE:
		f1, f0 = formHajekATE1, formHajekATE0
	case est == IPWNormalized && tt == ATT:
		f1, f0 = formHTATT1, formHajekATT0
	case est == OverlapWeighted:
		f1, f0 = formOverlap1, formOverlap0
	default:
		return estOut{}, fmt.Errorf("%s does not estimate the %s", est, target)
	}
	mu1, mu0, err := weightedMeans(t, d.Y, ee, fw, f1, f0)
	if err != nil {
		return estOut{}, fmt.Errorf("%s for the %s: %w", est, target, err)
	}
	out := estOut{value: mu1 - mu0, mu1: mu1, mu0: mu0, v11: nan, v00: nan, v10: nan}
	if withSE && fw == nil {
		pb := newPropensityBlock(sc)
		out.v11, out.v00, out.v10 = sandwichMeans(pb, t, d.Y, ee, f1, f0, mu1, mu0, sign)
	}
	if sign < 0 {
		out = estOut{-out.value, out.mu0, out.mu1, out.v00, out.v11, out.v10}
	}
	return out, nil
}

// flipped exchanges the arms: 1 − T and 1 − e. The ATC of the data is minus
// the ATT of the flipped data.
func flipped(t, e []float64) ([]float64, []float64) {
	t2 := make([]float64, len(t))
	e2 := make([]float64, len(e))
	for i := range t {
		t2[i] = 1 - t[i]
		e2[i] = 1 - e[i]
	}
	return t2, e2
}

// checkFiniteWeights rejects scores that give a unit an infinite weight for
// the estimand: a treated unit scored 0 (ATE, ATC), a control scored 1 (ATE,
// ATT).
func checkFiniteWeights(d *Design, e []float64, target Estimand, est Estimator) error {
	var bad []int
	for i, v := range e {
		if d.T[i] == 1 && v == 0 && (target == ATE || target == ATC) {
			bad = append(bad, i)
		}
		if d.T[i] == 0 && v == 1 && (target == ATE || target == ATT) {
			bad = append(bad, i)
		}
	}
	if len(bad) == 0 {
		return nil
	}
	return infiniteWeightsError(d, e, bad, fmt.Sprintf("%s for the %s", est, target))
}

// predictInto writes m's predictions for the rows with fw > 0 (all rows when
// fw is nil) into out (allocated when nil).
func predictInto(out []float64, d *Design, m *olsFit, fw []float64) []float64 {
	if out == nil {
		out = make([]float64, d.N)
	}
	for i := range out {
		if fw != nil && fw[i] == 0 {
			continue
		}
		out[i] = m.predict(d.X[i*d.P : (i+1)*d.P])
	}
	return out
}

// diffMeans is ȳ1 − ȳ0 with Var μ_a = s_a²/n_a.
func diffMeans(t, y, fw []float64, withSE bool) estOut {
	var s1, s0, n1, n0 float64
	for i := range t {
		f := 1.0
		if fw != nil {
			f = fw[i]
		}
		if t[i] == 1 {
			s1 += f * y[i]
			n1 += f
		} else {
			s0 += f * y[i]
			n0 += f
		}
	}
	m1, m0 := s1/n1, s0/n0
	out := estOut{value: m1 - m0, mu1: m1, mu0: m0, v11: math.NaN(), v00: math.NaN(), v10: math.NaN()}
	if withSE && fw == nil {
		var q1, q0 float64
		for i := range t {
			if t[i] == 1 {
				q1 += (y[i] - m1) * (y[i] - m1)
			} else {
				q0 += (y[i] - m0) * (y[i] - m0)
			}
		}
		out.v11 = q1 / (n1 - 1) / n1
		out.v00 = q0 / (n0 - 1) / n0
		out.v10 = 0
	}
	return out
}

// inTarget reports whether unit i belongs to the estimand's target set.
func inTarget(target Estimand, t float64) bool {
	switch target {
	case ATT:
		return t == 1
	case ATC:
		return t == 0
	}
	return true
}

// regressionAdjustment averages f1 − f0 over the target units (restricted to
// mask when given). Var μ1 = x̄'V1x̄ + b1'S b1/m, Var μ0 likewise, Cov(μ1, μ0)
// = b1'S b0/m, so Var τ = x̄'(V1+V0)x̄ + (b1−b0)'S(b1−b0)/m (delta method).
func regressionAdjustment(d *Design, m1, m0 *olsFit, target Estimand, fw []float64, mask []bool, withSE bool) estOut {
	p := d.P
	xbar := make([]float64, p)
	var m float64
	for i := 0; i < d.N; i++ {
		if !inTarget(target, d.T[i]) || (mask != nil && !mask[i]) {
			continue
		}
		f := 1.0
		if fw != nil {
			f = fw[i]
			if f == 0 {
				continue
			}
		}
		m += f
		row := d.X[i*p : (i+1)*p]
		for j, v := range row {
			xbar[j] += f * v
		}
	}
	nan := math.NaN()
	if m == 0 {
		return estOut{nan, nan, nan, nan, nan, nan}
	}
	for j := range xbar {
		xbar[j] /= m
	}
	mu1, mu0 := m1.predict(xbar), m0.predict(xbar)
	out := estOut{value: mu1 - mu0, mu1: mu1, mu0: mu0, v11: nan, v00: nan, v10: nan}
	if !withSE || fw != nil || m1.xtxInv == nil || m0.xtxInv == nil || m < 2 {
		return out
	}
	// S b_a: covariance of x over the target units times b_a, without
	// forming S: S b = Σ (x − x̄)(x − x̄)'b/(m−1).
	sb1 := make([]float64, p)
	sb0 := make([]float64, p)
	for i := 0; i < d.N; i++ {
		if !inTarget(target, d.T[i]) || (mask != nil && !mask[i]) {
			continue
		}
		row := d.X[i*p : (i+1)*p]
		var r1, r0 float64
		for j, v := range row {
			c := v - xbar[j]
			r1 += c * m1.beta[j]
			r0 += c * m0.beta[j]
		}
		for j, v := range row {
			c := v - xbar[j]
			sb1[j] += c * r1
			sb0[j] += c * r0
		}
	}
	var q1, q0, bSb1, bSb0, b1Sb0 float64
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			q1 += xbar[j] * m1.cov(j, k) * xbar[k]
			q0 += xbar[j] * m0.cov(j, k) * xbar[k]
		}
		bSb1 += m1.beta[j] * sb1[j]
		bSb0 += m0.beta[j] * sb0[j]
		b1Sb0 += m1.beta[j] * sb0[j]
	}
	den := (m - 1) * m
	out.v11 = q1 + bSb1/den
	out.v00 = q0 + bSb0/den
	out.v10 = b1Sb0 / den
	return out
}

// aipwATE: μ1 = mean of f1 + T(y − f1)/e, μ0 = mean of f0 + (1−T)(y − f0)/(1−e);
// their covariance from the influence functions φ_a − μ_a.
func aipwATE(t, y, e, f1, f0, fw []float64, withSE bool) estOut {
	var s1, s0, nw float64
	for i := range t {
		f := 1.0
		if fw != nil {
			f = fw[i]
			if f == 0 {
				continue
			}
		}
		p1, p0 := aipwTerms(t[i], y[i], e[i], f1[i], f0[i])
		s1 += f * p1
		s0 += f * p0
		nw += f
	}
	mu1, mu0 := s1/nw, s0/nw
	nan := math.NaN()
	out := estOut{value: mu1 - mu0, mu1: mu1, mu0: mu0, v11: nan, v00: nan, v10: nan}
	if withSE && fw == nil {
		var v11, v00, v10 float64
		for i := range t {
			p1, p0 := aipwTerms(t[i], y[i], e[i], f1[i], f0[i])
			a, b := p1-mu1, p0-mu0
			v11 += a * a
			v00 += b * b
			v10 += a * b
		}
		n2 := nw * nw
		out.v11, out.v00, out.v10 = v11/n2, v00/n2, v10/n2
	}
	return out
}

// aipwFromModels is the AIPW point estimate (no standard error) computed
// with each unit's own-arm prediction only: the sums of the other arm's
// predictions are (Σ fw x)'b, with Σ fw x per arm kept by the outcome fits.
// ATE: μ1 = (x̄'b1 + Σ_T fw(y − f1)/e / N), μ0 likewise; ATT: μ1 = ȳ1,
// μ0 = ((Σ_T fw x)'b0 + Σ_{1−T} fw o(y − f0)) / n1; ATC by exchanging the
// arms. Equal to aipwATE/aipwATT up to rounding, with half the predictions;
// score(i) gives e_i (the bootstrap computes it here, in the same pass).
func aipwFromModels(d *Design, score func(i int) float64, m1, m0 *olsFit, target Estimand, fw []float64) estOut {
	p := d.P
	var r1, r0 float64
	for i := 0; i < d.N; i++ {
		f := 1.0
		if fw != nil {
			if f = fw[i]; f == 0 {
				continue
			}
		}
		row := d.X[i*p : (i+1)*p]
		if d.T[i] == 1 {
			switch target {
			case ATE:
				r1 += f * (d.Y[i] - m1.predict(row)) / score(i)
			case ATC:
				e := score(i)
				r1 += f * (1 - e) / e * (d.Y[i] - m1.predict(row))
			}
		} else {
			switch target {
			case ATE:
				r0 += f * (d.Y[i] - m0.predict(row)) / (1 - score(i))
			case ATT:
				e := score(i)
				r0 += f * e / (1 - e) * (d.Y[i] - m0.predict(row))
			}
		}
	}
	n1, n0 := m1.n, m0.n
	sy1, sy0 := m1.sumY, m0.sumY
	var mu1, mu0 float64
	switch target {
	case ATE:
		nw := n1 + n0
		mu1 = (dotp(m1.sumX, m1.beta) + dotp(m0.sumX, m1.beta) + r1) / nw
		mu0 = (dotp(m1.sumX, m0.beta) + dotp(m0.sumX, m0.beta) + r0) / nw
	case ATT:
		mu1 = sy1 / n1
		mu0 = (dotp(m1.sumX, m0.beta) + r0) / n1
	case ATC:
		mu1 = (dotp(m0.sumX, m1.beta) + r1) / n0
		mu0 = sy0 / n0
	}
	nan := math.NaN()
	return estOut{mu1 - mu0, mu1, mu0, nan, nan, nan}
}

func dotp(a, b []float64) float64 {
	var s float64
	for j, v := range a {
		s += v * b[j]
	}
	return s
}

func aipwTerms(t, y, e, f1, f0 float64) (p1, p0 float64) {
	p1, p0 = f1, f0
	if t == 1 {
		p1 += (y - f1) / e
	} else {
		p0 += (y - f0) / (1 - e)
	}
	return p1, p0
}

// aipwATT: μ1 = ȳ1, μ0 = Σ [T f0 + (1−T) o (y − f0)] / n1, with influence
// functions T(y − μ1)/(n1/n) and (T(f0 − μ0) + (1−T) o (y − f0))/(n1/n).
func aipwATT(t, y, e, f1, f0, fw []float64, withSE bool) estOut {
	var s1, s0, n1, nw float64
	for i := range t {
		f := 1.0
		if fw != nil {
			f = fw[i]
			if f == 0 {
				continue
			}
		}
		nw += f
		if t[i] == 1 {
			n1 += f
			s1 += f * y[i]
			s0 += f * f0[i]
		} else {
			s0 += f * e[i] / (1 - e[i]) * (y[i] - f0[i])
		}
	}
	mu1, mu0 := s1/n1, s0/n1
	nan := math.NaN()
	out := estOut{value: mu1 - mu0, mu1: mu1, mu0: mu0, v11: nan, v00: nan, v10: nan}
	if withSE && fw == nil {
		share := n1 / nw
		var v11, v00, v10 float64
		for i := range t {
			var a, b float64
			if t[i] == 1 {
				a = (y[i] - mu1) / share
				b = (f0[i] - mu0) / share
			} else {
				b = e[i] / (1 - e[i]) * (y[i] - f0[i]) / share
			}
			v11 += a * a
			v00 += b * b
			v10 += a * b
		}
		n2 := nw * nw
		out.v11, out.v00, out.v10 = v11/n2, v00/n2, v10/n2
	}
	return out
}

// outcomeSummary reports whether the outcome only takes the values 0 and 1
// and its pooled within-arm standard deviation
// √(((n1−1)s1² + (n0−1)s0²)/(n − 2)).
func outcomeSummary(d *Design) (binary bool, sd float64) {
	binary = true
	var s1, s0 float64
	for i, y := range d.Y {
		if y != 0 && y != 1 {
			binary = false
		}
		if d.T[i] == 1 {
			s1 += y
		} else {
			s0 += y
		}
	}
	m1, m0 := s1/float64(d.Treated), s0/float64(d.Control)
	var q float64
	for i, y := range d.Y {
		m := m0
		if d.T[i] == 1 {
			m = m1
		}
		q += (y - m) * (y - m)
	}
	if d.N <= 2 {
		return binary, math.NaN()
	}
	return binary, math.Sqrt(q / float64(d.N-2))
}

func constantOutcome(y []float64) bool {
	for _, v := range y {
		if v != y[0] {
			return false
		}
	}
	return true
}

// Estimates is a set of effects of one estimand by several estimators.
type Estimates struct {
	Estimand Estimand
	Items    []*Effect
	err      error
}

// Err returns why no estimates could be computed, or nil. Individual
// estimators may still have failed: see each Effect's Err.
func (es *Estimates) Err() error {
	if es == nil {
		return errors.New("nil Estimates")
	}
	return es.err
}

// Get returns the effect of one estimator. It never returns nil: when the
// estimates failed as a whole, the effect carries their error (Err), and
// when the estimator is not among them (it does not target the estimand),
// an error that says so.
func (es *Estimates) Get(est Estimator) *Effect {
	if es == nil {
		return &Effect{Estimator: est, err: errors.New("nil Estimates")}
	}
	nan := math.NaN()
	failed := func(err error) *Effect {
		return &Effect{Estimator: est, Estimand: es.Estimand, Value: nan, SE: nan, CI95: Interval{nan, nan}, err: err}
	}
	if es.err != nil {
		return failed(es.err)
	}
	for _, e := range es.Items {
		if e != nil && e.Estimator == est {
			return e
		}
	}
	return failed(fmt.Errorf("%s: not among these estimates of the %s (it does not target that estimand)", est, es.Estimand))
}

// Effects estimates the estimand with every estimator that targets it:
// difference in means, regression adjustment, ipw, ipw_normalized and aipw
// for the ATE, ATT and ATC; overlap_weighted for the ATO.
func (sc *Scores) Effects(target Estimand, cells ...*Cells) *Estimates {
	es := &Estimates{Estimand: target}
	if err := sc.Err(); err != nil {
		es.err = err
		return es
	}
	if err := checkEstimand(target); err != nil {
		es.err = err
		return es
	}
	// The support of the target is judged once for all the estimators.
	var once sync.Once
	var reason string
	why := func() string {
		once.Do(func() { reason = sc.unsupported(target, cells) })
		return reason
	}
	for _, est := range AllEstimators {
		if est.targets(target) {
			es.Items = append(es.Items, sc.effect(EffectOptions{}, est, target, cells, why))
		}
	}
	return es
}

// String is the terminal view of one effect.
func (e *Effect) String() string {
	if e == nil {
		return "effect: nil Effect"
	}
	if e == nil {
		return "effect: nil"
	}
	if e.err != nil {
		return fmt.Sprintf("%s %s: %v", e.Estimator, e.Estimand, e.err)
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%s %s = %s", e.Estimator, e.Estimand, fmtG(e.Value))
	if math.IsNaN(e.SE) {
		fmt.Fprintf(&b, " (SE not available)")
	} else {
		fmt.Fprintf(&b, " (SE %s, %s; 95%% CI [%s, %s])", fmtG(e.SE), e.SEMethod, fmtG(e.CI95.Lo), fmtG(e.CI95.Hi))
	}
	fmt.Fprintf(&b, ", n = %d (%d treated, %d control)\n", e.N, e.NTreated, e.NControl)
	fmt.Fprintf(&b, "  population: %s\n", e.Population)
	if !e.Supported {
		fmt.Fprintf(&b, "  NOT SUPPORTED BY THE DATA: %s\n", e.Unsupported)
	}
	for _, f := range e.Flags {
		if f.Code == "unsupported_estimand" {
			continue
		}
		fmt.Fprintf(&b, "  %s: %s\n", strings.ToUpper(strings.ReplaceAll(f.Code, "_", " ")), f.Message)
	}
	for _, n := range e.Notes {
		fmt.Fprintf(&b, "  note: %s\n", n)
	}
	return b.String()
}

// fmtG formats a number with 6 significant digits, without exponent for
// ordinary magnitudes.
func fmtG(v float64) string {
	if math.IsNaN(v) {
		return "NaN"
	}
	a := math.Abs(v)
	if a != 0 && (a >= 1e9 || a < 1e-4) {
		return fmt.Sprintf("%.5g", v)
	}
	s := fmt.Sprintf("%.6g", v)
	if strings.Contains(s, "e") {
		return fmt.Sprintf("%.4f", v)
	}
	return s
}

// effectJSON has the field names of the report's "estimates" entries.
type effectJSON struct {
	Estimator   string   `json:"estimator"`
	Estimand    string   `json:"estimand"`
	Value       Num      `json:"value"`
	SE          Num      `json:"se"`
	CI95        *[2]Num  `json:"ci95"`
	SEMethod    string   `json:"se_method"`
	N           int      `json:"n"`
	NTreated    int      `json:"n_treated"`
	NControl    int      `json:"n_control"`
	Population  string   `json:"population"`
	Supported   bool     `json:"supported"`
	Unsupported string   `json:"unsupported_reason,omitempty"`
	Flags       []Flag   `json:"flags"`
	Notes       []string `json:"notes"`
	NullReason  string   `json:"null_reason,omitempty"`
	Error       string   `json:"error,omitempty"`
	Status      string   `json:"status,omitempty"` // "failed" with Error
}

func (e *Effect) toJSON() effectJSON {
	j := effectJSON{Estimator: e.Estimator.String(), Estimand: e.Estimand.String(), Value: Num(e.Value), SE: Num(e.SE),
		SEMethod: e.SEMethod, N: e.N, NTreated: e.NTreated, NControl: e.NControl, Population: e.Population,
		Supported: e.Supported, Unsupported: e.Unsupported, Flags: append([]Flag{}, e.Flags...), Notes: append([]string{}, e.Notes...)}
	if e.err != nil {
		j.Error, j.Status = e.err.Error(), "failed"
		j.NullReason = "not estimated: " + e.err.Error()
		j.Supported = false
		return j
	}
	if !math.IsNaN(e.CI95.Lo) {
		j.CI95 = &[2]Num{Num(e.CI95.Lo), Num(e.CI95.Hi)}
	}
	switch {
	case Num(e.Value).IsNull():
		j.NullReason = "the estimate is not a finite number"
	case Num(e.SE).IsNull():
		j.NullReason = "se and ci95 are null: the standard error could not be computed (see flags)"
	}
	return j
}

// MarshalJSON writes the effect with the field names of the report's
// "estimates" entries (estimator, estimand, value, se, ci95, se_method, n)
// and the flags; a value that cannot be given is null with null_reason.
func (e *Effect) MarshalJSON() ([]byte, error) {
	if e == nil {
		return failedJSON(errors.New("nil Effect"))
	}
	return json.Marshal(e.toJSON())
}

// MarshalJSON writes the array of estimate entries.
func (es *Estimates) MarshalJSON() ([]byte, error) {
	if err := es.Err(); err != nil {
		return failedJSON(err)
	}
	out := make([]effectJSON, 0, len(es.Items))
	for _, e := range es.Items {
		out = append(out, e.toJSON())
	}
	return json.Marshal(out)
}

func (es *Estimates) firstItemFlags() []Flag {
	for _, e := range es.Items {
		if e.err == nil {
			return e.Flags
		}
	}
	return nil
}

// String is the terminal table.
func (es *Estimates) String() string {
	if err := es.Err(); err != nil {
		return "estimates: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Estimates of the %s (%s)\n", es.Estimand, es.Estimand.population())
	fmt.Fprintf(&b, "  %-22s %12s %12s %27s  %-20s %s\n", "estimator", "estimate", "SE", "95% CI", "SE method", "")
	var flagged []string
	for _, e := range es.Items {
		if e.err != nil {
			fmt.Fprintf(&b, "  %-22s not estimated: %v\n", e.Estimator, e.err)
			continue
		}
		ci := "—"
		if !math.IsNaN(e.CI95.Lo) {
			ci = fmt.Sprintf("[%s, %s]", fmtG(e.CI95.Lo), fmtG(e.CI95.Hi))
		}
		mark := ""
		if !e.Supported {
			mark = "NOT SUPPORTED"
		}
		fmt.Fprintf(&b, "  %-22s %12s %12s %27s  %-20s %s\n", e.Estimator, fmtG(e.Value), fmtG(e.SE), ci, e.SEMethod, mark)
		if !e.Supported && len(flagged) == 0 {
			flagged = append(flagged, e.Unsupported)
		}
	}
	if len(flagged) > 0 {
		fmt.Fprintf(&b, "  The data do not support the %s: %s\n", es.Estimand, flagged[0])
	}
	for _, f := range es.firstItemFlags() {
		if f.Code == "constant_outcome" {
			fmt.Fprintf(&b, "  %s\n", f.Message)
		}
	}
	fmt.Fprintf(&b, "  These estimates assume no unmeasured confounding, which the data cannot verify; they depend on the covariates measured.\n")
	return b.String()
}
