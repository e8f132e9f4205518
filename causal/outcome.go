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
	robust []float64 // sandwich covariance of b_a (nil: classical; see useRobust)
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

// cov is the covariance of b_a: the classical OLS covariance
// σ²(X_a'X_a)^{-1} (R's vcov(lm)), or the robust one set by useRobust.
func (m *olsFit) cov(j, k int) float64 {
	if m.robust != nil {
		return m.robust[j*m.p+k]
	}
	return m.sigma2 * m.xtxInv[j*m.p+k]
}

// OLSCovariance chooses the covariance of the outcome models' coefficients
// in the regression-adjustment standard error. With X_a the arm's design,
// r_i its least-squares residuals, h_i = x_i'(X_a'X_a)⁻¹x_i the leverages,
// n_a units and k estimated coefficients, the heteroskedasticity-robust
// (sandwich) forms are
//
//	V_a = (X_a'X_a)⁻¹ (Σ ω_i x_i x_i') (X_a'X_a)⁻¹,
//	HC0: ω = r²                 (White 1980, Econometrica 48(4), 817–838)
//	HC1: ω = r² n_a/(n_a − k)   (the degrees-of-freedom scaling; MacKinnon & White 1985)
//	HC3: ω = r²/(1 − h)²        (MacKinnon & White 1985, J. Econometrics 29(3), 305–325)
//
// HC3 is the choice for small arms (Long & Ervin 2000, Amer. Statist. 54(3),
// 217–224, recommend it below about 250 units; cited from memory).
type OLSCovariance int

const (
	// ClassicalOLS is σ̂²(X_a'X_a)⁻¹, valid under constant residual variance (the default).
	ClassicalOLS OLSCovariance = iota
	HC0
	HC1
	HC3
)

// String is the covariance's name: "classical", "HC0", "HC1", "HC3".
func (c OLSCovariance) String() string {
	switch c {
	case ClassicalOLS:
		return "classical"
	case HC0:
		return "HC0"
	case HC1:
		return "HC1"
	case HC3:
		return "HC3"
	}
	return fmt.Sprintf("OLSCovariance(%d)", int(c))
}

// useRobust sets the arm model's covariance to the sandwich form c (see
// OLSCovariance) from the residuals of the arm's units (t: the arm's
// treatment value); needs the fit's inverse. A leverage of 1 (HC3) makes the
// covariance NaN.
func (m *olsFit) useRobust(d *Design, t float64, c OLSCovariance) {
	if c == ClassicalOLS || m.xtxInv == nil {
		return
	}
	p := m.p
	meat := make([]float64, p*p)
	bx := make([]float64, p)
	for i := 0; i < d.N; i++ {
		if d.T[i] != t {
			continue
		}
		x := d.X[i*p : (i+1)*p]
		r := d.Y[i] - m.predict(x)
		w := r * r
		switch c {
		case HC1:
			w *= m.n / (m.n - float64(p-len(m.aliased)))
		case HC3:
			for j := range bx {
				bx[j] = floats.Dot(m.xtxInv[j*p:(j+1)*p], x)
			}
			h := floats.Dot(x, bx)
			w /= (1 - h) * (1 - h)
		}
		for j, a := range x {
			for k, b := range x {
				meat[j*p+k] += w * a * b
			}
		}
	}
	tmp := make([]float64, p*p)
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			var v float64
			for l := 0; l < p; l++ {
				v += m.xtxInv[j*p+l] * meat[l*p+k]
			}
			tmp[j*p+k] = v
		}
	}
	m.robust = make([]float64, p*p)
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			var v float64
			for l := 0; l < p; l++ {
				v += tmp[j*p+l] * m.xtxInv[l*p+k]
			}
			m.robust[j*p+k] = v
		}
	}
}

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
