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

// verdictDefaults fills in the defaults. For scores refitted on the units
// kept by symmetric trimming at α, the default Extreme is that α: the user
// has chosen how extreme a score may be, and judging the kept units by a
// stricter bound would withdraw what the trimming was meant to support.
func (sc *Scores) verdictDefaults(o VerdictOptions) VerdictOptions {
	if o.Extreme == 0 && sc.trimAlpha > 0 {
		o.Extreme = sc.trimAlpha
	}
	return o.withDefaults()
}

// validate rejects thresholds that cannot mean anything. Zero means the
// default; to be stricter than a default, give a small positive value.
func (o VerdictOptions) validate() error {
	check := func(name string, v, hi float64, open bool) error {
		if math.IsNaN(v) || v < 0 || v > hi || (open && v == hi) {
			rng := fmt.Sprintf("[0, %g]", hi)
			if open {
				rng = fmt.Sprintf("[0, %g)", hi)
			}
			return fmt.Errorf("verdict options: %s = %g is outside %s (0 means the default)", name, v, rng)
		}
		return nil
	}
	if err := check("MaxShareOutside", o.MaxShareOutside, 1, false); err != nil {
		return err
	}
	if err := check("MaxShareExtreme", o.MaxShareExtreme, 1, false); err != nil {
		return err
	}
	return check("Extreme", o.Extreme, 0.5, true)
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
// recommended remedy with its cost (and alternatives), and what trimming at
// the Extreme threshold would drop.
type Verdict struct {
	Status    string   `json:"status"`
	Reasons   []string `json:"reasons"`
	Supported []string `json:"supported_estimands"`
	Remedy    string   `json:"remedy"`
	// Notes are findings too small to change the status.
	Notes []string `json:"notes"`
	// Trimming to [Extreme, 1 − Extreme] would drop these units.
	TrimThreshold float64 `json:"trim_threshold"`
	TrimTreated   int     `json:"trim_drops_treated"`
	TrimControl   int     `json:"trim_drops_control"`
	// Remedies: the recommended remedy first (its Text is Remedy), then
	// the alternatives, each with its cost.
	Remedies []Remedy       `json:"remedies"`
	Options  VerdictOptions `json:"-"`
	err      error
}

// Err returns why no verdict could be reached, or nil.
func (v *Verdict) Err() error {
	if v == nil {
		return errors.New("nil Verdict")
	}
	return v.err
}

// positivity collects the findings behind a verdict: what is violated or
// limited, and which arms lack comparable units of the other arm somewhere.
type positivity struct {
	violated, limited        bool
	treatedOnly, controlOnly bool // a region holds treated (control) units without the other arm
	noOverlap                bool // the arms' scores do not overlap at all
	reasons, notes           []string
	treatedWhy, controlWhy   []string // why the ATT (ATC) is withdrawn
	violationWhy             []string // violations (the ATE is withdrawn)
	// controlsAlone and treatedAlone mark, per design row, the units in a
	// region without the other arm (scores pinned at 0 or 1 by separation,
	// outside the common-support band, or in a cell lacking the other arm
	// that chance does not explain).
	controlsAlone, treatedAlone []bool
	sup                         *Support
}

// supportBand is the part of Support the verdict needs — score ranges by
// arm, the common-support band and the units outside it — without the
// histogram, extreme shares and profile (O(n), no allocation beyond the
// outside flags).
func (sc *Scores) supportBand() *Support {
	d := sc.Design
	s := &Support{Scores: sc, Treated: d.Treated, Control: d.Control}
	s.TreatedRange = Interval{math.Inf(1), math.Inf(-1)}
	s.ControlRange = s.TreatedRange
	for i, e := range sc.E {
		r := &s.ControlRange
		if d.T[i] == 1 {
			r = &s.TreatedRange
		}
		r.Lo, r.Hi = math.Min(r.Lo, e), math.Max(r.Hi, e)
	}
	s.Band = Interval{math.Max(s.TreatedRange.Lo, s.ControlRange.Lo), math.Min(s.TreatedRange.Hi, s.ControlRange.Hi)}
	s.Outside = make([]bool, d.N)
	for i, e := range sc.E {
		if e < s.Band.Lo || e > s.Band.Hi || s.Band.Lo > s.Band.Hi {
			s.Outside[i] = true
			if d.T[i] == 1 {
				s.OutsideTreated++
			} else {
				s.OutsideControl++
			}
		}
	}
	return s
}

func (sc *Scores) positivity(o VerdictOptions, cells []*Cells) *positivity {
	o = sc.verdictDefaults(o)
	pf := &positivity{reasons: []string{}, notes: []string{}}
	sup := sc.supportBand()
	pf.sup = sup
	d := sc.Design
	pf.controlsAlone = make([]bool, d.N)
	pf.treatedAlone = make([]bool, d.N)
	for i, e := range sc.E {
		if d.T[i] == 0 && (e == 0 || sup.Outside[i]) {
			pf.controlsAlone[i] = true
		}
		if d.T[i] == 1 && (e == 1 || sup.Outside[i]) {
			pf.treatedAlone[i] = true
		}
	}
	for _, f := range sc.Separation {
		pf.violated = true
		msg := "separation: " + f.Message
		pf.reasons = append(pf.reasons, msg)
		pf.violationWhy = append(pf.violationWhy, msg)
		switch f.Arm {
		case "treated":
			pf.treatedOnly = true
			pf.treatedWhy = append(pf.treatedWhy, msg)
		case "control":
			pf.controlOnly = true
			pf.controlWhy = append(pf.controlWhy, msg)
		default:
			pf.treatedOnly, pf.controlOnly = true, true
			pf.treatedWhy = append(pf.treatedWhy, msg)
			pf.controlWhy = append(pf.controlWhy, msg)
		}
	}
	if sup.Band.Lo > sup.Band.Hi {
		msg := "no common support: the score ranges of the arms do not overlap"
		pf.violated, pf.noOverlap = true, true
		pf.treatedOnly, pf.controlOnly = true, true
		pf.reasons = append(pf.reasons, msg)
		pf.violationWhy = append(pf.violationWhy, msg)
		pf.treatedWhy = append(pf.treatedWhy, msg)
		pf.controlWhy = append(pf.controlWhy, msg)
	}
	for _, c := range cells {
		if c.Structural > 0 {
			pf.violated = true
			var t1, c0 int
			for _, r := range c.Rows {
				if r.Structural {
					if r.Treated > 0 {
						pf.treatedOnly = true
						t1 += r.Treated
					} else {
						pf.controlOnly = true
						c0 += r.Control
					}
				}
			}
			for i := 0; i < d.N && i < len(c.cellOf); i++ {
				r := c.Rows[c.cellOf[i]]
				if r.Structural {
					if d.T[i] == 1 {
						pf.treatedAlone[i] = true
					} else {
						pf.controlsAlone[i] = true
					}
				}
			}
			cols := strings.Join(c.Columns, " × ")
			msg := fmt.Sprintf("positivity cells (%s): %d of %d cells have an empty arm that chance does not explain, holding %d units (%.1f%%); %d cells with an empty arm in all: %d treated without controls, %d controls without treated units",
				cols, c.Structural, len(c.Rows), c.UnitsStructural, 100*float64(c.UnitsStructural)/float64(c.N), c.Violating, c.TreatedViolating, c.ControlViolating)
			pf.reasons = append(pf.reasons, msg)
			pf.violationWhy = append(pf.violationWhy, msg)
			if t1 > 0 {
				pf.treatedWhy = append(pf.treatedWhy, fmt.Sprintf("positivity cells (%s): %d treated units are in cells without controls", cols, t1))
			}
			if c0 > 0 {
				pf.controlWhy = append(pf.controlWhy, fmt.Sprintf("positivity cells (%s): %d controls are in cells without treated units", cols, c0))
			}
		}
		// Per arm: units in cells where the other arm is thin (or missing
		// by what may be chance) have almost no comparable units there. More
		// than MaxShareOutside of an arm in such cells withdraws the estimand
		// that targets that arm (ATT for the treated, ATC for the controls).
		{
			cols := strings.Join(c.Columns, " × ")
			var tThin, cThin int
			for _, r := range c.Rows {
				if r.Structural {
					continue // reported above
				}
				if r.Treated > 0 && r.Control < c.Options.Thin {
					tThin += r.Treated
				}
				if r.Control > 0 && r.Treated < c.Options.Thin {
					cThin += r.Control
				}
			}
			// mark sets mask for the units of arm t in the cells that pass in.
			mark := func(mask []bool, t float64, in func(r Cell) bool) {
				for i := 0; i < d.N && i < len(c.cellOf); i++ {
					if d.T[i] == t && in(c.Rows[c.cellOf[i]]) {
						mask[i] = true
					}
				}
			}
			if share := float64(tThin) / float64(d.Treated); share > o.MaxShareOutside {
				mark(pf.treatedAlone, 1, func(r Cell) bool { return !r.Structural && r.Control < c.Options.Thin })
				pf.withdraw(true, fmt.Sprintf("positivity cells (%s): %d treated units (%.1f%% of the treated) are in cells with fewer than %d controls: their comparisons rest on a handful of controls (threshold %.0f%% of the arm)",
					cols, tThin, 100*share, c.Options.Thin, 100*o.MaxShareOutside))
			}
			if share := float64(cThin) / float64(d.Control); share > o.MaxShareOutside {
				mark(pf.controlsAlone, 0, func(r Cell) bool { return !r.Structural && r.Treated < c.Options.Thin })
				pf.withdraw(false, fmt.Sprintf("positivity cells (%s): %d controls (%.1f%% of the controls) are in cells with fewer than %d treated units: their comparisons rest on a handful of treated units (threshold %.0f%% of the arm)",
					cols, cThin, 100*share, c.Options.Thin, 100*o.MaxShareOutside))
			}
		}
		// Thin cells and small cells lacking an arm by what may be chance:
		// limited when they hold more than MaxShareOutside of the units,
		// otherwise a note.
		sparse, sparseCells := 0, 0
		for _, r := range c.Rows {
			if r.Thin || (r.Empty && !r.Structural) {
				sparse += r.Treated + r.Control
				sparseCells++
			}
		}
		if sparseCells > 0 {
			share := float64(sparse) / float64(c.N)
			msg := fmt.Sprintf("positivity cells (%s): %d sparse cells (an arm with fewer than %d units, or missing in a cell small enough for chance) hold %d units (%.1f%%)",
				strings.Join(c.Columns, " × "), sparseCells, c.Options.Thin, sparse, 100*share)
			if share > o.MaxShareOutside {
				pf.limited = true
				pf.reasons = append(pf.reasons, msg)
			} else {
				pf.notes = append(pf.notes, msg)
			}
		}
	}
	if share := sup.ShareOutside(); share > o.MaxShareOutside {
		pf.limited = true
		pf.reasons = append(pf.reasons, fmt.Sprintf("%.1f%% of units lie outside the common-support band [%.3f, %.3f] (threshold %.0f%%)", 100*share, sup.Band.Lo, sup.Band.Hi, 100*o.MaxShareOutside))
	}
	// Treated units scored above every control (or controls below every
	// treated unit) have no comparable units in the other arm; a handful is
	// expected by chance at the tails, so only a share above MaxShareOutside
	// of the arm withdraws the ATT (or ATC).
	if !pf.noOverlap && (sup.TreatedRange.Hi > sup.ControlRange.Hi || sup.TreatedRange.Lo < sup.ControlRange.Lo) {
		if share := float64(sup.OutsideTreated) / float64(sup.Treated); share > o.MaxShareOutside {
			pf.treatedOnly, pf.limited = true, true
			msg := fmt.Sprintf("%.1f%% of the treated units (%d) have scores outside the controls' range [%.3f, %.3f]: no comparable controls (threshold %.0f%% of the arm)",
				100*share, sup.OutsideTreated, sup.ControlRange.Lo, sup.ControlRange.Hi, 100*o.MaxShareOutside)
			pf.treatedWhy = append(pf.treatedWhy, msg)
			if !pf.violated {
				pf.reasons = append(pf.reasons, msg)
			}
		}
	}
	if !pf.noOverlap && (sup.ControlRange.Lo < sup.TreatedRange.Lo || sup.ControlRange.Hi > sup.TreatedRange.Hi) {
		if share := float64(sup.OutsideControl) / float64(sup.Control); share > o.MaxShareOutside {
			pf.controlOnly, pf.limited = true, true
			msg := fmt.Sprintf("%.1f%% of the controls (%d) have scores outside the treated units' range [%.3f, %.3f]: no comparable treated units (threshold %.0f%% of the arm)",
				100*share, sup.OutsideControl, sup.TreatedRange.Lo, sup.TreatedRange.Hi, 100*o.MaxShareOutside)
			pf.controlWhy = append(pf.controlWhy, msg)
			if !pf.violated {
				pf.reasons = append(pf.reasons, msg)
			}
		}
	}
	var ext, tHigh, cLow int
	for i, e := range sc.E {
		if e < o.Extreme || e > 1-o.Extreme {
			ext++
		}
		if d.T[i] == 1 && e > 1-o.Extreme {
			tHigh++
		}
		if d.T[i] == 0 && e < o.Extreme {
			cLow++
		}
	}
	// Per arm: treated units with scores above 1 − Extreme have few
	// comparable controls, and those controls carry ATT weights e/(1 − e)
	// above (1 − Extreme)/Extreme; likewise controls below Extreme for the
	// ATC. More than MaxShareExtreme of an arm there withdraws that estimand.
	if share := float64(tHigh) / float64(d.Treated); share > o.MaxShareExtreme && !pf.noOverlap {
		for i, e := range sc.E {
			if d.T[i] == 1 && e > 1-o.Extreme {
				pf.treatedAlone[i] = true
			}
		}
		pf.withdraw(true, fmt.Sprintf("%.1f%% of the treated units (%d) have scores above %.2f: few comparable controls, each carrying an ATT weight above %.0f (threshold %.0f%% of the arm)",
			100*share, tHigh, 1-o.Extreme, (1-o.Extreme)/o.Extreme, 100*o.MaxShareExtreme))
	}
	if share := float64(cLow) / float64(d.Control); share > o.MaxShareExtreme && !pf.noOverlap {
		for i, e := range sc.E {
			if d.T[i] == 0 && e < o.Extreme {
				pf.controlsAlone[i] = true
			}
		}
		pf.withdraw(false, fmt.Sprintf("%.1f%% of the controls (%d) have scores below %.2f: few comparable treated units, each carrying an ATC weight above %.0f (threshold %.0f%% of the arm)",
			100*share, cLow, o.Extreme, (1-o.Extreme)/o.Extreme, 100*o.MaxShareExtreme))
	}
	if share := float64(ext) / float64(d.N); share > o.MaxShareExtreme {
		pf.limited = true
		pf.reasons = append(pf.reasons, fmt.Sprintf("%.1f%% of units have scores below %.2f or above %.2f (threshold %.0f%%)", 100*share, o.Extreme, 1-o.Extreme, 100*o.MaxShareExtreme))
	}
	return pf
}

// withdraw records a limitation that withdraws the estimand targeting the
// treated arm (ATT) or the control arm (ATC), with its reason.
func (pf *positivity) withdraw(treatedArm bool, msg string) {
	pf.limited = true
	if treatedArm {
		pf.treatedOnly = true
		pf.treatedWhy = append(pf.treatedWhy, msg)
	} else {
		pf.controlOnly = true
		pf.controlWhy = append(pf.controlWhy, msg)
	}
	pf.reasons = append(pf.reasons, msg)
}

// supports reports whether the findings leave the estimand supported, and
// why not. The ATE needs both arms everywhere (so it also needs what the ATT
// and ATC need); the ATO needs some overlap.
func (pf *positivity) supports(target Estimand) (bool, string) {
	switch target {
	case ATE:
		if pf.violated || pf.treatedOnly || pf.controlOnly {
			why := append(append(append([]string{}, pf.violationWhy...), pf.treatedWhy...), pf.controlWhy...)
			return false, strings.Join(dedupe(why), "; ")
		}
	case ATT:
		if pf.treatedOnly {
			return false, strings.Join(dedupe(pf.treatedWhy), "; ")
		}
	case ATC:
		if pf.controlOnly {
			return false, strings.Join(dedupe(pf.controlWhy), "; ")
		}
	case ATO:
		if pf.noOverlap {
			return false, "the arms' scores do not overlap at all: there is no overlap population"
		}
	}
	return true, ""
}

func dedupe(s []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, v := range s {
		if !seen[v] {
			seen[v] = true
			out = append(out, v)
		}
	}
	return out
}

// unsupported is the reason the data do not support the estimand ("" when
// they do), by the default verdict rules.
func (sc *Scores) unsupported(target Estimand, cells []*Cells) string {
	ok, why := sc.positivity(VerdictOptions{}, cells).supports(target)
	if ok {
		return ""
	}
	return why
}

// Remedy is one way to analyse data with positivity problems, with what it
// costs: the units it drops, who they are, and the effective sample sizes
// left.
type Remedy struct {
	// Action is "none", "target_att", "target_atc", "overlap_weights" or "trim".
	Action   string `json:"action"`
	Estimand string `json:"estimand"`
	Text     string `json:"text"`
	// Units removed from the analysis, per arm (trim only; a change of
	// target keeps every unit but describes fewer: see Unrepresented).
	DropsTreated int `json:"drops_treated"`
	DropsControl int `json:"drops_control"`
	// Unrepresented counts units in regions the new target population
	// leaves out (target_att: controls without comparable treated units).
	Unrepresented int `json:"unrepresented"`
	// Who compares the dropped or unrepresented units with the rest on the
	// design terms (up to 5, largest |SMD| first); WhoText says it in words.
	Who     []ProfileRow `json:"who"`
	WhoText string       `json:"who_text,omitempty"`
	// For trim: the α and the scores kept.
	Alpha Num       `json:"alpha,omitempty"`
	Keep  *Interval `json:"keep,omitempty"`
	// Kish effective sample sizes per arm under the remedy's weights.
	ESSTreated Num `json:"ess_treated"`
	ESSControl Num `json:"ess_control"`
}

// whoText describes in words how the masked units differ from the rest.
func whoText(rows []ProfileRow, what string) string {
	if len(rows) == 0 {
		return ""
	}
	var parts []string
	for k, r := range rows {
		if k == 3 || math.Abs(r.SMD) < 0.1 {
			break
		}
		parts = append(parts, fmt.Sprintf("%s (mean %s vs %s, SMD %+.2f)", r.Term, fmtG(r.MeanOutside), fmtG(r.MeanInside), r.SMD))
	}
	if len(parts) == 0 {
		return what + " resemble the other units on every term (all |SMD| < 0.1)"
	}
	return what + " differ from the other units most in " + strings.Join(parts, ", ")
}

func countMask(m []bool) int {
	k := 0
	for _, v := range m {
		if v {
			k++
		}
	}
	return k
}

func cleanProfile(rows []ProfileRow) []ProfileRow {
	out := topProfile(rows, 5)
	for i := range out {
		if Num(out[i].SMD).IsNull() {
			out[i].SMD = 0
		}
	}
	return out
}

// remedies lists the remedies for the findings, the recommended one first.
func (sc *Scores) remedies(pf *positivity, o VerdictOptions, adequate bool) []Remedy {
	d := sc.Design
	if adequate {
		r := Remedy{Action: "none", Estimand: "ATE", Text: "none needed for positivity; the ATE is estimable on these covariates (check balance after weighting)",
			ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN()), Who: []ProfileRow{}}
		if w := sc.Weights(ATE); w.Err() == nil {
			r.ESSTreated, r.ESSControl = Num(w.ESSTreated), Num(w.ESSControl)
		}
		return []Remedy{r}
	}
	var out []Remedy
	ateOK, _ := pf.supports(ATE)
	for _, t := range []Estimand{ATT, ATC} {
		ok, _ := pf.supports(t)
		if ateOK || !ok {
			continue
		}
		// For the ATT: every treated unit has comparable controls; the
		// controls in regions without treated units are left out.
		mask, target, arm, other := pf.controlsAlone, "treated unit", "controls", "treated units"
		action := "target_att"
		if t == ATC {
			mask, target, arm, other, action = pf.treatedAlone, "control", "treated units", "controls", "target_atc"
		}
		k := countMask(mask)
		r := Remedy{Action: action, Estimand: t.String(), Unrepresented: k, Who: []ProfileRow{},
			ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN())}
		r.Text = fmt.Sprintf("estimate the %s instead of the ATE: every %s has comparable %s; the %d %s in regions without %s are not described by it (the ATE would extrapolate there)",
			t, target, arm, k, arm, other)
		if k > 0 && k < d.N {
			r.Who = cleanProfile(profile(d, mask))
			r.WhoText = whoText(r.Who, fmt.Sprintf("the %d %s left out", k, arm))
		}
		if w := sc.Weights(t); w.Err() == nil {
			r.ESSTreated, r.ESSControl = Num(w.ESSTreated), Num(w.ESSControl)
		}
		out = append(out, r)
	}
	if ok, _ := pf.supports(ATO); ok {
		r := Remedy{Action: "overlap_weights", Estimand: "ATO", Who: []ProfileRow{}, ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN())}
		r.Text = "estimate the ATO with overlap weights (1 − e for treated, e for controls; Li, Morgan & Zaslavsky 2018): no unit is dropped, units without comparable units in the other arm get weights near 0, and the estimand becomes the overlap population"
		if w := sc.Weights(ATO); w.Err() == nil {
			r.ESSTreated, r.ESSControl = Num(w.ESSTreated), Num(w.ESSControl)
			r.Text += fmt.Sprintf(" (effective sample sizes: %.1f treated, %.1f control)", w.ESSTreated, w.ESSControl)
		}
		out = append(out, r)
	}
	// Trimming: the optimal α of Crump et al. (2009) when it trims, else the
	// rule of thumb α = Extreme.
	alpha, _ := crumpAlpha(sc.E)
	how := fmt.Sprintf("the optimal α = %.3f of Crump, Hotz, Imbens & Mitnik (2009)", alpha)
	if alpha == 0 || alpha >= 0.5 {
		alpha = o.Extreme
		how = fmt.Sprintf("α = %.2f (rule of thumb of Crump et al. 2009)", alpha)
	}
	drop := make([]bool, d.N)
	var dt, dc int
	for i, e := range sc.E {
		if e < alpha || e > 1-alpha {
			drop[i] = true
			if d.T[i] == 1 {
				dt++
			} else {
				dc++
			}
		}
	}
	if dt+dc > 0 && dt < d.Treated && dc < d.Control {
		keep := Interval{alpha, 1 - alpha}
		r := Remedy{Action: "trim", Estimand: "ATE", DropsTreated: dt, DropsControl: dc, Alpha: Num(alpha), Keep: &keep,
			Who: cleanProfile(profile(d, drop)), ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN())}
		r.Text = fmt.Sprintf("trim to scores in [%.3f, %.3f] by %s and estimate the ATE of the units kept: drops %d treated and %d controls; the estimand becomes the trimmed population",
			alpha, 1-alpha, how, dt, dc)
		r.WhoText = whoText(r.Who, fmt.Sprintf("the %d units dropped", dt+dc))
		var s1, q1, s0, q0 float64
		for i, e := range sc.E {
			if drop[i] {
				continue
			}
			w := rawWeight(ATE, d.T[i], e)
			if d.T[i] == 1 {
				s1, q1 = s1+w, q1+w*w
			} else {
				s0, q0 = s0+w, q0+w*w
			}
		}
		r.ESSTreated, r.ESSControl = Num(kish(s1, q1)), Num(kish(s0, q0))
		out = append(out, r)
	}
	if len(out) == 0 {
		out = append(out, Remedy{Action: "none", Estimand: "", Who: []ProfileRow{}, ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN()),
			Text: "no estimand is supported by these data on these covariates: the arms do not overlap; a comparison needs units that could have been in either arm"})
	}
	return out
}

// Verdict judges positivity from the scores and any positivity tables given.
// Rules (each threshold in VerdictOptions, with its source):
//   - violated: separation (treatment deterministic for a covariate level or
//     range), a cell with an empty arm that chance does not explain
//     (Cell.Structural: Bonferroni-bounded chance screen), or no common-support band at all;
//   - limited: a share of units outside the band above MaxShareOutside, a
//     share of extreme scores above MaxShareExtreme, sparse cells (thin,
//     or lacking an arm by what may be chance) holding more than
//     MaxShareOutside of the units (fewer: a note), or more than
//     MaxShareOutside of an arm scored outside the other arm's range;
//   - adequate otherwise.
//
// Supported estimands: the ATT when every treated region has controls (no
// treated-only cell, level or range, and at most MaxShareOutside of the
// treated scored outside the controls' range); the ATC symmetrically; the
// ATE only without violations and when both the ATT and the ATC are
// supported; the ATO (overlap weights, Li, Morgan & Zaslavsky 2018) always,
// unless the arms' scores do not overlap at all.
//
// Remedies lists what to do, the recommended one first (also in Remedy),
// each with its cost: a change of target (the ATT or ATC, when the ATE is
// not supported but one of them is) with the units it no longer describes;
// overlap weights with the effective sample sizes; trimming at the optimal
// α of Crump et al. (2009) with the units it drops per arm and how they
// differ from the units kept.
func (sc *Scores) Verdict(o VerdictOptions, cells ...*Cells) *Verdict {
	if err := sc.Err(); err != nil {
		return &Verdict{err: err}
	}
	for _, c := range cells {
		if err := c.Err(); err != nil {
			return &Verdict{err: err}
		}
		if err := c.sameRows(sc.Design); err != nil {
			return &Verdict{err: err}
		}
	}
	if err := o.validate(); err != nil {
		return &Verdict{err: err}
	}
	o = sc.verdictDefaults(o)
	pf := sc.positivity(o, cells)
	v := &Verdict{Options: o, TrimThreshold: o.Extreme, Reasons: pf.reasons, Notes: pf.notes, Supported: []string{}}
	d := sc.Design
	for i, e := range sc.E {
		if e < o.Extreme || e > 1-o.Extreme {
			if d.T[i] == 1 {
				v.TrimTreated++
			} else {
				v.TrimControl++
			}
		}
	}
	switch {
	case pf.violated:
		v.Status = Violated
	case pf.limited:
		v.Status = Limited
	default:
		v.Status = Adequate
	}
	for _, t := range []Estimand{ATE, ATT, ATC, ATO} {
		if ok, _ := pf.supports(t); ok {
			v.Supported = append(v.Supported, t.String())
		}
	}
	v.Remedies = sc.remedies(pf, o, v.Status == Adequate)
	v.Remedy = v.Remedies[0].Text
	return v
}

// String is the terminal view.
func (v *Verdict) String() string {
	if err := v.Err(); err != nil {
		return "verdict: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Positivity verdict: %s\n", strings.ToUpper(v.Status))
	for _, r := range v.Reasons {
		fmt.Fprintf(&b, "  - %s\n", r)
	}
	for _, r := range v.Notes {
		fmt.Fprintf(&b, "  note: %s\n", r)
	}
	sup := strings.Join(v.Supported, ", ")
	if sup == "" {
		sup = "none"
	}
	fmt.Fprintf(&b, "  estimands the data support: %s\n", sup)
	fmt.Fprintf(&b, "  remedy: %s\n", v.Remedy)
	for k, r := range v.Remedies {
		if k > 0 {
			fmt.Fprintf(&b, "  alternative: %s\n", r.Text)
		}
		if r.WhoText != "" {
			fmt.Fprintf(&b, "    who: %s\n", r.WhoText)
		}
	}
	fmt.Fprintf(&b, "  These diagnostics cannot verify unconfoundedness; estimates depend on the covariates measured.\n")
	return b.String()
}

// String is the terminal view of the propensity model.
func (sc *Scores) String() string {
	if err := sc.Err(); err != nil {
		return "scores: " + err.Error()
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
