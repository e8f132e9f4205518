package causal

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"
)

// effectFrame builds n rows of p standard-normal covariates x1..xp, a
// treatment from a logistic model in them and an outcome linear in them
// with a constant effect of 1.
func effectFrame(n, p int, seed uint64) (*Frame, []string) {
	r := rand.New(rand.NewPCG(seed, 7))
	num := map[string][]float64{}
	names := make([]string, p)
	for j := range names {
		names[j] = fmt.Sprintf("x%d", j+1)
		num[names[j]] = make([]float64, n)
	}
	t := make([]float64, n)
	y := make([]float64, n)
	for i := 0; i < n; i++ {
		var eta, mu float64
		for j, name := range names {
			v := r.NormFloat64()
			num[name][i] = v
			eta += 0.3 * v / float64(j+1)
			mu += v / float64(j+1)
		}
		if r.Float64() < sigmoid(eta) {
			t[i] = 1
		}
		y[i] = mu + t[i] + r.NormFloat64()
	}
	num["t"], num["y"] = t, y
	f, err := NewFrame(append(append([]string(nil), names...), "t", "y"), num, nil)
	if err != nil {
		panic(err)
	}
	return f, names
}

func effectScores(b *testing.B, n, p int) *Scores {
	f, names := effectFrame(n, p, 11)
	sc := FromSource(f).Treat("t").Outcome("y").Adjust(names...).Propensity()
	if sc.Err() != nil {
		b.Fatal(sc.Err())
	}
	return sc
}

// Target (issue 3): AIPW bootstrap, 1000 replicates with propensity and
// outcome refits, n = 1e5, p = 10 covariates (11 terms with the
// intercept), ≤ 10 s on 2 cores.
func BenchmarkBootstrapAIPW(b *testing.B) {
	sc := effectScores(b, 100000, 10)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		bs := sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: 1000, Seed: uint64(i)})
		if bs.Err() != nil || bs.Failed > 0 {
			b.Fatal(bs.Err(), bs.FailReason)
		}
		benchSink = bs
	}
}

// Point estimate with its standard error, n = 1e5 and 1e6, p = 10.
func BenchmarkEffects(b *testing.B) {
	for _, n := range []int{100000, 1000000} {
		sc := effectScores(b, n, 10)
		for _, c := range []struct {
			est Estimator
			t   Estimand
		}{{IPW, ATE}, {IPWNormalized, ATE}, {OverlapWeighted, ATO}, {AIPW, ATE}, {RegressionAdjustment, ATE}} {
			b.Run(fmt.Sprintf("%s/%s/n=%d", c.est, c.t, n), func(b *testing.B) {
				b.ReportAllocs()
				for i := 0; i < b.N; i++ {
					e := sc.Effect(c.est, c.t)
					if e.Err() != nil {
						b.Fatal(e.Err())
					}
					benchSink = e
				}
			})
		}
		b.Run(fmt.Sprintf("weights/ATE/n=%d", n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				benchSink = sc.Weights(ATE)
			}
		})
	}
}
