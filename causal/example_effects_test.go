package causal_test

import (
	"context"
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
)

// water is the simulated water-audit scenario (testdata/water_audits.csv,
// our own seeded scenario): households chose whether to take a free audit.
// True effects of the scenario: ATE −76.65, ATT −106.06 litres per day.
func water() *causal.Study {
	return causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").Adjust("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
}

func ExampleScores_Weights() {
	w := water().Propensity().Weights(causal.ATE)
	fmt.Printf("ESS treated %.0f of %d, control %.0f of %d; largest weight %.1f\n", w.ESSTreated, w.Treated, w.ESSControl, w.Control, w.MaxTreated)
	// Output: ESS treated 539 of 1048, control 226 of 2952; largest weight 27.9
}

func ExampleWeights_Truncate() {
	w := water().Propensity().Weights(causal.ATE).Truncate(1, 99)
	fmt.Printf("%d weights moved; ESS treated %.0f\n", w.Truncation.Changed, w.ESSTreated)
	// Output: 80 weights moved; ESS treated 575
}

func ExampleWeights_Balance() {
	b := water().Propensity().Weights(causal.ATO).Balance()
	fmt.Printf("largest |SMD| before %.3f; after overlap weights below 1e-8: %v\n", maxAbs(b, false), b.MaxAbsSMD() < 1e-8)
	// Output: largest |SMD| before 0.986; after overlap weights below 1e-8: true
}

func maxAbs(b *causal.BalanceSheet, weighted bool) float64 {
	var m float64
	for _, r := range b.Rows {
		v := r.SMD
		if weighted {
			v = r.SMDWeighted
		}
		if v < 0 {
			v = -v
		}
		if v > m {
			m = v
		}
	}
	return m
}

func ExampleScores_Effect() {
	e := water().Propensity().Effect(causal.AIPW, causal.ATE)
	fmt.Printf("%s %s = %.1f (SE %.1f, %s), 95%% CI [%.1f, %.1f]\n", e.Estimator, e.Estimand, e.Value, e.SE, e.SEMethod, e.CI95.Lo, e.CI95.Hi)
	// Output: aipw ATE = -76.1 (SE 3.4, influence function), 95% CI [-82.8, -69.3]
}

func ExampleScores_Effect_unsupported() {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").Adjust("district", "household_size", "lot_m2", "pool")
	e := s.Propensity().Effect(causal.IPWNormalized, causal.ATE, s.Cells("district"))
	fmt.Println("supported:", e.Supported)
	fmt.Println(e.Flags[0].Code)
	// Output:
	// supported: false
	// unsupported_estimand
}

func ExampleScores_Effects() {
	for _, e := range water().Propensity().Effects(causal.ATT).Items {
		fmt.Printf("%-22s %8.1f  SE %5.1f\n", e.Estimator, e.Value, e.SE)
	}
	// Output:
	// difference_in_means       130.5  SE   8.9
	// regression_adjustment    -109.4  SE   4.3
	// ipw                      -346.7  SE 261.4
	// ipw_normalized           -162.0  SE  62.0
	// aipw                     -105.1  SE   8.3
}

func ExampleScores_Trim() {
	tr := water().Propensity().Trim(causal.Symmetric(0.1))
	fmt.Printf("dropped %d treated, %d control\n", tr.DroppedTreated, tr.DroppedControl)
	e := tr.Effect(causal.AIPW, causal.ATE)
	fmt.Printf("AIPW %.1f for %s\n", e.Value, e.Population)
	// Output:
	// dropped 195 treated, 1012 control
	// AIPW -84.0 for the 2793 kept units (scores in [0.1, 0.9])
}

func ExampleCrumpOptimal() {
	tr := water().Propensity().Trim(causal.CrumpOptimal())
	fmt.Printf("α = %.4f keeps %d of 4000 units\n", tr.Alpha, tr.KeptTreated+tr.KeptControl)
	// Output: α = 0.0710 keeps 3361 of 4000 units
}

func ExamplePercentile() {
	tr := water().Propensity().Trim(causal.Percentile(5, 95))
	fmt.Printf("keep scores in [%.3f, %.3f]: %d treated, %d control\n", tr.Keep.Lo, tr.Keep.Hi, tr.KeptTreated, tr.KeptControl)
	// Output: keep scores in [0.089, 0.505]: 553 treated, 1987 control
}

func ExampleScores_Bootstrap() {
	bs := water().Propensity().Bootstrap(context.Background(), causal.AIPW, causal.ATE,
		causal.BootstrapOptions{Replicates: 200, Seed: 1})
	fmt.Printf("%d replicates, bootstrap SE %.1f, percentile interval [%.0f, %.0f]\n", len(bs.Replicates), bs.SE, bs.Percentile.Lo, bs.Percentile.Hi)
	// Output: 200 replicates, bootstrap SE 3.4, percentile interval [-83, -69]
}

func ExampleScores_Extrapolation() {
	a := water().Propensity().Extrapolation(causal.ATE)
	for _, m := range a.Models {
		fmt.Printf("%s: %d of %d counterfactual predictions unsupported\n", m.Model, m.Unsupported, m.Predictions)
	}
	fmt.Printf("over the %d supported units: %.1f\n", a.SupportedN, a.Restricted.Value)
	// Output:
	// f1: 140 of 2952 counterfactual predictions unsupported
	// f0: 24 of 1048 counterfactual predictions unsupported
	// over the 3836 supported units: -77.9
}

func ExampleExtrapolationAudit_Curve() {
	c := water().Propensity().Extrapolation(causal.ATE).Curve("lot_m2")
	fmt.Printf("%d grid points from %.0f to %.0f m²; %d treated and %d control points shown\n", len(c.X), c.X[0], c.X[len(c.X)-1], len(c.Treated), len(c.Control))
	fmt.Println("regions without treated units:", len(c.Unsupported1))
	// Output:
	// 101 grid points from 80 to 3314 m²; 400 treated and 400 control points shown
	// regions without treated units: 4
}

func ExampleScores_Sweep() {
	s := water().Propensity().Sweep(causal.OverlapWeighted, causal.ATO, 0, 0.05, 0.1)
	for _, r := range s.Rows {
		fmt.Printf("α %.2f: kept %4d/%4d  ATO %.1f\n", r.Alpha, r.KeptTreated, r.KeptControl, r.Value)
	}
	// Output:
	// α 0.00: kept 1048/2952  ATO -83.7
	// α 0.05: kept  967/2779  ATO -84.7
	// α 0.10: kept  853/1940  ATO -87.8
}

func ExampleEValueRR() {
	e := causal.EValueRR(3.9, 1.8, 8.7)
	fmt.Printf("E-value %.2f; for the lower limit %.2f\n", e.Point, e.Limit)
	// Output: E-value 7.26; for the lower limit 3.00
}

func ExampleEffect_EValue() {
	e := water().Propensity().Effect(causal.AIPW, causal.ATE).EValue()
	fmt.Printf("approximate: %v; E-value %.2f (CI limit %.2f)\n", e.Approximate, e.Point, e.Limit)
	// Output: approximate: true; E-value 2.12 (CI limit 2.03)
}

func ExampleVerdict_remedies() {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").Adjust("district", "household_size", "home_age")
	v := s.Propensity().Verdict(causal.VerdictOptions{}, s.Cells("district"))
	fmt.Println(v.Status, v.Supported)
	for _, r := range v.Remedies {
		fmt.Printf("%s: drops %d treated, %d control\n", r.Action, r.DropsTreated, r.DropsControl)
	}
	// Output:
	// violated [ATT ATO]
	// target_att: drops 0 treated, 0 control
	// overlap_weights: drops 0 treated, 0 control
	// trim: drops 0 treated, 554 control
}

func ExampleScores_WithWeights() {
	sc := water().Propensity()
	w := make([]float64, sc.Design.N) // weights from elsewhere: here, ATT weights capped at 5
	for i, e := range sc.E {
		w[i] = 1
		if sc.Design.T[i] == 0 {
			w[i] = min(e/(1-e), 5)
		}
	}
	ww := sc.WithWeights(w, "capped ATT weights")
	fmt.Printf("%s: control ESS %.0f, largest |SMD| %.3f\n", ww.Label, ww.ESSControl, ww.Balance().MaxAbsSMD())
	// Output: capped ATT weights: control ESS 681, largest |SMD| 0.293
}
