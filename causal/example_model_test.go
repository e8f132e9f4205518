package causal_test

import (
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
)

// The Hosmer–Lemeshow test and the tail check on the NSW sample (values
// agree with R; see TestCalibrationMatchesR).
func ExampleScores_CalibrationTest() {
	c := nsw().Propensity().CalibrationTest()
	fmt.Printf("C = %.3f, df %d, p = %.3f\n", c.HL, c.DF, c.HLP)
	for _, t := range c.Tails {
		fmt.Printf("%s decile: %d treated of %d, %.1f expected, p = %.3f, flagged %v\n", t.Decile, t.Observed, t.N, t.Expected, t.P, t.Flagged)
	}
	fmt.Println("tails miscalibrated:", len(c.TailMiscalibrated()))
	// Output:
	// C = 9.447, df 8, p = 0.306
	// lowest decile: 10 treated of 45, 11.8 expected, p = 0.614, flagged false
	// highest decile: 20 treated of 45, 26.8 expected, p = 0.047, flagged false
	// tails miscalibrated: 0
}

// The regression-adjustment SE with heteroskedasticity-robust (HC3) arm
// covariances (values agree with R; see
// TestRegressionAdjustmentRobustSEMatchesR).
func ExampleScores_EffectWith() {
	sc := nsw().Propensity()
	e := sc.EffectWith(causal.EffectOptions{OutcomeCovariance: causal.HC3}, causal.RegressionAdjustment, causal.ATE)
	fmt.Printf("%.1f (SE %.1f, %s)\n", e.Value, e.SE, e.SEMethod)
	// Output: 1621.6 (SE 720.2, delta method (HC3))
}

// The weighted SMD over the unweighted pooled SD (the default) and over the
// weighted arm SDs (Austin & Stuart 2015); values agree with R (see
// TestBalanceMatchesR).
func ExampleStudy_BalanceWeightedWith() {
	s := nsw()
	sc := s.Propensity()
	w := make([]float64, sc.Design.N) // ATE weights
	for i, e := range sc.E {
		w[i] = 1 / (1 - e)
		if sc.Design.T[i] == 1 {
			w[i] = 1 / e
		}
	}
	a := s.BalanceWeighted(w, "ATE weights")
	b := s.BalanceWeightedWith(w, "ATE weights", causal.BalanceOptions{WeightedSD: true})
	fmt.Printf("re75: %.5f (unweighted SD), %.5f (weighted SDs)\n", a.Rows[7].SMDWeighted, b.Rows[7].SMDWeighted)
	// Output: re75: 0.00908 (unweighted SD), 0.00925 (weighted SDs)
}
