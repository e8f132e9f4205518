package causal

import (
	"encoding/json"
	"math"
	"os"
	"strings"
	"testing"
)

// Reference: testdata/reference/nsw_reference.R (R 4.2.2; glm, lm and the
// textbook formulas written out in that script), values in nsw_reference.json,
// "estimates": every estimator and its standard error, to 1e-6 relative.
//   - difference_in_means: ȳ1 − ȳ0, unpooled variances
//   - regression_adjustment ATE/ATT/ATC: lm per arm, delta-method SE
//   - ipw, ipw_normalized ATE/ATT: stacked-equation sandwich (R builds
//     A and B explicitly and checks the derivatives numerically)
//   - aipw ATE/ATT: influence function
//   - overlap_weighted ATO: stacked-equation sandwich
func TestEffectsMatchR(t *testing.T) {
	ref := loadRef(t)
	sc := nswStudy().Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(ref.Estimates) != 11 {
		t.Fatalf("reference has %d estimates, want 11", len(ref.Estimates))
	}
	for _, r := range ref.Estimates {
		est, err := ParseEstimator(r.Estimator)
		if err != nil {
			t.Fatal(err)
		}
		target, err := ParseEstimand(r.Estimand)
		if err != nil {
			t.Fatal(err)
		}
		e := sc.Effect(est, target)
		if e.Err() != nil {
			t.Errorf("%s %s: %v", r.Estimator, r.Estimand, e.Err())
			continue
		}
		what := r.Estimator + " " + r.Estimand
		relClose(t, what+" value (R: nsw_reference.R)", e.Value, r.Value, 1e-6)
		relClose(t, what+" SE (R: nsw_reference.R, "+r.SEMethod+")", e.SE, r.SE, 1e-6)
		if e.SEMethod != r.SEMethod {
			t.Errorf("%s: SE method %q, R script names it %q", what, e.SEMethod, r.SEMethod)
		}
		if !e.Supported || len(e.Flags) != 0 {
			t.Errorf("%s: randomised NSW flagged: %+v", what, e.Flags)
		}
		if e.N != 445 || e.NTreated != 185 || e.NControl != 260 {
			t.Errorf("%s: n = %d (%d/%d)", what, e.N, e.NTreated, e.NControl)
		}
		relClose(t, what+" CI low", e.CI95.Lo, e.Value-1.959963984540054*e.SE, 1e-12)
		relClose(t, what+" mu1 - mu0", e.Mu1-e.Mu0, e.Value, 1e-9)
		v := e.MuCov[0] + e.MuCov[1] - 2*e.MuCov[2]
		relClose(t, what+" Var from MuCov", math.Sqrt(v), e.SE, 1e-9)
	}
	// Published: Dehejia & Wahba (1999), experimental difference $1,794.
	if v := sc.Effect(DifferenceInMeans, ATE).Value; math.Round(v) != 1794 {
		t.Errorf("difference in means %.2f, published $1,794", v)
	}
}

// Reference: testdata/reference/nsw_reference.R section 8 (R 4.2.2), values
// in nsw_reference.json, "estimates_more", to 1e-6 relative: the ATC of ipw
// (Horvitz–Thompson), ipw_normalized (Hájek) and aipw written directly with
// the original T and e (R does not exchange the arms; the Go code does),
// and difference_in_means for the ATT and ATC.
//   - ipw, ipw_normalized ATC: stacked-equation sandwich (R's A and B with
//     analytic derivatives, checked against finite differences)
//   - aipw ATC: influence function
//
// With "estimates" they must cover every estimator × estimand on offer.
func TestATCEffectsMatchR(t *testing.T) {
	b, err := os.ReadFile("../testdata/reference/nsw_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	type refEst struct {
		Estimator string   `json:"estimator"`
		Estimand  string   `json:"estimand"`
		Value     float64  `json:"value"`
		SE        float64  `json:"se"`
		SEMethod  string   `json:"se_method"`
		Mu1       *float64 `json:"mu1"`
		Mu0       *float64 `json:"mu0"`
	}
	var ref struct {
		Estimates []refEst `json:"estimates"`
		More      []refEst `json:"estimates_more"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.More) != 5 {
		t.Fatalf("reference has %d estimates_more entries, want 5", len(ref.More))
	}
	// Coverage: every estimator × estimand has exactly one R reference.
	seen := map[string]int{}
	for _, r := range append(append([]refEst{}, ref.Estimates...), ref.More...) {
		seen[r.Estimator+" "+r.Estimand]++
	}
	for _, est := range AllEstimators {
		for _, target := range est.Estimands() {
			if k := seen[est.String()+" "+target.String()]; k != 1 {
				t.Errorf("%s %s has %d R references in nsw_reference.json, want 1", est, target, k)
			}
		}
	}
	sc := nswStudy().Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	for _, r := range ref.More {
		est, err := ParseEstimator(r.Estimator)
		if err != nil {
			t.Fatal(err)
		}
		target, err := ParseEstimand(r.Estimand)
		if err != nil {
			t.Fatal(err)
		}
		e := sc.Effect(est, target)
		if e.Err() != nil {
			t.Errorf("%s %s: %v", r.Estimator, r.Estimand, e.Err())
			continue
		}
		what := r.Estimator + " " + r.Estimand
		relClose(t, what+" value (R: nsw_reference.R section 8)", e.Value, r.Value, 1e-6)
		relClose(t, what+" SE (R: nsw_reference.R section 8, "+r.SEMethod+")", e.SE, r.SE, 1e-6)
		if r.Mu1 == nil || r.Mu0 == nil {
			t.Fatalf("%s: R reference lacks mu1/mu0", what)
		}
		relClose(t, what+" mu1 (R: nsw_reference.R section 8)", e.Mu1, *r.Mu1, 1e-6)
		relClose(t, what+" mu0 (R: nsw_reference.R section 8)", e.Mu0, *r.Mu0, 1e-6)
		if e.SEMethod != r.SEMethod {
			t.Errorf("%s: SE method %q, R script names it %q", what, e.SEMethod, r.SEMethod)
		}
		if !e.Supported || len(e.Flags) != 0 {
			t.Errorf("%s: randomised NSW flagged: %+v", what, e.Flags)
		}
		if e.N != 445 || e.NTreated != 185 || e.NControl != 260 {
			t.Errorf("%s: n = %d (%d/%d)", what, e.N, e.NTreated, e.NControl)
		}
		v := e.MuCov[0] + e.MuCov[1] - 2*e.MuCov[2]
		relClose(t, what+" Var from MuCov", math.Sqrt(v), e.SE, 1e-9)
	}
}

// By symmetry the ATC must also equal minus the ATT of the data with the
// arms exchanged (an identity, checked beside the R references above). Checked against the flipped NSW data
// (treatment recoded 1 − treat), whose propensity fit is the mirror image.
func TestATCIsFlippedATT(t *testing.T) {
	f, err := ReadCSV("../testdata/nsw_dehejia_wahba.csv")
	if err != nil {
		t.Fatal(err)
	}
	tc, _ := f.Column("treat")
	flip := make([]float64, len(tc.Num))
	for i, v := range tc.Num {
		flip[i] = 1 - v
	}
	num := map[string][]float64{"flip": flip}
	for _, name := range append(append([]string{}, nswCovariates...), "re78") {
		c, _ := f.Column(name)
		num[name] = c.Num
	}
	fr, err := NewFrame(nil, num, nil)
	if err != nil {
		t.Fatal(err)
	}
	scF := FromSource(fr).Treat("flip").Outcome("re78").Adjust(nswCovariates...).Propensity()
	sc := nswStudy().Propensity()
	for _, est := range []Estimator{DifferenceInMeans, RegressionAdjustment, IPW, IPWNormalized, AIPW} {
		atc := sc.Effect(est, ATC)
		att := scF.Effect(est, ATT)
		if atc.Err() != nil || att.Err() != nil {
			t.Fatalf("%s: %v %v", est, atc.Err(), att.Err())
		}
		relClose(t, est.String()+" ATC = −ATT(flipped)", atc.Value, -att.Value, 1e-7)
		relClose(t, est.String()+" ATC SE = SE ATT(flipped)", atc.SE, att.SE, 1e-6)
	}
}

// Exact balance: with overlap weights from a logistic model fitted by
// maximum likelihood, the weighted means of every model covariate are equal
// in the two arms (Li, Morgan & Zaslavsky 2018, Theorem 3) — to 1e-8.
func TestOverlapWeightsExactBalance(t *testing.T) {
	for _, s := range []*Study{nswStudy(), Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").Adjust("household_size", "lot_m2", "home_age", "income_band", "last_summer_lpd")} {
		sc := s.Propensity()
		w := sc.Weights(ATO)
		if w.Err() != nil {
			t.Fatal(w.Err())
		}
		d := sc.Design
		for j := 1; j < d.P; j++ {
			var s1, w1, s0, w0 float64
			for i := 0; i < d.N; i++ {
				x := d.X[i*d.P+j]
				if d.T[i] == 1 {
					s1 += w.W[i] * x
					w1 += w.W[i]
				} else {
					s0 += w.W[i] * x
					w0 += w.W[i]
				}
			}
			diff := s1/w1 - s0/w0
			scale := math.Max(1, math.Abs(s1/w1))
			if math.Abs(diff) > 1e-8*scale {
				t.Errorf("%s: overlap-weighted mean difference %g (Li, Morgan & Zaslavsky 2018: exactly 0)", d.Terms[j].Name, diff)
			}
		}
		for _, r := range w.Balance().Rows {
			absClose(t, "overlap-weighted SMD "+r.Term, r.SMDWeighted, 0, 1e-8)
		}
	}
}

// Reference: nsw_reference.R "ess": Kish (Σw)²/Σw² per arm for ATE, ATT and
// overlap weights; and "balance_weighted_ate" SMDs after ATE weights.
func TestWeightsMatchR(t *testing.T) {
	ref := loadRef(t)
	sc := nswStudy().Propensity()
	for name, target := range map[string]Estimand{"ate": ATE, "att": ATT, "ato": ATO} {
		w := sc.Weights(target)
		if w.Err() != nil {
			t.Fatal(w.Err())
		}
		relClose(t, name+" ESS treated (R)", w.ESSTreated, ref.ESS[name].Treated, 1e-6)
		relClose(t, name+" ESS control (R)", w.ESSControl, ref.ESS[name].Control, 1e-6)
	}
	for _, r := range sc.Weights(ATE).Balance().Rows {
		relClose(t, "ATE-weighted SMD "+r.Term+" (R)", r.SMDWeighted, ref.BalanceATE[r.Term].SMD, 1e-6)
	}
	// ATT weights of the treated are 1: the treated ESS is n1 exactly.
	if w := sc.Weights(ATT); w.ESSTreated != 185 || w.MaxTreated != 1 {
		t.Errorf("ATT treated weights: ESS %g, max %g", w.ESSTreated, w.MaxTreated)
	}
}

func TestWeightsTruncate(t *testing.T) {
	sc := nswStudy().Propensity()
	w := sc.Weights(ATE)
	tw := w.Truncate(5, 95)
	if tw.Err() != nil {
		t.Fatal(tw.Err())
	}
	d := sc.Design
	// Each arm's weights now lie within its bounds (the pooled 5th and 95th
	// percentiles of the stabilised weights on the arm's scale), and about
	// 10% of the units moved (type-7 quantiles: at most 5% + 1 per tail).
	for i, v := range tw.W {
		b := tw.Truncation.Control
		if d.T[i] == 1 {
			b = tw.Truncation.Treated
		}
		if v < b.Lo || v > b.Hi {
			t.Fatalf("weight %d = %g outside [%g, %g]", i, v, b.Lo, b.Hi)
		}
	}
	if c := tw.Truncation.Changed; c < 40 || c > 48 {
		t.Errorf("%d weights moved, expected about 10%% of 445", c)
	}
	if tw.ESSTreated <= w.ESSTreated || tw.ESSControl <= w.ESSControl {
		t.Errorf("truncation did not raise the ESS: %g→%g, %g→%g", w.ESSTreated, tw.ESSTreated, w.ESSControl, tw.ESSControl)
	}
	for _, bad := range [][2]float64{{-1, 99}, {50, 50}, {1, 101}, {math.NaN(), 90}} {
		if w.Truncate(bad[0], bad[1]).Err() == nil {
			t.Errorf("Truncate(%g, %g) accepted", bad[0], bad[1])
		}
	}
	// Type-7 quantile (R: quantile(c(1,2,3,4,10), 0.9) = 7.6).
	relClose(t, "quantile type 7", quantileSorted([]float64{1, 2, 3, 4, 10}, 0.9), 7.6, 1e-12)
}

func TestEffectJSON(t *testing.T) {
	sc := nswStudy().Propensity()
	b, err := json.Marshal(sc.Effects(ATE))
	if err != nil {
		t.Fatal(err)
	}
	var got []map[string]any
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	if len(got) != 5 {
		t.Fatalf("%d entries", len(got))
	}
	// Field names of the report's "estimates" entries (causal/report.schema.json).
	for _, k := range []string{"estimator", "estimand", "value", "se", "ci95", "se_method", "n"} {
		if _, ok := got[0][k]; !ok {
			t.Errorf("field %q missing in %s", k, b)
		}
	}
	if got[4]["estimator"] != "aipw" || got[4]["se_method"] != "influence function" {
		t.Errorf("aipw entry %v", got[4])
	}
	// An error becomes nulls with a reason.
	e := sc.Effect(OverlapWeighted, ATE)
	if e.Err() == nil {
		t.Fatal("overlap_weighted ATE accepted")
	}
	b, _ = json.Marshal(e)
	if !strings.Contains(string(b), `"value":null`) || !strings.Contains(string(b), "null_reason") {
		t.Errorf("error JSON %s", b)
	}
}
