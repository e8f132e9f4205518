package causal

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"
	"sync"
)

// FitOption tunes the propensity model.
type FitOption func(*logitOptions)

// Ridge adds the penalty (λ/2)·Σ(s_j β_j)² on the covariate coefficients
// (s_j: root mean square of design column j; the intercept is not penalised).
// λ = 0, the default, is plain maximum likelihood.
func Ridge(lambda float64) FitOption { return func(o *logitOptions) { o.ridge = lambda } }

// MaxIterations caps the Newton iterations (default 50).
func MaxIterations(k int) FitOption { return func(o *logitOptions) { o.maxIter = k } }

// Term is one coefficient of the propensity model.
type Term struct {
	Name string  `json:"term"`
	Coef float64 `json:"coef"`
	SE   float64 `json:"se"`
	// Z is Coef/SE (Wald statistic).
	Z float64 `json:"z"`
	// Diverging marks a coefficient driven toward ±∞ by separation: its value
	// is where the iterations stopped, not an estimate.
	Diverging bool `json:"diverging,omitempty"`
}

// Separation is a finding that treatment is deterministic in part of the data:
// a positivity violation. Kind is "complete" (a covariate splits the arms
// entirely) or "quasi-complete" (a level or range holds one arm only).
type Separation struct {
	Term    string `json:"term"`
	Column  string `json:"column"`
	Kind    string `json:"kind"`
	Arm     string `json:"arm"` // the only arm present there: "treated" or "control"
	Units   int    `json:"units"`
	Message string `json:"message"`

	mask []bool // rows of the design where it holds (nil: all rows)
}

// CalibrationBin is one score decile (the deciles of risk of
// Scores.CalibrationTest): mean score against the share treated.
type CalibrationBin struct {
	Lo, Hi       float64 // score range of the bin
	MeanScore    float64
	ShareTreated float64
	N            int
}

// Scores are fitted propensity scores e(x) = P(treated | x) with the model
// report. Build with Study.Propensity.
type Scores struct {
	Design       *Design
	E            []float64 // fitted score per used row
	Terms        []Term
	Iterations   int
	Converged    bool
	Deviance     float64
	NullDeviance float64
	// AUC is the c-statistic: the probability that a random treated unit has
	// a higher score than a random control (ties count ½; Hanley & McNeil 1982).
	AUC         float64
	Calibration []CalibrationBin
	Separation  []Separation
	Ridge       float64
	// Extreme counts units with fitted scores within 1e-8 of 0 or 1.
	Extreme int

	beta []float64
	cov  []float64
	opts logitOptions
	err  error
	// groups are the deciles of risk (calibrationGroups) of E.
	groups []CalibrationGroup
	// trimAlpha is the α of the symmetric trimming these scores were
	// refitted after (0: none); see verdictDefaults.
	trimAlpha float64
	// defE are the scores that defined a trimmed population (the original
	// scores of the kept units): the verdict judges the population by them,
	// so the refit cannot re-trigger the rule that made it (nil: E).
	defE []float64
	// judged caches the verdict's findings (see judgementFor).
	judged *judgeCache
}

// Err returns why the scores could not be computed, or nil.
func (s *Scores) Err() error {
	if s == nil {
		return errors.New("nil Scores")
	}
	if s.err == nil && (s.Design == nil) {
		return errors.New("scores not computed: build them with Study.Propensity()")
	}
	return s.err
}

// Coefficients returns a copy of β (design-column order).
func (s *Scores) Coefficients() []float64 {
	if s == nil {
		return nil
	}
	return append([]float64(nil), s.beta...)
}

// Separated reports whether treatment is deterministic somewhere.
func (s *Scores) Separated() bool { return s != nil && len(s.Separation) > 0 }

// Propensity fits the propensity model: a logistic regression of treatment on
// the covariates with an intercept (see fitLogistic for the algorithm) and
// reports terms, standard errors, convergence, deviance, AUC, calibration by
// score deciles and separation. Separation — a covariate level or range in
// which every unit is in one arm — is a positivity violation and is reported
// in Separation, naming the column or level; the coefficients it drives
// toward ±∞ are marked Diverging rather than shown as estimates.
func (s *Study) Propensity(opts ...FitOption) *Scores {
	d, err := s.Design()
	if err != nil {
		return &Scores{err: err}
	}
	o := logitOptions{}
	for _, f := range opts {
		f(&o)
	}
	key := s.fitKey(d, o)
	o.warm = readFitStart(s.fitDir, key, d.P)
	sc := propensityFor(d, o)
	if sc.err == nil && sc.Converged && len(sc.Separation) == 0 {
		writeFitStart(s.fitDir, key, sc.beta)
	}
	return sc
}

func propensityFor(d *Design, o logitOptions) *Scores {
	sc := &Scores{Design: d, Ridge: o.ridge, opts: o}
	// Separation by covariate levels or ranges. Without a penalty the
	// likelihood has no finite maximum; its supremum is reached with scores
	// of exactly 0 or 1 for the separated units and, for the rest, the
	// maximum-likelihood fit on the remaining units without the terms that
	// are constant there. Fit that (repeating while the remaining units show
	// new separation) so the other coefficients are finite estimates.
	cur := d
	keepCols := make([]int, d.P)
	for j := range keepCols {
		keepCols[j] = j
	}
	pinned := make([]float64, d.N) // −1 free, else the fixed score 0 or 1
	for i := range pinned {
		pinned[i] = -1
	}
	interceptDiverges := false
	diverging := map[string]bool{}
	for round := 0; round < 6; round++ {
		found := findSeparation(cur)
		if len(found) == 0 {
			break
		}
		sc.Separation = append(sc.Separation, found...)
		if o.ridge > 0 {
			break // a ridge penalty has a finite maximum: fit as is
		}
		drop := make([]bool, cur.N)
		force := map[int]bool{}
		for _, f := range found {
			diverging[f.Term] = true
			if f.Column != "" && termIndex(cur, f.Term) < 0 {
				// The reference level of a categorical covariate is pure: the
				// intercept and every level contrast diverge. Drop the
				// indicator of the most frequent remaining level so the
				// remaining units have a baseline again.
				interceptDiverges = true
				best, bestN := -1, -1.0
				for j, tm := range cur.Terms {
					if tm.Column == f.Column && tm.Level != "" {
						diverging[tm.Name] = true
						var n float64
						for k := 0; k < cur.N; k++ {
							n += cur.X[k*cur.P+j]
						}
						if n > bestN {
							best, bestN = j, n
						}
					}
				}
				if best > 0 {
					force[best] = true
				}
			}
			for k := range drop {
				if f.mask == nil || f.mask[k] {
					drop[k] = true
				}
			}
		}
		var rows []int // indices into cur
		for k := range drop {
			if !drop[k] {
				rows = append(rows, k)
			} else {
				pinned[origIndex(d, cur, k)] = cur.T[k]
			}
		}
		next, kc, nonzeroDropped := subDesign(cur, rows, force)
		if nonzeroDropped {
			interceptDiverges = true
		}
		for _, j := range kcDropped(cur, kc) {
			diverging[cur.Terms[j].Name] = true
		}
		mapped := make([]int, len(kc))
		for a, j := range kc {
			mapped[a] = keepCols[j]
		}
		keepCols = mapped
		cur = next
		if cur == nil {
			break
		}
	}
	sc.beta = make([]float64, d.P)
	sc.cov = make([]float64, d.P*d.P)
	for j := range sc.cov {
		sc.cov[j] = math.NaN()
	}
	sc.E = make([]float64, d.N)
	if cur == nil || cur.Treated == 0 || cur.Control == 0 {
		// Every unit is separated: treatment is deterministic everywhere.
		for i := range sc.E {
			sc.E[i] = d.T[i]
		}
		for j := 0; j < d.P; j++ {
			diverging[d.Terms[j].Name] = true
		}
		sc.Converged = false
	} else {
		var start []float64
		if cur == d && len(o.warm) == d.P {
			start = o.warm
		}
		fit, err := fitLogistic(cur.X, cur.N, cur.P, cur.T, nil, start, o)
		if err != nil {
			sc.err = fmt.Errorf("propensity model: %w", err)
			return sc
		}
		for a, j := range keepCols {
			sc.beta[j] = fit.beta[a]
			for b, k := range keepCols {
				sc.cov[j*d.P+k] = fit.cov[a*cur.P+b]
			}
		}
		// Scores: pinned units at 0 or 1, the others from the fit.
		if cur == d && len(fit.e) == d.N {
			copy(sc.E, fit.e) // nothing pinned: the fit's own scores
		}
		for i := 0; i < d.N && cur != d; i++ {
			if pinned[i] >= 0 {
				sc.E[i] = pinned[i]
				continue
			}
			row := d.X[i*d.P : (i+1)*d.P]
			var eta float64
			for _, j := range keepCols {
				eta += row[j] * sc.beta[j]
			}
			sc.E[i] = sigmoid(eta)
		}
		sc.Iterations, sc.Converged = fit.iterations, fit.converged
		sc.Deviance = fit.deviance
		if o.ridge == 0 && len(sc.Separation) == 0 {
			sc.combinationCheck(fit, diverging)
		}
	}
	sc.NullDeviance = nullDeviance(d.T)
	if interceptDiverges {
		diverging["(intercept)"] = true
	}
	for _, e := range sc.E {
		if e < 1e-8 || e > 1-1e-8 {
			sc.Extreme++
		}
	}
	for j := 0; j < d.P; j++ {
		t := Term{Name: d.Terms[j].Name, Coef: sc.beta[j], SE: math.Sqrt(sc.cov[j*d.P+j])}
		t.Z = t.Coef / t.SE
		if diverging[t.Name] {
			t.Diverging = true
			t.Coef, t.SE, t.Z = math.NaN(), math.NaN(), math.NaN()
		}
		sc.Terms = append(sc.Terms, t)
	}
	sorted := sortScores(sc.E, d.T)
	sc.AUC = aucSorted(sorted)
	sc.groups = calibrationGroups(sorted)
	for _, g := range sc.groups {
		sc.Calibration = append(sc.Calibration, CalibrationBin{Lo: g.Lo, Hi: g.Hi, MeanScore: g.MeanScore, ShareTreated: g.ShareTreated, N: g.N})
	}
	return sc
}

func nullDeviance(t []float64) float64 {
	var s float64
	for _, v := range t {
		s += v
	}
	p := s / float64(len(t))
	return -2 * float64(len(t)) * (p*math.Log(p) + (1-p)*math.Log(1-p))
}

// origIndex maps row k of a sub-design back to its index in the full design.
func origIndex(full, cur *Design, k int) int {
	if cur == full {
		return k
	}
	return cur.parent[k]
}

// subDesign keeps the given rows (indices into d) and drops the columns that
// are constant on them (the intercept stays). It reports the kept columns and
// whether a dropped column was constant at a non-zero value (then the
// intercept of the full model is not identified either). nil when no rows
// remain.
func subDesign(d *Design, rows []int, force map[int]bool) (*Design, []int, bool) {
	if len(rows) == 0 {
		return nil, nil, false
	}
	var kc []int
	nonzero := false
	for j := 0; j < d.P; j++ {
		if j == 0 {
			kc = append(kc, 0)
			continue
		}
		first := d.X[rows[0]*d.P+j]
		constant := true
		for _, k := range rows {
			if d.X[k*d.P+j] != first {
				constant = false
				break
			}
		}
		if force[j] {
			continue
		}
		if !constant {
			kc = append(kc, j)
		} else if first != 0 {
			nonzero = true
		}
	}
	s := &Design{N: len(rows), RowsTotal: d.RowsTotal, P: len(kc), Covariates: d.Covariates, roles: d.roles, study: d.study}
	s.X = make([]float64, s.N*s.P)
	s.T = make([]float64, s.N)
	s.Rows = make([]int, s.N)
	s.parent = make([]int, s.N)
	for a, j := range kc {
		s.Terms = append(s.Terms, d.Terms[j])
		_ = a
	}
	for r, k := range rows {
		s.T[r] = d.T[k]
		s.Rows[r] = d.Rows[k]
		if d.parent != nil {
			s.parent[r] = d.parent[k]
		} else {
			s.parent[r] = k
		}
		if s.T[r] == 1 {
			s.Treated++
		}
		for a, j := range kc {
			s.X[r*s.P+a] = d.X[k*d.P+j]
		}
	}
	s.Control = s.N - s.Treated
	return s, kc, nonzero
}

func kcDropped(d *Design, kc []int) []int {
	keep := map[int]bool{}
	for _, j := range kc {
		keep[j] = true
	}
	var out []int
	for j := 0; j < d.P; j++ {
		if !keep[j] {
			out = append(out, j)
		}
	}
	return out
}

// combinationCheck flags separation by a combination of covariates: fitted
// scores at 0 or 1 with coefficients growing without bound.
func (sc *Scores) combinationCheck(fit *logitFit, diverging map[string]bool) {
	d := sc.Design
	extreme := 0
	for _, e := range fit.e {
		if e < 1e-8 || e > 1-1e-8 {
			extreme++
		}
	}
	if extreme == 0 || (fit.maxStdCoef <= 10 && fit.converged) {
		return
	}
	// Separation by a combination of covariates: name the terms with the
	// largest standardised coefficients.
	type tz struct {
		name string
		v    float64
	}
	var big []tz
	for j := 1; j < d.P; j++ {
		v := math.Abs(fit.beta[j]) * rmsCol(d, j)
		if v > 5 {
			big = append(big, tz{d.Terms[j].Name, v})
		}
	}
	sort.Slice(big, func(a, b int) bool { return big[a].v > big[b].v })
	var names []string
	for _, b := range big {
		names = append(names, b.name)
		diverging[b.name] = true
	}
	sc.Separation = append(sc.Separation, Separation{
		Term: strings.Join(names, "+"), Kind: "quasi-complete", Units: extreme,
		Message: fmt.Sprintf("%d units have fitted scores of 0 or 1: a combination of %s predicts treatment exactly there", extreme, strings.Join(names, ", ")),
	})
}

func rmsCol(d *Design, j int) float64 {
	var s float64
	for i := 0; i < d.N; i++ {
		v := d.X[i*d.P+j]
		s += v * v
	}
	return math.Sqrt(s / float64(d.N))
}

// findSeparation looks, before any fit, for covariate levels and ranges that
// hold one arm only: for a 0/1 term or categorical level, all units at that
// level in one arm (quasi-complete separation); for a numeric covariate, the
// arms' ranges not overlapping (complete separation).
func findSeparation(d *Design) []Separation {
	var out []Separation
	arm := func(t float64) string {
		if t == 1 {
			return "treated"
		}
		return "control"
	}
	// Per-term ranges by arm, in one parallel pass over the rows.
	newRanges := func() [][4]float64 {
		r := make([][4]float64, d.P)
		for j := range r {
			r[j] = [4]float64{math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)}
		}
		return r
	}
	_, count := chunking(d.N)
	parts := make([][][4]float64, count)
	parallelChunks(d.N, func(c, lo, hi int) {
		ranges := newRanges()
		for k := lo; k < hi; k++ {
			row := d.X[k*d.P : (k+1)*d.P]
			off := 2
			if d.T[k] == 1 {
				off = 0
			}
			for j, v := range row {
				r := &ranges[j]
				if v < r[off] {
					r[off] = v
				}
				if v > r[off+1] {
					r[off+1] = v
				}
			}
		}
		parts[c] = ranges
	})
	ranges := newRanges()
	for _, part := range parts {
		for j := range ranges {
			for a := 0; a < 4; a += 2 {
				ranges[j][a] = math.Min(ranges[j][a], part[j][a])
				ranges[j][a+1] = math.Max(ranges[j][a+1], part[j][a+1])
			}
		}
	}
	for ci, c := range d.Covariates {
		if c.Kind == Categorical {
			nl := len(c.Levels)
			n1 := make([]int, nl)
			n0 := make([]int, nl)
			for k, i := range d.Rows {
				if d.T[k] == 1 {
					n1[c.Codes[i]]++
				} else {
					n0[c.Codes[i]]++
				}
			}
			for l := 0; l < nl; l++ {
				if n1[l]+n0[l] == 0 || (n1[l] > 0 && n0[l] > 0) {
					continue
				}
				a, m := "treated", n1[l]
				if n1[l] == 0 {
					a, m = "control", n0[l]
				}
				term := c.Name + "=" + c.Levels[l]
				mask := make([]bool, d.N)
				for k, i := range d.Rows {
					mask[k] = c.Codes[i] == int32(l)
				}
				out = append(out, Separation{Term: term, Column: c.Name, Kind: "quasi-complete", Arm: a, Units: m, mask: mask,
					Message: fmt.Sprintf("all %d units with %s are %s: treatment is deterministic there (positivity violated)", m, term, plural(m, a+" unit", a+"s"))})
			}
			continue
		}
		j := termIndex(d, c.Name)
		_ = ci
		if j < 0 {
			continue
		}
		if d.Terms[j].Binary {
			var n1, n0 [2]int
			for k := 0; k < d.N; k++ {
				v := int(d.X[k*d.P+j])
				if d.T[k] == 1 {
					n1[v]++
				} else {
					n0[v]++
				}
			}
			for v := 0; v < 2; v++ {
				if n1[v]+n0[v] == 0 || (n1[v] > 0 && n0[v] > 0) {
					continue
				}
				a, m := "treated", n1[v]
				if n1[v] == 0 {
					a, m = "control", n0[v]
				}
				term := fmt.Sprintf("%s=%d", c.Name, v)
				mask := make([]bool, d.N)
				for k := range mask {
					mask[k] = d.X[k*d.P+j] == float64(v)
				}
				out = append(out, Separation{Term: c.Name, Column: c.Name, Kind: "quasi-complete", Arm: a, Units: m, mask: mask,
					Message: fmt.Sprintf("all %d units with %s are %s: treatment is deterministic there (positivity violated)", m, term, plural(m, a+" unit", a+"s"))})
			}
			continue
		}
		lo1, hi1, lo0, hi0 := ranges[j][0], ranges[j][1], ranges[j][2], ranges[j][3]
		if hi1 < lo0 || hi0 < lo1 {
			msg := fmt.Sprintf("%s separates the arms completely: treated range [%g, %g], control range [%g, %g] do not overlap (positivity violated)", c.Name, lo1, hi1, lo0, hi0)
			out = append(out, Separation{Term: c.Name, Column: c.Name, Kind: "complete", Arm: arm(1) + "/" + arm(0), Units: d.N, Message: msg})
		}
	}
	return out
}

func termIndex(d *Design, name string) int {
	for j, t := range d.Terms {
		if t.Name == name {
			return j
		}
	}
	return -1
}

type scoreT struct{ e, t float64 }

// sortScores pairs scores with treatment and sorts by score: each arm's
// scores in two halves sorted concurrently (sortScoresRun) and merged, then
// the arms merged; at equal scores treated units come first (the AUC's
// mid-ranks and the calibration bins do not depend on order within ties).
func sortScores(e, t []float64) []scoreT {
	var e1, e0 []float64
	for i, v := range e {
		if t[i] == 1 {
			e1 = append(e1, v)
		} else {
			e0 = append(e0, v)
		}
	}
	// Four runs (each arm in two halves) sorted concurrently, then merged.
	h1, h0 := len(e1)/2, len(e0)/2
	var wg sync.WaitGroup
	for _, run := range [][]float64{e1[:h1], e1[h1:], e0[:h0], e0[h0:]} {
		wg.Add(1)
		go func(r []float64) { defer wg.Done(); sortScoresRun(r) }(run)
	}
	wg.Wait()
	e1 = mergeSorted(e1[:h1], e1[h1:])
	e0 = mergeSorted(e0[:h0], e0[h0:])
	p := make([]scoreT, 0, len(e))
	i, j := 0, 0
	for i < len(e1) || j < len(e0) {
		if j == len(e0) || (i < len(e1) && e1[i] <= e0[j]) {
			p = append(p, scoreT{e1[i], 1})
			i++
		} else {
			p = append(p, scoreT{e0[j], 0})
			j++
		}
	}
	return p
}

// sortScoresRun sorts scores in place: by radixSort on their floatKey when
// the run is long and holds no NaN, else by slices.Sort (sorting is a fifth
// of a large propensity fit otherwise).
func sortScoresRun(x []float64) {
	if len(x) < radixSmall {
		slices.Sort(x)
		return
	}
	keys := make([]uint64, len(x))
	for i, v := range x {
		if v != v { // NaN
			slices.Sort(x)
			return
		}
		keys[i] = floatKey(v)
	}
	keys, _ = radixSort(keys, nil, nil, nil)
	for i, k := range keys {
		x[i] = keyFloat(k)
	}
}

// mergeSorted merges two ascending runs into a new slice.
func mergeSorted(a, b []float64) []float64 {
	out := make([]float64, 0, len(a)+len(b))
	i, j := 0, 0
	for i < len(a) && j < len(b) {
		if a[i] <= b[j] {
			out = append(out, a[i])
			i++
		} else {
			out = append(out, b[j])
			j++
		}
	}
	out = append(out, a[i:]...)
	return append(out, b[j:]...)
}

// auc is the c-statistic of scores e for treatment t.
func auc(e, t []float64) float64 { return aucSorted(sortScores(e, t)) }

// aucSorted is the Mann–Whitney form of the c-statistic:
// (R1 − n1(n1+1)/2)/(n1 n0) with R1 the sum of the treated units' mid-ranks
// (Hanley & McNeil 1982).
func aucSorted(p []scoreT) float64 {
	n := len(p)
	var r1, n1 float64
	for i := 0; i < n; {
		j := i
		for j < n && p[j].e == p[i].e {
			j++
		}
		mid := float64(i+j+1) / 2 // ranks i+1..j
		for k := i; k < j; k++ {
			if p[k].t == 1 {
				r1 += mid
				n1++
			}
		}
		i = j
	}
	n0 := float64(n) - n1
	return (r1 - n1*(n1+1)/2) / (n1 * n0)
}
