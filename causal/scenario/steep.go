package scenario

import (
	"fmt"
	"math"
)

const steepStream = 0x737465657073636f // "steepsco"

// SteepScoresATE is the population ATE of [SteepScores]: E[2 + x²] = 3 for
// x ~ N(0, 1).
const SteepScoresATE = 3.0

// SteepScores simulates n units with one covariate x, a treatment t (0/1)
// whose probability rises steeply with x, and an outcome y whose effect grows
// away from the centre:
//
//	x    ~ N(0, 1)
//	t    ~ Bernoulli(expit(slope·x))
//	y(0) = 1 + x + x²/2 + N(0, 1)
//	y(1) = y(0) + 2 + x²
//	y    = y(t)
//
// The individual effect is tau(x) = 2 + x², so the population ATE is 3
// (SteepScoresATE) whatever the slope; TrueATE and TrueATT are the sample
// means of tau over all and over the treated units. With a steep slope
// (2.5, say) many units have true scores near 0 or 1: inverse-probability
// weights are extreme, and trimming the units with extreme scores keeps
// those with x near 0, whose average effect is below 3. It is the
// scenario of the trimming trade-off: less variance, a different target.
// Values are rounded to 6 decimals; Truth holds "propensity", "y0", "y1".
//
// It returns an error for n < 10 or a slope that is not finite.
func SteepScores(seed uint64, n int, slope float64) (*Data, error) {
	if err := checkN("SteepScores", n); err != nil {
		return nil, err
	}
	if err := checkFinite("SteepScores", "slope", slope); err != nil {
		return nil, err
	}
	r, _ := newRand(seed, steepStream)
	x := make([]float64, n)
	t := make([]float64, n)
	y := make([]float64, n)
	y0 := make([]float64, n)
	y1 := make([]float64, n)
	prop := make([]float64, n)
	for i := 0; i < n; i++ {
		xi := round(r.NormFloat64(), 6)
		x[i] = xi
		prop[i] = expit(slope * xi)
		if r.Float64() < prop[i] {
			t[i] = 1
		}
		y0[i] = round(1+xi+xi*xi/2+r.NormFloat64(), 6)
		y1[i] = round(y0[i]+2+xi*xi, 6)
		y[i] = y0[i]
		if t[i] == 1 {
			y[i] = y1[i]
		}
	}
	ate, att := sampleEffects(y0, y1, t)
	d := &Data{
		Names:   []string{"x", "t", "y"},
		Num:     map[string][]float64{"x": x, "t": t, "y": y},
		Str:     map[string][]string{},
		Truth:   map[string][]float64{"y0": y0, "y1": y1, "propensity": prop},
		TrueATE: ate,
		TrueATT: att,
	}
	d.Notes = fmt.Sprintf("Steep scores (simulated), seed %d, %d units, slope %g.\n"+
		"x ~ N(0,1); t ~ Bernoulli(expit(slope x)); y(0) = 1 + x + x^2/2 + N(0,1); y(1) = y(0) + 2 + x^2.\n"+
		"Population ATE = 3; sample ATE %.4f, sample ATT %s.\n", seed, n, slope, ate, fmtEffect(att))
	if math.IsNaN(att) {
		d.Notes += "No unit was treated: choose a larger n or a smaller slope.\n"
	}
	return d, nil
}
