package causal

import (
	"bytes"
	"encoding/csv"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// fuzzDelims are the delimiters the fuzz targets try, by index.
var fuzzDelims = []rune{',', ';', '\t', '|'}

// safeMessage fails when a message could misbehave on a terminal: a control
// character, bytes that are not UTF-8, or an unbounded echo.
func safeMessage(t *testing.T, what string, err error) {
	t.Helper()
	if err == nil {
		return
	}
	msg := err.Error()
	if !utf8.ValidString(msg) {
		t.Fatalf("%s: message is not UTF-8: %q", what, msg)
	}
	for _, r := range msg {
		if r < 0x20 || r == 0x7f || r >= 0x80 && r < 0xa0 || r == '\u202e' {
			t.Fatalf("%s: message holds control character %U: %q", what, r, msg)
		}
	}
	if len(msg) > 8000 {
		t.Fatalf("%s: message of %d bytes", what, len(msg))
	}
}

// rewrite writes a frame back as CSV: names, numbers in shortest form,
// levels' text, NA for missing.
func rewrite(t *testing.T, f *Frame, delim rune) []byte {
	t.Helper()
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Comma = delim
	cols := make([]*Column, 0, len(f.Names()))
	for _, n := range f.Names() {
		c, _ := f.Column(n)
		cols = append(cols, c)
	}
	if err := w.Write(f.Names()); err != nil {
		t.Fatal(err)
	}
	rec := make([]string, len(cols))
	for i := 0; i < f.Rows(); i++ {
		for j, c := range cols {
			switch {
			case c.IsMissing(i):
				rec[j] = "NA"
			case c.Kind == Numeric:
				rec[j] = strconv.FormatFloat(c.Num[i], 'g', -1, 64)
			default:
				rec[j] = c.Levels[c.Codes[i]]
			}
		}
		if err := w.Write(rec); err != nil {
			t.Fatal(err)
		}
	}
	w.Flush()
	return b.Bytes()
}

// FuzzReadCSV reads arbitrary bytes under each delimiter. Properties: no
// panic; the result (frame or error) is the same for the one-reader path
// and for the cut, small-batch path at any core count (the sizes come from
// the fuzzer); memory stays within a bound of the input size; messages are
// safe for a terminal; a loaded frame written back as CSV reads back
// identical (levels keep their text, numbers their value, kinds their kind).
func FuzzReadCSV(f *testing.F) {
	for _, s := range fuzzSeeds {
		f.Add([]byte(s), uint8(0), uint8(2), uint8(3))
	}
	f.Fuzz(func(t *testing.T, data []byte, delim, batch, pieces uint8) {
		if len(data) > 1<<16 {
			return
		}
		o := ReadOptions{Delimiter: fuzzDelims[int(delim)%len(fuzzDelims)], MaxField: 512}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		ref, refErr := parseData(data, o, readConfig{batch: csvBatch, parallelMin: 1 << 30, pieces: 1, minPiece: 1})
		runtime.ReadMemStats(&after)
		if alloc := after.TotalAlloc - before.TotalAlloc; alloc > 256*uint64(len(data))+(16<<20) {
			t.Fatalf("reading %d bytes allocated %d", len(data), alloc)
		}
		procs := runtime.GOMAXPROCS(int(pieces)%4 + 1)
		alt, altErr := parseData(data, o, readConfig{batch: int(batch)%7 + 1, parallelMin: 0, pieces: int(pieces)%9 + 1, minPiece: 1})
		runtime.GOMAXPROCS(procs)
		safeMessage(t, "read", refErr)
		if (refErr == nil) != (altErr == nil) || refErr != nil && refErr.Error() != altErr.Error() {
			t.Fatalf("reader sizes change the outcome: %v / %v", refErr, altErr)
		}
		if refErr != nil {
			return
		}
		if !bytes.Equal(frameDump(t, ref), frameDump(t, alt)) {
			t.Fatalf("reader sizes change the frame:\n%s\n%s", frameDump(t, ref), frameDump(t, alt))
		}
		for _, n := range ref.Names() {
			c, _ := ref.Column(n)
			safeMessage(t, "column "+n, c.Err())
		}
		back, err := parseData(rewrite(t, ref, o.Delimiter), o, defaultReadConfig())
		if err != nil {
			t.Fatalf("the frame written back does not read: %v\n%q", err, rewrite(t, ref, o.Delimiter))
		}
		if back.Rows() != ref.Rows() || strings.Join(back.Names(), "\x00") != strings.Join(ref.Names(), "\x00") {
			t.Fatalf("round trip: %d rows %q, want %d %q", back.Rows(), back.Names(), ref.Rows(), ref.Names())
		}
		for _, n := range ref.Names() {
			a, _ := ref.Column(n)
			b, _ := back.Column(n)
			if a.Kind != b.Kind || a.Missing != b.Missing || strings.Join(a.Levels, "\x00") != strings.Join(b.Levels, "\x00") {
				t.Fatalf("round trip of %q: %v %d %q, want %v %d %q", n, b.Kind, b.Missing, b.Levels, a.Kind, a.Missing, a.Levels)
			}
			for i := 0; i < ref.Rows(); i++ {
				if a.Kind == Categorical && a.Codes[i] != b.Codes[i] || a.Kind == Numeric && !a.IsMissing(i) && a.Num[i] != b.Num[i] {
					t.Fatalf("round trip of %q row %d differs", n, i+1)
				}
			}
		}
	})
}

// FuzzReportOptions feeds arbitrary text to the library's option checks
// behind the report's flags (--estimand, --trim, --delimiter,
// --treated-level, --covariates as role names). Properties: no panic; an
// error is safe for a terminal; an accepted value means what it says (an
// estimand parses back from its name; a trim α lies in [0, 0.5); a
// delimiter is one valid character; a numeric treated level is a number of
// the data-file grammar).
func FuzzReportOptions(f *testing.F) {
	for _, s := range optionSeeds {
		f.Add(s[0], s[1], s[2], s[3], s[4])
	}
	fr, err := NewFrame([]string{"x", "g", "t"}, map[string][]float64{"x": {1, 2, 3, 4, 5, 6, 7, 8}, "t": {2, 5, 2, 5, 2, 5, 5, 2}},
		map[string][]string{"g": {"a", "b", "a", "b", "a", "b", "a", "b"}})
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, estimand, trim, delim, treated, covariates string) {
		if e, err := ParseEstimand(estimand); err == nil {
			if e2, err := ParseEstimand(e.String()); err != nil || e2 != e {
				t.Fatalf("estimand %q parses to %v, which does not parse back", estimand, e)
			}
		} else {
			safeMessage(t, "estimand", err)
		}
		if rule, on, err := ParseTrim(trim); err != nil {
			safeMessage(t, "trim", err)
		} else if on && rule.kind == "symmetric" {
			if v, k := parseNumber(strings.TrimSpace(trim)); k != numOK || v != rule.alpha || !(v > 0 && v < 0.5) {
				t.Fatalf("trim %q gives %+v", trim, rule)
			}
		}
		if r, err := ParseDelimiter(delim); err != nil {
			safeMessage(t, "delimiter", err)
		} else if checkDelimiter(r) != nil {
			t.Fatalf("delimiter %q accepted as %q", delim, r)
		}
		var covs []string
		for _, c := range strings.Split(covariates, ",") {
			covs = append(covs, strings.TrimSpace(c))
		}
		d, err := FromSource(fr).Treat("t").TreatedLevel(treated).Adjust(covs...).Design()
		if err != nil {
			safeMessage(t, "study", err)
			return
		}
		if v, k := parseNumber(treated); k != numOK || v != 2 && v != 5 {
			t.Fatalf("treated level %q accepted", treated)
		}
		if d.Treated+d.Control != 8 {
			t.Fatalf("arms %d + %d", d.Treated, d.Control)
		}
	})
}

// fuzzSeeds are the bad and borderline inputs met so far; they are also
// committed under testdata/fuzz/FuzzReadCSV.
var fuzzSeeds = []string{
	"x,code,t\n1,007,0\n2,1.50,1\n3,0042,0\n4,NaN,1\n5,A12,0\n",
	"x,t\n1_000,0\n0x1p3,1\n+5,0\n.5,1\n5.,0\n1e-3,1\nInf,0\n-infinity,1\n1e999,0\n",
	"x,t\n1,0\nNaN,1\nNA,0\n,1\n  ,0\nna,1\n",
	"x,town,t\n1,caf\xe9,0\n2,caf\xe8,1\n",
	"x,z,t\n1,\x1b[2J\x1b[31mred,0\n2,a\u202eb,1\n",
	"x,\x1b[31mz,t\n1,2,3\n",
	"x;z;t\n1;a;0\n2;b;1\n",
	"x\tz\tt\n1\ta\t0\n",
	"x,z,t\r1,a,0\r2,b,1\r",
	"\x1f\x8b\x08\x00\x00\x00\x00\x00\x00\xffJ\xd4\xa9\xd2)\xe1\x02\x04\x00\x00\xff\xff",
	"PK\x03\x04\x14\x00\x06\x00",
	"\xff\xfex\x00,\x00t\x00",
	"a,b\n1,\x00\n",
	"x,t\n1,\"0\n2,1\n",
	"x,t\n\"a\"\"b\",1\n\"c,d\",0\n\"e\nf\",1\n",
	"\ufeffx,t\r\n1,0\r\n2,1\r\n",
	"a,b,c\n1,2\n",
	"a,,c\n1,2,3\n",
	"a,b,a\n1,2,3\n",
	"",
	"a,b\n",
	"a\n\n \n1\n",
	"a,b\n1,2\n\n3,4\n \n5,NaN\n",
	"x,t\n1,\"" + strings.Repeat("A", 600) + "\"\n",
	"BZh91AY&SY,b\n1,2\n",
	"%PDF-1,b\n1,2\n",
	"a\n\"x\ry\",1\n",
}

// optionSeeds are option values met so far: estimand, trim, delimiter,
// treated level, covariates; also under testdata/fuzz/FuzzReportOptions.
var optionSeeds = [][5]string{
	{"ATE", "none", ",", "5", "x"},
	{"att", "0.1", ";", "1abc", ", ,"},
	{"ATO", "optimal", "tab", "0x5", "x,g"},
	{" ato ", "0x1p-3", "\\t", "5.0", "x,x"},
	{"ATX", "1_0", "\x1b", "1_000", "t"},
	{"", "0.5", "\"", " 2 ", "nope,\x1b[31m"},
	{"ATC", "-0.1", "ab", "NaN", "g,t"},
	{"ATE", "NaN", "\xff", "Inf", strings.Repeat("y", 300)},
	{"ATE", ".05", "|", "+5", "x, g"},
}
