package causal

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"
)

// writeTestCSV writes n rows: numeric x1 (with a missing value), 0/1 t from
// a logistic model in x1 and x2, categorical g, numeric y, and a column
// "bad" with a non-finite entry among numbers (a column issue).
func writeTestCSV(t *testing.T, path string, n int, seed uint64) {
	t.Helper()
	r := rand.New(rand.NewPCG(seed, 3))
	var b strings.Builder
	b.WriteString("x1,x2,g,t,y,bad\n")
	for i := 0; i < n; i++ {
		x1, x2 := r.NormFloat64(), r.NormFloat64()
		tr := 0
		if r.Float64() < sigmoid(0.5*x1-0.3*x2) {
			tr = 1
		}
		x1s := fmt.Sprintf("%.4f", x1)
		if i == 7 {
			x1s = ""
		}
		bad := "1.5"
		if i == 3 {
			bad = "inf"
		}
		fmt.Fprintf(&b, "%s,%.4f,%s,%d,%.4f,%s\n", x1s, x2, []string{"north", "south", "east"}[r.IntN(3)], tr, x1+float64(tr), bad)
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
}

// sameFrame compares two frames column by column (NaN equal to NaN).
func sameFrame(t *testing.T, what string, got, want *Frame) {
	t.Helper()
	if !reflect.DeepEqual(got.names, want.names) || got.rows != want.rows {
		t.Fatalf("%s: names %v rows %d; want %v rows %d", what, got.names, got.rows, want.names, want.rows)
	}
	for _, name := range want.names {
		g, w := got.cols[name], want.cols[name]
		if g.Kind != w.Kind || g.Missing != w.Missing || !reflect.DeepEqual(g.Levels, w.Levels) || !reflect.DeepEqual(g.Codes, w.Codes) {
			t.Fatalf("%s: column %s differs: %+v vs %+v", what, name, g, w)
		}
		if g.textAt != w.textAt {
			t.Fatalf("%s: column %s first non-number %q; want %q", what, name, g.textAt, w.textAt)
		}
		if (g.issue == nil) != (w.issue == nil) || g.issue != nil && g.issue.Error() != w.issue.Error() {
			t.Fatalf("%s: column %s issue %v; want %v", what, name, g.issue, w.issue)
		}
		for i := range w.Num {
			if g.Num[i] != w.Num[i] && !(math.IsNaN(g.Num[i]) && math.IsNaN(w.Num[i])) {
				t.Fatalf("%s: column %s row %d is %v; want %v", what, name, i, g.Num[i], w.Num[i])
			}
		}
	}
}

// The cache gives back exactly what parsing gives (values, missing
// entries, levels, column issues), and a second load is served from it.
func TestColumnCacheRoundTrip(t *testing.T) {
	dir, session := t.TempDir(), t.TempDir()
	path := filepath.Join(dir, "d.csv")
	writeTestCSV(t, path, 500, 1)
	want, err := ReadCSV(path)
	if err != nil {
		t.Fatal(err)
	}
	first := LoadCached(path, session, nil)
	if first.err != nil || first.fingerprint == "" {
		t.Fatalf("first load: %v, fingerprint %q (the cache was not written)", first.err, first.fingerprint)
	}
	sameFrame(t, "parsed", first.src.(*Frame), want)
	id, err := sourceID(path)
	if err != nil {
		t.Fatal(err)
	}
	cached, fp, err := readColumnCache(session, id)
	if err != nil || fp != first.fingerprint {
		t.Fatalf("cache not readable: %v (fingerprint %q, want %q)", err, fp, first.fingerprint)
	}
	sameFrame(t, "cache", cached, want)
	second := LoadCached(path, session, nil)
	sameFrame(t, "second load", second.src.(*Frame), want)
	if second.fingerprint != first.fingerprint {
		t.Errorf("second load fingerprint %q; want %q", second.fingerprint, first.fingerprint)
	}
	if _, err := second.Treat("t").Adjust("x2", "bad").Design(); err == nil || !strings.Contains(err.Error(), "bad") {
		t.Errorf("the column issue of \"bad\" was lost through the cache: %v", err)
	}
}

// Never stale: an edit between loads — same size with a new modification
// time, or same size with the old modification time put back — is seen;
// so is a damaged or truncated cache (the CSV is parsed again).
func TestColumnCacheInvalidation(t *testing.T) {
	dir, session := t.TempDir(), t.TempDir()
	path := filepath.Join(dir, "d.csv")
	writeTestCSV(t, path, 300, 2)
	LoadCached(path, session, nil)
	fi, _ := os.Stat(path)
	b, _ := os.ReadFile(path)
	edit := func(what string, from, to string, keepTime bool) {
		t.Helper()
		nb := strings.Replace(string(b), from, to, 1)
		if len(nb) != len(b) || nb == string(b) {
			t.Fatalf("%s: the edit must keep the size and change the text", what)
		}
		if err := os.WriteFile(path, []byte(nb), 0o644); err != nil {
			t.Fatal(err)
		}
		if keepTime {
			if err := os.Chtimes(path, fi.ModTime(), fi.ModTime()); err != nil {
				t.Fatal(err)
			}
		} else {
			later := fi.ModTime().Add(2 * time.Second)
			os.Chtimes(path, later, later)
		}
		want, err := ReadCSV(path)
		if err != nil {
			t.Fatal(err)
		}
		sameFrame(t, what, LoadCached(path, session, nil).src.(*Frame), want)
		b = []byte(nb)
		fi, _ = os.Stat(path)
	}
	// bump changes the first digit of data line k (1-based) to another digit.
	bump := func(k int) (string, string) {
		line := strings.Split(string(b), "\n")[k]
		at := strings.IndexAny(line, "0123456789")
		d := line[at]
		nd := byte('0' + (d-'0'+1)%10)
		return line, line[:at] + string(nd) + line[at+1:]
	}
	from, to := bump(1)
	edit("new time", from, to, false)
	from, to = bump(2)
	edit("old time kept", from, to, true)

	cache := cachePath(session, mustAbs(t, path))
	want, _ := ReadCSV(path)
	cb, err := os.ReadFile(cache)
	if err != nil {
		t.Fatal(err)
	}
	for name, bad := range map[string][]byte{
		"flipped byte": func() []byte { c := append([]byte(nil), cb...); c[len(c)-100] ^= 1; return c }(),
		"truncated":    cb[:len(cb)/2],
		"trailing":     append(append([]byte(nil), cb...), 0),
	} {
		if err := os.WriteFile(cache, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		id, _ := sourceID(path)
		if _, _, err := readColumnCache(session, id); err == nil {
			t.Errorf("%s cache was accepted", name)
		}
		sameFrame(t, name, LoadCached(path, session, nil).src.(*Frame), want)
	}
}

func mustAbs(t *testing.T, p string) string {
	abs, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return abs
}

// A fit of the same data and specification starts from the kept
// coefficients and confirms them in one Newton step, giving the cold fit's
// estimates (reference: the cold fit, tolerance 1e-9 relative); a change of
// data or specification is fitted anew and matches its own cold fit.
func TestFitCacheWarmStart(t *testing.T) {
	dir, session := t.TempDir(), t.TempDir()
	path := filepath.Join(dir, "d.csv")
	writeTestCSV(t, path, 3000, 4)
	spec := func(s *Study) *Study { return s.Treat("t").Adjust("x2", "g") }
	cold := spec(Load(path)).Propensity()
	first := spec(LoadCached(path, session, nil)).Propensity()
	warm := spec(LoadCached(path, session, nil)).Propensity()
	for _, sc := range []*Scores{cold, first, warm} {
		if sc.Err() != nil || !sc.Converged {
			t.Fatalf("fit: %v (converged %v)", sc.Err(), sc.Converged)
		}
	}
	if warm.Iterations > 2 || warm.Iterations >= cold.Iterations {
		t.Errorf("warm fit took %d iterations (cold %d): it did not start from the kept coefficients", warm.Iterations, cold.Iterations)
	}
	close := func(what string, a, b *Scores) {
		t.Helper()
		for j := range a.beta {
			if math.Abs(a.beta[j]-b.beta[j]) > 1e-9*(1+math.Abs(b.beta[j])) {
				t.Errorf("%s: coefficient %s %v; cold fit %v", what, a.Terms[j].Name, a.beta[j], b.beta[j])
			}
		}
	}
	close("warm", warm, cold)
	// Another specification: its own fit.
	other := LoadCached(path, session, nil).Treat("t").Adjust("x2").Propensity()
	if other.Iterations < 3 {
		t.Errorf("a different specification reused coefficients (%d iterations)", other.Iterations)
	}
	close("other spec", other, Load(path).Treat("t").Adjust("x2").Propensity())
	// Other data: the file is rewritten; the fit is of the new data.
	writeTestCSV(t, path, 3000, 5)
	later := time.Now().Add(time.Second)
	os.Chtimes(path, later, later)
	fresh := spec(LoadCached(path, session, nil)).Propensity()
	close("after the edit", fresh, spec(Load(path)).Propensity())
	if fresh.Iterations < 3 {
		t.Errorf("the fit after the edit took %d iterations: it started from the old data's coefficients", fresh.Iterations)
	}
}
