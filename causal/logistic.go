package causal

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// logitFit is the result of fitLogistic.
type logitFit struct {
	beta       []float64 // on the original scale of the design columns
	cov        []float64 // p × p covariance (inverse penalised information)
	e          []float64 // fitted probabilities
	deviance   float64
	nullDev    float64
	iterations int
	converged  bool
	maxStdCoef float64   // largest |coef × column RMS|, a divergence signal
	muBeta     []float64 // lean fits: the β at which muOut was filled
}

// logitOptions tune the propensity fit.
type logitOptions struct {
	ridge   float64
	maxIter int
	tol     float64
	// stepTol: converged when the Newton step is below stepTol in every
	// scaled coordinate (default 1e-7). After a step of size s the error is
	// of order s² (quadratic convergence); the bootstrap uses 1e-4.
	stepTol float64
	// lean is for refits warm-started next to the maximum (the bootstrap):
	// no deviance (so no step-halving: full Newton steps, and a fit that
	// does not settle within maxIter is reported not converged), no fitted
	// probabilities and no covariance (fit.e, fit.cov nil, fit.deviance
	// NaN); the caller computes the scores it needs.
	lean bool
	// startMu (lean fits only) holds the fitted probabilities at start, so
	// the first pass needs no exponential; scale (optional, without ridge)
	// the column scales of a previous fit of the same design, saving a pass.
	startMu []float64
	scale   []float64
	// warm (Study.Propensity with a fit cache) is the coefficients of an
	// earlier fit of the same data and specification: the full-design fit
	// starts there, so it confirms them in one Newton step.
	warm []float64
	// muOut (lean fits only, length n) receives μ_i at the last β where the
	// data were evaluated (fit.muBeta), for the rows with fw > 0: the caller
	// gets the final scores without another pass of exponentials, as
	// μ_i + μ_i(1 − μ_i)·x_i'(β − muBeta) (the last step is below stepTol,
	// so the neglected term is of order stepTol², like Newton's own error).
	muOut []float64
}

func sigmoid(x float64) float64 {
	if x >= 0 {
		return 1 / (1 + math.Exp(-x))
	}
	ex := math.Exp(x)
	return ex / (1 + ex)
}

// log(1 + exp(x)) without overflow.
func softplus(x float64) float64 {
	if x > 0 {
		return x + math.Log1p(math.Exp(-x))
	}
	return math.Log1p(math.Exp(x))
}

// fitLogistic fits P(T=1|x) = 1/(1+exp(−x'β)) by Newton–Raphson (equivalently
// IRLS), maximising
//
//	ℓ(β) = Σ fw_i [T_i x_i'β − log(1 + exp(x_i'β))] − (λ/2) Σ_{j≥1} (s_j β_j)²
//
// where fw are frequency weights (nil = 1) and s_j the root mean square of
// design column j, so the ridge penalty λ acts on coefficients of covariates
// brought to a common scale and never on the intercept. Each step solves
// (X'WX + λS²) Δ = X'(T − μ) − λS²β with W = diag(fw μ(1−μ)); a step that
// lowers ℓ is halved (up to 30 times). Convergence: the next Newton step
// below 1e-7 in every scaled coordinate (or a relative change in deviance
// below tol with a step below 1e-12). start (may be nil) is a
// warm start. Standard errors are the square roots of the diagonal of the
// inverse of X'WX + λS² at the solution (the inverse Fisher information when
// λ = 0; McCullagh & Nelder 1989, ch. 4).
func fitLogistic(X []float64, n, p int, t, fw, start []float64, o logitOptions) (*logitFit, error) {
	if o.maxIter <= 0 {
		o.maxIter = 50
	}
	if o.tol <= 0 {
		o.tol = 1e-13
	}
	if o.stepTol <= 0 {
		o.stepTol = 1e-7
	}
	scale := make([]float64, p)
	if len(o.scale) == p && o.ridge == 0 {
		copy(scale, o.scale) // only conditions the solves (no penalty to scale)
	} else {
		// Σ w x_j² and Σ w over row blocks in parallel, reduced in block order.
		_, count := chunking(n)
		parts := make([][]float64, count)
		parallelChunks(n, func(k, lo, hi int) {
			acc := make([]float64, p+1)
			for i := lo; i < hi; i++ {
				w := 1.0
				if fw != nil {
					w = fw[i]
					if w == 0 {
						continue
					}
				}
				acc[p] += w
				row := X[i*p : (i+1)*p]
				for j, v := range row {
					acc[j] += w * v * v
				}
			}
			parts[k] = acc
		})
		sq := make([]float64, p)
		var sw float64
		for _, acc := range parts {
			for j := range sq {
				sq[j] += acc[j]
			}
			sw += acc[p]
		}
		for j := range scale {
			scale[j] = math.Sqrt(sq[j] / sw)
			if scale[j] == 0 {
				scale[j] = 1
			}
		}
	}
	beta := make([]float64, p)
	var sw, st float64
	for i := 0; i < n; i++ {
		w := 1.0
		if fw != nil {
			w = fw[i]
		}
		sw += w
		st += w * t[i]
	}
	if sw == 0 {
		return nil, errors.New("no units with positive weight")
	}
	pbar := st / sw
	if pbar <= 0 || pbar >= 1 {
		return nil, errors.New("all units are in one arm")
	}
	nullDev := -2 * sw * (pbar*math.Log(pbar) + (1-pbar)*math.Log(1-pbar))
	if start == nil && fw == nil && !o.lean && n >= subsampleFrom {
		start = subsampleStart(X, n, p, t, o)
	}
	if start != nil && len(start) == p {
		copy(beta, start)
	} else {
		beta[0] = math.Log(pbar / (1 - pbar))
	}
	penalty := func(b []float64) float64 {
		var s float64
		for j := 1; j < p; j++ {
			v := scale[j] * b[j]
			s += v * v
		}
		return o.ridge * s
	}

	// evaluate computes, in one pass over the data, the penalised deviance at
	// b, the information X'WX + λS² and the score X'fw(T − μ) − λS²b.
	known := o.lean && len(o.startMu) == n && start != nil // μ at the first b is given
	var muBeta []float64
	record := o.lean && len(o.muOut) == n
	evaluate := func(b []float64) (dev float64, info, grad []float64) {
		first := known
		known = false
		if record {
			muBeta = append(muBeta[:0], b...)
		}
		info, grad, dev = blockCross(X, n, p, func(i int, row []float64) (float64, float64, float64) {
			f := 1.0
			if fw != nil {
				if f = fw[i]; f == 0 {
					return 0, 0, 0 // a unit with frequency weight 0 contributes nothing
				}
			}
			if first {
				mu := o.startMu[i]
				if record {
					o.muOut[i] = mu
				}
				return f * mu * (1 - mu), f * (t[i] - mu), 0
			}
			var e float64
			bb := b[:len(row)]
			for j, v := range row {
				e += v * bb[j]
			}
			// One exponential serves μ = σ(e) and log(1 + exp(e)).
			ex := math.Exp(-math.Abs(e))
			mu := 1 / (1 + ex)
			var sp float64
			if !o.lean {
				sp = math.Log1p(ex)
			}
			if e < 0 {
				mu = ex / (1 + ex)
			} else {
				sp += e
			}
			if record {
				o.muOut[i] = mu
			}
			return f * mu * (1 - mu), f * (t[i] - mu), f * (sp - t[i]*e)
		})
		dev = 2*dev + penalty(b)
		if o.lean {
			dev = 0 // not computed: every full step is accepted
		}
		for j := 1; j < p; j++ {
			info[j*p+j] += o.ridge * scale[j] * scale[j]
			grad[j] -= o.ridge * scale[j] * scale[j] * b[j]
		}
		return dev, info, grad
	}
	// factor returns the Cholesky factor of the information in scaled
	// coordinates (for conditioning), or false when it is singular.
	factor := func(info []float64) (*mat.Cholesky, bool) {
		A := mat.NewSymDense(p, nil)
		for j := 0; j < p; j++ {
			for k := j; k < p; k++ {
				A.SetSym(j, k, info[j*p+k]/(scale[j]*scale[k]))
			}
		}
		var ch mat.Cholesky
		return &ch, ch.Factorize(A)
	}

	fit := &logitFit{nullDev: nullDev}
	dev, info, grad := evaluate(beta)
	trial := make([]float64, p)
	for it := 1; it <= o.maxIter; it++ {
		fit.iterations = it
		ch, ok := factor(info)
		if !ok {
			break
		}
		gs := mat.NewVecDense(p, nil)
		for j := 0; j < p; j++ {
			gs.SetVec(j, grad[j]/scale[j])
		}
		var st mat.VecDense
		if err := ch.SolveVecTo(&st, gs); err != nil {
			break
		}
		var maxStep float64
		for j := 0; j < p; j++ {
			maxStep = math.Max(maxStep, math.Abs(st.AtVec(j)))
		}
		if maxStep < o.stepTol && fit.iterations > 1 {
			// Newton's step is below stepTol (1e-7) in every scaled coordinate: beta
			// is within ~stepTol² of the maximum (quadratic convergence); info is the
			// information there; the step is applied without another pass.
			for j := range beta {
				beta[j] += st.AtVec(j) / scale[j]
			}
			fit.converged = true
			break
		}
		frac := 1.0
		var newDev float64
		var newInfo, newGrad []float64
		for h := 0; h < 30; h++ {
			for j := range trial {
				trial[j] = beta[j] + frac*st.AtVec(j)/scale[j]
			}
			newDev, newInfo, newGrad = evaluate(trial)
			if newDev <= dev*(1+1e-15) {
				break
			}
			frac /= 2
		}
		copy(beta, trial)
		rel := math.Abs(dev-newDev) / (math.Abs(newDev) + 0.1)
		dev, info, grad = newDev, newInfo, newGrad
		if rel < o.tol && maxStep*frac < 1e-12 {
			fit.converged = true
			break
		}
	}
	if o.lean {
		fit.beta = beta
		fit.muBeta = muBeta
		fit.deviance = math.NaN()
		for _, b := range beta {
			if math.IsNaN(b) || math.IsInf(b, 0) {
				return nil, fmt.Errorf("the propensity fit failed numerically after %d iterations", fit.iterations)
			}
		}
		return fit, nil
	}
	// Covariance: inverse information at the final beta (info is from the
	// last evaluation, which was at beta).
	fit.cov = make([]float64, p*p)
	for j := range fit.cov {
		fit.cov[j] = math.NaN()
	}
	if ch, ok := factor(info); ok {
		var inv mat.SymDense
		if err := ch.InverseTo(&inv); err == nil {
			for j := 0; j < p; j++ {
				for k := 0; k < p; k++ {
					fit.cov[j*p+k] = inv.At(j, k) / (scale[j] * scale[k])
				}
			}
		}
	}
	fit.beta = beta
	fit.e = make([]float64, n)
	parallelChunks(n, func(_, lo, hi int) {
		for i := lo; i < hi; i++ {
			row := X[i*p : (i+1)*p]
			var e float64
			for j, v := range row {
				e += v * beta[j]
			}
			fit.e[i] = sigmoid(e)
		}
	})
	fit.deviance = dev - penalty(beta)
	for j := 1; j < p; j++ {
		fit.maxStdCoef = math.Max(fit.maxStdCoef, math.Abs(beta[j]*scale[j]))
	}
	if math.IsNaN(fit.deviance) {
		return nil, fmt.Errorf("the propensity fit failed numerically after %d iterations", fit.iterations)
	}
	return fit, nil
}

// subsampleFrom is the number of rows from which a fit starts from the fit
// of a systematic 1-in-20 subsample.
const subsampleFrom = 200000

// subsampleStart fits every 20th row and returns its coefficients as a warm
// start (nil when that fit fails or does not converge). The subsample's
// maximum lies within O(1/√(n/20)) of the full one, so Newton's method on the
// full data then needs one or two steps fewer; it converges to the same
// maximum either way.
func subsampleStart(X []float64, n, p int, t []float64, o logitOptions) []float64 {
	m := n / 20
	xs := make([]float64, 0, m*p)
	ts := make([]float64, 0, m)
	for i := 0; i < n && len(ts) < m; i += 20 {
		xs = append(xs, X[i*p:(i+1)*p]...)
		ts = append(ts, t[i])
	}
	so := o
	so.maxIter = 12 // a start, not an answer: give up early on a hard subsample
	fit, err := fitLogistic(xs, len(ts), p, ts, nil, nil, so)
	if err != nil || !fit.converged {
		return nil
	}
	for _, b := range fit.beta {
		if math.IsNaN(b) || math.IsInf(b, 0) {
			return nil
		}
	}
	return fit.beta
}
