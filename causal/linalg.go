package causal

import (
	"fmt"
	"math"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/floats"
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

// columnMemory bounds the scratch memory that columnWorkers lets column
// workers hold at once.
const columnMemory = 1 << 30

// columnWorkers is the number of workers for m column tasks over n rows
// whose scratch costs perRow bytes per row: the cores, at most m, and as
// many as columnMemory allows (at least one).
func columnWorkers(m, n, perRow int) int {
	w := min(runtime.GOMAXPROCS(0), m)
	if byMem := columnMemory / max(1, n*perRow); w > byMem {
		w = byMem
	}
	return max(w, 1)
}

// parallelColumns runs fn(worker, k) for every task k in [0, m) on workers
// goroutines; worker in [0, workers) identifies the goroutine, so that fn can
// keep scratch buffers per worker. Each task's result must depend on k
// only, never on the worker or the order.
func parallelColumns(m, workers int, fn func(worker, k int)) {
	if workers <= 1 || m <= 1 {
		for k := 0; k < m; k++ {
			fn(0, k)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for {
				k := int(next.Add(1) - 1)
				if k >= m {
					return
				}
				fn(w, k)
			}
		}(w)
	}
	wg.Wait()
}

// crossProducts returns X'WX (p × p, full symmetric, row-major) and X'z for
// the row-major n × p matrix X, weights w (nil = 1) and vector z (nil: X'z
// not computed; z is not multiplied by w).
func crossProducts(X []float64, n, p int, w, z []float64) (xtwx, xtz []float64) {
	xtwx, xtz, _ = blockCross(X, n, p, func(i int, _ []float64) (float64, float64, float64) {
		wi, zi := 1.0, 0.0
		if w != nil {
			wi = w[i]
		}
		if z != nil {
			zi = z[i]
		}
		return wi, zi, 0
	})
	if z == nil {
		xtz = nil
	}
	return xtwx, xtz
}

// subBlock is the number of rows transposed at a time in blockCross: p ×
// subBlock float64s stay in the core's cache.
const subBlock = 256

// scratch recycles the transposition buffers of the cross-product kernels
// (their contents are always written before being read), so that repeated
// fits — a bootstrap runs thousands — do not allocate them each time.
var scratch sync.Pool

func getScratch(n int) *[]float64 {
	if b, ok := scratch.Get().(*[]float64); ok && cap(*b) >= n {
		*b = (*b)[:n]
		return b
	}
	b := make([]float64, n)
	return &b
}

// blockCross is the hot loop of every fit: over row blocks in parallel it
// asks rowFn for each row's weight w_i, right-hand value z_i and a scalar to
// sum (e.g. a deviance contribution), and accumulates
//
//	X'WX = Σ w_i x_i x_i'   and   X'z = Σ z_i x_i.
//
// Each block of rows is copied, scaled by √w_i and transposed into a small
// per-worker buffer so that every entry of X'WX is a unit-stride dot product
// (gonum's floats.Dot, SIMD); only the upper triangle is computed; rows with
// w_i ≤ 0 are left out of X'WX. No allocation per row. Block boundaries
// depend on n only and partial sums are reduced in block order, so results
// are identical on any number of cores.
func blockCross(X []float64, n, p int, rowFn func(i int, row []float64) (w, z, extra float64)) (xtwx, xtz []float64, extra float64) {
	_, count := chunking(n)
	parts := make([][]float64, count)
	parallelChunks(n, func(k, lo, hi int) {
		acc := make([]float64, p*p+p+1)
		btp := getScratch(p * subBlock)
		defer scratch.Put(btp)
		bt := *btp
		g := acc[p*p : p*p+p]
		var ex float64
		// Rows of weight 0 (for example units outside a bootstrap
		// resample) are skipped, the others packed m at a time.
		m := 0
		flush := func() {
			for j := 0; j < p; j++ {
				bj := bt[j*subBlock : j*subBlock+m]
				for c := j; c < p; c++ {
					acc[j*p+c] += floats.Dot(bj, bt[c*subBlock:c*subBlock+m])
				}
			}
			m = 0
		}
		for i := lo; i < hi; i++ {
			row := X[i*p : (i+1)*p]
			w, z, x := rowFn(i, row)
			ex += x
			if z != 0 {
				for j, v := range row {
					g[j] += z * v
				}
			}
			if !(w > 0) {
				continue
			}
			sw := math.Sqrt(w)
			for j, v := range row {
				bt[j*subBlock+m] = sw * v
			}
			if m++; m == subBlock {
				flush()
			}
		}
		flush()
		acc[p*p+p] = ex
		parts[k] = acc
	})
	xtwx = make([]float64, p*p)
	xtz = make([]float64, p)
	for _, acc := range parts {
		floats.Add(xtwx, acc[:p*p])
		floats.Add(xtz, acc[p*p:p*p+p])
		extra += acc[p*p+p]
	}
	for j := 0; j < p; j++ {
		for c := j + 1; c < p; c++ {
			xtwx[c*p+j] = xtwx[j*p+c]
		}
	}
	return xtwx, xtz, extra
}

// checkRank reports collinear design columns. It builds a Cholesky
// factorisation of the correlation-scaled cross-product matrix one column at a
// time (each column extends the factor, so the work is O(p³)): a column
// whose residual after the columns before it is below 1e-10 (R² above
// 1 − 1e-10) is a linear combination of them, and the error names it and the
// columns it is made of.
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
	var L [][]float64 // rows of the lower-triangular factor of the kept columns
	for k := 0; k < p; k++ {
		if dscale[k] == 0 {
			problems = append(problems, fmt.Sprintf("%s is zero in every row", d.Terms[k].Name))
			continue
		}
		if len(kept) == 0 {
			kept = append(kept, k)
			L = append(L, []float64{1})
			continue
		}
		// Extend the factor L of the kept columns' matrix by column k:
		// z = L⁻¹b, residual 1 − z·z; O(m²) per column, O(p³) in all.
		m := len(kept)
		z := make([]float64, m)
		for a := 0; a < m; a++ {
			v := g[kept[a]*p+k]
			la := L[a]
			for c := 0; c < a; c++ {
				v -= la[c] * z[c]
			}
			z[a] = v / la[a]
		}
		resid := 1.0
		for _, v := range z {
			resid -= v * v
		}
		if resid > 1e-10 {
			L = append(L, append(z, math.Sqrt(resid)))
			kept = append(kept, k)
			continue
		}
		// coef = L⁻ᵀz: the combination of kept columns that gives column k.
		coef := make([]float64, m)
		for a := m - 1; a >= 0; a-- {
			v := z[a]
			for c := a + 1; c < m; c++ {
				v -= L[c][a] * coef[c]
			}
			coef[a] = v / L[a][a]
		}
		var with []string
		for a, ja := range kept {
			if math.Abs(coef[a]) > 1e-6 {
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
