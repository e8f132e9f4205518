package causal

import (
	"fmt"
	"math"
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
	for _, o := range []VerdictOptions{{Extreme: 0.7}, {Extreme: 0.5}, {MinShare: -1}, {Alpha: 2}} {
		if v := sc.Verdict(o); v.Err() == nil || !strings.Contains(v.Err().Error(), "outside") {
			t.Errorf("%+v accepted: %v", o, v.Err())
		}
	}
	if v := sc.Verdict(VerdictOptions{Extreme: 0.2, MinShare: 0.05}); v.Err() != nil {
		t.Error(v.Err())
	}
}

func ExampleVerdictOptions() {
	sc := nswStudy().Propensity()
	// A stricter extreme bound is still compared with what random assignment
	// gives: the NSW experiment stays adequate.
	strict := sc.Verdict(VerdictOptions{Extreme: 0.25})
	fmt.Println(strict.Status, strict.StatusOf(ATT))
	// Output: adequate supported
}

// Cells built on the whole study cannot judge scores refitted on trimmed
// units: an error names the fix; cells of the kept units work.
func TestCellsMustCountTheScoresUnits(t *testing.T) {
	s := Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "household_size", "home_age")
	tr := s.Propensity().Trim(Symmetric(0.1))
	if tr.Err() != nil {
		t.Fatal(tr.Err())
	}
	whole := s.Cells("district")
	if v := tr.Scores.Verdict(VerdictOptions{}, whole); v.Err() == nil || !strings.Contains(v.Err().Error(), "trimmed.Cells") {
		t.Errorf("verdict accepted cells of other units: %v", v.Err())
	}
	if e := tr.Effect(AIPW, ATE, whole); e.Err() == nil {
		t.Error("effect accepted cells of other units")
	}
	kept := tr.Cells("district")
	v := tr.Scores.Verdict(VerdictOptions{}, kept)
	if v.Err() != nil || v.Status == Violated {
		t.Errorf("kept units: %v %s %v", v.Err(), v.Status, v.Reasons)
	}
	for _, r := range kept.Rows {
		if r.Labels[0] == "harbour" {
			t.Errorf("harbour survived trimming at 0.1: %+v", r)
		}
	}
}

func TestSortScoresRunNegativeZero(t *testing.T) {
	x := make([]float64, 5000)
	for i := range x {
		x[i] = float64(i%97) / 97
	}
	x[10] = math.Copysign(0, -1)
	sortScoresRun(x)
	for i := 1; i < len(x); i++ {
		if x[i] < x[i-1] {
			t.Fatalf("unsorted at %d: %g after %g", i, x[i], x[i-1])
		}
	}
}
