package causal

import (
	"cmp"
	"math"
	"slices"
)

// floatKey maps a float64 that is not NaN to a uint64 that orders like the
// number (−0 maps as +0, so the two stay equal): the sign bit is set for
// non-negative values and every bit is flipped for negative ones.
func floatKey(v float64) uint64 {
	if v == 0 {
		v = 0 // −0 as +0
	}
	b := math.Float64bits(v)
	if b>>63 != 0 {
		return ^b
	}
	return b | 1<<63
}

// keyFloat inverts floatKey.
func keyFloat(k uint64) float64 {
	if k>>63 != 0 {
		return math.Float64frombits(k &^ (1 << 63))
	}
	return math.Float64frombits(^k)
}

// radixSmall is the length below which radixSort uses a comparison sort
// (the digit counts would cost more than they save).
const radixSmall = 1 << 12

// radixSort sorts keys ascending, stably, moving idx (nil: no index) along
// with them: an LSD radix sort with 11-bit digits in which a pass whose digit
// is the same for every key is skipped (keys of few distinct values, such as
// 0/1 terms, take few passes). tmpK and tmpI are scratch buffers of the same
// lengths (nil: allocated). It returns the buffers that hold the sorted keys
// and index, which are either the inputs or the scratch buffers. Written here
// because neither the standard library nor gonum has a radix sort.
func radixSort(keys []uint64, idx []int32, tmpK []uint64, tmpI []int32) ([]uint64, []int32) {
	n := len(keys)
	if n < radixSmall {
		if idx == nil {
			slices.Sort(keys)
			return keys, nil
		}
		// Sort (key, index) pairs by key, then index: stable.
		type pair struct {
			k uint64
			i int32
		}
		ps := make([]pair, n)
		for i := range ps {
			ps[i] = pair{keys[i], idx[i]}
		}
		slices.SortFunc(ps, func(a, b pair) int {
			if c := cmp.Compare(a.k, b.k); c != 0 {
				return c
			}
			return cmp.Compare(a.i, b.i)
		})
		for i, p := range ps {
			keys[i], idx[i] = p.k, p.i
		}
		return keys, idx
	}
	const bits, digits = 11, 6
	const buckets = 1 << bits
	var count [digits][buckets]int
	for _, k := range keys {
		for d := 0; d < digits; d++ {
			count[d][(k>>(d*bits))&(buckets-1)]++
		}
	}
	if len(tmpK) < n {
		tmpK = make([]uint64, n)
	}
	tmpK = tmpK[:n]
	if idx != nil {
		if len(tmpI) < n {
			tmpI = make([]int32, n)
		}
		tmpI = tmpI[:n]
	}
	src, dst := keys, tmpK
	isrc, idst := idx, tmpI
	for d := 0; d < digits; d++ {
		c := &count[d]
		shift := uint(d * bits)
		if c[(src[0]>>shift)&(buckets-1)] == n {
			continue // every key has this digit
		}
		sum := 0
		for b := range c {
			c[b], sum = sum, sum+c[b]
		}
		if isrc == nil {
			for _, k := range src {
				b := (k >> shift) & (buckets - 1)
				dst[c[b]] = k
				c[b]++
			}
		} else {
			for i, k := range src {
				b := (k >> shift) & (buckets - 1)
				dst[c[b]] = k
				idst[c[b]] = isrc[i]
				c[b]++
			}
			isrc, idst = idst, isrc
		}
		src, dst = dst, src
	}
	return src, isrc
}
