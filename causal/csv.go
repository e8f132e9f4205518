package causal

import (
	"bytes"
	"compress/gzip"
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
	"sync/atomic"
	"unicode"
	"unicode/utf8"
)

// Data limits. They are common practice with no source: a field of more than
// a mebibyte is almost always an unclosed quote, and a covariate with more
// levels than these is an identifier or a free-text column rather than a
// grouping the propensity model can use.
const (
	// DefaultMaxField is the longest field, in bytes, that the CSV reader
	// accepts unless ReadOptions.MaxField says otherwise (1 MiB).
	DefaultMaxField = 1 << 20
	// MaxLevels is the most levels a categorical covariate may have in the
	// rows used (one indicator term per level but one).
	MaxLevels = 200
	// MaxLevelShare is the largest ratio of a categorical covariate's levels
	// to the rows used: above it the average level holds fewer than two rows.
	MaxLevelShare = 0.5
	// maxName is the longest column name accepted, in bytes.
	maxName = 256
)

// ReadOptions adjust how a CSV file is read. The zero value reads
// comma-separated UTF-8 text with fields of at most DefaultMaxField bytes.
type ReadOptions struct {
	// Delimiter separates fields; 0 means ','. It may be any character but
	// a quote, a line end or an invalid rune (see ParseDelimiter).
	Delimiter rune
	// MaxField is the longest field accepted, in bytes; 0 means
	// DefaultMaxField. A longer field is an error naming its column and row.
	MaxField int
	// Text names columns read as text (categorical) whatever they hold, so
	// that codes such as "007" keep their leading zeros.
	Text []string
	// Progress, when set, is told the bytes parsed of the file's size; it is
	// called from one goroutine at a time, at most once per block of rows.
	Progress func(done, total int)
}

func (o ReadOptions) withDefaults() (ReadOptions, error) {
	if o.Delimiter == 0 {
		o.Delimiter = ','
	}
	if err := checkDelimiter(o.Delimiter); err != nil {
		return o, err
	}
	if o.MaxField < 0 {
		return o, fmt.Errorf("maximum field length %d: use 0 (the default, %d bytes) or a positive number of bytes", o.MaxField, DefaultMaxField)
	}
	if o.MaxField == 0 {
		o.MaxField = DefaultMaxField
	}
	return o, nil
}

func checkDelimiter(r rune) error {
	switch {
	case r == '"' || r == '\r' || r == '\n':
		return fmt.Errorf("delimiter %q: a quote or a line end cannot separate fields", r)
	case !utf8.ValidRune(r) || r == utf8.RuneError:
		return fmt.Errorf("delimiter %q is not a valid character", r)
	case r != '\t' && (unicode.IsControl(r) || !unicode.IsPrint(r) && r != ' '):
		return fmt.Errorf("delimiter %q is a control or invisible character: use , ; | or tab", r)
	}
	return nil
}

// ParseDelimiter reads a delimiter as a user types it: one character such
// as , ; or |, or the words tab, comma, semicolon, pipe or space, or the
// escape \t.
func ParseDelimiter(s string) (rune, error) {
	switch strings.ToLower(s) {
	case "tab", `\t`:
		return '\t', nil
	case "comma":
		return ',', nil
	case "semicolon":
		return ';', nil
	case "pipe":
		return '|', nil
	case "space":
		return ' ', nil
	}
	r, size := utf8.DecodeRuneInString(s)
	if s == "" || size != len(s) {
		return 0, fmt.Errorf("delimiter %s: give one character such as , ; | or the word tab", quoteValue(s))
	}
	if err := checkDelimiter(r); err != nil {
		return 0, err
	}
	return r, nil
}

// ReadCSV reads a CSV file with a header row into a Frame. See ParseCSV for
// the format; ReadCSVWith takes options.
func ReadCSV(path string) (*Frame, error) { return ReadCSVWith(path, ReadOptions{}) }

// ReadCSVProgress is ReadCSV reporting progress in bytes parsed of the
// file's size (progress may be nil; it is called from one goroutine at a
// time, at most once per block of rows).
func ReadCSVProgress(path string, progress func(done, total int)) (*Frame, error) {
	return ReadCSVWith(path, ReadOptions{Progress: progress})
}

// ReadCSVWith is ReadCSV with options. A gzip-compressed file (.csv.gz) is
// read directly.
func ReadCSVWith(path string, o ReadOptions) (*Frame, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("cannot open data file: %w", err)
	}
	f, err := parseData(data, o, defaultReadConfig())
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	f.file = path
	return f, nil
}

// ParseCSV reads CSV text with a header row.
//
// Format. Fields are separated by commas (ReadOptions.Delimiter chooses
// another character); a field may be quoted, and a quoted field may hold the
// delimiter, doubled quotes and line ends. Lines may end in LF, CRLF, or CR
// alone (a file with no LF at all). A UTF-8 byte-order mark is skipped; the
// text must be UTF-8. A gzip-compressed file is decompressed; other
// compressed or binary files (ZIP, an Excel workbook, UTF-16 text, NUL
// bytes) are refused with a message saying what they are. Blank lines are
// skipped. Spaces around a field are dropped.
//
// Missing values are spelled as an empty field (or one of spaces only) or
// NA, in every column.
//
// Column kinds are decided once for the whole file: a column is numeric when
// every non-missing field is a number, and text (categorical) otherwise, or
// when it is named in ReadOptions.Text. A number is written as in a data
// file: an optional sign, decimal digits with an optional decimal point, and
// an optional exponent (12, -3.5, +5, .5, 5., 1e-3, 2.5E+4). Go or
// programming syntax is not a number: 1_000, 0x1p3, 0b101 and 1,5 make the
// column text. A text column keeps each level's exact text: "007" and "7"
// are different levels, "1.50" stays "1.50". Levels are sorted.
//
// NaN, Inf and Infinity (any case, with a sign) and numbers beyond the
// float64 range are not missing values: in a column whose other fields are
// numbers they are an error, naming the row, when the column is used (write
// an empty field or NA instead); in a text column they are levels.
//
// A level that is not valid UTF-8 or holds a control character (such as an
// ANSI escape) is an error, naming the column and row, when the column is
// used, so that such text never reaches a terminal and distinct bytes are
// never merged by a display.
//
// Rows are numbered as in a spreadsheet's data area: row 1 is the first line
// after the header.
func ParseCSV(r io.Reader) (*Frame, error) { return ParseCSVWith(r, ReadOptions{}) }

// ParseCSVWith is ParseCSV with options.
func ParseCSVWith(r io.Reader, o ReadOptions) (*Frame, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("cannot read the data: %w", err)
	}
	return parseData(data, o, defaultReadConfig())
}

// readConfig holds the reader's internal sizes; tests and fuzzing shrink
// them so that small inputs cross batch and piece boundaries. No setting
// changes the resulting Frame.
type readConfig struct {
	batch       int // rows per batch parsed at once
	parallelMin int // bytes of unquoted body from which it is cut into pieces
	pieces      int // pieces to cut it into
	minPiece    int // smallest piece in bytes
}

func defaultReadConfig() readConfig {
	return readConfig{batch: csvBatch, parallelMin: 1 << 20, pieces: runtime.GOMAXPROCS(0) * 4, minPiece: 1 << 16}
}

const csvBatch = 8192

// binaryMagic lists the first bytes of files that are not CSV text.
var binaryMagic = []struct{ prefix, what string }{
	{"PK\x03\x04", "a ZIP archive (an Excel .xlsx workbook or a .zip), not CSV text: export the sheet as CSV, or unzip it, and load that"},
	{"PK\x05\x06", "an empty ZIP archive, not CSV text"},
	{"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "an old Excel (.xls) or Office document, not CSV text: export the sheet as CSV and load that"},
	{"\xfd7zXZ\x00", "xz-compressed: decompress it (unxz) and load the result, or recompress it with gzip"},
	{"\x28\xb5\x2f\xfd", "zstd-compressed: decompress it (unzstd) and load the result, or recompress it with gzip"},
	{"7z\xbc\xaf\x27\x1c", "a 7-Zip archive, not CSV text: extract it and load the CSV inside"},
	{"SQLite format 3\x00", "an SQLite database, not CSV text: export a table as CSV and load that"},
	{"\xff\xfe", "UTF-16 text: save it as UTF-8 (for example iconv -f UTF-16 -t UTF-8 in.csv > out.csv) and load that"},
	{"\xfe\xff", "UTF-16 text: save it as UTF-8 (for example iconv -f UTF-16 -t UTF-8 in.csv > out.csv) and load that"},
}

// sniff refuses compressed, binary and UTF-16 input with a message saying
// what it is, and decompresses gzip.
func sniff(data []byte, depth int) ([]byte, error) {
	has := func(prefix string) bool { return bytes.HasPrefix(data, []byte(prefix)) }
	// Magic that is printable text counts after leading blanks and quotes
	// too, so that a header such as " %PDF-" reads the same as "%PDF-".
	textHas := func(prefix string) bool {
		return bytes.HasPrefix(bytes.TrimLeftFunc(data, func(r rune) bool { return unicode.IsSpace(r) || r == '"' }), []byte(prefix))
	}
	head := data[:min(len(data), 8192)]
	// binary: the start is not UTF-8 text (a file that merely begins with
	// printable magic, such as a column named BZh91AY&SY, is still text).
	binary := func() bool {
		text := head
		if len(head) < len(data) {
			// The cut may split a character: drop its first bytes.
			for k := 0; k < 3 && len(text) > 0 && !utf8.RuneStart(text[len(text)-1]); k++ {
				text = text[:len(text)-1]
			}
			if len(text) > 0 && text[len(text)-1] >= 0xc0 {
				text = text[:len(text)-1]
			}
		}
		return bytes.IndexByte(head, 0) >= 0 || !utf8.Valid(text)
	}
	switch {
	case has("\x1f\x8b"):
		if depth > 0 {
			return nil, errors.New("the file is gzip-compressed twice: decompress it once (gunzip) and load the result")
		}
		zr, err := gzip.NewReader(bytes.NewReader(data))
		if err != nil {
			return nil, fmt.Errorf("the file starts like gzip-compressed data but cannot be decompressed (%v)", err)
		}
		out, err := io.ReadAll(zr)
		if err != nil {
			return nil, fmt.Errorf("the file is gzip-compressed but damaged (%v): check the download, or decompress it yourself", err)
		}
		return sniff(bytes.TrimPrefix(out, []byte{0xEF, 0xBB, 0xBF}), depth+1)
	case textHas("BZh") && bytes.Contains(head[:min(len(head), 24)], []byte("1AY&SY")) && binary():
		return nil, errors.New("the file is bzip2-compressed: decompress it (bunzip2) and load the result, or recompress it with gzip")
	case textHas("%PDF-") && binary():
		return nil, errors.New("the file is a PDF document, not CSV text")
	case has("PAR1") && bytes.HasSuffix(data, []byte("PAR1")):
		return nil, errors.New("the file is a Parquet file, not CSV text: export it as CSV (for example with DuckDB: COPY (FROM 'file.parquet') TO 'file.csv')")
	}
	for _, m := range binaryMagic {
		if has(m.prefix) {
			return nil, errors.New("the file is " + m.what)
		}
	}
	if i := bytes.IndexByte(head, 0); i >= 0 {
		return nil, fmt.Errorf("the file holds a NUL byte at byte %d: it is binary data, not CSV text", i+1)
	}
	return data, nil
}

func parseData(data []byte, o ReadOptions, cfg readConfig) (*Frame, error) {
	o, err := o.withDefaults()
	if err != nil {
		return nil, err
	}
	fileSize := len(data)
	if data, err = sniff(bytes.TrimPrefix(data, []byte{0xEF, 0xBB, 0xBF}), 0); err != nil {
		return nil, err
	}
	if bytes.IndexByte(data, '\n') < 0 && bytes.IndexByte(data, '\r') >= 0 {
		// Lines end with CR alone.
		data = bytes.ReplaceAll(data, []byte{'\r'}, []byte{'\n'})
	}
	var progress func(int)
	if o.Progress != nil {
		var mu sync.Mutex
		done := 0
		progress = func(n int) {
			mu.Lock()
			defer mu.Unlock()
			done += n
			o.Progress(min(int(float64(done)*float64(fileSize)/float64(max(len(data), 1))), fileSize), fileSize)
		}
	}
	cr := csv.NewReader(bytes.NewReader(data))
	cr.Comma = o.Delimiter
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err == io.EOF {
		return nil, errors.New("the file is empty: expected a header row naming the columns, then data rows")
	}
	if err != nil {
		return nil, fmt.Errorf("cannot read the header row: %v", csvErrText(err))
	}
	names, err := checkHeader(header, o)
	if err != nil {
		return nil, err
	}
	force := make([]bool, len(names))
	for _, t := range o.Text {
		k := -1
		for j, n := range names {
			if n == t {
				k = j
			}
		}
		if k < 0 {
			return nil, fmt.Errorf("column %s, to be read as text, %v", quoteValue(t), unknownColumn(t, names))
		}
		force[k] = true
	}
	r := &csvRead{data: data, o: o, cfg: cfg, names: names, force: force, progress: progress,
		headerEnd: int(cr.InputOffset())}
	f, err := r.run()
	if err == nil && o.Progress != nil {
		o.Progress(fileSize, fileSize)
	}
	return f, err
}

// csvRead is one read of a file's body.
type csvRead struct {
	data      []byte
	o         ReadOptions
	cfg       readConfig
	names     []string
	force     []bool
	progress  func(int)
	headerEnd int
}

// csvBatchIn is a batch of records as read; row0 is the row of the first
// record within its piece (1-based).
type csvBatchIn struct {
	piece, seq int
	row0       int
	start, end int // byte range of the batch in data
	recs       [][]string
}

// csvColPart is one column of a parsed batch: numbers while every field is a
// number; from the first field that is not, level codes into a local
// dictionary (and num is dropped).
type csvColPart struct {
	num       []float64
	codes     []int32 // -1 = missing
	levels    []string
	firstText int // batch index of the first non-number, -1 if none
	textVal   string
	nonf      int // batch index of the first NaN/Inf text, -1 if none
	nonfVal   string
}

type csvBatchOut struct {
	piece, seq int
	row0       int // 1-based row of the first record (absolute once assembled)
	n          int
	start, end int
	cols       []csvColPart
}

// pieceResult is the outcome of reading one piece of the body.
type pieceResult struct {
	rows   int
	err    error
	errRow int    // row within the piece
	line   int    // line within the piece for a CSV syntax error, 0 otherwise
	column string // the column at fault, if one is
}

func (r *csvRead) run() (*Frame, error) {
	body := r.data[r.headerEnd:]
	// Cut an unquoted body at line ends into pieces read at once.
	var pieces [][2]int
	if len(body) >= r.cfg.parallelMin && bytes.IndexByte(body, '"') < 0 {
		left := r.cfg.pieces
		pos := r.headerEnd
		for pos < len(r.data) {
			size := (len(r.data) - pos) / max(left, 1)
			if size < r.cfg.minPiece {
				size = len(r.data) - pos
			}
			end := pos + size
			if end < len(r.data) {
				if k := bytes.IndexByte(r.data[end:], '\n'); k < 0 {
					end = len(r.data)
				} else {
					end += k + 1
				}
			}
			pieces = append(pieces, [2]int{pos, end})
			pos = end
			left = max(left-1, 1)
		}
	} else {
		pieces = [][2]int{{r.headerEnd, len(r.data)}}
	}

	workers := runtime.GOMAXPROCS(0)
	in := make(chan csvBatchIn, workers)
	var mu sync.Mutex
	var outs []csvBatchOut
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for b := range in {
				o := r.parseBatch(b)
				mu.Lock()
				outs = append(outs, o)
				mu.Unlock()
				if r.progress != nil {
					r.progress(b.end - b.start)
				}
			}
		}()
	}
	results := make([]pieceResult, len(pieces))
	var firstBad atomic.Int64 // lowest piece with an error
	firstBad.Store(math.MaxInt64)
	var rg sync.WaitGroup
	sem := make(chan struct{}, workers)
	for k := range pieces {
		rg.Add(1)
		go func(k int) {
			defer rg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			results[k] = r.readPiece(k, pieces[k][0], pieces[k][1], in, func() bool { return firstBad.Load() < int64(k) })
			if results[k].err != nil {
				for {
					cur := firstBad.Load()
					if int64(k) >= cur || firstBad.CompareAndSwap(cur, int64(k)) {
						break
					}
				}
			}
		}(k)
	}
	rg.Wait()
	close(in)
	wg.Wait()

	offset := 0
	for k, res := range results {
		if res.err != nil {
			row := offset + res.errRow
			if res.column != "" {
				return nil, fmt.Errorf("column %s, row %d: %v", quoteValue(res.column), row, res.err)
			}
			if res.line > 0 {
				line := res.line + bytes.Count(r.data[:pieces[k][0]], []byte{'\n'})
				return nil, fmt.Errorf("row %d (line %d): %v", row, line, res.err)
			}
			return nil, fmt.Errorf("row %d %v", row, res.err)
		}
		offset += res.rows
	}
	if offset == 0 {
		return nil, errors.New("the file has a header but no data rows")
	}
	sort.Slice(outs, func(i, j int) bool {
		if outs[i].piece != outs[j].piece {
			return outs[i].piece < outs[j].piece
		}
		return outs[i].seq < outs[j].seq
	})
	base := make([]int, len(results))
	for k := 1; k < len(results); k++ {
		base[k] = base[k-1] + results[k-1].rows
	}
	for i := range outs {
		outs[i].row0 += base[outs[i].piece]
	}
	return r.assemble(outs, offset)
}

// readPiece reads the records of data[start:end] into batches sent to in.
// It stops early when stop reports that an earlier piece failed.
func (r *csvRead) readPiece(piece, start, end int, in chan<- csvBatchIn, stop func() bool) pieceResult {
	p := len(r.names)
	cr := csv.NewReader(bytes.NewReader(r.data[start:end]))
	cr.Comma = r.o.Delimiter
	cr.FieldsPerRecord = -1
	// Records are copied into one flat block of field headers per batch, so
	// no slice is allocated per row; a wide file has shorter batches, so the
	// block stays within 4 MiB whatever the number of columns.
	cr.ReuseRecord = true
	batchSize := max(1, min(r.cfg.batch, (1<<18)/p))
	var flat []string
	var batch [][]string
	row, seq := 1, 0
	bstart := start
	send := func() {
		if len(batch) > 0 {
			bend := start + int(cr.InputOffset())
			in <- csvBatchIn{piece: piece, seq: seq, row0: row - len(batch), start: bstart, end: bend, recs: batch}
			seq++
			bstart = bend
		}
		batch = nil
	}
	for {
		if len(batch) == 0 {
			if stop() {
				return pieceResult{}
			}
			flat = make([]string, batchSize*p)
			batch = make([][]string, 0, batchSize)
		}
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				if pe.Err == csv.ErrQuote {
					return pieceResult{err: errors.New("a quoted field is not closed (a \" is missing or extra): check the quotes in this row"), errRow: row, line: pe.StartLine}
				}
				return pieceResult{err: pe.Err, errRow: row, line: pe.Line}
			}
			return pieceResult{err: err, errRow: row}
		}
		if len(rec) != p {
			if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
				continue // blank line
			}
			return pieceResult{err: fieldCountError(rec, p, r.o.Delimiter), errRow: row}
		}
		for j, s := range rec {
			if len(s) > r.o.MaxField {
				return pieceResult{err: fmt.Errorf("the field has %d bytes, more than the limit of %d (it starts %s): check for an unclosed quote, or raise the limit (--max-field; ReadOptions.MaxField in the library)",
					len(s), r.o.MaxField, quoteValue(s)), errRow: row, column: r.names[j]}
			}
		}
		k := len(batch)
		copy(flat[k*p:(k+1)*p], rec)
		batch = append(batch, flat[k*p:(k+1)*p])
		row++
		if len(batch) == batchSize {
			send()
		}
	}
	send()
	return pieceResult{rows: row - 1}
}

func fieldCountError(rec []string, p int, delim rune) error {
	msg := fmt.Sprintf("has %d field%s but the header has %d: check for a missing or extra %s (quote fields that contain it)", len(rec), plural(len(rec), "", "s"), p, delimName(delim))
	if len(rec) == 1 && delim == ',' {
		if d := guessDelimiter(rec[0]); d != 0 {
			msg += fmt.Sprintf("; the row holds %s: if the file is separated by %ss, set the delimiter (--delimiter %s)", delimName(d), delimName(d), delimFlag(d))
		}
	}
	return errors.New(msg)
}

func delimName(d rune) string {
	switch d {
	case ',':
		return "comma"
	case ';':
		return "semicolon"
	case '\t':
		return "tab"
	case '|':
		return "pipe"
	}
	return strconv.QuoteRune(d)
}

func delimFlag(d rune) string {
	if d == '\t' {
		return "tab"
	}
	return "'" + string(d) + "'"
}

// guessDelimiter returns the separator a single comma-less field seems to
// be split by, or 0.
func guessDelimiter(s string) rune {
	for _, d := range []rune{';', '\t', '|'} {
		if strings.ContainsRune(s, d) {
			return d
		}
	}
	return 0
}

// csvErrText renders an encoding/csv error with its line.
func csvErrText(err error) string {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Sprintf("line %d: %v", pe.Line, pe.Err)
	}
	return err.Error()
}

func checkHeader(header []string, o ReadOptions) ([]string, error) {
	if len(header) == 1 && o.Delimiter == ',' {
		if d := guessDelimiter(header[0]); d != 0 {
			return nil, fmt.Errorf("header: the file has a single column %s, which holds %ss: the fields seem to be separated by %ss, not commas; set the delimiter (--delimiter %s)",
				quoteValue(header[0]), delimName(d), delimName(d), delimFlag(d))
		}
	}
	names := make([]string, len(header))
	seen := map[string]int{}
	for i, h := range header {
		h = strings.TrimSpace(h)
		if h == "" {
			return nil, fmt.Errorf("header: column %d has no name: give every column a name", i+1)
		}
		if len(h) > maxName {
			return nil, fmt.Errorf("header: the name of column %d has %d bytes, more than the limit of %d (it starts %s): check for an unclosed quote, or shorten the name", i+1, len(h), maxName, quoteValue(h))
		}
		if why := badText(h); why != "" {
			return nil, fmt.Errorf("header: the name of column %d, %s, %s: rename the column", i+1, quoteValue(h), why)
		}
		if j, dup := seen[h]; dup {
			return nil, fmt.Errorf("header: duplicate column name %s (columns %d and %d): rename one of them", quoteValue(h), j+1, i+1)
		}
		seen[h] = i
		names[i] = h
	}
	return names, nil
}

// badText says why text may not be shown as it is ("" when it may): it is
// not valid UTF-8, or it holds a control character, a line or paragraph
// separator or a bidirectional-text control.
func badText(s string) string {
	if !utf8.ValidString(s) {
		return "is not valid UTF-8 text: save the file as UTF-8 (for example iconv -f LATIN1 -t UTF-8 in.csv > out.csv)"
	}
	for _, r := range s {
		if unicode.IsControl(r) || unicode.Is(unicode.Bidi_Control, r) || r == '\u2028' || r == '\u2029' || r == '\ufeff' {
			return fmt.Sprintf("holds the control character %U", r)
		}
	}
	return ""
}

// quoteValue quotes text from a data file for a message: Go-escaped (so no
// control character or invalid byte reaches a terminal) and cut to 80
// characters.
func quoteValue(s string) string {
	const most = 80
	n := 0
	for i := range s {
		if n == most {
			return strconv.Quote(s[:i]) + fmt.Sprintf("… (%d bytes in all)", len(s))
		}
		n++
	}
	return strconv.Quote(s)
}

// Number kinds of a field.
const (
	numText      = iota // not a number: the column is text
	numOK               // a finite number
	numNonFinite        // NaN, Inf or out of range: an error in a numeric column
)

// parseNumber reads a trimmed field under the data-file number grammar
// [+-]? (d+ (. d*)? | . d+) ([eE] [+-]? d+)?, with NaN, Inf and Infinity
// (any case, one optional sign) and out-of-range numbers as non-finite.
func parseNumber(s string) (float64, int) {
	if !numberSyntax(s) {
		t := s
		if len(t) > 0 && (t[0] == '+' || t[0] == '-') {
			t = t[1:]
		}
		if strings.EqualFold(t, "nan") || strings.EqualFold(t, "inf") || strings.EqualFold(t, "infinity") {
			return math.NaN(), numNonFinite
		}
		return 0, numText
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return math.NaN(), numNonFinite
	}
	return v, numOK
}

func numberSyntax(s string) bool {
	i := skipSign(s, 0)
	k := skipDigits(s, i)
	digits := k - i
	if k < len(s) && s[k] == '.' {
		i = k + 1
		k = skipDigits(s, i)
		digits += k - i
	}
	if digits == 0 {
		return false
	}
	if k < len(s) && (s[k] == 'e' || s[k] == 'E') {
		i = skipSign(s, k+1)
		if k = skipDigits(s, i); k == i {
			return false
		}
	}
	return k == len(s)
}

func skipSign(s string, i int) int {
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		return i + 1
	}
	return i
}

func skipDigits(s string, i int) int {
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
	}
	return i
}

// parseBatch reads each column of a batch as numbers until a field is not
// one; from there on (and for columns read as text) it keeps level codes.
func (r *csvRead) parseBatch(b csvBatchIn) csvBatchOut {
	p := len(r.names)
	o := csvBatchOut{piece: b.piece, seq: b.seq, row0: b.row0, n: len(b.recs), start: b.start, end: b.end, cols: make([]csvColPart, p)}
	for j := 0; j < p; j++ {
		part := &o.cols[j]
		part.firstText, part.nonf = -1, -1
		if r.force[j] {
			part.encode(b.recs, j)
			continue
		}
		part.num = make([]float64, len(b.recs))
		for i, rec := range b.recs {
			s := strings.TrimSpace(rec[j])
			if isMissingToken(s) {
				part.num[i] = math.NaN()
				continue
			}
			v, k := parseNumber(s)
			if k == numText {
				part.firstText, part.textVal = i, s
				part.num = nil
				part.encode(b.recs, j)
				break
			}
			if k == numNonFinite && part.nonf < 0 {
				part.nonf, part.nonfVal = i, s
			}
			part.num[i] = v
		}
	}
	return o
}

// encode codes column j of recs into a local dictionary.
func (part *csvColPart) encode(recs [][]string, j int) {
	part.codes = make([]int32, len(recs))
	idx := map[string]int32{}
	for i := range recs {
		s := strings.TrimSpace(recs[i][j])
		if isMissingToken(s) {
			part.codes[i] = -1
			continue
		}
		c, ok := idx[s]
		if !ok {
			c = int32(len(part.levels))
			s = strings.Clone(s) // do not keep the record's line alive
			idx[s] = c
			part.levels = append(part.levels, s)
		}
		part.codes[i] = c
	}
}

// assemble joins the batches (in row order) of n rows into a Frame. A text
// column whose early batches were all numbers has those batches read again
// for their exact text.
func (r *csvRead) assemble(outs []csvBatchOut, n int) (*Frame, error) {
	p := len(r.names)
	text := make([]bool, p)
	for j := 0; j < p; j++ {
		text[j] = r.force[j]
		for _, b := range outs {
			if b.cols[j].codes != nil {
				text[j] = true
				break
			}
		}
	}
	// Second pass over the batches that still lack a text column's text.
	var mu sync.Mutex
	var rerr error
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for bi := range outs {
		var need []int
		for j := 0; j < p; j++ {
			if text[j] && outs[bi].cols[j].codes == nil {
				need = append(need, j)
			}
		}
		if len(need) == 0 {
			continue
		}
		wg.Add(1)
		go func(b *csvBatchOut, need []int) {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			if err := r.reread(b, need); err != nil {
				mu.Lock()
				rerr = err
				mu.Unlock()
			}
		}(&outs[bi], need)
	}
	wg.Wait()
	if rerr != nil {
		return nil, rerr
	}

	f := &Frame{names: r.names, cols: make(map[string]*Column, p), rows: n}
	cols := make([]*Column, p)
	for j := 0; j < p; j++ {
		wg.Add(1)
		go func(j int) {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			if text[j] {
				cols[j] = assembleText(r.names[j], j, outs, n)
			} else {
				cols[j] = assembleNumeric(r.names[j], j, outs, n)
			}
		}(j)
	}
	wg.Wait()
	for j, name := range r.names {
		f.cols[name] = cols[j]
	}
	return f, nil
}

// reread reads a batch's byte range again and codes the columns in need.
func (r *csvRead) reread(b *csvBatchOut, need []int) error {
	cr := csv.NewReader(bytes.NewReader(r.data[b.start:b.end]))
	cr.Comma = r.o.Delimiter
	cr.FieldsPerRecord = -1
	recs := make([][]string, 0, b.n)
	for {
		rec, err := cr.Read()
		if err != nil {
			break // io.EOF: the range was read without error the first time
		}
		if len(rec) != len(r.names) {
			continue // a blank line, skipped as before
		}
		recs = append(recs, rec)
	}
	if len(recs) != b.n {
		return fmt.Errorf("internal error: rows %d–%d read as %d rows the second time; please report it", b.row0, b.row0+b.n-1, len(recs))
	}
	for _, j := range need {
		b.cols[j].encode(recs, j)
	}
	return nil
}

func assembleNumeric(name string, j int, outs []csvBatchOut, n int) *Column {
	c := &Column{Name: name, Kind: Numeric, Num: make([]float64, 0, n)}
	for _, b := range outs {
		part := b.cols[j]
		c.Num = append(c.Num, part.num...)
		if c.issue == nil && part.nonf >= 0 {
			c.issue = fmt.Errorf("column %q, row %d: %s is not a finite number: write an empty field or NA for a missing value", name, b.row0+part.nonf, quoteValue(part.nonfVal))
		}
	}
	for _, v := range c.Num {
		if math.IsNaN(v) {
			c.Missing++
		}
	}
	return c
}

func assembleText(name string, j int, outs []csvBatchOut, n int) *Column {
	c := &Column{Name: name, Kind: Categorical, Codes: make([]int32, 0, n)}
	set := map[string]int32{}
	for _, b := range outs {
		part := b.cols[j]
		for _, s := range part.levels {
			set[s] = 0
		}
		if c.textAt == "" && part.firstText >= 0 {
			c.textAt = fmt.Sprintf("row %d holds %s, which is not a number", b.row0+part.firstText, quoteValue(part.textVal))
		}
	}
	c.Levels = make([]string, 0, len(set))
	for s := range set {
		c.Levels = append(c.Levels, s)
	}
	sort.Strings(c.Levels)
	for i, s := range c.Levels {
		set[s] = int32(i)
	}
	for _, b := range outs {
		part := b.cols[j]
		remap := make([]int32, len(part.levels))
		for k, s := range part.levels {
			remap[k] = set[s]
		}
		for _, code := range part.codes {
			if code < 0 {
				c.Codes = append(c.Codes, -1)
				c.Missing++
			} else {
				c.Codes = append(c.Codes, remap[code])
			}
		}
	}
	checkLevels(c)
	return c
}

// checkLevels sets the column's issue when a level may not be shown as it is
// (see badText), naming the first row that holds such a level.
func checkLevels(c *Column) {
	var bad []bool
	for l, s := range c.Levels {
		if badText(s) != "" {
			if bad == nil {
				bad = make([]bool, len(c.Levels))
			}
			bad[l] = true
		}
	}
	if bad == nil {
		return
	}
	for i, code := range c.Codes {
		if code >= 0 && bad[code] {
			s := c.Levels[code]
			c.issue = fmt.Errorf("column %q, row %d: the text %s %s", c.Name, i+1, quoteValue(s), badText(s))
			return
		}
	}
}
