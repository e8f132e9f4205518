package causal

import (
	"math"
	"strconv"
)

// meanVar returns the (weighted) mean and the weighted variance
// Σw(x−m)²/(Σw − Σw²/Σw) (Austin & Stuart 2015; with unit weights the usual
// n−1 sample variance). w nil means unit weights.
func meanVar(x, w []float64) (mean, variance float64) {
	var sw, sw2, swx float64
	for i, v := range x {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		sw += wi
		sw2 += wi * wi
		swx += wi * v
	}
	if sw == 0 {
		return math.NaN(), math.NaN()
	}
	mean = swx / sw
	var ss float64
	for i, v := range x {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		ss += wi * (v - mean) * (v - mean)
	}
	den := sw - sw2/sw
	if den <= 0 {
		return mean, math.NaN()
	}
	return mean, ss / den
}

// jsonNumber writes a float as a JSON number, or null when it is not finite.
func jsonNumber(v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null")
	}
	return strconv.AppendFloat(nil, v, 'g', -1, 64)
}

func jsonArray(vs ...float64) []byte {
	b := []byte{'['}
	for i, v := range vs {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, jsonNumber(v)...)
	}
	return append(b, ']')
}
