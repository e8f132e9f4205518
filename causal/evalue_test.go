package causal

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

func TestEValue(t *testing.T) {
	// VanderWeele & Ding (2017) worked example (values recalled from
	// memory; the formula decides): RR = 3.9 gives 7.26, its lower
	// confidence limit 1.8 gives 3.00.
	e := EValueRR(3.9, 1.8, 8.7)
	if e.Err() != nil {
		t.Fatal(e.Err())
	}
	absClose(t, "E-value RR 3.9 (VanderWeele & Ding 2017)", e.Point, 7.26, 0.005)
	relClose(t, "E-value formula RR + sqrt(RR(RR-1))", e.Point, 3.9+math.Sqrt(3.9*2.9), 1e-15)
	absClose(t, "E-value of the CI limit 1.8", e.Limit, 3.0, 0.005)
	// Protective: RR < 1 is inverted; the upper limit is the one nearest 1.
	p := EValueRR(0.5, 0.3, 0.8)
	relClose(t, "E-value RR 0.5", p.Point, 2+math.Sqrt(2), 1e-15)
	relClose(t, "E-value upper limit 0.8", p.Limit, 1.25+math.Sqrt(1.25*0.25), 1e-15)
	if EValueRR(1.4, 0.9, 2.1).Limit != 1 {
		t.Error("interval including 1 must give an E-value of 1 for the limit")
	}
	if x := EValueRR(2, math.NaN(), math.NaN()); x.Err() != nil || !math.IsNaN(x.Limit) {
		t.Errorf("no interval: %v %g", x.Err(), x.Limit)
	}
	for _, bad := range [][3]float64{{0, 0, 0}, {-1, 1, 2}, {2, 3, 4}, {math.Inf(1), 1, 2}} {
		if EValueRR(bad[0], bad[1], bad[2]).Err() == nil {
			t.Errorf("EValueRR%v accepted", bad)
		}
	}
	// Continuous outcome: the approximation RR ≈ exp(0.91 d), labelled.
	eff := nswStudy().Propensity().Effect(AIPW, ATE)
	c := eff.EValue()
	if c.Err() != nil || !c.Approximate || !strings.Contains(c.Scale, "approximate") || !strings.Contains(c.String(), "APPROXIMATION") {
		t.Fatalf("continuous: %v %+v", c.Err(), c)
	}
	relClose(t, "d = effect / pooled SD", c.D, eff.Value/eff.sdPooled, 1e-12)
	relClose(t, "RR = exp(0.91 d)", c.RR, math.Exp(0.91*c.D), 1e-12)
	// The effect's interval excludes 0, so the RR interval excludes 1 and
	// the limit's E-value exceeds 1: exp(0.91·(CI bound)/SD).
	relClose(t, "RR lower limit", c.CI.Lo, math.Exp(0.91*eff.CI95.Lo/eff.sdPooled), 1e-9)
	if !(c.CI.Lo > 1 && c.Limit > 1 && c.Limit < c.Point) {
		t.Errorf("NSW: RR interval %+v, E-values %g / %g", c.CI, c.Point, c.Limit)
	}
	b, err := json.Marshal(c)
	if err != nil || !strings.Contains(string(b), `"approximate":true`) {
		t.Errorf("JSON %s %v", b, err)
	}
}

// A 0/1 outcome: RR from the estimated potential-outcome means, delta-method
// interval on the log scale.
func TestEValueBinaryOutcome(t *testing.T) {
	f, err := ReadCSV("../testdata/nsw_dehejia_wahba.csv")
	if err != nil {
		t.Fatal(err)
	}
	num := map[string][]float64{}
	for _, name := range append(append([]string{}, nswCovariates...), "treat") {
		c, _ := f.Column(name)
		num[name] = c.Num
	}
	re78, _ := f.Column("re78")
	emp := make([]float64, len(re78.Num))
	for i, v := range re78.Num {
		if v > 0 {
			emp[i] = 1
		}
	}
	num["employed78"] = emp
	fr, _ := NewFrame(nil, num, nil)
	sc := FromSource(fr).Treat("treat").Outcome("employed78").Adjust(nswCovariates...).Propensity()
	e := sc.Effect(IPWNormalized, ATE)
	ev := e.EValue()
	if ev.Err() != nil || ev.Approximate {
		t.Fatalf("%v %+v", ev.Err(), ev)
	}
	relClose(t, "RR = μ1/μ0", ev.RR, e.Mu1/e.Mu0, 1e-12)
	v := e.MuCov[0]/(e.Mu1*e.Mu1) + e.MuCov[1]/(e.Mu0*e.Mu0) - 2*e.MuCov[2]/(e.Mu1*e.Mu0)
	relClose(t, "upper limit", ev.CI.Hi, ev.RR*math.Exp(1.959963984540054*math.Sqrt(v)), 1e-12)
	relClose(t, "E-value", ev.Point, evalueRR(ev.RR), 1e-15)
}
