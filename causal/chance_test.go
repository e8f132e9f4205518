package causal

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// nullDesign is a small design with a constant column besides the
// intercept among the free units, and units pinned by separation left out.
func nullDesign(n int) (*Design, []int) {
	r := rand.New(rand.NewPCG(3, 4))
	d := &Design{N: n, P: 5, X: make([]float64, n*5), T: make([]float64, n)}
	var free []int
	for i := 0; i < n; i++ {
		x := d.X[i*5 : (i+1)*5]
		x[0] = 1
		x[1] = 2000 + 10*r.NormFloat64() // a large mean: centring matters
		x[2] = r.NormFloat64()
		if r.Float64() < 0.3 {
			x[3] = 1
		}
		x[4] = 0 // constant among the free units
		if i%10 == 0 {
			x[4] = 1 // these units are pinned: not free
			continue
		}
		free = append(free, i)
	}
	return d, free
}

// TestNullFitIsTheMaximumLikelihoodFit checks the permutation refit
// against the project's Newton–Raphson fit on the same units (its
// documented accuracy: about 1e-4 on the logit scale), and that a batch of
// treatments gives each the same scores, bit for bit, as fitting it alone.
func TestNullFitIsTheMaximumLikelihoodFit(t *testing.T) {
	d, free := nullDesign(3000)
	n := len(free)
	n1 := n / 3
	nf := newNullFit(d, free, float64(n1)/float64(n))
	if nf.q != 3 {
		t.Fatalf("varying columns %v, want 3 (column 4 is constant among the free units)", nf.cols)
	}
	K := 5
	ts, es := make([][]float64, K), make([][]float64, K)
	for k := range ts {
		ts[k], es[k] = make([]float64, n), make([]float64, n)
		permuteArms(ts[k], n1, permRand(9, k))
	}
	nf.scores(ts, es)
	X := make([]float64, n*4)
	for r, i := range free {
		copy(X[r*4:(r+1)*4], d.X[i*5:i*5+4])
	}
	for k := range ts {
		fit, err := fitLogistic(X, n, 4, ts[k], nil, nil, logitOptions{})
		if err != nil {
			t.Fatal(err)
		}
		var worst float64
		for r := range free {
			l1 := math.Log(es[k][r] / (1 - es[k][r]))
			l2 := math.Log(fit.e[r] / (1 - fit.e[r]))
			worst = math.Max(worst, math.Abs(l1-l2))
		}
		if worst > 1e-3 {
			t.Errorf("permutation %d: refit differs from the maximum-likelihood fit by %.2g on the logit scale", k, worst)
		}
		one := [][]float64{make([]float64, n)}
		nf.scores(ts[k:k+1], one)
		for r := range one[0] {
			if one[0][r] != es[k][r] {
				t.Fatalf("permutation %d unit %d: %v in a batch, %v alone", k, r, es[k][r], one[0][r])
			}
		}
	}
}

// TestPermuteArms checks that every draw has exactly n1 treated units and
// that each unit is treated in n1/n of the draws (binomial 4.5 SD bound).
func TestPermuteArms(t *testing.T) {
	n, n1, draws := 50, 17, 20000
	count := make([]int, n)
	tr := make([]float64, n)
	for b := 0; b < draws; b++ {
		permuteArms(tr, n1, permRand(1, b))
		s := 0
		for i, v := range tr {
			if v == 1 {
				count[i]++
				s++
			}
		}
		if s != n1 {
			t.Fatalf("draw %d has %d treated, want %d", b, s, n1)
		}
	}
	p := float64(n1) / float64(n)
	sd := math.Sqrt(float64(draws) * p * (1 - p))
	for i, c := range count {
		if math.Abs(float64(c)-float64(draws)*p) > 4.5*sd {
			t.Errorf("unit %d treated in %d of %d draws, want %.0f ± %.0f", i, c, draws, float64(draws)*p, 4.5*sd)
		}
	}
}

// TestPermutationNullAnyCores checks that the permutation null does not
// depend on the number of cores.
func TestPermutationNullAnyCores(t *testing.T) {
	d, free := nullDesign(20000)
	r := rand.New(rand.NewPCG(5, 6))
	eObs := make([]float64, len(free))
	for k, i := range free {
		d.T[i] = 0
		if r.Float64() < 0.4 {
			d.T[i] = 1
		}
		eObs[k] = 0.2 + 0.4*r.Float64()
	}
	stats := []permStat{
		{"outside", func(_, _ []float64, s *scoreSummary) float64 { return s.out1 + s.out0 }},
		{"vif", func(_, _ []float64, s *scoreSummary) float64 { return s.precision(ATE).vif }},
	}
	run := func(procs int) *permResult {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		return permutationNull(d, free, eObs, stats, 29, 11, 0.01)
	}
	a, b := run(1), run(3)
	for k := range stats {
		if a.mean[k] != b.mean[k] || a.adjP[k] != b.adjP[k] {
			t.Errorf("%s: mean %v / %v, adjusted p %v / %v on 1 and 3 cores", stats[k].name, a.mean[k], b.mean[k], a.adjP[k], b.adjP[k])
		}
	}
}
