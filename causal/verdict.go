package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"sync"
)

// VerdictStatus is the overall positivity status, derived from the
// estimands' statuses and the findings.
type VerdictStatus string

// Overall statuses.
const (
	// Adequate: every estimand is supported.
	Adequate VerdictStatus = "adequate"
	// Limited: some estimand is not supported, or supported with caution,
	// without a violation in a covariate region.
	Limited VerdictStatus = "limited"
	// Violated: separation, empty cells that chance does not explain, or no
	// overlap at all.
	Violated VerdictStatus = "violated"
)

// EstimandStatus is the verdict for one estimand.
type EstimandStatus string

// Estimand statuses.
const (
	// Supported: the data identify the estimand and no rule cautions.
	Supported EstimandStatus = "supported"
	// SupportedWithCaution: identified, but precision rules fired (extreme
	// scores, sparse cells or variance inflation beyond chance).
	SupportedWithCaution EstimandStatus = "supported_with_caution"
	// NotSupported: data in an arm the estimand needs are missing; an
	// estimate would extrapolate.
	NotSupported EstimandStatus = "not_supported"
)

// VerdictOptions tune the verdict. Zero values take the defaults.
type VerdictOptions struct {
	// Target is the estimand the remedies aim at (default ATE).
	Target Estimand
	// Alpha is the family-wise error rate of the permutation-calibrated
	// rules (sparse cells, scores outside the other arm's range, extreme
	// scores, variance inflation) under random assignment. Default 0.025.
	// With SeparationAlpha and each table's CellOptions.Alpha (0.01 each by
	// default) the verdict on a randomised design with one table raises any
	// alarm with probability at most 0.045 (Bonferroni over the screens).
	Alpha float64
	// SeparationAlpha bounds the chance that the separation screen calls a
	// level of a randomised design separated (default 0.01).
	SeparationAlpha float64
	// Extreme: scores below Extreme or above 1 − Extreme count as extreme.
	// Default 0.1, the trimming rule of thumb of Crump, Hotz, Imbens &
	// Mitnik (2009); for scores refitted after symmetric trimming at α, α.
	Extreme float64
	// MinShare: a permutation-calibrated rule fires only when the units in
	// excess of chance are at least this share of the arm (and at least one
	// unit); the covariate-tail rule only when its one-arm range holds at
	// least this share of its arm. Default 0.01 (common practice, no source).
	MinShare float64
	// MaxInflation: variance inflation (against a randomised design of the
	// same size) at which precision becomes a caution, when beyond chance.
	// Default 2, an effective sample size halved (common practice, no source).
	MaxInflation float64
	// Permutations of the treatment for the chance calibration and their
	// seed (default 1). Default 199, or 99 when the design has more than
	// largePermDesign entries (rows × covariate columns), where each refit
	// costs. The smallest adjusted p-value is 1/(B + 1); with the single-step
	// minP adjustment one permutation that beats the observed data in any
	// statistic of the family adds 1/(B + 1) to every adjusted p-value, so
	// at B = 99 two such permutations out of 99 lift a finding that beats
	// them all in its own statistic above the default Alpha; at B = 199 it
	// takes four.
	Permutations int
	Seed         uint64
}

// largePermDesign is the design size (rows × covariate columns) above
// which the verdict's permutation null takes 99 permutations instead of 199.
const largePermDesign = 4_000_000

// validate rejects thresholds that cannot mean anything. Zero means the
// default.
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
	for _, c := range []struct {
		name string
		v    float64
		hi   float64
		open bool
	}{{"Alpha", o.Alpha, 1, true}, {"SeparationAlpha", o.SeparationAlpha, 1, true}, {"Extreme", o.Extreme, 0.5, true},
		{"MinShare", o.MinShare, 1, false}, {"MaxInflation", o.MaxInflation, math.MaxFloat64, false}} {
		if err := check(c.name, c.v, c.hi, c.open); err != nil {
			return err
		}
	}
	if o.Permutations < 0 {
		return fmt.Errorf("verdict options: Permutations = %d must be ≥ 0 (0 means the default)", o.Permutations)
	}
	if o.Target != 0 && !o.Target.valid() {
		return errors.New("verdict options: Target: use ATE, ATT, ATC or ATO")
	}
	return nil
}

// verdictDefaults fills in the defaults. For scores refitted on the units
// kept by symmetric trimming at α, the default Extreme is that α: the user
// has chosen how extreme a score may be.
func (sc *Scores) verdictDefaults(o VerdictOptions) VerdictOptions {
	if o.Extreme == 0 && sc.trimAlpha > 0 {
		o.Extreme = sc.trimAlpha
	}
	if o.Target == 0 {
		o.Target = ATE
	}
	if o.Alpha == 0 {
		o.Alpha = 0.025
	}
	if o.SeparationAlpha == 0 {
		o.SeparationAlpha = 0.01
	}
	if o.Extreme == 0 {
		o.Extreme = 0.1
	}
	if o.MinShare == 0 {
		o.MinShare = 0.01
	}
	if o.MaxInflation == 0 {
		o.MaxInflation = 2
	}
	if o.Permutations == 0 {
		o.Permutations = 199
		if d := sc.Design; d != nil && d.N*(d.P-1) > largePermDesign {
			o.Permutations = 99
		}
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	return o
}

// EstimandVerdict is the verdict for one estimand: its status, the codes
// of the findings behind it, and its precision figures (Kish effective
// sample sizes, the largest weight's share of its arm, the variance
// inflation against a randomised design with the same arm sizes).
type EstimandVerdict struct {
	Status             EstimandStatus `json:"status"`
	Findings           []FindingCode  `json:"findings"`
	ESSTreated         Num            `json:"ess_treated"`
	ESSControl         Num            `json:"ess_control"`
	LargestWeightShare Num            `json:"largest_weight_share"`
	VarianceInflation  Num            `json:"variance_inflation"`
}

// Verdict is the positivity judgement: per estimand (ATE, ATT, ATC, ATO) a
// status with its findings and precision figures; the findings themselves
// (each rule's code, the estimands it affects, the units it concerns, its
// numbers); an overall status derived from them; and remedies, each
// applied and re-judged before it is offered, with its cost.
type Verdict struct {
	Status VerdictStatus `json:"status"`
	// Target is the estimand the remedies aim at.
	Target    string                      `json:"target"`
	Estimands map[string]*EstimandVerdict `json:"estimands"`
	Findings  []Finding                   `json:"findings"`
	// Reasons are the texts of the findings that withdraw or caution.
	Reasons []string `json:"reasons"`
	// Supported lists the estimands not withdrawn (supported, with or
	// without caution).
	Supported []string `json:"supported_estimands"`
	Remedy    string   `json:"remedy"`
	// Notes are the texts of the informing findings (chance-explained
	// one-arm levels and cells, tails within chance) and of remedies tried
	// that would not clear the target.
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

// MarshalJSON writes the verdict, or {"status": "failed", "error": "..."}
// when there is none.
func (v *Verdict) MarshalJSON() ([]byte, error) {
	if err := v.Err(); err != nil {
		return failedJSON(err)
	}
	type plain Verdict
	return json.Marshal((*plain)(v))
}

// StatusOf is the status of the estimand ("" for an estimand the verdict
// does not judge, or a failed verdict).
func (v *Verdict) StatusOf(e Estimand) EstimandStatus {
	if v.Err() != nil || v.Estimands[e.String()] == nil {
		return ""
	}
	return v.Estimands[e.String()].Status
}

// Grade is the verdict for one estimand on the overall scale, for gates:
// adequate when it is supported, violated when a violation withdraws it,
// limited otherwise ("" for a failed verdict).
func (v *Verdict) Grade(e Estimand) VerdictStatus {
	switch v.StatusOf(e) {
	case "":
		return ""
	case Supported:
		return Adequate
	case NotSupported:
		for _, f := range v.Findings {
			if f.Violation && f.Effect == Withdraws && f.affects(e) {
				return Violated
			}
		}
	}
	return Limited
}

// judgement is the outcome of the rules on one set of scores and tables.
type judgement struct {
	findings []Finding
	status   map[Estimand]EstimandStatus
	prec     map[Estimand]precision
	o        VerdictOptions
}

type judgeCache struct {
	mu sync.Mutex
	m  map[string]*judgement
}

var judgeCacheInit sync.Mutex

// judgement runs the rules (cached per options and tables: the effects ask
// for it once per estimator).
func (sc *Scores) judgement(o VerdictOptions, cells []*Cells) *judgement {
	o = sc.verdictDefaults(o)
	key := o
	key.Target = 0
	k := fmt.Sprintf("%v", key)
	for _, c := range cells {
		k += fmt.Sprintf("|%p", c)
	}
	judgeCacheInit.Lock()
	if sc.judged == nil {
		sc.judged = &judgeCache{m: map[string]*judgement{}}
	}
	cache := sc.judged
	judgeCacheInit.Unlock()
	cache.mu.Lock()
	defer cache.mu.Unlock()
	if j := cache.m[k]; j != nil {
		return j
	}
	j := newJudge(sc, o, cells).run()
	cache.m[k] = j
	return j
}

// judgedScores are the scores the verdict judges: for a trimmed population
// the original scores of the kept units, else the fitted scores.
func (sc *Scores) judgedScores() []float64 {
	if sc.defE != nil {
		return sc.defE
	}
	return sc.E
}

type scoreBand struct{ treated, control Interval }

func (b scoreBand) empty() bool {
	return math.Max(b.treated.Lo, b.control.Lo) > math.Min(b.treated.Hi, b.control.Hi)
}

// judge carries what the rules read: the design, the judged scores, the
// tables, the units not pinned at 0 or 1 by separation (free), the score
// ranges of the free units by arm, and the permutation null.
type judge struct {
	sc        *Scores
	d         *Design
	e         []float64
	cells     []*Cells
	o         VerdictOptions
	pinned    []bool
	free      []int
	band      scoreBand
	stats     []permStat
	statIndex map[string]int
	perm      *permResult
	prec      map[Estimand]precision
}

func newJudge(sc *Scores, o VerdictOptions, cells []*Cells) *judge {
	d := sc.Design
	j := &judge{sc: sc, d: d, e: sc.judgedScores(), cells: cells, o: o, pinned: make([]bool, d.N), statIndex: map[string]int{}, prec: map[Estimand]precision{}}
	j.band = scoreBand{Interval{math.Inf(1), math.Inf(-1)}, Interval{math.Inf(1), math.Inf(-1)}}
	for i, e := range j.e {
		if e == 0 || e == 1 {
			j.pinned[i] = true
			continue
		}
		j.free = append(j.free, i)
		r := &j.band.control
		if d.T[i] == 1 {
			r = &j.band.treated
		}
		r.Lo, r.Hi = math.Min(r.Lo, e), math.Max(r.Hi, e)
	}
	return j
}

func (j *judge) addStat(name string, fn func(t, e []float64, sum *scoreSummary) float64) {
	j.statIndex[name] = len(j.stats)
	j.stats = append(j.stats, permStat{name, fn})
}

// beyond reports whether permutation statistic k is beyond chance
// (family-wise adjusted p ≤ Alpha) and material (its excess over the mean
// under random assignment is at least MinShare of an arm of armN units and
// at least one unit).
func (j *judge) beyond(k, armN int) bool {
	excess := j.perm.observed[k] - j.perm.mean[k]
	return j.perm.adjP[k] <= j.o.Alpha && excess >= math.Max(1, j.o.MinShare*float64(armN))
}

func (j *judge) run() *judgement {
	for _, r := range verdictRules {
		if r.stats != nil {
			r.stats(j)
		}
	}
	eFree := make([]float64, len(j.free))
	for r, i := range j.free {
		eFree[r] = j.e[i]
	}
	j.perm = permutationNull(j.d, j.free, eFree, j.stats, j.o.Permutations, j.o.Seed, j.o.Extreme)
	out := &judgement{status: map[Estimand]EstimandStatus{}, o: j.o}
	for _, r := range verdictRules {
		out.findings = append(out.findings, r.find(j)...)
	}
	out.prec = j.prec
	for _, e := range []Estimand{ATE, ATT, ATC, ATO} {
		st := Supported
		for _, f := range out.findings {
			if !f.affects(e) {
				continue
			}
			if f.Effect == Withdraws {
				st = NotSupported
			} else if f.Effect == Caution && st == Supported {
				st = SupportedWithCaution
			}
		}
		out.status[e] = st
	}
	return out
}

// why is the reason the estimand is withdrawn ("" when it is not).
func (jd *judgement) why(e Estimand) string {
	var why []string
	for _, f := range jd.findings {
		if f.Effect == Withdraws && f.affects(e) {
			why = append(why, f.Text)
		}
	}
	return strings.Join(dedupe(why), "; ")
}

func (jd *judgement) codes(e Estimand, effects ...FindingEffect) []string {
	var out []string
	for _, f := range jd.findings {
		if !f.affects(e) {
			continue
		}
		for _, ef := range effects {
			if f.Effect == ef {
				out = append(out, string(f.Code))
			}
		}
	}
	return dedupe(out)
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
	jd := sc.judgement(VerdictOptions{}, cells)
	if jd.status[target] != NotSupported {
		return ""
	}
	return jd.why(target)
}

// Remedy is one way to analyse data with positivity problems, applied and
// re-judged before it is offered, with what it costs: the units it drops,
// who they are, and the effective sample sizes left.
type Remedy struct {
	// Action is "none", "target_att", "target_atc", "overlap_weights",
	// "trim", "match" (nearest-neighbour matching within a caliper) or
	// "subclassify" (Strata.Remedy; not tried by the verdict).
	Action   string `json:"action"`
	Estimand string `json:"estimand"`
	// Status is the estimand's status after the remedy, by the same rules.
	Status EstimandStatus `json:"status"`
	Text   string         `json:"text"`
	// Units removed from the analysis, per arm (trim only; a change of
	// target keeps every unit but describes fewer: see Unrepresented).
	DropsTreated int `json:"drops_treated"`
	DropsControl int `json:"drops_control"`
	// Unrepresented counts units the new target population leaves out that
	// the findings against the old target concern.
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
	for _, r := range rows {
		if len(parts) == 3 {
			break
		}
		switch {
		case math.Abs(r.SMD) >= 0.1:
			parts = append(parts, fmt.Sprintf("%s (mean %s vs %s, SMD %+.2f)", r.Term, fmtG(r.MeanOutside), fmtG(r.MeanInside), r.SMD))
		case r.SMD == 0 && r.MeanOutside != r.MeanInside:
			// No SMD (a term constant in both groups): the means say it.
			parts = append(parts, fmt.Sprintf("%s (mean %s vs %s)", r.Term, fmtG(r.MeanOutside), fmtG(r.MeanInside)))
		}
	}
	if len(parts) == 0 {
		return what + " resemble the other units on every term (all |SMD| < 0.1)"
	}
	return what + " differ from the other units most in " + strings.Join(parts, ", ")
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

func statusWords(s EstimandStatus) string { return strings.ReplaceAll(string(s), "_", " ") }

// remedies applies each candidate remedy, re-judges the result with the
// same rules and lists those that leave the target (or the estimand they
// change to) supported, the recommended one first; notes say which were
// tried and did not clear. A population just trimmed is not trimmed again.
func (sc *Scores) remedies(jd *judgement, cells []*Cells) (out []Remedy, notes []string) {
	d := sc.Design
	o := jd.o
	target := o.Target
	nan := Num(math.NaN())
	ess := func(e Estimand, p map[Estimand]precision) (Num, Num) {
		if pr, ok := p[e]; ok {
			return Num(pr.essT), Num(pr.essC)
		}
		return nan, nan
	}
	ts := jd.status[target]
	if ts == Supported {
		r := Remedy{Action: "none", Estimand: target.String(), Status: ts, Who: []ProfileRow{},
			Text: fmt.Sprintf("none needed for positivity: the %s is supported on these covariates (check balance after weighting)", target)}
		r.ESSTreated, r.ESSControl = ess(target, jd.prec)
		return []Remedy{r}, nil
	}
	if ts == SupportedWithCaution {
		r := Remedy{Action: "none", Estimand: target.String(), Status: ts, Who: []ProfileRow{},
			Text: fmt.Sprintf("no remedy needed for identification: the %s is supported with caution (%s); its estimates rest on few comparable units or large weights", target, strings.Join(jd.codes(target, Caution), ", "))}
		r.ESSTreated, r.ESSControl = ess(target, jd.prec)
		out = append(out, r)
	}
	// The units the findings against the target concern.
	concern := make([]bool, d.N)
	for _, f := range jd.findings {
		if f.Effect != Informs && f.affects(target) && f.mask != nil {
			for i, in := range f.mask {
				concern[i] = concern[i] || in
			}
		}
	}
	for _, e := range []Estimand{ATT, ATC, ATO} {
		if e == target || jd.status[e] == NotSupported || (ts == SupportedWithCaution && jd.status[e] != Supported) {
			continue
		}
		r := Remedy{Estimand: e.String(), Status: jd.status[e], Who: []ProfileRow{}}
		r.ESSTreated, r.ESSControl = ess(e, jd.prec)
		switch e {
		case ATT, ATC:
			r.Action = "target_" + strings.ToLower(e.String())
			left, leftArm := 0.0, "controls"
			if e == ATC {
				left, leftArm = 1, "treated units"
			}
			mask := make([]bool, d.N)
			for i := range mask {
				mask[i] = concern[i] && d.T[i] == left
			}
			r.Unrepresented = countMask(mask)
			desc := map[Estimand]string{ATT: "the treated units", ATC: "the controls"}[e]
			r.Text = fmt.Sprintf("estimate the %s instead of the %s: re-judged by the same rules it is %s; it describes %s only", e, target, statusWords(r.Status), desc)
			if r.Unrepresented > 0 {
				r.Text += fmt.Sprintf(", and leaves out the %d %s that the findings against the %s concern (%s)", r.Unrepresented, leftArm, target, strings.Join(jd.codes(target, Withdraws, Caution), ", "))
				if r.Unrepresented < d.N {
					r.Who = cleanProfile(profile(d, mask))
					r.WhoText = whoText(r.Who, fmt.Sprintf("the %d %s left out", r.Unrepresented, leftArm))
				}
			}
		case ATO:
			r.Action = "overlap_weights"
			r.Text = fmt.Sprintf("estimate the ATO with overlap weights (1 − e for treated, e for controls; Li, Morgan & Zaslavsky 2018): no unit is dropped, units without comparable units in the other arm get weights near 0, and the estimand becomes the overlap population; re-judged it is %s (effective sample sizes: %.1f treated, %.1f control)",
				statusWords(r.Status), float64(r.ESSTreated), float64(r.ESSControl))
		}
		out = append(out, r)
	}
	if sc.defE == nil && sc.trimAlpha == 0 {
		for _, try := range []func(*judgement, []*Cells) (*Remedy, string){sc.trimRemedy, sc.matchRemedy} {
			if r, note := try(jd, cells); r != nil {
				out = append(out, *r)
			} else if note != "" {
				notes = append(notes, note)
			}
		}
	}
	if len(out) == 0 {
		out = append(out, Remedy{Action: "none", Estimand: "", Who: []ProfileRow{}, ESSTreated: nan, ESSControl: nan,
			Text: "no remedy tried here leaves an estimand supported on these covariates: a comparison needs units that could have been in either arm"})
	}
	// A remedy that reaches "supported" goes before one with caution.
	sort.SliceStable(out, func(a, b int) bool {
		if out[a].Action == "none" || out[b].Action == "none" {
			return out[a].Action == "none" && out[b].Action != "none"
		}
		return out[a].Status == Supported && out[b].Status != Supported
	})
	return out, notes
}

// trimRemedy applies trimming (the optimal α of Crump et al. 2009 when it
// trims, else α = Extreme), rebuilds the tables on the kept units, judges
// them by the defining scores with the same rules, and offers the trim only
// when the target is then not withdrawn.
func (sc *Scores) trimRemedy(jd *judgement, cells []*Cells) (*Remedy, string) {
	o := jd.o
	target := o.Target
	alpha, _ := crumpAlpha(sc.E)
	rule := CrumpOptimal()
	how := fmt.Sprintf("the optimal α = %.3f of Crump, Hotz, Imbens & Mitnik (2009)", alpha)
	if alpha == 0 || alpha >= 0.5 {
		alpha = o.Extreme
		rule = Symmetric(alpha)
		how = fmt.Sprintf("α = %.2f (rule of thumb of Crump et al. 2009)", alpha)
	}
	tr := sc.Trim(rule)
	if tr.Err() != nil || tr.DroppedTreated+tr.DroppedControl == 0 {
		return nil, ""
	}
	to := o
	to.Extreme = 0 // the trimmed scores' own default (α)
	tj := sc.rejudge(tr.Design, tr.Scores, to, cells)
	if tj == nil {
		return nil, ""
	}
	st := tj.status[target]
	if st == NotSupported || (jd.status[target] == SupportedWithCaution && st != Supported) {
		return nil, fmt.Sprintf("trimming to scores in [%.3f, %.3f] by %s was tried: re-judged on the %d kept units the %s would still be %s (%s)",
			tr.Keep.Lo, tr.Keep.Hi, how, tr.KeptTreated+tr.KeptControl, target, statusWords(st), strings.Join(tj.codes(target, Withdraws, Caution), ", "))
	}
	keep := tr.Keep
	r := &Remedy{Action: "trim", Estimand: target.String(), Status: st, DropsTreated: tr.DroppedTreated, DropsControl: tr.DroppedControl,
		Alpha: Num(tr.Alpha), Keep: &keep, Who: cleanProfile(tr.Profile)}
	r.Text = fmt.Sprintf("trim to scores in [%.3f, %.3f] by %s and estimate the %s of the units kept: drops %d treated and %d controls; re-judged on the kept units by the same rules the %s is %s there; the estimand becomes the trimmed population",
		keep.Lo, keep.Hi, how, target, tr.DroppedTreated, tr.DroppedControl, target, statusWords(st))
	r.WhoText = whoText(r.Who, fmt.Sprintf("the %d units dropped", tr.DroppedTreated+tr.DroppedControl))
	if pr, ok := tj.prec[target]; ok {
		r.ESSTreated, r.ESSControl = Num(pr.essT), Num(pr.essC)
	} else {
		r.ESSTreated, r.ESSControl = Num(math.NaN()), Num(math.NaN())
	}
	return r, ""
}

// rejudge judges a remedy's population (design sub, scores ks from
// keptPopulation) by the same rules, with the positivity tables rebuilt on
// its units; nil when a table cannot be rebuilt.
func (sc *Scores) rejudge(sub *Design, ks *Scores, o VerdictOptions, cells []*Cells) *judgement {
	var tcells []*Cells
	for _, c := range cells {
		tc := cellsForDesignWith(sc.Design.study, sub, c.Columns, c.Options)
		if tc.Err() != nil {
			return nil
		}
		tcells = append(tcells, tc)
	}
	return ks.judgement(o, tcells)
}

// matchRemedy tries nearest-neighbour matching within Austin's (2011)
// caliper of 0.2 SD of the logit score for the target (ATT, ATC or ATE):
// the units that find no match within the caliper leave the analysis, and
// the matched population is re-judged by the same rules, judged by the
// scores that defined it. It returns the remedy when the target is then
// supported (or supported where it was only cautioned), else a note of what
// was tried.
func (sc *Scores) matchRemedy(jd *judgement, cells []*Cells) (*Remedy, string) {
	target := jd.o.Target
	if target == ATO {
		return nil, ""
	}
	m := sc.Match(MatchOptions{Estimand: target, Caliper: AustinCaliper})
	if m.Err() != nil || m.UnmatchedTreated+m.UnmatchedControl == 0 {
		return nil, ""
	}
	d := sc.Design
	rows := make([]int, 0, d.N)
	for i, un := range m.unmatched {
		if !un {
			rows = append(rows, i)
		}
	}
	sub, ks, _ := sc.keptPopulation(rows)
	if ks.Err() != nil || sub.Treated == 0 || sub.Control == 0 {
		return nil, ""
	}
	tj := sc.rejudge(sub, ks, jd.o, cells)
	if tj == nil {
		return nil, ""
	}
	st := tj.status[target]
	if st == NotSupported || (jd.status[target] == SupportedWithCaution && st != Supported) {
		return nil, fmt.Sprintf("matching within %g SD of the logit score was tried: %d treated and %d controls find no match; re-judged on the %d matched units the %s would still be %s (%s)",
			AustinCaliper, m.UnmatchedTreated, m.UnmatchedControl, sub.N, target, statusWords(st), strings.Join(tj.codes(target, Withdraws, Caution), ", "))
	}
	r := m.Remedy()
	r.Status = st
	r.Text += fmt.Sprintf("; re-judged on the %d matched units by the same rules the %s is %s there", sub.N, target, statusWords(st))
	return &r, ""
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

// Verdict judges positivity from the scores and any positivity tables
// given. Each rule (verdictRules) returns findings; every rule that counts
// units compares the count with what random assignment with the same arm
// sizes would give:
//   - separation on a covariate level and cells lacking an arm: exact
//     hypergeometric chance that a group of that size lacks the arm (chanceMissing),
//     Bonferroni over the groups tested; beyond chance a violation that
//     withdraws the estimands needing the missing arm, else a note;
//   - scores outside the other arm's range, extreme scores, sparse cells and
//     the variance inflation of each estimand's weights: permutation of the
//     treatment with the propensity refitted (permutationNull), family-wise
//     over these statistics; beyond chance (and by at least MinShare of the
//     arm) scores outside the other arm's range withdraw the estimands that
//     need comparable units there, the others caution;
//   - no overlap at all withdraws every estimand.
//
// Identification decides the status of an estimand (not_supported when data
// in an arm it needs are missing); precision (effective sample sizes,
// largest weight share, variance inflation) is reported for each estimand
// and cautions only. The overall status is violated with a violation,
// limited when an estimand is not supported or supported with caution,
// adequate otherwise.
//
// Remedies are applied and re-judged by the same rules before they are
// offered (see remedies); for scores refitted after trimming the verdict
// judges the kept units by the scores that defined them.
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
	jd := sc.judgement(o, cells)
	jd2 := *jd
	jd2.o = o // the same findings, this verdict's target
	v := &Verdict{Options: o, Target: o.Target.String(), TrimThreshold: o.Extreme, Findings: jd.findings, Reasons: []string{}, Notes: []string{},
		Supported: []string{}, Estimands: map[string]*EstimandVerdict{}}
	d := sc.Design
	for i, e := range sc.judgedScores() {
		if e < o.Extreme || e > 1-o.Extreme {
			if d.T[i] == 1 {
				v.TrimTreated++
			} else {
				v.TrimControl++
			}
		}
	}
	violated := false
	for _, f := range jd.findings {
		violated = violated || f.Violation
		switch {
		case f.Effect != Informs:
			v.Reasons = append(v.Reasons, f.Text)
		case f.Code != FindingPrecision:
			v.Notes = append(v.Notes, f.Text)
		}
	}
	v.Status = Adequate
	for _, e := range []Estimand{ATE, ATT, ATC, ATO} {
		ev := &EstimandVerdict{Status: jd.status[e], Findings: []FindingCode{}}
		for _, c := range jd.codes(e, Withdraws, Caution, Informs) {
			ev.Findings = append(ev.Findings, FindingCode(c))
		}
		pr := jd.prec[e]
		ev.ESSTreated, ev.ESSControl, ev.LargestWeightShare, ev.VarianceInflation = Num(pr.essT), Num(pr.essC), Num(pr.largest), Num(pr.vif)
		v.Estimands[e.String()] = ev
		if ev.Status != NotSupported {
			v.Supported = append(v.Supported, e.String())
		}
		if ev.Status != Supported {
			v.Status = Limited
		}
	}
	if violated {
		v.Status = Violated
	}
	var notes []string
	v.Remedies, notes = sc.remedies(&jd2, cells)
	v.Notes = append(v.Notes, notes...)
	v.Remedy = v.Remedies[0].Text
	return v
}

// String is the terminal view.
func (v *Verdict) String() string {
	if err := v.Err(); err != nil {
		return "verdict: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Positivity verdict: %s\n", strings.ToUpper(string(v.Status)))
	for _, e := range []string{"ATE", "ATT", "ATC", "ATO"} {
		ev := v.Estimands[e]
		if ev == nil {
			continue
		}
		var codes []string
		for _, c := range ev.Findings {
			if c != FindingPrecision {
				codes = append(codes, string(c))
			}
		}
		why := ""
		if len(codes) > 0 {
			why = " (" + strings.Join(codes, ", ") + ")"
		}
		fmt.Fprintf(&b, "  %-4s %-23s ESS %s treated / %s control, largest weight %s of its arm, variance ×%s%s\n", e, statusWords(ev.Status),
			fmtFix(float64(ev.ESSTreated), 1), fmtFix(float64(ev.ESSControl), 1), fmtPct(float64(ev.LargestWeightShare)), fmtFix(float64(ev.VarianceInflation), 2), why)
	}
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

func fmtFix(v float64, digits int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return strconv.FormatFloat(v, 'f', digits, 64)
}

func fmtPct(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return fmt.Sprintf("%.1f%%", 100*v)
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
	if c := sc.CalibrationTest(); c.Err() == nil {
		b.WriteString(c.String())
	}
	return b.String()
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
