package causal

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// boxes draws n units, half treated with X ~ U(0,1)^d and half controls with
// X ~ U(0.5,1.5)^d: the supports overlap on [0.5,1] in each dimension, half
// of each arm's range.
func boxes(n, d int, seed uint64) *Study {
	r := rand.New(rand.NewPCG(seed, 7))
	num := map[string][]float64{"t": make([]float64, n)}
	var order []string
	for j := 1; j <= d; j++ {
		name := fmt.Sprintf("x%d", j)
		order = append(order, name)
		num[name] = make([]float64, n)
	}
	for i := 0; i < n; i++ {
		treated := i%2 == 0
		shift := 0.5
		if treated {
			shift = 0
			num["t"][i] = 1
		}
		for _, name := range order {
			num[name][i] = shift + r.Float64()
		}
	}
	f, err := NewFrame(append(order, "t"), num, nil)
	if err != nil {
		panic(err)
	}
	return FromSource(f).Treat("t").Adjust(order...)
}

// Fact of the trade (common knowledge): with two uniform supports
// overlapping 50% in each dimension, the share of units inside the overlap
// region is 0.5^d — 50%, 25%, 12.5%, 6.25% — halving with each dimension.
func TestErosionHalvesPerDimension(t *testing.T) {
	const n = 200000
	s := boxes(n, 4, 1)
	d, err := s.Design()
	if err != nil {
		t.Fatal(err)
	}
	// Exact share of units inside the true overlap region [0.5, 1]^k.
	for k := 1; k <= 4; k++ {
		in := 0
		for i := 0; i < n; i++ {
			ok := true
			for j := 1; j <= k; j++ {
				v := d.X[i*d.P+j]
				ok = ok && v >= 0.5 && v <= 1
			}
			if ok {
				in++
			}
		}
		want := math.Pow(0.5, float64(k))
		tol := 4 * math.Sqrt(want*(1-want)/n) // four binomial standard errors
		absClose(t, fmt.Sprintf("share in overlap region, d=%d", k), float64(in)/n, want, tol)
	}
	// The erosion curve from cells of 10 pooled-quantile bins. A cell counts
	// as covered when both arms are present, so the bins straddling the
	// overlap edges 0.5 and 1 count some single-arm units as covered: given
	// the realised breaks, with [lo, hi] the union of bins that meet [0.5, 1]
	// in each dimension, the expected share is 0.5·(1−lo)^k + 0.5·(hi−0.5)^k,
	// which tends to 0.5^k as bins get finer.
	e := s.ErosionWith(CellOptions{Bins: 10}, false)
	if e.Err() != nil {
		t.Fatal(e.Err())
	}
	cov1, cov0 := 1.0, 1.0
	for k, st := range e.Steps {
		col, _ := s.src.Column(fmt.Sprintf("x%d", k+1))
		_, cut, _ := discretize(col, d.Rows, 10)
		lo, hi := 0.0, 1.5
		for _, b := range cut.Breaks {
			if b < 0.5 {
				lo = b
			}
			if b >= 1 && hi == 1.5 {
				hi = b
			}
		}
		cov1 *= 1 - lo
		cov0 *= hi - 0.5
		want := 0.5*cov1 + 0.5*cov0
		tol := 4 * math.Sqrt(want*(1-want)/n)
		absClose(t, fmt.Sprintf("erosion step %d share with both arms", k+1), st.ShareBoth, want, tol)
		// and within a bin width per dimension of the true 0.5^k
		absClose(t, fmt.Sprintf("erosion step %d vs 0.5^k", k+1), st.ShareBoth, math.Pow(0.5, float64(k+1)), float64(k+1)*0.1)
		if k > 0 && st.ShareBoth >= e.Steps[k-1].ShareBoth {
			t.Errorf("step %d did not erode overlap: %v", k+1, e.Steps)
		}
	}
}

// With bins not aligned to the overlap edges, cells straddling an edge count
// single-arm units as covered. The error must shrink as cells get finer:
// the bins straddling each edge add at most half a bin of single-arm units per
// dimension, so the tolerance is d/bins plus 0.01 for noise. (Bin counts are
// chosen so that no break falls exactly on an edge: a break that lands on an
// edge by a hair lets a whole bin count as covered.)
func TestErosionTightensWithFinerCells(t *testing.T) {
	const n = 200000
	for _, dim := range []int{1, 2} {
		s := boxes(n, dim, uint64(10+dim))
		want := math.Pow(0.5, float64(dim))
		var errs []float64
		for _, bins := range []int{6, 10, 30} {
			e := s.ErosionWith(CellOptions{Bins: bins}, false)
			got := e.Steps[dim-1].ShareBoth
			tol := float64(dim)/float64(bins) + 0.01
			absClose(t, fmt.Sprintf("d=%d bins=%d", dim, bins), got, want, tol)
			errs = append(errs, math.Abs(got-want))
		}
		if !(errs[2] < errs[0]) {
			t.Errorf("d=%d: error did not shrink with finer cells: %v", dim, errs)
		}
	}
}

func TestErosionGreedyPicksBestFirst(t *testing.T) {
	// x1 overlaps fully, x2 half: greedy takes x1 first.
	n := 4000
	r := rand.New(rand.NewPCG(3, 3))
	num := map[string][]float64{"x1": make([]float64, n), "x2": make([]float64, n), "t": make([]float64, n)}
	for i := 0; i < n; i++ {
		tr := i%2 == 0
		num["x1"][i] = r.Float64()
		num["x2"][i] = r.Float64()
		if tr {
			num["t"][i] = 1
		} else {
			num["x2"][i] += 0.5
		}
	}
	f, _ := NewFrame([]string{"x2", "x1", "t"}, num, nil)
	e := FromSource(f).Treat("t").Adjust("x2", "x1").ErosionGreedy()
	if e.Err() != nil {
		t.Fatal(e.Err())
	}
	if e.Order[0] != "x1" {
		t.Errorf("greedy order %v, want x1 first", e.Order)
	}
	if e.Steps[0].ShareBoth < e.Steps[1].ShareBoth {
		t.Errorf("overlap grew when adding a covariate: %+v", e.Steps)
	}
}

// Reference: gonum's stat.Quantile with stat.Empirical on sorted data.
func TestEmpiricalQuantilesMatchGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	for _, n := range []int{1, 2, 7, 100, 1001, 50000} {
		for _, ties := range []bool{false, true} {
			x := make([]float64, n)
			for i := range x {
				x[i] = r.NormFloat64()
				if ties {
					x[i] = math.Round(x[i] * 2)
				}
			}
			ps := []float64{0.1, 0.2, 0.25, 0.5, 0.75, 0.8, 0.9, 1}
			got := empiricalQuantiles(append([]float64(nil), x...), ps)
			sorted := append([]float64(nil), x...)
			sort.Float64s(sorted)
			for k, p := range ps {
				want := stat.Quantile(p, stat.Empirical, sorted, nil)
				if got[k] != want {
					t.Errorf("n=%d ties=%v p=%g: %g, gonum %g", n, ties, p, got[k], want)
				}
			}
		}
	}
}

func TestCellsCounts(t *testing.T) {
	// district "harbour" has no treated units; pool × size bins.
	csv := "district,pool,size,t\n" +
		"north,yes,1,1\nnorth,no,2,0\nnorth,yes,3,1\nnorth,no,4,0\n" +
		"harbour,no,5,0\nharbour,yes,6,0\nharbour,no,7,0\n" +
		"south,yes,8,1\nsouth,no,9,1\nsouth,no,10,0\n"
	s := studyFrom(t, csv).Treat("t").Adjust("district", "pool", "size")
	c := s.Cells("district")
	if c.Err() != nil {
		t.Fatal(c.Err())
	}
	if len(c.Rows) != 3 || c.Violating != 1 || c.UnitsViolating != 3 || c.ControlViolating != 3 || c.TreatedViolating != 0 {
		t.Fatalf("cells %+v", c)
	}
	absClose(t, "share violating", c.ShareViolating, 0.3, 1e-12)
	for _, r := range c.Rows {
		if r.Labels[0] == "harbour" && (!r.Empty || r.Treated != 0 || r.Control != 3) {
			t.Errorf("harbour row %+v", r)
		}
		if r.Labels[0] != "harbour" && !r.Thin {
			t.Errorf("row %+v should be thin (fewer than 5 per arm)", r)
		}
	}
	// Quantile bins on a numeric column: 10 distinct values, 2 bins.
	c2 := s.CellsWith(CellOptions{Bins: 2, Thin: 1}, "size", "pool")
	if c2.Err() != nil {
		t.Fatal(c2.Err())
	}
	if c2.Cuts[0].Kind != "quantiles" || len(c2.Cuts[0].Labels) != 2 || c2.Cuts[0].Breaks[0] != 5 {
		t.Errorf("cuts %+v", c2.Cuts[0])
	}
	total := 0
	for _, r := range c2.Rows {
		total += r.Treated + r.Control
	}
	if total != 10 {
		t.Errorf("cells hold %d units, want 10", total)
	}
	v := s.Propensity().Verdict(VerdictOptions{}, c)
	if v.Status != Violated {
		t.Errorf("verdict %s with an empty-arm cell", v.Status)
	}
}

// Reference: gonum's stat.Quantile (stat.Empirical) on sorted data, for the
// bracketing path used on large inputs (n > 2^18), with ties and sorted input.
func TestQuantilesOfLarge(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	n := 600000
	for _, kind := range []string{"normal", "ties", "sorted"} {
		x := make([]float64, n)
		for i := range x {
			switch kind {
			case "normal":
				x[i] = r.NormFloat64()
			case "ties":
				x[i] = float64(r.IntN(7))
			case "sorted":
				x[i] = float64(i)
			}
		}
		ps := []float64{0.2, 0.4, 0.6, 0.8}
		got := quantilesOf(x, ps)
		sorted := append([]float64(nil), x...)
		sort.Float64s(sorted)
		for k, p := range ps {
			if want := stat.Quantile(p, stat.Empirical, sorted, nil); got[k] != want {
				t.Errorf("%s p=%g: %g, gonum %g", kind, p, got[k], want)
			}
		}
	}
}

// The radix sort behind the AUC must order like the standard library's sort.
func TestSortScoresRunMatchesSort(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 4))
	for _, n := range []int{10, 5000, 100000} {
		for _, kind := range []string{"uniform", "ties", "tiny", "negative"} {
			x := make([]float64, n)
			for i := range x {
				switch kind {
				case "uniform":
					x[i] = r.Float64()
				case "ties":
					x[i] = float64(r.IntN(5)) / 4
				case "tiny":
					x[i] = r.Float64() * 1e-300
				case "negative":
					x[i] = r.NormFloat64()
				}
			}
			want := append([]float64(nil), x...)
			sort.Float64s(want)
			sortScoresRun(x)
			for i := range x {
				if x[i] != want[i] {
					t.Fatalf("n=%d %s: position %d is %g, want %g", n, kind, i, x[i], want[i])
				}
			}
		}
	}
}
