package causal

import (
	"math"
	"math/rand/v2"
	"runtime"
	"sort"

	"gonum.org/v1/gonum/floats"
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
//
// The centred columns are never stored: blocks of permSub rows of the
// design are gathered, transposed, into a small buffer, and a batch of
// permutations shares each pass over the design (Xᵀ(t − e) as unit-stride
// dot products, Xβ as axpy updates; gonum's floats, SIMD). Centring enters
// through the means: Xcᵀr = Xᵀr − m Σr and Xcβ = Xβ − mᵀβ. Row blocks follow
// chunking and are reduced in block order, so every permutation's scores
// are the same on any number of cores and in any batch.
type nullFit struct {
	d    *Design
	free []int     // the free units (rows of the design)
	n, q int       // free units; varying columns
	cols []int     // design columns that vary among the free units
	mean []float64 // their means over the free units
	sd   []float64 // their standard deviations (convergence scale)
	chol mat.Cholesky
	pi   float64
	ok   bool
}

// permSub is the number of rows gathered and transposed at a time.
const permSub = 256

// gather writes the values of columns cols of free units lo … lo+m−1,
// transposed: bt[a·permSub + r] is column a of unit lo + r.
func (nf *nullFit) gather(bt []float64, lo, m int) {
	P := nf.d.P
	for r := 0; r < m; r++ {
		i := nf.free[lo+r] * P
		row := nf.d.X[i : i+P]
		for a, j := range nf.cols {
			bt[a*permSub+r] = row[j]
		}
	}
}

// blocks runs fn over the free units lo … hi−1, permSub at a time, with
// their columns gathered and transposed into bt (see gather) and a scratch
// vector v of permSub entries.
func (nf *nullFit) blocks(lo, hi int, fn func(s, m int, bt, v []float64)) {
	btp, vp := getScratch(nf.q*permSub), getScratch(permSub)
	defer scratch.Put(btp)
	defer scratch.Put(vp)
	for s := lo; s < hi; s += permSub {
		m := min(permSub, hi-s)
		nf.gather(*btp, s, m)
		fn(s, m, *btp, (*vp)[:m])
	}
}

func newNullFit(d *Design, free []int, pi float64) *nullFit {
	nf := &nullFit{d: d, free: free, n: len(free), pi: pi}
	nf.mean = make([]float64, 0, d.P)
	for j := 1; j < d.P; j++ {
		var s, s2 float64
		for _, i := range free {
			v := d.X[i*d.P+j]
			s += v
			s2 += v * v
		}
		m := s / float64(len(free))
		if s2/float64(len(free))-m*m > 1e-12*(1+m*m) {
			nf.cols = append(nf.cols, j)
			nf.mean = append(nf.mean, m)
		}
	}
	nf.q = len(nf.cols)
	q := nf.q
	if q == 0 {
		nf.ok = true
		return nf
	}
	// Centred cross products over row blocks, reduced in block order.
	_, count := chunking(nf.n)
	parts := make([][]float64, count)
	parallelChunks(nf.n, func(c, lo, hi int) {
		acc := make([]float64, q*q)
		nf.blocks(lo, hi, func(_, m int, bt, _ []float64) {
			for a := 0; a < q; a++ {
				floats.AddConst(-nf.mean[a], bt[a*permSub:a*permSub+m])
			}
			for a := 0; a < q; a++ {
				ba := bt[a*permSub : a*permSub+m]
				for b := a; b < q; b++ {
					acc[a*q+b] += floats.Dot(ba, bt[b*permSub:b*permSub+m])
				}
			}
		})
		parts[c] = acc
	})
	acc := make([]float64, q*q)
	for _, pa := range parts {
		floats.Add(acc, pa)
	}
	nf.sd = make([]float64, q)
	var tr float64
	for a := 0; a < q; a++ {
		tr += acc[a*q+a]
		nf.sd[a] = math.Sqrt(acc[a*q+a] / float64(nf.n))
	}
	A := mat.NewSymDense(q, nil)
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

// scores writes the refitted scores for each treatment ts[k] (over the free
// units) into es[k]. Each permutation iterates on its own and stops when it
// has converged; the batch only shares the passes over the design.
func (nf *nullFit) scores(ts, es [][]float64) {
	K, q := len(ts), nf.q
	w0 := nf.pi * (1 - nf.pi)
	b0 := make([]float64, K)
	for k := range es {
		for i := range es[k] {
			es[k][i] = nf.pi
		}
		b0[k] = math.Log(nf.pi / (1 - nf.pi))
	}
	if q == 0 || !nf.ok {
		return
	}
	beta := make([]float64, K*q)
	active := make([]bool, K)
	for k := range active {
		active[k] = true
	}
	_, count := chunking(nf.n)
	parts := make([][]float64, count)
	g := make([]float64, K*(q+1))
	gc := mat.NewVecDense(q, nil)
	var step mat.VecDense
	for it := 0; it < 10; it++ {
		// Xᵀ(t − e) and Σ(t − e) for every active permutation.
		parallelChunks(nf.n, func(c, lo, hi int) {
			acc := parts[c]
			if acc == nil {
				acc = make([]float64, K*(q+1))
				parts[c] = acc
			}
			for i := range acc {
				acc[i] = 0
			}
			nf.blocks(lo, hi, func(s, m int, bt, r []float64) {
				for k := 0; k < K; k++ {
					if !active[k] {
						continue
					}
					floats.SubTo(r, ts[k][s:s+m], es[k][s:s+m])
					gk := acc[k*(q+1) : (k+1)*(q+1)]
					for a := 0; a < q; a++ {
						gk[a] += floats.Dot(bt[a*permSub:a*permSub+m], r)
					}
					gk[q] += floats.Sum(r)
				}
			})
		})
		for i := range g {
			g[i] = 0
		}
		for _, pa := range parts {
			floats.Add(g, pa)
		}
		// One chord step each; those whose step is small stop after it.
		moved, last := make([]bool, K), make([]bool, K)
		any := false
		for k := 0; k < K; k++ {
			if !active[k] {
				continue
			}
			gk := g[k*(q+1) : (k+1)*(q+1)]
			g0 := gk[q]
			for a := 0; a < q; a++ {
				gc.SetVec(a, gk[a]-nf.mean[a]*g0)
			}
			if err := nf.chol.SolveVecTo(&step, gc); err != nil {
				active[k] = false
				continue
			}
			d0 := g0 / (float64(nf.n) * w0)
			b0[k] += d0
			big := math.Abs(d0)
			bk := beta[k*q : (k+1)*q]
			for a, v := range step.RawVector().Data {
				dv := v / w0
				bk[a] += dv
				big = math.Max(big, math.Abs(dv)*nf.sd[a])
			}
			moved[k], any = true, true
			// The chord iteration contracts by a factor of order |β|
			// near the null, so the error left after a step of size δ
			// is of order δ²: δ < 1e-2 leaves about 1e-4 on the logit
			// scale (2.5e-5 or less on the score scale), far below what
			// the count statistics resolve; at n = 1e6 one step reaches
			// it.
			last[k] = big < 1e-2
		}
		if !any {
			return
		}
		// e = σ(b₀ − mᵀβ + Xβ) for the permutations that moved.
		c0 := make([]float64, K)
		for k := 0; k < K; k++ {
			c0[k] = b0[k] - floats.Dot(nf.mean, beta[k*q:(k+1)*q])
		}
		parallelChunks(nf.n, func(c, lo, hi int) {
			nf.blocks(lo, hi, func(s, m int, bt, eta []float64) {
				for k := 0; k < K; k++ {
					if !moved[k] {
						continue
					}
					for r := range eta {
						eta[r] = c0[k]
					}
					for a, b := range beta[k*q : (k+1)*q] {
						floats.AddScaled(eta, b, bt[a*permSub:a*permSub+m])
					}
					e := es[k][s : s+m]
					for r, v := range eta {
						e[r] = sigmoid(v)
					}
				}
			})
		})
		for k := range active {
			if moved[k] && last[k] {
				active[k] = false
			}
			if !moved[k] {
				active[k] = false
			}
		}
	}
}

// permRand is the generator of permutation b: PCG (O'Neill 2014) seeded by
// the seed and b, so the result does not depend on how permutations are
// spread over cores.
func permRand(seed uint64, b int) *rand.Rand {
	return rand.New(rand.NewPCG(seed, 0x7065726d75746573^uint64(b)))
}

// permuteArms fills t with a uniformly random assignment of n1 treated
// units among len(t), every one of the C(n, n1) subsets equally likely: the
// distribution of a random permutation of a 0/1 treatment with n1 ones.
// Selection sampling (Fan, Muller & Rezucha 1962; Knuth, TAOCP Vol. 2,
// §3.4.2, Algorithm S): unit i is treated with probability (treated still
// to place)/(units left). One pass in order, one random number per unit and
// no random memory access, where a Fisher–Yates shuffle of the vector swaps
// at random places.
func permuteArms(t []float64, n1 int, r *rand.Rand) {
	need, left := uint64(n1), uint64(len(t))
	for i := range t {
		if r.Uint64N(left) < need {
			t[i] = 1
			need--
		} else {
			t[i] = 0
		}
		left--
	}
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
	// Permutations go in batches that share each pass over the design
	// (as many as 128 MB of treatments and scores allow, at most 8); the
	// row blocks of a pass and the statistics of a batch are spread over
	// the cores. Permutation b's generator and slot depend on b only, and
	// its scores on its own treatment only, so the result depends neither
	// on the number of cores nor on the batch size.
	batch := max(1, min(8, B, (128<<20)/(16*max(1, n))))
	ts, es := make([][]float64, batch), make([][]float64, batch)
	for k := range ts {
		ts[k], es[k] = make([]float64, n), make([]float64, n)
	}
	workers := runtime.GOMAXPROCS(0)
	sums := make([]scoreSummary, batch)
	for lo := 0; lo < B; lo += batch {
		m := min(batch, B-lo)
		parallelColumns(m, min(workers, m), func(_, k int) {
			permuteArms(ts[k], int(n1), permRand(seed, lo+k))
		})
		nf.scores(ts[:m], es[:m])
		parallelColumns(m, min(workers, m), func(_, k int) {
			summarise(ts[k], es[k], eps, &sums[k])
			for j, s := range stats {
				vals[j][lo+k+1] = s.fn(ts[k], es[k], &sums[k])
			}
		})
	}
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
