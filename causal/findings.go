package causal

import (
	"fmt"
	"math"
	"strings"
)

// FindingCode names a rule of the verdict. The codes are a contract with
// pipelines (report JSON verdict.findings[].code and
// verdict.estimands.*.findings).
type FindingCode string

// Finding codes.
const (
	// FindingSeparation: treatment is deterministic on a covariate level or
	// range, and random assignment would make that unlikely (a violation).
	FindingSeparation FindingCode = "separation"
	// FindingSeparationChance: a level holds one arm only, as random
	// assignment with these arm sizes would often give (a note).
	FindingSeparationChance FindingCode = "separation_by_chance"
	// FindingCovariateTail: the units beyond every unit of the other arm on
	// a continuous covariate (above its largest or below its smallest value)
	// are more than random assignment gives (a violation: that range holds
	// one arm only).
	FindingCovariateTail FindingCode = "covariate_tail"
	// FindingNoOverlap: the arms' score ranges do not overlap (a violation).
	FindingNoOverlap FindingCode = "no_overlap"
	// FindingEmptyCells: positivity cells lacking an arm that chance does
	// not explain (a violation).
	FindingEmptyCells FindingCode = "empty_cells"
	// FindingEmptyCellsChance: cells lacking an arm as chance explains (a note).
	FindingEmptyCellsChance FindingCode = "empty_cells_by_chance"
	// FindingSparseCells: more units than chance gives sit in cells where
	// the other arm has fewer than CellOptions.Thin units (a caution).
	FindingSparseCells FindingCode = "sparse_cells"
	// FindingOutsideSupport: more units of an arm than chance gives have
	// scores beyond every score of the other arm: no comparable units there
	// (withdraws the estimands that need them).
	FindingOutsideSupport FindingCode = "outside_support"
	// FindingExtremeScores: more units than chance gives have scores beyond
	// the extreme bound, so the other arm's weights are large (a caution).
	FindingExtremeScores FindingCode = "extreme_scores"
	// FindingPrecision: the effective sample sizes, the largest weight share
	// and the variance inflation of an estimand's weights; a caution when
	// the inflation is large and beyond chance.
	FindingPrecision FindingCode = "precision"
	// FindingCalibrationTail: in the lowest or highest decile of the scores
	// the observed share treated differs from the mean score beyond chance
	// (CalibrationTest's exact binomial tail check): the scores that drive
	// the weights and the other rules are not trustworthy there; add terms
	// to the propensity model (a caution).
	FindingCalibrationTail FindingCode = "calibration_tail"
)

// FindingEffect is what a finding does to the estimands it lists.
type FindingEffect string

// Finding effects.
const (
	// Withdraws: the estimands listed are not supported.
	Withdraws FindingEffect = "withdraws"
	// Caution: the estimands listed are supported with caution.
	Caution FindingEffect = "caution"
	// Informs: figures or a note; no estimand changes status.
	Informs FindingEffect = "informs"
)

// Finding is the result of one rule of the verdict: its code, what it does
// to which estimands, the units it concerns and its numbers. Every view of
// the verdict (text, HTML, JSON, the report gate) is rendered from these.
type Finding struct {
	Code   FindingCode   `json:"code"`
	Effect FindingEffect `json:"effect"`
	// Violation marks a positivity violation in a covariate region
	// (separation, empty cells, no overlap): the overall status is violated.
	Violation bool     `json:"violation"`
	Estimands []string `json:"estimands"`
	// Units concerned, per arm.
	Treated int `json:"treated"`
	Control int `json:"control"`
	// Observed is the rule's statistic, Expected its mean under random
	// assignment with the same arm sizes, PValue the (family-wise adjusted)
	// chance of a value at least as large, by Method.
	Observed Num      `json:"observed"`
	Expected Num      `json:"expected_by_chance"`
	PValue   Num      `json:"p_value"`
	Method   string   `json:"method"`
	Columns  []string `json:"columns,omitempty"`
	Text     string   `json:"text"`

	mask []bool // the units concerned (design rows)
}

func (f Finding) affects(e Estimand) bool {
	for _, s := range f.Estimands {
		if s == e.String() {
			return true
		}
	}
	return false
}

// verdictRule is one rule of the verdict: stats registers statistics for
// the permutation null (may be nil); find returns the rule's findings. To
// add a rule, write the two functions and add an entry to verdictRules.
type verdictRule struct {
	stats func(j *judge)
	find  func(j *judge) []Finding
}

// verdictRules are the rules, in the order their findings are listed.
var verdictRules = []verdictRule{
	{nil, separationFindings},
	{nil, tailFindings},
	{nil, noOverlapFindings},
	{nil, emptyCellFindings},
	{sparseCellStats, sparseCellFindings},
	{supportStats, supportFindings},
	{extremeStats, extremeFindings},
	{precisionStats, precisionFindings},
	{nil, calibrationFindings},
}

const methodHyper = "exact hypergeometric chance of a one-arm group under random assignment with the same arm sizes, Bonferroni over the groups tested"
const methodPerm = "permutation of the treatment among the units (propensity refitted by a one-step estimator), family-wise minP adjustment (Westfall & Young 1993)"

// armEstimands are the estimands withdrawn (or cautioned) when units of the
// given arm lack comparable units of the other arm: the estimand targeting
// that arm and the ATE.
func armEstimands(treatedArm bool) []string {
	if treatedArm {
		return []string{"ATT", "ATE"}
	}
	return []string{"ATC", "ATE"}
}

// separationFindings screens each separation the propensity fit found: a
// covariate level (or binary value) holding m units of one arm is a
// violation when chanceMissing(m, n, n_a) is below SeparationAlpha/L for the L
// levels tested (Bonferroni), otherwise a note; complete separation by a
// continuous covariate is screened with chanceSeparated. Separation by a
// combination of covariates has no exact bound and counts as a violation.
func separationFindings(j *judge) []Finding {
	var out []Finding
	d := j.d
	levels := screenedGroups(d)
	for _, s := range j.sc.Separation {
		f := Finding{Code: FindingSeparation, Effect: Withdraws, Violation: true, Columns: nonEmpty(s.Column),
			Observed: Num(float64(s.Units)), Expected: Num(math.NaN()), PValue: Num(math.NaN()), Method: methodHyper, mask: s.mask}
		if f.mask == nil {
			f.mask = make([]bool, d.N)
			for i, e := range j.sc.E {
				f.mask[i] = e <= 1e-8 || e >= 1-1e-8
			}
		}
		for i, in := range f.mask {
			if in {
				if d.T[i] == 1 {
					f.Treated++
				} else {
					f.Control++
				}
			}
		}
		switch {
		case s.Kind == "complete":
			p := chanceSeparated(d.N, d.Treated)
			f.PValue = Num(p)
			f.Method = "exact chance that a continuous covariate separates the arms under random assignment, 2/C(n, n1)"
			f.Estimands = []string{"ATE", "ATT", "ATC", "ATO"}
			if p >= j.o.SeparationAlpha {
				f.Code, f.Effect, f.Violation, f.Estimands = FindingSeparationChance, Informs, false, []string{}
			}
		case s.Column == "" || s.mask == nil:
			f.Method = "no exact chance bound for separation by a combination of covariates: counted as a violation"
			f.Estimands = []string{"ATE", "ATT", "ATC"}
		default:
			missing := d.Treated
			if s.Arm == "treated" {
				missing = d.Control
			}
			p := chanceMissing(s.Units, d.N, missing)
			f.PValue = Num(math.Min(1, p*float64(levels)))
			f.Expected = Num(float64(s.Units) * p)
			f.Estimands = armEstimands(s.Arm == "treated")
			if p >= j.o.SeparationAlpha/float64(levels) {
				f.Code, f.Effect, f.Violation, f.Estimands = FindingSeparationChance, Informs, false, []string{}
			}
		}
		if f.Code == FindingSeparation {
			f.Text = "separation: " + s.Message
		} else {
			f.Text = fmt.Sprintf("%s; random assignment with these arm sizes would give this with probability %.2g (p = %.2g after Bonferroni over %d levels): not counted as a violation; their scores of 0 or 1 are left out of the score rules",
				strings.TrimSuffix(s.Message, " (positivity violated)"), float64(f.PValue)/float64(levels), float64(f.PValue), levels)
			for i, in := range f.mask {
				if in {
					j.pinned[i] = true
				}
			}
		}
		out = append(out, f)
	}
	return out
}

// screenedGroups is the number of groups the separation screen tests: the
// levels of categorical covariates, both values of binary ones and both
// tails of each continuous one (the Bonferroni count of SeparationAlpha).
func screenedGroups(d *Design) int {
	g := 0
	for _, c := range d.Covariates {
		if c.Kind == Categorical {
			g += len(c.Levels)
		} else if k := termIndex(d, c.Name); k >= 0 {
			g += 2
		}
	}
	return max(g, 1)
}

// tailFindings screens both tails of each continuous covariate: the r units
// above every value of the other arm (or below every one) form a one-arm
// group at the top (bottom) of the sorted values, which random assignment
// with the same arm sizes gives with probability chanceMissing(r, n, n_a)
// (the top r units are a random r-subset). Below SeparationAlpha/G for the G
// groups of the separation screen (Bonferroni) it is a violation for the
// estimands that need the missing arm there — when the r units are at least
// MinShare of their arm; fewer are a note (in a large sample a handful of
// units at the far end of a covariate that predicts treatment is beyond
// chance but changes no estimate).
func tailFindings(j *judge) []Finding {
	d := j.d
	var out []Finding
	groups := screenedGroups(d)
	for _, c := range d.Covariates {
		if c.Kind == Categorical {
			continue
		}
		k := termIndex(d, c.Name)
		if k < 0 || d.Terms[k].Binary {
			continue
		}
		lo1, hi1, lo0, hi0 := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
		for i := 0; i < d.N; i++ {
			v := d.X[i*d.P+k]
			if d.T[i] == 1 {
				lo1, hi1 = math.Min(lo1, v), math.Max(hi1, v)
			} else {
				lo0, hi0 = math.Min(lo0, v), math.Max(hi0, v)
			}
		}
		if hi1 < lo0 || hi0 < lo1 {
			continue // complete separation: the separation rule's
		}
		for _, top := range []bool{true, false} {
			var treatedArm bool
			var beyond func(v float64) bool
			switch {
			case top && hi1 > hi0:
				treatedArm, beyond = true, func(v float64) bool { return v > hi0 }
			case top && hi0 > hi1:
				treatedArm, beyond = false, func(v float64) bool { return v > hi1 }
			case !top && lo1 < lo0:
				treatedArm, beyond = true, func(v float64) bool { return v < lo0 }
			case !top && lo0 < lo1:
				treatedArm, beyond = false, func(v float64) bool { return v < lo1 }
			default:
				continue
			}
			mask := make([]bool, d.N)
			r := 0
			for i := 0; i < d.N; i++ {
				if beyond(d.X[i*d.P+k]) {
					mask[i] = true
					r++
				}
			}
			missing := d.Control
			if !treatedArm {
				missing = d.Treated
			}
			p := chanceMissing(r, d.N, missing)
			if p >= j.o.SeparationAlpha/float64(groups) {
				continue
			}
			arm, other, edge := "treated units", "control", "largest"
			if !treatedArm {
				arm, other = "controls", "treated"
			}
			if !top {
				edge = "smallest"
			}
			f := Finding{Code: FindingCovariateTail, Effect: Withdraws, Violation: true, Estimands: armEstimands(treatedArm), Columns: []string{c.Name},
				Observed: Num(float64(r)), Expected: Num(math.NaN()), PValue: Num(math.Min(1, p*float64(groups))), Method: methodHyper, mask: mask}
			if treatedArm {
				f.Treated = r
			} else {
				f.Control = r
			}
			f.Text = fmt.Sprintf("%s: the %d %s beyond the %s %s value form a one-arm range that random assignment with these arm sizes gives with probability %.2g (p = %.2g after Bonferroni over %d groups): treatment is deterministic there",
				c.Name, r, arm, edge, other, p, float64(f.PValue), groups)
			if armN := d.Treated + d.Control - missing; float64(r) < j.o.MinShare*float64(armN) {
				f.Effect, f.Violation = Informs, false
				f.Text += fmt.Sprintf(", but they are %.2f%% of their arm, below %.0f%%: too few units to change the verdict", 100*float64(r)/float64(armN), 100*j.o.MinShare)
			}
			out = append(out, f)
		}
	}
	return out
}

func nonEmpty(s string) []string {
	if s == "" {
		return nil
	}
	return []string{s}
}

// noOverlapFindings: the arms' scores (units not pinned by separation) do
// not overlap at all; only the overlap population could be named, and there
// is none.
func noOverlapFindings(j *judge) []Finding {
	if !j.band.empty() {
		return nil
	}
	f := Finding{Code: FindingNoOverlap, Effect: Withdraws, Violation: true, Estimands: []string{"ATE", "ATT", "ATC", "ATO"},
		Treated: j.d.Treated, Control: j.d.Control, Observed: Num(0), Expected: Num(math.NaN()), PValue: Num(math.NaN()),
		Method: "score ranges of the arms", Text: "no common support: the score ranges of the arms do not overlap"}
	return []Finding{f}
}

// emptyCellFindings reads each positivity table's chance screen
// (Cell.Structural, see buildCells): cells lacking an arm that chance does
// not explain are a violation for the estimands that need the missing arm;
// the others are a note.
func emptyCellFindings(j *judge) []Finding {
	var out []Finding
	d := j.d
	for _, c := range j.cells {
		cols := strings.Join(c.Columns, " × ")
		var t1, c0, ct, cc, nt, nc, chanceCells int
		for _, r := range c.Rows {
			if !r.Empty {
				continue
			}
			if r.Structural {
				if r.Treated > 0 {
					t1 += r.Treated
					ct++
				} else {
					c0 += r.Control
					cc++
				}
			} else {
				chanceCells++
				nt += r.Treated
				nc += r.Control
			}
		}
		if ct+cc > 0 {
			f := Finding{Code: FindingEmptyCells, Effect: Withdraws, Violation: true, Columns: c.Columns, Treated: t1, Control: c0,
				Observed: Num(float64(ct + cc)), Expected: Num(math.NaN()), PValue: Num(math.NaN()), Method: methodHyper, mask: make([]bool, d.N)}
			for i := 0; i < d.N && i < len(c.cellOf); i++ {
				f.mask[i] = c.Rows[c.cellOf[i]].Structural
			}
			if t1 > 0 {
				f.Estimands = append(f.Estimands, "ATT")
			}
			if c0 > 0 {
				f.Estimands = append(f.Estimands, "ATC")
			}
			f.Estimands = append(f.Estimands, "ATE")
			var parts []string
			if ct > 0 {
				parts = append(parts, fmt.Sprintf("%d cells hold %s and no controls", ct, plural(t1, "1 treated unit", fmt.Sprintf("%d treated units", t1))))
			}
			if cc > 0 {
				parts = append(parts, fmt.Sprintf("%d cells hold %s and no treated units", cc, plural(c0, "1 control", fmt.Sprintf("%d controls", c0))))
			}
			f.Text = fmt.Sprintf("positivity cells (%s): %s; random assignment with these arm sizes would leave an arm empty in a cell that large with probability below %.2g per cell (Bonferroni over %d cells)",
				cols, strings.Join(parts, "; "), c.ChanceThreshold, len(c.Rows))
			out = append(out, f)
		}
		if chanceCells > 0 {
			out = append(out, Finding{Code: FindingEmptyCellsChance, Effect: Informs, Estimands: []string{}, Columns: c.Columns, Treated: nt, Control: nc,
				Observed: Num(float64(chanceCells)), Expected: Num(math.NaN()), PValue: Num(math.NaN()), Method: methodHyper,
				Text: fmt.Sprintf("positivity cells (%s): %d small cells lack an arm (%d treated, %d controls in them), as random assignment with these arm sizes often gives at their size: not a violation",
					cols, chanceCells, nt, nc)})
		}
	}
	return out
}

// sparseCellStats registers, per table, the treated units in cells with
// fewer than Thin controls and the controls in cells with fewer than Thin
// treated units (cells lacking an arm beyond chance left out: they are
// violations already).
func sparseCellStats(j *judge) {
	for ti, c := range j.cells {
		code := make([]int32, len(j.free))
		for r, i := range j.free {
			code[r] = c.cellOf[i]
		}
		k := len(c.Rows)
		base1 := make([]int, k)
		base0 := make([]int, k)
		for i := 0; i < j.d.N && i < len(c.cellOf); i++ {
			if j.pinned[i] {
				if j.d.T[i] == 1 {
					base1[c.cellOf[i]]++
				} else {
					base0[c.cellOf[i]]++
				}
			}
		}
		thin := c.Options.Thin
		skip := make([]bool, k)
		for r, row := range c.Rows {
			skip[r] = row.Structural
		}
		count := func(t []float64, treatedArm bool) float64 {
			n1 := append([]int(nil), base1...)
			n0 := append([]int(nil), base0...)
			for r, v := range t {
				if v == 1 {
					n1[code[r]]++
				} else {
					n0[code[r]]++
				}
			}
			var s int
			for r := range n1 {
				if skip[r] {
					continue
				}
				if treatedArm && n1[r] > 0 && n0[r] < thin {
					s += n1[r]
				}
				if !treatedArm && n0[r] > 0 && n1[r] < thin {
					s += n0[r]
				}
			}
			return float64(s)
		}
		j.addStat(fmt.Sprintf("sparse_treated/%d", ti), func(t, _ []float64, _ *scoreSummary) float64 { return count(t, true) })
		j.addStat(fmt.Sprintf("sparse_control/%d", ti), func(t, _ []float64, _ *scoreSummary) float64 { return count(t, false) })
	}
}

func sparseCellFindings(j *judge) []Finding {
	var out []Finding
	for ti, c := range j.cells {
		cols := strings.Join(c.Columns, " × ")
		for _, treatedArm := range []bool{true, false} {
			name, arm, other, armN := "sparse_treated", "treated units", "controls", j.d.Treated
			if !treatedArm {
				name, arm, other, armN = "sparse_control", "controls", "treated units", j.d.Control
			}
			k, ok := j.statIndex[fmt.Sprintf("%s/%d", name, ti)]
			if !ok {
				continue
			}
			obs, exp, p := j.perm.observed[k], j.perm.mean[k], j.perm.adjP[k]
			if obs == 0 {
				continue
			}
			f := Finding{Code: FindingSparseCells, Columns: c.Columns, Observed: Num(obs), Expected: Num(exp), PValue: Num(p), Method: methodPerm,
				mask: make([]bool, j.d.N)}
			for i := 0; i < j.d.N && i < len(c.cellOf); i++ {
				r := c.Rows[c.cellOf[i]]
				if r.Structural {
					continue
				}
				if treatedArm && j.d.T[i] == 1 && r.Control < c.Options.Thin {
					f.mask[i] = true
					f.Treated++
				}
				if !treatedArm && j.d.T[i] == 0 && r.Treated < c.Options.Thin {
					f.mask[i] = true
					f.Control++
				}
			}
			what := fmt.Sprintf("positivity cells (%s): %.0f %s (%.1f%% of the arm) are in cells with fewer than %d %s; random assignment with these arm sizes gives %.1f on average (p = %.3g, %s)",
				cols, obs, arm, 100*obs/float64(armN), c.Options.Thin, other, exp, p, "family-wise")
			j.settle(&f, k, armN, treatedArm, Caution, what, "their comparisons rest on a handful of "+other)
			out = append(out, f)
		}
	}
	return out
}

// supportStats registers the units of each arm scored beyond every score of
// the other arm (above its maximum or below its minimum).
func supportStats(j *judge) {
	j.addStat("outside_treated", func(_, _ []float64, s *scoreSummary) float64 { return s.out1 })
	j.addStat("outside_control", func(_, _ []float64, s *scoreSummary) float64 { return s.out0 })
}

func supportFindings(j *judge) []Finding {
	if j.band.empty() {
		return nil
	}
	var out []Finding
	for _, treatedArm := range []bool{true, false} {
		name, arm, other, armN := "outside_treated", "treated units", "controls", j.d.Treated
		rng := j.band.control
		if !treatedArm {
			name, arm, other, armN = "outside_control", "controls", "treated units", j.d.Control
			rng = j.band.treated
		}
		k := j.statIndex[name]
		obs, exp, p := j.perm.observed[k], j.perm.mean[k], j.perm.adjP[k]
		if obs == 0 {
			continue
		}
		f := Finding{Code: FindingOutsideSupport, Observed: Num(obs), Expected: Num(exp), PValue: Num(p), Method: methodPerm, mask: make([]bool, j.d.N)}
		for _, i := range j.free {
			want := 0.0
			if treatedArm {
				want = 1
			}
			if j.d.T[i] == want && (j.e[i] < rng.Lo || j.e[i] > rng.Hi) {
				f.mask[i] = true
				if treatedArm {
					f.Treated++
				} else {
					f.Control++
				}
			}
		}
		what := fmt.Sprintf("%.0f %s (%.1f%% of the arm) have scores outside the %s' range [%.3f, %.3f]; random assignment with these arm sizes gives %.1f on average (p = %.3g, family-wise)",
			obs, arm, 100*obs/float64(armN), other, rng.Lo, rng.Hi, exp, p)
		j.settle(&f, k, armN, treatedArm, Withdraws, what, "they have no comparable "+other)
		out = append(out, f)
	}
	return out
}

// extremeStats registers the treated units scored above 1 − Extreme (their
// controls carry ATT weights above (1 − Extreme)/Extreme) and the controls
// scored below Extreme.
func extremeStats(j *judge) {
	j.addStat("extreme_treated", func(_, _ []float64, s *scoreSummary) float64 { return s.ext1 })
	j.addStat("extreme_control", func(_, _ []float64, s *scoreSummary) float64 { return s.ext0 })
}

func extremeFindings(j *judge) []Finding {
	var out []Finding
	eps := j.o.Extreme
	for _, treatedArm := range []bool{true, false} {
		name, arm, armN := "extreme_treated", "treated units", j.d.Treated
		bound := fmt.Sprintf("above %.2f", 1-eps)
		weight := "ATT weight"
		if !treatedArm {
			name, arm, armN, bound, weight = "extreme_control", "controls", j.d.Control, fmt.Sprintf("below %.2f", eps), "ATC weight"
		}
		k := j.statIndex[name]
		obs, exp, p := j.perm.observed[k], j.perm.mean[k], j.perm.adjP[k]
		if obs == 0 || !j.beyond(k, armN) {
			continue
		}
		f := Finding{Code: FindingExtremeScores, Effect: Caution, Estimands: armEstimands(treatedArm), Observed: Num(obs), Expected: Num(exp), PValue: Num(p),
			Method: methodPerm, mask: make([]bool, j.d.N)}
		for _, i := range j.free {
			if treatedArm && j.d.T[i] == 1 && j.e[i] > 1-eps {
				f.mask[i] = true
				f.Treated++
			}
			if !treatedArm && j.d.T[i] == 0 && j.e[i] < eps {
				f.mask[i] = true
				f.Control++
			}
		}
		f.Text = fmt.Sprintf("%.0f %s (%.1f%% of the arm) have scores %s; random assignment with these arm sizes gives %.1f on average (p = %.3g, family-wise): few comparable units in the other arm, each carrying an %s above %.0f",
			obs, arm, 100*obs/float64(armN), bound, exp, p, weight, (1-eps)/eps)
		out = append(out, f)
	}
	return out
}

// precision holds the precision figures of one estimand's weights.
type precision struct {
	essT, essC, largest, vif float64
}

// precisionOf computes the Kish (1965) effective sample size of each arm
// under the estimand's weights, the largest weight's share of its arm's
// total, and the variance inflation against a randomised design with the
// same arm sizes, (1/ESS₁ + 1/ESS₀)/(1/n₁ + 1/n₀) — the Kish design effect
// of a difference of weighted means under equal variances.
func precisionOf(target Estimand, t, e []float64) precision {
	var sum scoreSummary
	summarise(t, e, 0, &sum)
	return sum.precision(target)
}

func precisionStats(j *judge) {
	for _, est := range []Estimand{ATE, ATT, ATC, ATO} {
		est := est
		j.addStat("vif_"+est.String(), func(_, _ []float64, s *scoreSummary) float64 { return s.precision(est).vif })
	}
}

// precisionFindings gives each estimand its precision figures (always, as
// an informing finding), and a caution when the variance inflation exceeds
// MaxInflation and what random assignment gives.
func precisionFindings(j *judge) []Finding {
	var out []Finding
	t := make([]float64, len(j.free))
	e := make([]float64, len(j.free))
	for r, i := range j.free {
		t[r], e[r] = j.d.T[i], j.e[i]
	}
	for _, est := range []Estimand{ATE, ATT, ATC, ATO} {
		pr := precisionOf(est, t, e)
		j.prec[est] = pr
		k := j.statIndex["vif_"+est.String()]
		f := Finding{Code: FindingPrecision, Effect: Informs, Estimands: []string{est.String()}, Treated: j.d.Treated, Control: j.d.Control,
			Observed: Num(pr.vif), Expected: Num(j.perm.mean[k]), PValue: Num(j.perm.adjP[k]), Method: methodPerm}
		f.Text = fmt.Sprintf("%s weights: effective sample sizes %.1f treated and %.1f control; the largest weight carries %.1f%% of its arm; variance %.2f× that of a randomised design of the same size (random assignment gives %.2f× on average, p = %.3g)",
			est, pr.essT, pr.essC, 100*pr.largest, pr.vif, j.perm.mean[k], j.perm.adjP[k])
		if pr.vif >= j.o.MaxInflation && j.perm.adjP[k] <= j.o.Alpha {
			f.Effect = Caution
			f.Text += fmt.Sprintf(": precision is low (threshold %.1f×)", j.o.MaxInflation)
		}
		out = append(out, f)
	}
	return out
}

// settle gives a permutation-calibrated finding its effect and text: beyond
// chance (judge.beyond) it has effect on the estimands of the arm and says
// consequence; otherwise it informs and says why it changes nothing.
func (j *judge) settle(f *Finding, k, armN int, treatedArm bool, effect FindingEffect, what, consequence string) {
	if j.beyond(k, armN) {
		f.Effect, f.Estimands = effect, armEstimands(treatedArm)
		f.Text = what + ": " + consequence
		return
	}
	f.Effect, f.Estimands = Informs, []string{}
	f.Text = what + ": " + j.withinChance(k)
}

// withinChance says why a permutation statistic that fired no rule did not:
// chance explains it, or the excess is too small to matter.
func (j *judge) withinChance(k int) string {
	if j.perm.adjP[k] > j.o.Alpha {
		return "as chance gives"
	}
	return fmt.Sprintf("more than chance gives, but the excess is below %.0f%% of the arm: too few units to change the verdict", 100*j.o.MinShare)
}

// calibrationFindings turns the tail check of Scores.CalibrationTest (exact
// binomial test of the treated count in the lowest and highest score decile
// against the decile's mean score, at CalibrationAlpha/2 per tail) into
// cautions. Miscalibration in the lowest decile misstates the large weights
// 1/e and (1−e)/e of the treated units there, which the ATE and the ATC use;
// in the highest decile the weights of the controls, which the ATE and the
// ATT use. A trimmed population is judged by the scores that defined it, not
// by a refit, so the check applies to fitted scores only.
func calibrationFindings(j *judge) []Finding {
	if j.sc.defE != nil {
		return nil
	}
	var out []Finding
	for _, t := range j.sc.CalibrationTest().TailMiscalibrated() {
		f := Finding{Code: FindingCalibrationTail, Effect: Caution, Estimands: armEstimands(t.Decile == "highest"),
			Observed: Num(t.Observed), Expected: Num(t.Expected), PValue: Num(t.P),
			Method: "two-sided exact binomial test of the treated count in the decile against its mean score (as R's binom.test computes it), Bonferroni over the two tails"}
		f.Text = fmt.Sprintf("in the %s decile of the scores %d of %d units are treated where the scores expect %.1f (mean score %.3f, p = %.3g): the scores that drive the weights and this verdict are not trustworthy there; add terms to the propensity model (squares, products, splines of the covariates that differ most)",
			t.Decile, t.Observed, t.N, t.Expected, t.MeanScore, t.P)
		out = append(out, f)
	}
	return out
}
