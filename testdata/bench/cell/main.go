// Command cell times what a warm notebook cell showing common support does
// (issue 11): a new process loads the CSV through the session's columnar
// cache (causal.LoadCached, as kernel.Load does in a notebook), fits the
// propensity model (starting from the kept coefficients) and renders the
// support view with its charts (widgets.HTML, as kernel.Show does). GoNB's
// compilation of the cell is not included. Run it twice or more with the
// same -session folder: the first run parses and fills the cache, later
// runs are warm cells.
//
//	go build -o /tmp/cell ./testdata/bench/cell
//	/tmp/cell -data /tmp/wide.csv -session /tmp/session -covariates 20
package main

import (
	"flag"
	"fmt"
	"os"
	"runtime/pprof"
	"time"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/widgets"
)

func main() {
	data := flag.String("data", "", "CSV of the Wide scenario (testdata/bench/gen)")
	session := flag.String("session", "", "the kernel session folder to keep the cache in")
	p := flag.Int("covariates", 20, "number of covariates x1..xp")
	prof := flag.String("cpuprofile", "", "write a CPU profile to FILE")
	flag.Parse()
	if *prof != "" {
		f, err := os.Create(*prof)
		if err != nil {
			fmt.Fprintln(os.Stderr, "cell:", err)
			os.Exit(1)
		}
		pprof.StartCPUProfile(f)
		defer pprof.StopCPUProfile()
	}
	if *data == "" || *session == "" {
		fmt.Fprintln(os.Stderr, "cell: usage: cell -data FILE -session DIR [-covariates P]")
		os.Exit(1)
	}
	covs := make([]string, *p)
	for j := range covs {
		covs[j] = fmt.Sprintf("x%d", j+1)
	}
	t0 := time.Now()
	s := causal.LoadCached(*data, *session, nil).Treat("t").Outcome("y").Adjust(covs...)
	if err := s.Err(); err != nil {
		fmt.Fprintln(os.Stderr, "cell:", err)
		os.Exit(1)
	}
	t1 := time.Now()
	sc := s.Propensity()
	if err := sc.Err(); err != nil {
		fmt.Fprintln(os.Stderr, "cell:", err)
		os.Exit(1)
	}
	t2 := time.Now()
	html := widgets.HTML(sc.Support())
	t3 := time.Now()
	fmt.Printf("load+design %.3f s, fit %.3f s (%d iterations), support view %.3f s (%d KB HTML)\n",
		t1.Sub(t0).Seconds(), t2.Sub(t1).Seconds(), sc.Iterations, t3.Sub(t2).Seconds(), len(html)>>10)
}
