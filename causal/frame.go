package causal

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"
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
	msg := fmt.Sprintf("unknown column %q", name)
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
	return c
}

// ReadCSV reads a CSV file with a header row into a Frame. See ParseCSV for
// the format. When no field after the header is quoted, line ends are record
// ends, and the file is cut at line ends into pieces read by encoding/csv on
// every core at once; otherwise it is read by one encoding/csv reader.
func ReadCSV(path string) (*Frame, error) { return ReadCSVProgress(path, nil) }

// ReadCSVProgress is ReadCSV reporting progress in bytes parsed of the
// file's size (progress may be nil; it is called from one goroutine at a
// time, at most once per block of rows).
func ReadCSVProgress(path string, progress func(done, total int)) (*Frame, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("cannot open data file: %w", err)
	}
	f, err := parseBytes(data, progress)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if progress != nil {
		progress(len(data), len(data))
	}
	f.file = path
	return f, nil
}

func parseBytes(data []byte, progress func(done, total int)) (*Frame, error) {
	total := len(data)
	var pmu sync.Mutex
	done := 0
	report := func(n int) {
		if progress == nil {
			return
		}
		pmu.Lock()
		done += n
		progress(min(done, total), total)
		pmu.Unlock()
	}
	data = bytes.TrimPrefix(data, []byte{0xEF, 0xBB, 0xBF})
	cr := csv.NewReader(bytes.NewReader(data))
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err == io.EOF {
		return nil, errors.New("the file is empty: expected a header row naming the columns, then data rows")
	}
	if err != nil {
		return nil, fmt.Errorf("cannot read the header row: %w", err)
	}
	body := data[cr.InputOffset():]
	if len(body) < 1<<20 || bytes.IndexByte(body, '"') >= 0 {
		return parseCSV(bytes.NewReader(data), func(offset int) {
			if progress != nil {
				progress(min(offset, total), total)
			}
		})
	}
	names, err := checkHeader(header)
	if err != nil {
		return nil, err
	}
	p := len(names)
	// Cut the body at line ends.
	pieces := runtime.GOMAXPROCS(0) * 4
	var chunks [][]byte
	for len(body) > 0 {
		size := len(body) / pieces
		if size < 1<<16 {
			size = len(body)
		}
		end := size
		if end < len(body) {
			k := bytes.IndexByte(body[end:], '\n')
			if k < 0 {
				end = len(body)
			} else {
				end += k + 1
			}
		}
		chunks = append(chunks, body[:end])
		body = body[end:]
		pieces--
		if pieces < 1 {
			pieces = 1
		}
	}
	type result struct {
		parts []csvBatchOut
		rows  int
		err   error
		errAt int // relative row of the error
	}
	results := make([]result, len(chunks))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for c := range chunks {
		wg.Add(1)
		go func(c int) {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			r := &results[c]
			cr := csv.NewReader(bytes.NewReader(chunks[c]))
			cr.FieldsPerRecord = -1
			// Each batch is parsed here before the next is read, so the record
			// slice and one flat buffer of field headers are reused: the
			// fields' text is never copied and no slice is allocated per row.
			cr.ReuseRecord = true
			flat := make([]string, csvBatch*p)
			batch := make([][]string, 0, csvBatch)
			row := 1
			flush := func() {
				if len(batch) > 0 {
					r.parts = append(r.parts, parseBatch(csvBatchIn{seq: len(r.parts), row0: row - len(batch), recs: batch}, p))
					batch = batch[:0]
				}
			}
			for {
				rec, err := cr.Read()
				if err == io.EOF {
					break
				}
				if err != nil {
					r.err, r.errAt = err, row
					return
				}
				if len(rec) != p {
					if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
						continue
					}
					r.err, r.errAt = fmt.Errorf("has %d fields but the header has %d: check for a missing or extra comma (quote fields that contain commas)", len(rec), p), row
					return
				}
				k := len(batch)
				copy(flat[k*p:(k+1)*p], rec)
				batch = append(batch, flat[k*p:(k+1)*p])
				row++
				if len(batch) == csvBatch {
					flush()
				}
			}
			flush()
			r.rows = row - 1
			report(len(chunks[c]))
		}(c)
	}
	wg.Wait()
	var parts []csvBatchOut
	offset := 0
	for _, r := range results {
		if r.err != nil {
			return nil, fmt.Errorf("row %d %v", offset+r.errAt, r.err)
		}
		for _, b := range r.parts {
			b.seq = len(parts)
			for j := range b.cols {
				if b.cols[j].firstBad > 0 {
					b.cols[j].firstBad += offset
				}
				if b.cols[j].nonf > 0 {
					b.cols[j].nonf += offset
				}
			}
			parts = append(parts, b)
		}
		offset += r.rows
	}
	return frameOf(names, parts, offset)
}

func checkHeader(header []string) ([]string, error) {
	names := make([]string, len(header))
	seen := map[string]int{}
	for i, h := range header {
		h = strings.TrimSpace(h)
		if h == "" {
			return nil, fmt.Errorf("header: column %d has no name: give every column a name", i+1)
		}
		if j, dup := seen[h]; dup {
			return nil, fmt.Errorf("header: duplicate column name %q (columns %d and %d): rename one of them", h, j+1, i+1)
		}
		seen[h] = i
		names[i] = h
	}
	return names, nil
}

const csvBatch = 8192

type csvBatchIn struct {
	seq  int
	row0 int // 1-based data row number of the first record (header is row 0)
	recs [][]string
}

type csvColPart struct {
	num         []float64
	strs        []string // kept only when the batch has a non-numeric entry in this column
	bad         int      // non-numeric entries
	nonf        int      // first row with NaN/Inf text, 0 if none
	nonv        string
	firstBad    int
	firstBadVal string
}

type csvBatchOut struct {
	seq  int
	n    int
	cols []csvColPart
}

// ParseCSV reads CSV text with a header row. It handles a UTF-8 byte-order
// mark, quoted fields (commas, quotes and newlines inside quotes) and CRLF line
// ends. Column types are detected: a column whose non-missing entries mostly
// parse as numbers is numeric (any entry that does not is reported, with its
// row, when the column is used); otherwise it is categorical. "" and "NA" are
// missing. Text such as "NaN" or "Inf" in a numeric column is an error when
// the column is used: write an empty field or NA for a missing value.
//
// Rows are numbered as in a spreadsheet's data area: row 1 is the first line
// after the header.
func ParseCSV(r io.Reader) (*Frame, error) { return parseCSV(r, nil) }

// parseCSV is ParseCSV calling offset (when not nil) with the bytes read so
// far after each block of rows.
func parseCSV(r io.Reader, offset func(int)) (*Frame, error) {
	br := bufio.NewReader(r)
	// Skip a UTF-8 BOM.
	if b, err := br.Peek(3); err == nil && bytes.Equal(b, []byte{0xEF, 0xBB, 0xBF}) {
		_, _ = br.Discard(3)
	}
	cr := csv.NewReader(br)
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = false
	header, err := cr.Read()
	if err == io.EOF {
		return nil, errors.New("the file is empty: expected a header row naming the columns, then data rows")
	}
	if err != nil {
		return nil, fmt.Errorf("cannot read the header row: %w", err)
	}
	names, err := checkHeader(header)
	if err != nil {
		return nil, err
	}
	p := len(names)

	workers := runtime.GOMAXPROCS(0)
	in := make(chan csvBatchIn, workers*2)
	out := make(chan csvBatchOut, workers*2)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for b := range in {
				out <- parseBatch(b, p)
			}
		}()
	}
	readErr := make(chan error, 1)
	go func() {
		defer close(in)
		seq, row := 0, 1
		batch := make([][]string, 0, csvBatch)
		for {
			rec, err := cr.Read()
			if err == io.EOF {
				break
			}
			if err != nil {
				var pe *csv.ParseError
				if errors.As(err, &pe) {
					readErr <- fmt.Errorf("row %d (line %d): %v", row, pe.Line, pe.Err)
				} else {
					readErr <- err
				}
				return
			}
			if len(rec) != p {
				if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
					continue // blank line
				}
				readErr <- fmt.Errorf("row %d has %d fields but the header has %d: check for a missing or extra comma (quote fields that contain commas)", row, len(rec), p)
				return
			}
			batch = append(batch, rec)
			row++
			if len(batch) == csvBatch {
				in <- csvBatchIn{seq: seq, row0: row - len(batch), recs: batch}
				if offset != nil {
					offset(int(cr.InputOffset()))
				}
				seq++
				batch = make([][]string, 0, csvBatch)
			}
		}
		if len(batch) > 0 {
			in <- csvBatchIn{seq: seq, row0: row - len(batch), recs: batch}
		}
		readErr <- nil
	}()
	go func() { wg.Wait(); close(out) }()

	var parts []csvBatchOut
	for b := range out {
		parts = append(parts, b)
	}
	if err := <-readErr; err != nil {
		return nil, err
	}
	sort.Slice(parts, func(i, j int) bool { return parts[i].seq < parts[j].seq })
	n := 0
	for _, b := range parts {
		n += b.n
	}
	return frameOf(names, parts, n)
}

// frameOf assembles the parsed batches (in row order) of n rows into a Frame.
func frameOf(names []string, parts []csvBatchOut, n int) (*Frame, error) {
	if n == 0 {
		return nil, errors.New("the file has a header but no data rows")
	}
	f := &Frame{names: names, cols: make(map[string]*Column, len(names)), rows: n}
	for j, name := range names {
		f.cols[name] = assembleColumn(name, j, parts, n)
	}
	return f, nil
}

func parseBatch(b csvBatchIn, p int) csvBatchOut {
	o := csvBatchOut{seq: b.seq, n: len(b.recs), cols: make([]csvColPart, p)}
	for j := 0; j < p; j++ {
		part := &o.cols[j]
		part.num = make([]float64, len(b.recs))
		for i, rec := range b.recs {
			s := rec[j]
			if isMissingToken(s) {
				part.num[i] = math.NaN()
				continue
			}
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t := strings.TrimSpace(s)
				if isMissingToken(t) {
					part.num[i] = math.NaN()
					continue
				}
				v, err = strconv.ParseFloat(t, 64)
			}
			if err != nil {
				if part.strs == nil {
					part.strs = make([]string, len(b.recs))
					for k := 0; k < i; k++ {
						part.strs[k] = b.recs[k][j]
					}
				}
				if part.bad == 0 {
					part.firstBad, part.firstBadVal = b.row0+i, s
				}
				part.bad++
				part.num[i] = math.NaN()
			} else if !math.IsNaN(v) && !math.IsInf(v, 0) {
				part.num[i] = v
			} else {
				if part.nonf == 0 {
					part.nonf, part.nonv = b.row0+i, s
				}
				part.num[i] = math.NaN()
			}
			if part.strs != nil {
				part.strs[i] = s
			}
		}
	}
	return o
}

func assembleColumn(name string, j int, parts []csvBatchOut, n int) *Column {
	bad, numeric := 0, 0
	for _, b := range parts {
		part := b.cols[j]
		bad += part.bad
		for _, v := range part.num {
			if !math.IsNaN(v) {
				numeric++
			}
		}
	}
	if bad > 0 && bad >= numeric {
		// Categorical: rebuild the text of every entry.
		vals := make([]string, 0, n)
		for _, b := range parts {
			part := b.cols[j]
			if part.strs != nil {
				vals = append(vals, part.strs...)
				continue
			}
			for _, v := range part.num {
				if math.IsNaN(v) {
					vals = append(vals, "")
				} else {
					vals = append(vals, strconv.FormatFloat(v, 'g', -1, 64))
				}
			}
		}
		return categorical(name, vals)
	}
	c := &Column{Name: name, Kind: Numeric, Num: make([]float64, 0, n)}
	for _, b := range parts {
		part := b.cols[j]
		c.Num = append(c.Num, part.num...)
		if c.issue == nil && part.nonf > 0 {
			c.issue = fmt.Errorf("column %q, row %d: %q is not a finite number: write an empty field or NA for a missing value", name, part.nonf, part.nonv)
		}
		if c.issue == nil && part.bad > 0 {
			c.issue = fmt.Errorf("column %q, row %d: %q is not a number (the column is numeric; %d such entr%s in all): fix the value or leave the field empty for a missing value", name, part.firstBad, part.firstBadVal, bad, plural(bad, "y", "ies"))
		}
	}
	for _, v := range c.Num {
		if math.IsNaN(v) {
			c.Missing++
		}
	}
	return c
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
