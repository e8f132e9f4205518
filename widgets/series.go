package widgets

// Ad-hoc results: rows a user computes in a loop (a simulation over a grid,
// a table of estimates), shown as an interactive chart with its static
// picture, or as a table with a CSV download, through the same pipeline as
// the result views (go-echarts options, gonum/plot fallbacks, html/template).

import (
	"bytes"
	"encoding/base64"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"reflect"
	"strconv"
	"strings"
	"unicode"
)

// Bounds of what a sheet puts in a page. A chart carries at most
// maxPlotValues numbers (rows × series, which keeps its option under
// 100 KB) and maxPlotSeries lines; a table shows maxTableRows rows and
// embeds its CSV download only up to maxCSVBytes.
const (
	maxPlotValues = 3000
	maxPlotSeries = 8
	maxCSVBytes   = 512 << 10
)

// seriesPalette colours the lines of an ad-hoc chart. It leaves out the
// treated and control colours, which always mean an arm; the line styles
// (solid, dashed, dotted) repeat so that lines stay apart in grey print.
var seriesPalette = []string{colorAfter, "#6366f1", colorBefore, "#a21caf", "#0284c7", "#65a30d", ColorMuted, "#9333ea"}

var seriesDashes = []string{"solid", "dashed", "dotted"}

// Sheet is a set of ad-hoc results held as named columns of equal length,
// made by [Series] from a slice of structs or by [Columns] from named
// slices. It shows as a table (HTML with a CSV download, String for a
// terminal, MarshalJSON) and draws charts with Line and Scatter. An error
// (a field of an unsupported type named in a chart, columns of unequal
// length) is kept inside and shown in place of the output.
type Sheet struct {
	title   string
	cols    []sheetColumn
	leftOut []string // fields not turned into columns, with why
	err     error
}

type sheetColumn struct {
	name  string
	num   []float64 // numeric column; NaN is a missing value
	text  []string  // text column (num is nil)
	isInt bool
}

func (c sheetColumn) isNum() bool { return c.text == nil }

func (c sheetColumn) len() int {
	if c.isNum() {
		return len(c.num)
	}
	return len(c.text)
}

// Series reads rows, a slice (or array, or pointer to one) of structs or of
// pointers to structs, into a Sheet: one column per exported field, named
// by the field's `json` tag when it has one (a tag "-" leaves the field
// out) and by the field name otherwise, in field order; fields of embedded
// structs are promoted. Integer and float fields (and pointers to them, nil
// meaning missing) become numeric columns; strings, bools and values with a
// String method become text columns. Fields of other types (slices, maps,
// structs) are left out and listed under the table.
//
//	type row struct {
//		Dims  int     `json:"dims"`
//		Share float64 `json:"share"`
//	}
//	kernel.Show(widgets.Series(rows).Line("dims", "share"))
func Series(rows any) *Sheet {
	s := &Sheet{}
	s.cols, s.leftOut, s.err = reflectColumns(rows)
	return s
}

// Columns builds a Sheet from names and slices in turn: name, column, name,
// column, … Each column is a slice of integers or floats (numeric) or of
// strings or bools (text); all must have the same length.
//
//	widgets.Columns("dims", dims, "share", share).Line("dims", "share")
func Columns(namesAndColumns ...any) *Sheet {
	s := &Sheet{}
	if len(namesAndColumns)%2 != 0 {
		s.err = fmt.Errorf("widgets.Columns: %d arguments; give a name and a column for each column (name, slice, name, slice, …)", len(namesAndColumns))
		return s
	}
	seen := map[string]bool{}
	for i := 0; i < len(namesAndColumns); i += 2 {
		name, ok := namesAndColumns[i].(string)
		if !ok {
			s.err = fmt.Errorf("widgets.Columns: argument %d is a %T; a column's name (a string) comes before its slice", i+1, namesAndColumns[i])
			return s
		}
		if seen[name] {
			s.err = fmt.Errorf("widgets.Columns: column %q is given twice; give each column a name of its own", name)
			return s
		}
		seen[name] = true
		v := reflect.ValueOf(namesAndColumns[i+1])
		if !v.IsValid() || (v.Kind() != reflect.Slice && v.Kind() != reflect.Array) {
			s.err = fmt.Errorf("widgets.Columns: column %q is a %T; give a slice of numbers, strings or bools", name, namesAndColumns[i+1])
			return s
		}
		conv, isInt, ok := converter(v.Type().Elem())
		if !ok {
			s.err = fmt.Errorf("widgets.Columns: column %q holds %s values; give a slice of numbers, strings or bools", name, v.Type().Elem())
			return s
		}
		col := sheetColumn{name: name, isInt: isInt}
		for k := 0; k < v.Len(); k++ {
			col.add(conv(v.Index(k)))
		}
		if len(s.cols) > 0 && col.len() != s.cols[0].len() {
			s.err = fmt.Errorf("widgets.Columns: column %q has %d values but column %q has %d; give columns of the same length",
				name, col.len(), s.cols[0].name, s.cols[0].len())
			return s
		}
		s.cols = append(s.cols, col)
	}
	if len(s.cols) == 0 {
		s.err = errors.New("widgets.Columns: no columns; give a name and a slice for each column")
	}
	return s
}

// cellValue is one converted value: a number or a text.
type cellValue struct {
	num    float64
	text   string
	isText bool
}

func (c *sheetColumn) add(v cellValue) {
	if v.isText {
		if c.text == nil {
			c.text = []string{}
		}
		c.text = append(c.text, v.text)
		return
	}
	c.num = append(c.num, v.num)
}

var stringerType = reflect.TypeOf((*fmt.Stringer)(nil)).Elem()

// converter returns how to read a value of type t, whether its column holds
// integers, and false when t cannot be a column. A column is numeric or
// text by its type, so every value of it converts the same way.
func converter(t reflect.Type) (conv func(reflect.Value) cellValue, isInt, ok bool) {
	if t.Implements(stringerType) && t.Kind() != reflect.Pointer && t.Kind() != reflect.Interface {
		return func(v reflect.Value) cellValue {
			return cellValue{text: stringOf(v), isText: true}
		}, false, true
	}
	switch t.Kind() {
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return func(v reflect.Value) cellValue { return cellValue{num: float64(v.Int())} }, true, true
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		return func(v reflect.Value) cellValue { return cellValue{num: float64(v.Uint())} }, true, true
	case reflect.Float32, reflect.Float64:
		return func(v reflect.Value) cellValue { return cellValue{num: v.Float()} }, false, true
	case reflect.String:
		return func(v reflect.Value) cellValue { return cellValue{text: v.String(), isText: true} }, false, true
	case reflect.Bool:
		return func(v reflect.Value) cellValue { return cellValue{text: strconv.FormatBool(v.Bool()), isText: true} }, false, true
	case reflect.Pointer:
		inner, isInt, ok := converter(t.Elem())
		if !ok || t.Elem().Kind() == reflect.Pointer {
			return nil, false, false
		}
		text := inner(reflect.Zero(t.Elem())).isText
		return func(v reflect.Value) cellValue {
			if v.IsNil() {
				return cellValue{num: math.NaN(), isText: text}
			}
			return inner(v.Elem())
		}, isInt, true
	}
	return nil, false, false
}

// stringOf calls String on v, turning a panic into a visible marker.
func stringOf(v reflect.Value) (s string) {
	defer func() {
		if r := recover(); r != nil {
			s = fmt.Sprintf("(String failed: %v)", r)
		}
	}()
	return v.Interface().(fmt.Stringer).String()
}

// fieldPath is one column of a struct: the field's index path and how to
// read it.
type fieldPath struct {
	name  string
	index []int
	conv  func(reflect.Value) cellValue
	isInt bool
}

// structFields lists the columns of struct type t (see Series) and the
// fields left out.
func structFields(t reflect.Type, prefix []int, depth int) (fields []fieldPath, leftOut []string, err error) {
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		index := append(append([]int{}, prefix...), i)
		name, tagged := f.Name, false
		if tag, ok := f.Tag.Lookup("json"); ok {
			if tag == "-" {
				continue
			}
			if n, _, _ := strings.Cut(tag, ","); n != "" {
				name, tagged = n, true
			}
		}
		ft := f.Type
		if f.Anonymous && !tagged {
			et := ft
			if et.Kind() == reflect.Pointer {
				et = et.Elem()
			}
			if et.Kind() == reflect.Struct && depth < 8 {
				if ft.Kind() == reflect.Pointer {
					leftOut = append(leftOut, f.Name+" (an embedded pointer; embed the struct itself)")
					continue
				}
				sub, left, err := structFields(et, index, depth+1)
				if err != nil {
					return nil, nil, err
				}
				fields = append(fields, sub...)
				leftOut = append(leftOut, left...)
				continue
			}
		}
		if !f.IsExported() {
			continue
		}
		conv, isInt, ok := converter(ft)
		if !ok {
			leftOut = append(leftOut, fmt.Sprintf("%s (type %s)", name, ft))
			continue
		}
		fields = append(fields, fieldPath{name: name, index: index, conv: conv, isInt: isInt})
	}
	seen := map[string]bool{}
	for _, f := range fields {
		if seen[f.name] {
			return nil, nil, fmt.Errorf("widgets.Series: two fields are named %q (by field name or json tag); rename one so each column has its own name", f.name)
		}
		seen[f.name] = true
	}
	return fields, leftOut, nil
}

// reflectColumns reads a slice of structs into columns.
func reflectColumns(rows any) (cols []sheetColumn, leftOut []string, err error) {
	defer func() {
		if r := recover(); r != nil {
			cols, leftOut, err = nil, nil, fmt.Errorf("widgets.Series: reading the rows failed: %v", r)
		}
	}()
	v := reflect.ValueOf(rows)
	if !v.IsValid() {
		return nil, nil, errors.New("widgets.Series: rows is nil; give a slice of structs")
	}
	for v.Kind() == reflect.Pointer {
		if v.IsNil() {
			return nil, nil, fmt.Errorf("widgets.Series: rows is a nil %s; give a slice of structs", v.Type())
		}
		v = v.Elem()
	}
	if v.Kind() != reflect.Slice && v.Kind() != reflect.Array {
		return nil, nil, fmt.Errorf("widgets.Series: rows is a %s; give a slice of structs (for named slices use widgets.Columns)", v.Type())
	}
	et := v.Type().Elem()
	ptr := et.Kind() == reflect.Pointer
	if ptr {
		et = et.Elem()
	}
	if et.Kind() != reflect.Struct {
		return nil, nil, fmt.Errorf("widgets.Series: rows holds %s values; give a slice of structs (for named slices use widgets.Columns)", v.Type().Elem())
	}
	fields, leftOut, err := structFields(et, nil, 0)
	if err != nil {
		return nil, nil, err
	}
	if len(fields) == 0 {
		return nil, nil, fmt.Errorf("widgets.Series: struct %s has no exported field of a number, string or bool type to show", et)
	}
	cols = make([]sheetColumn, len(fields))
	for j, f := range fields {
		cols[j] = sheetColumn{name: f.name, isInt: f.isInt}
	}
	for i := 0; i < v.Len(); i++ {
		row := v.Index(i)
		if ptr {
			if row.IsNil() {
				return nil, nil, fmt.Errorf("widgets.Series: row %d is a nil pointer; remove it or fill it", i)
			}
			row = row.Elem()
		}
		for j, f := range fields {
			cols[j].add(f.conv(row.FieldByIndex(f.index)))
		}
	}
	// A text column with no rows still is text.
	for j, f := range fields {
		if cols[j].num == nil && cols[j].text == nil && f.conv(reflect.Zero(fieldType(et, f.index))).isText {
			cols[j].text = []string{}
		}
	}
	return cols, leftOut, nil
}

func fieldType(t reflect.Type, index []int) reflect.Type {
	return t.FieldByIndex(index).Type
}

// Err is the error kept by the sheet, or nil.
func (s *Sheet) Err() error {
	if s == nil {
		return errors.New("nil Sheet: make one with widgets.Series(rows) or widgets.Columns(...)")
	}
	return s.err
}

// Len is the number of rows.
func (s *Sheet) Len() int {
	if s.Err() != nil || len(s.cols) == 0 {
		return 0
	}
	return s.cols[0].len()
}

// Names lists the columns in order.
func (s *Sheet) Names() []string {
	if s.Err() != nil {
		return nil
	}
	out := make([]string, len(s.cols))
	for i, c := range s.cols {
		out[i] = c.name
	}
	return out
}

// Titled returns a copy of the sheet with a title, shown over its table and
// as the default title of its charts.
func (s *Sheet) Titled(title string) *Sheet {
	if s == nil {
		return s
	}
	c := *s
	c.title = title
	return &c
}

func (s *Sheet) column(name, role string) (sheetColumn, error) {
	for _, c := range s.cols {
		if c.name == name {
			return c, nil
		}
	}
	for _, l := range s.leftOut {
		if strings.HasPrefix(l, name+" (") {
			return sheetColumn{}, fmt.Errorf("%s column %q was left out: %s cannot be shown; give the field a number, string or bool type", role, name, l)
		}
	}
	return sheetColumn{}, fmt.Errorf("%s column %q is not in the sheet; its columns are %s", role, name, strings.Join(quoteAll(s.Names()), ", "))
}

func quoteAll(names []string) []string {
	out := make([]string, len(names))
	for i, n := range names {
		out[i] = strconv.Quote(n)
	}
	return out
}

// Table returns the sheet limited to the named columns, in that order (all
// columns when none is named), to show as a table.
func (s *Sheet) Table(columns ...string) *Sheet {
	if s.Err() != nil || len(columns) == 0 {
		return s
	}
	c := &Sheet{title: s.title}
	for _, name := range columns {
		col, err := s.column(name, "table")
		if err != nil {
			c.err = err
			return c
		}
		c.cols = append(c.cols, col)
	}
	return c
}

// cellText formats a value for the table and the terminal.
func (c sheetColumn) cellText(i int) string {
	if !c.isNum() {
		return c.text[i]
	}
	v := c.num[i]
	if math.IsNaN(v) {
		return "—"
	}
	if c.isInt && math.Abs(v) < 1e15 {
		return formatCount(int(v))
	}
	return trimZeros(formatNumber(v))
}

// trimZeros drops the trailing zeros of a decimal fraction ("0.01000" is
// "0.01", "2.000" is "2"); a grid value then reads as it was typed.
func trimZeros(s string) string {
	if !strings.Contains(s, ".") || strings.ContainsAny(s, "eE") {
		return s
	}
	return strings.TrimSuffix(strings.TrimRight(s, "0"), ".")
}

// csvText formats a value for the CSV file: every digit, no separators,
// missing values empty. A text starting with =, +, -, @, tab or carriage
// return gets a leading apostrophe, so that a spreadsheet opening the file
// does not run it as a formula.
func (c sheetColumn) csvText(i int) string {
	if !c.isNum() {
		t := c.text[i]
		if t != "" && strings.ContainsRune("=+-@\t\r", rune(t[0])) {
			return "'" + t
		}
		return t
	}
	v := c.num[i]
	switch {
	case math.IsNaN(v):
		return ""
	case c.isInt:
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// WriteCSV writes the sheet as CSV (encoding/csv) with a header row; see
// the table's download link for the format.
func (s *Sheet) WriteCSV(w io.Writer) error {
	if err := s.Err(); err != nil {
		return err
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(s.Names()); err != nil {
		return fmt.Errorf("writing the CSV header: %w", err)
	}
	rec := make([]string, len(s.cols))
	for i := 0; i < s.Len(); i++ {
		for j, c := range s.cols {
			rec[j] = c.csvText(i)
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("writing CSV row %d: %w", i+1, err)
		}
	}
	cw.Flush()
	return cw.Error()
}

var sheetTemplate = template.Must(template.New("sheet").Parse(
	`<div class="cp-sheet">{{.Table}}` +
		`{{if .CSV}}<p class="cp-note"><a href="{{.CSV}}" download="{{.File}}">download CSV</a> ({{.Rows}})</p>{{end}}` +
		`{{range .Notes}}<p class="cp-note">{{.}}</p>{{end}}</div>`))

// HTML is the sheet as a table (the first 60 rows) with a link that
// downloads every row as CSV (a data URI, up to 512 KB).
func (s *Sheet) HTML() string {
	if err := s.Err(); err != nil {
		return ErrorPanel(err)
	}
	t := table{Caption: s.title}
	for _, c := range s.cols {
		if c.isNum() {
			t.Head = append(t.Head, headNum(c.name))
		} else {
			t.Head = append(t.Head, headText(c.name))
		}
	}
	n := s.Len()
	for i := 0; i < min(n, maxTableRows); i++ {
		var r tableRow
		for _, c := range s.cols {
			if c.isNum() {
				r.Cells = append(r.Cells, numCell(c.cellText(i)))
			} else {
				r.Cells = append(r.Cells, textCell(c.cellText(i)))
			}
		}
		t.Rows = append(t.Rows, r)
	}
	var notes []string
	if n > maxTableRows {
		notes = append(notes, fmt.Sprintf("Showing %s of %s rows; the CSV has them all.", formatCount(maxTableRows), formatCount(n)))
	}
	var csvBuf bytes.Buffer
	var link template.URL
	if err := s.WriteCSV(&csvBuf); err != nil {
		notes = append(notes, "No CSV download: "+ErrorMessage(err))
	} else if csvBuf.Len() > maxCSVBytes {
		notes = append(notes, fmt.Sprintf("No CSV download: the CSV is %s bytes, more than a page should carry (%s); write it with Sheet.WriteCSV.",
			formatCount(csvBuf.Len()), formatCount(maxCSVBytes)))
	} else {
		link = template.URL("data:text/csv;charset=utf-8;base64," + base64.StdEncoding.EncodeToString(csvBuf.Bytes()))
	}
	if len(s.leftOut) > 0 {
		notes = append(notes, "Left out (no number, string or bool type): "+strings.Join(s.leftOut, ", ")+".")
	}
	name := "results"
	if s.title != "" {
		name = saveFileName(s.title)
	}
	var b strings.Builder
	err := sheetTemplate.Execute(&b, map[string]any{"Table": template.HTML(t.HTML()), "CSV": link, "File": name + ".csv",
		"Rows": formatCount(n) + " rows", "Notes": notes})
	if err != nil {
		return ErrorPanel(fmt.Errorf("table %q: %w", s.title, err))
	}
	return b.String()
}

// String is the sheet as a fixed-width text table (the first 60 rows), with
// control characters shown as escapes.
func (s *Sheet) String() string {
	if err := s.Err(); err != nil {
		return ErrorText(err)
	}
	n := s.Len()
	shown := min(n, maxTableRows)
	cells := make([][]string, shown+1)
	cells[0] = make([]string, len(s.cols))
	for j, c := range s.cols {
		cells[0][j] = terminalText(c.name)
	}
	for i := 0; i < shown; i++ {
		cells[i+1] = make([]string, len(s.cols))
		for j, c := range s.cols {
			cells[i+1][j] = terminalText(c.cellText(i))
		}
	}
	width := make([]int, len(s.cols))
	for _, row := range cells {
		for j, v := range row {
			width[j] = max(width[j], len([]rune(v)))
		}
	}
	var b strings.Builder
	if s.title != "" {
		b.WriteString(terminalText(s.title) + "\n")
	}
	for _, row := range cells {
		for j, v := range row {
			pad := strings.Repeat(" ", width[j]-len([]rune(v)))
			if j > 0 {
				b.WriteString("  ")
			}
			if s.cols[j].isNum() {
				b.WriteString(pad + v)
			} else {
				b.WriteString(v + pad)
			}
		}
		b.WriteString("\n")
	}
	if n > shown {
		fmt.Fprintf(&b, "… %s more rows (%s in all)\n", formatCount(n-shown), formatCount(n))
	}
	if len(s.leftOut) > 0 {
		b.WriteString(terminalText("left out: "+strings.Join(s.leftOut, ", ")) + "\n")
	}
	return strings.TrimRight(b.String(), "\n")
}

// terminalText replaces control characters (which could move a terminal's
// cursor or change its colours) with visible escapes.
func terminalText(s string) string {
	if !strings.ContainsFunc(s, unicode.IsControl) {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		if unicode.IsControl(r) {
			fmt.Fprintf(&b, "\\x%02x", r)
			continue
		}
		b.WriteRune(r)
	}
	return b.String()
}

// jsonValues is a column for JSON: numbers (NaN as null) or strings.
func (c sheetColumn) jsonValues() any {
	if !c.isNum() {
		return c.text
	}
	out := make([]any, len(c.num))
	for i, v := range c.num {
		if finite(v) {
			out[i] = v
		}
	}
	return out
}

func (c sheetColumn) kind() string {
	switch {
	case !c.isNum():
		return "text"
	case c.isInt:
		return "integer"
	}
	return "number"
}

// MarshalJSON writes the sheet as {"title", "columns": [{"name", "type",
// "values"}], "rows", "left_out"}; missing and non-finite numbers are null.
// A sheet with an error writes {"error": message}.
func (s *Sheet) MarshalJSON() ([]byte, error) {
	if err := s.Err(); err != nil {
		return json.Marshal(map[string]string{"error": ErrorMessage(err)})
	}
	type col struct {
		Name   string `json:"name"`
		Type   string `json:"type"`
		Values any    `json:"values"`
	}
	out := struct {
		Title   string   `json:"title,omitempty"`
		Rows    int      `json:"rows"`
		Columns []col    `json:"columns"`
		LeftOut []string `json:"left_out,omitempty"`
	}{Title: s.title, Rows: s.Len(), LeftOut: s.leftOut}
	for _, c := range s.cols {
		out.Columns = append(out.Columns, col{c.name, c.kind(), c.jsonValues()})
	}
	return json.Marshal(out)
}
