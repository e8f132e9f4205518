package scenario

import "fmt"

const randStream = 0x72616e646f6d6973 // "randomis"

// RandomisedSimple simulates a well-behaved completely randomised experiment
// of n units, exactly n/2 (rounded down) treated, for coverage simulations:
//
//	x1 ~ N(0, 1),  x2 ~ Bernoulli(0.4),  x3 ~ U(0, 10)
//	y(0) = 1 + 2·x1 + 1.5·x2 + 0.3·x3 + N(0, 1)
//	y(1) = y(0) + ate
//	y    = y(t)
//
// The effect is ate for every unit, so the true ATE and ATT are exactly ate
// in the sample and in the population; the true propensity is n1/n for
// every unit. Columns x1, x2, x3, t, y; values rounded to 6 decimals (so y(1)
// − y(0) equals ate up to that rounding when ate has more decimals).
//
// It returns an error for n < 10 or an ate that is not finite.
func RandomisedSimple(seed uint64, n int, ate float64) (*Data, error) {
	if err := checkN("RandomisedSimple", n); err != nil {
		return nil, err
	}
	if err := checkFinite("RandomisedSimple", "ate", ate); err != nil {
		return nil, err
	}
	r, _ := newRand(seed, randStream)
	t := assignHalf(r, n)
	x1 := make([]float64, n)
	x2 := make([]float64, n)
	x3 := make([]float64, n)
	y := make([]float64, n)
	y0 := make([]float64, n)
	y1 := make([]float64, n)
	prop := make([]float64, n)
	for i := 0; i < n; i++ {
		x1[i] = round(r.NormFloat64(), 6)
		if r.Float64() < 0.4 {
			x2[i] = 1
		}
		x3[i] = round(10*r.Float64(), 6)
		y0[i] = round(1+2*x1[i]+1.5*x2[i]+0.3*x3[i]+r.NormFloat64(), 6)
		y1[i] = round(y0[i]+ate, 6)
		y[i] = y0[i]
		if t[i] == 1 {
			y[i] = y1[i]
		}
		prop[i] = float64(n/2) / float64(n)
	}
	d := &Data{
		Names:   []string{"x1", "x2", "x3", "t", "y"},
		Num:     map[string][]float64{"x1": x1, "x2": x2, "x3": x3, "t": t, "y": y},
		Str:     map[string][]string{},
		Truth:   map[string][]float64{"y0": y0, "y1": y1, "propensity": prop},
		TrueATE: ate,
		TrueATT: ate,
	}
	d.Notes = fmt.Sprintf("Randomised experiment (simulated), seed %d, %d units, %d treated by complete randomisation.\n"+
		"x1 ~ N(0,1), x2 ~ Bernoulli(0.4), x3 ~ U(0,10); y(0) = 1 + 2 x1 + 1.5 x2 + 0.3 x3 + N(0,1); y(1) = y(0) + %g.\n"+
		"True ATE = ATT = %g.\n", seed, n, n/2, ate, ate)
	return d, nil
}
