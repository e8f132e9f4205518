package causal

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"sync"
)

// CellOptions tune how a covariate subset is cut into cells.
type CellOptions struct {
	// Bins is the number of quantile bins for a continuous covariate
	// (default 5). A numeric covariate with at most Bins distinct values is
	// used by its values, like a categorical one.
	Bins int
	// Thin flags an arm with fewer than Thin units in a cell (default 5 —
	// common practice, no source). Whether thin cells hold more units than
	// chance gives is the verdict's sparse_cells rule.
	Thin int
	// Alpha is the family-wise chance that the empty-cell screen calls a
	// cell of a randomised design structural (default 0.01).
	Alpha float64
}

func (o CellOptions) withDefaults() CellOptions {
	if o.Bins <= 0 {
		o.Bins = 5
	}
	if o.Thin <= 0 {
		o.Thin = 5
	}
	if o.Alpha <= 0 || o.Alpha >= 1 || math.IsNaN(o.Alpha) {
		o.Alpha = 0.01
	}
	return o
}

// Cell is one combination of covariate levels/bins with its units per arm.
type Cell struct {
	Labels  []string `json:"labels"` // one per covariate, in order
	Treated int      `json:"treated"`
	Control int      `json:"control"`
	// Empty: one arm has no units here — a positivity violation.
	Empty bool `json:"violation"`
	// Thin: an arm has units but fewer than the Thin threshold.
	Thin bool `json:"thin"`
	// Chance is, for a cell with an empty arm, the probability that a cell
	// of this size would lack that arm under random assignment with the
	// table's arm sizes: the exact hypergeometric C(n − n_a, m) / C(n, m) for
	// a cell of m of the n units lacking arm a of n_a units, doubled for the
	// two arms (chanceMissing). 1 for cells with both arms. Structural marks
	// an empty arm that chance does not explain: Chance below Alpha/K for a
	// table of K cells (Bonferroni, Dunn 1961, over cells and arms), so a
	// randomised design raises no alarm in the whole table with probability
	// at least 1 − Alpha.
	Chance     float64 `json:"chance"`
	Structural bool    `json:"structural"`
}

// Cut describes how one covariate was cut.
type Cut struct {
	Column string    `json:"column"`
	Kind   string    `json:"kind"` // "levels" or "quantiles"
	Labels []string  `json:"labels"`
	Breaks []float64 `json:"breaks,omitempty"` // upper limits of all but the last bin
}

// Cells is the positivity table for a covariate subset: one row per
// non-empty cell (combination of levels; continuous covariates cut at
// quantiles) with counts per arm and flags, and totals.
type Cells struct {
	Columns []string
	Cuts    []Cut
	Rows    []Cell
	Options CellOptions
	// Totals.
	Violating  int // cells with an empty arm
	Structural int // violating cells whose empty arm chance does not explain (Cell.Structural)
	// ChanceThreshold is the per-cell bound Alpha/K behind Cell.Structural.
	ChanceThreshold  float64
	UnitsStructural  int     // units in structural violating cells
	ThinCells        int     // cells with a thin (but not empty) arm
	UnitsViolating   int     // units in violating cells
	ShareViolating   float64 // UnitsViolating / N
	TreatedViolating int     // treated units in cells without controls
	ControlViolating int     // controls in cells without treated units
	N                int
	// code of each used row's cell (index into Rows); for drill-down.
	cellOf []int32
	design *Design // the rows the table counts
	err    error
}

// Err returns why the table could not be built, or nil.
func (c *Cells) Err() error {
	if c == nil {
		return errors.New("nil Cells")
	}
	if c.err == nil && (c.cellOf == nil) {
		return errors.New("positivity cells not computed: use Study.Cells(columns...)")
	}
	return c.err
}

// CellOf returns the index into Rows of the cell of used row i (−1 when
// there is no such row or no table).
func (c *Cells) CellOf(i int) int {
	if c.Err() != nil || i < 0 || i >= len(c.cellOf) {
		return -1
	}
	return int(c.cellOf[i])
}

// Cells builds the positivity table for the named columns (any columns of
// the data; the rows used are the Study's). Default options: 5 quantile bins,
// thin below 5 units.
func (s *Study) Cells(columns ...string) *Cells { return s.CellsWith(CellOptions{}, columns...) }

// CellsWith is Cells with options.
func (s *Study) CellsWith(o CellOptions, columns ...string) *Cells {
	d, err := s.Design()
	if err != nil {
		return &Cells{err: err}
	}
	if len(columns) == 0 {
		return &Cells{err: errors.New("cells: name at least one covariate")}
	}
	o = o.withDefaults()
	codes, cuts, err := discretizeAll(s, d, columns, o.Bins, "cells")
	if err != nil {
		return &Cells{err: err}
	}
	return buildCells(d, columns, codes, cuts, o)
}

// Cells builds the positivity table of the named columns over the units of
// these scores (for scores refitted after trimming: the kept units), so that
// it can be passed to Verdict and Effect. Default options.
func (sc *Scores) Cells(columns ...string) *Cells { return sc.CellsWith(CellOptions{}, columns...) }

// CellsWith is Scores.Cells with options.
func (sc *Scores) CellsWith(o CellOptions, columns ...string) *Cells {
	if err := sc.Err(); err != nil {
		return &Cells{err: err}
	}
	if sc.Design.study == nil {
		return &Cells{err: errors.New("cells: these scores do not come from a Study; use Study.Cells")}
	}
	if len(columns) == 0 {
		return &Cells{err: errors.New("cells: name at least one covariate")}
	}
	return cellsForDesignWith(sc.Design.study, sc.Design, columns, o)
}

// Cells builds the positivity table over the kept units (see Scores.Cells).
func (t *Trimmed) Cells(columns ...string) *Cells {
	if err := t.Err(); err != nil {
		return &Cells{err: err}
	}
	return t.Scores.Cells(columns...)
}

// sameRows reports whether the table counts the rows of design d, and
// errs naming the mismatch (cells built on the whole study passed with
// scores refitted on trimmed units, say).
func (c *Cells) sameRows(d *Design) error {
	if c.design == d {
		return nil
	}
	same := c.design != nil && c.N == d.N && len(c.design.Rows) == len(d.Rows)
	for i := 0; same && i < len(d.Rows); i++ {
		same = c.design.Rows[i] == d.Rows[i]
	}
	if !same {
		return fmt.Errorf("cells (%s) count %d rows, but these scores are for %d other or different units: build the table for these units with scores.Cells(...) (after trimming: trimmed.Cells(...))", strings.Join(c.Columns, " × "), c.N, d.N)
	}
	return nil
}

// cellsForDesign builds the positivity table of the named columns over the
// rows of d (for example the units kept by trimming), with default options.
func cellsForDesign(s *Study, d *Design, columns []string) *Cells {
	return cellsForDesignWith(s, d, columns, CellOptions{})
}

func cellsForDesignWith(s *Study, d *Design, columns []string, o CellOptions) *Cells {
	o = o.withDefaults()
	codes, cuts, err := discretizeAll(s, d, columns, o.Bins, "cells")
	if err != nil {
		return &Cells{err: err}
	}
	return buildCells(d, columns, codes, cuts, o)
}

// discretizeAll codes the named columns, one goroutine per column.
func discretizeAll(s *Study, d *Design, columns []string, bins int, role string) ([][]int32, []Cut, error) {
	codes := make([][]int32, len(columns))
	cuts := make([]Cut, len(columns))
	errs := make([]error, len(columns))
	cols := make([]*Column, len(columns))
	for j, name := range columns {
		col, err := s.column(name, role)
		if err != nil {
			return nil, nil, err
		}
		cols[j] = col
	}
	var wg sync.WaitGroup
	for j := range columns {
		wg.Add(1)
		go func(j int) {
			defer wg.Done()
			codes[j], cuts[j], errs[j] = discretize(cols[j], d.Rows, bins)
		}(j)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, nil, err
		}
	}
	return codes, cuts, nil
}

// discretize codes a column for the given rows: categorical by level,
// numeric with ≤ bins distinct values by value, otherwise by quantile bins
// with breaks at the empirical quantiles k/bins (gonum's stat.Empirical
// definition), duplicate breaks merged.
func discretize(c *Column, rows []int, bins int) ([]int32, Cut, error) {
	codes := make([]int32, len(rows))
	cut := Cut{Column: c.Name}
	if c.Kind == Categorical {
		remap := make([]int32, len(c.Levels))
		for i := range remap {
			remap[i] = -1
		}
		for _, i := range rows {
			if c.Codes[i] < 0 {
				return nil, cut, fmt.Errorf("cells: column %q has missing values in rows the study uses (row %d): fill them in or drop those rows", c.Name, i+1)
			}
			remap[c.Codes[i]] = 0
		}
		var k int32
		for l := range remap {
			if remap[l] == 0 {
				remap[l] = k
				cut.Labels = append(cut.Labels, c.Levels[l])
				k++
			}
		}
		for r, i := range rows {
			codes[r] = remap[c.Codes[i]]
		}
		cut.Kind = "levels"
		return codes, cut, nil
	}
	// The column itself when every row is used (it is only read), else a copy
	// of the used rows.
	identity := len(rows) == len(c.Num)
	vals := c.Num
	if !identity {
		vals = make([]float64, len(rows))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for r, i := range rows {
		v := c.Num[i]
		if math.IsNaN(v) {
			return nil, cut, fmt.Errorf("cells: column %q has missing values in rows the study uses (row %d): fill them in or drop those rows", c.Name, i+1)
		}
		if !identity {
			vals[r] = v
		}
		if v < lo {
			lo = v
		}
		if v > hi {
			hi = v
		}
	}
	// Few distinct values: use them as levels.
	distinct := map[float64]struct{}{}
	for _, v := range vals {
		distinct[v] = struct{}{}
		if len(distinct) > bins {
			break
		}
	}
	if len(distinct) <= bins {
		levels := make([]float64, 0, len(distinct))
		for v := range distinct {
			levels = append(levels, v)
		}
		sort.Float64s(levels)
		for _, v := range levels {
			cut.Labels = append(cut.Labels, strconv.FormatFloat(v, 'g', -1, 64))
		}
		for r, v := range vals {
			k := 0
			for k < len(levels)-1 && levels[k] < v {
				k++
			}
			codes[r] = int32(k)
		}
		cut.Kind = "levels"
		return codes, cut, nil
	}
	ps := make([]float64, bins-1)
	for k := range ps {
		ps[k] = float64(k+1) / float64(bins)
	}
	qs := quantilesOf(vals, ps)
	var breaks []float64
	for _, q := range qs {
		if q < hi && (len(breaks) == 0 || q > breaks[len(breaks)-1]) {
			breaks = append(breaks, q)
		}
	}
	cut.Kind, cut.Breaks = "quantiles", breaks
	prev := lo
	for k := 0; k <= len(breaks); k++ {
		up := hi
		if k < len(breaks) {
			up = breaks[k]
		}
		open := "("
		if k == 0 {
			open = "["
		}
		cut.Labels = append(cut.Labels, fmt.Sprintf("%s%s, %s]", open, fmtNum(prev), fmtNum(up)))
		prev = up
	}
	// bin = number of breaks strictly below v
	if len(breaks) <= 16 {
		for r, v := range vals {
			k := 0
			for k < len(breaks) && breaks[k] < v {
				k++
			}
			codes[r] = int32(k)
		}
	} else {
		for r, v := range vals {
			codes[r] = int32(sort.SearchFloat64s(breaks, v))
		}
	}
	return codes, cut, nil
}

func fmtNum(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

func buildCells(d *Design, columns []string, codes [][]int32, cuts []Cut, o CellOptions) *Cells {
	n := d.N
	strides := make([]int64, len(columns))
	total := int64(1)
	for j := len(columns) - 1; j >= 0; j-- {
		strides[j] = total
		total *= int64(len(cuts[j].Labels))
	}
	key := make([]int64, n)
	for j := range columns {
		st := strides[j]
		cj := codes[j]
		for i, v := range cj {
			key[i] += int64(v) * st
		}
	}
	c := &Cells{Columns: columns, Cuts: cuts, Options: o, N: n, cellOf: make([]int32, n), design: d}
	if total <= 1<<22 {
		n1 := make([]int32, total)
		n0 := make([]int32, total)
		for i, k := range key {
			if d.T[i] == 1 {
				n1[k]++
			} else {
				n0[k]++
			}
		}
		index := make([]int32, total)
		for k := int64(0); k < total; k++ {
			index[k] = -1
			if n1[k]+n0[k] > 0 {
				index[k] = int32(len(c.Rows))
				c.Rows = append(c.Rows, Cell{Labels: cellLabels(k, strides, cuts), Treated: int(n1[k]), Control: int(n0[k])})
			}
		}
		for i, k := range key {
			c.cellOf[i] = index[k]
		}
	} else {
		type cnt struct{ t, c int }
		m := map[int64]*cnt{}
		for i, k := range key {
			e := m[k]
			if e == nil {
				e = &cnt{}
				m[k] = e
			}
			if d.T[i] == 1 {
				e.t++
			} else {
				e.c++
			}
		}
		keys := make([]int64, 0, len(m))
		for k := range m {
			keys = append(keys, k)
		}
		sort.Slice(keys, func(a, b int) bool { return keys[a] < keys[b] })
		index := make(map[int64]int32, len(keys))
		for _, k := range keys {
			index[k] = int32(len(c.Rows))
			c.Rows = append(c.Rows, Cell{Labels: cellLabels(k, strides, cuts), Treated: m[k].t, Control: m[k].c})
		}
		for i, k := range key {
			c.cellOf[i] = index[k]
		}
	}
	c.ChanceThreshold = o.Alpha / float64(len(c.Rows))
	for r := range c.Rows {
		cell := &c.Rows[r]
		cell.Chance = 1
		if cell.Treated == 0 || cell.Control == 0 {
			missing := d.Treated
			if cell.Control == 0 {
				missing = d.Control
			}
			cell.Chance = chanceMissing(cell.Treated+cell.Control, n, missing)
			if cell.Chance < c.ChanceThreshold {
				cell.Structural = true
				c.Structural++
				c.UnitsStructural += cell.Treated + cell.Control
			}
			cell.Empty = true
			c.Violating++
			c.UnitsViolating += cell.Treated + cell.Control
			c.TreatedViolating += cell.Treated
			c.ControlViolating += cell.Control
		} else if cell.Treated < o.Thin || cell.Control < o.Thin {
			cell.Thin = true
			c.ThinCells++
		}
	}
	c.ShareViolating = float64(c.UnitsViolating) / float64(n)
	return c
}

func cellLabels(k int64, strides []int64, cuts []Cut) []string {
	out := make([]string, len(strides))
	for j := range strides {
		idx := k / strides[j]
		k -= idx * strides[j]
		out[j] = cuts[j].Labels[idx]
	}
	return out
}

// String is the terminal view: violating and thin cells first.
func (c *Cells) String() string {
	if err := c.Err(); err != nil {
		return "cells: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Positivity cells for %s (%d bins for continuous covariates; thin arm < %d units)\n", strings.Join(c.Columns, " × "), c.Options.Bins, c.Options.Thin)
	fmt.Fprintf(&b, "  %d cells with units; %d violating (an arm empty), %d thin; %d units (%.1f%%) in violating cells\n",
		len(c.Rows), c.Violating, c.ThinCells, c.UnitsViolating, 100*c.ShareViolating)
	rows := append([]Cell(nil), c.Rows...)
	sort.SliceStable(rows, func(a, b int) bool { return rank(rows[a]) > rank(rows[b]) })
	limit := 25
	for k, r := range rows {
		if k == limit {
			fmt.Fprintf(&b, "  … %d more cells\n", len(rows)-limit)
			break
		}
		flag := "ok"
		if r.Empty {
			flag = "VIOLATION"
		} else if r.Thin {
			flag = "thin"
		}
		fmt.Fprintf(&b, "  %-50s treated %6d  control %6d  %s\n", strings.Join(r.Labels, " | "), r.Treated, r.Control, flag)
	}
	return b.String()
}

func rank(c Cell) int {
	switch {
	case c.Empty:
		return 2
	case c.Thin:
		return 1
	}
	return 0
}

// quantilesOf returns the empirical quantiles (see empiricalQuantiles) of x
// without reordering it. For large x it brackets each quantile using a sorted
// systematic sample (every ⌈n/m⌉-th value), collects the values inside each
// bracket in one pass and selects the exact order statistic among them; when
// a bracket misses (possible only for adversarial orderings) it falls back to
// selection on a full copy. The answer is exact either way.
func quantilesOf(x []float64, ps []float64) []float64 {
	n := len(x)
	if n <= 1<<18 {
		return empiricalQuantiles(append([]float64(nil), x...), ps)
	}
	step := n / (1 << 16)
	sample := make([]float64, 0, n/step+1)
	for i := 0; i < n; i += step {
		sample = append(sample, x[i])
	}
	sort.Float64s(sample)
	m := len(sample)
	delta := int(6*math.Sqrt(float64(m))) + 1
	type bracket struct {
		lo, hi float64
		k      int // target 0-based order statistic
		below  int
		in     []float64
	}
	br := make([]bracket, len(ps))
	for q, p := range ps {
		k := int(math.Ceil(p*float64(n))) - 1
		k = max(0, min(n-1, k))
		ks := int(float64(k) / float64(n) * float64(m))
		br[q] = bracket{lo: sample[max(0, ks-delta)], hi: sample[min(m-1, ks+delta)], k: k}
		if ks-delta <= 0 {
			br[q].lo = math.Inf(-1)
		}
		if ks+delta >= m-1 {
			br[q].hi = math.Inf(1)
		}
	}
	for _, v := range x {
		for q := range br {
			b := &br[q]
			if v < b.lo {
				b.below++
			} else if v <= b.hi {
				b.in = append(b.in, v)
			}
		}
	}
	out := make([]float64, len(ps))
	for q := range br {
		b := &br[q]
		r := b.k - b.below
		if r < 0 || r >= len(b.in) {
			return empiricalQuantiles(append([]float64(nil), x...), ps)
		}
		sort.Float64s(b.in)
		out[q] = b.in[r]
	}
	return out
}

// empiricalQuantiles returns, for each p, the value x_(k) with
// k = ceil(p·n) (1-based order statistic; the definition of gonum's
// stat.Quantile with stat.Empirical), by multi-quantile selection in O(n)
// expected time. buf is reordered. ps must be ascending in (0, 1].
func empiricalQuantiles(buf []float64, ps []float64) []float64 {
	n := len(buf)
	ks := make([]int, len(ps))
	for i, p := range ps {
		k := int(math.Ceil(p*float64(n))) - 1
		ks[i] = max(0, min(n-1, k))
	}
	out := make([]float64, len(ps))
	multiSelect(buf, 0, n, ks, out, 0)
	return out
}

// multiSelect places the order statistics ks (ascending, absolute indices
// within [lo, hi)) and writes their values to out[off:].
func multiSelect(x []float64, lo, hi int, ks []int, out []float64, off int) {
	for len(ks) > 0 {
		if hi-lo <= 16 {
			sort.Float64s(x[lo:hi])
			for i, k := range ks {
				out[off+i] = x[k]
			}
			return
		}
		// Median of three pivot, three-way partition.
		a, b, c := x[lo], x[lo+(hi-lo)/2], x[hi-1]
		pivot := max(min(a, b), min(max(a, b), c))
		lt, i, gt := lo, lo, hi
		for i < gt {
			switch {
			case x[i] < pivot:
				x[lt], x[i] = x[i], x[lt]
				lt++
				i++
			case x[i] > pivot:
				gt--
				x[gt], x[i] = x[i], x[gt]
			default:
				i++
			}
		}
		// ks below lt go left, in [lt, gt) equal pivot, ≥ gt go right.
		var left, right []int
		var leftOff, rightOff int
		for idx, k := range ks {
			switch {
			case k < lt:
				if left == nil {
					leftOff = off + idx
				}
				left = append(left, k)
			case k >= gt:
				if right == nil {
					rightOff = off + idx
				}
				right = append(right, k)
			default:
				out[off+idx] = pivot
			}
		}
		if len(left) > 0 {
			multiSelect(x, lo, lt, left, out, leftOff)
		}
		if len(right) == 0 {
			return
		}
		lo, ks, off = gt, right, rightOff
	}
}
