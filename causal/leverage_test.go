package causal

import (
	"encoding/json"
	"math/rand/v2"
	"strings"
	"testing"
)

// The leverage rule of the extrapolation audit is the regressor-variable-hull
// check (Montgomery, Peck & Vining; see ExtrapolationAudit): h is convex in
// x, so no point of the convex hull of the fitting arm's design rows has a
// leverage above the arm's largest h_ii — checked on 2,000 random convex
// combinations of the NSW treated units' rows — while a point beyond the
// unit of largest leverage, away from the arm's mean, exceeds it. The text
// and JSON views name the rule.
func TestLeverageRuleHull(t *testing.T) {
	sc := nswStudy().Propensity()
	a := sc.Extrapolation(ATE)
	if a.Err() != nil {
		t.Fatal(a.Err())
	}
	d, m := sc.Design, a.m1
	p := d.P
	lev := func(x []float64) float64 {
		var h float64
		for j := 0; j < p; j++ {
			for k := 0; k < p; k++ {
				h += x[j] * m.xtxInv[j*p+k] * x[k]
			}
		}
		return h
	}
	var rows [][]float64
	mean := make([]float64, p)
	top, hTop := -1, 0.0
	for i := 0; i < d.N; i++ {
		if d.T[i] == 1 {
			r := d.X[i*p : (i+1)*p]
			rows = append(rows, r)
			for j, v := range r {
				mean[j] += v
			}
			if h := lev(r); h > hTop {
				top, hTop = len(rows)-1, h
			}
		}
	}
	for j := range mean {
		mean[j] /= float64(len(rows))
	}
	hmax := a.Models[0].MaxLeverage
	relClose(t, "largest leverage of the treated", hTop, hmax, 1e-12)
	r := rand.New(rand.NewPCG(3, 9))
	x := make([]float64, p)
	for trial := 0; trial < 2000; trial++ {
		k := 2 + r.IntN(6) // a combination of 2–7 rows, one of them the top-leverage unit half the time
		var tot float64
		for j := range x {
			x[j] = 0
		}
		for c := 0; c < k; c++ {
			row := rows[r.IntN(len(rows))]
			if c == 0 && trial%2 == 0 {
				row = rows[top]
			}
			wgt := r.Float64()
			tot += wgt
			for j, v := range row {
				x[j] += wgt * v
			}
		}
		for j := range x {
			x[j] /= tot
		}
		if h := lev(x); h > hmax*(1+1e-9) {
			t.Fatalf("a point of the hull has leverage %g above the arm's largest %g", h, hmax)
		}
	}
	for j := range x {
		x[j] = mean[j] + 1.5*(rows[top][j]-mean[j])
	}
	if h := lev(x); h <= hmax {
		t.Errorf("a point beyond the top-leverage unit has leverage %g, not above %g", h, hmax)
	}
	if !strings.Contains(a.String(), "regressor variable hull") {
		t.Errorf("text view does not name the leverage rule:\n%s", a)
	}
	b, _ := json.Marshal(a)
	var j struct {
		Rule string `json:"leverage_rule"`
	}
	if err := json.Unmarshal(b, &j); err != nil || j.Rule != LeverageRule {
		t.Errorf("JSON leverage_rule %q (%v)", j.Rule, err)
	}
}
