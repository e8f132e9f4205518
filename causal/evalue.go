package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
)

// EValue is the sensitivity of an estimate to unmeasured confounding
// (VanderWeele & Ding 2017): the minimum strength of association, on the
// risk-ratio scale, that an unmeasured confounder would need with both the
// treatment and the outcome, conditional on the measured covariates, to
// explain away the estimate. For a risk ratio RR ≥ 1
//
//	E = RR + √(RR·(RR − 1))
//
// and for RR < 1 the same with 1/RR. Limit is the E-value of the confidence
// limit nearest the null (1 when the interval includes the null): the
// strength needed to move the interval to include 1.
type EValue struct {
	RR    float64  // risk ratio (or its approximation)
	CI    Interval // 95% interval on the same scale (NaN when not known)
	Point float64  // E-value of RR
	Limit float64  // E-value of the CI limit nearest 1 (NaN when CI unknown)
	// Scale says what RR is: "risk ratio", "risk ratio of the estimated
	// potential-outcome means" (0/1 outcome) or "approximate risk ratio
	// exp(0.91·d)" (continuous outcome).
	Scale string
	// Approximate is true for the continuous-outcome approximation; D and
	// DSE are then the standardized effect and its SE.
	Approximate bool
	D, DSE      float64
	err         error
}

// Err returns why no E-value could be computed, or nil.
func (e *EValue) Err() error {
	if e == nil {
		return errors.New("nil EValue")
	}
	return e.err
}

// evalueRR is RR + √(RR(RR − 1)) after turning a protective RR into 1/RR.
func evalueRR(rr float64) float64 {
	if rr < 1 {
		rr = 1 / rr
	}
	return rr + math.Sqrt(rr*(rr-1))
}

// EValueRR computes the E-value of a risk ratio and of its confidence limit
// nearest the null (VanderWeele & Ding 2017). lo and hi may be NaN when no
// interval is known.
func EValueRR(rr, lo, hi float64) *EValue {
	ev := &EValue{RR: rr, CI: Interval{lo, hi}, Scale: "risk ratio", D: math.NaN(), DSE: math.NaN(), Limit: math.NaN()}
	if math.IsNaN(rr) || math.IsInf(rr, 0) || rr <= 0 {
		ev.err = fmt.Errorf("e-value: the risk ratio %g must be a positive finite number", rr)
		ev.Point = math.NaN()
		return ev
	}
	if !math.IsNaN(lo) && !math.IsNaN(hi) && (lo > rr || hi < rr || lo <= 0) {
		ev.err = fmt.Errorf("e-value: the interval [%g, %g] must be positive and contain the risk ratio %g", lo, hi, rr)
		ev.Point = math.NaN()
		return ev
	}
	ev.Point = evalueRR(rr)
	switch {
	case math.IsNaN(lo) || math.IsNaN(hi):
	case lo <= 1 && hi >= 1:
		ev.Limit = 1
	case rr > 1:
		ev.Limit = evalueRR(lo)
	default:
		ev.Limit = evalueRR(hi)
	}
	return ev
}

// EValue is the E-value of the effect. For a 0/1 outcome the risk ratio is
// μ1/μ0, the ratio of the estimated potential-outcome means in the target
// population, with a delta-method interval exp(log RR ± 1.96·SE) where
// Var(log RR) = Var μ1/μ1² + Var μ0/μ0² − 2 Cov/(μ1 μ0). For any other
// outcome it uses the approximation of VanderWeele & Ding (2017),
// RR ≈ exp(0.91·d), with d = effect / SD the standardized effect (SD: the
// pooled within-arm standard deviation of the outcome) and the interval
// exp(0.91·d ± 0.91·1.96·SE/SD) — labelled as an approximation.
func (e *Effect) EValue() *EValue {
	nan := math.NaN()
	ev := &EValue{RR: nan, CI: Interval{nan, nan}, Point: nan, Limit: nan, D: nan, DSE: nan}
	if err := e.Err(); err != nil {
		ev.err = err
		return ev
	}
	if e.outcomeBinary {
		if !(e.Mu1 > 0 && e.Mu0 > 0) {
			ev.err = fmt.Errorf("e-value: the estimated risks (%.4g treated, %.4g control) must be positive for a risk ratio", e.Mu1, e.Mu0)
			return ev
		}
		rr := e.Mu1 / e.Mu0
		lo, hi := nan, nan
		v := e.MuCov[0]/(e.Mu1*e.Mu1) + e.MuCov[1]/(e.Mu0*e.Mu0) - 2*e.MuCov[2]/(e.Mu1*e.Mu0)
		if v >= 0 {
			s := math.Sqrt(v)
			lo, hi = rr*math.Exp(-z975*s), rr*math.Exp(z975*s)
		}
		out := EValueRR(rr, lo, hi)
		out.Scale = "risk ratio of the estimated potential-outcome means (0/1 outcome)"
		return out
	}
	if !(e.sdPooled > 0) {
		ev.err = errors.New("e-value: the outcome has no spread within the arms: the standardized effect is not defined")
		return ev
	}
	d := e.Value / e.sdPooled
	dse := e.SE / e.sdPooled
	rr := math.Exp(0.91 * d)
	lo, hi := nan, nan
	if !math.IsNaN(dse) {
		lo, hi = math.Exp(0.91*d-0.91*z975*dse), math.Exp(0.91*d+0.91*z975*dse)
	}
	out := EValueRR(rr, lo, hi)
	out.Scale = "approximate risk ratio exp(0.91·d), d = effect / pooled SD of the outcome (continuous outcome; VanderWeele & Ding 2017)"
	out.Approximate = true
	out.D, out.DSE = d, dse
	return out
}

// String is the terminal view.
func (e *EValue) String() string {
	if err := e.Err(); err != nil {
		return "evalue: " + err.Error()
	}
	var b strings.Builder
	approx := ""
	if e.Approximate {
		approx = " (APPROXIMATION)"
	}
	fmt.Fprintf(&b, "E-value (VanderWeele & Ding 2017)%s\n", approx)
	fmt.Fprintf(&b, "  %s: %s", e.Scale, fmtG(e.RR))
	if !math.IsNaN(e.CI.Lo) {
		fmt.Fprintf(&b, ", 95%% CI [%s, %s]", fmtG(e.CI.Lo), fmtG(e.CI.Hi))
	}
	fmt.Fprintf(&b, "\n  E-value of the estimate: %.2f", e.Point)
	if !math.IsNaN(e.Limit) {
		fmt.Fprintf(&b, "; of the CI limit nearest the null: %.2f", e.Limit)
	}
	fmt.Fprintf(&b, "\n  An unmeasured confounder associated with both treatment and outcome by a risk ratio of %.2f each, beyond the measured covariates, could explain the estimate away; weaker confounding could not.\n", e.Point)
	return b.String()
}

// MarshalJSON is the pipeline view.
func (e *EValue) MarshalJSON() ([]byte, error) {
	if err := e.Err(); err != nil {
		return failedJSON(err)
	}
	var ci *[2]Num
	if !math.IsNaN(e.CI.Lo) {
		ci = &[2]Num{Num(e.CI.Lo), Num(e.CI.Hi)}
	}
	return json.Marshal(struct {
		RR          Num     `json:"rr"`
		CI          *[2]Num `json:"rr_ci95"`
		Point       Num     `json:"evalue"`
		Limit       Num     `json:"evalue_ci"`
		Scale       string  `json:"scale"`
		Approximate bool    `json:"approximate"`
		D           Num     `json:"standardized_effect"`
	}{Num(e.RR), ci, Num(e.Point), Num(e.Limit), e.Scale, e.Approximate, Num(e.D)})
}
