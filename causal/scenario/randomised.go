package scenario

import (
	"fmt"
	"math"
	"sort"
)

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

// Violation is a structural positivity violation built into RandomisedMixed.
type Violation int

const (
	// NoViolation: a completely randomised experiment.
	NoViolation Violation = iota
	// NeverTreated: the units of one region (level "zone=closed" of the
	// categorical column zone) are never treated.
	NeverTreated
	// AlwaysTreated: the units of one region (zone=open) are always treated.
	AlwaysTreated
	// Threshold: units with the continuous covariate gate above a cut are
	// always treated.
	Threshold
)

// RandomisedMixed simulates an experiment of n units with k ≥ 2 covariates
// of mixed type, cycling through
//
//	binary  b ~ Bernoulli(0.3)
//	count   c ~ Poisson(2)
//	skewed  s ~ LogNormal(0, 1)
//	levels  l ~ one of 8 levels "L1".."L8" with probabilities ∝ 8, 7, …, 1
//
// (columns x1..xk; the 4th, 8th, … are text columns), a region column zone
// ("closed", "open" or "rest") and a continuous column gate ~ N(0, 1). The
// treated share is share: exactly round(share·n) units are treated by
// complete randomisation among the units that the violation leaves free.
// With a violation, a share viol of the units is placed in the region the
// violation concerns: zone=closed (never treated), zone=open (always
// treated), or gate above its (1 − viol) quantile (always treated); the
// other units keep zone=rest. The outcome is y = x-sum + N(0, 1) (no
// effect). Columns x1..xk, zone, gate, t, y.
func RandomisedMixed(seed uint64, n int, share float64, k int, v Violation, viol float64) (*Data, error) {
	if err := checkN("RandomisedMixed", n); err != nil {
		return nil, err
	}
	if !(share > 0 && share < 1) || k < 1 || viol < 0 || viol >= 0.5 {
		return nil, fmt.Errorf("RandomisedMixed: share %g must be in (0, 1), k %d ≥ 1, viol %g in [0, 0.5)", share, k, viol)
	}
	r, _ := newRand(seed, randStream+uint64(v)+1)
	d := &Data{Num: map[string][]float64{}, Str: map[string][]string{}, Truth: map[string][]float64{}}
	y := make([]float64, n)
	for j := 1; j <= k; j++ {
		name := fmt.Sprintf("x%d", j)
		d.Names = append(d.Names, name)
		if j%4 == 0 {
			col := make([]string, n)
			for i := range col {
				u := r.Float64() * 36 // 8 + 7 + … + 1
				l, acc := 1, 8.0
				for u > acc && l < 8 {
					l++
					acc += float64(9 - l)
				}
				col[i] = fmt.Sprintf("L%d", l)
				y[i] += 0.1 * float64(l)
			}
			d.Str[name] = col
			continue
		}
		col := make([]float64, n)
		for i := range col {
			switch j % 4 {
			case 1:
				if r.Float64() < 0.3 {
					col[i] = 1
				}
			case 2:
				// Poisson(2) by inversion.
				u, p, c := r.Float64(), math.Exp(-2), 0
				s := p
				for u > s && c < 30 {
					c++
					p *= 2 / float64(c)
					s += p
				}
				col[i] = float64(c)
			case 3:
				col[i] = round(math.Exp(r.NormFloat64()), 6)
			}
			y[i] += col[i]
		}
		d.Num[name] = col
	}
	gate := make([]float64, n)
	zone := make([]string, n)
	for i := range gate {
		gate[i] = round(r.NormFloat64(), 6)
		zone[i] = "rest"
	}
	forced := make([]int8, n) // −1 control, +1 treated, 0 free
	m := int(math.Round(viol * float64(n)))
	switch v {
	case NeverTreated, AlwaysTreated:
		for _, i := range r.Perm(n)[:m] {
			if v == NeverTreated {
				zone[i], forced[i] = "closed", -1
			} else {
				zone[i], forced[i] = "open", 1
			}
		}
	case Threshold:
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		sort.Slice(idx, func(a, b int) bool { return gate[idx[a]] > gate[idx[b]] })
		for _, i := range idx[:m] {
			forced[i] = 1
		}
	}
	t := make([]float64, n)
	var free []int
	n1 := int(math.Round(share * float64(n)))
	for i, f := range forced {
		switch f {
		case 1:
			t[i] = 1
			n1--
		case 0:
			free = append(free, i)
		}
	}
	n1 = max(1, min(len(free)-1, n1))
	for _, p := range r.Perm(len(free))[:n1] {
		t[free[p]] = 1
	}
	for i := range y {
		y[i] = round(y[i]+r.NormFloat64(), 6)
	}
	d.Names = append(d.Names, "zone", "gate", "t", "y")
	d.Str["zone"] = zone
	d.Num["gate"], d.Num["t"], d.Num["y"] = gate, t, y
	d.TrueATE, d.TrueATT = 0, 0
	d.Notes = fmt.Sprintf("Mixed-type experiment (simulated), seed %d, %d units, treated share %g, %d covariates, violation %d in %g of the units.\n", seed, n, share, k, v, viol)
	return d, nil
}
