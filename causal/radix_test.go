package causal

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"
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
