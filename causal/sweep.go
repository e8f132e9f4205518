package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
)

// SweepRow is the analysis after symmetric trimming at one α.
type SweepRow struct {
	Alpha float64
	// Keep is the score range kept, [α, 1 − α].
	Keep                           Interval
	KeptTreated, KeptControl       int
	DroppedTreated, DroppedControl int
	Value, SE                      float64
	CI95                           Interval
	// MaxAbsSMD is the largest |SMD| over the design terms after weighting
	// the kept units with the estimand's weights from the refitted scores.
	MaxAbsSMD float64
	// Effective sample sizes (Kish) of those weights.
	ESSTreated, ESSControl float64
	Supported              bool
	// Err is why this α gives no estimate ("" when it does).
	Err string
}

// Sweep is a trimming sweep: the estimate, its interval, the units kept per
// arm and the largest |SMD| after weighting, for symmetric trimming at each
// α of a grid. Each α trims the original units to scores in [α, 1 − α]
// and refits the propensity model on them (Scores.Trim with Symmetric(α)),
// so every row is a different population: the sweep shows how far the
// estimate moves as the population narrows (Crump, Hotz, Imbens & Mitnik
// 2009). Precomputed, so a chart can move through the thresholds without
// recomputing.
type Sweep struct {
	Estimator Estimator
	Estimand  Estimand
	Rows      []SweepRow
	// Optimal is the α of Crump et al. (2009) for these scores (0: no
	// trimming advised).
	Optimal float64
	err     error
}

// Err returns why the sweep could not run, or nil.
func (s *Sweep) Err() error {
	if s == nil {
		return errors.New("nil Sweep")
	}
	return s.err
}

// DefaultSweepGrid is α = 0, 0.01, …, 0.20.
func DefaultSweepGrid() []float64 {
	g := make([]float64, 21)
	for k := range g {
		g[k] = float64(k) / 100
	}
	return g
}

// Sweep runs the trimming sweep for the estimator and estimand over the α
// values given (default DefaultSweepGrid). An α at which trimming empties an
// arm, or the estimator fails, gives a row with Err set and NaN values.
func (sc *Scores) Sweep(est Estimator, target Estimand, alphas ...float64) *Sweep {
	s := &Sweep{Estimator: est, Estimand: target}
	if err := sc.Err(); err != nil {
		s.err = err
		return s
	}
	if err := checkEstimator(est, target); err != nil {
		s.err = err
		return s
	}
	if sc.Design.Y == nil {
		s.err = settingErr("Outcome", "column", "sweep: no outcome: set one with ", "")
		return s
	}
	if len(alphas) == 0 {
		alphas = DefaultSweepGrid()
	}
	for _, a := range alphas {
		if math.IsNaN(a) || a < 0 || a >= 0.5 {
			s.err = fmt.Errorf("sweep: α = %g must be in [0, 0.5)", a)
			return s
		}
	}
	s.Optimal, _ = crumpAlpha(sc.E)
	nan := math.NaN()
	for _, a := range alphas {
		r := SweepRow{Alpha: a, Keep: Interval{a, 1 - a}, Value: nan, SE: nan, CI95: Interval{nan, nan}, MaxAbsSMD: nan, ESSTreated: nan, ESSControl: nan}
		tr := sc.Trim(Symmetric(a))
		r.KeptTreated, r.KeptControl = tr.KeptTreated, tr.KeptControl
		r.DroppedTreated, r.DroppedControl = tr.DroppedTreated, tr.DroppedControl
		if err := tr.Err(); err != nil {
			r.Err = err.Error()
			s.Rows = append(s.Rows, r)
			continue
		}
		e := tr.Effect(est, target)
		if err := e.Err(); err != nil {
			r.Err = err.Error()
		} else {
			r.Value, r.SE, r.CI95, r.Supported = e.Value, e.SE, e.CI95, e.Supported
		}
		if w := tr.Weights(target); w.Err() == nil {
			r.ESSTreated, r.ESSControl = w.ESSTreated, w.ESSControl
			if b := w.Balance(); b.Err() == nil {
				r.MaxAbsSMD = b.MaxAbsSMD()
			}
		}
		s.Rows = append(s.Rows, r)
	}
	return s
}

// String is the terminal table.
func (s *Sweep) String() string {
	if err := s.Err(); err != nil {
		return "sweep: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Trimming sweep: %s %s at scores in [α, 1 − α] (each α a different population; optimal α of Crump et al. 2009: %.3f)\n", s.Estimator, s.Estimand, s.Optimal)
	fmt.Fprintf(&b, "  %5s %8s %8s %12s %10s %25s %9s\n", "α", "treated", "control", "estimate", "SE", "95% CI", "max|SMD|")
	for _, r := range s.Rows {
		if r.Err != "" && math.IsNaN(r.Value) {
			fmt.Fprintf(&b, "  %5.2f %8d %8d  %s\n", r.Alpha, r.KeptTreated, r.KeptControl, r.Err)
			continue
		}
		mark := ""
		if !r.Supported {
			mark = "  not supported"
		}
		fmt.Fprintf(&b, "  %5.2f %8d %8d %12s %10s %25s %9.3f%s\n", r.Alpha, r.KeptTreated, r.KeptControl, fmtG(r.Value), fmtG(r.SE),
			fmt.Sprintf("[%s, %s]", fmtG(r.CI95.Lo), fmtG(r.CI95.Hi)), r.MaxAbsSMD, mark)
	}
	return b.String()
}

// MarshalJSON is the chart payload: one entry per α.
func (s *Sweep) MarshalJSON() ([]byte, error) {
	if err := s.Err(); err != nil {
		return failedJSON(err)
	}
	type row struct {
		Alpha          float64  `json:"alpha"`
		Keep           Interval `json:"keep"`
		KeptTreated    int      `json:"kept_treated"`
		KeptControl    int      `json:"kept_control"`
		DroppedTreated int      `json:"dropped_treated"`
		DroppedControl int      `json:"dropped_control"`
		Value          Num      `json:"value"`
		SE             Num      `json:"se"`
		CI95           *[2]Num  `json:"ci95"`
		MaxAbsSMD      Num      `json:"max_abs_smd_weighted"`
		ESSTreated     Num      `json:"ess_treated"`
		ESSControl     Num      `json:"ess_control"`
		Supported      bool     `json:"supported"`
		Err            string   `json:"error,omitempty"`
	}
	rows := make([]row, 0, len(s.Rows))
	for _, r := range s.Rows {
		var ci *[2]Num
		if !math.IsNaN(r.CI95.Lo) {
			ci = &[2]Num{Num(r.CI95.Lo), Num(r.CI95.Hi)}
		}
		rows = append(rows, row{r.Alpha, r.Keep, r.KeptTreated, r.KeptControl, r.DroppedTreated, r.DroppedControl, Num(r.Value), Num(r.SE), ci,
			Num(r.MaxAbsSMD), Num(r.ESSTreated), Num(r.ESSControl), r.Supported, r.Err})
	}
	return json.Marshal(struct {
		Estimator string  `json:"estimator"`
		Estimand  string  `json:"estimand"`
		Optimal   float64 `json:"optimal_alpha"`
		Rows      []row   `json:"rows"`
		SEMethod  string  `json:"se_method"`
	}{s.Estimator.String(), s.Estimand.String(), s.Optimal, rows, s.Estimator.seMethod()})
}
