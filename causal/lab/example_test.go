package lab_test

import (
	"fmt"

	"github.com/counterpartlab/counterpart/causal/lab"
)

func ExampleErosion() {
	rows, err := lab.Erosion(lab.ErosionGrid{Seed: 1, Units: 20000, MaxDims: 4, Shift: 0.5, Bins: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range rows {
		fmt.Printf("d=%d in box %.2f (design %.4f); cells with both arms %.1f\n", r.Dims, r.InSharedBox, r.TrueOverlap, r.CellsWithBothArms)
	}
	// Output:
	// d=1 in box 0.50 (design 0.5000); cells with both arms 0.6
	// d=2 in box 0.25 (design 0.2500); cells with both arms 0.4
	// d=3 in box 0.12 (design 0.1250); cells with both arms 0.2
	// d=4 in box 0.06 (design 0.0625); cells with both arms 0.1
}

func ExampleExtrapolation() {
	rows, err := lab.Extrapolation(lab.ExtrapolationGrid{Seed: 1, Units: 1000, Separations: []float64{0, 4}, Replicates: 20})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range rows {
		fmt.Printf("separation %g: error %.1f, predictions outside %.0f%%\n", r.Separation, r.Error, 100*r.OutsideShare)
	}
	// Output:
	// separation 0: error 0.0, predictions outside 0%
	// separation 4: error 3.1, predictions outside 84%
}

func ExampleTrimming() {
	rows, err := lab.Trimming(lab.TrimmingGrid{Seed: 1, Units: 1000, Alphas: []float64{0, 0.1}, Replicates: 50})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range rows {
		fmt.Printf("α = %.1f: kept %.0f%%, SD %.1f, bias %.1f\n", r.Alpha, 100*r.KeptShare, r.SD, r.Bias)
	}
	// Output:
	// α = 0.0: kept 100%, SD 0.6, bias 0.1
	// α = 0.1: kept 63%, SD 0.1, bias -0.8
}
