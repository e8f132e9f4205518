package causal

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"sort"
	"strings"
	"testing"
)

// trimRef is the "trimming" section of testdata/reference/nsw_reference.json
// (section 7 of nsw_reference.R: R's glm/lm on testdata/water_audits.csv).
type trimRef struct {
	GLMCoef []float64 `json:"glm_coef"`
	Crump   struct {
		Alpha        float64 `json:"alpha"`
		KeptTreatedJ int     `json:"kept_treated"`
		KeptControlJ int     `json:"kept_control"`
	} `json:"crump"`
	CrumpNSW   float64 `json:"crump_nsw_alpha"`
	Percentile struct {
		Lo, Hi       float64
		KeptTreatedJ int `json:"kept_treated"`
		KeptControlJ int `json:"kept_control"`
	} `json:"percentile_5_95"`
	Symmetric struct {
		KeptTreated int       `json:"kept_treated"`
		KeptControl int       `json:"kept_control"`
		RefitCoef   []float64 `json:"refit_coef"`
		Estimates   []struct {
			Estimator, Estimand string
			Value, SE           float64
		} `json:"estimates"`
	} `json:"symmetric_0.1"`
}

func loadTrimRef(t *testing.T) *trimRef {
	t.Helper()
	b, err := os.ReadFile("../testdata/reference/nsw_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		Trimming trimRef `json:"trimming"`
	}
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Trimming.GLMCoef) == 0 {
		t.Fatal("no trimming section in the reference JSON: rerun Rscript testdata/reference/nsw_reference.R")
	}
	return &r.Trimming
}

func waterStudy() *Study {
	return Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
}

// Reference: nsw_reference.R section 7 (R glm with epsilon 1e-14): Crump et
// al. (2009) optimal α, Stürmer et al. (2010) percentile bounds, kept
// counts, and the estimates after symmetric trimming at 0.1 with the
// propensity and outcome models refitted on the kept units — all to 1e-6.
func TestTrimMatchesR(t *testing.T) {
	ref := loadTrimRef(t)
	sc := waterStudy().Propensity()
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	for j, c := range sc.Coefficients() {
		relClose(t, "water glm coef "+sc.Terms[j].Name+" (R)", c, ref.GLMCoef[j], 1e-7)
	}
	cr := sc.Trim(CrumpOptimal())
	if cr.Err() != nil {
		t.Fatal(cr.Err())
	}
	relClose(t, "Crump optimal α (R: nsw_reference.R section 7)", cr.Alpha, ref.Crump.Alpha, 1e-6)
	if cr.KeptTreated != ref.Crump.KeptTreatedJ || cr.KeptControl != ref.Crump.KeptControlJ {
		t.Errorf("Crump kept %d/%d, R %d/%d", cr.KeptTreated, cr.KeptControl, ref.Crump.KeptTreatedJ, ref.Crump.KeptControlJ)
	}
	// Randomised NSW: max γ ≤ 2 mean γ, no trimming (R: crump_nsw_alpha = 0).
	if a := nswStudy().Propensity().Trim(CrumpOptimal()); a.Alpha != ref.CrumpNSW || a.DroppedTreated+a.DroppedControl != 0 {
		t.Errorf("NSW Crump α %g, dropped %d", a.Alpha, a.DroppedTreated+a.DroppedControl)
	}
	pc := sc.Trim(Percentile(5, 95))
	relClose(t, "Stürmer lower bound (R quantile type 7)", pc.Keep.Lo, ref.Percentile.Lo, 1e-7)
	relClose(t, "Stürmer upper bound (R quantile type 7)", pc.Keep.Hi, ref.Percentile.Hi, 1e-7)
	if pc.KeptTreated != ref.Percentile.KeptTreatedJ || pc.KeptControl != ref.Percentile.KeptControlJ {
		t.Errorf("percentile kept %d/%d, R %d/%d", pc.KeptTreated, pc.KeptControl, ref.Percentile.KeptTreatedJ, ref.Percentile.KeptControlJ)
	}
	tr := sc.Trim(Symmetric(0.1))
	if tr.Err() != nil {
		t.Fatal(tr.Err())
	}
	if tr.KeptTreated != ref.Symmetric.KeptTreated || tr.KeptControl != ref.Symmetric.KeptControl {
		t.Errorf("symmetric 0.1 kept %d/%d, R %d/%d", tr.KeptTreated, tr.KeptControl, ref.Symmetric.KeptTreated, ref.Symmetric.KeptControl)
	}
	for j, c := range tr.Scores.Coefficients() {
		relClose(t, "refit coef "+tr.Scores.Terms[j].Name+" (R glm on the kept units)", c, ref.Symmetric.RefitCoef[j], 1e-7)
	}
	if len(ref.Symmetric.Estimates) != 4 {
		t.Fatalf("%d reference estimates", len(ref.Symmetric.Estimates))
	}
	for _, r := range ref.Symmetric.Estimates {
		est, _ := ParseEstimator(r.Estimator)
		target, _ := ParseEstimand(r.Estimand)
		e := tr.Effect(est, target)
		if e.Err() != nil {
			t.Fatal(e.Err())
		}
		relClose(t, r.Estimator+" after trimming (R)", e.Value, r.Value, 1e-6)
		relClose(t, r.Estimator+" SE after trimming (R)", e.SE, r.SE, 1e-6)
		if !e.HasFlag("trimmed_population") || !strings.Contains(e.Population, "kept units") {
			t.Errorf("%s after trimming does not say the estimand changed: %q %+v", r.Estimator, e.Population, e.Flags)
		}
	}
	if !strings.Contains(tr.String(), "the estimand has changed") || !strings.Contains(tr.Population, "not to the original 4000 units") {
		t.Errorf("trimmed view does not state the change of estimand:\n%s", tr)
	}
}

// Crump's α minimises the empirical variance Σ_{γ≤c} γ / #{γ≤c}² over all
// thresholds (checked by brute force over every candidate cut) and solves
// their first-order condition c = 2·mean(γ | γ ≤ c) within its bracket.
func TestCrumpAlphaCondition(t *testing.T) {
	e := waterStudy().Propensity().E
	alpha, c := crumpAlpha(e)
	g := make([]float64, len(e))
	for i, v := range e {
		g[i] = 1 / (v * (1 - v))
	}
	sort.Float64s(g)
	best, bestV := 0, math.Inf(1)
	for k := 1; k <= len(g); k++ {
		var s float64
		for _, v := range g[:k] {
			s += v
		}
		if v := s / float64(k*k); v < bestV {
			best, bestV = k, v
		}
	}
	kept := 0
	for _, v := range g {
		if v <= c {
			kept++
		}
	}
	if kept != best {
		t.Errorf("Crump kept %d units, brute-force minimiser %d", kept, best)
	}
	var s float64
	for _, v := range g[:best] {
		s += v
	}
	relClose(t, "c = 2·mean(γ | γ ≤ c)", c, 2*s/float64(best), 1e-12)
	relClose(t, "α from c", alpha, 0.5-math.Sqrt(0.25-1/c), 1e-12)
	// Scores of exactly 0 or 1 (γ = ∞) are always trimmed.
	a2, _ := crumpAlpha(append(append([]float64{}, e...), 0, 1))
	if a2 <= 0 || a2 >= 0.5 {
		t.Errorf("α with pinned scores %g", a2)
	}
}

func TestTrimEdgeCases(t *testing.T) {
	sc := waterStudy().Propensity()
	for _, r := range []TrimRule{Symmetric(-0.1), Symmetric(0.5), Percentile(90, 10), Percentile(-1, 50), {}} {
		if sc.Trim(r).Err() == nil {
			t.Errorf("%v accepted", r)
		}
	}
	// All units trimmed: a quarter of the units treated at random, every
	// score near 0.25; keeping [0.3, 0.7] leaves no unit.
	var b strings.Builder
	b.WriteString("x,t,y\n")
	for i := 0; i < 200; i++ {
		tr := 0
		if i%4 == 0 {
			tr = 1
		}
		fmt.Fprintf(&b, "%d,%d,%d\n", (i*37)%11, tr, i%7)
	}
	quarter := studyFrom(t, b.String()).Treat("t").Outcome("y").Adjust("x").Propensity()
	tr := quarter.Trim(Symmetric(0.3))
	if tr.Err() == nil || !strings.Contains(tr.Err().Error(), "drops every unit") {
		t.Fatalf("all units trimmed: %v", tr.Err())
	}
	for _, x := range []interface{ String() string }{tr, tr.Effect(AIPW, ATE), tr.Effects(ATE), tr.Weights(ATE), tr.Balance()} {
		if !strings.Contains(x.String(), "drops every unit") {
			t.Errorf("error not carried: %s", x)
		}
	}
	if _, err := json.Marshal(tr); err != nil {
		t.Error(err)
	}
	// One arm emptied: NSW scores lie in [0.19, 0.68]; keeping [0.499, 0.501]
	// leaves one treated unit and no control.
	tr = nswStudy().Propensity().Trim(Symmetric(0.499))
	wantErr(t, tr.Err(), "drops every control unit", "nothing to compare")
	// Nothing to drop: Symmetric(0) keeps the original scores.
	tr = sc.Trim(Symmetric(0))
	if tr.Err() != nil || tr.Scores != sc || tr.DroppedTreated+tr.DroppedControl != 0 || tr.Effect(AIPW, ATE).HasFlag("trimmed_population") {
		t.Errorf("α = 0: %v %v", tr.Err(), tr.Scores == sc)
	}
	// Separation: trimming drops the pinned harbour units and refits
	// without the now-constant district=harbour term.
	sep := Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "household_size", "home_age").Propensity()
	tr = sep.Trim(Symmetric(0.1))
	if tr.Err() != nil {
		t.Fatal(tr.Err())
	}
	if len(tr.DroppedTerms) != 1 || tr.DroppedTerms[0] != "district=harbour" || tr.Scores.Separated() {
		t.Errorf("dropped terms %v, separated %v", tr.DroppedTerms, tr.Scores.Separated())
	}
	if e := tr.Effect(IPWNormalized, ATE); e.Err() != nil || !e.Supported {
		t.Errorf("ATE after trimming the separated region: %v supported=%v %s", e.Err(), e.Supported, e.Unsupported)
	}
	// The profile of the dropped units names who they are.
	found := false
	for _, r := range topProfile(tr.Profile, 3) {
		if r.Term == "district=harbour" && r.MeanInside == 0 && r.MeanOutside > 0.5 {
			found = true
		}
	}
	if !found {
		t.Errorf("profile of dropped units does not show the harbour district: %+v", tr.Profile)
	}
}
