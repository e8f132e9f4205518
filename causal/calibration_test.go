package causal

import (
	"encoding/json"
	"os"
	"strings"
	"testing"
)

// calibrationRef is the calibration section of
// testdata/reference/nsw_reference.json (nsw_reference.R section 9: R's
// quantile type 7, cut, pchisq and binom.test on glm's fitted scores).
type calibrationRef struct {
	Statistic float64 `json:"statistic"`
	DF        int     `json:"df"`
	P         float64 `json:"p_value"`
	Groups    struct {
		Lo, Hi   []float64
		N        []int     `json:"n"`
		Observed []int     `json:"observed_treated"`
		Expected []float64 `json:"expected_treated"`
	} `json:"groups"`
	Tails map[string]struct {
		N        int     `json:"n"`
		Observed int     `json:"observed_treated"`
		Expected float64 `json:"expected_treated"`
		P        float64 `json:"p_value"`
	} `json:"tails"`
}

func loadCalibrationRef(t *testing.T) map[string]calibrationRef {
	t.Helper()
	b, err := os.ReadFile("../testdata/reference/nsw_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		Calibration map[string]calibrationRef `json:"calibration"`
	}
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Calibration) != 2 {
		t.Fatalf("reference has %d calibration sets, want nsw and water_audits", len(r.Calibration))
	}
	return r.Calibration
}

// Reference: Hosmer & Lemeshow (1980) by the textbook formula in R
// (nsw_reference.R section 9) on the NSW sample (Dehejia & Wahba 1999) and the
// water-audit scenario: the same deciles (group sizes and treated counts
// exactly), the expected counts, Ĉ and its p-value to 1e-6 relative (the
// fitted scores agree with glm's to 1e-8), and the exact binomial p-values
// of the tail deciles (R's binom.test) to 1e-6 relative.
func TestCalibrationMatchesR(t *testing.T) {
	refs := loadCalibrationRef(t)
	for name, sc := range map[string]*Scores{"nsw": nswStudy().Propensity(), "water_audits": waterStudy().Propensity()} {
		ref := refs[name]
		c := sc.CalibrationTest()
		if c.Err() != nil {
			t.Fatal(c.Err())
		}
		if len(c.Groups) != len(ref.Groups.N) || c.DF != ref.DF {
			t.Fatalf("%s: %d groups, df %d; R: %d groups, df %d", name, len(c.Groups), c.DF, len(ref.Groups.N), ref.DF)
		}
		for g, grp := range c.Groups {
			if grp.N != ref.Groups.N[g] || grp.Observed != ref.Groups.Observed[g] {
				t.Errorf("%s group %d: %d units, %d treated; R: %d, %d", name, g+1, grp.N, grp.Observed, ref.Groups.N[g], ref.Groups.Observed[g])
			}
			relClose(t, name+" expected", grp.Expected, ref.Groups.Expected[g], 1e-6)
			relClose(t, name+" break lo", grp.Lo, ref.Groups.Lo[g], 1e-6)
			relClose(t, name+" break hi", grp.Hi, ref.Groups.Hi[g], 1e-6)
		}
		relClose(t, name+" Hosmer–Lemeshow statistic", c.HL, ref.Statistic, 1e-6)
		relClose(t, name+" Hosmer–Lemeshow p", c.HLP, ref.P, 1e-6)
		for _, tl := range c.Tails {
			want := ref.Tails[tl.Decile]
			if tl.N != want.N || tl.Observed != want.Observed {
				t.Errorf("%s %s decile: %d of %d treated; R: %d of %d", name, tl.Decile, tl.Observed, tl.N, want.Observed, want.N)
			}
			relClose(t, name+" "+tl.Decile+" binomial p", tl.P, want.P, 1e-6)
			if tl.Flagged != (want.P < CalibrationAlpha/2) {
				t.Errorf("%s %s decile flagged %v at p = %g", name, tl.Decile, tl.Flagged, tl.P)
			}
		}
	}
}

// binomTestP against R 4.2.2: binom.test(x, n, p)$p.value, values printed by
// Rscript -e 'binom.test(x, n, p)$p.value' with %.15g (the cases cover both sides of the mean, the mean itself
// and the tail-only sums).
func TestBinomTestPMatchesR(t *testing.T) {
	for _, c := range []struct {
		x, n int
		p    float64
		want float64
	}{
		{10, 45, 0.2631137263664646, 0.6142087751757436}, // also in nsw_reference.json
		{20, 45, 0.5958619672407116, 0.04747474709505041},
		{10, 100, 0.023, 0.000108863644586069},
		{0, 20, 0.1, 0.254529978024905},
		{3, 10, 0.3, 1},
		{9, 10, 0.3, 0.0001436859},
	} {
		relClose(t, "binomTestP", binomTestP(c.x, c.n, c.p), c.want, 1e-6)
	}
}

// The three faces carry the same numbers.
func TestCalibrationFaces(t *testing.T) {
	c := nswStudy().Propensity().CalibrationTest()
	s := c.String()
	for _, want := range []string{"Hosmer–Lemeshow (1980): C = 9.447, df 8, p = 0.306", "highest decile: 20 treated of 45"} {
		if !strings.Contains(s, want) {
			t.Errorf("String lacks %q:\n%s", want, s)
		}
	}
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	var j struct {
		HL struct {
			DF int `json:"df"`
		} `json:"hosmer_lemeshow"`
		Tails []struct {
			Decile        string `json:"decile"`
			Miscalibrated bool   `json:"miscalibrated"`
		} `json:"tails"`
		Groups []any `json:"groups"`
	}
	if err := json.Unmarshal(b, &j); err != nil {
		t.Fatal(err)
	}
	if j.HL.DF != 8 || len(j.Groups) != 10 || len(j.Tails) != 2 || j.Tails[1].Decile != "highest" || j.Tails[1].Miscalibrated {
		t.Errorf("JSON %s", b)
	}
	if (&CalibrationTest{err: os.ErrNotExist}).String() == "" {
		t.Error("empty error face")
	}
}

// Edge cases: scores pinned at 1 by separation (the gate = 1 units) add
// nothing to Ĉ when their arm is the only one; a single 0/1 covariate (black,
// 84% of NSW) gives two distinct scores whose type-7 deciles collapse to one
// group, as R's unique(quantile(...)) and cut do: too few groups for the
// Hosmer–Lemeshow test (df < 1, statistic null); the tail check covers that
// one group.
func TestCalibrationEdgeCases(t *testing.T) {
	sep := Load("../testdata/reference/separation.csv").Treat("treat").Adjust("x1", "gate").Propensity().CalibrationTest()
	if sep.Err() != nil || sep.DF < 1 || sep.HL != sep.HL || sep.HL > 1e6 {
		t.Errorf("separated fit: err %v, df %d, C %g", sep.Err(), sep.DF, sep.HL)
	}
	hi := sep.Tails[len(sep.Tails)-1]
	if hi.P != 1 || hi.Flagged {
		t.Errorf("pinned top decile: %+v, want p = 1 and no flag", hi)
	}
	two := nswStudy().Adjust("black").Propensity().CalibrationTest()
	if two.Err() != nil || len(two.Groups) != 1 || two.DF != -1 || two.HL == two.HL || len(two.Tails) != 1 {
		t.Errorf("two-score fit: err %v, %d groups, df %d, C %g, %d tails", two.Err(), len(two.Groups), two.DF, two.HL, len(two.Tails))
	}
	if !strings.Contains(two.String(), "not computed") {
		t.Errorf("text face of the two-score fit:\n%s", two)
	}
	if b, err := json.Marshal(two); err != nil || !strings.Contains(string(b), `"statistic":null`) {
		t.Errorf("JSON of the two-score fit: %s (%v)", b, err)
	}
}
