package causal

import (
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"
)

// A randomised design (treatment by coin flip) cut into hundreds of small
// cells must not be called violated: empty arms in small cells are expected
// by chance, and the Bonferroni-bounded screen (0.05/K per cell) keeps the
// family-wise false-alarm rate at or below 5% per table.
func TestNoFalseAlarmOnRandomisedManyCells(t *testing.T) {
	violated := 0
	const sets = 20
	for seed := uint64(1); seed <= sets; seed++ {
		r := rand.New(rand.NewPCG(seed, 42))
		n := 2000
		num := map[string][]float64{"t": make([]float64, n)}
		names := []string{"x1", "x2", "x3", "x4"}
		for _, nm := range names {
			num[nm] = make([]float64, n)
		}
		for i := 0; i < n; i++ {
			if r.Float64() < 0.5 {
				num["t"][i] = 1
			}
			for _, nm := range names {
				num[nm][i] = r.NormFloat64()
			}
		}
		s := FromColumns(append(names, "t"), num, nil).Treat("t").Adjust(names...)
		c := s.Cells(names...)
		if c.Err() != nil {
			t.Fatal(c.Err())
		}
		v := s.Propensity().Verdict(VerdictOptions{}, c)
		if v.Err() != nil {
			t.Fatal(v.Err())
		}
		if v.Status == Violated {
			violated++
			t.Logf("seed %d: %s", seed, strings.Join(v.Reasons, "; "))
		}
		if len(c.Rows) < 300 {
			t.Fatalf("only %d cells: the test needs many small cells", len(c.Rows))
		}
	}
	// At most 5% per table in expectation: allow 2 of 20 (P(≥3) < 8% at 5%).
	if violated > 2 {
		t.Errorf("%d of %d randomised data sets called violated", violated, sets)
	}
}

func TestVerdictOptionsValidated(t *testing.T) {
	sc := nswStudy().Propensity()
	for _, o := range []VerdictOptions{{Extreme: 0.7}, {Extreme: 0.5}, {MaxShareOutside: -1}, {MaxShareExtreme: 2}} {
		if v := sc.Verdict(o); v.Err() == nil || !strings.Contains(v.Err().Error(), "outside") {
			t.Errorf("%+v accepted: %v", o, v.Err())
		}
	}
	if v := sc.Verdict(VerdictOptions{Extreme: 0.2, MaxShareOutside: 0.01}); v.Err() != nil {
		t.Error(v.Err())
	}
}

func ExampleVerdictOptions() {
	sc := nswStudy().Propensity()
	strict := sc.Verdict(VerdictOptions{Extreme: 0.25, MaxShareExtreme: 0.05})
	fmt.Println(strict.Status)
	// Output: limited
}
