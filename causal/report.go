package causal

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
)

// ReportSchema is the schema id of the report JSON (a contract with
// pipelines; see report.schema.json beside this file).
const ReportSchema = "counterpart.report/v1"

// Cautions are carried by every report.
var Cautions = []string{
	"These diagnostics cannot verify unconfoundedness: overlap and balance on the measured covariates say nothing about confounders that were not measured.",
	"Every estimate depends on the covariates measured and chosen for adjustment; adding covariates can make unconfoundedness more plausible while eroding overlap.",
	"Trimming and overlap weights change the population an estimate describes; report which population it is.",
	"Clinical, legal or policy decisions defer to local rules and licensed practice; this report does not replace either.",
}

// ReportOptions choose what a report estimates.
type ReportOptions struct {
	// Estimand: ATE (default), ATT, ATC or ATO; the verdict's remedies and the gate judge it.
	Estimand Estimand
	// Trim: "none" (default), a symmetric α such as "0.1" (scores kept in
	// [α, 1−α]; Crump, Hotz, Imbens & Mitnik 2009), or "optimal" (their
	// optimal α).
	Trim string
	// Cells are the covariates that define the positivity cells (default:
	// the categorical and 0/1 covariates, at most four); Bins cuts the
	// continuous ones into quantile bins (default 5).
	Cells []string
	Bins  int
	// Caliper of the nearest-neighbour matching estimate, in SDs of the
	// logit score (0: none; AustinCaliper, 0.2, is Austin's 2011 advice).
	Caliper float64
	// Bootstrap replicates for the primary estimator (0: none) and the seed.
	Bootstrap int
	Seed      uint64
	// Context cancels the report: between its stages (BuildReport then
	// returns the context's error) and within the bootstrap (which stops
	// early, marked Partial). Progress reports the bootstrap's replicates.
	Context  context.Context
	Progress func(done, total int)
	// Stage, when set, is called with the name of each stage as it starts
	// (design, propensity, support, cells, verdict, trimming, balance,
	// estimates, matching, bootstrap) and with "" when the report is built.
	Stage func(name string)
}

// ReportData counts the rows.
type ReportData struct {
	Rows        int `json:"rows"`
	RowsUsed    int `json:"rows_used"`
	RowsDropped int `json:"rows_dropped"`
	Treated     int `json:"treated"`
	Control     int `json:"control"`
}

// ReportTrim describes the trimming applied before estimation.
type ReportTrim struct {
	Rule           string       `json:"rule"`
	Alpha          Num          `json:"alpha"`
	Keep           *[2]Num      `json:"keep"`
	DroppedTreated int          `json:"dropped_treated"`
	DroppedControl int          `json:"dropped_control"`
	KeptTreated    int          `json:"kept_treated"`
	KeptControl    int          `json:"kept_control"`
	Population     string       `json:"population"`
	Profile        []ProfileRow `json:"profile_dropped"`
}

// Report is the whole analysis of a Study for a pipeline: the fields of the
// report JSON contract (schema counterpart.report/v1) plus the results they
// come from, for the HTML and text views.
type Report struct {
	Schema     string     `json:"schema"`
	Data       ReportData `json:"data"`
	Roles      Roles      `json:"roles"`
	Propensity *Scores    `json:"propensity"`
	Support    *Support   `json:"support"`
	Cells      *Cells     `json:"cells"`
	// CellsAbsent says why there is no positivity table ("" when there is one).
	CellsAbsent string        `json:"cells_absent,omitempty"`
	Balance     *BalanceSheet `json:"balance"`
	// BalanceWeights names the weights behind smd_weighted.
	BalanceWeights string      `json:"balance_weights"`
	Trimming       *ReportTrim `json:"trimming"`
	Estimates      []*Effect   `json:"estimates"`
	Bootstrap      *Bootstrap  `json:"bootstrap"`
	Verdict        *Verdict    `json:"verdict"`
	// VerdictTrimmed judges the trimmed units (with --trim; null otherwise):
	// the population the estimates describe. Gate returns it when present.
	VerdictTrimmed *Verdict `json:"verdict_trimmed"`
	Cautions       []string `json:"cautions"`

	// Results behind the fields, for views.
	Study   *Study   `json:"-"`
	Trimmed *Trimmed `json:"-"`
	// Matching and Strata behind the nearest_neighbour_matching and
	// subclassification estimates (nil for the ATO).
	Matching     *Matching `json:"-"`
	Strata       *Strata   `json:"-"`
	trimmedCells []*Cells
	Options      ReportOptions `json:"-"`
}

// ParseTrim reads the --trim value: none, optimal, or α in [0, 0.5).
func ParseTrim(s string) (TrimRule, bool, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "", "none", "0":
		return TrimRule{}, false, nil
	case "optimal", "crump":
		return CrumpOptimal(), true, nil
	}
	a, kind := parseNumber(strings.TrimSpace(s)) // the data-file grammar: no 0x1p-3 or 1_0
	if kind != numOK || a < 0 || a >= 0.5 {
		return TrimRule{}, false, fmt.Errorf("trim %s: use none, optimal, or a number α with 0 ≤ α < 0.5 (scores kept in [α, 1−α]), e.g. 0.1", quoteValue(s))
	}
	if a == 0 {
		return TrimRule{}, false, nil
	}
	return Symmetric(a), true, nil
}

// discreteCovariates are the covariates used for the report's positivity
// cells: categorical ones and 0/1 numeric ones, at most four, in order.
func discreteCovariates(d *Design) []string {
	var out []string
	seen := map[string]bool{}
	for _, t := range d.Terms[1:] {
		if t.Binary && !seen[t.Column] {
			seen[t.Column] = true
			out = append(out, t.Column)
			if len(out) == 4 {
				break
			}
		}
	}
	return out
}

// BuildReport runs the whole analysis: propensity model, support by arm,
// positivity cells on the discrete covariates, balance before and after the
// estimand's weights, optional trimming, every estimator of the estimand
// (with nearest-neighbour matching and subclassification for the ATE, ATT
// and ATC),
// an optional bootstrap of the primary estimator (AIPW; overlap weights for
// the ATO) and the verdict. A data or option error is returned as an error
// naming the column, row or option.
func BuildReport(s *Study, o ReportOptions) (*Report, error) {
	if o.Estimand == 0 {
		o.Estimand = ATE
	}
	if !o.Estimand.valid() {
		return nil, errors.New("estimand: use ATE, ATT, ATC or ATO")
	}
	if o.Bootstrap < 0 {
		return nil, fmt.Errorf("bootstrap: %d replicates: use 0 (none) or a positive number", o.Bootstrap)
	}
	if math.IsNaN(o.Caliper) || math.IsInf(o.Caliper, 0) || o.Caliper < 0 {
		return nil, fmt.Errorf("caliper %g: use 0 (none) or a positive number of SDs of the logit score, e.g. 0.2", o.Caliper)
	}
	rule, trim, err := ParseTrim(o.Trim)
	if err != nil {
		return nil, err
	}
	stage := o.Stage
	if stage == nil {
		stage = func(string) {}
	}
	defer stage("")
	stage("design")
	d, err := s.Design()
	if err != nil {
		return nil, err
	}
	if d.Y == nil {
		return nil, settingErr("Outcome", "column", "no outcome column: name one with ", "")
	}
	if err := cancelled(o.Context); err != nil {
		return nil, err
	}
	stage("propensity")
	sc := s.Propensity()
	if err := sc.Err(); err != nil {
		return nil, err
	}
	r := &Report{Schema: ReportSchema, Study: s, Options: o, Cautions: append([]string(nil), Cautions...)}
	if err := cancelled(o.Context); err != nil {
		return nil, err
	}
	r.Data = ReportData{Rows: d.RowsTotal, RowsUsed: d.N, RowsDropped: d.RowsDropped, Treated: d.Treated, Control: d.Control}
	r.Roles = d.Roles()
	r.Propensity = sc
	stage("support")
	r.Support = sc.Support()
	var cells []*Cells
	stage("cells")
	cellCols := o.Cells
	copts := CellOptions{Bins: o.Bins}
	if len(cellCols) == 0 {
		cellCols = discreteCovariates(d)
	}
	if len(cellCols) > 0 {
		// The cells are an optional part: when they fail they stay in the
		// report marked failed, and the verdict says it did not judge them;
		// cells the user named must build (the error names the column).
		r.Cells = s.CellsWith(copts, cellCols...)
		if err := r.Cells.Err(); err == nil {
			cells = append(cells, r.Cells)
		} else if len(o.Cells) > 0 {
			return nil, fmt.Errorf("cells: %w", err)
		}
	} else {
		r.CellsAbsent = "no categorical or 0/1 covariate to define positivity cells by default: name the cell covariates (--cells a,b; continuous ones are cut into --bins quantile bins)"
	}
	stage("verdict")
	vo := VerdictOptions{Target: o.Estimand}
	r.Verdict = sc.Verdict(vo, cells...)
	if err := r.Verdict.Err(); err != nil {
		return nil, err
	}
	noteFailedCells(r.Verdict, r.Cells)
	est := sc
	if trim {
		stage("trimming")
		tr := sc.Trim(rule)
		if err := tr.Err(); err != nil {
			return nil, fmt.Errorf("trim %s: %w", o.Trim, err)
		}
		r.Trimmed = tr
		rt := &ReportTrim{Rule: tr.Rule.String(), Alpha: Num(tr.Alpha), DroppedTreated: tr.DroppedTreated, DroppedControl: tr.DroppedControl,
			KeptTreated: tr.KeptTreated, KeptControl: tr.KeptControl, Population: tr.Population, Profile: append([]ProfileRow{}, tr.Profile...)}
		rt.Keep = &[2]Num{Num(tr.Keep.Lo), Num(tr.Keep.Hi)}
		for i := range rt.Profile {
			if math.IsNaN(rt.Profile[i].SMD) || math.IsInf(rt.Profile[i].SMD, 0) {
				rt.Profile[i].SMD = 0
			}
		}
		r.Trimming = rt
		est = tr.Scores
		var tcells []*Cells
		var c *Cells
		if len(cellCols) > 0 {
			// The positivity cells of the kept units, by the kept design's rows.
			c = tr.Scores.CellsWith(copts, cellCols...)
			if c.Err() == nil {
				tcells = append(tcells, c)
			}
		}
		r.trimmedCells = tcells
		r.VerdictTrimmed = est.Verdict(vo, tcells...)
		if err := r.VerdictTrimmed.Err(); err != nil {
			return nil, err
		}
		noteFailedCells(r.VerdictTrimmed, c)
	}
	if err := cancelled(o.Context); err != nil {
		return nil, err
	}
	stage("balance")
	w := est.Weights(o.Estimand)
	if err := w.Err(); err != nil {
		// Weights cannot be formed (e.g. scores of 0 or 1 for an estimand
		// that divides by them): balance is shown before weighting only.
		r.Balance = balanceFor(est.Design, nil, "")
		r.BalanceWeights = "none: " + err.Error()
	} else {
		r.Balance = w.Balance()
		r.BalanceWeights = weightLabel(o.Estimand)
	}
	estCells := cells
	if trim {
		estCells = r.trimmedCells
	}
	if err := cancelled(o.Context); err != nil {
		return nil, err
	}
	stage("estimates")
	es := est.Effects(o.Estimand, estCells...)
	if err := es.Err(); err != nil {
		return nil, err
	}
	r.Estimates = es.Items
	if o.Estimand != ATO {
		// Matching on the logit score and subclassification on its quintiles.
		stage("matching")
		r.Matching = est.Match(MatchOptions{Estimand: o.Estimand, Caliper: o.Caliper})
		r.Strata = est.Subclassify(0)
		extra := []*Effect{r.Matching.Effect(estCells...), r.Strata.Effect(o.Estimand, estCells...)}
		for _, e := range extra {
			if trim {
				r.Trimmed.mark(e)
			}
		}
		r.Estimates = append(r.Estimates, extra...)
	}
	if err := cancelled(o.Context); err != nil {
		return nil, err
	}
	if o.Bootstrap > 0 {
		stage("bootstrap")
		ctx := o.Context
		if ctx == nil {
			ctx = context.Background()
		}
		primary := AIPW
		if o.Estimand == ATO || !primary.targets(o.Estimand) {
			primary = OverlapWeighted
			if o.Estimand != ATO {
				primary = IPWNormalized
			}
		}
		// A failed bootstrap is an optional part: it stays in the report,
		// marked failed with why (see Bootstrap.Status), and takes nothing else with it.
		r.Bootstrap = est.Bootstrap(ctx, primary, o.Estimand, BootstrapOptions{Replicates: o.Bootstrap, Seed: o.Seed, Progress: o.Progress})
	}
	return r, nil
}

// cancelled returns the error of a cancelled context (nil for none).
func cancelled(ctx context.Context) error {
	if ctx == nil || ctx.Err() == nil {
		return nil
	}
	return fmt.Errorf("report cancelled: %w", ctx.Err())
}

// noteFailedCells adds to v a note that the positivity cells c failed and
// were not judged (nothing when c is nil or did not fail).
func noteFailedCells(v *Verdict, c *Cells) {
	if c == nil || c.Err() == nil || v == nil {
		return
	}
	v.Notes = append(v.Notes, "positivity cells on "+strings.Join(c.Columns, ", ")+" could not be built ("+c.Err().Error()+"): this verdict does not judge them")
}

// Err says why the report is unusable (nil, or not built by BuildReport).
func (r *Report) Err() error {
	if r == nil {
		return errors.New("nil Report")
	}
	if r.Propensity == nil || r.Support == nil || r.Balance == nil || r.Verdict == nil {
		return errors.New("report not built: use BuildReport")
	}
	return nil
}

// GateStatus is what a pipeline gate judges: the grade of the report's
// estimand in Gate's verdict (see Verdict.Grade).
func (r *Report) GateStatus() VerdictStatus {
	if r.Err() != nil {
		return ""
	}
	return r.Gate().Grade(r.Options.Estimand)
}

// Gate is the verdict a pipeline gate should judge: the trimmed units' when
// the report trims (the population the estimates describe), else the data's.
func (r *Report) Gate() *Verdict {
	if err := r.Err(); err != nil {
		return &Verdict{err: err}
	}
	if r.VerdictTrimmed != nil {
		return r.VerdictTrimmed
	}
	return r.Verdict
}

// String is the short text summary printed by the report command.
func (r *Report) String() string {
	if err := r.Err(); err != nil {
		return "report: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "counterpart report: %s on %s, %d rows used (%d treated, %d control", r.Roles.Outcome, r.Roles.Treatment, r.Data.RowsUsed, r.Data.Treated, r.Data.Control)
	if r.Data.RowsDropped > 0 {
		fmt.Fprintf(&b, "; %d incomplete rows dropped", r.Data.RowsDropped)
	}
	b.WriteString(")\n")
	fmt.Fprintf(&b, "propensity: AUC %.3f, %s", r.Propensity.AUC, map[bool]string{true: "converged", false: "not converged"}[r.Propensity.Converged])
	if r.Propensity.Separated() {
		fmt.Fprintf(&b, ", separation in %d place(s)", len(r.Propensity.Separation))
	}
	b.WriteString("\n")
	if r.Support.Band.Lo <= r.Support.Band.Hi {
		fmt.Fprintf(&b, "common support [%.3f, %.3f]; outside: %d treated, %d control\n", r.Support.Band.Lo, r.Support.Band.Hi, r.Support.OutsideTreated, r.Support.OutsideControl)
	} else {
		b.WriteString("common support: none (the arms' score ranges do not overlap)\n")
	}
	fmt.Fprintf(&b, "largest |SMD|: %.3f before, %.3f after %s\n", r.Balance.maxBefore(), r.Balance.MaxAbsSMD(), r.BalanceWeights)
	if r.Trimming != nil {
		fmt.Fprintf(&b, "trimmed (%s): dropped %d treated and %d control; the estimand is now for %s\n", r.Trimming.Rule, r.Trimming.DroppedTreated, r.Trimming.DroppedControl, r.Trimming.Population)
	}
	for _, e := range r.Estimates {
		if e.Err() != nil {
			fmt.Fprintf(&b, "  %-22s %s  error: %v\n", e.Estimator, e.Estimand, e.Err())
			continue
		}
		flag := ""
		if !e.Supported {
			flag = "  [not supported by the data: " + e.Unsupported + "]"
		}
		fmt.Fprintf(&b, "  %-22s %s %12.4g  SE %10.4g  95%% CI [%.4g, %.4g]  (%s)%s\n", e.Estimator, e.Estimand, e.Value, e.SE, e.CI95.Lo, e.CI95.Hi, e.SEMethod, flag)
	}
	if r.Bootstrap != nil {
		if st, why := r.Bootstrap.Status(); st == BootstrapFailed {
			fmt.Fprintf(&b, "  bootstrap: FAILED: %s\n", why)
		} else {
			fmt.Fprintf(&b, "  bootstrap: %s\n", strings.TrimSpace(strings.SplitN(r.Bootstrap.String(), "\n", 2)[0]))
		}
	}
	if r.Cells != nil && r.Cells.Err() != nil {
		fmt.Fprintf(&b, "positivity cells: FAILED: %v (the verdict does not judge them)\n", r.Cells.Err())
	}
	fmt.Fprintf(&b, "verdict: %s", strings.ToUpper(string(r.Verdict.Status)))
	if len(r.Verdict.Reasons) > 0 {
		fmt.Fprintf(&b, " — %s", strings.Join(r.Verdict.Reasons, "; "))
	}
	fmt.Fprintf(&b, "\nsupported estimands: %s; the %s: %s\n", strings.Join(r.Verdict.Supported, ", "), r.Options.Estimand, statusWords(r.Verdict.StatusOf(r.Options.Estimand)))
	if v := r.VerdictTrimmed; v != nil {
		fmt.Fprintf(&b, "verdict on the trimmed units: %s; supported estimands there: %s; the %s: %s\n", strings.ToUpper(string(v.Status)), strings.Join(v.Supported, ", "),
			r.Options.Estimand, statusWords(v.StatusOf(r.Options.Estimand)))
	}
	if r.CellsAbsent != "" {
		b.WriteString("cells: none (" + r.CellsAbsent + ")\n")
	}
	b.WriteString("caution: " + Cautions[0] + "\n")
	return b.String()
}

func (b *BalanceSheet) maxBefore() float64 {
	var m float64
	for _, r := range b.Rows {
		if !math.IsNaN(r.SMD) {
			m = math.Max(m, math.Abs(r.SMD))
		}
	}
	return m
}
