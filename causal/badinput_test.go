package causal

import (
	"fmt"
	"math"
	"os"
	"strings"
	"testing"
)

func parse(t *testing.T, csv string) (*Frame, error) {
	t.Helper()
	return ParseCSV(strings.NewReader(csv))
}

func studyFrom(t *testing.T, csv string) *Study {
	t.Helper()
	f, err := parse(t, csv)
	if err != nil {
		return &Study{err: err}
	}
	return FromSource(f)
}

func wantErr(t *testing.T, err error, parts ...string) {
	t.Helper()
	if err == nil {
		t.Fatalf("no error; want one mentioning %q", parts)
	}
	for _, p := range parts {
		if !strings.Contains(err.Error(), p) {
			t.Errorf("error %q does not mention %q", err, p)
		}
	}
}

func TestBadInputFile(t *testing.T) {
	_, err := parse(t, "")
	wantErr(t, err, "empty")
	_, err = parse(t, "a,b,t\n")
	wantErr(t, err, "no data rows")
	_, err = parse(t, "a,b,a\n1,2,3\n")
	wantErr(t, err, "duplicate column name", `"a"`)
	_, err = parse(t, "a,b,t\n1,2,1\n3,4\n")
	wantErr(t, err, "row 2", "2 fields", "header has 3")
	_, err = parse(t, "a,,t\n1,2,1\n")
	wantErr(t, err, "column 2 has no name")
	err = Load("/nonexistent/file.csv").Err()
	wantErr(t, err, "cannot open")
}

func TestBadInputColumns(t *testing.T) {
	base := "x,z,t\n1,a,0\n2,b,1\n3,a,0\n4,b,1\n5,a,1\n6,b,0\n"
	err := studyFrom(t, base).Treat("t").Adjust("y").Err()
	wantErr(t, err, `unknown column "y"`, "columns are: x, z, t")
	err = studyFrom(t, base).Treat("T").Err()
	wantErr(t, err, `did you mean "t"`)
	// A column with a non-number is text; when that makes it unusable, the
	// message names the column, the row and the value.
	err = studyFrom(t, "x,t\n1,0\n2,1\n3x,0\n4,1\n5,0\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, `covariate "x"`, `row 3 holds "3x"`)
	err = studyFrom(t, "x,t\n1,0\n2,1\n3x,0\n4,1\n5,0\n").Treat("x").Outcome("t").Err()
	wantErr(t, err, `treatment "x" has more than two values`)
	err = studyFrom(t, "x,t\n1,0\n2,1\n3x,0\n4,1\n5,0\n").Treat("t").Outcome("x").Err()
	wantErr(t, err, `outcome "x" is not numeric`, `row 3 holds "3x"`)
	// NaN and Inf text.
	err = studyFrom(t, "x,t\n1,0\nNaN,1\n3,0\n4,1\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, "row 2", "not a finite number")
	err = studyFrom(t, "x,t\n1,0\n2,1\nInf,0\n4,1\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, "row 3", "not a finite number")
	// A broken column the analysis does not use does not block it.
	err = studyFrom(t, "x,junk,t\n1,a,0\n2,1,1\n3,2,0\n4,3,1\n5,4,0\n6,5,1\n").Treat("t").Adjust("x").Err()
	if err != nil {
		t.Errorf("unused broken column blocked the study: %v", err)
	}
	// Constant covariate.
	err = studyFrom(t, "x,c,t\n1,5,0\n2,5,1\n3,5,0\n4,5,1\n").Treat("t").Adjust("x", "c").Err()
	wantErr(t, err, `covariate "c" is constant`)
	err = studyFrom(t, "x,c,t\n1,k,0\n2,k,1\n3,k,0\n4,k,1\n").Treat("t").Adjust("x", "c").Err()
	wantErr(t, err, `covariate "c" has a single level`)
	// Roles clash.
	err = studyFrom(t, base).Treat("t").Outcome("x").Adjust("x").Err()
	wantErr(t, err, `"x"`, "outcome")
}

func TestBadInputTreatment(t *testing.T) {
	err := studyFrom(t, "x,t\n1,1\n2,1\n3,1\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, "single value")
	err = studyFrom(t, "x,t\n1,0\n2,1\n3,2\n4,1\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, "more than two values")
	err = studyFrom(t, "x,t\n1,a\n2,b\n3,c\n4,a\n").Treat("t").Adjust("x").Err()
	wantErr(t, err, "more than two values")
	// Two labels need the treated one named.
	s := studyFrom(t, "x,t\n1,no\n2,yes\n3,no\n4,yes\n5,no\n").Treat("t").Adjust("x")
	wantErr(t, s.Err(), `TreatedLevel("yes")`)
	d, err := s.TreatedLevel("yes").Design()
	if err != nil || d.Treated != 2 || d.Control != 3 {
		t.Fatalf("TreatedLevel: %v %+v", err, d)
	}
	wantErr(t, s.TreatedLevel("maybe").Err(), `.TreatedLevel("maybe") names a value it does not have`)
	// true/false needs nothing.
	d, err = studyFrom(t, "x,t\n1,false\n2,true\n3,false\n4,true\n").Treat("t").Adjust("x").Design()
	if err != nil || d.Treated != 2 {
		t.Fatalf("true/false: %v", err)
	}
	// All units in one arm after dropping incomplete rows.
	err = studyFrom(t, "x,t\n1,0\n,1\n3,0\n4,0\n").Treat("t").Adjust("x").DropIncomplete().Err()
	wantErr(t, err, "single value")
}

func TestMissingValues(t *testing.T) {
	csv := "x,z,t\n1,a,0\n,b,1\n3,,0\n4,b,1\nNA,a,0\n6,b,1\n7,a,0\n8,b,1\n"
	err := studyFrom(t, csv).Treat("t").Adjust("x", "z").Err()
	wantErr(t, err, "x (2)", "z (1)", "3 rows are incomplete", "DropIncomplete")
	d, err := studyFrom(t, csv).Treat("t").Adjust("x", "z").DropIncomplete().Design()
	if err != nil {
		t.Fatal(err)
	}
	if d.RowsDropped != 3 || d.N != 5 || d.RowsTotal != 8 {
		t.Errorf("dropped %d, kept %d of %d; want 3, 5 of 8", d.RowsDropped, d.N, d.RowsTotal)
	}
}

func TestCSVDialects(t *testing.T) {
	// BOM, quoted commas, CRLF, quoted newline.
	csv := "\ufeff\"name, full\",x,t\r\n\"Smith, J\",1,0\r\n\"Lee\nK\",2,1\r\nO'Neil,3,0\r\n\"Wu \"\"W\"\"\",4,1\r\n"
	f, err := parse(t, csv)
	if err != nil {
		t.Fatal(err)
	}
	if got := f.Names(); got[0] != "name, full" || got[1] != "x" || got[2] != "t" {
		t.Fatalf("names %q", got)
	}
	c, _ := f.Column("name, full")
	if c.Kind != Categorical || len(c.Levels) != 4 {
		t.Fatalf("text column %+v", c)
	}
	x, _ := f.Column("x")
	if x.Kind != Numeric || x.Num[3] != 4 {
		t.Fatalf("x %+v", x)
	}
	tc, _ := f.Column("t")
	if tc.Num[1] != 1 {
		t.Fatalf("CRLF broke the last column: %v", tc.Num)
	}
}

func TestPGreaterThanN(t *testing.T) {
	err := studyFrom(t, "a,b,c,t\n1,2,3,0\n2,1,5,1\n3,7,1,0\n4,4,4,1\n").Treat("t").Adjust("a", "b", "c").Err()
	wantErr(t, err, "4 terms", "only 4 rows")
}

func TestCollinear(t *testing.T) {
	csv := "a,b,c,t\n1,2,3,0\n2,1,3,1\n3,7,10,0\n4,4,8,1\n5,1,6,0\n6,3,9,1\n7,2,9,0\n"
	err := studyFrom(t, csv).Treat("t").Adjust("a", "b", "c").Err()
	wantErr(t, err, "collinear", "c is a linear combination of", "a", "b")
}

func TestScoresAtBoundsAndNoPanic(t *testing.T) {
	// A covariate that splits the arms completely: flagged, never a panic.
	s := studyFrom(t, "x,t\n1,0\n2,0\n3,0\n4,1\n5,1\n6,1\n").Treat("t").Adjust("x")
	sc := s.Propensity()
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	if !sc.Separated() || sc.Separation[0].Kind != "complete" {
		t.Fatalf("complete separation not flagged: %+v", sc.Separation)
	}
	if !strings.Contains(sc.String(), "SEPARATION") {
		t.Error("text view hides the separation")
	}
	v := sc.Verdict(VerdictOptions{})
	if v.Status != Violated {
		t.Errorf("verdict %s", v.Status)
	}
	for _, x := range []interface{ String() string }{sc.Support(), s.Cells("x"), s.Erosion(), s.Balance(), v} {
		_ = x.String()
	}
	// Nil and broken values never panic.
	var nilStudy *Study
	if nilStudy.Err() == nil || nilStudy.Propensity().Err() == nil {
		t.Error("nil study gives no error")
	}
	bad := Load("nope.csv")
	if bad.Propensity().Support().Err() == nil || bad.Cells("x").Err() == nil || bad.Erosion().Err() == nil || bad.Balance().Err() == nil {
		t.Error("errors are not carried through")
	}
	if math.IsNaN(sc.AUC) {
		t.Error("AUC NaN")
	}
}

func TestSeparationVariants(t *testing.T) {
	// gate = 0 ⇒ control (the level 0 side is pure), and a categorical whose
	// reference (most frequent) level is pure, and a second pure level.
	var b strings.Builder
	b.WriteString("x,gate,zone,t\n")
	for i := 0; i < 400; i++ {
		x := float64(i%37) / 7
		gate := i % 2
		zone := []string{"a", "a", "a", "b", "c", "d"}[i%6]
		t := 0
		switch {
		case zone == "a":
			t = 0
		case zone == "d":
			t = 1
		case gate == 1 && (i/2)%3 != 0:
			t = 1
		}
		if gate == 0 && zone != "d" {
			t = 0
		}
		fmt.Fprintf(&b, "%g,%d,%s,%d\n", x, gate, zone, t)
	}
	sc := studyFrom(t, b.String()).Treat("t").Adjust("x", "gate", "zone").Propensity()
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	if !sc.Separated() {
		t.Fatal("no separation found")
	}
	var msgs []string
	for _, f := range sc.Separation {
		msgs = append(msgs, f.Message)
	}
	joined := strings.Join(msgs, "\n")
	for _, want := range []string{"zone=a", "zone=d"} {
		if !strings.Contains(joined, want) {
			t.Errorf("findings do not name %s:\n%s", want, joined)
		}
	}
	for _, tm := range sc.Terms {
		if !tm.Diverging && (math.IsNaN(tm.Coef) || math.IsInf(tm.Coef, 0) || math.IsNaN(tm.SE)) {
			t.Errorf("term %s has no finite estimate but is not marked diverging: %+v", tm.Name, tm)
		}
		if !tm.Diverging && math.Abs(tm.Coef) > 50 {
			t.Errorf("term %s coefficient %g looks divergent but is shown as an estimate", tm.Name, tm.Coef)
		}
	}
	for i, e := range sc.E {
		if math.IsNaN(e) || e < 0 || e > 1 {
			t.Fatalf("score %d = %g", i, e)
		}
	}
}

func TestLoadProgressReachesTotal(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,y,t\n")
	for i := 0; i < 120000; i++ {
		fmt.Fprintf(&b, "%d.25,%d,%d\n", i, i%7, i%2)
	}
	path := t.TempDir() + "/big.csv"
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	var calls, last, total int
	s := LoadProgress(path, func(done, tot int) {
		if done < last || done > tot {
			t.Errorf("progress %d of %d after %d", done, tot, last)
		}
		calls, last, total = calls+1, done, tot
	})
	if s.Err() != nil || s.Source().Rows() != 120000 {
		t.Fatalf("%v", s.Err())
	}
	if calls < 2 || last != total || total != b.Len() {
		t.Errorf("%d calls, last %d of %d (file %d bytes)", calls, last, total, b.Len())
	}
	// The parallel reader (unquoted body over 1 MB) keeps every value in place.
	x, _ := s.Source().Column("x")
	y, _ := s.Source().Column("y")
	for i := 0; i < 120000; i++ {
		if x.Num[i] != float64(i)+0.25 || y.Num[i] != float64(i%7) {
			t.Fatalf("row %d: x %g y %g", i+1, x.Num[i], y.Num[i])
		}
	}
}
