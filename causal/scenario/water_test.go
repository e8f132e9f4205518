package scenario

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"testing"
)

const committedCSV = "../../testdata/water_audits.csv"

// TestCommittedCSVIsFresh keeps testdata/water_audits.csv and the generator
// from drifting apart: a fresh generation must equal the file byte for byte.
// If it fails after a deliberate change to WaterAudits, run
// `go run ./testdata/gen` from the repository root and update the values in
// testdata/README.md and the WaterAudits doc comment.
func TestCommittedCSVIsFresh(t *testing.T) {
	want, err := os.ReadFile(committedCSV)
	if err != nil {
		t.Fatalf("%v; generate it with `go run ./testdata/gen` from the repository root", err)
	}
	d, err := WaterAudits(WaterAuditsSeed, WaterAuditsN)
	if err != nil {
		t.Fatal(err)
	}
	if got := csvBytes(t, d); !bytes.Equal(got, want) {
		t.Fatalf("fresh generation (%d bytes) differs from %s (%d bytes); run `go run ./testdata/gen`", len(got), committedCSV, len(want))
	}
}

// waterTable is the committed CSV read with encoding/csv alone, so that the
// checks below look at the file, not at the generator's memory.
type waterTable struct {
	col  map[string]int
	rows [][]string
}

func readWater(t *testing.T) waterTable {
	t.Helper()
	f, err := os.Open(committedCSV)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	w := waterTable{col: map[string]int{}, rows: recs[1:]}
	for j, h := range recs[0] {
		w.col[h] = j
	}
	return w
}

func (w waterTable) str(i int, name string) string { return w.rows[i][w.col[name]] }

func (w waterTable) num(t *testing.T, i int, name string) float64 {
	v, err := strconv.ParseFloat(w.str(i, name), 64)
	if err != nil {
		t.Fatalf("row %d column %s: %v", i+1, name, err)
	}
	return v
}

// TestWaterAuditsProblems checks that the deliberate positivity problems are
// in the committed data: no audited household in harbour (while every other
// district has both arms), and among homes with a pool whose lot is in the
// top decile (lot_m2 at or above the 90th percentile, nearest rank) at least
// 95% audited.
func TestWaterAuditsProblems(t *testing.T) {
	w := readWater(t)
	arms := map[string][2]int{}
	lots := make([]float64, len(w.rows))
	for i := range w.rows {
		a := arms[w.str(i, "district")]
		if w.str(i, "audit") == "yes" {
			a[1]++
		} else {
			a[0]++
		}
		arms[w.str(i, "district")] = a
		lots[i] = w.num(t, i, "lot_m2")
	}
	for _, d := range Districts() {
		switch {
		case d == "harbour" && (arms[d][1] != 0 || arms[d][0] == 0):
			t.Errorf("harbour: %d not audited, %d audited; want households but none audited", arms[d][0], arms[d][1])
		case d != "harbour" && (arms[d][0] < 50 || arms[d][1] < 50):
			t.Errorf("%s: %d not audited, %d audited; want at least 50 in each arm", d, arms[d][0], arms[d][1])
		}
	}
	readme, err := os.ReadFile("../../testdata/README.md")
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range Districts() {
		if row := fmt.Sprintf("| %s | %d | %d |", d, arms[d][0], arms[d][1]); !strings.Contains(string(readme), row) {
			t.Errorf("testdata/README.md lacks the table row %q; update it", row)
		}
	}
	sorted := append([]float64(nil), lots...)
	sort.Float64s(sorted)
	p90 := sorted[int(math.Ceil(0.9*float64(len(sorted))))-1]
	big, bigAudited := 0, 0
	for i := range w.rows {
		if w.str(i, "pool") == "yes" && lots[i] >= p90 {
			big++
			if w.str(i, "audit") == "yes" {
				bigAudited++
			}
		}
	}
	if big < 50 {
		t.Fatalf("only %d top-decile-lot homes with a pool; want at least 50 for the check to mean something", big)
	}
	if share := float64(bigAudited) / float64(big); share < 0.95 {
		t.Errorf("share audited among %d top-decile-lot homes with a pool = %.3f; want >= 0.95", big, share)
	}
}

// TestWaterAuditsTrueEffects recomputes the true sample ATE and ATT from the
// committed file with the effect formula stated in the WaterAudits doc
// comment, −(15 + 6·household_size + 0.05·lot_m2 + 80·pool + 0.3·home_age),
// and checks them against the generator, the per-unit potential outcomes, and
// the values written in testdata/README.md and in the doc comment.
func TestWaterAuditsTrueEffects(t *testing.T) {
	w := readWater(t)
	d, err := WaterAudits(WaterAuditsSeed, WaterAuditsN)
	if err != nil {
		t.Fatal(err)
	}
	var sAll, sT float64
	nT := 0
	for i := range w.rows {
		pool := 0.0
		if w.str(i, "pool") == "yes" {
			pool = 1
		}
		e := -(15 + 6*w.num(t, i, "household_size") + 0.05*w.num(t, i, "lot_m2") + 80*pool + 0.3*w.num(t, i, "home_age"))
		within(t, fmt.Sprintf("row %d y1 - y0", i+1), d.Truth["y1"][i]-d.Truth["y0"][i], e, 1e-9)
		y := d.Truth["y0"][i]
		if w.str(i, "audit") == "yes" {
			y = d.Truth["y1"][i]
			sT += e
			nT++
		}
		within(t, fmt.Sprintf("row %d litres_per_day", i+1), w.num(t, i, "litres_per_day"), y, 0)
		sAll += e
	}
	ate, att := sAll/float64(len(w.rows)), sT/float64(nT)
	within(t, "TrueATE", d.TrueATE, ate, 1e-9)
	within(t, "TrueATT", d.TrueATT, att, 1e-9)
	if att > ate-10 {
		t.Errorf("ATT %.2f and ATE %.2f: audits should save clearly more among the audited (heterogeneous effect)", att, ate)
	}
	for _, f := range []string{"../../testdata/README.md", "water.go"} {
		text, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range []string{fmt.Sprintf("%.2f", ate), fmt.Sprintf("%.2f", att)} {
			if !strings.Contains(string(text), v) {
				t.Errorf("%s does not state the true effect %s; update it", f, v)
			}
		}
	}
	if !strings.Contains(d.Notes, fmt.Sprintf("ATE = %.2f", ate)) {
		t.Errorf("Notes do not state the true ATE %.2f:\n%s", ate, d.Notes)
	}
}

// TestWaterAuditsPropensity checks the true scores against the stated rule:
// zero in harbour, at least 0.99 for pool homes with a top-decile lot, and
// strictly inside (0, 1) elsewhere.
func TestWaterAuditsPropensity(t *testing.T) {
	d, err := WaterAudits(WaterAuditsSeed, WaterAuditsN)
	if err != nil {
		t.Fatal(err)
	}
	p90 := nearestRank(d.Num["lot_m2"], 0.9)
	for i, p := range d.Truth["propensity"] {
		switch {
		case d.Str["district"][i] == "harbour":
			if p != 0 {
				t.Fatalf("row %d: harbour with propensity %v", i+1, p)
			}
		case d.Str["pool"][i] == "yes" && d.Num["lot_m2"][i] >= p90:
			if p < 0.99 {
				t.Fatalf("row %d: pool, lot %v >= %v, propensity %v < 0.99", i+1, d.Num["lot_m2"][i], p90, p)
			}
		case p <= 0 || p >= 1:
			t.Fatalf("row %d: propensity %v outside (0, 1)", i+1, p)
		}
	}
}
