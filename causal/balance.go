package causal

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/stat"
)

// Balance thresholds.
const (
	// SMDThreshold flags |SMD| above 0.1 (Austin 2009).
	SMDThreshold = 0.1
	// VarianceRatioLow and VarianceRatioHigh bound acceptable variance ratios
	// (Rubin 2001).
	VarianceRatioLow  = 0.5
	VarianceRatioHigh = 2.0
)

// BalanceRow is the balance of one design term between the arms.
type BalanceRow struct {
	Term   string
	Binary bool
	// Before weighting.
	SMD           float64
	VarianceRatio float64 // NaN for 0/1 terms (not informative)
	KS            float64
	// After weighting (NaN when no weights were given).
	SMDWeighted           float64
	VarianceRatioWeighted float64
	KSWeighted            float64
}

// Imbalanced reports |SMD| > 0.1 (Austin 2009), after weighting if weights were given.
func (r BalanceRow) Imbalanced() bool {
	v := r.SMD
	if !math.IsNaN(r.SMDWeighted) {
		v = r.SMDWeighted
	}
	return math.Abs(v) > SMDThreshold
}

// VarianceOff reports a variance ratio outside [0.5, 2] (Rubin 2001), after
// weighting if weights were given.
func (r BalanceRow) VarianceOff() bool {
	v := r.VarianceRatio
	if !math.IsNaN(r.VarianceRatioWeighted) {
		v = r.VarianceRatioWeighted
	}
	return !math.IsNaN(v) && (v < VarianceRatioLow || v > VarianceRatioHigh)
}

// BalanceSheet holds per-term balance diagnostics, before and (optionally)
// after a weight vector. For a term x and arm a (1 treated, 0 control):
//
//	SMD = (m1 − m0) / sqrt((s1² + s0²)/2)            (Austin 2009, pooled-SD form)
//	for a 0/1 term s_a² = p_a(1 − p_a)               (Austin 2009, binary form)
//	variance ratio = s1²/s0²                          (Rubin 2001)
//	KS = max_x |F1(x) − F0(x)|                         (two-sample Kolmogorov–Smirnov statistic)
//
// Weighted versions use weighted means m_a = Σwx/Σw and weighted empirical
// CDFs. The weighted SMD keeps the unweighted denominator √((s1² + s0²)/2)
// (for a 0/1 term the unweighted p_a) of the data before weighting, so that
// before and after share one scale and a change reflects the means only (the
// convention of Rosenbaum & Rubin 1985, Am. Statist. 39(1), 33–38, for
// matched samples, and of Stuart 2010, Statist. Sci. 25(1), 1–21; cited from
// memory). BalanceOptions.WeightedSD selects instead the weighted variances
// Σw(x−m_a)²/(Σw − Σw²/Σw) of Austin & Stuart (2015). The weighted variance
// ratio always uses the weighted variances.
type BalanceSheet struct {
	Rows     []BalanceRow
	Weighted bool
	Label    string // what the weights are, e.g. "ATE weights"
	Options  BalanceOptions
	err      error
}

// BalanceOptions chooses the denominator of the weighted SMD.
type BalanceOptions struct {
	// WeightedSD: the weighted arm variances (Austin & Stuart 2015) rather
	// than the unweighted pooled SD (the default; see BalanceSheet).
	WeightedSD bool
}

// Err returns why the sheet could not be computed, or nil.
func (b *BalanceSheet) Err() error {
	if b == nil {
		return errors.New("nil BalanceSheet")
	}
	return b.err
}

// MaxAbsSMD is the largest |SMD| (after weighting when weighted).
func (b *BalanceSheet) MaxAbsSMD() float64 {
	if b.Err() != nil {
		return math.NaN()
	}
	var m float64
	for _, r := range b.Rows {
		v := r.SMD
		if b.Weighted {
			v = r.SMDWeighted
		}
		if !math.IsNaN(v) {
			m = math.Max(m, math.Abs(v))
		}
	}
	return m
}

// Balance is the balance of the Study's covariates before any weighting.
func (s *Study) Balance() *BalanceSheet { return s.BalanceWeighted(nil, "") }

// BalanceWeighted adds balance after weighting with w (one weight per used
// row, non-negative, positive total in each arm). label names the weights.
func (s *Study) BalanceWeighted(w []float64, label string) *BalanceSheet {
	d, err := s.Design()
	if err != nil {
		return &BalanceSheet{err: err}
	}
	return balanceForWith(d, w, label, BalanceOptions{})
}

// BalanceWeightedWith is BalanceWeighted with the SMD denominator chosen by o.
func (s *Study) BalanceWeightedWith(w []float64, label string, o BalanceOptions) *BalanceSheet {
	d, err := s.Design()
	if err != nil {
		return &BalanceSheet{err: err}
	}
	return balanceForWith(d, w, label, o)
}

func balanceFor(d *Design, w []float64, label string) *BalanceSheet {
	return balanceForWith(d, w, label, BalanceOptions{})
}

func balanceForWith(d *Design, w []float64, label string, o BalanceOptions) *BalanceSheet {
	if w != nil {
		if len(w) != d.N {
			return &BalanceSheet{err: fmt.Errorf("balance: %d weights for %d rows", len(w), d.N)}
		}
		var s1, s0 float64
		for i, v := range w {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				return &BalanceSheet{err: fmt.Errorf("balance: weight %d is %g: weights must be finite and non-negative", i+1, v)}
			}
			if d.T[i] == 1 {
				s1 += v
			} else {
				s0 += v
			}
		}
		if s1 == 0 || s0 == 0 {
			return &BalanceSheet{err: errors.New("balance: the weights are zero for every unit of one arm")}
		}
	}
	b := &BalanceSheet{Weighted: w != nil, Label: label, Options: o}
	for j := 1; j < d.P; j++ {
		x := d.Col(j)
		r := BalanceRow{Term: d.Terms[j].Name, Binary: d.Terms[j].Binary}
		r.SMD, r.VarianceRatio, r.KS = balanceOne(x, d.T, nil, r.Binary)
		r.SMDWeighted, r.VarianceRatioWeighted, r.KSWeighted = math.NaN(), math.NaN(), math.NaN()
		if w != nil {
			r.SMDWeighted, r.VarianceRatioWeighted, r.KSWeighted = balanceOne(x, d.T, w, r.Binary)
			if !o.WeightedSD {
				r.SMDWeighted = smdUnweightedSD(x, d.T, w, r.Binary)
			}
		}
		b.Rows = append(b.Rows, r)
	}
	return b
}

func balanceOne(x, t, w []float64, binary bool) (smd, vr, ks float64) {
	var x1, x0, w1, w0 []float64
	for i, v := range x {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		if t[i] == 1 {
			x1 = append(x1, v)
			w1 = append(w1, wi)
		} else {
			x0 = append(x0, v)
			w0 = append(w0, wi)
		}
	}
	m1, v1 := meanVar(x1, w1)
	m0, v0 := meanVar(x0, w0)
	vr = math.NaN()
	if binary {
		v1, v0 = m1*(1-m1), m0*(1-m0)
	} else if v0 > 0 {
		vr = v1 / v0
	}
	smd = smdValue(m1, m0, v1, v0)
	sortPair(x1, w1)
	sortPair(x0, w0)
	ks = stat.KolmogorovSmirnov(x1, w1, x0, w0)
	return smd, vr, ks
}

// smdUnweightedSD is the weighted SMD over the unweighted pooled SD:
// (m1 − m0)/√((s1² + s0²)/2) with weighted means m_a and the arms' unweighted
// variances s_a² (p_a(1 − p_a) for a 0/1 term).
func smdUnweightedSD(x, t, w []float64, binary bool) float64 {
	var x1, x0, w1, w0 []float64
	for i, v := range x {
		if t[i] == 1 {
			x1, w1 = append(x1, v), append(w1, w[i])
		} else {
			x0, w0 = append(x0, v), append(w0, w[i])
		}
	}
	m1, _ := meanVar(x1, w1)
	m0, _ := meanVar(x0, w0)
	p1, v1 := meanVar(x1, nil)
	p0, v0 := meanVar(x0, nil)
	if binary {
		v1, v0 = p1*(1-p1), p0*(1-p0)
	}
	return smdValue(m1, m0, v1, v0)
}

func sortPair(x, w []float64) {
	idx := make([]int, len(x))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
	xs := make([]float64, len(x))
	ws := make([]float64, len(x))
	for k, i := range idx {
		xs[k], ws[k] = x[i], w[i]
	}
	copy(x, xs)
	copy(w, ws)
}

// String is the terminal view.
func (b *BalanceSheet) String() string {
	if err := b.Err(); err != nil {
		return "balancesheet: " + err.Error()
	}
	var s strings.Builder
	title := "Covariate balance (|SMD| > 0.1 flagged, Austin 2009; variance ratio outside [0.5, 2] flagged, Rubin 2001)"
	fmt.Fprintln(&s, title)
	if b.Weighted {
		if b.Options.WeightedSD {
			fmt.Fprintln(&s, "  weighted SMD over the weighted arm SDs (Austin & Stuart 2015)")
		} else {
			fmt.Fprintln(&s, "  weighted SMD over the unweighted pooled SD, the same denominator as before weighting")
		}
		lbl := b.Label
		if lbl == "" {
			lbl = "weights"
		}
		fmt.Fprintf(&s, "  %-26s %8s %8s %6s | %8s %8s %6s  (after %s)\n", "term", "SMD", "var.rat", "KS", "SMD", "var.rat", "KS", lbl)
	} else {
		fmt.Fprintf(&s, "  %-26s %8s %8s %6s\n", "term", "SMD", "var.rat", "KS")
	}
	for _, r := range b.Rows {
		flag := ""
		if r.Imbalanced() {
			flag += " *SMD"
		}
		if r.VarianceOff() {
			flag += " *VR"
		}
		line := fmt.Sprintf("  %-26s %+8.3f %8s %6.3f", r.Term, r.SMD, fmtRatio(r.VarianceRatio), r.KS)
		if b.Weighted {
			line += fmt.Sprintf(" | %+8.3f %8s %6.3f", r.SMDWeighted, fmtRatio(r.VarianceRatioWeighted), r.KSWeighted)
		}
		fmt.Fprintln(&s, line+flag)
	}
	return s.String()
}

func fmtRatio(v float64) string {
	if math.IsNaN(v) {
		return "—"
	}
	return fmt.Sprintf("%.3f", v)
}
