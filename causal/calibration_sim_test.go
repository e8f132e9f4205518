package causal_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// calibrationSample draws n units with x1 ~ N(0, 1), x2 ~ Bernoulli(0.4)
// and P(T = 1 | x) = expit(a + b·x1 + q·x1² + 0.5·x2); q = 0 is a model the
// fit (x1, x2, linear) specifies correctly, q ≠ 0 one that omits the
// quadratic term.
func calibrationSample(seed uint64, n int, a, b, q float64) *causal.Study {
	r := rand.New(rand.NewPCG(seed, 0x5ca1ab1e))
	x1 := make([]float64, n)
	x2 := make([]float64, n)
	t := make([]float64, n)
	for i := range x1 {
		x1[i] = r.NormFloat64()
		if r.Float64() < 0.4 {
			x2[i] = 1
		}
		eta := a + b*x1[i] + q*x1[i]*x1[i] + 0.5*x2[i]
		if r.Float64() < 1/(1+math.Exp(-eta)) {
			t[i] = 1
		}
	}
	return causal.FromColumns([]string{"x1", "x2", "t"}, map[string][]float64{"x1": x1, "x2": x2, "t": t}, nil).Treat("t").Adjust("x1", "x2")
}

// spiegelhalterP is Spiegelhalter's (1986) z test of calibration, two-sided
// normal p-value: Z = Σ(T − e)(1 − 2e)/√(Σ(1 − 2e)²e(1 − e)). Computed here
// only to back the doc comment of CalibrationTest, which says why it is not
// offered.
func spiegelhalterP(sc *causal.Scores) float64 {
	var num, den float64
	for i, e := range sc.E {
		a := 1 - 2*e
		num += (sc.Design.T[i] - e) * a
		den += a * a * e * (1 - e)
	}
	return math.Erfc(math.Abs(num/math.Sqrt(den)) / math.Sqrt2)
}

// Validation of the tail check (and the Hosmer–Lemeshow test) by simulation,
// seeds 1..300 per design (calibrationSample):
//   - false alarms on three correctly specified models — a randomised design
//     (P(T=1) constant, n = 1,000), expit(−0.5 + 0.8 x1 + 0.5 x2) at n = 1,000
//     and expit(−1 + x1 + 0.5 x2) at n = 300 — must stay at or below the
//     nominal 5%: at most 25 of 300 per design (at a true rate of 5%,
//     P(more than 25 of 300) = 0.005, R's 1 - pbinom(25, 300, 0.05));
//   - power against expit(−1 + 0.5 x1 + 0.5 x1² + 0.5 x2) fitted without
//     the square (n = 1,000): at least 255 of 300 flagged (85%).
//
// Measured when written: tail flags 0, 4 and 0 of 300 on the correct models
// (the binomial test is conservative there, see CalibrationTest), 289 of 300
// on the misspecified one; Hosmer–Lemeshow at 5%: 9, 12, 12 and 295 of 300;
// Spiegelhalter's z at 5%: 0 of 300 in every design.
func TestCalibrationTailSimulation(t *testing.T) {
	const reps = 300
	type design struct {
		name     string
		n        int
		a, b, q  float64
		correct  bool
		tail, hl int
		spiegel  int
	}
	designs := []design{
		{name: "randomised", n: 1000, correct: true},
		{name: "logistic, n = 1000", n: 1000, a: -0.5, b: 0.8, correct: true},
		{name: "logistic, n = 300", n: 300, a: -1, b: 1, correct: true},
		{name: "quadratic omitted", n: 1000, a: -1, b: 0.5, q: 0.5},
	}
	for k := range designs {
		d := &designs[k]
		for s := 1; s <= reps; s++ {
			sc := calibrationSample(uint64(s), d.n, d.a, d.b, d.q).Propensity()
			c := sc.CalibrationTest()
			if c.Err() != nil {
				t.Fatal(c.Err())
			}
			if len(c.TailMiscalibrated()) > 0 {
				d.tail++
			}
			if c.HLP < 0.05 {
				d.hl++
			}
			if spiegelhalterP(sc) < 0.05 {
				d.spiegel++
			}
		}
		t.Logf("%-20s tail flagged %3d of %d; Hosmer–Lemeshow p < 0.05: %3d; Spiegelhalter p < 0.05: %3d", d.name, d.tail, reps, d.hl, d.spiegel)
		if d.correct && d.tail > 25 {
			t.Errorf("%s: the tail check flagged %d of %d correctly specified models (nominal 5%%, at most 25)", d.name, d.tail, reps)
		}
		if d.correct && d.hl > 25 {
			t.Errorf("%s: Hosmer–Lemeshow rejected %d of %d correctly specified models (nominal 5%%, at most 25)", d.name, d.hl, reps)
		}
		if !d.correct && d.tail < 255 {
			t.Errorf("%s: the tail check flagged only %d of %d misspecified models (want at least 255)", d.name, d.tail, reps)
		}
	}
}

// The tail check reaches the verdict as a calibration_tail caution: on 20
// misspecified designs (quadratic term omitted, as in the simulation above)
// most verdicts carry it, on 20 correctly specified ones almost none do.
// Simulation of our own; bounds from the tail check's rates above (289/300
// flagged when misspecified, 4/300 when correct).
func TestVerdictCalibrationFinding(t *testing.T) {
	count := func(q float64) int {
		k := 0
		for s := uint64(0); s < 20; s++ {
			v := calibrationSample(9000+s, 1000, -1, 0.5, q).Propensity().Verdict(causal.VerdictOptions{})
			if v.Err() != nil {
				t.Fatal(v.Err())
			}
			for _, f := range v.Findings {
				if f.Code == causal.FindingCalibrationTail {
					if f.Effect != causal.Caution || len(f.Estimands) != 2 {
						t.Errorf("calibration finding %+v: want a caution on two estimands", f)
					}
					k++
					break
				}
			}
		}
		return k
	}
	if k := count(0.5); k < 16 {
		t.Errorf("misspecified: %d of 20 verdicts carry calibration_tail; want ≥ 16", k)
	}
	if k := count(0); k > 3 {
		t.Errorf("correct model: %d of 20 verdicts carry calibration_tail; want ≤ 3", k)
	}
}
