package causal

import (
	"encoding/json"
	"errors"
	"math"
)

// Num is a float64 that encodes as a JSON number, or null when it is NaN or
// infinite (JSON has no NaN); the field's documentation says why it can be null.
type Num float64

// MarshalJSON writes the number or null.
func (n Num) MarshalJSON() ([]byte, error) { return jsonNumber(float64(n)), nil }

// IsNull reports whether the value encodes as null.
func (n Num) IsNull() bool { return math.IsNaN(float64(n)) || math.IsInf(float64(n), 0) }

// errJSON is the JSON face of every failed result: {"status":"failed",
// "error":"why"}, so a failed result never encodes as an empty object.
type errJSON struct {
	Status string `json:"status"`
	Error  string `json:"error"`
}

func failedJSON(err error) ([]byte, error) { return json.Marshal(errJSON{"failed", err.Error()}) }

// MarshalJSON is the pipeline view of a study: its source, size and roles
// and, once the roles are complete, the rows used; a failed study encodes its
// error.
func (s *Study) MarshalJSON() ([]byte, error) {
	if s == nil {
		return failedJSON(errors.New("nil Study"))
	}
	if s.err != nil {
		return failedJSON(s.err)
	}
	if s.src == nil {
		return failedJSON(errors.New("no data: start with causal.Load or causal.FromSource"))
	}
	out := struct {
		Status   string  `json:"status"`
		File     string  `json:"file,omitempty"`
		Rows     int     `json:"rows"`
		Columns  int     `json:"columns"`
		Roles    Roles   `json:"roles"`
		RowsUsed *int    `json:"rows_used,omitempty"`
		Problem  *string `json:"error,omitempty"`
	}{Status: "ok", File: s.file, Rows: s.src.Rows(), Columns: len(s.src.Names()), Roles: s.Roles()}
	if s.treat != "" {
		if d, err := s.Design(); err != nil {
			msg := err.Error()
			out.Status, out.Problem = "failed", &msg
		} else {
			out.RowsUsed = &d.N
		}
	}
	return json.Marshal(out)
}

// MarshalJSON writes the report JSON (schema counterpart.report/v1); a
// report that was not built encodes its error.
func (r *Report) MarshalJSON() ([]byte, error) {
	if err := r.Err(); err != nil {
		return failedJSON(err)
	}
	type plain Report
	return json.Marshal((*plain)(r))
}

// MarshalJSON is the pipeline view of the propensity model.
func (sc *Scores) MarshalJSON() ([]byte, error) {
	if err := sc.Err(); err != nil {
		return failedJSON(err)
	}
	type termJ struct {
		Term      string `json:"term"`
		Coef      Num    `json:"coef"`
		SE        Num    `json:"se"`
		Diverging bool   `json:"diverging,omitempty"`
		Note      string `json:"note,omitempty"`
	}
	type calJ struct {
		Lo           Num `json:"lo"`
		Hi           Num `json:"hi"`
		MeanScore    Num `json:"mean_score"`
		ShareTreated Num `json:"share_treated"`
		N            int `json:"n"`
	}
	out := struct {
		Model       string       `json:"model"`
		Ridge       float64      `json:"ridge,omitempty"`
		Converged   bool         `json:"converged"`
		Iterations  int          `json:"iterations"`
		Deviance    Num          `json:"deviance"`
		NullDev     Num          `json:"null_deviance"`
		AUC         Num          `json:"auc"`
		Terms       []termJ      `json:"terms"`
		Separation  []Separation `json:"separation"`
		Extreme     int          `json:"extreme_scores"`
		Calibration []calJ       `json:"calibration"`
		// CalibrationTest is the Hosmer–Lemeshow and tail test (CalibrationTest).
		CalibrationTest *CalibrationTest `json:"calibration_test"`
	}{CalibrationTest: sc.CalibrationTest(), Model: "logistic", Ridge: sc.Ridge, Converged: sc.Converged, Iterations: sc.Iterations,
		Deviance: Num(sc.Deviance), NullDev: Num(sc.NullDeviance), AUC: Num(sc.AUC), Extreme: sc.Extreme,
		Separation: append([]Separation{}, sc.Separation...)}
	for _, t := range sc.Terms {
		tj := termJ{Term: t.Name, Coef: Num(t.Coef), SE: Num(t.SE), Diverging: t.Diverging}
		if t.Diverging {
			tj.Coef, tj.SE = Num(math.NaN()), Num(math.NaN())
			tj.Note = "null: separation drives this coefficient toward infinity; no finite estimate exists"
		}
		out.Terms = append(out.Terms, tj)
	}
	for _, c := range sc.Calibration {
		out.Calibration = append(out.Calibration, calJ{Num(c.Lo), Num(c.Hi), Num(c.MeanScore), Num(c.ShareTreated), c.N})
	}
	return json.Marshal(out)
}

// MarshalJSON is the pipeline view of support by arm.
func (s *Support) MarshalJSON() ([]byte, error) {
	if err := s.Err(); err != nil {
		return failedJSON(err)
	}
	type ext struct {
		Threshold    float64 `json:"threshold"`
		TreatedBelow Num     `json:"treated_below"`
		TreatedAbove Num     `json:"treated_above"`
		ControlBelow Num     `json:"control_below"`
		ControlAbove Num     `json:"control_above"`
	}
	type bin struct {
		Lo      float64 `json:"lo"`
		Hi      float64 `json:"hi"`
		Treated int     `json:"treated"`
		Control int     `json:"control"`
	}
	out := struct {
		Band     *Interval `json:"band"`
		BandNote string    `json:"band_note,omitempty"`
		Outside  struct {
			Treated int `json:"treated"`
			Control int `json:"control"`
		} `json:"outside"`
		ScoreRange struct {
			Treated Interval `json:"treated"`
			Control Interval `json:"control"`
		} `json:"score_range"`
		Extremes  []ext        `json:"extremes"`
		Profile   []ProfileRow `json:"profile_outside"`
		Histogram []bin        `json:"histogram"`
	}{}
	if s.Band.Lo <= s.Band.Hi {
		b := s.Band
		out.Band = &b
	} else {
		out.BandNote = "null: the arms' score ranges do not overlap"
	}
	out.Outside.Treated, out.Outside.Control = s.OutsideTreated, s.OutsideControl
	out.ScoreRange.Treated, out.ScoreRange.Control = s.TreatedRange, s.ControlRange
	for _, x := range s.Extremes {
		out.Extremes = append(out.Extremes, ext{x.Threshold, Num(x.TreatedBelow), Num(x.TreatedAbove), Num(x.ControlBelow), Num(x.ControlAbove)})
	}
	out.Profile = append([]ProfileRow{}, s.Profile...)
	for i := range out.Profile {
		if math.IsInf(out.Profile[i].SMD, 0) || math.IsNaN(out.Profile[i].SMD) {
			out.Profile[i].SMD = 0
		}
	}
	for _, h := range s.Histogram {
		out.Histogram = append(out.Histogram, bin{h.Lo, h.Hi, h.Treated, h.Control})
	}
	return json.Marshal(out)
}

// MarshalJSON is the pipeline view of a positivity table.
func (c *Cells) MarshalJSON() ([]byte, error) {
	if err := c.Err(); err != nil {
		return failedJSON(err)
	}
	return json.Marshal(struct {
		Columns          []string `json:"columns"`
		Bins             int      `json:"bins"`
		Thin             int      `json:"thin_below"`
		Cuts             []Cut    `json:"cuts"`
		Cells            []Cell   `json:"cells"`
		Violating        int      `json:"violating_cells"`
		ThinCells        int      `json:"thin_cells"`
		UnitsViolating   int      `json:"units_in_violating_cells"`
		ShareViolating   Num      `json:"share_in_violating_cells"`
		TreatedViolating int      `json:"treated_without_controls"`
		ControlViolating int      `json:"controls_without_treated"`
	}{c.Columns, c.Options.Bins, c.Options.Thin, c.Cuts, c.Rows, c.Violating, c.ThinCells, c.UnitsViolating,
		Num(c.ShareViolating), c.TreatedViolating, c.ControlViolating})
}

// MarshalJSON is the pipeline view of the erosion curve.
func (e *Erosion) MarshalJSON() ([]byte, error) {
	if err := e.Err(); err != nil {
		return failedJSON(err)
	}
	return json.Marshal(struct {
		Order  []string      `json:"order"`
		Greedy bool          `json:"greedy"`
		Bins   int           `json:"bins"`
		Steps  []ErosionStep `json:"steps"`
	}{e.Order, e.Greedy, e.Options.Bins, e.Steps})
}

// MarshalJSON is the pipeline view of a balance sheet (field names of the
// report contract: covariate, smd, variance_ratio, smd_weighted).
func (b *BalanceSheet) MarshalJSON() ([]byte, error) {
	if err := b.Err(); err != nil {
		return failedJSON(err)
	}
	return json.Marshal(b.Rows)
}

// MarshalJSON writes one balance row; NaN (a variance ratio of a 0/1 term,
// or a weighted value when no weights were given) becomes null.
func (r BalanceRow) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Covariate     string `json:"covariate"`
		SMD           Num    `json:"smd"`
		VarianceRatio Num    `json:"variance_ratio"`
		KS            Num    `json:"ks"`
		SMDWeighted   Num    `json:"smd_weighted"`
		VRWeighted    Num    `json:"variance_ratio_weighted"`
		KSWeighted    Num    `json:"ks_weighted"`
		Imbalanced    bool   `json:"imbalanced"`
	}{r.Term, Num(r.SMD), Num(r.VarianceRatio), Num(r.KS), Num(r.SMDWeighted), Num(r.VarianceRatioWeighted), Num(r.KSWeighted), r.Imbalanced()})
}
