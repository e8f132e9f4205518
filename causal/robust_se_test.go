package causal

import (
	"encoding/json"
	"os"
	"strings"
	"testing"
)

// Reference: nsw_reference.R (after section 5): the regression-adjustment
// SE with the HC0 (White 1980), HC1 and HC3 (MacKinnon & White 1985)
// covariances of both arm models, computed by formula in base R (lm,
// hatvalues, solve) on the NSW sample; values and SEs to 1e-6 relative.
func TestRegressionAdjustmentRobustSEMatchesR(t *testing.T) {
	b, err := os.ReadFile("../testdata/reference/nsw_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		HC []struct {
			Estimand   string  `json:"estimand"`
			Covariance string  `json:"covariance"`
			Value      float64 `json:"value"`
			SE         float64 `json:"se"`
		} `json:"regression_adjustment_hc"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.HC) != 9 {
		t.Fatalf("%d reference rows, want 9", len(ref.HC))
	}
	sc := nswStudy().Propensity()
	kinds := map[string]OLSCovariance{"HC0": HC0, "HC1": HC1, "HC3": HC3}
	targets := map[string]Estimand{"ATE": ATE, "ATT": ATT, "ATC": ATC}
	classical := map[Estimand]float64{}
	for _, r := range ref.HC {
		e := sc.EffectWith(EffectOptions{OutcomeCovariance: kinds[r.Covariance]}, RegressionAdjustment, targets[r.Estimand])
		if e.Err() != nil {
			t.Fatal(e.Err())
		}
		what := "regression adjustment " + r.Estimand + " " + r.Covariance
		relClose(t, what+" value", e.Value, r.Value, 1e-9)
		relClose(t, what+" SE", e.SE, r.SE, 1e-6)
		if want := "delta method (" + r.Covariance + ")"; e.SEMethod != want {
			t.Errorf("%s: SE method %q, want %q", what, e.SEMethod, want)
		}
		if !strings.Contains(strings.Join(e.Notes, " "), "heteroskedasticity-robust "+r.Covariance) {
			t.Errorf("%s: notes %q do not name the covariance", what, e.Notes)
		}
		if _, ok := classical[targets[r.Estimand]]; !ok {
			classical[targets[r.Estimand]] = sc.Effect(RegressionAdjustment, targets[r.Estimand]).SE
		}
		if e.SE == classical[targets[r.Estimand]] {
			t.Errorf("%s: SE equals the classical one", what)
		}
	}
	// Other estimators ignore the option; an unknown covariance is an error.
	a, b2 := sc.Effect(AIPW, ATE), sc.EffectWith(EffectOptions{OutcomeCovariance: HC3}, AIPW, ATE)
	if a.SE != b2.SE || a.SEMethod != b2.SEMethod {
		t.Errorf("AIPW changed with the outcome covariance option: %g %q vs %g %q", a.SE, a.SEMethod, b2.SE, b2.SEMethod)
	}
	if e := sc.EffectWith(EffectOptions{OutcomeCovariance: 9}, RegressionAdjustment, ATE); e.Err() == nil || !strings.Contains(e.Err().Error(), "HC3") {
		t.Errorf("unknown covariance accepted: %v", e.Err())
	}
}
