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
	maxStdCoef float64 // largest |coef × column RMS|, a divergence signal
}

// logitOptions tune the propensity fit.
type logitOptions struct {
	ridge   float64
	maxIter int
	tol     float64
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
// lowers ℓ is halved (up to 30 times). Convergence: relative change in
// deviance below tol and every scaled step below 1e-8. start (may be nil) is a
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
	scale := make([]float64, p)
	{
		ones := make([]float64, n)
		sq := make([]float64, p)
		for i := 0; i < n; i++ {
			w := 1.0
			if fw != nil {
				w = fw[i]
			}
			ones[i] = w
			row := X[i*p : (i+1)*p]
			for j, v := range row {
				sq[j] += w * v * v
			}
		}
		var sw float64
		for _, w := range ones {
			sw += w
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

	eta := make([]float64, n)
	w := make([]float64, n)
	resid := make([]float64, n)
	// pass computes the penalised deviance at beta and fills w and the working residuals.
	pass := func(b []float64) float64 {
		_, count := chunking(n)
		devs := make([]float64, count)
		parallelChunks(n, func(k, lo, hi int) {
			var dev float64
			for i := lo; i < hi; i++ {
				row := X[i*p : (i+1)*p]
				var e float64
				for j, v := range row {
					e += v * b[j]
				}
				eta[i] = e
				mu := sigmoid(e)
				f := 1.0
				if fw != nil {
					f = fw[i]
				}
				w[i] = f * mu * (1 - mu)
				// residual on the score scale: fw (T − μ); divided by w later
				resid[i] = f * (t[i] - mu)
				dev += f * (softplus(e) - t[i]*e)
			}
			devs[k] = dev
		})
		var dev float64
		for _, d := range devs {
			dev += d
		}
		return 2*dev + penalty(b)
	}

	dev := pass(beta)
	fit := &logitFit{nullDev: nullDev}
	solve := func() ([]float64, []float64, error) {
		// X'WX and the score X'(fw (T−μ)).
		xtwx, g := crossProducts(X, n, p, w, resid)
		for j := 1; j < p; j++ {
			xtwx[j*p+j] += o.ridge * scale[j] * scale[j]
			g[j] -= o.ridge * scale[j] * scale[j] * beta[j]
		}
		// Solve in the scaled coordinates for conditioning.
		A := mat.NewSymDense(p, nil)
		for j := 0; j < p; j++ {
			for k := j; k < p; k++ {
				A.SetSym(j, k, xtwx[j*p+k]/(scale[j]*scale[k]))
			}
		}
		var ch mat.Cholesky
		if !ch.Factorize(A) {
			return nil, xtwx, errors.New("the information matrix is singular (collinear covariates or separation)")
		}
		gs := mat.NewVecDense(p, nil)
		for j := 0; j < p; j++ {
			gs.SetVec(j, g[j]/scale[j])
		}
		var step mat.VecDense
		if err := ch.SolveVecTo(&step, gs); err != nil {
			return nil, xtwx, err
		}
		out := make([]float64, p)
		for j := range out {
			out[j] = step.AtVec(j) / scale[j]
		}
		return out, xtwx, nil
	}

	trial := make([]float64, p)
	for it := 1; it <= o.maxIter; it++ {
		step, _, err := solve()
		if err != nil {
			fit.iterations = it
			break
		}
		var maxStep float64
		for j := range step {
			maxStep = math.Max(maxStep, math.Abs(step[j]*scale[j]))
		}
		frac := 1.0
		var newDev float64
		for h := 0; h < 30; h++ {
			for j := range trial {
				trial[j] = beta[j] + frac*step[j]
			}
			newDev = pass(trial)
			if newDev <= dev*(1+1e-15) || math.IsNaN(dev) {
				break
			}
			frac /= 2
		}
		copy(beta, trial)
		rel := math.Abs(dev-newDev) / (math.Abs(newDev) + 0.1)
		dev = newDev
		fit.iterations = it
		if rel < o.tol && maxStep*frac < 1e-8 {
			fit.converged = true
			break
		}
	}
	// Information at the final beta (pass already left w at beta).
	xtwx, _ := crossProducts(X, n, p, w, nil)
	for j := 1; j < p; j++ {
		xtwx[j*p+j] += o.ridge * scale[j] * scale[j]
	}
	A := mat.NewSymDense(p, nil)
	for j := 0; j < p; j++ {
		for k := j; k < p; k++ {
			A.SetSym(j, k, xtwx[j*p+k]/(scale[j]*scale[k]))
		}
	}
	fit.cov = make([]float64, p*p)
	var ch mat.Cholesky
	if ch.Factorize(A) {
		var inv mat.SymDense
		if err := ch.InverseTo(&inv); err == nil {
			for j := 0; j < p; j++ {
				for k := 0; k < p; k++ {
					fit.cov[j*p+k] = inv.At(j, k) / (scale[j] * scale[k])
				}
			}
		}
	} else {
		for j := range fit.cov {
			fit.cov[j] = math.NaN()
		}
	}
	fit.beta = beta
	fit.e = make([]float64, n)
	for i := range fit.e {
		fit.e[i] = sigmoid(eta[i])
	}
	fit.deviance = dev - penalty(beta)
	for j := 1; j < p; j++ {
		fit.maxStdCoef = math.Max(fit.maxStdCoef, math.Abs(beta[j]*scale[j]))
	}
	if math.IsNaN(fit.deviance) {
		return nil, fmt.Errorf("the propensity fit failed numerically after %d iterations", fit.iterations)
	}
	return fit, nil
}
