package causal

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// olsFit is an ordinary least-squares fit of the outcome on the design
// columns within one arm: f_a(x) = x'b_a.
type olsFit struct {
	arm    string    // "treated" or "control"
	beta   []float64 // b_a
	xtxInv []float64 // (X_a' W X_a)^{-1}, p × p (nil when not asked for)
	sigma2 float64   // residual variance RSS / (n_a − p)
	n      float64   // units in the arm (sum of frequency weights)
	p      int
	// aliased lists the terms constant among the arm's units, left out of
	// its model, with their constant value.
	aliased    []int
	aliasValue []float64
	// sumX is Σ w x over the arm's units (row 0 of X_a'WX_a); sumY is
	// Σ w y (the intercept entry of X_a'Wy).
	sumX []float64
	sumY float64
}

// cov is the classical OLS covariance σ²(X_a'X_a)^{-1} (R's vcov(lm)).
func (m *olsFit) cov(j, k int) float64 { return m.sigma2 * m.xtxInv[j*m.p+k] }

// predict returns x'b.
func (m *olsFit) predict(x []float64) float64 {
	var s float64
	for j, v := range x {
		s += v * m.beta[j]
	}
	return s
}

// outcomeModels fits f1 on the treated rows and f0 on the control rows of
// the design by ordinary least squares, with frequency weights fw (nil = 1):
// b_a = (X_a' W X_a)^{-1} X_a' W y over the rows of arm a. The cross products
// of both arms are accumulated in one pass over the rows, in blocks whose
// boundaries depend on n only, so the sums do not depend on the core count.
// withInverse also returns (X_a'WX_a)^{-1} and the residual variance for
// standard errors and leverage.
//
// An arm with no more units than the model has terms, or whose covariates
// are collinear within it (for example a 0/1 covariate that takes a single
// value among that arm's units), is an error that names the arm and the term.
func outcomeModels(d *Design, fw []float64, withInverse bool) (m1, m0 *olsFit, err error) {
	if d.Y == nil {
		return nil, nil, settingErr("Outcome", "column", "no outcome: set one with ", "")
	}
	acc1, acc0 := armCross(d, fw)
	m1, err = solveOLS(d, acc1, "treated", 1, fw, withInverse)
	if err != nil {
		return nil, nil, err
	}
	m0, err = solveOLS(d, acc0, "control", 0, fw, withInverse)
	if err != nil {
		return nil, nil, err
	}
	return m1, m0, nil
}

// armCross accumulates, for each arm, X_a'WX_a (upper triangle), X_a'Wy and
// Σw in one pass over the rows. As in blockCross, rows are gathered (scaled
// by √w, rows of weight 0 skipped) into per-arm transposed buffers of
// subBlock rows, and every entry is a unit-stride dot product (SIMD).
func armCross(d *Design, fw []float64) (acc1, acc0 []float64) {
	p := d.P
	stride := p*p + p + 1
	_, count := chunking(d.N)
	parts := make([][]float64, count)
	parallelChunks(d.N, func(k, lo, hi int) {
		acc := make([]float64, 2*stride)
		bufp := getScratch(2 * p * subBlock)
		defer scratch.Put(bufp)
		buf := *bufp
		var cnt [2]int
		flush := func(a int) {
			m := cnt[a]
			if m == 0 {
				return
			}
			bt := buf[a*p*subBlock : (a+1)*p*subBlock]
			xx := acc[a*stride : a*stride+p*p]
			for j := 0; j < p; j++ {
				bj := bt[j*subBlock : j*subBlock+m]
				for c := j; c < p; c++ {
					xx[j*p+c] += floats.Dot(bj, bt[c*subBlock:c*subBlock+m])
				}
			}
			cnt[a] = 0
		}
		for i := lo; i < hi; i++ {
			w := 1.0
			if fw != nil {
				if w = fw[i]; w == 0 {
					continue
				}
			}
			a := 1
			if d.T[i] == 1 {
				a = 0
			}
			row := d.X[i*p : (i+1)*p]
			bt := buf[a*p*subBlock : (a+1)*p*subBlock]
			r := cnt[a]
			sw := math.Sqrt(w)
			for j, v := range row {
				bt[j*subBlock+r] = sw * v
			}
			xy := acc[a*stride+p*p : a*stride+p*p+p]
			wy := w * d.Y[i]
			for j, v := range row {
				xy[j] += wy * v
			}
			acc[a*stride+p*p+p] += w
			if cnt[a]++; cnt[a] == subBlock {
				flush(a)
			}
		}
		flush(0)
		flush(1)
		parts[k] = acc
	})
	acc := make([]float64, 2*stride)
	for _, part := range parts {
		floats.Add(acc, part)
	}
	return acc[:stride], acc[stride:]
}

func solveOLS(d *Design, acc []float64, arm string, t float64, fw []float64, withInverse bool) (*olsFit, error) {
	p := d.P
	xtx := acc[:p*p]
	xty := acc[p*p : p*p+p]
	n := acc[p*p+p]
	for j := 0; j < p; j++ {
		for k := j + 1; k < p; k++ {
			xtx[k*p+j] = xtx[j*p+k]
		}
	}
	// Terms constant within the arm (Σw x² − (Σw x)²/Σw = 0; row 0 of X'WX
	// holds Σw x) cannot be estimated there: they are left out of this arm's
	// model (coefficient 0, the intercept absorbing the constant), as R's lm
	// aliases them. Predictions for units with another value of such a term
	// are extrapolation, reported by the caller.
	m := &olsFit{arm: arm, beta: make([]float64, p), n: n, p: p, sumX: append([]float64(nil), xtx[:p]...), sumY: xty[0]}
	keep := []int{0}
	for j := 1; j < p; j++ {
		sx, sxx := xtx[j], xtx[j*p+j]
		if n > 0 && sxx-sx*sx/n <= 1e-12*math.Max(sxx, 1e-300) {
			m.aliased = append(m.aliased, j)
			m.aliasValue = append(m.aliasValue, sx/n)
			continue
		}
		keep = append(keep, j)
	}
	q := len(keep)
	if n <= float64(q) {
		return nil, fmt.Errorf("outcome model for the %s arm: %g unit%s for %d terms (the intercept and %d covariate term%s): a least-squares fit per arm needs more units than terms; drop covariates, or use a weighting estimator (ipw_normalized, overlap_weighted)",
			arm, n, plural(int(n), "", "s"), q, q-1, plural(q-1, "", "s"))
	}
	scale := make([]float64, q)
	for a, j := range keep {
		scale[a] = math.Sqrt(xtx[j*p+j])
		if scale[a] == 0 {
			scale[a] = 1
		}
	}
	A := mat.NewSymDense(q, nil)
	for a, j := range keep {
		for c := a; c < q; c++ {
			A.SetSym(a, c, xtx[j*p+keep[c]]/(scale[a]*scale[c]))
		}
	}
	var ch mat.Cholesky
	ok := ch.Factorize(A)
	if ok {
		// Reject a numerically singular system (condition number of the
		// correlation-scaled matrix above 1e12).
		if c := ch.Cond(); math.IsInf(c, 0) || c > 1e12 {
			ok = false
		}
	}
	if !ok {
		return nil, collinearInArm(d, arm)
	}
	b := mat.NewVecDense(q, nil)
	for a, j := range keep {
		b.SetVec(a, xty[j]/scale[a])
	}
	var sol mat.VecDense
	if err := ch.SolveVecTo(&sol, b); err != nil {
		return nil, collinearInArm(d, arm)
	}
	for a, j := range keep {
		m.beta[j] = sol.AtVec(a) / scale[a]
	}
	if !withInverse {
		m.sigma2 = math.NaN() // not needed without standard errors
		return m, nil
	}
	// RSS from the residuals themselves (not from y'Wy − b'X'Wy, which
	// loses digits when the fit is close).
	var rss float64
	for i := 0; i < d.N; i++ {
		if d.T[i] != t {
			continue
		}
		w := 1.0
		if fw != nil {
			w = fw[i]
			if w == 0 {
				continue
			}
		}
		r := d.Y[i] - m.predict(d.X[i*p:(i+1)*p])
		rss += w * r * r
	}
	m.sigma2 = rss / (n - float64(q))
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return nil, collinearInArm(d, arm)
	}
	m.xtxInv = make([]float64, p*p) // zero rows and columns for aliased terms
	for a, j := range keep {
		for c, k := range keep {
			m.xtxInv[j*p+k] = inv.At(a, c) / (scale[a] * scale[c])
		}
	}
	return m, nil
}

// collinearInArm explains a singular outcome model (after terms constant
// in the arm were left out): a combination of terms.
func collinearInArm(d *Design, arm string) error {
	return fmt.Errorf("outcome model for the %s arm: the covariates are collinear among the %s units (a term is a linear combination of others there); drop one of them or use a weighting estimator", arm, arm)
}
