package causal_test

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// wideCSV writes scenario.Wide(1, n, p) to a CSV in dir and returns its path
// and the covariate names.
func wideCSV(b *testing.B, dir string, n, p int) (string, []string) {
	b.Helper()
	d, err := scenario.Wide(1, n, p)
	if err != nil {
		b.Fatal(err)
	}
	path := filepath.Join(dir, fmt.Sprintf("wide_%d_%d.csv", n, p))
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	if err := d.WriteCSV(w); err != nil {
		b.Fatal(err)
	}
	if err := w.Flush(); err != nil {
		b.Fatal(err)
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	return path, d.Names[:p]
}

// peakRSS reads the process's peak resident set size (VmHWM, Linux) in
// bytes and resets it (clear_refs 5), so each stage reports its own peak.
// It returns 0 where /proc is not available.
func peakRSS(reset bool) float64 {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0
	}
	var kb float64
	for _, line := range strings.Split(string(b), "\n") {
		if strings.HasPrefix(line, "VmHWM:") {
			f := strings.Fields(line)
			if len(f) >= 2 {
				kb, _ = strconv.ParseFloat(f[1], 64)
			}
		}
	}
	if reset {
		_ = os.WriteFile("/proc/self/clear_refs", []byte("5"), 0)
	}
	return kb * 1024
}

// BenchmarkReportStages is the scale curve of the whole report (issue 11):
// 1e5, 1e6 and 1e7 rows of scenario.Wide with 20 covariates, read from a
// CSV. For each stage it reports seconds and the peak RSS in MB reached
// during the stage (Linux), plus the whole report. -short skips 1e7.
func BenchmarkReportStages(b *testing.B) {
	for _, n := range []int{100000, 1000000, 10000000} {
		if n > 1000000 && testing.Short() {
			continue
		}
		b.Run(fmt.Sprintf("n=%d/p=20", n), func(b *testing.B) {
			path, covs := wideCSV(b, b.TempDir(), n, 20)
			runtime.GC()
			type stage struct {
				name string
				run  func()
			}
			var (
				s  *causal.Study
				sc *causal.Scores
				w  *causal.Weights
			)
			fail := func(err error) {
				if err != nil {
					b.Fatal(err)
				}
			}
			stages := []stage{
				{"load", func() {
					l := causal.Load(path)
					fail(l.Err()) // no roles yet: the design is not resolved here
					s = l.Treat("t").Outcome("y").Adjust(covs...)
				}},
				{"design", func() { _, err := s.Design(); fail(err) }},
				{"fit", func() { sc = s.Propensity(); fail(sc.Err()) }},
				{"support", func() { fail(sc.Support().Err()) }},
				{"cells", func() { fail(s.Cells("x4", "x8", "x12", "x16").Err()) }},
				{"weights", func() { w = sc.Weights(causal.ATE); fail(w.Err()) }},
				{"balance", func() { fail(w.Balance().Err()) }},
				{"effects", func() { fail(sc.Effects(causal.ATE).Err()) }},
			}
			secs := make([]float64, len(stages))
			peak := make([]float64, len(stages))
			var whole, wholePeak float64
			for i := 0; i < b.N; i++ {
				runtime.GC()
				peakRSS(true)
				for k, st := range stages {
					t0 := time.Now()
					st.run()
					secs[k] += time.Since(t0).Seconds()
					peak[k] = max(peak[k], peakRSS(true))
				}
				s, sc, w = nil, nil, nil
				runtime.GC()
				peakRSS(true)
				t0 := time.Now()
				r, err := causal.BuildReport(causal.Load(path).Treat("t").Outcome("y").Adjust(covs...), causal.ReportOptions{})
				fail(err)
				whole += time.Since(t0).Seconds()
				wholePeak = max(wholePeak, peakRSS(true))
				_ = r
			}
			for k, st := range stages {
				b.ReportMetric(secs[k]/float64(b.N), st.name+"-s")
				b.ReportMetric(peak[k]/1e6, st.name+"-peakMB")
			}
			b.ReportMetric(whole/float64(b.N), "report-s")
			b.ReportMetric(wholePeak/1e6, "report-peakMB")
		})
	}
}
