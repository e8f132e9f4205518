package widgets

import (
	"encoding/json"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

func waterScores(t *testing.T) *causal.Scores {
	t.Helper()
	sc := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd").Propensity()
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return sc
}

// TestMatchedPairsDrawsUnmatchedAndCaliper: on the water-audit scenario a
// caliper of 0.2 SD leaves 48 treated units unmatched (see the causal
// example): the chart draws every one of them, an empty caliper window on
// the control row for each, and at most 200 sets with at most 4 lines each.
func TestMatchedPairsDrawsUnmatchedAndCaliper(t *testing.T) {
	m := waterScores(t).Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
	p, err := pairsOf(m)
	if err != nil {
		t.Fatal(err)
	}
	if p.NUnTreated != m.UnmatchedTreated || len(p.UnTreated) != m.UnmatchedTreated || len(p.Windows) != m.UnmatchedTreated {
		t.Errorf("%d unmatched drawn (%d windows), want %d", len(p.UnTreated), len(p.Windows), m.UnmatchedTreated)
	}
	if p.SetsShown != maxPairSets || len(p.Segments) > maxPairSets*maxPairLines {
		t.Errorf("%d sets and %d segments drawn", p.SetsShown, len(p.Segments))
	}
	for _, w := range p.Windows {
		if w[2] != 0 || w[1]-w[0] <= 0 {
			t.Fatalf("window %v: should lie on the control row", w)
		}
	}
	for _, s := range p.Segments {
		if s[1] == s[3] {
			t.Fatalf("segment %v joins units of one arm", s)
		}
	}
	c, err := MatchedPairs(m)
	if err != nil {
		t.Fatal(err)
	}
	obj := checkOption(t, "MatchedPairs", c.Option)
	names := ""
	for _, s := range obj["series"].([]any) {
		names += s.(map[string]any)["name"].(string) + "|"
	}
	if !strings.Contains(names, "unmatched treated (48)") || !strings.Contains(names, "caliper window") {
		t.Errorf("series %s", names)
	}
	checkFallback(t, "MatchedPairs", c.Fallback)
}

// TestMatchingAndStrataThreeFaces: String, HTML view and JSON of a match
// result and of strata come from the same numbers.
func TestMatchingAndStrataThreeFaces(t *testing.T) {
	sc := waterScores(t)
	m := sc.Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
	h := HTML(m)
	txt := View(m).String()
	var js struct {
		Unmatched struct{ Treated int } `json:"unmatched"`
		Sets      []json.RawMessage     `json:"sets"`
		Findings  []struct{ Units int } `json:"findings"`
		Effect    struct{ Value float64 }
	}
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &js); err != nil {
		t.Fatal(err)
	}
	want := formatCount(m.UnmatchedTreated)
	if js.Unmatched.Treated != m.UnmatchedTreated || len(js.Sets) != len(m.Sets) || len(js.Findings) != 1 || js.Findings[0].Units != m.UnmatchedTreated {
		t.Errorf("JSON %d unmatched, %d sets; want %d, %d", js.Unmatched.Treated, len(js.Sets), m.UnmatchedTreated, len(m.Sets))
	}
	if !strings.Contains(h, want+" treated units (") || !strings.Contains(txt, want+" unmatched") || !strings.Contains(h, "Who the unmatched treated units are") {
		t.Errorf("the views do not report the %s unmatched treated units", want)
	}
	if e := m.Effect(); !strings.Contains(h, formatNumber(e.Value)) || js.Effect.Value != e.Value {
		t.Errorf("the effect %v is not in the view or the JSON (%v)", e.Value, js.Effect.Value)
	}

	st := sc.Subclassify(5)
	hs, ts := HTML(st), View(st).String()
	b, err = json.Marshal(st)
	if err != nil {
		t.Fatal(err)
	}
	var sj struct {
		Rows []struct{ Treated, Control int }
	}
	if err := json.Unmarshal(b, &sj); err != nil || len(sj.Rows) != 5 {
		t.Fatalf("strata JSON: %v, %d rows", err, len(sj.Rows))
	}
	for j, r := range st.Strata {
		if sj.Rows[j].Treated != r.Treated || !strings.Contains(hs, ">"+formatCount(r.Control)+"<") || !strings.Contains(ts, padded(r.Treated)) {
			t.Errorf("stratum %d counts differ between the faces", j+1)
		}
	}
	if !strings.Contains(hs, "data-cp-chart") || !strings.Contains(hs, "Subclassification estimates") {
		t.Error("strata view lacks its chart or estimates")
	}
}

func padded(n int) string { return " " + itoa(n) + " " }
