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
	b := &BalanceSheet{Weighted: w != nil, Label: label, Options: o, Rows: make([]BalanceRow, d.P-1)}
	// One column per task, columns in parallel (each computed by one worker
	// in row order, so the result does not depend on the number of cores).
	// Tasks are groups of balanceGroup adjacent columns, read from the
	// row-major design in one pass per group.
	var ws []float64 // the weights split by arm (treated first), shared
	if w != nil {
		ws = make([]float64, d.N)
		a, c := 0, d.Treated
		for i, v := range w {
			if d.T[i] == 1 {
				ws[a] = v
				a++
			} else {
				ws[c] = v
				c++
			}
		}
	}
	groups := (d.P - 1 + balanceGroup - 1) / balanceGroup
	scratch := make([]*balanceScratch, columnWorkers(groups, d.N, balanceScratchBytes))
	parallelColumns(groups, len(scratch), func(worker, g int) {
		if scratch[worker] == nil {
			scratch[worker] = newBalanceScratch(d.N, w != nil)
		}
		s := scratch[worker]
		j0, j1 := 1+g*balanceGroup, min(d.P, 1+(g+1)*balanceGroup)
		nan := s.nan[:j1-j0]
		clear(nan)
		a, c := 0, d.Treated
		for i := 0; i < d.N; i++ {
			k := c
			if d.T[i] == 1 {
				k = a
				a++
			} else {
				c++
			}
			row := d.X[i*d.P+j0 : i*d.P+j1]
			for q, v := range row {
				s.xg[q][k] = v
				nan[q] = nan[q] || v != v
			}
		}
		for q := range j1 - j0 {
			b.Rows[j0+q-1] = balanceColumn(d, j0+q, s.xg[q], ws, nan[q], o, s)
		}
	})
	return b
}

// balanceGroup is the number of adjacent design columns a balance task
// reads from the design in one pass.
const balanceGroup = 4

// balanceScratchBytes is the scratch memory of one balance worker per row.
const balanceScratchBytes = (balanceGroup+6)*8 + 2*4 + 4/8

// balanceScratch holds one worker's buffers, reused across columns: the
// column split by arm (treated first), its weights, and the sort buffers.
type balanceScratch struct {
	xg               [balanceGroup][]float64 // a group's columns split by arm
	nan              [balanceGroup]bool
	ws, w2, out      []float64
	keys, tmpK       []uint64
	idx, tmpI, count []int32
}

func newBalanceScratch(n int, weighted bool) *balanceScratch {
	s := &balanceScratch{out: make([]float64, n), keys: make([]uint64, n), tmpK: make([]uint64, n),
		idx: make([]int32, n), tmpI: make([]int32, n)}
	for q := range s.xg {
		s.xg[q] = make([]float64, n)
	}
	if weighted {
		s.ws, s.w2 = make([]float64, n), make([]float64, n)
	}
	return s
}

// balanceColumn is the balance row of design column j, given the column
// and the weights (nil: none) split by arm, treated first; nan says whether
// the column holds a NaN.
func balanceColumn(d *Design, j int, x, w []float64, nan bool, o BalanceOptions, s *balanceScratch) BalanceRow {
	r := BalanceRow{Term: d.Terms[j].Name, Binary: d.Terms[j].Binary}
	n1 := d.Treated
	x1, x0 := x[:n1], x[n1:d.N]
	var w1, w0 []float64
	if w != nil {
		w1, w0 = w[:n1], w[n1:d.N]
	}
	var v1, v0 float64 // the unweighted variances of the SMD's denominator
	r.SMD, r.VarianceRatio, v1, v0 = smdRatio(x1, x0, nil, nil, r.Binary)
	r.SMDWeighted, r.VarianceRatioWeighted, r.KSWeighted = math.NaN(), math.NaN(), math.NaN()
	if w != nil {
		var m1, m0 float64
		r.SMDWeighted, r.VarianceRatioWeighted, _, _ = smdRatio(x1, x0, w1, w0, r.Binary)
		if !o.WeightedSD {
			m1, _ = meanVar(x1, w1)
			m0, _ = meanVar(x0, w0)
			r.SMDWeighted = smdValue(m1, m0, v1, v0)
		}
	}
	if nan { // as stat.KolmogorovSmirnov
		r.KS = math.NaN()
		return r
	}
	if r.Binary {
		// Two values: the CDFs differ only at 0, so KS = |F1(0) − F0(0)|.
		r.KS = math.Abs(zeroShare(x1, nil) - zeroShare(x0, nil))
		if w != nil {
			r.KSWeighted = math.Abs(zeroShare(x1, w1) - zeroShare(x0, w0))
		}
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

// zeroShare is the (weighted) share of the values of x that are 0.
func zeroShare(x, w []float64) float64 {
	var zero, all float64
	for i, v := range x {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		all += wi
		if v == 0 {
			zero += wi
		}
	}
	return zero / all
}

// smdRatio is the SMD and variance ratio of one term between the arms
// (weights nil: unweighted; see BalanceSheet for the formulas), with the
// arm variances in the SMD's denominator (p_a(1 − p_a) for a 0/1 term).
func smdRatio(x1, x0, w1, w0 []float64, binary bool) (smd, vr, v1, v0 float64) {
	m1, v1 := meanVar(x1, w1)
	m0, v0 := meanVar(x0, w0)
	vr = math.NaN()
	if binary {
		v1, v0 = m1*(1-m1), m0*(1-m0)
	} else if v0 > 0 {
		vr = v1 / v0
	}
	return smdValue(m1, m0, v1, v0), vr, v1, v0
}

// sortArm sorts x in place, stably, and, when w is given, returns w in the
// same order in s.ws[off:off+len(x)]. It is a distribution sort: one pass
// scatters the values into about len(x)/4 buckets by their place between the
// minimum and the maximum (the bucket index is a non-decreasing function of
// the value, so buckets are in order), then each bucket is sorted where it
// lies: by insertion when it is small, else by radixSort of floatKey (many
// ties, or values crowded in a narrow range, stay O(n)).
func sortArm(x, w []float64, s *balanceScratch, off int) []float64 {
	n := len(x)
	var ws []float64
	if w != nil {
		ws = s.ws[off : off+n]
	}
	if n == 0 {
		return ws
	}
	lo, hi := x[0], x[0]
	for _, v := range x {
		if v < lo {
			lo = v
		}
		if v > hi {
			hi = v
		}
	}
	if lo == hi || n < 64 || math.IsInf(hi-lo, 0) {
		radixSegment(x, w, ws, s)
		return ws
	}
	nb := max(1, n/4)
	scale := float64(nb) / (hi - lo)
	bucket := func(v float64) int { return min(nb-1, int((v-lo)*scale)) }
	if cap(s.count) < nb+1 {
		s.count = make([]int32, nb+1)
	}
	count := s.count[:nb+1]
	clear(count)
	for _, v := range x {
		count[bucket(v)+1]++
	}
	for b := 1; b <= nb; b++ {
		count[b] += count[b-1]
	}
	// Scatter into s.out (and ws), stably; count[b] ends at bucket b's end.
	out := s.out[:n]
	pos := s.tmpI[:nb]
	for b := range pos {
		pos[b] = count[b]
	}
	for i, v := range x {
		b := bucket(v)
		out[pos[b]] = v
		if w != nil {
			ws[pos[b]] = w[i]
		}
		pos[b]++
	}
	copy(x, out)
	wsrc := ws
	if w != nil {
		// The scattered weights move to s.w2 so that ws can receive the
		// sorted order of large buckets.
		wsrc = s.w2[:n]
		copy(wsrc, ws)
	}
	for b := 0; b < nb; b++ {
		a, e := int(count[b]), int(count[b+1])
		var from, to []float64 // the bucket's weights, scattered and sorted
		if w != nil {
			from, to = wsrc[a:e], ws[a:e]
		}
		switch {
		case e-a == 1:
			copy(to, from)
		case e-a <= 64:
			insertionSort(x[a:e], from, to)
		case e > a:
			radixSegment(x[a:e], from, to, s)
		}
	}
	return ws
}

// insertionSort sorts x stably, moving w along into ws (both nil when there
// are no weights; ws may be w's copy or a separate slice of the same length).
func insertionSort(x, w, ws []float64) {
	if w != nil {
		copy(ws, w)
	}
	for i := 1; i < len(x); i++ {
		v := x[i]
		var wv float64
		if w != nil {
			wv = ws[i]
		}
		j := i
		for j > 0 && x[j-1] > v {
			x[j] = x[j-1]
			if w != nil {
				ws[j] = ws[j-1]
			}
			j--
		}
		x[j] = v
		if w != nil {
			ws[j] = wv
		}
	}
}

// radixSegment sorts x stably by radixSort of floatKey and writes w in that
// order to ws (w nil: no weights).
func radixSegment(x, w, ws []float64, s *balanceScratch) {
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
	keys, idx = radixSort(keys, idx, s.tmpK[:n], s.tmpI[:n])
	for i, k := range keys {
		x[i] = keyFloat(k)
	}
	for i, k := range idx {
		ws[i] = w[k]
	}
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
