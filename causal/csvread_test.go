package causal

import (
	"bytes"
	"compress/gzip"
	"fmt"
	"os"
	"runtime"
	"strings"
	"testing"
	"time"
)

// TestNumberGrammar: a column is numeric only when every non-missing field
// is a number as data files write them; Go literal syntax makes it text.
func TestNumberGrammar(t *testing.T) {
	numbers := map[string]float64{"12": 12, "-3.5": -3.5, "+5": 5, ".5": 0.5, "5.": 5, "1e-3": 0.001, "2.5E+4": 25000,
		"007": 7, "1.50": 1.5, " 42 ": 42, "-0": 0, "1e-400": 0}
	for field, want := range numbers {
		f, err := parse(t, "x,t\n"+field+",1\n")
		if err != nil {
			t.Fatalf("%q: %v", field, err)
		}
		c, _ := f.Column("x")
		if c.Kind != Numeric || c.Num[0] != want || c.Err() != nil {
			t.Errorf("%q reads as %v %v (%v), want the number %g", field, c.Kind, c.Num, c.Err(), want)
		}
	}
	for _, field := range []string{"1_000", "0x1p3", "0x10", "0b101", "0o17", "1,5", "1e", "e5", ".", "+", "--1", "1.2.3", "1 000", "5%", "$5", "1e+", "١٢", "1d"} {
		f, err := ParseCSV(strings.NewReader("x,t\n\"" + field + "\",1\n2,0\n"))
		if err != nil {
			t.Fatalf("%q: %v", field, err)
		}
		c, _ := f.Column("x")
		if c.Kind != Categorical || c.Levels[c.Codes[0]] != field {
			t.Errorf("%q: kind %v, levels %q; want text that keeps %q", field, c.Kind, c.Levels, field)
		}
	}
	// Non-finite spellings and out-of-range numbers are errors in a numeric
	// column (when used) and levels in a text column.
	for _, field := range []string{"NaN", "nan", "-Inf", "+inf", "Infinity", "1e999", "-1e400"} {
		f, err := parse(t, "x,t\n1,0\n"+field+",1\n")
		if err != nil {
			t.Fatal(err)
		}
		c, _ := f.Column("x")
		if c.Kind != Numeric || c.Err() == nil || !strings.Contains(c.Err().Error(), "row 2") || !strings.Contains(c.Err().Error(), "not a finite number") {
			t.Errorf("%q: %v, err %v", field, c.Kind, c.Err())
		}
		f, _ = parse(t, "x,t\nabc,0\n"+field+",1\n")
		c, _ = f.Column("x")
		if c.Kind != Categorical || c.Levels[c.Codes[1]] != field || c.Err() != nil {
			t.Errorf("%q in a text column: %v %q %v", field, c.Kind, c.Levels, c.Err())
		}
	}
}

// TestMissingSpelling: "", spaces and NA are missing in both kinds; "na",
// "N/A", "null" and "-" are not (they make a column text).
func TestMissingSpelling(t *testing.T) {
	f, err := parse(t, "x,z,t\n1,a,0\n,b,1\n  ,,0\nNA,NA,1\n5, NA ,0\n")
	if err != nil {
		t.Fatal(err)
	}
	x, _ := f.Column("x")
	z, _ := f.Column("z")
	if x.Kind != Numeric || x.Missing != 3 || z.Kind != Categorical || z.Missing != 3 || len(z.Levels) != 2 {
		t.Errorf("x %v missing %d; z %v missing %d levels %q", x.Kind, x.Missing, z.Kind, z.Missing, z.Levels)
	}
	for _, tok := range []string{"na", "N/A", "null", "-", "."} {
		f, _ := parse(t, "x,t\n1,0\n"+tok+",1\n")
		x, _ := f.Column("x")
		if x.Kind != Categorical || x.Missing != 0 {
			t.Errorf("%q: %v, %d missing; want a text level", tok, x.Kind, x.Missing)
		}
	}
}

// TestKindIndependentOfReaderSizes: the same bytes give the same frame
// whatever the batch size, the number of pieces and the core count, for
// quoted and unquoted bodies.
func TestKindIndependentOfReaderSizes(t *testing.T) {
	inputs := []string{
		"a,b,c\n1,007,x\n2,7,y\n3,1.50,z\n4,NaN,\n5,0042,w\n6,A,v\n7,8,NA\n",
		"a,b,c\n1,2,3\n4,5,6\n7,8,9\n10,11,12\n13,14,15\n16,x,17\n",
		"a,b\n\"1\",\"007\"\n2,\"7\"\n3,\"a,b\"\n4,Inf\n5,-\n",
		"a,b\n1,2\n\n3,4\n \n5,NaN\n6,7\n",
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, in := range inputs {
		var first []byte
		for _, procs := range []int{1, 2, 3, 8} {
			runtime.GOMAXPROCS(procs)
			for _, cfg := range []readConfig{defaultReadConfig(), {batch: 1, parallelMin: 0, pieces: 3, minPiece: 1}, {batch: 2, parallelMin: 0, pieces: 8, minPiece: 4}, {batch: 3, parallelMin: 1 << 30, pieces: 1, minPiece: 1}} {
				f, err := parseData([]byte(in), ReadOptions{}, cfg)
				if err != nil {
					t.Fatal(err)
				}
				d := frameDump(t, f)
				if first == nil {
					first = d
				} else if !bytes.Equal(d, first) {
					t.Errorf("%q with %d procs and %+v:\n%s\nwant\n%s", in, procs, cfg, d, first)
				}
			}
		}
	}
}

// TestFieldLengthCap: a field over the limit is refused with its column and
// row, without reading it into many copies; the limit can be raised.
func TestFieldLengthCap(t *testing.T) {
	big := strings.Repeat("\x1b[31mA", (16<<20)/6)
	data := "x,note,t\n1,a,0\n2," + big + ",1\n"
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	_, err := parse(t, data)
	runtime.ReadMemStats(&after)
	wantErr(t, err, `column "note", row 2`, "bytes, more than the limit of 1048576", "unclosed quote")
	if strings.Contains(err.Error(), "\x1b") || len(err.Error()) > 400 {
		t.Errorf("the message echoes the field raw or in full (%d bytes)", len(err.Error()))
	}
	if alloc := after.TotalAlloc - before.TotalAlloc; alloc > 12*uint64(len(data)) {
		t.Errorf("reading a %d-byte file allocated %d bytes", len(data), alloc)
	}
	f, err := ParseCSVWith(strings.NewReader("x,note,t\n1,a,0\n2,"+strings.Repeat("b", 2<<20)+",1\n"), ReadOptions{MaxField: 4 << 20})
	if err != nil || f.Rows() != 2 {
		t.Fatalf("raised limit: %v", err)
	}
	// An unclosed quote runs to the end of the file.
	_, err = parse(t, "x,t\n1,\"0\n2,1\n")
	wantErr(t, err, "row 1", "line 2")
	_, err = ParseCSVWith(strings.NewReader("x\n1\n"), ReadOptions{MaxField: -1})
	wantErr(t, err, "maximum field length -1")
}

// TestTextSafety: bytes that are not UTF-8 and control characters never
// merge levels or reach a terminal: a column holding them is an error,
// naming the column and row, when it is used; a header holding them is
// refused; messages quote what they echo and cut it to 80 characters.
func TestTextSafety(t *testing.T) {
	latin := "x,town,t\n1,caf\xe9,0\n2,caf\xe8,1\n3,caf\xe9,0\n4,other,1\n5,other,0\n6,caf\xe8,1\n"
	f, err := parse(t, latin)
	if err != nil {
		t.Fatal(err)
	}
	town, _ := f.Column("town")
	if len(town.Levels) != 3 {
		t.Errorf("levels %q: distinct bytes merged", town.Levels)
	}
	err = FromSource(f).Treat("t").Adjust("x", "town").Err()
	wantErr(t, err, `column "town", row 1`, `"caf\xe9"`, "not valid UTF-8", "iconv")
	if err := FromSource(f).Treat("t").Adjust("x").Err(); err != nil {
		t.Errorf("unused column blocks the study: %v", err)
	}
	ansi := "x,z,t\n1,a,0\n2,\x1b[2J\x1b[31mred,1\n3,a,0\n4,b,1\n5,b,0\n6,a,1\n"
	err = studyFrom(t, ansi).Treat("t").Adjust("x", "z").Err()
	wantErr(t, err, `column "z", row 2`, `\x1b[2J`, "control character")
	err = studyFrom(t, "x,t\n1,a\u202eb\n2,c\n").Treat("t").Err()
	wantErr(t, err, "row 1", "U+202E")
	for _, header := range []string{"x,\x1b[31mz,t\n1,2,3\n", "x,caf\xe9,t\n1,2,3\n", "x,\"a\nb\",t\n1,2,3\n"} {
		_, err := parse(t, header)
		wantErr(t, err, "header", "column 2", "rename the column")
		if strings.ContainsAny(err.Error(), "\x1b\n") || !strings.Contains(err.Error(), `"`) {
			t.Errorf("unescaped header in %q", err)
		}
	}
	_, err = NewFrame([]string{"a\x07"}, map[string][]float64{"a\x07": {1}}, nil)
	wantErr(t, err, `"a\a"`, "control character")
	fr, _ := NewFrame(nil, map[string][]float64{"t": {0, 1}}, map[string][]string{"z": {"ok", "\x1b]0;title\x07"}})
	c, _ := fr.Column("z")
	wantErr(t, c.Err(), `column "z", row 2`, `\x1b]0;title\a`)
	long := strings.Repeat("é", 200)
	if q := quoteValue(long); !strings.HasPrefix(q, `"`+strings.Repeat("é", 80)+`"…`) || !strings.Contains(q, "400 bytes") {
		t.Errorf("quoteValue: %s", q)
	}
}

// TestDialectsDetected: semicolons and tabs are named, with the option that
// reads them; CR-only line ends and gzip are read; binary files are named.
func TestDialectsDetected(t *testing.T) {
	_, err := parse(t, "x;z;t\n1;a;0\n2;b;1\n")
	wantErr(t, err, "separated by semicolons", "--delimiter ';'")
	_, err = parse(t, "x\tz\tt\n1\ta\t0\n")
	wantErr(t, err, "separated by tabs", "--delimiter tab")
	_, err = parse(t, "x,z\n1;2\n")
	wantErr(t, err, "row 1 has 1 field", "semicolon")
	f, err := ParseCSVWith(strings.NewReader("x;z;t\n1,5;a;0\n2;b;1\n"), ReadOptions{Delimiter: ';'})
	if err != nil {
		t.Fatal(err)
	}
	if x, _ := f.Column("x"); x.Kind != Categorical || x.Levels[0] != "1,5" {
		t.Errorf("decimal comma: %v %q (a decimal comma is text)", x.Kind, x.Levels)
	}
	f, err = ParseCSVWith(strings.NewReader("x\tz\tt\n1\ta b\t0\n2\tc\t1\n"), ReadOptions{Delimiter: '\t'})
	if err != nil || f.Rows() != 2 {
		t.Fatalf("tab: %v", err)
	}
	f, err = parse(t, "x,z,t\r1,a,0\r2,b,1\r")
	if err != nil || f.Rows() != 2 {
		t.Fatalf("CR-only: %v", err)
	}
	if z, _ := f.Column("z"); len(z.Levels) != 2 || z.Levels[1] != "b" {
		t.Errorf("CR-only levels %q", z.Levels)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	fmt.Fprint(zw, "x,z,t\n1,a,0\n2,b,1\n")
	zw.Close()
	path := t.TempDir() + "/d.csv.gz"
	os.WriteFile(path, gz.Bytes(), 0o644)
	if f, err = ReadCSV(path); err != nil || f.Rows() != 2 {
		t.Fatalf("gzip: %v", err)
	}
	_, err = parse(t, string(gz.Bytes()[:20]))
	wantErr(t, err, "gzip-compressed but damaged")
	for magic, want := range map[string]string{"PK\x03\x04\x14\x00": "ZIP archive", "\xff\xfex\x00,\x00": "UTF-16", "a,b\n1,\x00\n": "NUL byte at byte 7",
		"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1": "Excel", "\xfd7zXZ\x00": "xz", "BZh91AY&SY\xc1\x02\x9f\xfe\x01": "bzip2", "BZh91AY&SY,b\n": "no data rows" /* printable: text */, "SQLite format 3\x00": "SQLite"} {
		_, err := parse(t, magic)
		wantErr(t, err, want)
	}
	for in, want := range map[string]rune{",": ',', ";": ';', "tab": '\t', `\t`: '\t', "\t": '\t', "|": '|', "§": '§'} {
		if r, err := ParseDelimiter(in); err != nil || r != want {
			t.Errorf("ParseDelimiter(%q) = %q, %v", in, r, err)
		}
	}
	for _, in := range []string{"", ";;", `"`, "\n", "\x1b", "\xff", "ab"} {
		if _, err := ParseDelimiter(in); err == nil {
			t.Errorf("ParseDelimiter(%q) accepted", in)
		}
	}
}

// TestTextOption: columns named in ReadOptions.Text keep every field's text.
func TestTextOption(t *testing.T) {
	f, err := ParseCSVWith(strings.NewReader("zip,t\n007,0\n0042,1\n7,0\n"), ReadOptions{Text: []string{"zip"}})
	if err != nil {
		t.Fatal(err)
	}
	z, _ := f.Column("zip")
	if z.Kind != Categorical || strings.Join(z.Levels, " ") != "0042 007 7" {
		t.Errorf("zip: %v %q", z.Kind, z.Levels)
	}
	_, err = ParseCSVWith(strings.NewReader("zip,t\n007,0\n"), ReadOptions{Text: []string{"Zip"}})
	wantErr(t, err, `"Zip"`, `did you mean "zip"`)
}

// TestManyLevelsRefused: a categorical covariate with thousands of levels is
// refused at once (it ran for minutes before), with what to do.
func TestManyLevelsRefused(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,id,t\n")
	for i := 0; i < 20000; i++ {
		fmt.Fprintf(&b, "%d,L%d,%d\n", i%17, i%8000, (i/3)%2)
	}
	start := time.Now()
	err := studyFrom(t, b.String()).Treat("t").Adjust("x", "id").Err()
	wantErr(t, err, `covariate "id" has 8000 levels in the 20000 rows used`, "group rare levels")
	if el := time.Since(start); el > 5*time.Second {
		t.Errorf("took %v", el)
	}
	// The share rule: 60 levels in 100 rows.
	b.Reset()
	b.WriteString("x,g,t\n")
	for i := 0; i < 100; i++ {
		fmt.Fprintf(&b, "%d,g%d,%d\n", i%7, i%60, i%2)
	}
	wantErr(t, studyFrom(t, b.String()).Treat("t").Adjust("x", "g").Err(), "60 levels in the 100 rows used")
	// AsCategory of a continuous column is caught the same way.
	b.Reset()
	b.WriteString("x,t\n")
	for i := 0; i < 1000; i++ {
		fmt.Fprintf(&b, "%d.5,%d\n", i, i%2)
	}
	wantErr(t, studyFrom(t, b.String()).Treat("t").Adjust("x").AsCategory("x").Err(), `covariate "x" has 1000 levels`)
}

// TestWideDesignStaysFast: 150 levels in 20,000 rows (within the limits)
// builds its design and rank check quickly; the rank check was O(p⁴).
func TestWideDesignStaysFast(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,g,t\n")
	for i := 0; i < 20000; i++ {
		fmt.Fprintf(&b, "%d,g%d,%d\n", i%17, (i*7)%150, (i/3)%2)
	}
	start := time.Now()
	d, err := studyFrom(t, b.String()).Treat("t").Adjust("x", "g").Design()
	if err != nil {
		t.Fatal(err)
	}
	if d.P != 151 {
		t.Errorf("%d terms, want 151", d.P)
	}
	if el := time.Since(start); el > 10*time.Second {
		t.Errorf("design took %v", el)
	}
}

// TestTreatedLevelIsANumber: a numeric treatment's treated level is read
// under the data-file grammar ("1abc" is not 1).
func TestTreatedLevelIsANumber(t *testing.T) {
	s := studyFrom(t, "x,t\n1,2\n2,5\n3,2\n4,5\n5,2\n")
	wantErr(t, s.Treat("t").TreatedLevel("5abc").Adjust("x").Err(), `TreatedLevel("5abc") names a value it does not have`)
	wantErr(t, s.Treat("t").TreatedLevel("0x5").Adjust("x").Err(), `TreatedLevel("0x5") names a value it does not have`)
	if d, err := s.Treat("t").TreatedLevel("5.0").Adjust("x").Design(); err != nil || d.Treated != 2 {
		t.Errorf("5.0: %v", err)
	}
}

// TestStrayTextInNumbers: one non-number among numbers in a covariate is
// refused (it used to make the column silently categorical), unless
// AsCategory names the column.
func TestStrayTextInNumbers(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,size,t\n")
	for i := 1; i <= 300; i++ {
		size := fmt.Sprint(i%6 + 1)
		if i == 9 {
			size = "0x1p3"
		}
		fmt.Fprintf(&b, "%d,%s,%d\n", i%17, size, (i/3)%2)
	}
	s := studyFrom(t, b.String()).Treat("t").Adjust("x", "size")
	wantErr(t, s.Err(), `covariate "size" is read as text because row 9 holds "0x1p3"`, "299 of its 300 values are numbers")
	if err := s.AsCategory("size").Err(); err != nil {
		t.Errorf("AsCategory: %v", err)
	}
}
