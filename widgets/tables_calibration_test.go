package widgets

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// The Scores view carries the calibration table with the numbers of
// causal.CalibrationTest: on a model that omits a strong quadratic term the
// tail deciles are flagged, and the text face says the same.
func TestScoresViewCalibrationTable(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	const n = 2000
	x := make([]float64, n)
	tr := make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64()
		if r.Float64() < 1/(1+math.Exp(1-0.5*x[i]-0.8*x[i]*x[i])) {
			tr[i] = 1
		}
	}
	sc := causal.FromColumns([]string{"x", "t"}, map[string][]float64{"x": x, "t": tr}, nil).Treat("t").Adjust("x").Propensity()
	c := sc.CalibrationTest()
	if len(c.TailMiscalibrated()) == 0 {
		t.Fatalf("no tail flagged on a model missing x²:\n%s", c)
	}
	h := HTML(sc)
	for _, want := range []string{"Calibration: Hosmer–Lemeshow (1980) C = ", "df 8", "miscalibrated: p = ", "add terms to the propensity model", "decile of risk"} {
		if !strings.Contains(h, want) {
			t.Errorf("Scores view lacks %q", want)
		}
	}
	if !strings.Contains(c.String(), "MISCALIBRATED") {
		t.Errorf("text face does not flag the tail:\n%s", c)
	}
	// NSW (randomised): no tail flagged.
	nsw := causal.Load("../testdata/nsw_dehejia_wahba.csv").Treat("treat").Adjust("age", "educ", "black", "hisp", "married", "nodegr", "re74", "re75").Propensity()
	if h := HTML(nsw); strings.Contains(h, "miscalibrated") || !strings.Contains(h, "p = 0.306") {
		t.Errorf("NSW calibration table wrong: flagged, or the Hosmer–Lemeshow p of R (0.306) missing")
	}
}

// The extrapolation view names the leverage rule, as the text and JSON do.
func TestExtrapolationViewNamesLeverageRule(t *testing.T) {
	a := causal.Load("../testdata/nsw_dehejia_wahba.csv").Treat("treat").Outcome("re78").Adjust("age", "educ", "re75").Propensity().Extrapolation(causal.ATE)
	if h := HTML(a); !strings.Contains(h, "regressor variable hull") {
		t.Error("extrapolation view does not name the leverage rule")
	}
}
