package causal

import (
	"fmt"
	"math"
	"runtime"
	"strings"
	"sync"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// chunking splits n rows into blocks whose boundaries depend on n only (not
// on the number of cores), so sums reduced in block order give the same bits
// on any machine.
func chunking(n int) (size, count int) {
	size = n / 64
	if size < 4096 {
		size = 4096
	}
	return size, (n + size - 1) / size
}

// parallelChunks runs fn on every block of rows [lo, hi) with the block
// index, using all cores.
func parallelChunks(n int, fn func(k, lo, hi int)) {
	size, count := chunking(n)
	workers := runtime.GOMAXPROCS(0)
	if workers > count {
		workers = count
	}
	if workers <= 1 {
		for k := 0; k < count; k++ {
			fn(k, k*size, min((k+1)*size, n))
		}
		return
	}
	var wg sync.WaitGroup
	next := make(chan int, count)
	for k := 0; k < count; k++ {
		next <- k
	}
	close(next)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range next {
				fn(k, k*size, min((k+1)*size, n))
			}
		}()
	}
	wg.Wait()
}

// crossProducts returns X'WX (p × p, full symmetric, row-major) and X'z for
// the row-major n × p matrix X, weights w (nil = 1) and vector z (nil: X'z
// not computed; z is not multiplied by w). The accumulation runs over row blocks in parallel with no
// per-row allocation; only the upper triangle is accumulated, one AXPY per
// row and column.
func crossProducts(X []float64, n, p int, w, z []float64) (xtwx, xtwz []float64) {
	_, count := chunking(n)
	parts := make([][]float64, count)
	parallelChunks(n, func(k, lo, hi int) {
		acc := make([]float64, p*p+p)
		for i := lo; i < hi; i++ {
			row := X[i*p : (i+1)*p]
			wi := 1.0
			if w != nil {
				wi = w[i]
			}
			if z != nil && z[i] != 0 {
				floats.AddScaled(acc[p*p:], z[i], row)
			}
			if wi == 0 {
				continue
			}
			for j := 0; j < p; j++ {
				a := wi * row[j]
				if a != 0 {
					floats.AddScaled(acc[j*p+j:j*p+p], a, row[j:])
				}
			}
		}
		parts[k] = acc
	})
	xtwx = make([]float64, p*p)
	xtwz = make([]float64, p)
	for _, acc := range parts {
		floats.Add(xtwx, acc[:p*p])
		floats.Add(xtwz, acc[p*p:])
	}
	for j := 0; j < p; j++ {
		for k := j + 1; k < p; k++ {
			xtwx[k*p+j] = xtwx[j*p+k]
		}
	}
	if z == nil {
		xtwz = nil
	}
	return xtwx, xtwz
}

// checkRank reports collinear design columns. It runs a Cholesky
// factorisation of the correlation-scaled cross-product matrix one column at a
// time: a column whose residual after the columns before it is below 1e-10
// (R² above 1 − 1e-10) is a linear combination of them, and the error names it
// and the columns it is made of.
func checkRank(d *Design) error {
	p := d.P
	g, _ := crossProducts(d.X, d.N, p, nil, nil)
	dscale := make([]float64, p)
	for j := 0; j < p; j++ {
		dscale[j] = math.Sqrt(g[j*p+j])
	}
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			if dscale[j] > 0 && dscale[k] > 0 {
				g[j*p+k] /= dscale[j] * dscale[k]
			}
		}
	}
	var problems []string
	var kept []int
	for k := 0; k < p; k++ {
		if dscale[k] == 0 {
			problems = append(problems, fmt.Sprintf("%s is zero in every row", d.Terms[k].Name))
			continue
		}
		if len(kept) == 0 {
			kept = append(kept, k)
			continue
		}
		m := len(kept)
		A := mat.NewSymDense(m, nil)
		b := mat.NewVecDense(m, nil)
		for a, ja := range kept {
			for c, jc := range kept {
				A.SetSym(a, c, g[ja*p+jc])
			}
			b.SetVec(a, g[ja*p+k])
		}
		var ch mat.Cholesky
		if !ch.Factorize(A) {
			kept = append(kept, k)
			continue
		}
		var coef mat.VecDense
		if err := ch.SolveVecTo(&coef, b); err != nil {
			kept = append(kept, k)
			continue
		}
		resid := 1 - mat.Dot(b, &coef)
		if resid > 1e-10 {
			kept = append(kept, k)
			continue
		}
		var with []string
		for a, ja := range kept {
			if math.Abs(coef.AtVec(a)) > 1e-6 {
				with = append(with, d.Terms[ja].Name)
			}
		}
		problems = append(problems, fmt.Sprintf("%s is a linear combination of %s", d.Terms[k].Name, strings.Join(with, ", ")))
	}
	if len(problems) > 0 {
		return fmt.Errorf("collinear covariates: %s; remove one of the columns involved (the model cannot tell their effects apart)", strings.Join(problems, "; "))
	}
	return nil
}
