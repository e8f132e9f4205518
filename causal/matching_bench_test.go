package causal

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Target (issue 13): n = 1e6 (40% treated), 1:1 matching with replacement
// on one score, with the Abadie–Imbens variance, ≤ 1 s.
func BenchmarkMatch(b *testing.B) {
	const n = 1000000
	r := rand.New(rand.NewPCG(13, 13))
	x, t, y := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64()
		if r.Float64() < 1/(1+math.Exp(0.45-0.8*x[i])) {
			t[i] = 1
		}
		y[i] = x[i] + t[i] + r.NormFloat64()
	}
	sc := FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": x, "t": t, "y": y}, nil).Treat("t").Outcome("y").Adjust("x").Propensity()
	if err := sc.Err(); err != nil {
		b.Fatal(err)
	}
	b.Logf("%d treated of %d", sc.Design.Treated, n)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		m := sc.Match(MatchOptions{})
		e := m.Effect()
		if e.Err() != nil {
			b.Fatal(e.Err())
		}
		benchSink = e
	}
}
