package kernel_test

import (
	"bytes"
	"context"
	"errors"
	"image"
	"image/color"
	"image/png"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/widgets"
)

// The end-to-end test installs the kernel into temporary Jupyter and cache
// folders, executes every notebook of the repository (and the kernel's own
// smoke notebook) through real Jupyter, and opens each exported HTML page in
// headless Chromium: charts must be drawn, no script may fail, and without
// scripts every chart must show its static picture.
//
//	COUNTERPART_E2E=1 go test -run E2E -v ./kernel/ -timeout 40m
//
// COUNTERPART_SCREENSHOT=path also saves a picture of the tour's HTML.

const aptE2E = "apt-get update && apt-get install -y jupyter-notebook jupyter-nbconvert python3-nbclient jupyter-client chromium npm"

// chromiumFlags are the headless flags that work on this kind of machine.
var chromiumFlags = []string{
	"--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
	"--disable-component-update", "--disable-sync", "--no-first-run",
}

func TestE2ENotebooks(t *testing.T) {
	if os.Getenv("COUNTERPART_E2E") != "1" {
		t.Skip("end-to-end notebook test skipped: set COUNTERPART_E2E=1 to run it (it needs jupyter, npm and chromium: " + aptE2E + ")")
	}
	for _, tool := range []string{"go", "npm"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Fatalf("%s not found; install it: %s", tool, aptE2E)
		}
	}
	if _, err := os.Stat("/usr/bin/jupyter"); err != nil {
		if _, err := exec.LookPath("jupyter"); err != nil {
			t.Fatalf("jupyter not found; install it: %s", aptE2E)
		}
	}
	browser := ""
	for _, name := range []string{"chromium", "chromium-browser", "google-chrome"} {
		if p, err := exec.LookPath(name); err == nil {
			browser = p
			break
		}
	}
	if browser == "" {
		t.Fatalf("chromium not found; install it: %s", aptE2E)
	}

	repo, err := filepath.Abs("..")
	if err != nil {
		t.Fatal(err)
	}
	tmp := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()

	// Hermetic Jupyter data and counterpart cache; the Go module and build
	// caches are the machine's (read through, so nothing is downloaded again).
	goEnv := func(name string) string {
		out, err := exec.Command("go", "env", name).Output()
		if err != nil {
			t.Fatalf("go env %s: %v", name, err)
		}
		return strings.TrimSpace(string(out))
	}
	env := []string{
		"XDG_CACHE_HOME=" + filepath.Join(tmp, "cache"),
		"JUPYTER_DATA_DIR=" + filepath.Join(tmp, "jupyter"),
		"JUPYTER_CONFIG_DIR=" + filepath.Join(tmp, "jupyter-config"),
		"GOCACHE=" + goEnv("GOCACHE"),
		"GOMODCACHE=" + goEnv("GOMODCACHE"),
		"COUNTERPART_ECHARTS=",
		"COUNTERPART_HTML=",
	}
	env = append(os.Environ(), env...)

	// Notebooks are executed without network when a network namespace can be
	// made (root with unshare and ip, as on CI); setup may use the registries.
	offline := exec.Command("unshare", "-n", "sh", "-c", "ip link set lo up").Run() == nil
	if offline {
		t.Log("notebooks run in a network namespace with loopback only")
	} else {
		t.Log("no network namespace available (needs root, unshare and ip): notebooks run with the machine's network")
	}

	bin := filepath.Join(tmp, "counterpart")
	build := exec.CommandContext(ctx, "go", "build", "-o", bin, "./kernel/cmd/counterpart")
	build.Dir = repo
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("building the command: %v\n%s", err, out)
	}
	run := func(args ...string) (string, error) {
		cmd := exec.CommandContext(ctx, bin, args...)
		if args[0] == "run" && offline {
			// Only loopback exists in the namespace: notebooks must work offline.
			cmd = exec.CommandContext(ctx, "unshare", append([]string{"-n", "sh", "-c", `ip link set lo up && exec "$@"`, "sh", bin}, args...)...)
		}
		cmd.Dir = repo
		cmd.Env = env
		out, err := cmd.CombinedOutput()
		return string(out), err
	}

	t0 := time.Now()
	out, err := run("setup")
	if err != nil {
		t.Fatalf("setup failed: %v\n%s", err, out)
	}
	t.Logf("setup (fresh cache) took %s:\n%s", time.Since(t0).Round(time.Second), out)
	if !strings.Contains(out, `Jupyter lists kernel "counterpart"`) {
		t.Fatalf("setup did not confirm the kernel:\n%s", out)
	}
	t0 = time.Now()
	out, err = run("setup")
	if err != nil {
		t.Fatalf("second setup failed: %v\n%s", err, out)
	}
	if n := strings.Count(out, "] skipped"); n != 5 {
		t.Fatalf("second setup should skip all 5 steps, skipped %d:\n%s", n, out)
	}
	t.Logf("setup again (nothing to do) took %s", time.Since(t0).Round(10*time.Millisecond))

	notebooks, _ := filepath.Glob(filepath.Join(repo, "notebooks", "*.ipynb"))
	notebooks = append(notebooks, filepath.Join(repo, "kernel", "testdata", "smoke.ipynb"))
	outDir := filepath.Join(tmp, "html")
	charts := map[string]int{}
	for _, nb := range notebooks {
		name := strings.TrimSuffix(filepath.Base(nb), ".ipynb")
		page := filepath.Join(outDir, name+".html")
		t0 := time.Now()
		args := []string{"run", nb, "--html", page}
		if name == "smoke" {
			args = append(args, "--executed", filepath.Join(outDir, "smoke.ipynb"))
		}
		out, err := run(args...)
		if err != nil {
			t.Errorf("%s: run failed: %v\n%s", name, err, out)
			continue
		}
		t.Logf("%s executed and exported in %s", name, time.Since(t0).Round(100*time.Millisecond))
		charts[name] = checkPage(t, ctx, browser, tmp, name, page)
		checkOneLibrary(t, name, page, charts[name])
		if name == "tour" && os.Getenv("COUNTERPART_SCREENSHOT") != "" {
			shot, _ := filepath.Abs(os.Getenv("COUNTERPART_SCREENSHOT"))
			if _, err := chromium(ctx, browser, tmp, "--window-size=1280,2400", "--virtual-time-budget=8000", "--screenshot="+shot, "file://"+page); err != nil {
				t.Errorf("tour screenshot: %v", err)
			} else if fi, err := os.Stat(shot); err != nil || fi.Size() == 0 {
				t.Errorf("tour screenshot %s not written", shot)
			} else {
				t.Logf("tour screenshot: %s", shot)
			}
		}
	}
	if charts["smoke"] != 2 {
		t.Errorf("the smoke notebook shows 2 charts; found %d chart containers", charts["smoke"])
	}
	// The lab draws every experiment: erosion 1, extrapolation 2 and the fitted lines 1, trimming 2.
	if charts["lab"] != 6 {
		t.Errorf("the lab notebook shows 6 charts; found %d chart containers", charts["lab"])
	}
	// The lab's student copy (counterpart handout): no solution cell, no output, and it runs with no
	// failed cell, drawing the same charts.
	student := filepath.Join(tmp, "lab-student.ipynb")
	if out, err := run("handout", filepath.Join(repo, "notebooks", "lab.ipynb"), "--out", student); err != nil {
		t.Errorf("handout of the lab failed: %v\n%s", err, out)
	} else if raw, err := os.ReadFile(student); err != nil {
		t.Errorf("handout wrote no student copy: %v", err)
	} else if strings.Contains(string(raw), `"solution"`) || strings.Contains(string(raw), `"output_type"`) {
		t.Errorf("the student copy still holds a solution cell or an output")
	} else {
		page := filepath.Join(outDir, "lab-student.html")
		t0 := time.Now()
		if out, err := run("run", student, "--html", page); err != nil {
			t.Errorf("lab-student: run failed: %v\n%s", err, out)
		} else {
			t.Logf("lab-student executed and exported in %s", time.Since(t0).Round(100*time.Millisecond))
			if n := checkPage(t, ctx, browser, tmp, "lab-student", page); n != charts["lab"] {
				t.Errorf("the lab's student copy shows %d charts; the lab shows %d", n, charts["lab"])
			}
		}
	}

	// The classic Notebook UI (RequireJS loaded by the page) draws a trusted saved notebook's charts;
	// the second chart's cell holds no copy of ECharts and draws with the first one's.
	if fileExistsE2E(filepath.Join(outDir, "smoke.ipynb")) {
		checkLiveNotebook(t, ctx, browser, tmp, env, filepath.Join(outDir, "smoke.ipynb"), 2)
	}

	// A page written outside a notebook (COUNTERPART_HTML): no RequireJS there.
	echartsJS := filepath.Join(tmp, "cache", "counterpart", "echarts", kernel.EChartsVersion, "echarts.min.js")
	t.Setenv(kernel.EChartsEnv, echartsJS)
	pagePath := filepath.Join(outDir, "page.html")
	t.Setenv(kernel.HTMLPageEnv, pagePath)
	pic := tinyPNG(t)
	kernel.Show(
		widgets.Chart{Title: "Plain", Option: []byte(`{"xAxis":{"type":"category","data":["a","b"]},"yAxis":{},"series":[{"type":"bar","data":[1,2]}]}`), Fallback: pic},
		widgets.Chart{Title: `</script><img src=x onerror="document.title='pwned'">`, Option: []byte(`{"xAxis":{"type":"category","data":["</script><img src=x onerror=\"document.title='pwned'\">"]},"yAxis":{},"series":[{"type":"line","data":[3]}]}`), Fallback: pic},
		errors.New("a shown error"))
	if n := checkPage(t, ctx, browser, tmp, "page", pagePath); n != 2 {
		t.Errorf("the COUNTERPART_HTML page has 2 charts; found %d", n)
	}

	// A notebook with failing cells: run must fail, name each cell, and still write the HTML.
	page := filepath.Join(outDir, "failing.html")
	out, err = run("run", filepath.Join(repo, "kernel", "testdata", "failing.ipynb"), "--html", page)
	if err == nil {
		t.Errorf("run of failing.ipynb succeeded; want a failure:\n%s", out)
	}
	for _, want := range []string{"4 cells failed", "cell 3 (In [2])", "undefined: undefinedThing", "cell 4 (In [3])", "assignment to entry in nil map", "cell 5 (In [4])", "cannot open data.csv",
		"cell 6 (In [5])", "error panel: ", "no-such-data.csv", "6 code cells", "4 failed"} {
		if !strings.Contains(out, want) {
			t.Errorf("failing.ipynb: output lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "goroutine 1 [running]") {
		t.Errorf("failing.ipynb: run printed a goroutine dump:\n%s", out)
	}
	if _, err := os.Stat(page); err != nil {
		t.Errorf("failing.ipynb: HTML not written despite the failure: %v", err)
	}
}

// maxTourHTML bounds the exported tour. It holds eleven charts, each with its
// option and fallback PNG (about 0.1 MB each), and the ECharts library once
// per kernel session (1 MB); a copy per chart cell made it 11 MB.
const maxTourHTML = 4 << 20

// checkOneLibrary checks that an executed notebook's HTML carries the ECharts
// library exactly once (once per kernel session, and `run` uses one), and
// that the tour stays below maxTourHTML.
func checkOneLibrary(t *testing.T, name, page string, charts int) {
	t.Helper()
	fi, err := os.Stat(page)
	if err != nil {
		t.Errorf("%s: %v", name, err)
		return
	}
	raw, err := os.ReadFile(page)
	if err != nil {
		t.Errorf("%s: %v", name, err)
		return
	}
	copies := strings.Count(string(raw), `data-cp-echarts="library"`)
	t.Logf("%s: HTML is %.2f MB with %d copies of the ECharts library", name, float64(fi.Size())/(1<<20), copies)
	if charts > 0 && copies != 1 {
		t.Errorf("%s: %d copies of the ECharts library in the HTML; one kernel session should carry exactly 1", name, copies)
	}
	if name == "tour" && fi.Size() >= maxTourHTML {
		t.Errorf("tour: the HTML is %d bytes, over the bound of %d", fi.Size(), maxTourHTML)
	}
}

var (
	containerRe = regexp.MustCompile(`<div class="cp-chart"[^>]*>`)
	consoleRe   = regexp.MustCompile(`:CONSOLE[^\]]*\] "(.*)", source: (\S+)`)
	// A resource the page would load from the network or from a file outside
	// it (plain hyperlinks are fine).
	externalRe = regexp.MustCompile(`(?i)<(script|img|iframe|link|source|video|audio|embed)\b[^>]*\s(src|href)\s*=\s*["']?((https?:)?//|file:)`)
)

// consoleHook makes console.error calls recognisable in Chromium's log.
const consoleHook = `<script>(function(){var e=console.error;console.error=function(){var a=["[console.error]"];for(var i=0;i<arguments.length;i++)a.push(arguments[i]);e.apply(console,a);};})();</script>`

// noScripts forbids every script, as an untrusted notebook or a strict viewer does.
const noScripts = `<meta http-equiv="Content-Security-Policy" content="script-src 'none'">`

func chromium(ctx context.Context, browser, tmp string, args ...string) (string, error) {
	profile, err := os.MkdirTemp(tmp, "chromium-profile-")
	if err != nil {
		return "", err
	}
	defer os.RemoveAll(profile)
	all := append(append([]string{}, chromiumFlags...), "--user-data-dir="+profile)
	all = append(all, args...)
	cctx, cancel := context.WithTimeout(ctx, 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(cctx, browser, all...)
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	err = cmd.Run()
	return stdout.String() + "\n<<STDERR>>\n" + stderr.String(), err
}

// withHead returns a copy of the page with extra markup first in <head>.
func withHead(t *testing.T, page, suffix, extra string) string {
	t.Helper()
	data, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	i := strings.Index(s, "<head>")
	if i < 0 {
		t.Fatalf("%s has no <head>", page)
	}
	i += len("<head>")
	p := strings.TrimSuffix(page, ".html") + suffix + ".html"
	if err := os.WriteFile(p, []byte(s[:i]+extra+s[i:]), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// checkPage opens an exported notebook in Chromium with and without
// scripts and returns the number of chart containers.
func checkPage(t *testing.T, ctx context.Context, browser, tmp, name, page string) int {
	t.Helper()
	raw, err := os.ReadFile(page)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if strings.Contains(string(raw), kernel.EChartsCDN) {
		t.Errorf("%s: the page loads ECharts from the CDN; the local library should have been inlined", name)
	}
	if m := externalRe.FindString(string(raw)); m != "" {
		t.Errorf("%s: the HTML refers to the network (%q); it must be self-contained", name, m)
	}

	// Scripts on: every chart drawn, no script error, no hostile markup alive.
	hooked := withHead(t, page, ".console", consoleHook)
	out, err := chromium(ctx, browser, tmp, "--enable-logging=stderr", "--v=0", "--virtual-time-budget=10000", "--dump-dom", "file://"+hooked)
	if err != nil {
		t.Errorf("%s: chromium: %v\n%s", name, err, tail(out))
		return 0
	}
	dom, log, _ := strings.Cut(out, "\n<<STDERR>>\n")
	containers := containerRe.FindAllString(dom, -1)
	drawn := 0
	for _, c := range containers {
		if strings.Contains(c, "_echarts_instance_=") {
			drawn++
		}
	}
	if drawn != len(containers) {
		t.Errorf("%s: %d chart containers, %d drawn by ECharts", name, len(containers), drawn)
	}
	for _, m := range consoleRe.FindAllStringSubmatch(log, -1) {
		msg, src := m[1], m[2]
		if !strings.HasPrefix(src, "file://") {
			continue
		}
		if strings.Contains(msg, "Uncaught") || strings.Contains(msg, "Error") || strings.HasPrefix(msg, "[console.error]") {
			t.Errorf("%s: console error: %s (%s)", name, msg, src)
		}
	}
	if strings.Contains(dom, `<img src="x"`) || strings.Contains(dom, "<title>pwned") {
		t.Errorf("%s: a hostile label became live markup", name)
	}
	t.Logf("%s: %d charts drawn", name, drawn)

	// Scripts off: each chart container holds its static picture.
	// (Chromium's --blink-settings=scriptEnabled=false also stops --dump-dom,
	// so scripts are refused by a Content-Security-Policy instead.)
	blocked := withHead(t, page, ".noscript", noScripts)
	out, err = chromium(ctx, browser, tmp, "--virtual-time-budget=3000", "--dump-dom", "file://"+blocked)
	if err != nil {
		t.Errorf("%s: chromium without scripts: %v", name, err)
		return len(containers)
	}
	dom, _, _ = strings.Cut(out, "\n<<STDERR>>\n")
	static := regexp.MustCompile(`<div class="cp-chart"[^>]*>\s*<img class="cp-fallback" src="data:image/png;base64,`).FindAllString(dom, -1)
	if n := len(containerRe.FindAllString(dom, -1)); n != len(containers) || len(static) != n {
		t.Errorf("%s without scripts: %d chart containers, %d with a fallback picture (with scripts: %d)", name, n, len(static), len(containers))
	}
	if strings.Contains(dom, "_echarts_instance_=\"") {
		t.Errorf("%s: scripts ran although the policy forbids them; the no-script check is void", name)
	}
	return len(containers)
}

func fileExistsE2E(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

// checkLiveNotebook serves the executed notebook with `jupyter notebook` on a
// loopback port, opens it in Chromium and checks every chart is drawn.
func checkLiveNotebook(t *testing.T, ctx context.Context, browser, tmp string, env []string, nb string, wantCharts int) {
	t.Helper()
	jupyterCmd := "/usr/bin/jupyter"
	if !fileExistsE2E(jupyterCmd) {
		jupyterCmd = "jupyter"
	}
	// Saved outputs run their scripts only in a trusted notebook.
	sign := exec.CommandContext(ctx, "/usr/bin/python3", "-c",
		"import sys, nbformat\nfrom nbformat.sign import NotebookNotary\nnb = nbformat.read(sys.argv[1], as_version=4)\nNotebookNotary().sign(nb)", nb)
	sign.Env = env
	if out, err := sign.CombinedOutput(); err != nil {
		t.Errorf("signing %s: %v\n%s", nb, err, out)
		return
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Errorf("no loopback port: %v", err)
		return
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	token := "e2e" + strconv.Itoa(os.Getpid())
	args := []string{"notebook", "--no-browser", "--ip=127.0.0.1", "--port=" + strconv.Itoa(port),
		"--NotebookApp.token=" + token, "--notebook-dir=" + filepath.Dir(nb)}
	if os.Geteuid() == 0 {
		args = append(args, "--allow-root")
	}
	server := exec.Command(jupyterCmd, args...)
	server.Env = env
	var serverLog bytes.Buffer
	server.Stdout, server.Stderr = &serverLog, &serverLog
	if err := server.Start(); err != nil {
		t.Errorf("starting jupyter notebook: %v", err)
		return
	}
	defer func() {
		// SIGTERM lets the server shut down the kernel it started.
		_ = server.Process.Signal(syscall.SIGTERM)
		done := make(chan struct{})
		go func() { _ = server.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(20 * time.Second):
			_ = server.Process.Kill()
			<-done
		}
	}()
	base := "http://127.0.0.1:" + strconv.Itoa(port)
	ready := false
	for deadline := time.Now().Add(60 * time.Second); time.Now().Before(deadline); time.Sleep(300 * time.Millisecond) {
		resp, err := http.Get(base + "/api/status?token=" + token)
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				ready = true
				break
			}
		}
	}
	if !ready {
		t.Errorf("jupyter notebook did not start:\n%s", tail(serverLog.String()))
		return
	}
	out, err := chromium(ctx, browser, tmp, "--enable-logging=stderr", "--v=0", "--virtual-time-budget=20000", "--dump-dom",
		base+"/notebooks/"+filepath.Base(nb)+"?token="+token)
	if err != nil {
		t.Errorf("chromium on the live notebook: %v\n%s", err, tail(out))
		return
	}
	dom, log, _ := strings.Cut(out, "\n<<STDERR>>\n")
	containers := containerRe.FindAllString(dom, -1)
	drawn := 0
	for _, c := range containers {
		if strings.Contains(c, "_echarts_instance_=") {
			drawn++
		}
	}
	if len(containers) != wantCharts || drawn != wantCharts {
		t.Errorf("live classic Notebook: %d chart containers, %d drawn; want %d drawn", len(containers), drawn, wantCharts)
	}
	for _, m := range consoleRe.FindAllStringSubmatch(log, -1) {
		if strings.Contains(m[1], "Uncaught") || strings.Contains(m[1], "counterpart chart") {
			t.Errorf("live classic Notebook: console error: %s (%s)", m[1], m[2])
		}
	}
	t.Logf("live classic Notebook: %d charts drawn", drawn)
}

func tinyPNG(t *testing.T) []byte {
	img := image.NewRGBA(image.Rect(0, 0, 40, 20))
	for x := 0; x < 40; x++ {
		img.Set(x, 10, color.RGBA{15, 118, 110, 255})
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func tail(s string) string {
	if len(s) > 3000 {
		return "..." + s[len(s)-3000:]
	}
	return s
}
