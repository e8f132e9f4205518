package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/widgets"
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
			"exit status: 0 ran (and the gate passed); 1 usage or data error; 3 the --fail-on gate tripped (files are still written)",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		data := fs.String("data", "", "CSV file with a header row (required)")
		treatment := fs.String("treatment", "", "treatment column: 0/1, true/false, or two labels with --treated-level (required)")
		outcome := fs.String("outcome", "", "numeric outcome column (required)")
		covariates := fs.String("covariates", "", "comma-separated covariates to adjust for (required)")
		treatedLevel := fs.String("treated-level", "", "the treatment value that means treated (when it is not 0/1 or true/false)")
		estimand := fs.String("estimand", "ATE", "target estimand: ATE, ATT or ATO")
		trim := fs.String("trim", "none", "trimming before estimation: none, a symmetric α such as 0.1 (scores kept in [α, 1−α]), or optimal (Crump et al. 2009)")
		caliper := fs.Float64("caliper", 0, "caliper of the nearest_neighbour_matching estimate in SDs of the logit score (0: none; 0.2 is Austin 2011's advice)")
		boot := fs.Int("bootstrap", 0, "bootstrap replicates for the primary estimator (0: none)")
		seed := fs.Uint64("seed", 1, "seed of the bootstrap")
		jsonOut := fs.String("json", "", "write the report JSON to FILE, or - for stdout")
		htmlOut := fs.String("html", "", "write a self-contained HTML report to FILE")
		failOn := fs.String("fail-on", "", "exit 3 when the verdict is this bad: violated, or limited (limited or violated); with --trim the verdict on the trimmed units is judged")
		dropIncomplete := fs.Bool("drop-incomplete", false, "drop rows with a missing value in a role column (counted in the report) instead of stopping")
		verbose := fs.Bool("verbose", false, "print the time each stage took on standard error")
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
			return fmt.Errorf("--estimand %q: use ATE, ATT or ATO", *estimand)
		}
		if _, _, err := causal.ParseTrim(*trim); err != nil {
			return fmt.Errorf("--%v", err)
		}
		gate := strings.ToLower(strings.TrimSpace(*failOn))
		if gate != "" && gate != causal.Violated && gate != causal.Limited {
			return fmt.Errorf("--fail-on %q: use violated or limited", *failOn)
		}
		if *boot < 0 {
			return fmt.Errorf("--bootstrap %d: use 0 (none) or a positive number of replicates", *boot)
		}
		var covs []string
		for _, c := range strings.Split(*covariates, ",") {
			if c = strings.TrimSpace(c); c != "" {
				covs = append(covs, c)
			}
		}
		fi, err := os.Stat(*data)
		if err != nil {
			return fmt.Errorf("--data %s: %v", *data, errors.Unwrap(err))
		}
		paceMemory(fi.Size())
		clock := newStageClock(*verbose)
		defer clock.finish()
		clock.start("reading")
		s := causal.Load(*data).Treat(*treatment).Outcome(*outcome).Adjust(covs...)
		if *treatedLevel != "" {
			s = s.TreatedLevel(*treatedLevel)
		}
		if *dropIncomplete {
			s = s.DropIncomplete()
		}
		ctx, stop := signalContext()
		defer stop()
		if *caliper < 0 {
			return fmt.Errorf("--caliper %g: use 0 (none) or a positive number of SDs of the logit score, e.g. 0.2", *caliper)
		}
		opts := causal.ReportOptions{Estimand: est, Trim: *trim, Caliper: *caliper, Bootstrap: *boot, Seed: *seed, Context: ctx, Stage: clock.start}
		if *boot > 0 {
			update, finish := kernel.Progress("bootstrap")
			opts.Progress = update
			defer finish()
		}
		r, err := causal.BuildReport(s, opts)
		if err != nil {
			return err
		}
		clock.start("writing")
		if *jsonOut != "" {
			b, err := json.MarshalIndent(r, "", "  ")
			if err != nil {
				return fmt.Errorf("encoding the report: %v", err)
			}
			b = append(b, '\n')
			if *jsonOut == "-" {
				os.Stdout.Write(b)
			} else if err := os.WriteFile(*jsonOut, b, 0o644); err != nil {
				return fmt.Errorf("--json: %v", err)
			}
		}
		if *htmlOut != "" {
			js, jerr := kernel.EChartsJS()
			if jerr != nil {
				fmt.Fprintf(os.Stderr, "counterpart report: %v; the HTML shows static pictures only\n", jerr)
				js = nil
			}
			if err := os.WriteFile(*htmlOut, []byte(widgets.ReportPage(r, js)), 0o644); err != nil {
				return fmt.Errorf("--html: %v", err)
			}
		}
		if *jsonOut != "-" {
			fmt.Print(r.String())
		}
		status := r.Gate().Status
		if gate == causal.Violated && status == causal.Violated || gate == causal.Limited && (status == causal.Limited || status == causal.Violated) {
			return exitCode(3, fmt.Errorf("positivity gate: the verdict is %s (--fail-on %s)", status, gate))
		}
		return nil
	}
	return c
}
