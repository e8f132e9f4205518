package causal_test

import "fmt"

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
