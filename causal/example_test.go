package causal_test

import (
	"fmt"
	"math"

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
	//   ATE  supported               ESS 176.0 treated / 251.5 control, largest weight 0.9% of its arm, variance ×1.04
	//   ATT  supported               ESS 185.0 treated / 217.7 control, largest weight 1.0% of its arm, variance ×1.08
	//   ATC  supported               ESS 160.8 treated / 260.0 control, largest weight 1.2% of its arm, variance ×1.09
	//   ATO  supported               ESS 179.8 treated / 246.6 control, largest weight 0.7% of its arm, variance ×1.04
	//   note: positivity cells (black × hisp × married × nodegr): 1 small cells lack an arm (2 treated, 0 controls in them), as random assignment with these arm sizes often gives at their size: not a violation
	//   note: positivity cells (black × hisp × married × nodegr): 7 treated units (3.8% of the arm) are in cells with fewer than 5 controls; random assignment with these arm sizes gives 6.1 on average (p = 0.805, family-wise): as chance gives
	//   note: positivity cells (black × hisp × married × nodegr): 6 controls (2.3% of the arm) are in cells with fewer than 5 treated units; random assignment with these arm sizes gives 13.7 on average (p = 1, family-wise): as chance gives
	//   note: 4 treated units (2.2% of the arm) have scores outside the controls' range [0.195, 0.643]; random assignment with these arm sizes gives 1.8 on average (p = 0.55, family-wise): as chance gives
	//   note: 11 controls (4.2% of the arm) have scores outside the treated units' range [0.238, 0.676]; random assignment with these arm sizes gives 3.8 on average (p = 0.325, family-wise): as chance gives
	//   estimands the data support: ATE, ATT, ATC, ATO
	//   remedy: none needed for positivity: the ATE is supported on these covariates (check balance after weighting)
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

func waterAll() *causal.Study {
	return causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "home_age", "last_summer_lpd", "pool", "district", "income_band")
}

func ExampleStudy_TreatedLevel() {
	d, _ := waterAll().Design()
	fmt.Println(d.Treated, "audited of", d.N)
	// Output: 1048 audited of 4000
}

func ExampleStudy_DropIncomplete() {
	s := causal.FromColumns([]string{"x", "t"},
		map[string][]float64{"x": {1, math.NaN(), 3, 4, 5, 6}, "t": {0, 1, 0, 1, 0, 1}}, nil).Treat("t").Adjust("x")
	fmt.Println(s.Err())
	d, _ := s.DropIncomplete().Design()
	fmt.Println(d.N, "rows used,", d.RowsDropped, "dropped")
	// Output:
	// missing values in x (1): 1 row is incomplete; fill them in, or use .DropIncomplete() to drop those rows (the report then says how many were dropped)
	// 5 rows used, 1 dropped
}

func ExampleStudy_CellsWith() {
	c := waterAll().CellsWith(causal.CellOptions{Bins: 10, Thin: 5}, "lot_m2", "pool")
	fmt.Printf("%d cells, %d violating, %d thin\n", len(c.Rows), c.Violating, c.ThinCells)
	// Output: 20 cells, 0 violating, 4 thin
}

func ExampleStudy_ErosionGreedy() {
	e := waterAll().ErosionGreedy()
	last := e.Steps[len(e.Steps)-1]
	fmt.Printf("order %v; with all: %.1f%% of units in cells with both arms\n", e.Order, 100*last.ShareBoth)
	// Output: order [household_size lot_m2 income_band pool last_summer_lpd district home_age]; with all: 23.9% of units in cells with both arms
}

func ExampleBuildReport() {
	r, err := causal.BuildReport(nsw(), causal.ReportOptions{Estimand: causal.ATE})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(r.Schema, r.Verdict.Status, len(r.Estimates), "estimates")
	// Output: counterpart.report/v1 adequate 7 estimates
}
