package scenario

import (
	"fmt"
	"math"
)

const extrapStream = 0x6578747261706f6c // "extrapol"

// ExtrapolationEffect is the constant treatment effect of [Extrapolation].
const ExtrapolationEffect = 2.0

// Extrapolation simulates n units with one covariate x, a treatment t (0/1,
// exactly n/2 rounded down treated, in random order) and an outcome y:
//
//	x    ~ N(+separation/2, 1) for treated, N(−separation/2, 1) for controls
//	y(0) = 1 + 0.5·x + 0.4·x² + 1.5·sin(1.5·x) + N(0, 1)
//	y(1) = y(0) + 2
//	y    = y(t)
//
// The effect is the same for every unit, tau = 2 (ExtrapolationEffect), so the
// true ATE and ATT are both exactly 2, in the sample and in the population.
// The outcome curve bends, so a straight line fitted to each arm fits well
// where that arm has data and drifts away from the curve where it has none:
// the further apart the arms (separation, in standard deviations), the more
// a regression-adjusted estimate rests on extrapolation. Values are rounded
// to 6 decimals.
//
// It returns an error for n < 10 or a separation that is negative or not
// finite.
func Extrapolation(seed uint64, n int, separation float64) (*Data, error) {
	if err := checkN("Extrapolation", n); err != nil {
		return nil, err
	}
	if err := checkFinite("Extrapolation", "separation", separation); err != nil {
		return nil, err
	}
	if separation < 0 {
		return nil, fmt.Errorf("scenario.Extrapolation: separation = %g is negative; give the distance between the arm centres, >= 0", separation)
	}
	r, _ := newRand(seed, extrapStream)
	t := assignHalf(r, n)
	x := make([]float64, n)
	y := make([]float64, n)
	y0 := make([]float64, n)
	y1 := make([]float64, n)
	for i := 0; i < n; i++ {
		c := -separation / 2
		if t[i] == 1 {
			c = separation / 2
		}
		xi := c + r.NormFloat64()
		x[i] = round(xi, 6)
		y0[i] = round(1+0.5*xi+0.4*xi*xi+1.5*math.Sin(1.5*xi)+r.NormFloat64(), 6)
		y1[i] = round(y0[i]+ExtrapolationEffect, 6)
		y[i] = y0[i]
		if t[i] == 1 {
			y[i] = y1[i]
		}
	}
	d := &Data{
		Names:   []string{"x", "t", "y"},
		Num:     map[string][]float64{"x": x, "t": t, "y": y},
		Str:     map[string][]string{},
		Truth:   map[string][]float64{"y0": y0, "y1": y1, "propensity": extrapScore(x, separation, n)},
		TrueATE: ExtrapolationEffect,
		TrueATT: ExtrapolationEffect,
	}
	d.Notes = fmt.Sprintf("Extrapolation scenario (simulated), seed %d, %d units, %d treated, separation %g.\n"+
		"x ~ N(+-separation/2, 1) by arm; y(0) = 1 + 0.5x + 0.4x^2 + 1.5 sin(1.5x) + N(0,1); y(1) = y(0) + 2.\n"+
		"True ATE = ATT = 2 exactly. A linear outcome model per arm extrapolates where the arms do not overlap.\n",
		seed, n, n/2, separation)
	return d, nil
}

// extrapScore is the true score of the design, n1·φ(x−s/2) / (n1·φ(x−s/2) + n0·φ(x+s/2)).
func extrapScore(x []float64, s float64, n int) []float64 {
	n1, n0 := float64(n/2), float64(n-n/2)
	p := make([]float64, len(x))
	for i, v := range x {
		// ratio n0·φ(x+s/2) / (n1·φ(x−s/2)) = (n0/n1)·exp(−s·x)
		p[i] = 1 / (1 + n0/n1*math.Exp(-s*v))
	}
	return p
}
