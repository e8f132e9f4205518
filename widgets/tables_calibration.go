package widgets

import (
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
)

// calibrationTable shows the propensity model's calibration test
// (causal.CalibrationTest): per decile of risk the units, the treated units
// observed and expected, and the mean score; the tail deciles carry the exact
// binomial p-value and are flagged as the causal package judged them.
func calibrationTable(s *causal.Scores) table {
	c := s.CalibrationTest()
	t := table{
		Head: []tableCell{headText("decile of risk"), headText("scores"), headNum("units"), headNum("treated"),
			headNum("expected"), headNum("mean score"), headText("tail check")},
	}
	if err := c.Err(); err != nil {
		t.Caption = "Calibration test not computed: " + err.Error()
		return t
	}
	if c.DF >= 1 {
		t.Caption = fmt.Sprintf("Calibration: Hosmer–Lemeshow (1980) C = %s, df %d, p = %s", formatNumber(c.HL), c.DF, formatNumber(c.HLP))
	} else {
		t.Caption = fmt.Sprintf("Calibration: the scores form %d groups, too few for the Hosmer–Lemeshow test", len(c.Groups))
	}
	tails := map[int]causal.CalibrationTail{}
	for _, tl := range c.Tails {
		if tl.Decile == "lowest" {
			tails[0] = tl
		} else {
			tails[len(c.Groups)-1] = tl
		}
	}
	for g, grp := range c.Groups {
		check, flagged := textCell(""), false
		if tl, ok := tails[g]; ok {
			if tl.Flagged {
				check, flagged = flagCell("miscalibrated: p = "+formatNumber(tl.P)+"; add terms to the propensity model", toneBad), true
			} else {
				check = flagCell("p = "+formatNumber(tl.P), toneMuted)
			}
		}
		t.Rows = append(t.Rows, tableRow{Flagged: flagged, Cells: []tableCell{numCell(fmt.Sprint(g + 1)),
			textCell("[" + formatScore(grp.Lo) + ", " + formatScore(grp.Hi) + "]"), numCell(formatCount(grp.N)),
			numCell(formatCount(grp.Observed)), numCell(formatFixed(grp.Expected, 1)), numCell(formatScore(grp.MeanScore)), check}})
	}
	t.Note = fmt.Sprintf("Tail check: exact binomial test of the treated count in the lowest and highest decile against its mean score, flagged at p < %s (two tails, level %s).", formatNumber(c.Alpha/2), formatNumber(c.Alpha))
	return t
}
