package scenario

import (
	"fmt"
	"math"
)

const ksStream = 0x6b616e677363686b // "kangschk"

// KangSchaferEffect is the constant treatment effect of [KangSchafer].
const KangSchaferEffect = 10.0

// KangSchafer simulates n units from a treatment-effect version of the design
// of Kang, J. D. Y. and Schafer, J. L. (2007), "Demystifying double
// robustness", Statistical Science 22(4), 523–539, as it is commonly
// restated (the coefficients below are recalled from memory, not checked
// against the paper):
//
//	z1..z4 ~ N(0, 1) independent
//	y(0)   = 210 + 27.4·z1 + 13.7·z2 + 13.7·z3 + 13.7·z4 + N(0, 1)
//	y(1)   = y(0) + 10
//	t      ~ Bernoulli(expit(−z1 + 0.5·z2 − 0.25·z3 − 0.1·z4))
//	y      = y(t)
//
// and the misspecified covariates an analyst sees in the original design:
//
//	x1 = exp(z1/2)
//	x2 = z2/(1 + exp(z1)) + 10
//	x3 = (z1·z3/25 + 0.6)³
//	x4 = (z2 + z4 + 20)²
//
// The original design studies the mean of y with y missing when t = 0; this
// version keeps both potential outcomes and a constant effect of 10
// (KangSchaferEffect), so the true ATE and ATT are both exactly 10, in the
// sample and in the population. Models in z are correct; the same models in
// x are wrong in both the propensity and the outcome. Columns z1..z4, x1..x4,
// t, y; values rounded to 6 decimals.
//
// It returns an error for n < 10.
func KangSchafer(seed uint64, n int) (*Data, error) {
	if err := checkN("KangSchafer", n); err != nil {
		return nil, err
	}
	r, _ := newRand(seed, ksStream)
	names := []string{"z1", "z2", "z3", "z4", "x1", "x2", "x3", "x4", "t", "y"}
	cols := make(map[string][]float64, len(names))
	for _, nm := range names {
		cols[nm] = make([]float64, n)
	}
	y0 := make([]float64, n)
	y1 := make([]float64, n)
	prop := make([]float64, n)
	for i := 0; i < n; i++ {
		z1, z2, z3, z4 := r.NormFloat64(), r.NormFloat64(), r.NormFloat64(), r.NormFloat64()
		y0[i] = round(210+27.4*z1+13.7*z2+13.7*z3+13.7*z4+r.NormFloat64(), 6)
		y1[i] = round(y0[i]+KangSchaferEffect, 6)
		prop[i] = expit(-z1 + 0.5*z2 - 0.25*z3 - 0.1*z4)
		t, y := 0.0, y0[i]
		if r.Float64() < prop[i] {
			t, y = 1, y1[i]
		}
		cols["z1"][i] = round(z1, 6)
		cols["z2"][i] = round(z2, 6)
		cols["z3"][i] = round(z3, 6)
		cols["z4"][i] = round(z4, 6)
		cols["x1"][i] = round(math.Exp(z1/2), 6)
		cols["x2"][i] = round(z2/(1+math.Exp(z1))+10, 6)
		cols["x3"][i] = round(math.Pow(z1*z3/25+0.6, 3), 6)
		cols["x4"][i] = round((z2+z4+20)*(z2+z4+20), 6)
		cols["t"][i] = t
		cols["y"][i] = y
	}
	att := math.NaN() // no treated unit: the ATT is not defined
	for _, v := range cols["t"] {
		if v == 1 {
			att = KangSchaferEffect
			break
		}
	}
	d := &Data{
		Names:   names,
		Num:     cols,
		Str:     map[string][]string{},
		Truth:   map[string][]float64{"y0": y0, "y1": y1, "propensity": prop},
		TrueATE: KangSchaferEffect,
		TrueATT: att,
	}
	d.Notes = fmt.Sprintf("Kang-Schafer design, treatment-effect version (simulated; coefficients as commonly restated, recalled from memory), seed %d, %d units.\n"+
		"z1..z4 ~ N(0,1); y(0) = 210 + 27.4 z1 + 13.7 (z2 + z3 + z4) + N(0,1); y(1) = y(0) + 10;\n"+
		"P(t=1) = expit(-z1 + 0.5 z2 - 0.25 z3 - 0.1 z4). Seen covariates x1 = exp(z1/2), x2 = z2/(1+exp(z1)) + 10,\n"+
		"x3 = (z1 z3/25 + 0.6)^3, x4 = (z2 + z4 + 20)^2. True ATE = ATT = 10 exactly.\n", seed, n)
	return d, nil
}
