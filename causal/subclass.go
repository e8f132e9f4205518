package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
)

// DefaultStrata is the number of score strata of Subclassify: five, after
// Rosenbaum & Rubin (1984, JASA 79(387), 516–524), who report that five
// subclasses on the score remove most of the bias due to each covariate.
const DefaultStrata = 5

// Stratum is one subclass of the propensity score.
type Stratum struct {
	// Scores in [Lo, Hi) (the last stratum also holds Hi; Lo of the first
	// and Hi of the last are the lowest and highest scores).
	Lo, Hi           float64
	Treated, Control int
	// Outcome means and n−1 variances per arm (NaN without an outcome, or
	// with too few units).
	MeanTreated, MeanControl float64
	VarTreated, VarControl   float64
	// Effect = MeanTreated − MeanControl; Variance = VarTreated/Treated +
	// VarControl/Control.
	Effect, Variance float64
}

// EmptyArm names the arm the stratum lacks: "treated", "control", "both"
// (no unit at all: tied cut points) or "".
func (s Stratum) EmptyArm() string {
	switch {
	case s.Treated == 0 && s.Control == 0:
		return "both"
	case s.Treated == 0:
		return "treated"
	case s.Control == 0:
		return "control"
	}
	return ""
}

// Strata is subclassification on the propensity score: strata cut at
// quantiles of the scores of all units, the units of each arm per stratum,
// and the strata in which an arm is empty (a positivity violation for the
// estimands that need that arm there).
type Strata struct {
	Scores *Scores
	// Cuts are the interior cut points: the type-7 quantiles (R's default,
	// Hyndman & Fan 1996) of all scores at 1/S, …, (S−1)/S. A unit on a cut
	// point goes to the upper stratum.
	Cuts   []float64
	Strata []Stratum
	// Of is each design row's stratum (0-based).
	Of  []int
	err error
}

// Err returns why the strata could not be formed, or nil.
func (s *Strata) Err() error {
	if s == nil {
		return errors.New("nil Strata")
	}
	if s.err == nil && s.Scores == nil {
		return errors.New("strata not computed: use Scores.Subclassify")
	}
	return s.err
}

// Subclassify cuts the units into k strata of the score (k = 0: the
// default, 5) at its quantiles over all units (see Strata.Cuts). Tied cut
// points leave empty strata, which are kept (and reported) but estimate
// nothing.
func (sc *Scores) Subclassify(k int) *Strata {
	st := &Strata{}
	if err := sc.Err(); err != nil {
		st.err = err
		return st
	}
	if k == 0 {
		k = DefaultStrata
	}
	d := sc.Design
	if k < 2 || k > d.N/2 {
		st.err = fmt.Errorf("subclassification: %d strata: use 2 to %d (at least two units per stratum)", k, d.N/2)
		return st
	}
	st.Scores = sc
	sorted := append([]float64(nil), sc.E...)
	slices.Sort(sorted)
	for j := 1; j < k; j++ {
		st.Cuts = append(st.Cuts, quantileSorted(sorted, float64(j)/float64(k)))
	}
	st.Strata = make([]Stratum, k)
	for j := range st.Strata {
		lo, hi := sorted[0], sorted[len(sorted)-1]
		if j > 0 {
			lo = st.Cuts[j-1]
		}
		if j < k-1 {
			hi = st.Cuts[j]
		}
		st.Strata[j] = Stratum{Lo: lo, Hi: hi}
	}
	st.Of = make([]int, d.N)
	for i, e := range sc.E {
		// The number of cut points ≤ e: a unit on a cut goes up.
		j, _ := slices.BinarySearch(st.Cuts, e)
		for j < len(st.Cuts) && st.Cuts[j] <= e {
			j++
		}
		st.Of[i] = j
		if d.T[i] == 1 {
			st.Strata[j].Treated++
		} else {
			st.Strata[j].Control++
		}
	}
	for j := range st.Strata {
		r := &st.Strata[j]
		r.MeanTreated, r.MeanControl, r.VarTreated, r.VarControl = math.NaN(), math.NaN(), math.NaN(), math.NaN()
		r.Effect, r.Variance = math.NaN(), math.NaN()
	}
	if d.Y != nil {
		var s1, s0 = make([]float64, k), make([]float64, k)
		for i, y := range d.Y {
			if d.T[i] == 1 {
				s1[st.Of[i]] += y
			} else {
				s0[st.Of[i]] += y
			}
		}
		for j := range st.Strata {
			r := &st.Strata[j]
			if r.Treated > 0 {
				r.MeanTreated = s1[j] / float64(r.Treated)
			}
			if r.Control > 0 {
				r.MeanControl = s0[j] / float64(r.Control)
			}
		}
		q1, q0 := make([]float64, k), make([]float64, k)
		for i, y := range d.Y {
			r := &st.Strata[st.Of[i]]
			if d.T[i] == 1 {
				q1[st.Of[i]] += (y - r.MeanTreated) * (y - r.MeanTreated)
			} else {
				q0[st.Of[i]] += (y - r.MeanControl) * (y - r.MeanControl)
			}
		}
		for j := range st.Strata {
			r := &st.Strata[j]
			if r.Treated > 1 {
				r.VarTreated = q1[j] / float64(r.Treated-1)
			}
			if r.Control > 1 {
				r.VarControl = q0[j] / float64(r.Control-1)
			}
			r.Effect = r.MeanTreated - r.MeanControl
			r.Variance = r.VarTreated/float64(r.Treated) + r.VarControl/float64(r.Control)
		}
	}
	return st
}

// stratumWeight is a stratum's share of the target population: n_s/n for
// the ATE, n1s/n1 for the ATT, n0s/n0 for the ATC (unnormalised: counts).
func stratumWeight(r Stratum, t Estimand) float64 {
	switch t {
	case ATT:
		return float64(r.Treated)
	case ATC:
		return float64(r.Control)
	}
	return float64(r.Treated + r.Control)
}

// Violations lists the strata (0-based) in which the estimand needs an arm
// that is empty: for the ATE any stratum with units but an empty arm; for
// the ATT a stratum with treated units and no controls; for the ATC one
// with controls and no treated units.
func (s *Strata) Violations(t Estimand) []int {
	if s.Err() != nil {
		return nil
	}
	var out []int
	for j, r := range s.Strata {
		if stratumWeight(r, t) > 0 && (r.Treated == 0 || r.Control == 0) {
			out = append(out, j)
		}
	}
	return out
}

// Effect is the subclassification estimate: the within-stratum differences
// in means averaged with the stratum's share of the target population,
// w_s = n_s/n (ATE), n1s/n1 (ATT) or n0s/n0 (ATC) (Rosenbaum & Rubin 1984),
// with the stratified variance that takes the weights as fixed (the
// Neyman variance of a stratified randomised experiment; Imbens & Rubin
// 2015, Causal Inference for Statistics, Social, and Biomedical Sciences,
// ch. 9, recalled from memory):
//
//	τ = Σ_s w_s (ȳ1s − ȳ0s),   Var τ = Σ_s w_s² (s1s²/n1s + s0s²/n0s).
//
// The strata, cut on the estimated score, are taken as given, so the SE
// ignores that the score was estimated (conservative when the covariates
// predict the outcome: see TestMatchingCoverageRandomised).
//
// A stratum the estimand needs with an empty arm (see Violations) is a
// positivity violation: the effect is then computed over the other strata
// (weights renormalised), flagged restricted_population and not supported.
// Cells are positivity tables as for Scores.Effect.
func (s *Strata) Effect(t Estimand, cells ...*Cells) *Effect {
	eff := newEffect(Subclassification, t, "stratified variance")
	if err := s.Err(); err != nil {
		eff.err = err
		return eff
	}
	if err := checkEstimator(Subclassification, t); err != nil {
		eff.err = err
		return eff
	}
	if !eff.begin(s.Scores, cells) {
		return eff
	}
	viol := s.Violations(t)
	bad := map[int]bool{}
	for _, j := range viol {
		bad[j] = true
	}
	var wsum float64
	for j, r := range s.Strata {
		if !bad[j] {
			wsum += stratumWeight(r, t)
		}
	}
	if wsum == 0 {
		eff.err = fmt.Errorf("%s: every stratum the %s needs lacks an arm: no comparison exists; see Support", Subclassification, t)
		return eff
	}
	var v, mu1, mu0 float64
	for j, r := range s.Strata {
		w := stratumWeight(r, t) / wsum
		if bad[j] || w == 0 {
			continue
		}
		mu1 += w * r.MeanTreated
		mu0 += w * r.MeanControl
		v += w * w * r.Variance
		eff.N += r.Treated + r.Control
		eff.NTreated += r.Treated
		eff.NControl += r.Control
	}
	eff.Mu1, eff.Mu0, eff.Value = mu1, mu0, mu1-mu0
	if math.IsNaN(v) {
		eff.flag("se_unavailable", "the standard error could not be computed: a stratum used has fewer than 2 units in an arm (use fewer strata)")
	} else {
		eff.SE = math.Sqrt(v)
		eff.CI95 = Interval{eff.Value - z975*eff.SE, eff.Value + z975*eff.SE}
	}
	if len(viol) > 0 {
		eff.Supported = false
		why := s.violationText(t, viol)
		if eff.Unsupported != "" {
			why = eff.Unsupported + "; " + why
		}
		eff.Unsupported = why
		eff.Population = fmt.Sprintf("%s in the %d strata with both arms", t.population(), len(s.Strata)-len(viol))
		eff.flag("restricted_population", fmt.Sprintf("%s: the estimate covers the other strata only", s.violationText(t, viol)))
	}
	eff.Notes = append(eff.Notes, fmt.Sprintf("%d strata at the quantiles of the score (type 7); a unit on a cut point is in the upper stratum", len(s.Strata)),
		"SE: stratified variance Σ w_s² (s1s²/n1s + s0s²/n0s), stratum weights taken as fixed")
	return eff
}

func (s *Strata) violationText(t Estimand, viol []int) string {
	var parts []string
	units := 0
	for _, j := range viol {
		r := s.Strata[j]
		parts = append(parts, fmt.Sprintf("stratum %d (scores %.3g–%.3g, no %s)", j+1, r.Lo, r.Hi, map[bool]string{true: "treated units", false: "controls"}[r.Treated == 0]))
		units += r.Treated + r.Control
	}
	return fmt.Sprintf("positivity: %d stratum(s) the %s needs have an empty arm, holding %d units: %s", len(viol), t, units, strings.Join(parts, ", "))
}

// Weights are the subclassification weights of the estimand per design row:
// a unit of arm a in stratum s gets w_s/n_as (scaled so the target arm's
// units weigh 1 for the ATT and ATC), 0 in a stratum the estimand cannot
// use. They reproduce the estimate as a difference of weighted means.
func (s *Strata) Weights(t Estimand) []float64 {
	if s.Err() != nil {
		return nil
	}
	d := s.Scores.Design
	bad := map[int]bool{}
	for _, j := range s.Violations(t) {
		bad[j] = true
	}
	w := make([]float64, d.N)
	for i := range w {
		j := s.Of[i]
		r := s.Strata[j]
		if bad[j] || stratumWeight(r, t) == 0 {
			continue
		}
		n := float64(r.Control)
		if d.T[i] == 1 {
			n = float64(r.Treated)
		}
		w[i] = stratumWeight(r, t) / n
	}
	return w
}

// Balance is the covariate balance before and after subclassification
// (the balance sheet weighted by Weights(t)).
func (s *Strata) Balance(t Estimand) *BalanceSheet {
	if err := s.Err(); err != nil {
		return &BalanceSheet{err: err}
	}
	return balanceFor(s.Scores.Design, s.Weights(t), "subclassification weights ("+t.String()+")")
}

// Remedy describes subclassification as a remedy for the verdict (action
// "subclassify") for the estimand: the units in strata it cannot use (an
// arm the estimand needs is empty there; DropsTreated, DropsControl), who
// they are, the units in strata the estimand does not describe
// (Unrepresented: for the ATT, controls in strata without treated units),
// and the effective sample sizes of the subclassification weights.
func (s *Strata) Remedy(t Estimand) Remedy {
	r := Remedy{Action: "subclassify", Estimand: t.String(), Who: []ProfileRow{}, ESSTreated: Num(math.NaN()), ESSControl: Num(math.NaN())}
	if err := s.Err(); err != nil {
		r.Text = "subclassification is not possible: " + err.Error()
		return r
	}
	d := s.Scores.Design
	w := s.Weights(t)
	bad := map[int]bool{}
	for _, j := range s.Violations(t) {
		bad[j] = true
	}
	drop := make([]bool, d.N)
	var sw, sq [2]float64
	for i, v := range w {
		a := int(d.T[i])
		sw[a], sq[a] = sw[a]+v, sq[a]+v*v
		switch {
		case bad[s.Of[i]]:
			drop[i] = true
			if a == 1 {
				r.DropsTreated++
			} else {
				r.DropsControl++
			}
		case v == 0:
			r.Unrepresented++ // in a stratum without the estimand's arm: not described by it
		}
	}
	r.ESSTreated, r.ESSControl = Num(kish(sw[1], sq[1])), Num(kish(sw[0], sq[0]))
	r.Text = fmt.Sprintf("estimate the %s by subclassification on %d score strata", t, len(s.Strata))
	if v := s.Violations(t); len(v) > 0 {
		r.Text += fmt.Sprintf(": %d stratum(s) lack an arm the %s needs, so %d treated and %d controls there are left out and the estimand becomes the other strata",
			len(v), t, r.DropsTreated, r.DropsControl)
		if k := countMask(drop); k > 0 && k < d.N {
			r.Who = cleanProfile(profile(d, drop))
			r.WhoText = whoText(r.Who, fmt.Sprintf("the %d units left out", k))
		}
	} else {
		r.Text += ": every stratum holds both arms"
	}
	return r
}

// String is the terminal view.
func (s *Strata) String() string {
	if err := s.Err(); err != nil {
		return "strata: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Subclassification: %d strata at the quantiles of the propensity score (a unit on a cut goes up)\n", len(s.Strata))
	fmt.Fprintf(&b, "  %-8s %-19s %9s %9s %12s %12s\n", "stratum", "scores", "treated", "control", "effect", "SE")
	for j, r := range s.Strata {
		mark := ""
		if a := r.EmptyArm(); a != "" {
			mark = "  EMPTY ARM: " + a
			if a == "both" {
				mark = "  no units (tied cut points)"
			}
		}
		fmt.Fprintf(&b, "  %-8d %-19s %9d %9d %12s %12s%s\n", j+1, fmt.Sprintf("[%.4f, %.4f%s", r.Lo, r.Hi, map[bool]string{true: "]", false: ")"}[j == len(s.Strata)-1]),
			r.Treated, r.Control, fmtG(r.Effect), fmtG(math.Sqrt(r.Variance)), mark)
	}
	for _, t := range []Estimand{ATE, ATT, ATC} {
		if v := s.Violations(t); len(v) > 0 {
			fmt.Fprintf(&b, "  %s\n", s.violationText(t, v))
		}
	}
	if s.Scores.Design.Y != nil {
		for _, t := range []Estimand{ATE, ATT, ATC} {
			e := s.Effect(t)
			if e.Err() != nil {
				fmt.Fprintf(&b, "  %s: %v\n", t, e.Err())
				continue
			}
			fmt.Fprintf(&b, "  %s = %s (SE %s)%s\n", t, fmtG(e.Value), fmtG(e.SE), map[bool]string{true: "", false: "  not supported: " + e.Unsupported}[e.Supported])
		}
	}
	b.WriteString("  These estimates assume no unmeasured confounding, which the data cannot verify; they depend on the covariates measured.\n")
	return b.String()
}

// MarshalJSON is the pipeline view: cut points, strata (range, counts,
// means, effect, variance, empty arm), violations per estimand and, with an
// outcome, the three estimates.
func (s *Strata) MarshalJSON() ([]byte, error) {
	if err := s.Err(); err != nil {
		return failedJSON(err)
	}
	type stratumJSON struct {
		Lo          Num    `json:"lo"`
		Hi          Num    `json:"hi"`
		Treated     int    `json:"treated"`
		Control     int    `json:"control"`
		MeanTreated Num    `json:"mean_treated"`
		MeanControl Num    `json:"mean_control"`
		Effect      Num    `json:"effect"`
		Variance    Num    `json:"variance"`
		EmptyArm    string `json:"empty_arm,omitempty"`
	}
	out := struct {
		Strata     int              `json:"strata"`
		Cuts       []Num            `json:"cuts"`
		Rows       []stratumJSON    `json:"rows"`
		Violations map[string][]int `json:"violations"`
		Estimates  []*Effect        `json:"estimates"`
		Cautions   []string         `json:"cautions"`
	}{Strata: len(s.Strata), Cuts: []Num{}, Violations: map[string][]int{}, Estimates: []*Effect{}, Cautions: Cautions[:2]}
	for _, c := range s.Cuts {
		out.Cuts = append(out.Cuts, Num(c))
	}
	for _, r := range s.Strata {
		out.Rows = append(out.Rows, stratumJSON{Num(r.Lo), Num(r.Hi), r.Treated, r.Control, Num(r.MeanTreated), Num(r.MeanControl),
			Num(r.Effect), Num(r.Variance), r.EmptyArm()})
	}
	for _, t := range []Estimand{ATE, ATT, ATC} {
		v := []int{}
		for _, j := range s.Violations(t) {
			v = append(v, j+1)
		}
		out.Violations[t.String()] = v
		if s.Scores.Design.Y != nil {
			out.Estimates = append(out.Estimates, s.Effect(t))
		}
	}
	return json.Marshal(out)
}
