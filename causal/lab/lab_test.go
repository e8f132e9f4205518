package lab

import (
	"math"
	"math/rand/v2"
	"reflect"
	"runtime"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// Fact of the design (scenario.OverlapBoxes): each unit falls inside the
// shared box [shift, 1]^d independently with probability (1 − shift)^d, so
// the share inside is binomial around it; the check allows four binomial
// standard errors. The cell share with both arms falls with each dimension.
func TestErosionWithinBinomialError(t *testing.T) {
	for _, shift := range []float64{0.5, 0.3} {
		rows, err := Erosion(ErosionGrid{Seed: 3, Units: 20000, MaxDims: 5, Shift: shift, Bins: 10, Replicates: 2})
		if err != nil {
			t.Fatal(err)
		}
		if len(rows) != 5 {
			t.Fatalf("shift %g: %d rows, want 5", shift, len(rows))
		}
		for k, r := range rows {
			want := math.Pow(1-shift, float64(k+1))
			if r.Dims != k+1 || math.Abs(r.TrueOverlap-want) > 1e-12 {
				t.Errorf("shift %g row %d: dims %d, true overlap %g; want %d, %g", shift, k, r.Dims, r.TrueOverlap, k+1, want)
			}
			if d := math.Abs(r.InSharedBox - want); d > 4*r.BinomialSE {
				t.Errorf("shift %g, d = %d: share in the shared box %.4f is %.1f binomial SEs from (1 − shift)^d = %.4f",
					shift, k+1, r.InSharedBox, d/r.BinomialSE, want)
			}
			if k > 0 && r.CellsWithBothArms >= rows[k-1].CellsWithBothArms {
				t.Errorf("shift %g: cells with both arms did not fall from d = %d to %d (%.4f, %.4f)", shift, k, k+1, rows[k-1].CellsWithBothArms, r.CellsWithBothArms)
			}
		}
	}
}

// At separation 0 the arms share one distribution (a randomised design), so
// regression adjustment is consistent (Lin 2013) and its mean error over
// replicates is 0 up to simulation error (4 simulation SEs plus an
// absolute floor of 0.01 for its O(1/n) bias). As the arms separate the
// error grows, each step by more than 3 combined simulation SEs, and so
// does the share of predictions outside the fitting arm's data.
func TestExtrapolationErrorGrowsFromZero(t *testing.T) {
	seps := []float64{0, 1, 2, 3, 4}
	rows, err := Extrapolation(ExtrapolationGrid{Seed: 11, Units: 1000, Separations: seps, Replicates: 40})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(rows[0].Error) > 4*rows[0].ErrorSE+0.01 {
		t.Errorf("separation 0: mean error %.4f, simulation SE %.4f; want 0 within 4 SEs", rows[0].Error, rows[0].ErrorSE)
	}
	for k := 1; k < len(rows); k++ {
		a, b := rows[k-1], rows[k]
		se := math.Hypot(a.ErrorSE, b.ErrorSE)
		if b.Error-a.Error < 3*se {
			t.Errorf("error did not grow from separation %g to %g: %.4f → %.4f (combined SE %.4f)", a.Separation, b.Separation, a.Error, b.Error, se)
		}
		if b.OutsideShare <= a.OutsideShare {
			t.Errorf("share outside did not grow from separation %g to %g: %.4f → %.4f", a.Separation, b.Separation, a.OutsideShare, b.OutsideShare)
		}
		if b.RMSE < math.Abs(b.Error) {
			t.Errorf("separation %g: RMSE %.4f below |mean error| %.4f", b.Separation, b.RMSE, math.Abs(b.Error))
		}
	}
}

// The trimming trade-off as a monotone trend test over replicates: on a grid
// of α from 0 to 0.1, the SD of the estimates falls and the bias grows in
// magnitude at every step. The replicates are resampled (a bootstrap over
// samples, 400 resamples); the trend must hold at every step in at least
// 95% of them. The bias must also follow the true average effect of the
// kept units, which the simulation knows: trimming moves the target.
func TestTrimmingTradesBiasForVariance(t *testing.T) {
	g := TrimmingGrid{Seed: 5, Units: 1000, Alphas: []float64{0, 0.02, 0.05, 0.1}, Replicates: 120}
	rows, err := Trimming(g)
	if err != nil {
		t.Fatal(err)
	}
	for k := 1; k < len(rows); k++ {
		if rows[k].SD >= rows[k-1].SD || math.Abs(rows[k].Bias) <= math.Abs(rows[k-1].Bias) {
			t.Errorf("α %g → %g: SD %.4f → %.4f, |bias| %.4f → %.4f; want SD down, |bias| up",
				rows[k-1].Alpha, rows[k].Alpha, rows[k-1].SD, rows[k].SD, math.Abs(rows[k-1].Bias), math.Abs(rows[k].Bias))
		}
		if rows[k].KeptShare >= rows[k-1].KeptShare {
			t.Errorf("α %g: kept share %.3f did not fall", rows[k].Alpha, rows[k].KeptShare)
		}
	}
	for _, r := range rows {
		// The estimate follows the kept units' true effect within
		// simulation error (4 SEs, floor 0.02 for the Hájek estimator's
		// small-sample bias).
		if d := math.Abs(r.Mean - r.KeptEffect); d > 4*r.SD/math.Sqrt(float64(r.Estimated))+0.02 {
			t.Errorf("α %g: mean estimate %.4f vs kept units' true effect %.4f", r.Alpha, r.Mean, r.KeptEffect)
		}
		if r.Estimated != g.Replicates {
			t.Errorf("α %g: %d of %d replicates estimated", r.Alpha, r.Estimated, g.Replicates)
		}
	}
	value, _, _, err := trimmingRuns(g, g.Replicates, 2.5, causal.IPWNormalized)
	if err != nil {
		t.Fatal(err)
	}
	na := len(g.Alphas)
	rng := rand.New(rand.NewPCG(1, 2))
	const resamples = 400
	good := 0
	for b := 0; b < resamples; b++ {
		idx := make([]int, g.Replicates)
		for i := range idx {
			idx[i] = rng.IntN(g.Replicates)
		}
		ok := true
		prevSD, prevBias := math.Inf(1), -1.0
		for k := 0; k < na; k++ {
			var m moments
			for _, r := range idx {
				m.add(value[r*na+k])
			}
			sd, bias := m.sd(), math.Abs(m.mean-3)
			if sd >= prevSD || bias <= prevBias {
				ok = false
			}
			prevSD, prevBias = sd, bias
		}
		if ok {
			good++
		}
	}
	if good < resamples*95/100 {
		t.Errorf("the trend (SD down, |bias| up at every step) held in %d of %d bootstrap resamples; want at least 95%%", good, resamples)
	}
	t.Logf("trend held in %d of %d resamples", good, resamples)
}

// The rows do not depend on the number of cores: each sample's seed comes
// from its index and slots are reduced in index order.
func TestRowsIndependentOfGOMAXPROCS(t *testing.T) {
	run := func() (any, any, any) {
		e, err := Erosion(ErosionGrid{Seed: 9, Units: 2000, MaxDims: 3, Shift: 0.4, Replicates: 3})
		if err != nil {
			t.Fatal(err)
		}
		x, err := Extrapolation(ExtrapolationGrid{Seed: 9, Units: 300, Separations: []float64{0, 2}, Replicates: 5})
		if err != nil {
			t.Fatal(err)
		}
		tr, err := Trimming(TrimmingGrid{Seed: 9, Units: 300, Alphas: []float64{0, 0.1}, Replicates: 5})
		if err != nil {
			t.Fatal(err)
		}
		return e, x, tr
	}
	old := runtime.GOMAXPROCS(1)
	e1, x1, t1 := run()
	runtime.GOMAXPROCS(4)
	e4, x4, t4 := run()
	runtime.GOMAXPROCS(old)
	for _, c := range []struct {
		name string
		a, b any
	}{{"Erosion", e1, e4}, {"Extrapolation", x1, x4}, {"Trimming", t1, t4}} {
		if !closeRows(reflect.ValueOf(c.a), reflect.ValueOf(c.b)) {
			t.Errorf("%s: rows differ between GOMAXPROCS 1 and 4:\n%+v\n%+v", c.name, c.a, c.b)
		}
	}
}

// closeRows compares slices of row structs field by field, floats to a
// relative 1e-12 (NaN equal to NaN).
func closeRows(a, b reflect.Value) bool {
	if a.Len() != b.Len() {
		return false
	}
	for i := 0; i < a.Len(); i++ {
		for j := 0; j < a.Index(i).NumField(); j++ {
			x, y := a.Index(i).Field(j), b.Index(i).Field(j)
			if x.Kind() == reflect.Float64 {
				u, v := x.Float(), y.Float()
				if !(math.IsNaN(u) && math.IsNaN(v)) && math.Abs(u-v) > 1e-12*math.Max(1, math.Abs(u)) {
					return false
				}
			} else if x.Interface() != y.Interface() {
				return false
			}
		}
	}
	return true
}

func TestGridErrorsNameTheField(t *testing.T) {
	cases := []struct {
		want string
		call func() error
	}{
		{"Units = 5", func() error { _, err := Erosion(ErosionGrid{Units: 5, MaxDims: 2}); return err }},
		{"grid is empty", func() error { _, err := Erosion(ErosionGrid{Units: 100}); return err }},
		{"Shift", func() error { _, err := Erosion(ErosionGrid{Units: 100, MaxDims: 2, Shift: math.NaN()}); return err }},
		{"Bins", func() error { _, err := Erosion(ErosionGrid{Units: 100, MaxDims: 2, Bins: -1}); return err }},
		{"Replicates = -2", func() error { _, err := Erosion(ErosionGrid{Units: 100, MaxDims: 2, Replicates: -2}); return err }},
		{"simulated samples", func() error {
			_, err := Extrapolation(ExtrapolationGrid{Units: 100, Separations: []float64{1, 2}, Replicates: maxSamples})
			return err
		}},
		{"Separations[1]", func() error {
			_, err := Extrapolation(ExtrapolationGrid{Units: 100, Separations: []float64{1, -1}})
			return err
		}},
		{"Alphas[0]", func() error { _, err := Trimming(TrimmingGrid{Units: 100, Alphas: []float64{0.5}}); return err }},
		{"Slope", func() error {
			_, err := Trimming(TrimmingGrid{Units: 100, Alphas: []float64{0}, Slope: math.Inf(1)})
			return err
		}},
	}
	for _, c := range cases {
		err := c.call()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want an error naming %q, got %v", c.want, err)
		}
	}
}

func TestParallelReturnsLowestIndexError(t *testing.T) {
	err := parallel(50, func(i int) error {
		if i == 7 || i == 30 {
			panic("boom")
		}
		return nil
	})
	if err == nil || !strings.Contains(err.Error(), "sample 7") {
		t.Errorf("got %v; want the panic of sample 7", err)
	}
}
