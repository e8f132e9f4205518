package causal

import (
	"encoding/json"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/counterpartlab/counterpart/causal/scenario"
)

func extrapolationScores(t *testing.T, separation float64) *Scores {
	t.Helper()
	d, err := scenario.Extrapolation(5, 2000, separation)
	if err != nil {
		t.Fatal(err)
	}
	f, err := NewFrame(d.Names, d.Num, d.Str)
	if err != nil {
		t.Fatal(err)
	}
	sc := FromSource(f).Treat("t").Outcome("y").Adjust("x").Propensity()
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	return sc
}

// The maximum leverage of each arm equals the largest diagonal of the hat
// matrix Q Q' from an independent QR factorisation of the arm's design
// (gonum mat.QR), on the NSW data.
func TestLeverageMatchesQR(t *testing.T) {
	sc := nswStudy().Propensity()
	a := sc.Extrapolation(ATE)
	if a.Err() != nil {
		t.Fatal(a.Err())
	}
	d := sc.Design
	for k, arm := range []float64{1, 0} {
		var rows []float64
		m := 0
		for i := 0; i < d.N; i++ {
			if d.T[i] == arm {
				rows = append(rows, d.X[i*d.P:(i+1)*d.P]...)
				m++
			}
		}
		var qr mat.QR
		qr.Factorize(mat.NewDense(m, d.P, rows))
		var q mat.Dense
		qr.QTo(&q)
		var hmax float64
		for i := 0; i < m; i++ {
			var h float64
			for j := 0; j < d.P; j++ {
				h += q.At(i, j) * q.At(i, j)
			}
			hmax = math.Max(hmax, h)
		}
		relClose(t, a.Models[k].Model+" max leverage vs QR hat diagonal", a.Models[k].MaxLeverage, hmax, 1e-9)
	}
	// Randomised NSW: few predictions leave the other arm's data.
	for _, m := range a.Models {
		if m.Share > 0.1 {
			t.Errorf("%s: %.1f%% of NSW predictions flagged as extrapolation", m.Model, 100*m.Share)
		}
	}
	relClose(t, "audit's full estimate = regression adjustment (R)", a.Full.Value, 1621.5836237966905, 1e-9)
}

// scenario.Extrapolation: one covariate, arms centred ±separation/2, a
// curved outcome and a true effect of 2. Apart, a large share of the
// counterfactual predictions lies outside the other arm's range and the
// linear fits extrapolate; overlapping, almost none does.
func TestExtrapolationAudit(t *testing.T) {
	far := extrapolationScores(t, 4).Extrapolation(ATE)
	near := extrapolationScores(t, 0).Extrapolation(ATE)
	if far.Err() != nil || near.Err() != nil {
		t.Fatal(far.Err(), near.Err())
	}
	for k := range far.Models {
		if far.Models[k].Share < 0.2 || near.Models[k].Share > 0.02 {
			t.Errorf("%s: unsupported share %.3f apart, %.3f overlapping", far.Models[k].Model, far.Models[k].Share, near.Models[k].Share)
		}
		if far.Models[k].Predictions != 1000 || far.Models[k].FitN != 1000 {
			t.Errorf("predictions %d, fit n %d", far.Models[k].Predictions, far.Models[k].FitN)
		}
	}
	// The share grows with the distance between the arms.
	mid := extrapolationScores(t, 2).Extrapolation(ATE)
	if !(near.Models[0].Share < mid.Models[0].Share && mid.Models[0].Share < far.Models[0].Share) {
		t.Errorf("f1 unsupported share not increasing with separation: %.3f %.3f %.3f", near.Models[0].Share, mid.Models[0].Share, far.Models[0].Share)
	}
	// The restricted estimate is over fewer units and says so; the supported
	// units are exactly the target units with no unsupported prediction.
	r := far.Restricted
	if r.Err() != nil || far.SupportedN >= far.TargetN || !r.HasFlag("restricted_population") || !strings.Contains(r.Population, "of 2000") {
		t.Fatalf("restricted: %v %d/%d %+v", r.Err(), far.SupportedN, far.TargetN, r.Flags)
	}
	if far.TargetN-far.SupportedN != far.Models[0].Unsupported+far.Models[1].Unsupported {
		t.Errorf("supported %d of %d, unsupported %d + %d", far.SupportedN, far.TargetN, far.Models[0].Unsupported, far.Models[1].Unsupported)
	}
	t.Logf("separation 4: full RA %.3f, over supported units %.3f (true 2; curved outcome, linear fits)", far.Full.Value, r.Value)
	if math.IsNaN(r.SE) || r.SE <= far.Full.SE*0.5 {
		t.Errorf("restricted SE %g vs full %g", r.SE, far.Full.SE)
	}
	// ATT: only f0 predicts counterfactuals.
	att := extrapolationScores(t, 4).Extrapolation(ATT)
	if att.Models[0].Predictions != 0 || att.Models[1].Predictions != 1000 || att.TargetN != 1000 {
		t.Errorf("ATT audit: %+v", att.Models)
	}
	wantErr(t, extrapolationScores(t, 4).Extrapolation(ATO).Err(), "ATO")
	if _, err := json.Marshal(far); err != nil {
		t.Error(err)
	}
	if !strings.Contains(far.String(), "unsupported") {
		t.Errorf("text:\n%s", far)
	}
}

func TestExtrapolationCurve(t *testing.T) {
	a := extrapolationScores(t, 4).Extrapolation(ATE)
	c := a.Curve("x")
	if c.Err() != nil {
		t.Fatal(c.Err())
	}
	if len(c.X) != CurvePoints || len(c.F1) != CurvePoints || len(c.F0Band) != CurvePoints {
		t.Fatalf("grid %d", len(c.X))
	}
	if len(c.Treated) > MaxCurvePoints || len(c.Control) > MaxCurvePoints || c.TreatedTotal != 1000 || c.ControlTotal != 1000 {
		t.Errorf("points %d/%d of %d/%d", len(c.Treated), len(c.Control), c.TreatedTotal, c.ControlTotal)
	}
	// Controls sit low and treated units high: f1 is unsupported at the low
	// end, f0 at the high end.
	if len(c.Unsupported1) == 0 || c.Unsupported1[0].Lo != c.X[0] || len(c.Unsupported0) == 0 || c.Unsupported0[len(c.Unsupported0)-1].Hi < c.X[len(c.X)-1]-1e-9 {
		t.Errorf("unsupported regions f1 %v, f0 %v over [%g, %g]", c.Unsupported1, c.Unsupported0, c.X[0], c.X[len(c.X)-1])
	}
	// The line is the model: f1 at the grid equals the OLS prediction.
	for g := range c.X {
		if !(c.F1Band[g].Lo <= c.F1[g] && c.F1[g] <= c.F1Band[g].Hi) {
			t.Fatalf("band does not contain the line at %d", g)
		}
	}
	b, err := json.Marshal(c)
	if err != nil || len(b) > 200000 {
		t.Errorf("payload %d bytes, %v", len(b), err)
	}
	wantErr(t, a.Curve("z").Err(), "not a covariate", "x")
	w := Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "pool").Propensity().Extrapolation(ATE)
	wantErr(t, w.Curve("pool").Err(), "categorical", "household_size")
	if wc := w.Curve("lot_m2"); wc.Err() != nil || len(wc.Held) != 2 || wc.Held[1].Term != "pool=yes" || wc.Held[1].Value != 0 {
		t.Errorf("held values %+v %v", wc.Held, wc.Err())
	}
}

// The restricted estimate averages over the supported target units only, and
// says how many they are.
func TestExtrapolationRestrictedCountsSupportedUnits(t *testing.T) {
	s := Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "home_age", "last_summer_lpd", "pool", "district", "income_band")
	a := s.Propensity().Extrapolation(ATE)
	if a.Err() != nil {
		t.Fatal(a.Err())
	}
	r := a.Restricted
	if r.N != a.SupportedN || r.NTreated+r.NControl != r.N || a.SupportedN >= a.TargetN {
		t.Errorf("restricted effect over %d units (%d treated, %d control); %d of %d target units supported", r.N, r.NTreated, r.NControl, a.SupportedN, a.TargetN)
	}
}
