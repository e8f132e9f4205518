package causal

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
)

// Study is a data set with roles: a treatment, an outcome and the covariates
// to adjust for. It is built fluently; each step returns a new Study and
// leaves the receiver unchanged:
//
//	s := causal.Load("audits.csv").Treat("audit").TreatedLevel("yes").
//		Outcome("litres_per_day").Adjust("household_size", "lot_m2", "district")
//
// An error at any step (a missing file, an unknown column) is kept inside and
// returned by Err, and by every result computed from the Study.
type Study struct {
	src          Source
	file         string
	treat        string
	treatedLevel string
	outcome      string
	covariates   []string
	asCategory   map[string]bool
	dropIncomp   bool
	err          error
	// fingerprint names the data when they came through the columnar cache
	// (LoadCached), and fitDir is where fits of them keep their coefficients
	// ("" for neither).
	fingerprint, fitDir string

	once sync.Once
	prep *Design
	perr error
}

// Load reads a CSV file (see ParseCSV) into a new Study with no roles yet.
func Load(path string) *Study { return LoadProgress(path, nil) }

// LoadProgress is Load reporting progress (bytes parsed of the file's size)
// to progress, which may be nil; kernel.Load shows it as a progress bar.
func LoadProgress(path string, progress func(done, total int)) *Study {
	return LoadWith(path, ReadOptions{Progress: progress})
}

// LoadWith is Load with read options: the delimiter, the field-length
// limit, columns read as text, progress.
func LoadWith(path string, o ReadOptions) *Study {
	f, err := ReadCSVWith(path, o)
	s := &Study{file: path, err: err}
	if err == nil {
		s.src = f
	}
	return s
}

// FromSource starts a Study on any Source, such as a Frame built with NewFrame.
func FromSource(src Source) *Study {
	if src == nil {
		return &Study{err: errors.New("no data: the source is nil")}
	}
	return &Study{src: src}
}

// FromColumns starts a Study on in-memory columns (see NewFrame): numeric
// columns in num, text columns in text, in the order given (nil: sorted
// names). An error, such as columns of unequal length, is kept inside.
func FromColumns(order []string, num map[string][]float64, text map[string][]string) *Study {
	f, err := NewFrame(order, num, text)
	if err != nil {
		return &Study{err: err}
	}
	return FromSource(f)
}

func (s *Study) clone() *Study {
	if s == nil {
		return &Study{err: errors.New("nil Study: start with causal.Load or causal.FromSource")}
	}
	c := &Study{src: s.src, file: s.file, treat: s.treat, treatedLevel: s.treatedLevel,
		outcome: s.outcome, covariates: append([]string(nil), s.covariates...),
		dropIncomp: s.dropIncomp, err: s.err, asCategory: map[string]bool{}, fingerprint: s.fingerprint, fitDir: s.fitDir}
	for k, v := range s.asCategory {
		c.asCategory[k] = v
	}
	return c
}

// Treat names the treatment column. It must have exactly two values: 0/1,
// true/false, or any two labels together with TreatedLevel.
func (s *Study) Treat(column string) *Study { c := s.clone(); c.treat = column; return c }

// TreatedLevel names which of the treatment column's two values means treated
// (needed unless the values are 0/1 or true/false).
func (s *Study) TreatedLevel(level string) *Study { c := s.clone(); c.treatedLevel = level; return c }

// Outcome names the outcome column (numeric).
func (s *Study) Outcome(column string) *Study { c := s.clone(); c.outcome = column; return c }

// Adjust sets the covariates to adjust for (replacing any set before).
func (s *Study) Adjust(columns ...string) *Study {
	c := s.clone()
	c.covariates = append([]string(nil), columns...)
	return c
}

// AsCategory makes numeric columns categorical (e.g. numeric codes for regions).
func (s *Study) AsCategory(columns ...string) *Study {
	c := s.clone()
	for _, col := range columns {
		c.asCategory[col] = true
	}
	return c
}

// DropIncomplete drops rows with a missing value in any role column. The
// number dropped is reported by Design().RowsDropped and in every report.
// Without it, missing values are an error that names each column and count.
func (s *Study) DropIncomplete() *Study { c := s.clone(); c.dropIncomp = true; return c }

// Err returns the first error met while building the Study or resolving its
// roles, or nil.
func (s *Study) Err() error {
	if s == nil {
		return errors.New("nil Study: start with causal.Load or causal.FromSource")
	}
	if s.err != nil {
		return s.err
	}
	if s.treat == "" {
		return nil // roles not complete yet; checked when used
	}
	_, err := s.Design()
	return err
}

// String describes the study: its data and roles, or its error.
func (s *Study) String() string {
	if s == nil {
		return "study: nil Study: start with causal.Load or causal.FromSource"
	}
	if s.err != nil {
		return "study: " + s.err.Error()
	}
	if s.src == nil {
		return "study: no data: start with causal.Load or causal.FromSource"
	}
	var b strings.Builder
	from := s.file
	if from == "" {
		from = "in-memory data"
	}
	fmt.Fprintf(&b, "Study of %s: %d rows, %d columns\n", from, s.src.Rows(), len(s.src.Names()))
	tr := s.treat
	if tr == "" {
		tr = "(not set: call .Treat)"
	} else if s.treatedLevel != "" {
		tr += " (treated = " + s.treatedLevel + ")"
	}
	out := s.outcome
	if out == "" {
		out = "(not set)"
	}
	fmt.Fprintf(&b, "  treatment  %s\n  outcome    %s\n  covariates %s\n", tr, out, strings.Join(s.covariates, ", "))
	if s.treat != "" {
		if d, err := s.Design(); err != nil {
			fmt.Fprintf(&b, "  problem: %v\n", err)
		} else {
			fmt.Fprintf(&b, "  rows used  %d (%d treated, %d control; %d incomplete rows dropped); %d design terms\n", d.N, d.Treated, d.Control, d.RowsDropped, d.P)
		}
	}
	return b.String()
}

// Roles reports the role columns.
type Roles struct {
	Treatment    string   `json:"treatment"`
	TreatedLevel string   `json:"treated_level,omitempty"`
	Outcome      string   `json:"outcome,omitempty"`
	Covariates   []string `json:"covariates"`
}

// Roles returns the roles as set so far.
func (s *Study) Roles() Roles {
	if s == nil {
		return Roles{}
	}
	return Roles{Treatment: s.treat, TreatedLevel: s.treatedLevel, Outcome: s.outcome, Covariates: append([]string{}, s.covariates...)}
}

// Source returns the underlying data source (nil if loading failed).
func (s *Study) Source() Source {
	if s == nil {
		return nil
	}
	return s.src
}

// Term is one column of the design matrix.
type TermInfo struct {
	Name     string // column name, or "column=level" for a categorical level, or "(intercept)"
	Column   string // the covariate it comes from ("" for the intercept)
	Level    string // the level for an indicator term
	Binary   bool   // the term only takes the values 0 and 1
	RefLevel string // for an indicator term: the covariate's reference level
}

// Design is a Study resolved into arrays: the rows used, the treatment as
// 0/1, the outcome, and the design matrix of the covariates with an intercept
// in column 0 (row-major, n × p). Categorical covariates are coded as one
// indicator per level except the reference level, which is the most frequent
// level (ties broken alphabetically).
type Design struct {
	N           int       // rows used
	RowsTotal   int       // rows in the data
	RowsDropped int       // rows dropped as incomplete (DropIncomplete)
	Rows        []int     // original 0-based row index of each used row
	T           []float64 // 1 treated, 0 control
	Y           []float64 // outcome (nil when no outcome is set)
	X           []float64 // n × p row-major, column 0 = 1
	P           int
	Terms       []TermInfo
	Treated     int
	Control     int
	Covariates  []*Column // the covariate columns as read
	roles       Roles
	parent      []int  // for a sub-design: row index in the full design
	study       *Study // the study it was resolved from (for cells over its rows)
}

// Row returns row i of the design matrix (a view, do not modify).
func (d *Design) Row(i int) []float64 {
	if d == nil || i < 0 || i >= d.N {
		return nil
	}
	return d.X[i*d.P : (i+1)*d.P]
}

// Col copies design column j.
func (d *Design) Col(j int) []float64 {
	if d == nil || j < 0 || j >= d.P {
		return nil
	}
	out := make([]float64, d.N)
	for i := range out {
		out[i] = d.X[i*d.P+j]
	}
	return out
}

// Roles of the study this design was resolved from.
func (d *Design) Roles() Roles {
	if d == nil {
		return Roles{}
	}
	return d.roles
}

// Design resolves the roles into arrays, once; later calls return the same
// value. Every problem is an error naming the column (and row, where there is
// one) and what to do.
func (s *Study) Design() (*Design, error) {
	if s == nil {
		return nil, errors.New("nil Study: start with causal.Load or causal.FromSource")
	}
	if s.err != nil {
		return nil, s.err
	}
	s.once.Do(func() { s.prep, s.perr = s.resolve() })
	return s.prep, s.perr
}

func (s *Study) resolve() (*Design, error) {
	if s.src == nil {
		return nil, errors.New("no data loaded")
	}
	if s.treat == "" {
		return nil, settingErr("Treat", "column", "no treatment column: name it with ", "")
	}
	seen := map[string]string{s.treat: "treatment"}
	if s.outcome != "" {
		if r, dup := seen[s.outcome]; dup {
			return nil, fmt.Errorf("column %s is both the %s and the outcome", quoteValue(s.outcome), r)
		}
		seen[s.outcome] = "outcome"
	}
	for _, c := range s.covariates {
		if r, dup := seen[c]; dup {
			if r == "covariate" {
				return nil, fmt.Errorf("covariate %s is listed twice among the covariates", quoteValue(c))
			}
			return nil, fmt.Errorf("column %s is the %s and cannot also be a covariate", quoteValue(c), r)
		}
		seen[c] = "covariate"
	}
	tcol, err := s.column(s.treat, "treatment")
	if err != nil {
		return nil, err
	}
	var ycol *Column
	if s.outcome != "" {
		if ycol, err = s.column(s.outcome, "outcome"); err != nil {
			return nil, err
		}
		if ycol.Kind != Numeric {
			if ycol.textAt != "" {
				return nil, fmt.Errorf("outcome %q is not numeric: %s; fix that field (write an empty field or NA for a missing value), or choose a numeric outcome", s.outcome, ycol.textAt)
			}
			return nil, fmt.Errorf("outcome %q is not numeric (it has text values such as %s): choose a numeric outcome", s.outcome, quoteValue(ycol.Levels[0]))
		}
	}
	covs := make([]*Column, len(s.covariates))
	for i, name := range s.covariates {
		if covs[i], err = s.column(name, "covariate"); err != nil {
			return nil, err
		}
	}
	n := s.src.Rows()

	// Missing values.
	all := append([]*Column{tcol}, covs...)
	if ycol != nil {
		all = append(all, ycol)
	}
	var miss []string
	incomplete := make([]bool, n)
	nInc := 0
	for _, c := range all {
		if c.Missing == 0 {
			continue
		}
		miss = append(miss, fmt.Sprintf("%s (%d)", c.Name, c.Missing))
		for i := 0; i < n; i++ {
			if !incomplete[i] && c.IsMissing(i) {
				incomplete[i] = true
				nInc++
			}
		}
	}
	if nInc > 0 && !s.dropIncomp {
		return nil, settingErr("DropIncomplete", "", fmt.Sprintf("missing values in %s: %d row%s incomplete; fill them in, or use ",
			strings.Join(miss, ", "), nInc, plural(nInc, " is", "s are")), " to drop those rows (the report then says how many were dropped)")
	}
	rows := make([]int, 0, n-nInc)
	for i := 0; i < n; i++ {
		if !incomplete[i] {
			rows = append(rows, i)
		}
	}
	if n == 0 {
		return nil, errors.New("the data have no rows")
	}
	if len(rows) == 0 {
		return nil, errors.New("no complete rows remain after dropping incomplete rows")
	}

	// Treatment.
	t, err := treatmentVector(tcol, s.treatedLevel, rows)
	if err != nil {
		return nil, err
	}
	d := &Design{N: len(rows), RowsTotal: n, RowsDropped: nInc, Rows: rows, T: t, Covariates: covs, roles: s.Roles(), study: s}
	for _, v := range t {
		if v == 1 {
			d.Treated++
		}
	}
	d.Control = d.N - d.Treated
	if d.Treated == 0 || d.Control == 0 {
		arm := "treated"
		if d.Control == 0 {
			arm = "control"
		}
		return nil, fmt.Errorf("all %d units are %s: the treatment column %q needs units in both arms", d.N, arm, s.treat)
	}
	if ycol != nil {
		d.Y = make([]float64, d.N)
		for k, i := range rows {
			d.Y[k] = ycol.Num[i]
		}
	}

	// Terms.
	d.Terms = []TermInfo{{Name: "(intercept)", Binary: false}}
	type numTerm struct {
		col  *Column
		term int
	}
	type indicator struct {
		col  *Column
		term []int32
	}
	var numeric []numTerm
	var indicators []indicator
	ranges := numericRanges(covs, rows)
	for ci, c := range covs {
		if c.Kind == Numeric {
			lo, hi, bin := ranges[ci].lo, ranges[ci].hi, ranges[ci].binary
			if lo == hi {
				return nil, fmt.Errorf("covariate %q is constant (every used row is %g): it carries no information; remove it from Adjust", c.Name, lo)
			}
			numeric = append(numeric, numTerm{col: c, term: len(d.Terms)})
			d.Terms = append(d.Terms, TermInfo{Name: c.Name, Column: c.Name, Binary: bin})
			continue
		}
		counts := make([]int, len(c.Levels))
		for _, i := range rows {
			counts[c.Codes[i]]++
		}
		used := 0
		ref := -1
		for l, k := range counts {
			if k > 0 {
				used++
				if ref < 0 || k > counts[ref] {
					ref = l
				}
			}
		}
		if used < 2 {
			return nil, fmt.Errorf("covariate %q has a single level (%q) in the rows used: it carries no information; remove it from Adjust", c.Name, c.Levels[ref])
		}
		if err := tooManyLevels(c, used, len(rows)); err != nil {
			return nil, err
		}
		if err := strayText(c, counts, s.asCategory[c.Name]); err != nil {
			return nil, err
		}
		term := make([]int32, len(c.Levels)) // design column of each level, 0 for none
		for l, k := range counts {
			if l == ref || k == 0 {
				continue
			}
			term[l] = int32(len(d.Terms))
			d.Terms = append(d.Terms, TermInfo{Name: c.Name + "=" + c.Levels[l], Column: c.Name, Level: c.Levels[l], Binary: true, RefLevel: c.Levels[ref]})
		}
		indicators = append(indicators, indicator{col: c, term: term})
	}
	d.P = len(d.Terms)
	if d.P >= d.N {
		return nil, fmt.Errorf("the model has %d terms (intercept, covariates and category levels) but only %d rows: drop covariates or merge rare levels", d.P, d.N)
	}
	// One write per covariate and row: the work is linear in the levels.
	d.X = make([]float64, d.N*d.P)
	parallelChunks(d.N, func(_, lo, hi int) {
		for k := lo; k < hi; k++ {
			i := rows[k]
			row := d.X[k*d.P : (k+1)*d.P]
			row[0] = 1
			for _, nt := range numeric {
				row[nt.term] = nt.col.Num[i]
			}
			for _, ind := range indicators {
				if j := ind.term[ind.col.Codes[i]]; j > 0 {
					row[j] = 1
				}
			}
		}
	})
	if err := checkRank(d); err != nil {
		return nil, err
	}
	return d, nil
}

// colRange is the range of a numeric column over the rows used and whether
// every value there is 0 or 1.
type colRange struct {
	lo, hi float64
	binary bool
}

// numericRanges computes colRange for the numeric columns of covs (the
// others are left zero), columns in parallel.
func numericRanges(covs []*Column, rows []int) []colRange {
	out := make([]colRange, len(covs))
	parallelColumns(len(covs), columnWorkers(len(covs), 1, 1), func(_, k int) {
		c := covs[k]
		if c.Kind != Numeric {
			return
		}
		r := colRange{lo: math.Inf(1), hi: math.Inf(-1), binary: true}
		for _, i := range rows {
			v := c.Num[i] // never NaN: incomplete rows are not used
			if v < r.lo {
				r.lo = v
			}
			if v > r.hi {
				r.hi = v
			}
			if r.binary && v != 0 && v != 1 {
				r.binary = false
			}
		}
		out[k] = r
	})
	return out
}

func (s *Study) column(name, role string) (*Column, error) {
	c, err := s.src.Column(name)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", role, err)
	}
	if c.issue != nil {
		return nil, fmt.Errorf("%s %w", role, c.issue)
	}
	if s.asCategory[name] && c.Kind == Numeric {
		vals := make([]string, len(c.Num))
		for i, v := range c.Num {
			if !math.IsNaN(v) {
				vals[i] = fmt.Sprint(v)
			}
		}
		c = categorical(name, vals)
	}
	return c, nil
}

func treatmentVector(c *Column, treated string, rows []int) ([]float64, error) {
	t := make([]float64, len(rows))
	var levels []string
	if c.Kind == Numeric {
		set := map[float64]bool{}
		for _, i := range rows {
			set[c.Num[i]] = true
			if len(set) > 3 {
				break
			}
		}
		for v := range set {
			levels = append(levels, fmt.Sprint(v))
		}
		sort.Strings(levels)
		if len(set) == 2 && set[0] && set[1] && (treated == "" || treated == "1") {
			for k, i := range rows {
				t[k] = c.Num[i]
			}
			return t, nil
		}
		if len(set) == 2 && treated != "" {
			// Two numeric codes with the treated one named.
			// The whole text must be a number of the data-file grammar ("1abc" is not 1).
			tv, kind := parseNumber(treated)
			if kind != numOK || !set[tv] {
				return nil, settingErr("TreatedLevel", treated, fmt.Sprintf("treatment %q: ", c.Name), " names a value it does not have; its values are "+strings.Join(levels, ", "))
			}
			for k, i := range rows {
				if c.Num[i] == tv {
					t[k] = 1
				}
			}
			return t, nil
		}
	} else {
		present := map[int32]bool{}
		for _, i := range rows {
			present[c.Codes[i]] = true
		}
		for l := range c.Levels {
			if present[int32(l)] {
				levels = append(levels, c.Levels[l])
			}
		}
		if len(levels) == 2 {
			tl := treated
			if tl == "" {
				a, b := strings.ToLower(levels[0]), strings.ToLower(levels[1])
				if a == "false" && b == "true" {
					tl = levels[1]
				} else {
					return nil, settingErr("TreatedLevel", levels[1], fmt.Sprintf("treatment %q has the labels %q and %q: say which one is treated with ", c.Name, levels[0], levels[1]), "")
				}
			}
			code := int32(-1)
			for l, name := range c.Levels {
				if name == tl {
					code = int32(l)
				}
			}
			if code < 0 || !present[code] {
				return nil, settingErr("TreatedLevel", tl, fmt.Sprintf("treatment %q: ", c.Name), fmt.Sprintf(" names a value it does not have; its values are %q, %q", levels[0], levels[1]))
			}
			for k, i := range rows {
				if c.Codes[i] == code {
					t[k] = 1
				}
			}
			return t, nil
		}
	}
	switch {
	case len(levels) < 2:
		return nil, fmt.Errorf("treatment %q has a single value (%s) in the rows used: a comparison needs a treated and a control arm", c.Name, strings.Join(levels, ""))
	case len(levels) > 2:
		shown := levels
		if len(shown) > 3 {
			shown = append(shown[:3:3], "…")
		}
		return nil, fmt.Errorf("treatment %q has more than two values (%s): it must be binary; recode it to two levels", c.Name, strings.Join(shown, ", "))
	default:
		return nil, settingErr("TreatedLevel", "", fmt.Sprintf("treatment %q has the values %s: use 0/1, or name the treated value with ", c.Name, strings.Join(levels, " and ")), "")
	}
}

// tooManyLevels refuses a categorical covariate with more than MaxLevels
// levels, or more levels than MaxLevelShare of the rows used: one indicator
// per level would make the model as large as the data.
func tooManyLevels(c *Column, levels, rows int) error {
	if levels <= MaxLevels && float64(levels) <= MaxLevelShare*float64(rows) {
		return nil
	}
	msg := fmt.Sprintf("covariate %q has %d levels in the %d rows used (the limit is %d levels, and at most one level per %g rows): one indicator per level cannot be estimated; group rare levels (for example into \"other\"), use a coarser grouping, or leave it out of the covariates",
		c.Name, levels, rows, MaxLevels, 1/MaxLevelShare)
	if c.textAt != "" {
		nums := 0
		for _, l := range c.Levels {
			if _, k := parseNumber(l); k == numOK {
				nums++
			}
		}
		if 2*nums > len(c.Levels) {
			msg += fmt.Sprintf("; it is read as text, not numbers, because %s: if it is numeric, fix that field", c.textAt)
		}
	}
	return errors.New(msg)
}

// strayText refuses a covariate read as text although at least 99% of its
// rows hold numbers (a typo such as 0x1p3 or 1_000 in a numeric column),
// unless AsCategory names it.
func strayText(c *Column, counts []int, asCategory bool) error {
	if asCategory || c.textAt == "" {
		return nil
	}
	nums, all := 0, 0
	for l, k := range counts {
		if _, kind := parseNumber(c.Levels[l]); kind == numOK {
			nums += k
		}
		all += k
	}
	if nums == all || float64(nums) < 0.99*float64(all) {
		return nil
	}
	return settingErr("AsCategory", c.Name,
		fmt.Sprintf("covariate %q is read as text because %s, though %d of its %d values are numbers: fix that field (an empty field or NA is a missing value), or use ",
			c.Name, c.textAt, nums, all),
		" to use its values as categories")
}
