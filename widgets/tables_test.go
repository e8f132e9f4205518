package widgets

import (
	"math"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

func TestNumberFormats(t *testing.T) {
	cases := []struct {
		got, want string
	}{
		{formatCount(0), "0"},
		{formatCount(999), "999"},
		{formatCount(1000), "1,000"},
		{formatCount(1234567), "1,234,567"},
		{formatCount(-4200), "-4,200"},
		{formatNumber(0), "0"},
		{formatNumber(1619.08), "1,619"},
		{formatNumber(12345.67), "12,346"},
		{formatNumber(1.23456), "1.235"},
		{formatNumber(-0.0123456), "-0.01235"},
		{formatNumber(0.000161), "0.000161"},
		{formatNumber(3.2e-7), "3.20e-07"},
		{formatNumber(math.NaN()), "—"},
		{formatNumber(math.Inf(1)), "∞"},
		{formatFixed(0.6123, 2), "0.61"},
		{formatFixed(2893.4, 1), "2,893.4"},
		{formatSigned(0.1234, 3), "+0.123"},
		{formatSigned(-0.1234, 3), "-0.123"},
		{formatPercent(0), "0%"},
		{formatPercent(0.152), "15.2%"},
		{formatPercent(0.0001), "<0.1%"},
		{formatPercent(0.99999), ">99.9%"},
		{formatPercent(1), "100.0%"},
		{formatScore(0.0401), "0.040"},
		{formatScore(1e-9), "<0.001"},
		{formatScore(0.99999), ">0.999"},
	}
	for _, c := range cases {
		if c.got != c.want {
			t.Errorf("got %q, want %q", c.got, c.want)
		}
	}
}

func TestTableEscapesEveryString(t *testing.T) {
	tb := table{
		Caption: hostileColumn,
		Head:    []tableCell{headText(hostileLevel), headNum(`"quoted" & more`)},
		Rows: []tableRow{{Flagged: true, Cells: []tableCell{
			{Text: hostileColumn, Hint: `" onmouseover="alert(1)`, Tone: toneBad},
			numCell("1,234"),
		}}},
		Note: hostileLevel,
	}
	h := tb.HTML()
	for _, raw := range []string{hostileColumn, hostileLevel, `" onmouseover="`, `"quoted"`} {
		if strings.Contains(h, raw) {
			t.Errorf("raw %q in %s", raw, h)
		}
	}
	for _, want := range []string{`&lt;img src=x onerror=alert(1)&gt;`, `class="cp-flagged"`, `class="cp-num"`, `color:` + ColorBad} {
		if !strings.Contains(h, want) {
			t.Errorf("%q missing from %s", want, h)
		}
	}
}

func TestCellsTableViolationsFirst(t *testing.T) {
	r := waterResults(t)
	tb := cellsTable(r.Cells2)
	if len(tb.Rows) != len(r.Cells2.Rows) {
		t.Fatalf("%d rows for %d cells", len(tb.Rows), len(r.Cells2.Rows))
	}
	for i, row := range tb.Rows {
		violating := row.Flagged
		if i < r.Cells2.Violating != violating {
			t.Errorf("row %d: violating %v; the %d violating cells must come first", i, violating, r.Cells2.Violating)
		}
	}
	status := tb.Rows[0].Cells[len(tb.Rows[0].Cells)-1]
	if status.Tone != toneBad || !strings.HasPrefix(status.Text, "violation") {
		t.Errorf("first row status %+v", status)
	}
}

func TestLongTablesAreCut(t *testing.T) {
	c := waterStudy().CellsWith(causal.CellOptions{Bins: 10}, "lot_m2", "home_age")
	if err := c.Err(); err != nil {
		t.Fatal(err)
	}
	if len(c.Rows) <= maxTableRows {
		t.Fatalf("only %d cells: the test needs more than %d", len(c.Rows), maxTableRows)
	}
	tb := cellsTable(c)
	if len(tb.Rows) != maxTableRows || !strings.Contains(tb.Note, "Showing 60 of "+formatCount(len(c.Rows))) {
		t.Errorf("%d cells gave %d rows, note %q", len(c.Rows), len(tb.Rows), tb.Note)
	}
}
