package causal

import (
	"errors"
	"fmt"
	"math"
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
// Weighted versions use weighted means m_a = Σwx/Σw, weighted variances
// Σw(x−m_a)²/(Σw − Σw²/Σw) (Austin & Stuart 2015) and weighted empirical CDFs.
type BalanceSheet struct {
	Rows     []BalanceRow
	Weighted bool
	Label    string // what the weights are, e.g. "ATE weights"
	err      error
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
	return balanceFor(d, w, label)
}

func balanceFor(d *Design, w []float64, label string) *BalanceSheet {
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
	b := &BalanceSheet{Weighted: w != nil, Label: label, Rows: make([]BalanceRow, d.P-1)}
	// One column per task, columns in parallel (each computed by one worker
	// in row order, so the result does not depend on the number of cores).
	scratch := make([]*balanceScratch, columnWorkers(d.P-1, d.N, balanceScratchBytes))
	parallelColumns(d.P-1, len(scratch), func(worker, k int) {
		if scratch[worker] == nil {
			scratch[worker] = newBalanceScratch(d.N, w != nil)
		}
		b.Rows[k] = balanceColumn(d, k+1, w, scratch[worker])
	})
	return b
}

// balanceScratchBytes is the scratch memory of one balance worker per row.
const balanceScratchBytes = 5*8 + 2*4

// balanceScratch holds one worker's buffers, reused across columns: the
// column split by arm (treated first), its weights, and the sort buffers.
type balanceScratch struct {
	x, w, ws   []float64
	keys, tmpK []uint64
	idx, tmpI  []int32
}

func newBalanceScratch(n int, weighted bool) *balanceScratch {
	s := &balanceScratch{x: make([]float64, n), keys: make([]uint64, n), tmpK: make([]uint64, n)}
	if weighted {
		s.w, s.ws = make([]float64, n), make([]float64, n)
		s.idx, s.tmpI = make([]int32, n), make([]int32, n)
	}
	return s
}

// balanceColumn is the balance row of design column j.
func balanceColumn(d *Design, j int, w []float64, s *balanceScratch) BalanceRow {
	r := BalanceRow{Term: d.Terms[j].Name, Binary: d.Terms[j].Binary}
	n1 := d.Treated
	x1, x0 := s.x[:n1], s.x[n1:d.N]
	var w1, w0 []float64
	if w != nil {
		w1, w0 = s.w[:n1], s.w[n1:d.N]
	}
	a, c := 0, n1
	nan := false
	for i := 0; i < d.N; i++ {
		v := d.X[i*d.P+j]
		nan = nan || v != v
		k := c
		if d.T[i] == 1 {
			k = a
			a++
		} else {
			c++
		}
		s.x[k] = v
		if w != nil {
			s.w[k] = w[i]
		}
	}
	r.SMD, r.VarianceRatio = smdRatio(x1, x0, nil, nil, r.Binary)
	r.SMDWeighted, r.VarianceRatioWeighted, r.KSWeighted = math.NaN(), math.NaN(), math.NaN()
	if w != nil {
		r.SMDWeighted, r.VarianceRatioWeighted = smdRatio(x1, x0, w1, w0, r.Binary)
	}
	if nan { // as stat.KolmogorovSmirnov
		r.KS = math.NaN()
		return r
	}
	// Each arm sorted once (stably, with its weights carried along); the
	// order serves the unweighted and the weighted KS statistic.
	ws1, ws0 := sortArm(x1, w1, s, 0), sortArm(x0, w0, s, n1)
	r.KS = stat.KolmogorovSmirnov(x1, nil, x0, nil)
	if w != nil {
		r.KSWeighted = stat.KolmogorovSmirnov(x1, ws1, x0, ws0)
	}
	return r
}

// smdRatio is the SMD and variance ratio of one term between the arms
// (weights nil: unweighted; see BalanceSheet for the formulas).
func smdRatio(x1, x0, w1, w0 []float64, binary bool) (smd, vr float64) {
	m1, v1 := meanVar(x1, w1)
	m0, v0 := meanVar(x0, w0)
	vr = math.NaN()
	if binary {
		v1, v0 = m1*(1-m1), m0*(1-m0)
	} else if v0 > 0 {
		vr = v1 / v0
	}
	return smdValue(m1, m0, v1, v0), vr
}

// sortArm sorts x in place (radixSort of floatKey) and, when w is given,
// returns w in the same order in s.ws[off:off+len(x)].
func sortArm(x, w []float64, s *balanceScratch, off int) []float64 {
	n := len(x)
	keys := s.keys[:n]
	for i, v := range x {
		keys[i] = floatKey(v)
	}
	var idx []int32
	if w != nil {
		idx = s.idx[:n]
		for i := range idx {
			idx[i] = int32(i)
		}
	}
	keys, idx = radixSort(keys, idx, s.tmpK[:n], s.tmpI[:min(n, len(s.tmpI))])
	for i, k := range keys {
		x[i] = keyFloat(k)
	}
	if w == nil {
		return nil
	}
	ws := s.ws[off : off+n]
	for i, k := range idx {
		ws[i] = w[k]
	}
	return ws
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
