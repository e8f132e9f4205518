package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

func nswArgs(extra ...string) []string {
	return append([]string{"report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", nswCovs}, extra...)
}

// Every flag value is checked, and the message names the flag.
func TestReportRefusesBadFlagValues(t *testing.T) {
	missing := writeCSV(t, "missing.csv", "t,x,y\n1,1,2\n0,,3\n1,3,1\n0,4,5\n1,5,2\n0,1,1\n0,2,2\n1,2,2\n")
	labels := writeCSV(t, "labels.csv", "t,x,y\na,1,2\nb,2,3\na,3,1\nb,4,5\na,5,2\nb,1,1\n")
	out := filepath.Join(t.TempDir(), "r.out")
	link := filepath.Join(t.TempDir(), "data-link.csv")
	if err := os.Symlink(mustAbs(t, nswData), link); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"empty covariate names", []string{"report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", ", ,"}, []string{`--covariates ", ,"`, "empty"}},
		{"an empty name among others", []string{"report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "age,,educ"}, []string{"--covariates", "name 2 of 3 is empty"}},
		{"a covariate twice", []string{"report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "age,age"}, []string{"--covariates", `"age" is listed twice`}},
		{"treated level with trailing text", nswArgs("--treated-level", "1abc"), []string{`--treated-level "1abc"`, "values are 0, 1"}},
		{"treated level in hex", nswArgs("--treated-level", "0x1"), []string{`--treated-level "0x1"`}},
		{"one replicate", nswArgs("--bootstrap", "1"), []string{"--bootstrap 1", "2 to 100000"}},
		{"negative replicates", nswArgs("--bootstrap", "-3"), []string{`"-3" for flag --bootstrap`, "whole number"}},
		{"too many replicates", nswArgs("--bootstrap", "1000000"), []string{"--bootstrap 1000000"}},
		{"hex replicates", nswArgs("--bootstrap", "0x10"), []string{"flag --bootstrap"}},
		{"hex seed", nswArgs("--seed", "0x10"), []string{"flag --seed", "whole number"}},
		{"seed too large", nswArgs("--seed", "99999999999999999999999"), []string{"flag --seed", "too large"}},
		{"trim with underscore", nswArgs("--trim", "0.1_0"), []string{`--trim "0.1_0"`}},
		{"trim in hex", nswArgs("--trim", "0x1p-3"), []string{`--trim "0x1p-3"`}},
		{"unknown flag", nswArgs("--bogus", "1"), []string{"not defined: --bogus"}},
		{"html on the data", nswArgs("--html", nswData), []string{"--html", "is the --data file"}},
		{"json on the data, another spelling", nswArgs("--json", filepath.Join(filepath.Dir(nswData), ".", "..", "testdata", filepath.Base(nswData))), []string{"--json", "is the --data file"}},
		{"json on a link to the data", nswArgs("--json", link), []string{"--json", "is the --data file"}},
		{"two outputs on one path", nswArgs("--json", out, "--html", filepath.Join(filepath.Dir(out), ".", "r.out")), []string{"--json and --html are the same file"}},
		{"missing values", []string{"report", "--data", missing, "--treatment", "t", "--outcome", "y", "--covariates", "x"}, []string{"use --drop-incomplete to drop"}},
		{"two labels", []string{"report", "--data", labels, "--treatment", "t", "--outcome", "y", "--covariates", "x"}, []string{`with --treated-level "b"`}},
		{"a level it lacks", []string{"report", "--data", labels, "--treatment", "t", "--outcome", "y", "--covariates", "x", "--treated-level", "B"}, []string{`--treated-level "B" names a value it does not have`}},
	}
	before, _ := os.ReadFile(nswData)
	for _, c := range cases {
		r := runCmd(t, c.args...)
		if r.code != 1 {
			t.Errorf("%s: exit %d, want 1 (stderr %q)", c.name, r.code, r.stderr)
		}
		for _, w := range c.want {
			if !strings.Contains(r.stderr, w) {
				t.Errorf("%s: stderr %q lacks %q", c.name, r.stderr, w)
			}
		}
		// Messages name flags, not library methods.
		if strings.Contains(r.stderr, ".DropIncomplete") || strings.Contains(r.stderr, ".TreatedLevel") || strings.Contains(r.stderr, "Adjust") {
			t.Errorf("%s: a library method in %q", c.name, r.stderr)
		}
	}
	if after, _ := os.ReadFile(nswData); !bytes.Equal(before, after) {
		t.Errorf("the data file changed")
	}
}

func mustAbs(t *testing.T, p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

// earlier writes files that a failed or interrupted run must leave
// byte-identical, and returns a check of that.
func earlier(t *testing.T, paths ...string) func(when string) {
	for _, p := range paths {
		if err := os.WriteFile(p, []byte("earlier output of "+filepath.Base(p)+"\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return func(when string) {
		t.Helper()
		for _, p := range paths {
			b, err := os.ReadFile(p)
			if err != nil || string(b) != "earlier output of "+filepath.Base(p)+"\n" {
				t.Errorf("%s: %s was replaced (%q, %v)", when, p, b, err)
			}
		}
		entries, _ := os.ReadDir(filepath.Dir(paths[0]))
		for _, e := range entries {
			if strings.HasSuffix(e.Name(), ".tmp") {
				t.Errorf("%s: temporary file %s left behind", when, e.Name())
			}
		}
	}
}

// A write that fails (the path is a folder; the folder is missing) exits 1
// naming the flag and path, and replaces no earlier output, not even the
// one that could have been written.
func TestReportFailedWriteKeepsEarlierFiles(t *testing.T) {
	dir := t.TempDir()
	js, page := filepath.Join(dir, "r.json"), filepath.Join(dir, "r.html")
	check := earlier(t, js, page)
	folder := filepath.Join(dir, "folder")
	os.Mkdir(folder, 0o755)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--json", js, "--html", folder}, "--html " + folder},
		{[]string{"--json", filepath.Join(dir, "missing", "r.json"), "--html", page}, "--json " + filepath.Join(dir, "missing", "r.json")},
		{[]string{"--json", folder, "--html", page}, "--json " + folder},
	} {
		r := runCmd(t, nswArgs(c.args...)...)
		if r.code != 1 || !strings.Contains(r.stderr, c.want) || !strings.Contains(r.stderr, "nothing was written or replaced") {
			t.Errorf("%v: exit %d, stderr %q; want 1 naming %s", c.args, r.code, r.stderr, c.want)
		}
		check(strings.Join(c.args, " "))
	}
	// Read-only folders stop writes for users other than root.
	if os.Geteuid() != 0 {
		ro := filepath.Join(dir, "ro")
		os.Mkdir(ro, 0o755)
		roFile := filepath.Join(ro, "r.json")
		checkRO := earlier(t, roFile)
		os.Chmod(ro, 0o555)
		defer os.Chmod(ro, 0o755)
		if r := runCmd(t, nswArgs("--json", roFile)...); r.code != 1 || !strings.Contains(r.stderr, "--json "+roFile) {
			t.Errorf("read-only folder: exit %d, %q", r.code, r.stderr)
		}
		checkRO("read-only folder")
	}
	// And a run that succeeds replaces both.
	if r := runCmd(t, nswArgs("--json", js, "--html", page)...); r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	validate(t, js)
}

// startLong starts a report with a long bootstrap (100,000 AIPW replicates
// on the 4,000 water audits: over a minute of one core) and returns
// when it should be in the replicates (loading and fitting take well under
// a second).
func startLong(t *testing.T, extra ...string) (*exec.Cmd, *bytes.Buffer, *bytes.Buffer) {
	t.Helper()
	args := append([]string{"report", "--data", "../../../testdata/water_audits.csv", "--treatment", "audit", "--treated-level", "yes",
		"--outcome", "litres_per_day", "--covariates", "household_size,lot_m2,home_age,last_summer_lpd,pool,district,income_band",
		"--bootstrap", "100000"}, extra...)
	cmd := exec.Command(binary, args...)
	var o, e bytes.Buffer
	cmd.Stdout, cmd.Stderr = &o, &e // read only after Wait
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(2 * time.Second)
	return cmd, &o, &e
}

// waitExit waits for cmd (killing it after limit) and returns its exit
// status and how long it took to stop after the signal.
func waitExit(t *testing.T, cmd *exec.Cmd, sig syscall.Signal, limit time.Duration) (int, time.Duration) {
	t.Helper()
	t0 := time.Now()
	if err := cmd.Process.Signal(sig); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case <-done:
	case <-time.After(limit):
		cmd.Process.Kill()
		<-done
		t.Fatalf("still running %v after %v", limit, sig)
	}
	return cmd.ProcessState.ExitCode(), time.Since(t0)
}

// Ctrl-C (or SIGTERM) during a long bootstrap stops promptly with 130 (143)
// and leaves earlier outputs byte-identical; with --partial-on-interrupt the
// outputs are written with the bootstrap marked partial.
func TestReportInterruptKeepsEarlierFiles(t *testing.T) {
	dir := t.TempDir()
	js, page := filepath.Join(dir, "r.json"), filepath.Join(dir, "r.html")
	check := earlier(t, js, page)
	for _, c := range []struct {
		sig  syscall.Signal
		code int
	}{{syscall.SIGINT, 130}, {syscall.SIGTERM, 143}} {
		cmd, _, e := startLong(t, "--json", js, "--html", page)
		code, took := waitExit(t, cmd, c.sig, 10*time.Second)
		if code != c.code || took > 3*time.Second {
			t.Errorf("%v: exit %d after %v; want %d within 3 s (stderr %q)", c.sig, code, took, c.code, e.String())
		}
		if !strings.Contains(e.String(), "interrupted") || !strings.Contains(e.String(), "no output written or replaced") {
			t.Errorf("%v: stderr %q", c.sig, e.String())
		}
		check(c.sig.String())
	}

	cmd, o, e := startLong(t, "--json", js, "--html", page, "--partial-on-interrupt")
	code, took := waitExit(t, cmd, syscall.SIGINT, 60*time.Second)
	if code != 130 || took > 30*time.Second || !strings.Contains(e.String(), "partial bootstrap") { // it still builds the outputs
		t.Fatalf("--partial-on-interrupt: exit %d after %v, stderr %q", code, took, e.String())
	}
	m := validate(t, js)
	b := m["bootstrap"].(map[string]any)
	if b["status"] != "partial" || b["partial"] != true || b["replicates_done"].(float64) >= 100000 || b["replicates_done"].(float64) < 2 {
		t.Errorf("partial bootstrap JSON: status %v, partial %v, %v done", b["status"], b["partial"], b["replicates_done"])
	}
	if h, _ := os.ReadFile(page); !bytes.Contains(h, []byte("seed 1 (partial)")) {
		t.Errorf("the HTML does not mark the bootstrap partial")
	}
	if !strings.Contains(o.String(), "verdict:") {
		t.Errorf("no summary printed: %q", o.String())
	}
	if r := runCmd(t, "report", "--help"); !strings.Contains(r.stdout, "--partial-on-interrupt") || !strings.Contains(r.stdout, "130 interrupted") {
		t.Errorf("--help does not explain interrupts:\n%s", r.stdout)
	}
}

// A bootstrap that fails is written marked failed with why: the report is
// written and the exit status is the gate's, not 1.
func TestReportWritesFailedBootstrap(t *testing.T) {
	// Two treated units for an outcome model with two terms: the full-sample AIPW, and so its bootstrap, fails.
	data := writeCSV(t, "two-treated.csv", "x,t,y\n1,0,1\n2,0,3\n3,0,2\n4,1,5\n5,0,4\n6,0,6\n7,1,1\n8,0,1\n")
	dir := t.TempDir()
	js, page := filepath.Join(dir, "r.json"), filepath.Join(dir, "r.html")
	args := []string{"report", "--data", data, "--treatment", "t", "--outcome", "y", "--covariates", "x", "--bootstrap", "50", "--json", js, "--html", page}
	r := runCmd(t, args...)
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	m := validate(t, js)
	b := m["bootstrap"].(map[string]any)
	if b["status"] != "failed" || !strings.Contains(b["error"].(string), "outcome model for the treated arm") || b["replicates_requested"].(float64) != 50 {
		t.Errorf("bootstrap JSON %v", b)
	}
	if !strings.Contains(r.stdout, "bootstrap: FAILED: the full-sample estimate fails") {
		t.Errorf("summary lacks the failed bootstrap:\n%s", r.stdout)
	}
	if h, _ := os.ReadFile(page); !bytes.Contains(h, []byte("Bootstrap failed")) {
		t.Errorf("the HTML lacks the failed bootstrap section")
	}
	// The gate still judges the ATE: on 8 units nothing is beyond what random
	// assignment gives, so the ATE is supported and the gate passes; a gate
	// that trips exits 3 (TestReportGateJudgesEstimand).
	want := 3
	if m["verdict"].(map[string]any)["estimands"].(map[string]any)["ATE"].(map[string]any)["status"] == "supported" {
		want = 0
	}
	if r := runCmd(t, append(args, "--fail-on", "limited")...); r.code != want {
		t.Errorf("with the gate: exit %d, want %d (%s)", r.code, want, r.stderr)
	}
	var raw map[string]json.RawMessage
	b2, _ := os.ReadFile(js)
	json.Unmarshal(b2, &raw)
	if len(raw["estimates"]) < 10 || len(raw["verdict"]) < 10 {
		t.Errorf("the rest of the report is missing")
	}
}

// `counterpart run` checks its flags and refuses outputs on the notebook
// before it looks for Jupyter.
func TestRunRefusesBadFlagValues(t *testing.T) {
	nb := writeCSV(t, "nb.ipynb", `{"cells":[]}`)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"run", nb, "--timeout", "0x10"}, `"0x10" for flag --timeout`},
		{[]string{"run", nb, "--timeout", "0"}, "--timeout 0: use 1 to 604800"},
		{[]string{"run", nb, "--html", nb}, "--html " + nb + " is the notebook itself"},
		{[]string{"run", nb, "--executed", filepath.Join(filepath.Dir(nb), ".", "nb.ipynb")}, "is the notebook itself"},
		{[]string{"run", nb, "--html", nb + ".html", "--executed", nb + ".html"}, "--html and --executed are the same file"},
	} {
		r := runCmd(t, c.args...)
		if r.code != 1 || !strings.Contains(r.stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want 1 and %q", c.args, r.code, r.stderr, c.want)
		}
	}
	if b, _ := os.ReadFile(nb); string(b) != `{"cells":[]}` {
		t.Errorf("the notebook changed: %s", b)
	}
}
