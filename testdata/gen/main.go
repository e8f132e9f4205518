// Command gen writes the simulated demo data set testdata/water_audits.csv
// from the WaterAudits scenario of package causal/scenario.
//
// Run it from the repository root:
//
//	go run ./testdata/gen                 # the committed file (seed and size fixed in package scenario)
//	go run ./testdata/gen -seed 7 -n 500 -out /tmp/w.csv
//
// With the default flags the output must equal the committed file byte for
// byte; the tests of package scenario check that.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"os"

	"github.com/counterpartlab/counterpart/causal/scenario"
)

func main() {
	seed := flag.Uint64("seed", scenario.WaterAuditsSeed, "random-number seed")
	n := flag.Int("n", scenario.WaterAuditsN, "number of households (at least 10)")
	out := flag.String("out", "testdata/water_audits.csv", "output CSV file ('-' for standard output)")
	flag.Parse()
	if flag.NArg() > 0 {
		fmt.Fprintf(os.Stderr, "gen: unexpected argument %q; flags are -seed, -n, -out\n", flag.Arg(0))
		os.Exit(1)
	}
	if err := run(*seed, *n, *out); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run(seed uint64, n int, out string) error {
	d, err := scenario.WaterAudits(seed, n)
	if err != nil {
		return err
	}
	if out == "-" {
		w := bufio.NewWriter(os.Stdout)
		if err := d.WriteCSV(w); err != nil {
			return err
		}
		return w.Flush()
	}
	f, err := os.Create(out)
	if err != nil {
		return fmt.Errorf("%v (run from the repository root, or give -out a path whose folder exists)", err)
	}
	w := bufio.NewWriter(f)
	if err := d.WriteCSV(w); err != nil {
		f.Close()
		return fmt.Errorf("writing %s: %w", out, err)
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("writing %s: %w", out, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", out, err)
	}
	fmt.Fprintf(os.Stderr, "gen: wrote %s: %d households, seed %d, true sample ATE %.2f, ATT %.2f litres/day\n",
		out, d.Rows(), seed, d.TrueATE, d.TrueATT)
	return nil
}
