package causal

import (
	"context"
	"encoding/json"
	"errors"
	"io/fs"
	"math"
	"strings"
	"testing"
)

// A chain started on a missing file carries the loader's own error to every
// leaf: Err, Estimates.Get, and a JSON face {"status":"failed","error":...}
// that is never empty.
func TestFailedChainCarriesOriginalError(t *testing.T) {
	s := Load("no/such/file.csv").Treat("t").Outcome("y").Adjust("x")
	root := s.Err()
	if !errors.Is(root, fs.ErrNotExist) {
		t.Fatalf("Load error %v is not fs.ErrNotExist", root)
	}
	sc := s.Propensity()
	es := sc.Effects(ATE)
	got := es.Get(AIPW)
	if got == nil {
		t.Fatal("Estimates.Get on failed estimates returned nil")
	}
	if !errors.Is(got.Err(), fs.ErrNotExist) || got.Err().Error() != root.Error() {
		t.Errorf("Get(AIPW).Err() = %v, want the load error %v", got.Err(), root)
	}
	if got.Estimator != AIPW || got.Estimand != ATE {
		t.Errorf("Get(AIPW) on failed estimates names %s %s", got.Estimator, got.Estimand)
	}
	results := map[string]any{
		"Study": s, "Scores": sc, "Support": sc.Support(), "Weights": sc.Weights(ATE), "Balance": sc.Weights(ATE).Balance(),
		"Estimates": es, "Effect": got, "Trimmed": sc.Trim(Symmetric(0.1)), "Bootstrap": sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: 10}),
		"Cells": s.Cells("x"), "Matching": sc.Match(MatchOptions{Estimand: ATT}), "Strata": sc.Subclassify(0), "Calibration": sc.CalibrationTest(), "Sweep": sc.Sweep(AIPW, ATE, 0.05), "Extrapolation": sc.Extrapolation(ATE), "Report": &Report{},
	}
	for name, r := range results {
		b, err := json.Marshal(r)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		var m map[string]any
		if err := json.Unmarshal(b, &m); err != nil {
			t.Errorf("%s: JSON %s is not an object: %v", name, b, err)
			continue
		}
		if m["status"] != "failed" || m["error"] == nil || m["error"] == "" {
			t.Errorf("%s: failed result encodes as %s; want status failed and its error", name, b)
		}
		if name != "Report" && !strings.Contains(string(b), "file.csv") {
			t.Errorf("%s: JSON %s lost the original error", name, b)
		}
	}
	// An estimator that does not target the estimand: an error, not nil.
	ok := FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": {1, 2, 3, 4, 5, 6, 7, 8}, "t": {0, 1, 0, 1, 1, 0, 1, 0}, "y": {1, 3, 2, 5, 4, 6, 1, 1}}, nil).
		Treat("t").Outcome("y").Adjust("x").Propensity().Effects(ATE)
	if e := ok.Get(OverlapWeighted); e == nil || e.Err() == nil || !strings.Contains(e.Err().Error(), "overlap_weighted") {
		t.Errorf("Get of an estimator not in the set: %v", e)
	}
}

// A treated level is matched by its whole text: "1abc" is not 1.
func TestTreatedLevelExactText(t *testing.T) {
	cols := map[string][]float64{"x": {1, 2, 3, 4, 5, 6, 7, 8}, "t": {0, 1, 0, 1, 1, 0, 1, 0}, "y": {1, 3, 2, 5, 4, 6, 1, 1}}
	codes := map[string][]float64{"x": cols["x"], "t": {2, 5, 2, 5, 5, 2, 5, 2}, "y": cols["y"]}
	for _, c := range []struct {
		data    map[string][]float64
		level   string
		treated int // -1: an error naming the level
	}{
		{cols, "1abc", -1}, {cols, "1 ", -1}, {cols, "0x1p0", -1}, {cols, "1_0", -1}, {cols, "Inf", -1},
		{cols, "1", 4}, {cols, "0", 4}, {codes, "5", 4}, {codes, "5.0", 4}, {codes, "5x", -1}, {codes, "7", -1},
	} {
		d, err := FromColumns([]string{"x", "t", "y"}, c.data, nil).Treat("t").TreatedLevel(c.level).Outcome("y").Adjust("x").Design()
		if c.treated < 0 {
			if err == nil || !strings.Contains(err.Error(), `"`+c.level+`"`) {
				t.Errorf("treated level %q: err %v; want an error naming it", c.level, err)
			}
			continue
		}
		if err != nil || d.Treated != c.treated {
			t.Errorf("treated level %q: %v, %d treated", c.level, err, d.Treated)
		}
	}
}

// Errors whose fix is a Study setting can be rephrased by a front end.
func TestSettingErrorsRephrase(t *testing.T) {
	y := []float64{1, 3, 2, 5, 4, 6, 1, 1}
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8}
	missing := []float64{1, 2, 3, 4, 5, 6, 7, 8}
	missing[3] = math.NaN()
	flag := func(setting, value string) string {
		return "--" + strings.ToLower(setting) + map[bool]string{true: "", false: " " + value}[value == ""]
	}
	for _, c := range []struct {
		s          *Study
		setting    string
		lib, front string
	}{
		{FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": missing, "t": {0, 1, 0, 1, 1, 0, 1, 0}, "y": y}, nil).Treat("t").Outcome("y").Adjust("x"),
			"DropIncomplete", ".DropIncomplete()", "--dropincomplete"},
		{FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": x, "y": y}, map[string][]string{"t": {"a", "b", "a", "b", "b", "a", "b", "a"}}).Treat("t").Outcome("y").Adjust("x"),
			"TreatedLevel", `.TreatedLevel("b")`, "--treatedlevel b"},
	} {
		_, err := c.s.Design()
		var se *SettingError
		if !errors.As(err, &se) || se.Setting != c.setting {
			t.Fatalf("%v: not a SettingError for %s", err, c.setting)
		}
		if !strings.Contains(err.Error(), c.lib) {
			t.Errorf("library message %q lacks %q", err, c.lib)
		}
		wrapped := errors.Join(errors.New("context"), err)
		if got := RephraseSettings(wrapped, flag); !strings.Contains(got, c.front) || strings.Contains(got, c.lib) || !strings.HasPrefix(got, "context\n") {
			t.Errorf("rephrased %q", got)
		}
	}
}

// A bootstrap that fails — it cannot start, or every replicate fails — stays
// in the report marked failed, and the rest of the report is built.
func TestReportKeepsFailedBootstrap(t *testing.T) {
	for _, c := range []struct {
		name    string
		x, t, y []float64
		why     string
	}{
		// Two treated units for an outcome model with two terms: the full-sample AIPW fails.
		{"full sample", []float64{1, 2, 3, 4, 5, 6, 7, 8}, []float64{0, 0, 0, 1, 0, 0, 1, 0}, []float64{1, 3, 2, 5, 4, 6, 1, 1}, "outcome model for the treated arm"},
		// Complete separation: every unit is pinned, no replicate can refit.
		{"every replicate", []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, []float64{0, 0, 0, 0, 0, 1, 1, 1, 1, 1}, []float64{1, 3, 2, 5, 4, 6, 8, 7, 9, 11}, "0 of 40 replicates succeeded"},
	} {
		s := FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": c.x, "t": c.t, "y": c.y}, nil).Treat("t").Outcome("y").Adjust("x")
		r, err := BuildReport(s, ReportOptions{Bootstrap: 40, Seed: 3})
		if err != nil {
			t.Fatalf("%s: a failed bootstrap took the report with it: %v", c.name, err)
		}
		st, why := r.Bootstrap.Status()
		if st != BootstrapFailed || !strings.Contains(why, c.why) {
			t.Errorf("%s: status %s (%s)", c.name, st, why)
		}
		b, _ := json.Marshal(r)
		var m struct {
			Bootstrap struct{ Status, Error string }
			Verdict   map[string]any
			Estimates []any
		}
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		if m.Bootstrap.Status != "failed" || !strings.Contains(m.Bootstrap.Error, c.why) || m.Verdict == nil || len(m.Estimates) == 0 {
			t.Errorf("%s: JSON bootstrap %+v, verdict %v, %d estimates", c.name, m.Bootstrap, m.Verdict != nil, len(m.Estimates))
		}
		if !strings.Contains(r.String(), "bootstrap: FAILED: ") {
			t.Errorf("%s: text lacks the failed bootstrap:\n%s", c.name, r)
		}
	}
}

// A trimming α is a decimal number: Go's other literal forms are refused.
func TestParseTrimDecimalOnly(t *testing.T) {
	for _, bad := range []string{"0x1p-3", "0.1_0", "1_0", "Inf", "NaN", "0.5", "-0.1", "0.1abc", ""} {
		if _, on, err := ParseTrim(bad); bad != "" && err == nil {
			t.Errorf("ParseTrim(%q) accepted (trim %v)", bad, on)
		}
	}
	for _, good := range []string{"0.1", ".05", "1e-1", "none", "optimal"} {
		if _, _, err := ParseTrim(good); err != nil {
			t.Errorf("ParseTrim(%q): %v", good, err)
		}
	}
}

// Cells that fail are noted in the verdict, which did not judge them (the
// report keeps them as a failed part); cells that worked add no note.
func TestFailedCellsNotedInVerdict(t *testing.T) {
	v := &Verdict{}
	noteFailedCells(v, &Cells{Columns: []string{"district", "pool"}, err: errors.New("too many levels")})
	ok := FromColumns([]string{"x", "t"}, map[string][]float64{"x": {0, 1, 0, 1, 1, 0}, "t": {0, 1, 0, 1, 0, 1}}, nil).Treat("t").Adjust("x").Cells("x")
	if ok.Err() != nil {
		t.Fatal(ok.Err())
	}
	noteFailedCells(v, ok)
	noteFailedCells(v, nil)
	if len(v.Notes) != 1 || !strings.Contains(v.Notes[0], "district, pool could not be built (too many levels)") {
		t.Errorf("notes %q", v.Notes)
	}
}

// A cancelled context stops the report between stages with its error.
func TestReportCancelledBetweenStages(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	s := FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": {1, 2, 3, 4, 5, 6, 7, 8}, "t": {0, 1, 0, 1, 1, 0, 1, 0}, "y": {1, 3, 2, 5, 4, 6, 1, 1}}, nil).
		Treat("t").Outcome("y").Adjust("x")
	if r, err := BuildReport(s, ReportOptions{Context: ctx, Bootstrap: 10}); !errors.Is(err, context.Canceled) || r != nil {
		t.Errorf("cancelled report: %v, %v", r, err)
	}
	if _, err := BuildReport(s, ReportOptions{Context: context.Background()}); err != nil {
		t.Errorf("report: %v", err)
	}
}
