package causal

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// Verdict statuses.
const (
	Adequate = "adequate"
	Limited  = "limited"
	Violated = "violated"
)

// VerdictOptions are the thresholds of the verdict. Zero values take the
// defaults below.
type VerdictOptions struct {
	// MaxShareOutside: more than this share of units outside the
	// common-support band makes support limited. Default 0.05 (common
	// practice, no source).
	MaxShareOutside float64
	// Extreme: scores below Extreme or above 1 − Extreme count as extreme.
	// Default 0.1, the trimming rule of thumb of Crump, Hotz, Imbens & Mitnik (2009).
	Extreme float64
	// MaxShareExtreme: more than this share of units with extreme scores
	// makes support limited. Default 0.1 (common practice, no source).
	MaxShareExtreme float64
}

func (o VerdictOptions) withDefaults() VerdictOptions {
	if o.MaxShareOutside <= 0 {
		o.MaxShareOutside = 0.05
	}
	if o.Extreme <= 0 {
		o.Extreme = 0.1
	}
	if o.MaxShareExtreme <= 0 {
		o.MaxShareExtreme = 0.1
	}
	return o
}

// Verdict summarises the positivity diagnostics: a status (adequate,
// limited, violated), the reasons, the estimands the data still support, a
// recommended remedy, and what trimming at the Extreme threshold would drop.
type Verdict struct {
	Status    string   `json:"status"`
	Reasons   []string `json:"reasons"`
	Supported []string `json:"supported_estimands"`
	Remedy    string   `json:"remedy"`
	// Notes are findings too small to change the status.
	Notes []string `json:"notes"`
	// Trimming to [Extreme, 1 − Extreme] would drop these units.
	TrimThreshold float64        `json:"trim_threshold"`
	TrimTreated   int            `json:"trim_drops_treated"`
	TrimControl   int            `json:"trim_drops_control"`
	Options       VerdictOptions `json:"-"`
	err           error
}

// Err returns why no verdict could be reached, or nil.
func (v *Verdict) Err() error {
	if v == nil {
		return errors.New("nil Verdict")
	}
	return v.err
}

// Verdict judges positivity from the scores and any positivity tables given.
// Rules (each threshold in VerdictOptions, with its source):
//   - violated: separation (treatment deterministic for a covariate level or
//     range), a cell with an empty arm that chance does not explain
//     (Cell.Chance < 0.05), or no common-support band at all;
//   - limited: a share of units outside the band above MaxShareOutside, a
//     share of extreme scores above MaxShareExtreme, or sparse cells (thin,
//     or lacking an arm by what may be chance) holding more than
//     MaxShareOutside of the units (fewer: a note);
//   - adequate otherwise.
//
// Supported estimands: ATE only without violations; ATT when every treated
// unit has comparable controls (no treated-only cell or level, no treated
// score above the controls' maximum); ATC symmetrically; ATO (overlap
// weights) always, since it targets the population with overlap (Li, Morgan
// & Zaslavsky 2018).
func (sc *Scores) Verdict(o VerdictOptions, cells ...*Cells) *Verdict {
	if err := sc.Err(); err != nil {
		return &Verdict{err: err}
	}
	for _, c := range cells {
		if err := c.Err(); err != nil {
			return &Verdict{err: err}
		}
	}
	o = o.withDefaults()
	v := &Verdict{Options: o, TrimThreshold: o.Extreme, Reasons: []string{}, Notes: []string{}}
	sup := sc.Support()
	d := sc.Design
	violated, limited := false, false
	treatedOnly, controlOnly := false, false // regions where an arm is missing
	for _, f := range sc.Separation {
		violated = true
		v.Reasons = append(v.Reasons, "separation: "+f.Message)
		switch f.Arm {
		case "treated":
			treatedOnly = true
		case "control":
			controlOnly = true
		default:
			treatedOnly, controlOnly = true, true
		}
	}
	if sup.Band.Lo > sup.Band.Hi {
		violated = true
		treatedOnly, controlOnly = true, true
		v.Reasons = append(v.Reasons, "no common support: the score ranges of the arms do not overlap")
	}
	for _, c := range cells {
		if c.Structural > 0 {
			violated = true
			for _, r := range c.Rows {
				if r.Empty && r.Chance < 0.05 {
					if r.Treated > 0 {
						treatedOnly = true
					} else {
						controlOnly = true
					}
				}
			}
			v.Reasons = append(v.Reasons, fmt.Sprintf("positivity cells (%s): %d of %d cells have an empty arm that chance does not explain, holding %d units (%.1f%%); %d cells with an empty arm in all: %d treated without controls, %d controls without treated units",
				strings.Join(c.Columns, " × "), c.Structural, len(c.Rows), c.UnitsStructural, 100*float64(c.UnitsStructural)/float64(c.N), c.Violating, c.TreatedViolating, c.ControlViolating))
		}
		// Thin cells and small cells lacking an arm by what may be chance:
		// limited when they hold more than MaxShareOutside of the units,
		// otherwise a note.
		sparse, sparseCells := 0, 0
		for _, r := range c.Rows {
			if r.Thin || (r.Empty && r.Chance >= 0.05) {
				sparse += r.Treated + r.Control
				sparseCells++
			}
		}
		if sparseCells > 0 {
			share := float64(sparse) / float64(c.N)
			msg := fmt.Sprintf("positivity cells (%s): %d sparse cells (an arm with fewer than %d units, or missing in a cell small enough for chance) hold %d units (%.1f%%)",
				strings.Join(c.Columns, " × "), sparseCells, c.Options.Thin, sparse, 100*share)
			if share > o.MaxShareOutside {
				limited = true
				v.Reasons = append(v.Reasons, msg)
			} else {
				v.Notes = append(v.Notes, msg)
			}
		}
	}
	if share := sup.ShareOutside(); share > o.MaxShareOutside {
		limited = true
		v.Reasons = append(v.Reasons, fmt.Sprintf("%.1f%% of units lie outside the common-support band [%.3f, %.3f] (threshold %.0f%%)", 100*share, sup.Band.Lo, sup.Band.Hi, 100*o.MaxShareOutside))
	}
	// Treated units scored above every control (or controls below every
	// treated unit) have no comparable units in the other arm; a handful is
	// expected by chance at the tails, so only a share above MaxShareOutside
	// of the arm withdraws the ATT (or ATC).
	if sup.TreatedRange.Hi > sup.ControlRange.Hi || sup.TreatedRange.Lo < sup.ControlRange.Lo {
		if float64(sup.OutsideTreated)/float64(sup.Treated) > o.MaxShareOutside {
			treatedOnly = true
		}
	}
	if sup.ControlRange.Lo < sup.TreatedRange.Lo || sup.ControlRange.Hi > sup.TreatedRange.Hi {
		if float64(sup.OutsideControl)/float64(sup.Control) > o.MaxShareOutside {
			controlOnly = true
		}
	}
	var ext int
	for i, e := range sc.E {
		if e < o.Extreme || e > 1-o.Extreme {
			ext++
			if d.T[i] == 1 {
				v.TrimTreated++
			} else {
				v.TrimControl++
			}
		}
	}
	if share := float64(ext) / float64(d.N); share > o.MaxShareExtreme {
		limited = true
		v.Reasons = append(v.Reasons, fmt.Sprintf("%.1f%% of units have scores below %.2f or above %.2f (threshold %.0f%%)", 100*share, o.Extreme, 1-o.Extreme, 100*o.MaxShareExtreme))
	}
	switch {
	case violated:
		v.Status = Violated
	case limited:
		v.Status = Limited
	default:
		v.Status = Adequate
	}
	if !violated {
		v.Supported = append(v.Supported, "ATE")
	}
	if !treatedOnly {
		v.Supported = append(v.Supported, "ATT")
	}
	if !controlOnly {
		v.Supported = append(v.Supported, "ATC")
	}
	v.Supported = append(v.Supported, "ATO")
	switch {
	case v.Status == Adequate:
		v.Remedy = "none needed for positivity; the ATE is estimable on these covariates (check balance after weighting)"
	case violated && !treatedOnly:
		v.Remedy = "estimate the ATT (every treated unit has comparable controls), or the ATO with overlap weights; the ATE would extrapolate into regions without treated units"
	case violated && !controlOnly:
		v.Remedy = "estimate the ATC, or the ATO with overlap weights; the ATE would extrapolate into regions without controls"
	case violated:
		v.Remedy = fmt.Sprintf("restrict the population: overlap weights (ATO), or trim to scores in [%.2f, %.2f] (drops %d treated and %d controls) — the estimand then changes to the trimmed population", o.Extreme, 1-o.Extreme, v.TrimTreated, v.TrimControl)
	default:
		v.Remedy = fmt.Sprintf("prefer overlap weights (ATO), or trim to scores in [%.2f, %.2f] (drops %d treated and %d controls; the estimand becomes the trimmed population); report how far the estimate moves", o.Extreme, 1-o.Extreme, v.TrimTreated, v.TrimControl)
	}
	return v
}

// String is the terminal view.
func (v *Verdict) String() string {
	if v.err != nil {
		return "verdict: " + v.err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Positivity verdict: %s\n", strings.ToUpper(v.Status))
	for _, r := range v.Reasons {
		fmt.Fprintf(&b, "  - %s\n", r)
	}
	for _, r := range v.Notes {
		fmt.Fprintf(&b, "  note: %s\n", r)
	}
	fmt.Fprintf(&b, "  estimands the data support: %s\n", strings.Join(v.Supported, ", "))
	fmt.Fprintf(&b, "  remedy: %s\n", v.Remedy)
	fmt.Fprintf(&b, "  These diagnostics cannot verify unconfoundedness; estimates depend on the covariates measured.\n")
	return b.String()
}

// String is the terminal view of the propensity model.
func (sc *Scores) String() string {
	if sc.err != nil {
		return "propensity: " + sc.err.Error()
	}
	var b strings.Builder
	d := sc.Design
	model := "logistic regression (maximum likelihood)"
	if sc.Ridge > 0 {
		model = fmt.Sprintf("logistic regression, ridge λ = %g", sc.Ridge)
	}
	fmt.Fprintf(&b, "Propensity model: %s of %s on %d terms, n = %d (%d treated, %d control)\n", model, d.roles.Treatment, d.P-1, d.N, d.Treated, d.Control)
	conv := "converged"
	if !sc.Converged {
		conv = "NOT converged"
	}
	fmt.Fprintf(&b, "  %s in %d iterations; deviance %.4f (null %.4f); AUC %.4f\n", conv, sc.Iterations, sc.Deviance, sc.NullDeviance, sc.AUC)
	fmt.Fprintf(&b, "  %-28s %14s %12s %8s\n", "term", "coef", "se", "z")
	for _, t := range sc.Terms {
		if t.Diverging {
			fmt.Fprintf(&b, "  %-28s %14s %12s %8s\n", t.Name, "diverging", "—", "—")
			continue
		}
		fmt.Fprintf(&b, "  %-28s %14.6g %12.6g %8.2f\n", t.Name, t.Coef, t.SE, t.Z)
	}
	for _, s := range sc.Separation {
		fmt.Fprintf(&b, "  SEPARATION (%s): %s\n", s.Kind, s.Message)
	}
	if sc.Extreme > 0 {
		fmt.Fprintf(&b, "  %d units have fitted scores within 1e-8 of 0 or 1\n", sc.Extreme)
	}
	_ = math.Abs
	return b.String()
}
