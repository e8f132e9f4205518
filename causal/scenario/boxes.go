package scenario

import (
	"fmt"
	"math"
	"strconv"
)

const boxesStream = 0x626f786573626f78 // "boxesbox"

// OverlapBoxes simulates n units with d covariates x1..xd and a treatment t
// (0/1), exactly n/2 (rounded down) treated, assigned in random order:
//
//	treated:  x ~ U(0, 1)^d
//	controls: x ~ U(shift, 1+shift)^d
//
// In each dimension the two boxes share an interval of length
// max(0, 1 − |shift|), so the region where both arms have support is a box
// holding a share (1 − |shift|)^d of each arm: with shift = 0.5, half the
// units in one dimension and 0.5^d in d dimensions. It is the lesson of
// dimensional erosion: each added covariate, even one that overlaps well on
// its own, shrinks common support. Values are rounded to 6 decimals.
//
// There is no outcome: TrueATE and TrueATT are NaN. Truth["propensity"] is
// the true score of the design, n1·f1(x) / (n1·f1(x) + n0·f0(x)) with the arm
// sizes n1, n0: 0 or 1 outside the shared box, n1/n inside.
//
// It returns an error for n < 10, d < 1, n·d above 100,000,000, or a shift
// that is not finite.
func OverlapBoxes(seed uint64, n, d int, shift float64) (*Data, error) {
	if err := checkN("OverlapBoxes", n); err != nil {
		return nil, err
	}
	if d < 1 {
		return nil, fmt.Errorf("scenario.OverlapBoxes: d = %d dimensions; use d >= 1", d)
	}
	if d > maxCells/n {
		return nil, fmt.Errorf("scenario.OverlapBoxes: n·d = %d·%d values is more than %d; use a smaller n or d", n, d, maxCells)
	}
	if err := checkFinite("OverlapBoxes", "shift", shift); err != nil {
		return nil, err
	}
	r, _ := newRand(seed, boxesStream)
	t := assignHalf(r, n)
	cols := make([][]float64, d)
	for j := range cols {
		cols[j] = make([]float64, n)
	}
	lo, hi := math.Max(0, shift), math.Min(1, 1+shift) // the shared box, empty if lo >= hi
	n1 := float64(n / 2)
	prop := make([]float64, n)
	for i := 0; i < n; i++ {
		off := 0.0
		if t[i] == 0 {
			off = shift
		}
		inside := true
		for j := 0; j < d; j++ {
			x := round(off+r.Float64(), 6)
			cols[j][i] = x
			if x < lo || x > hi {
				inside = false
			}
		}
		prop[i] = t[i]
		if inside {
			prop[i] = n1 / float64(n)
		}
	}
	data := &Data{
		Num:     map[string][]float64{"t": t},
		Str:     map[string][]string{},
		Truth:   map[string][]float64{"propensity": prop},
		TrueATE: math.NaN(),
		TrueATT: math.NaN(),
	}
	for j := 0; j < d; j++ {
		name := "x" + strconv.Itoa(j+1)
		data.Names = append(data.Names, name)
		data.Num[name] = cols[j]
	}
	data.Names = append(data.Names, "t")
	share := math.Pow(math.Max(0, 1-math.Abs(shift)), float64(d))
	data.Notes = fmt.Sprintf("Overlapping boxes (simulated), seed %d, %d units, %d treated, d = %d, shift = %g.\n"+
		"Treated x ~ U(0,1)^d, controls x ~ U(shift, 1+shift)^d. Each arm has a share (1-|shift|)^d = %.4g\n"+
		"of its units in the shared box [%g, %g]^d. No outcome: this scenario is for support diagnostics.\n",
		seed, n, n/2, d, shift, share, lo, hi)
	return data, nil
}
