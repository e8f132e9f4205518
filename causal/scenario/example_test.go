package scenario_test

import (
	"fmt"
	"os"

	"github.com/counterpartlab/counterpart/causal/scenario"
)

func ExampleWaterAudits() {
	d, err := scenario.WaterAudits(scenario.WaterAuditsSeed, scenario.WaterAuditsN)
	if err != nil {
		fmt.Println(err)
		return
	}
	audited := map[string]int{}
	for i, a := range d.Str["audit"] {
		if a == "yes" {
			audited[d.Str["district"][i]]++
		}
	}
	fmt.Print(d)
	fmt.Println("audited in harbour:", audited["harbour"], "in east:", audited["east"])
	// Output:
	// 4000 rows; columns: district, income_band, household_size, lot_m2, home_age, pool, last_summer_lpd, audit, litres_per_day
	// true sample ATE: -76.6506; true sample ATT: -106.0583
	// audited in harbour: 0 in east: 316
}

func ExampleWaterAudits_error() {
	_, err := scenario.WaterAudits(1, 3)
	fmt.Println(err)
	// Output:
	// scenario.WaterAudits: n = 3 is too few units; use n >= 10
}

func ExampleData_WriteCSV() {
	d, err := scenario.RandomisedSimple(1, 10, 2)
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := d.WriteCSV(os.Stdout); err != nil {
		fmt.Println(err)
	}
	// Output:
	// x1,x2,x3,t,y
	// 0.612809,1,0.501992,0,5.353354
	// 1.332262,1,0.712643,1,7.880235
	// -0.50222,1,8.692384,0,2.592695
	// 0.704727,1,3.651599,1,7.506648
	// -0.726989,0,3.402936,0,-1.176723
	// 0.736369,0,7.990339,1,6.720687
	// -0.314368,1,9.701219,0,6.25481
	// -1.004614,0,1.048991,1,3.121602
	// -0.384714,1,7.146154,0,3.600174
	// 0.707194,1,5.617499,1,7.685543
}

func ExampleOverlapBoxes() {
	// Share of units inside the box where both arms have support, as
	// dimensions are added; the design value is 0.5^d.
	for _, d := range []int{1, 2, 4, 8} {
		data, err := scenario.OverlapBoxes(1, 10000, d, 0.5)
		if err != nil {
			fmt.Println(err)
			return
		}
		inside := 0
		for _, p := range data.Truth["propensity"] {
			if p > 0 && p < 1 {
				inside++
			}
		}
		fmt.Printf("d=%d inside=%.3f design=%.3f\n", d, float64(inside)/10000, 1/float64(int(1)<<d))
	}
	// Output:
	// d=1 inside=0.509 design=0.500
	// d=2 inside=0.247 design=0.250
	// d=4 inside=0.064 design=0.062
	// d=8 inside=0.004 design=0.004
}

func ExampleExtrapolation() {
	d, err := scenario.Extrapolation(1, 1000, 3)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(d.Names, d.TrueATE, d.TrueATT)
	// Output:
	// [x t y] 2 2
}

func ExampleKangSchafer() {
	d, err := scenario.KangSchafer(1, 1000)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(d.Names, d.TrueATE)
	// Output:
	// [z1 z2 z3 z4 x1 x2 x3 x4 t y] 10
}
