package causal

import (
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/mat"
)

// logNoneOf is log P(a group of m units drawn without replacement from n
// units, k of which have a property, holds none of them): the hypergeometric
// probability C(n − k, m) / C(n, m). −Inf when m > n − k.
func logNoneOf(m, n, k int) float64 {
	if m > n-k {
		return math.Inf(-1)
	}
	return logChoose(n-k, m) - logChoose(n, m)
}

// chanceMissing is the chance that a group of m units (a cell, a covariate
// level, the units at a covariate's tail) holds none of a given arm of
// nArm units when the n units' treatment is assigned completely at random:
// the exact hypergeometric C(n − nArm, m) / C(n, m) (sampling without
// replacement; e.g. Johnson, Kemp & Kotz 2005, Univariate Discrete
// Distributions, ch. 6), doubled because either arm could be the missing
// one (Bonferroni over the two arms). It is the p-value of "this group
// lacks that arm" under random assignment with the same arm sizes.
func chanceMissing(m, n, nArm int) float64 {
	if m <= 0 {
		return 1
	}
	return math.Min(1, 2*math.Exp(logNoneOf(m, n, nArm)))
}

// chanceSeparated is the probability that a continuous covariate with no
// ties separates the arms completely (every treated value above every
// control value or below every one) under random assignment with n1 of n
// treated: 2 / C(n, n1) (1 when an arm is empty).
func chanceSeparated(n, n1 int) float64 {
	if n1 <= 0 || n1 >= n {
		return 1
	}
	return math.Min(1, 2*math.Exp(-logChoose(n, n1)))
}

func logChoose(n, k int) float64 {
	x, _ := math.Lgamma(float64(n + 1))
	y, _ := math.Lgamma(float64(k + 1))
	z, _ := math.Lgamma(float64(n - k + 1))
	return x - y - z
}

// permStat is one statistic of the permutation family: larger is worse.
// fn reads the treatment of the free units (t), their scores (e) and the
// summary of both computed once per data set (sum).
type permStat struct {
	name string
	fn   func(t, e []float64, sum *scoreSummary) float64
}

// scoreSummary is what the score rules count, computed in two passes over
// the units: the score range of each arm, the units of each arm outside the
// other arm's range, the extreme scores per arm, and for each estimand the
// sums behind the Kish effective sample sizes and the largest weight.
type scoreSummary struct {
	lo1, hi1, lo0, hi0     float64
	n1, n0                 float64
	out1, out0             float64    // treated outside the controls' range; controls outside the treated's
	ext1, ext0             float64    // treated above 1 − eps; controls below eps
	s1, q1, m1, s0, q0, m0 [5]float64 // per Estimand (index = Estimand value)
}

func summarise(t, e []float64, eps float64, sum *scoreSummary) {
	*sum = scoreSummary{lo1: math.Inf(1), hi1: math.Inf(-1), lo0: math.Inf(1), hi0: math.Inf(-1)}
	for r, v := range e {
		ie, i1e := 1/v, 1/(1-v)
		if t[r] == 1 {
			sum.n1++
			if v < sum.lo1 {
				sum.lo1 = v
			}
			if v > sum.hi1 {
				sum.hi1 = v
			}
			if v > 1-eps {
				sum.ext1++
			}
			w := [5]float64{0, ie, 1, (1 - v) * ie, 1 - v}
			for k := 1; k < 5; k++ {
				sum.s1[k] += w[k]
				sum.q1[k] += w[k] * w[k]
				if w[k] > sum.m1[k] {
					sum.m1[k] = w[k]
				}
			}
		} else {
			sum.n0++
			if v < sum.lo0 {
				sum.lo0 = v
			}
			if v > sum.hi0 {
				sum.hi0 = v
			}
			if v < eps {
				sum.ext0++
			}
			w := [5]float64{0, i1e, v * i1e, 1, v}
			for k := 1; k < 5; k++ {
				sum.s0[k] += w[k]
				sum.q0[k] += w[k] * w[k]
				if w[k] > sum.m0[k] {
					sum.m0[k] = w[k]
				}
			}
		}
	}
	for r, v := range e {
		if t[r] == 1 {
			if v > sum.hi0 || v < sum.lo0 {
				sum.out1++
			}
		} else if v > sum.hi1 || v < sum.lo1 {
			sum.out0++
		}
	}
}

// precision is the precision of estimand e's weights from the summary.
func (sum *scoreSummary) precision(e Estimand) precision {
	k := int(e)
	p := precision{essT: kish(sum.s1[k], sum.q1[k]), essC: kish(sum.s0[k], sum.q0[k]), largest: math.Max(sum.m1[k]/sum.s1[k], sum.m0[k]/sum.s0[k])}
	p.vif = (1/p.essT + 1/p.essC) / (1/sum.n1 + 1/sum.n0)
	if math.IsNaN(p.vif) {
		p.vif = math.Inf(1)
	}
	return p
}

// permResult is the permutation null of a family of statistics.
type permResult struct {
	B        int
	observed []float64
	mean     []float64 // mean of each statistic over the permutations
	adjP     []float64 // family-wise adjusted p-value (single-step minP)
}

// nullFit is the propensity refit used inside the permutations: the
// logistic maximum-likelihood fit on the free units by Newton iterations
// with the Hessian held at its value under the null model (the chord or
// fixed-Hessian Newton method; e.g. Kelley 1995, Iterative Methods for
// Linear and Nonlinear Equations, §5.4). With centred design columns X
// (constant ones dropped) and π the treated share, each step is
// b₀ += Σ(t − e)/(n π(1 − π)), β += (π(1 − π) XᵀX)⁻¹ Xᵀ(t − e): its fixed
// point solves the likelihood equations exactly, so the refit is the
// maximum-likelihood fit, and XᵀX, which does not depend on t, is factored
// once; each step costs O(n·p). Under random assignment the Hessian is
// close to the null one and a few steps converge (to about 1e-4 on the
// logit scale; at most 10 are taken: a permutation that separates a level
// stops there, with scores near 0 or 1 as the observed fit has).
type nullFit struct {
	n, q int
	xc   []float64 // n × q centred columns
	sd   []float64 // their standard deviations (convergence scale)
	csum []float64 // their column sums (0 up to rounding)
	chol mat.Cholesky
	pi   float64
	ok   bool
}

func newNullFit(d *Design, free []int, pi float64) *nullFit {
	nf := &nullFit{n: len(free), pi: pi}
	var cols []int
	means := make([]float64, d.P)
	for j := 1; j < d.P; j++ {
		var s, s2 float64
		for _, i := range free {
			v := d.X[i*d.P+j]
			s += v
			s2 += v * v
		}
		m := s / float64(len(free))
		means[j] = m
		if s2/float64(len(free))-m*m > 1e-12*(1+m*m) {
			cols = append(cols, j)
		}
	}
	nf.q = len(cols)
	if nf.q == 0 {
		nf.ok = true
		return nf
	}
	nf.xc = make([]float64, nf.n*nf.q)
	nf.sd = make([]float64, nf.q)
	for r, i := range free {
		row := d.X[i*d.P : (i+1)*d.P]
		for a, j := range cols {
			nf.xc[r*nf.q+a] = row[j] - means[j]
		}
	}
	q := nf.q
	A := mat.NewSymDense(q, nil)
	acc := make([]float64, q*q)
	for r := 0; r < nf.n; r++ {
		x := nf.xc[r*q : (r+1)*q]
		for a := 0; a < q; a++ {
			xa := x[a]
			for b := a; b < q; b++ {
				acc[a*q+b] += xa * x[b]
			}
		}
	}
	nf.csum = make([]float64, q)
	for r := 0; r < nf.n; r++ {
		for a, v := range nf.xc[r*q : (r+1)*q] {
			nf.csum[a] += v
		}
	}
	var tr float64
	for a := 0; a < q; a++ {
		tr += acc[a*q+a]
		nf.sd[a] = math.Sqrt(acc[a*q+a] / float64(nf.n))
	}
	for jit := 0.0; jit < 1; jit = math.Max(1e-10, jit*100) {
		for a := 0; a < q; a++ {
			for b := a; b < q; b++ {
				v := acc[a*q+b]
				if a == b {
					v += jit * tr / float64(q)
				}
				A.SetSym(a, b, v)
			}
		}
		if nf.chol.Factorize(A) {
			nf.ok = true
			break
		}
	}
	return nf
}

// scores writes the refitted scores for treatment t (free units) into e;
// g and beta are scratch of length q.
func (nf *nullFit) scores(t, e []float64, g []float64) {
	q := nf.q
	w0 := nf.pi * (1 - nf.pi)
	b0 := math.Log(nf.pi / (1 - nf.pi))
	for i := range e {
		e[i] = nf.pi
	}
	if q == 0 || !nf.ok {
		return
	}
	beta := make([]float64, q)
	gv := mat.NewVecDense(q, g)
	var step mat.VecDense
	for it := 0; it < 10; it++ {
		for a := range g {
			g[a] = 0
		}
		var g0 float64
		if it == 0 {
			// e = π everywhere: Σ x(t − π) = Σ_{t=1} x − π Σ x, a sum over
			// the treated rows only, and Σ (t − π) = n₁ − nπ.
			var n1 float64
			for r := 0; r < nf.n; r++ {
				if t[r] == 1 {
					n1++
					for a, v := range nf.xc[r*q : (r+1)*q] {
						g[a] += v
					}
				}
			}
			for a := range g {
				g[a] -= nf.pi * nf.csum[a]
			}
			g0 = n1 - float64(nf.n)*nf.pi
		} else {
			for r := 0; r < nf.n; r++ {
				res := t[r] - e[r]
				g0 += res
				x := nf.xc[r*q : (r+1)*q]
				for a := range g {
					g[a] += x[a] * res
				}
			}
		}
		if err := nf.chol.SolveVecTo(&step, gv); err != nil {
			return
		}
		d0 := g0 / (float64(nf.n) * w0)
		b0 += d0
		big := math.Abs(d0)
		for a, v := range step.RawVector().Data {
			dv := v / w0
			beta[a] += dv
			big = math.Max(big, math.Abs(dv)*nf.sd[a])
		}
		for r := 0; r < nf.n; r++ {
			x := nf.xc[r*q : (r+1)*q]
			eta := b0
			for a, b := range beta {
				eta += x[a] * b
			}
			e[r] = sigmoid(eta)
		}
		// The chord iteration contracts by a factor of order |β| near the
		// null, so the error left after a step of size δ is of order δ²:
		// δ < 1e-2 leaves about 1e-4 on the logit scale (2.5e-5 or less on
		// the score scale), far below what the count statistics resolve;
		// at n = 1e6 one step reaches it.
		if big < 1e-2 {
			return
		}
	}
}

// permRand is the generator of permutation b: PCG (O'Neill 2014) seeded by
// the seed and b, so the result does not depend on how permutations are
// spread over cores.
func permRand(seed uint64, b int) *rand.Rand {
	return rand.New(rand.NewPCG(seed, 0x7065726d75746573^uint64(b)))
}

// permutationNull computes the statistics on the observed treatment (with
// the scores eObs) and on B random permutations of the treatment among the
// free units, each with its propensity refit (nullFit), and the family-wise
// adjusted p-values by the single-step minP method of Westfall & Young
// (1993, Resampling-Based Multiple Testing, §2.6): for permutation b (the
// observed data counting as one of the B + 1), p_k(b) is the share of the
// B + 1 values of statistic k at least as large as its value in b; the
// adjusted p of statistic k is the share of the B + 1 data sets whose
// smallest p_k(b) over all k is at most the observed p_k. Under random
// assignment the chance that any adjusted p is at most α is at most α
// (up to the refit approximation). Seeded; independent of GOMAXPROCS.
func permutationNull(d *Design, free []int, eObs []float64, stats []permStat, B int, seed uint64, eps float64) *permResult {
	K := len(stats)
	res := &permResult{B: B, observed: make([]float64, K), mean: make([]float64, K), adjP: make([]float64, K)}
	if K == 0 {
		return res
	}
	n := len(free)
	tObs := make([]float64, n)
	var n1 float64
	for r, i := range free {
		tObs[r] = d.T[i]
		n1 += d.T[i]
	}
	pi := n1 / float64(n)
	var sumObs scoreSummary
	summarise(tObs, eObs, eps, &sumObs)
	for k, s := range stats {
		res.observed[k] = s.fn(tObs, eObs, &sumObs)
	}
	if B <= 0 || n1 == 0 || n1 == float64(n) {
		for k := range res.adjP {
			res.adjP[k] = 1
		}
		return res
	}
	nf := newNullFit(d, free, pi)
	vals := make([][]float64, K) // [k][b], b = 0 observed
	for k := range vals {
		vals[k] = make([]float64, B+1)
		vals[k][0] = res.observed[k]
	}
	// Permutations are taken by the workers one at a time; permutation b's
	// generator and slot depend on b only, so the result does not depend on
	// the number of workers.
	workers := min(B, runtime.GOMAXPROCS(0))
	var next atomic.Int64
	var wg sync.WaitGroup
	for c := 0; c < workers; c++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			t := make([]float64, n)
			e := make([]float64, n)
			g := make([]float64, nf.q)
			var sum scoreSummary
			for {
				b := int(next.Add(1)) - 1
				if b >= B {
					return
				}
				copy(t, tObs)
				r := permRand(seed, b)
				for i := n - 1; i > 0; i-- {
					j := r.IntN(i + 1)
					t[i], t[j] = t[j], t[i]
				}
				nf.scores(t, e, g)
				summarise(t, e, eps, &sum)
				for k, s := range stats {
					vals[k][b+1] = s.fn(t, e, &sum)
				}
			}
		}()
	}
	wg.Wait()
	// p_k(b): share of the B+1 values ≥ value b.
	pk := make([][]float64, K)
	for k := range vals {
		sorted := append([]float64(nil), vals[k]...)
		sort.Float64s(sorted)
		pk[k] = make([]float64, B+1)
		var s float64
		for b, v := range vals[k] {
			ge := len(sorted) - sort.SearchFloat64s(sorted, v)
			pk[k][b] = float64(ge) / float64(B+1)
			if b > 0 {
				s += v
			}
		}
		res.mean[k] = s / float64(B)
	}
	minP := make([]float64, B+1)
	for b := range minP {
		m := 1.0
		for k := range pk {
			m = math.Min(m, pk[k][b])
		}
		minP[b] = m
	}
	for k := range stats {
		var c int
		for _, m := range minP {
			if m <= pk[k][0] {
				c++
			}
		}
		res.adjP[k] = float64(c) / float64(B+1)
	}
	return res
}
