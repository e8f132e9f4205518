package main

import (
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/kernel"
)

func init() { register(reportCommand()) }

func reportCommand() *command {
	c := &command{
		name:    "report",
		summary: "run the diagnostics and estimates headless: text summary, JSON, HTML, exit-code gate",
		usage:   "counterpart report --data FILE --treatment COL --outcome COL --covariates a,b,c [flags]",
		example: "counterpart report --data testdata/water_audits.csv --treatment audit --treated-level yes \\\n" +
			"    --outcome litres_per_day --covariates household_size,lot_m2,home_age,last_summer_lpd,pool,district,income_band \\\n" +
			"    --estimand ATO --json report.json --html report.html --fail-on violated\n" +
			"exit status: 0 ran (and the gate passed); 1 usage or data error, or an output could not be written; 3 the --fail-on gate tripped (files are still written);\n" +
			"130 interrupted by Ctrl-C (143 by SIGTERM). Outputs are replaced whole (temporary file, then rename) once all are ready, and not at all when a write\n" +
			"fails or the run is interrupted; with --partial-on-interrupt, Ctrl-C during --bootstrap writes the report with the replicates done, marked partial.\n" +
			"A bootstrap that fails is written marked failed (bootstrap.status) and does not stop the report.",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		data := fs.String("data", "", "CSV file with a header row (required)")
		treatment := fs.String("treatment", "", "treatment column: 0/1, true/false, or two labels with --treated-level (required)")
		outcome := fs.String("outcome", "", "numeric outcome column (required)")
		covariates := fs.String("covariates", "", "comma-separated covariates to adjust for (required)")
		treatedLevel := fs.String("treated-level", "", "the treatment value that means treated (when it is not 0/1 or true/false)")
		estimand := fs.String("estimand", "ATE", "target estimand: ATE, ATT, ATC or ATO (the gate and the remedies judge this one)")
		trim := fs.String("trim", "none", "trimming before estimation: none, a symmetric α such as 0.1 (scores kept in [α, 1−α]), or optimal (Crump et al. 2009)")
		cellsFlag := fs.String("cells", "", "comma-separated covariates that define the positivity cells (default: the categorical and 0/1 covariates, at most four)")
		bins := fs.Int("bins", 5, "quantile bins for continuous cell covariates")
		caliper := fs.String("caliper", "0", "caliper of the nearest_neighbour_matching estimate in SDs of the logit score (0: none; 0.2 is Austin 2011's advice)")
		boot := decimalFlag(fs, "bootstrap", 0, "bootstrap replicates of the primary estimator — AIPW for ATE, ATT and ATC, overlap weights for ATO — refitting the propensity (and outcome) models in each (0: none; else 2 to 100000)")
		seed := decimalFlag(fs, "seed", 1, "seed of the bootstrap (a whole number, 0 to 2^64-1)")
		jsonOut := fs.String("json", "", "write the report JSON to FILE, or - for stdout")
		htmlOut := fs.String("html", "", "write a self-contained HTML report to FILE")
		failOn := fs.String("fail-on", "", "exit 3 when the verdict for --estimand is this bad: violated (withdrawn by a violation), or limited (not supported, or supported with caution); with --trim the trimmed units' verdict is judged")
		dropIncomplete := fs.Bool("drop-incomplete", false, "drop rows with a missing value in a role column (counted in the report) instead of stopping")
		verbose := fs.Bool("verbose", false, "print the time each stage took on standard error")
		categorical := fs.String("categorical", "", "comma-separated covariates whose values are categories even where they look like numbers (e.g. region codes)")
		delimiter := fs.String("delimiter", ",", "field separator of --data: one character such as , ; | or the word tab")
		maxField := fs.Int("max-field", causal.DefaultMaxField, "longest field of --data accepted, in bytes")
		partial := fs.Bool("partial-on-interrupt", false, "on Ctrl-C during --bootstrap, write the outputs with the replicates done, the bootstrap marked partial (default: write nothing)")
		pos, err := parse(c, fs, args)
		if err != nil {
			return err
		}
		if len(pos) > 0 {
			return fmt.Errorf("unexpected argument %q: every input is a flag (see: counterpart report --help)", pos[0])
		}
		var missing []string
		for _, f := range []struct{ name, v string }{{"--data", *data}, {"--treatment", *treatment}, {"--outcome", *outcome}, {"--covariates", *covariates}} {
			if strings.TrimSpace(f.v) == "" {
				missing = append(missing, f.name)
			}
		}
		if len(missing) > 0 {
			return fmt.Errorf("missing %s (see: counterpart report --help)", strings.Join(missing, ", "))
		}
		est, err := causal.ParseEstimand(*estimand)
		if err != nil || (est != causal.ATE && est != causal.ATT && est != causal.ATO && est != causal.ATC) {
			return fmt.Errorf("--estimand %q: use ATE, ATT, ATC or ATO", *estimand)
		}
		if _, _, err := causal.ParseTrim(*trim); err != nil {
			return fmt.Errorf("--%v", err)
		}
		gate := causal.VerdictStatus(strings.ToLower(strings.TrimSpace(*failOn)))
		if gate != "" && gate != causal.Violated && gate != causal.Limited {
			return fmt.Errorf("--fail-on %q: use violated or limited", *failOn)
		}
		if *boot == 1 || *boot > maxBootstrap {
			return fmt.Errorf("--bootstrap %d: use 0 (none) or 2 to %d replicates (1000 or more for percentile intervals)", *boot, maxBootstrap)
		}
		cal, err := caliperValue(*caliper)
		if err != nil {
			return err
		}
		covs, err := covariateList(*covariates)
		if err != nil {
			return err
		}
		var cellCols []string
		for _, c := range strings.Split(*cellsFlag, ",") {
			if c = strings.TrimSpace(c); c != "" {
				cellCols = append(cellCols, c)
			}
		}
		if strings.TrimSpace(*cellsFlag) != "" && len(cellCols) == 0 {
			return fmt.Errorf("--cells %q names no column: give comma-separated covariates, e.g. --cells district,pool", *cellsFlag)
		}
		if *bins < 2 {
			return fmt.Errorf("--bins %d: use 2 or more quantile bins", *bins)
		}
		fi, err := os.Stat(*data)
		if err != nil {
			return fmt.Errorf("--data %s: %v", *data, errors.Unwrap(err))
		}
		paceMemory(fi.Size())
		var cats []string
		if *categorical != "" {
			if cats, err = nameList("--categorical", *categorical); err != nil {
				return err
			}
		}
		delim, err := causal.ParseDelimiter(*delimiter)
		if err != nil {
			return fmt.Errorf("--%v", err)
		}
		if *maxField < 1 {
			return fmt.Errorf("--max-field %d: use a positive number of bytes (default %d)", *maxField, causal.DefaultMaxField)
		}
		if err := checkOutputPaths(*data, *jsonOut, *htmlOut); err != nil {
			return err
		}
		ctx, stop := signalContext()
		defer stop()
		clock := newStageClock(*verbose)
		defer clock.finish()
		opts := causal.ReportOptions{Estimand: est, Trim: *trim, Cells: cellCols, Bins: *bins, Caliper: cal, Bootstrap: int(*boot), Seed: *seed, Context: ctx, Stage: clock.start}
		if *boot > 0 {
			update, finish := kernel.Progress("bootstrap")
			opts.Progress = update
			defer finish()
		}
		r, err := buildInterruptible(ctx, *partial, func() (*causal.Report, error) {
			clock.start("reading")
			s := causal.LoadWith(*data, causal.ReadOptions{Delimiter: delim, MaxField: *maxField}).Treat(*treatment).Outcome(*outcome).Adjust(covs...)
			if *treatedLevel != "" {
				s = s.TreatedLevel(*treatedLevel)
			}
			if *dropIncomplete {
				s = s.DropIncomplete()
			}
			if len(cats) > 0 {
				s = s.AsCategory(cats...)
			}
			return causal.BuildReport(s, opts)
		})
		if err != nil {
			return err
		}
		clock.start("writing")
		outs, err := reportOutputs(r, *jsonOut, *htmlOut)
		if err != nil {
			return err
		}
		if ctx.Err() != nil && !partialBootstrap(r, *partial) {
			outs.discard()
			return interruption("no output written or replaced")
		}
		if err := outs.commit(); err != nil {
			return err
		}
		if *jsonOut != "-" {
			fmt.Print(kernel.TerminalSafe(r.String()))
		}
		if ctx.Err() != nil {
			return interruption("the outputs were written with a partial bootstrap (--partial-on-interrupt)")
		}
		status := r.GateStatus()
		if gate == causal.Violated && status == causal.Violated || gate == causal.Limited && (status == causal.Limited || status == causal.Violated) {
			return exitCode(3, fmt.Errorf("positivity gate: the %s is %s, graded %s (--fail-on %s)", est, strings.ReplaceAll(string(r.Gate().StatusOf(est)), "_", " "), status, gate))
		}
		return nil
	}
	return c
}
