package causal

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
)

// Kind is the detected type of a column.
type Kind int

const (
	// Numeric columns hold float64 values (NaN marks a missing value).
	Numeric Kind = iota
	// Categorical columns hold level codes into Levels (-1 marks a missing value).
	Categorical
)

func (k Kind) String() string {
	if k == Categorical {
		return "categorical"
	}
	return "numeric"
}

// Column is one named column of a Frame, stored columnar.
//
// A numeric column keeps Num (NaN = missing). A categorical column keeps Codes
// (index into Levels, -1 = missing); Levels are sorted alphabetically.
type Column struct {
	Name    string
	Kind    Kind
	Num     []float64
	Codes   []int32
	Levels  []string
	Missing int // number of missing entries

	// issue is the first problem found in the column while reading (a
	// non-numeric entry in a numeric column, NaN/Inf text). It is reported
	// when the column is used, so that a broken column the analysis does not
	// touch does not block it.
	issue error
	// textAt says why a text column read from a file is not numeric: its
	// first field that is not a number ("" when unknown).
	textAt string
}

// Len is the number of rows.
func (c *Column) Len() int {
	if c.Kind == Categorical {
		return len(c.Codes)
	}
	return len(c.Num)
}

// IsMissing reports whether row i is missing.
func (c *Column) IsMissing(i int) bool {
	if c.Kind == Categorical {
		return c.Codes[i] < 0
	}
	return math.IsNaN(c.Num[i])
}

// Err reports a problem found in the column while reading it, or nil.
func (c *Column) Err() error { return c.issue }

// Source is the small interface through which the analysis reads data. A
// Frame implements it; a database-backed source can implement it later to
// serve columns (and, in time, cell counts and cross-product sums) from the
// engine.
type Source interface {
	// Names lists the column names in their original order.
	Names() []string
	// Rows is the number of rows.
	Rows() int
	// Column returns the named column or an error naming the known columns.
	Column(name string) (*Column, error)
}

// Frame is an in-memory columnar data set.
type Frame struct {
	names []string
	cols  map[string]*Column
	rows  int
	file  string // where it came from, for messages
}

// Names lists the column names in file order.
func (f *Frame) Names() []string {
	if f == nil {
		return nil
	}
	return append([]string(nil), f.names...)
}

// Rows is the number of data rows.
func (f *Frame) Rows() int {
	if f == nil {
		return 0
	}
	return f.rows
}

// Column returns the named column. An unknown name gives an error that
// lists the columns present and suggests the closest one.
func (f *Frame) Column(name string) (*Column, error) {
	if f == nil {
		return nil, errors.New("no data: the frame is nil")
	}
	if c, ok := f.cols[name]; ok {
		return c, nil
	}
	return nil, unknownColumn(name, f.names)
}

func unknownColumn(name string, names []string) error {
	msg := "unknown column " + quoteValue(name)
	if s := closest(name, names); s != "" {
		msg += fmt.Sprintf(" (did you mean %q?)", s)
	}
	shown := names
	if len(shown) > 30 {
		shown = shown[:30]
	}
	msg += "; columns are: " + strings.Join(shown, ", ")
	if len(names) > 30 {
		msg += fmt.Sprintf(", … (%d in all)", len(names))
	}
	return errors.New(msg)
}

// closest returns the name with the smallest edit distance to s, if it is
// close enough to be a plausible typo (case-insensitive match or distance ≤ 2).
func closest(s string, names []string) string {
	if len(s) > maxName {
		return "" // no column name is that long
	}
	best, bestD := "", 1<<30
	for _, n := range names {
		if strings.EqualFold(n, s) {
			return n
		}
		d := editDistance(strings.ToLower(s), strings.ToLower(n))
		if d < bestD {
			best, bestD = n, d
		}
	}
	if bestD <= 2 {
		return best
	}
	return ""
}

func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			c := 1
			if ra[i-1] == rb[j-1] {
				c = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+c)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}

// NewFrame builds a Frame from in-memory columns: numeric columns in num and
// text columns in text (each text column becomes categorical; "" and "NA" are
// missing). order gives the column order; when nil, names are sorted. All
// columns must have the same length.
func NewFrame(order []string, num map[string][]float64, text map[string][]string) (*Frame, error) {
	if order == nil {
		for k := range num {
			order = append(order, k)
		}
		for k := range text {
			order = append(order, k)
		}
		sort.Strings(order)
	}
	if len(order) == 0 {
		return nil, errors.New("no columns given: pass at least one column")
	}
	f := &Frame{cols: map[string]*Column{}, rows: -1, file: "columns"}
	for _, name := range order {
		if why := badText(name); why != "" {
			return nil, fmt.Errorf("column name %s %s: rename the column", quoteValue(name), why)
		}
		if _, dup := f.cols[name]; dup {
			return nil, fmt.Errorf("duplicate column name %q: rename one of them", name)
		}
		var c *Column
		if v, ok := num[name]; ok {
			c = &Column{Name: name, Kind: Numeric, Num: append([]float64(nil), v...)}
			for i, x := range c.Num {
				if math.IsNaN(x) {
					c.Missing++
				} else if math.IsInf(x, 0) {
					return nil, fmt.Errorf("column %q, row %d: infinite value; use NaN for a missing value", name, i+1)
				}
			}
		} else if v, ok := text[name]; ok {
			c = categorical(name, v)
		} else {
			return nil, fmt.Errorf("column %q is named in the order but has no data", name)
		}
		if f.rows >= 0 && c.Len() != f.rows {
			return nil, fmt.Errorf("column %q has %d rows but %q has %d: all columns must have the same length", name, c.Len(), order[0], f.rows)
		}
		f.rows = c.Len()
		f.names = append(f.names, name)
		f.cols[name] = c
	}
	return f, nil
}

func isMissingToken(s string) bool {
	return s == "" || s == "NA"
}

func categorical(name string, v []string) *Column {
	c := &Column{Name: name, Kind: Categorical, Codes: make([]int32, len(v))}
	set := map[string]bool{}
	for _, s := range v {
		s = strings.TrimSpace(s)
		if !isMissingToken(s) {
			set[s] = true
		}
	}
	for s := range set {
		c.Levels = append(c.Levels, s)
	}
	sort.Strings(c.Levels)
	idx := make(map[string]int32, len(c.Levels))
	for i, s := range c.Levels {
		idx[s] = int32(i)
	}
	for i, s := range v {
		s = strings.TrimSpace(s)
		if isMissingToken(s) {
			c.Codes[i] = -1
			c.Missing++
			continue
		}
		c.Codes[i] = idx[s]
	}
	checkLevels(c)
	return c
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
