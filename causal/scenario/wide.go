package scenario

import "fmt"

const wideStream = 0x7769646573636e72 // "widescnr"

// wideMaxValues bounds n·p for Wide (2.4 GB of covariates): enough for the
// 1e7 × 20 scale benchmark, small enough that a mistyped size is an error.
const wideMaxValues = 300_000_000

// Wide simulates n units with p covariates, for benchmarks and scale tests
// of the whole analysis on large files. Covariate j = 1..p is
//
//	x_j ~ Bernoulli(0.2 + 0.1·((j/4) mod 4))   when j is a multiple of 4
//	x_j ~ N(0, 1)                               otherwise
//
// and, with c_j = x_j − E[x_j] (the centred covariate),
//
//	t    ~ Bernoulli(expit(Σ_j 0.6·c_j / j))
//	y(0) = 1 + Σ_j c_j / j + N(0, 1)
//	y(1) = y(0) + 1 + 0.5·x_1
//	y    = y(t)
//
// so the individual effect is 1 + 0.5·x_1 (x_1 is normal) and the
// population ATE is 1; the true sample ATE and ATT are computed from the
// draws. Overlap is good: the true scores stay well inside (0, 1). Columns
// x1..xp, t, y; values rounded to 4 decimals.
//
// It returns an error for n < 10, p < 1 or p > 200, or n·p above 3e8.
func Wide(seed uint64, n, p int) (*Data, error) {
	if err := checkN("Wide", n); err != nil {
		return nil, err
	}
	if p < 1 || p > 200 {
		return nil, fmt.Errorf("scenario.Wide: p = %d covariates; use 1 <= p <= 200", p)
	}
	if n*p > wideMaxValues {
		return nil, fmt.Errorf("scenario.Wide: n·p = %d values is more than the %d it makes at once; use a smaller n or p", n*p, wideMaxValues)
	}
	r, _ := newRand(seed, wideStream)
	names := make([]string, 0, p+2)
	cols := make(map[string][]float64, p+2)
	xs := make([][]float64, p)
	share := make([]float64, p) // Bernoulli share for binary covariates; 0 for normal ones
	for j := range xs {
		names = append(names, fmt.Sprintf("x%d", j+1))
		xs[j] = make([]float64, n)
		cols[names[j]] = xs[j]
		if (j+1)%4 == 0 {
			share[j] = 0.2 + 0.1*float64(((j+1)/4)%4)
		}
	}
	t := make([]float64, n)
	y := make([]float64, n)
	y0 := make([]float64, n)
	y1 := make([]float64, n)
	prop := make([]float64, n)
	for i := 0; i < n; i++ {
		var eta, mu float64
		for j := range xs {
			var v, c float64
			if share[j] > 0 {
				if r.Float64() < share[j] {
					v = 1
				}
				c = v - share[j]
			} else {
				v = round(r.NormFloat64(), 4)
				c = v
			}
			xs[j][i] = v
			eta += 0.6 * c / float64(j+1)
			mu += c / float64(j+1)
		}
		prop[i] = expit(eta)
		y0[i] = round(1+mu+r.NormFloat64(), 4)
		y1[i] = round(y0[i]+1+0.5*xs[0][i], 4)
		y[i] = y0[i]
		if r.Float64() < prop[i] {
			t[i], y[i] = 1, y1[i]
		}
	}
	names = append(names, "t", "y")
	cols["t"], cols["y"] = t, y
	d := &Data{
		Names: names,
		Num:   cols,
		Str:   map[string][]string{},
		Truth: map[string][]float64{"y0": y0, "y1": y1, "propensity": prop},
	}
	d.TrueATE, d.TrueATT = sampleEffects(y0, y1, t)
	d.Notes = fmt.Sprintf("Wide design (simulated), seed %d, %d units, %d covariates (every 4th 0/1, the others N(0,1)).\n"+
		"P(t=1) = expit(sum_j 0.6 c_j / j) with c_j the centred covariate; y(0) = 1 + sum_j c_j / j + N(0,1);\n"+
		"y(1) = y(0) + 1 + 0.5 x1. Population ATE = 1; sample ATE = %.4f, sample ATT = %.4f.\n", seed, n, p, d.TrueATE, d.TrueATT)
	return d, nil
}
