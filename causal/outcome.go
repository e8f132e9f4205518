package causal

import (
	"fmt"
	"math"

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
// withInverse also returns (X_a'WX_a)^{-1} for standard errors and leverage.
//
// An arm with no more units than the model has terms, or whose covariates
// are collinear within it (for example a 0/1 covariate that takes a single
// value among that arm's units), is an error that names the arm and the term.
func outcomeModels(d *Design, fw []float64, withInverse bool) (m1, m0 *olsFit, err error) {
	if d.Y == nil {
		return nil, nil, fmt.Errorf("no outcome: set one with .Outcome(\"column\")")
	}
	p := d.P
	_, count := chunking(d.N)
	parts := make([][]float64, count)
	stride := p*p + p + 1 // X'WX, X'Wy, Σw per arm
	parallelChunks(d.N, func(k, lo, hi int) {
		acc := make([]float64, 2*stride)
		for i := lo; i < hi; i++ {
			w := 1.0
			if fw != nil {
				w = fw[i]
				if w == 0 {
					continue
				}
			}
			a := acc[stride:]
			if d.T[i] == 1 {
				a = acc[:stride]
			}
			row := d.X[i*p : (i+1)*p]
			y := d.Y[i]
			addOuter(a[:p*p], p, w, row)
			wy := w * y
			xy := a[p*p : p*p+p]
			for j, v := range row {
				xy[j] += wy * v
			}
			a[p*p+p] += w
		}
		parts[k] = acc
	})
	acc := make([]float64, 2*stride)
	for _, part := range parts {
		for j, v := range part {
			acc[j] += v
		}
	}
	m1, err = solveOLS(d, acc[:stride], "treated", 1, fw, withInverse)
	if err != nil {
		return nil, nil, err
	}
	m0, err = solveOLS(d, acc[stride:], "control", 0, fw, withInverse)
	if err != nil {
		return nil, nil, err
	}
	return m1, m0, nil
}

// addOuter adds a·x x' to the upper triangle of the p × p row-major acc.
func addOuter(acc []float64, p int, a float64, x []float64) {
	x = x[:p]
	for j, xj := range x {
		c := a * xj
		if c == 0 {
			continue
		}
		dst := acc[j*p+j : j*p+p]
		src := x[j:]
		src = src[:len(dst)]
		for k, v := range src {
			dst[k] += c * v
		}
	}
}

func solveOLS(d *Design, acc []float64, arm string, t float64, fw []float64, withInverse bool) (*olsFit, error) {
	p := d.P
	xtx := acc[:p*p]
	xty := acc[p*p : p*p+p]
	n := acc[p*p+p]
	if n <= float64(p) {
		return nil, fmt.Errorf("outcome model for the %s arm: %g unit%s for %d terms (the intercept and %d covariate term%s): a least-squares fit per arm needs more units than terms; drop covariates, or use a weighting estimator (ipw_normalized, overlap_weighted)",
			arm, n, plural(int(n), "", "s"), p, p-1, plural(p-1, "", "s"))
	}
	for j := 0; j < p; j++ {
		for k := j + 1; k < p; k++ {
			xtx[k*p+j] = xtx[j*p+k]
		}
	}
	scale := make([]float64, p)
	for j := range scale {
		scale[j] = math.Sqrt(xtx[j*p+j])
		if scale[j] == 0 {
			scale[j] = 1
		}
	}
	A := mat.NewSymDense(p, nil)
	for j := 0; j < p; j++ {
		for k := j; k < p; k++ {
			A.SetSym(j, k, xtx[j*p+k]/(scale[j]*scale[k]))
		}
	}
	var ch mat.Cholesky
	ok := ch.Factorize(A)
	if ok {
		// Reject a numerically singular system (reciprocal condition
		// number of the correlation-scaled matrix below 1e-12).
		if c := ch.Cond(); math.IsInf(c, 0) || c > 1e12 {
			ok = false
		}
	}
	if !ok {
		return nil, collinearInArm(d, arm, t, fw)
	}
	b := mat.NewVecDense(p, nil)
	for j := 0; j < p; j++ {
		b.SetVec(j, xty[j]/scale[j])
	}
	var sol mat.VecDense
	if err := ch.SolveVecTo(&sol, b); err != nil {
		return nil, collinearInArm(d, arm, t, fw)
	}
	m := &olsFit{arm: arm, beta: make([]float64, p), n: n, p: p}
	for j := range m.beta {
		m.beta[j] = sol.AtVec(j) / scale[j]
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
	m.sigma2 = rss / (n - float64(p))
	if withInverse {
		var inv mat.SymDense
		if err := ch.InverseTo(&inv); err != nil {
			return nil, collinearInArm(d, arm, t, fw)
		}
		m.xtxInv = make([]float64, p*p)
		for j := 0; j < p; j++ {
			for k := 0; k < p; k++ {
				m.xtxInv[j*p+k] = inv.At(j, k) / (scale[j] * scale[k])
			}
		}
	}
	return m, nil
}

// collinearInArm explains a singular outcome model: a term that is constant
// within the arm (its coefficient is confounded with the intercept), or a
// combination of terms.
func collinearInArm(d *Design, arm string, t float64, fw []float64) error {
	p := d.P
	for j := 1; j < p; j++ {
		first, seen, constant := 0.0, false, true
		for i := 0; i < d.N; i++ {
			if d.T[i] != t || (fw != nil && fw[i] == 0) {
				continue
			}
			v := d.X[i*p+j]
			if !seen {
				first, seen = v, true
			} else if v != first {
				constant = false
				break
			}
		}
		if seen && constant {
			return fmt.Errorf("outcome model for the %s arm: term %q takes the single value %g among the %s units, so its coefficient cannot be estimated in that arm (and predictions for other values would be pure extrapolation): this is a positivity problem for regression adjustment; drop the covariate, trim, or use a weighting estimator",
				arm, d.Terms[j].Name, first, arm)
		}
	}
	return fmt.Errorf("outcome model for the %s arm: the covariates are collinear among the %s units (a term is a linear combination of others there); drop one of them or use a weighting estimator", arm, arm)
}
