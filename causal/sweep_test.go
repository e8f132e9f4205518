package causal

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

func TestSweep(t *testing.T) {
	sc := waterStudy().Propensity()
	s := sc.Sweep(AIPW, ATE)
	if s.Err() != nil {
		t.Fatal(s.Err())
	}
	if len(s.Rows) != 21 || s.Rows[20].Alpha != 0.2 || s.Rows[1].Alpha != 0.01 {
		t.Fatalf("grid %d rows", len(s.Rows))
	}
	// α = 0 is the untrimmed analysis.
	if e := sc.Effect(AIPW, ATE); s.Rows[0].Value != e.Value || s.Rows[0].SE != e.SE || s.Rows[0].KeptTreated != 1048 {
		t.Errorf("α = 0 row %+v, effect %g", s.Rows[0], e.Value)
	}
	prev := 4001
	for _, r := range s.Rows {
		tr := sc.Trim(Symmetric(r.Alpha))
		if r.KeptTreated != tr.KeptTreated || r.KeptControl != tr.KeptControl {
			t.Errorf("α %g: kept %d/%d, Trim %d/%d", r.Alpha, r.KeptTreated, r.KeptControl, tr.KeptTreated, tr.KeptControl)
		}
		if k := r.KeptTreated + r.KeptControl; k > prev {
			t.Errorf("α %g keeps more units (%d) than a smaller α (%d)", r.Alpha, k, prev)
		} else {
			prev = k
		}
		if r.Err != "" || math.IsNaN(r.Value) || math.IsNaN(r.MaxAbsSMD) {
			t.Errorf("α %g: %s", r.Alpha, r.Err)
		}
	}
	// R reference (nsw_reference.R section 7): trimming at 0.1 then AIPW.
	ref := loadTrimRef(t)
	for _, r := range ref.Symmetric.Estimates {
		if r.Estimator == "aipw" {
			relClose(t, "sweep row α = 0.1 vs R", s.Rows[10].Value, r.Value, 1e-6)
		}
	}
	// Overlap weights refitted on each trimmed sample balance exactly (Li,
	// Morgan & Zaslavsky 2018): max |SMD| is 0 in every row.
	o := sc.Sweep(OverlapWeighted, ATO, 0, 0.05, 0.1)
	for _, r := range o.Rows {
		if r.MaxAbsSMD > 1e-8 {
			t.Errorf("overlap weights after trimming at %g: max |SMD| %g", r.Alpha, r.MaxAbsSMD)
		}
	}
	// A too large α empties an arm: that row carries the error, the others stand.
	x := nswStudy().Propensity().Sweep(IPWNormalized, ATE, 0.1, 0.499)
	if x.Err() != nil || x.Rows[1].Err == "" || x.Rows[0].Err != "" || !math.IsNaN(x.Rows[1].Value) {
		t.Errorf("rows %+v", x.Rows)
	}
	wantErr(t, sc.Sweep(AIPW, ATE, 0.6).Err(), "[0, 0.5)")
	b, err := json.Marshal(x)
	if err != nil || !strings.Contains(string(b), `"value":null`) || !strings.Contains(string(b), `"error":`) {
		t.Errorf("JSON %s %v", b, err)
	}
	if !strings.Contains(s.String(), "different population") {
		t.Errorf("text:\n%s", s)
	}
}
