package causal

import (
	"encoding/json"
	"math"
	"os"
	"slices"
	"testing"
)

// matchRef is testdata/reference/matching_reference.json, written by
// testdata/reference/matching_reference.R (base R + stats, brute-force
// textbook formulas) on the NSW sample of Dehejia & Wahba (1999).
type matchRef struct {
	Logit    []float64 `json:"logit"`
	Matching []struct {
		Estimand            string
		K                   int
		Value, SE, Mu1, Mu0 float64
		NMatched            int     `json:"n_matched"`
		TiedSets            int     `json:"tied_sets"`
		Used                int     `json:"used"`
		MaxReuse            int     `json:"max_reuse"`
		Sets                [][]any `json:"sets"` // [row, [matches]] (1-based rows)
	} `json:"matching"`
	BalanceATT        map[string]float64 `json:"balance_att_k1"`
	Subclassification struct {
		Cuts             []float64
		Treated, Control []int
		Effect, Variance []float64
		Estimates        []struct {
			Estimand  string
			Value, SE float64
		}
	} `json:"subclassification"`
}

func readMatchRef(t *testing.T) matchRef {
	t.Helper()
	b, err := os.ReadFile("../testdata/reference/matching_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r matchRef
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r
}

// TestMatchingNSWMatchesR checks 1:1 (and 1:3) matching with replacement on
// the logit score of the main-effects logistic model against the R script:
// the matched sets (ties included), the estimate, μ1, μ0 and the
// Abadie–Imbens standard error to 1e-9, reuse counts, and balance after
// matching.
func TestMatchingNSWMatchesR(t *testing.T) {
	ref := readMatchRef(t)
	sc := nswStudy().Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	d := sc.Design
	for i, e := range sc.E {
		if l := math.Log(e / (1 - e)); math.Abs(l-ref.Logit[i]) > 1e-9*math.Max(1, math.Abs(ref.Logit[i])) {
			t.Fatalf("logit of row %d = %.15g, R %.15g", i+1, l, ref.Logit[i])
		}
	}
	if len(ref.Matching) != 4 {
		t.Fatalf("%d reference matching runs", len(ref.Matching))
	}
	for _, r := range ref.Matching {
		target, _ := ParseEstimand(r.Estimand)
		m := sc.Match(MatchOptions{Estimand: target, K: r.K})
		if err := m.Err(); err != nil {
			t.Fatal(err)
		}
		what := "matching " + r.Estimand
		if r.K != 1 {
			what += " K=3"
		}
		if len(m.Sets) != r.NMatched {
			t.Fatalf("%s: %d sets, R %d", what, len(m.Sets), r.NMatched)
		}
		want := map[int][]int{}
		for _, s := range r.Sets {
			row := int(s[0].(float64))
			var ms []int
			for _, v := range s[1].([]any) {
				ms = append(ms, int(v.(float64)))
			}
			slices.Sort(ms)
			want[row] = ms
		}
		tied, diff := 0, 0
		for _, s := range m.Sets {
			got := make([]int, len(s.Matches))
			for k, j := range s.Matches {
				got[k] = d.Rows[j] + 1
			}
			slices.Sort(got)
			if len(got) > r.K {
				tied++
			}
			if !slices.Equal(got, want[d.Rows[s.Unit]+1]) {
				diff++
				if diff <= 3 {
					t.Errorf("%s: row %d matched to %v, R %v", what, d.Rows[s.Unit]+1, got, want[d.Rows[s.Unit]+1])
				}
			}
		}
		if tied != r.TiedSets {
			t.Errorf("%s: %d sets with ties, R %d", what, tied, r.TiedSets)
		}
		if used := m.UsedTreated + m.UsedControl; used != r.Used || m.MaxReuse != r.MaxReuse {
			t.Errorf("%s: %d units used, most %d times; R %d, %d", what, used, m.MaxReuse, r.Used, r.MaxReuse)
		}
		e := m.Effect()
		if e.Err() != nil {
			t.Fatal(e.Err())
		}
		relClose(t, what+" value", e.Value, r.Value, 1e-9)
		relClose(t, what+" mu1", e.Mu1, r.Mu1, 1e-9)
		relClose(t, what+" mu0", e.Mu0, r.Mu0, 1e-9)
		relClose(t, what+" Abadie-Imbens SE", e.SE, r.SE, 1e-9)
		if target == ATT && r.K == 1 {
			// Through Scores.Effect too (the estimator id path).
			e2 := sc.Effect(NearestNeighbourMatching, ATT)
			relClose(t, "Scores.Effect nearest_neighbour_matching ATT", e2.Value, r.Value, 1e-9)
			b := m.Balance()
			for _, row := range b.Rows {
				absClose(t, "SMD after matching "+row.Term, row.SMDWeighted, ref.BalanceATT[row.Term], 1e-9)
			}
		}
	}
}

// TestSubclassificationNSWMatchesR checks score quintiles (type-7 quantiles,
// a unit on a cut in the upper stratum), the stratum counts, effects and
// variances, and the ATE/ATT/ATC with the stratified variance against the
// R script, to 1e-9.
func TestSubclassificationNSWMatchesR(t *testing.T) {
	ref := readMatchRef(t).Subclassification
	sc := nswStudy().Propensity()
	st := sc.Subclassify(0)
	if err := st.Err(); err != nil {
		t.Fatal(err)
	}
	for j, c := range ref.Cuts {
		relClose(t, "cut", st.Cuts[j], c, 1e-9)
	}
	for j, r := range st.Strata {
		if r.Treated != ref.Treated[j] || r.Control != ref.Control[j] {
			t.Errorf("stratum %d: %d treated, %d control; R %d, %d", j+1, r.Treated, r.Control, ref.Treated[j], ref.Control[j])
		}
		relClose(t, "stratum effect", r.Effect, ref.Effect[j], 1e-9)
		relClose(t, "stratum variance", r.Variance, ref.Variance[j], 1e-9)
	}
	if len(ref.Estimates) != 3 {
		t.Fatalf("%d reference estimates", len(ref.Estimates))
	}
	for _, r := range ref.Estimates {
		target, _ := ParseEstimand(r.Estimand)
		e := sc.Effect(Subclassification, target)
		if e.Err() != nil {
			t.Fatal(e.Err())
		}
		relClose(t, "subclassification "+r.Estimand, e.Value, r.Value, 1e-9)
		relClose(t, "subclassification SE "+r.Estimand, e.SE, r.SE, 1e-9)
		if !e.Supported || e.HasFlag("restricted_population") {
			t.Errorf("%s: every quintile of the randomised sample holds both arms: %+v", r.Estimand, e.Flags)
		}
	}
}

// TestBuildArmOrder: the radix sort orders rows by (cell, logit, row) as a
// comparison sort does, with negative values, duplicates and cells.
func TestBuildArmOrder(t *testing.T) {
	const n = 5000
	l := make([]float64, n)
	group := make([]int32, n)
	var rows []int32
	for i := range l {
		l[i] = float64((i*7919)%201-100) / 8 // duplicates, negatives, zero
		if i%3 == 0 {
			l[i] = -l[i] * 1e-7
		}
		switch {
		case i%97 == 0:
			l[i] = math.Copysign(0, -1)
		case i%89 == 0:
			l[i] = 0
		}
		group[i] = int32((i * 31) % 4)
		if i%5 != 0 {
			rows = append(rows, int32(i))
		}
	}
	for _, g := range [][]int32{nil, group} {
		cells := 1
		if g != nil {
			cells = 4
		}
		a := buildArm(rows, l, g, cells)
		want := append([]int32(nil), rows...)
		slices.SortFunc(want, func(x, y int32) int {
			gx, gy := int32(0), int32(0)
			if g != nil {
				gx, gy = g[x], g[y]
			}
			switch {
			case gx != gy:
				return int(gx - gy)
			case l[x] < l[y]:
				return -1
			case l[x] > l[y]:
				return 1
			}
			return int(x - y)
		})
		if !slices.Equal(a.rows, want) {
			t.Fatalf("cells %d: radix order differs from the comparison sort", cells)
		}
		for c := 0; c < cells; c++ {
			s, e := a.cellRange(int32(c))
			for k := s; k < e; k++ {
				if g != nil && g[a.rows[k]] != int32(c) || a.val[k] != l[a.rows[k]] {
					t.Fatalf("cell %d range [%d, %d) holds row %d", c, s, e, a.rows[k])
				}
			}
		}
	}
}
