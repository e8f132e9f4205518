package causal_test

import (
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
)

func nsw() *causal.Study {
	return causal.Load("../testdata/nsw_dehejia_wahba.csv").
		Treat("treat").Outcome("re78").
		Adjust("age", "educ", "black", "hisp", "married", "nodegr", "re74", "re75")
}

func ExampleLoad() {
	s := causal.Load("../testdata/nsw_dehejia_wahba.csv")
	fmt.Println(s.Err(), s.Source().Rows())
	// Output: <nil> 445
}

func ExampleStudy_Design() {
	d, err := nsw().Design()
	fmt.Println(err, d.N, d.Treated, d.Control, d.Terms[1].Name)
	// Output: <nil> 445 185 260 age
}

func ExampleStudy_Propensity() {
	sc := nsw().Propensity()
	fmt.Printf("converged %v, AUC %.3f, nodegr %.3f (se %.3f)\n", sc.Converged, sc.AUC, sc.Terms[6].Coef, sc.Terms[6].SE)
	// Output: converged true, AUC 0.614, nodegr -0.904 (se 0.313)
}

func ExampleScores_Support() {
	sup := nsw().Propensity().Support()
	fmt.Printf("band [%.3f, %.3f], outside: %d treated, %d control\n", sup.Band.Lo, sup.Band.Hi, sup.OutsideTreated, sup.OutsideControl)
	// Output: band [0.238, 0.643], outside: 4 treated, 11 control
}

func ExampleStudy_Cells() {
	c := nsw().Cells("black", "hisp", "nodegr")
	fmt.Printf("%d cells, %d violating, %d units in them\n", len(c.Rows), c.Violating, c.UnitsViolating)
	// Output: 6 cells, 0 violating, 0 units in them
}

func ExampleStudy_Erosion() {
	e := nsw().Erosion("black", "nodegr", "educ", "age", "re75")
	for _, st := range e.Steps {
		fmt.Printf("+%-6s %5.1f%%\n", st.Added, 100*st.ShareBoth)
	}
	// Output:
	// +black  100.0%
	// +nodegr 100.0%
	// +educ   100.0%
	// +age     96.2%
	// +re75    85.8%
}

func ExampleStudy_Balance() {
	b := nsw().Balance()
	fmt.Printf("%s SMD %.3f\n", b.Rows[5].Term, b.Rows[5].SMD)
	// Output: nodegr SMD -0.305
}

func ExampleScores_Verdict() {
	s := nsw()
	v := s.Propensity().Verdict(causal.VerdictOptions{}, s.Cells("black", "hisp", "married", "nodegr"))
	fmt.Println(v.Status, v.Supported)
	// Output: adequate [ATE ATT ATC ATO]
}

func ExampleVerdict_String() {
	s := nsw()
	v := s.Propensity().Verdict(causal.VerdictOptions{}, s.Cells("black", "hisp", "married", "nodegr"))
	fmt.Print(v)
	// Output:
	// Positivity verdict: ADEQUATE
	//   note: positivity cells (black × hisp × married × nodegr): 5 sparse cells (an arm with fewer than 5 units, or missing in a cell small enough for chance) hold 13 units (2.9%)
	//   estimands the data support: ATE, ATT, ATC, ATO
	//   remedy: none needed for positivity; the ATE is estimable on these covariates (check balance after weighting)
	//   These diagnostics cannot verify unconfoundedness; estimates depend on the covariates measured.
}

func ExampleFromColumns() {
	s := causal.FromColumns([]string{"x", "arm"},
		map[string][]float64{"x": {1, 2, 3, 4, 5, 6}},
		map[string][]string{"arm": {"a", "b", "a", "b", "a", "b"}}).
		Treat("arm").TreatedLevel("b").Adjust("x")
	d, err := s.Design()
	fmt.Println(err, d.Treated, d.Control)
	// Output: <nil> 3 3
}

func ExampleStudy_String() {
	fmt.Print(nsw())
	// Output:
	// Study of ../testdata/nsw_dehejia_wahba.csv: 445 rows, 12 columns
	//   treatment  treat
	//   outcome    re78
	//   covariates age, educ, black, hisp, married, nodegr, re74, re75
	//   rows used  445 (185 treated, 260 control; 0 incomplete rows dropped); 9 design terms
}
