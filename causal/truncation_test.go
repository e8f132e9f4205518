package causal

import (
	"encoding/json"
	"os"
	"strings"
	"testing"
)

// Reference: nsw_reference.R section 8b: ATE weights from R's glm truncated
// at the pooled percentiles of the stabilised weights (Cole & Hernán 2008)
// and, for the option, within each arm — bounds per arm to 1e-6 relative,
// the number of weights moved exactly, the Kish ESS after truncation to
// 1e-6 relative.
func TestTruncationMatchesR(t *testing.T) {
	b, err := os.ReadFile("../testdata/reference/nsw_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	type refT struct {
		Lo      float64    `json:"lo_percentile"`
		Hi      float64    `json:"hi_percentile"`
		Pooled  bool       `json:"pooled"`
		Treated [2]float64 `json:"treated_bounds"`
		Control [2]float64 `json:"control_bounds"`
		Changed int        `json:"changed"`
		ESS1    float64    `json:"ess_treated"`
		ESS0    float64    `json:"ess_control"`
	}
	var ref struct {
		Truncation map[string]refT `json:"truncation"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	water, nsw := waterStudy().Propensity().Weights(ATE), nswStudy().Propensity().Weights(ATE)
	for name, w := range map[string]*Weights{"water_ate_pooled_1_99": water, "water_ate_within_arms_1_99": water, "nsw_ate_pooled_5_95": nsw} {
		r, ok := ref.Truncation[name]
		if !ok {
			t.Fatalf("no reference %s", name)
		}
		tw := w.Truncate(r.Lo, r.Hi)
		if !r.Pooled {
			tw = w.TruncateWithinArms(r.Lo, r.Hi)
		}
		if tw.Err() != nil {
			t.Fatal(tw.Err())
		}
		tr := tw.Truncation
		if tr.Pooled != r.Pooled || tr.Changed != r.Changed {
			t.Errorf("%s: pooled %v, %d moved; R: %v, %d", name, tr.Pooled, tr.Changed, r.Pooled, r.Changed)
		}
		relClose(t, name+" treated floor", tr.Treated.Lo, r.Treated[0], 1e-6)
		relClose(t, name+" treated cap", tr.Treated.Hi, r.Treated[1], 1e-6)
		relClose(t, name+" control floor", tr.Control.Lo, r.Control[0], 1e-6)
		relClose(t, name+" control cap", tr.Control.Hi, r.Control[1], 1e-6)
		relClose(t, name+" ESS treated", tw.ESSTreated, r.ESS1, 1e-6)
		relClose(t, name+" ESS control", tw.ESSControl, r.ESS0, 1e-6)
		want := "pooled percentiles"
		if !r.Pooled {
			want = "within each arm"
		}
		if !strings.Contains(tw.String(), want) {
			t.Errorf("%s: text does not say %q:\n%s", name, want, tw)
		}
	}
}
