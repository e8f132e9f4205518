// Command gen writes a large CSV of the Wide scenario of package
// causal/scenario (n units, p covariates x1..xp, treatment t, outcome y), the
// input of the side-by-side benchmark testdata/bench/run.sh.
//
//	go run ./testdata/bench/gen -n 1000000 -p 20 -out /tmp/wide.csv
package main

import (
	"bufio"
	"flag"
	"fmt"
	"os"
	"path/filepath"

	"github.com/counterpartlab/counterpart/causal/scenario"
)

func main() {
	seed := flag.Uint64("seed", 1, "random-number seed")
	n := flag.Int("n", 1000000, "number of units (rows)")
	p := flag.Int("p", 20, "number of covariates")
	out := flag.String("out", "", "output CSV file (required; '-' for standard output)")
	flag.Parse()
	if flag.NArg() > 0 || *out == "" {
		fmt.Fprintln(os.Stderr, "gen: usage: gen -out FILE [-n ROWS] [-p COVARIATES] [-seed S]")
		os.Exit(1)
	}
	if err := run(*seed, *n, *p, *out); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run(seed uint64, n, p int, out string) error {
	d, err := scenario.Wide(seed, n, p)
	if err != nil {
		return err
	}
	f := os.Stdout
	if out != "-" {
		// Written beside the target and renamed, so a stopped run leaves no
		// partial file under the name the benchmark reuses.
		if f, err = os.CreateTemp(filepath.Dir(out), ".gen-*.csv"); err != nil {
			return err
		}
		defer os.Remove(f.Name())
	}
	w := bufio.NewWriterSize(f, 1<<20)
	if err := d.WriteCSV(w); err != nil {
		return fmt.Errorf("writing %s: %w", out, err)
	}
	if err := w.Flush(); err != nil {
		return fmt.Errorf("writing %s: %w", out, err)
	}
	if out == "-" {
		return nil
	}
	if err := f.Chmod(0o644); err != nil {
		return err
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", out, err)
	}
	if err := os.Rename(f.Name(), out); err != nil {
		return err
	}
	fmt.Fprintf(os.Stderr, "gen: wrote %s: %d rows, %d covariates, seed %d, true sample ATE %.4f\n", out, n, p, seed, d.TrueATE)
	return nil
}
