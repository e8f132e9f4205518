package causal

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// propensityBlock holds what the stacked-equation sandwich needs from the
// propensity fit: the design, the columns with a finite estimate (a column
// dropped by separation handling has none), the inverse information on those
// columns and the per-unit share of a ridge penalty in the score.
type propensityBlock struct {
	X    []float64
	n, p int
	free []int     // design columns with a finite estimate
	cov  []float64 // (X'WX + λS²)^{-1} on the free columns, |free|², row-major
	pen  []float64 // (λ/n)·s_j²·β_j on the free columns (zero without ridge)
	ok   bool      // false when the information matrix could not be inverted
}

func newPropensityBlock(sc *Scores) *propensityBlock {
	d := sc.Design
	pb := &propensityBlock{X: d.X, n: d.N, p: d.P}
	for j := 0; j < d.P; j++ {
		v := sc.cov[j*d.P+j]
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			pb.free = append(pb.free, j)
		}
	}
	q := len(pb.free)
	pb.ok = q > 0
	pb.cov = make([]float64, q*q)
	for a, j := range pb.free {
		for b, k := range pb.free {
			pb.cov[a*q+b] = sc.cov[j*d.P+k]
			if math.IsNaN(pb.cov[a*q+b]) {
				pb.ok = false
			}
		}
	}
	pb.pen = make([]float64, q)
	if sc.Ridge > 0 {
		for a, j := range pb.free {
			if j == 0 {
				continue // the intercept is not penalised
			}
			s := rmsCol(d, j)
			pb.pen[a] = sc.Ridge * s * s * sc.beta[j] / float64(d.N)
		}
	}
	return pb
}

// weightForm defines a weighting estimator of one arm's mean,
//
//	μ = Σ a_i y_i / Σ b_i,
//
// by the functions a(t, e) and b(t, e) and their derivatives with respect to
// the linear predictor η = x'β of the propensity model (de/dη = e(1−e)).
// Its estimating equation is g_i = a_i y_i − b_i μ, so that
// dg/dμ = −b_i and dg/dβ = (y_i a'_i − μ b'_i) x_i.
type weightForm func(t, e float64) (a, da, b, db float64)

// Arm means of the weighting estimators (the same forms as testdata/reference/nsw_reference.R):
var (
	// ipw ATE, treated: Σ T y/e / n  (Horvitz & Thompson 1952)
	formHTATE1 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 1 {
			return 0, 0, 1, 0
		}
		return 1 / e, -(1 - e) / e, 1, 0
	}
	// ipw ATE, controls: Σ (1−T) y/(1−e) / n
	formHTATE0 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 0 {
			return 0, 0, 1, 0
		}
		return 1 / (1 - e), e / (1 - e), 1, 0
	}
	// ipw ATT, treated: Σ T y / n1
	formHTATT1 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 1 {
			return 0, 0, 0, 0
		}
		return 1, 0, 1, 0
	}
	// ipw ATT, controls: Σ (1−T) y e/(1−e) / n1   (the odds o = e/(1−e) has do/dη = o)
	formHTATT0 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t == 1 {
			return 0, 0, 1, 0
		}
		o := e / (1 - e)
		return o, o, 0, 0
	}
	// ipw_normalized ATE, treated: Σ T y/e / Σ T/e  (Hájek 1971)
	formHajekATE1 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 1 {
			return 0, 0, 0, 0
		}
		a, da := 1/e, -(1-e)/e
		return a, da, a, da
	}
	// ipw_normalized ATE, controls: Σ (1−T) y/(1−e) / Σ (1−T)/(1−e)
	formHajekATE0 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 0 {
			return 0, 0, 0, 0
		}
		a, da := 1/(1-e), e/(1-e)
		return a, da, a, da
	}
	// ipw_normalized ATT, controls: Σ (1−T) o y / Σ (1−T) o
	formHajekATT0 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 0 {
			return 0, 0, 0, 0
		}
		o := e / (1 - e)
		return o, o, o, o
	}
	// overlap_weighted, treated: Σ T (1−e) y / Σ T (1−e)  (Li, Morgan & Zaslavsky 2018)
	formOverlap1 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 1 {
			return 0, 0, 0, 0
		}
		a, da := 1-e, -e*(1-e)
		return a, da, a, da
	}
	// overlap_weighted, controls: Σ (1−T) e y / Σ (1−T) e
	formOverlap0 weightForm = func(t, e float64) (float64, float64, float64, float64) {
		if t != 0 {
			return 0, 0, 0, 0
		}
		a, da := e, e*(1-e)
		return a, da, a, da
	}
)

// weightedMeans computes μ1 and μ0 of a weighting estimator with frequency
// weights fw (nil = 1). A zero denominator (every weight of an arm is 0, as
// with overlap weights when every unit is scored exactly 0 or 1) is an error.
func weightedMeans(t, y, e, fw []float64, f1, f0 weightForm) (mu1, mu0 float64, err error) {
	var n1, d1, n0, d0 float64
	for i := range t {
		f := 1.0
		if fw != nil {
			f = fw[i]
			if f == 0 {
				continue
			}
		}
		a, _, b, _ := f1(t[i], e[i])
		n1 += f * a * y[i]
		d1 += f * b
		a, _, b, _ = f0(t[i], e[i])
		n0 += f * a * y[i]
		d0 += f * b
	}
	if d1 == 0 || d0 == 0 {
		arm := "treated"
		if d0 == 0 {
			arm = "control"
		}
		return 0, 0, fmt.Errorf("the weights of the %s arm sum to 0: every unit there is scored exactly 0 or 1 (separation), so no unit has a counterpart in the other arm", arm)
	}
	return n1 / d1, n0 / d0, nil
}

// sandwichMeans returns the covariance of (μ1, μ0) from the M-estimation
// sandwich of the stacked estimating equations
//
//	[ x_i (T_i − e_i) − (λ/n) S²β ;  g1_i ;  g0_i ]
//
// (the propensity score equations and the two arm means), which accounts for
// the estimated propensity (Lunceford & Davidian 2004; Stefanski & Boos 2002).
// With θ = (β, μ1, μ0), A = −(1/n) Σ ∂g_i/∂θ' and B = (1/n) Σ g_i g_i',
// V = A⁻¹ B A⁻ᵀ / n. A is block lower triangular (the score does not involve
// μ), so the μ rows of A⁻¹ are [−A22⁻¹ A21 A11⁻¹, A22⁻¹] and
//
//	V[μ] = (1/n²) Σ ψ_i ψ_i',  ψ_a,i = (g_a,i − d_a's_i) / A22_aa,  d_a = A11⁻¹ A21_a,
//
// with s_i the score block; this is the same matrix computed in O(n p).
// sign is +1, or −1 when t and e are the flipped arms (1 − T, 1 − e) of an
// ATC, whose coefficients are −β.
func sandwichMeans(pb *propensityBlock, t, y, e []float64, f1, f0 weightForm, mu1, mu0, sign float64) (v11, v00, v10 float64) {
	if !pb.ok {
		return math.NaN(), math.NaN(), math.NaN()
	}
	n, p := pb.n, pb.p
	q := len(pb.free)
	C1 := make([]float64, q)
	C0 := make([]float64, q)
	var D1, D0 float64
	for i := 0; i < n; i++ {
		row := pb.X[i*p : (i+1)*p]
		a, da, b, db := f1(t[i], e[i])
		c1 := y[i]*da - mu1*db
		D1 += b
		a, da, b, db = f0(t[i], e[i])
		c0 := y[i]*da - mu0*db
		D0 += b
		_ = a
		if c1 != 0 || c0 != 0 {
			for k, j := range pb.free {
				C1[k] += c1 * row[j]
				C0[k] += c0 * row[j]
			}
		}
	}
	// A22_aa = −(1/n) Σ dg_a/dμ_a = (1/n) Σ b_i; A21_a = −(1/n) Σ c_a,i x_i.
	// d_a = A11⁻¹ A21_a = (n·cov)(−C_a/n) = −cov·C_a.
	cov := mat.NewDense(q, q, pb.cov)
	dv1 := mat.NewVecDense(q, nil)
	dv0 := mat.NewVecDense(q, nil)
	dv1.MulVec(cov, mat.NewVecDense(q, C1))
	dv0.MulVec(cov, mat.NewVecDense(q, C0))
	dv1.ScaleVec(-1, dv1)
	dv0.ScaleVec(-1, dv0)
	a1 := D1 / float64(n)
	a0 := D0 / float64(n)
	d1 := dv1.RawVector().Data
	d0 := dv0.RawVector().Data
	for i := 0; i < n; i++ {
		row := pb.X[i*p : (i+1)*p]
		a, _, b, _ := f1(t[i], e[i])
		g1 := a*y[i] - b*mu1
		a, _, b, _ = f0(t[i], e[i])
		g0 := a*y[i] - b*mu0
		r := t[i] - e[i]
		var ds1, ds0 float64
		for k, j := range pb.free {
			s := row[j]*r - sign*pb.pen[k]
			ds1 += d1[k] * s
			ds0 += d0[k] * s
		}
		psi1 := (g1 - ds1) / a1
		psi0 := (g0 - ds0) / a0
		v11 += psi1 * psi1
		v00 += psi0 * psi0
		v10 += psi1 * psi0
	}
	n2 := float64(n) * float64(n)
	return v11 / n2, v00 / n2, v10 / n2
}
