package causal

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// radixSort with an index must order like the standard library's stable
// sort: same keys, and equal keys kept in their original order.
func TestRadixSortStableLikeSort(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 8))
	for _, n := range []int{7, 3000, 70000} {
		for _, kind := range []string{"normal", "ties", "binary", "signed zeros", "huge"} {
			x := make([]float64, n)
			for i := range x {
				switch kind {
				case "normal":
					x[i] = r.NormFloat64()
				case "ties":
					x[i] = float64(r.IntN(9)-4) / 4
				case "binary":
					x[i] = float64(r.IntN(2))
				case "signed zeros":
					x[i] = []float64{math.Copysign(0, -1), 0, -1e-300, 1e-300}[r.IntN(4)]
				case "huge":
					x[i] = (r.Float64() - 0.5) * 1e300
				}
			}
			want := make([]int, n)
			for i := range want {
				want[i] = i
			}
			sort.SliceStable(want, func(a, b int) bool { return x[want[a]] < x[want[b]] })
			keys := make([]uint64, n)
			idx := make([]int32, n)
			for i, v := range x {
				keys[i], idx[i] = floatKey(v), int32(i)
			}
			keys, idx = radixSort(keys, idx, nil, nil)
			for k := range want {
				if int(idx[k]) != want[k] || keyFloat(keys[k]) != x[want[k]] {
					t.Fatalf("n=%d %s: position %d holds row %d (%g), want row %d (%g)", n, kind, k, idx[k], keyFloat(keys[k]), want[k], x[want[k]])
				}
			}
		}
	}
}

// The balance sort (buckets by value, then insertion or radix sort) must
// give the stable order of the standard library on every kind of column,
// weights moved along; and the KS statistics built on it, including the
// 0/1 shortcut, must equal gonum's KolmogorovSmirnov on data sorted by
// sort.SliceStable (tolerance 1e-12: sums of weights in another order).
func TestBalanceSortAndKS(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	for _, n := range []int{5, 100, 5000, 60000} {
		for _, kind := range []string{"normal", "ties", "binary", "outlier", "skewed"} {
			x := make([]float64, n)
			w := make([]float64, n)
			for i := range x {
				w[i] = 0.1 + r.Float64()
				switch kind {
				case "normal":
					x[i] = math.Round(r.NormFloat64()*1e4) / 1e4
				case "ties":
					x[i] = float64(r.IntN(7))
				case "binary":
					x[i] = float64(r.IntN(2))
				case "outlier":
					x[i] = r.Float64()
					if i == n/2 {
						x[i] = 1e12
					}
				case "skewed":
					x[i] = math.Exp(3 * r.NormFloat64())
				}
			}
			order := make([]int, n)
			for i := range order {
				order[i] = i
			}
			sort.SliceStable(order, func(a, b int) bool { return x[order[a]] < x[order[b]] })
			s := newBalanceScratch(n, true)
			xs := append([]float64(nil), x...)
			ws := sortArm(xs, w, s, 0)
			for k, i := range order {
				if xs[k] != x[i] || ws[k] != w[i] {
					t.Fatalf("n=%d %s: position %d holds (%g, %g), want row %d (%g, %g)", n, kind, k, xs[k], ws[k], i, x[i], w[i])
				}
			}
			xu := append([]float64(nil), x...)
			sortArm(xu, nil, s, 0)
			for k, i := range order {
				if xu[k] != x[i] {
					t.Fatalf("n=%d %s unweighted: position %d holds %g, want %g", n, kind, k, xu[k], x[i])
				}
			}
		}
	}
	// KS through balanceFor against gonum on stably sorted arms.
	f, _ := effectFrame(20000, 3, 2)
	num := map[string][]float64{"t": f.cols["t"].Num, "x1": f.cols["x1"].Num, "b": make([]float64, 20000)}
	for i := range num["b"] {
		if f.cols["x2"].Num[i] > 0.3 {
			num["b"][i] = 1
		}
	}
	d, err := FromColumns([]string{"t", "x1", "b"}, num, nil).Treat("t").Adjust("x1", "b").Design()
	if err != nil {
		t.Fatal(err)
	}
	w := make([]float64, d.N)
	for i := range w {
		w[i] = 0.5 + float64(i%7)
	}
	sheet := balanceFor(d, w, "test")
	for j := 1; j < d.P; j++ {
		var x1, x0, w1, w0 []float64
		for i := 0; i < d.N; i++ {
			if d.T[i] == 1 {
				x1, w1 = append(x1, d.X[i*d.P+j]), append(w1, w[i])
			} else {
				x0, w0 = append(x0, d.X[i*d.P+j]), append(w0, w[i])
			}
		}
		sortStable := func(x, w []float64) {
			idx := make([]int, len(x))
			for i := range idx {
				idx[i] = i
			}
			sort.SliceStable(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
			xs, wsorted := make([]float64, len(x)), make([]float64, len(x))
			for k, i := range idx {
				xs[k], wsorted[k] = x[i], w[i]
			}
			copy(x, xs)
			copy(w, wsorted)
		}
		sortStable(x1, w1)
		sortStable(x0, w0)
		row := sheet.Rows[j-1]
		if want := stat.KolmogorovSmirnov(x1, nil, x0, nil); math.Abs(row.KS-want) > 1e-12 {
			t.Errorf("%s: KS %v; gonum %v", row.Term, row.KS, want)
		}
		if want := stat.KolmogorovSmirnov(x1, w1, x0, w0); math.Abs(row.KSWeighted-want) > 1e-12 {
			t.Errorf("%s: weighted KS %v; gonum %v", row.Term, row.KSWeighted, want)
		}
	}
}
