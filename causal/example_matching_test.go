package causal_test

import (
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
)

func ExampleScores_Match() {
	m := nsw().Propensity().Match(causal.MatchOptions{})
	e := m.Effect()
	fmt.Printf("%d treated matched to %d controls (one used %d times); ATT %.1f (SE %.1f, %s)\n",
		m.MatchedTreated, m.UsedControl, m.MaxReuse, e.Value, e.SE, e.SEMethod)
	// Output:
	// 185 treated matched to 144 controls (one used 7 times); ATT 2639.9 (SE 723.5, abadie-imbens)
}

func ExampleScores_Match_caliper() {
	// Matching as a remedy for the ATT on the water-audit scenario: a
	// caliper of 0.2 SD of the logit (Austin 2011) leaves unmatched the
	// households with no comparable control.
	m := water().Propensity().Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
	for _, f := range m.Findings() {
		fmt.Println(f.Message)
		fmt.Println(f.WhoText)
	}
	fmt.Printf("largest |SMD| after matching %.3f\n", m.Balance().MaxAbsSMD())
	// Output:
	// matching for the ATT: 48 of 1048 treated units (4.6%) found no comparable unit of the other arm (48 with no unit of the other arm within the caliper)
	// the 48 unmatched treated units differ from the other units most in last_summer_lpd (mean 1291.27 vs 661.535, SMD +2.24), lot_m2 (mean 1741.08 vs 718.822, SMD +2.01), pool=yes (mean 0.895833 vs 0.255, SMD +1.70)
	// largest |SMD| after matching 0.211
}

func ExampleScores_Match_withoutReplacement() {
	m := water().Propensity().Match(causal.MatchOptions{WithoutReplacement: true, Caliper: causal.AustinCaliper})
	fmt.Println(m.MatchedTreated, "matched,", m.UnmatchedTreated, "unmatched treated")
	fmt.Println(m.Order)
	// Output:
	// 801 matched, 247 unmatched treated
	// greedy without replacement: treated units by decreasing score (highest first)
}

func ExampleMatching_Effect() {
	m := nsw().Propensity().Match(causal.MatchOptions{Estimand: causal.ATE, K: 3})
	fmt.Println(m.Effect())
	// Output:
	// nearest_neighbour_matching ATE = 1715.62 (SE 642.264, abadie-imbens; 95% CI [456.802, 2974.43]), n = 445 (185 treated, 260 control)
	//   population: all units
	//   note: 3:1 matching on the logit score with replacement
	//   note: SE: Abadie & Imbens (2006) matching variance, the score taken as known (the Abadie & Imbens 2016 adjustment for the estimated score is not applied)
}

func ExampleMatching_Remedy() {
	r := water().Propensity().Match(causal.MatchOptions{Caliper: causal.AustinCaliper}).Remedy()
	fmt.Println(r.Action, r.Estimand, r.DropsTreated, r.DropsControl)
	// Output:
	// match ATT 48 0
}

func ExampleScores_Subclassify() {
	st := nsw().Propensity().Subclassify(5)
	for _, r := range st.Strata {
		fmt.Printf("[%.3f, %.3f) %d treated, %d control\n", r.Lo, r.Hi, r.Treated, r.Control)
	}
	// Output:
	// [0.195, 0.352) 27 treated, 62 control
	// [0.352, 0.375) 30 treated, 59 control
	// [0.375, 0.406) 33 treated, 56 control
	// [0.406, 0.525) 47 treated, 42 control
	// [0.525, 0.676) 48 treated, 41 control
}

func ExampleStrata_Effect() {
	e := nsw().Propensity().Subclassify(0).Effect(causal.ATT)
	fmt.Printf("%s %s = %.1f (SE %.1f, %s)\n", e.Estimator, e.Estimand, e.Value, e.SE, e.SEMethod)
	// Output:
	// subclassification ATT = 1796.1 (SE 679.2, stratified variance)
}

func ExampleStrata_Violations() {
	// 40 strata of 100 households: even the highest holds both arms.
	st := water().Propensity().Subclassify(40)
	top := st.Strata[len(st.Strata)-1]
	fmt.Printf("scores %.3f to %.3f: %d treated, %d control\n", top.Lo, top.Hi, top.Treated, top.Control)
	fmt.Println("ATE:", st.Violations(causal.ATE), "ATT:", st.Violations(causal.ATT), "ATC:", st.Violations(causal.ATC))
	// Output:
	// scores 0.934 to 0.999: 97 treated, 3 control
	// ATE: [] ATT: [] ATC: []
}

func ExampleMatching_UnmatchedMask() {
	sc := water().Propensity()
	m := sc.Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
	lowest := 1.0
	for i, u := range m.UnmatchedMask(true) {
		if u && sc.E[i] < lowest {
			lowest = sc.E[i]
		}
	}
	fmt.Printf("the unmatched treated have scores from %.3f up\n", lowest)
	// Output:
	// the unmatched treated have scores from 0.965 up
}

func ExampleStrata_Balance() {
	st := water().Propensity().Subclassify(0)
	b := st.Balance(causal.ATT)
	fmt.Printf("largest |SMD| %.3f before, %.3f after subclassification (%s)\n", maxAbs(b, false), b.MaxAbsSMD(), b.Label)
	w := st.Weights(causal.ATT)
	fmt.Printf("weight of a control in the top stratum: %.2f\n", w[topControl(st)])
	// Output:
	// largest |SMD| 0.986 before, 0.440 after subclassification (subclassification weights (ATT))
	// weight of a control in the top stratum: 2.04
}

// topControl is the first control in the highest stratum.
func topControl(st *causal.Strata) int {
	for i, j := range st.Of {
		if j == len(st.Strata)-1 && st.Scores.Design.T[i] == 0 {
			return i
		}
	}
	return -1
}

func ExampleStrata_Remedy() {
	r := nsw().Propensity().Subclassify(0).Remedy(causal.ATE)
	fmt.Println(r.Action, r.Estimand, r.DropsTreated, r.DropsControl)
	fmt.Println(r.Text)
	// Output:
	// subclassify ATE 0 0
	// estimate the ATE by subclassification on 5 score strata: every stratum holds both arms
}
