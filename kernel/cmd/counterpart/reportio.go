package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"os"
	"strconv"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/widgets"
)

// maxBootstrap bounds --bootstrap: percentile intervals settle by a few
// thousand replicates (Efron & Tibshirani 1993, ch. 13); far more only
// spends time.
const maxBootstrap = 100000

// decimal is a flag holding a whole number written in decimal digits only:
// flag.Int and flag.Uint64 would also read 010 as 8, 0x10 as 16 and 1_000.
type decimal struct {
	v    *uint64
	name string
}

func (d decimal) String() string {
	if d.v == nil {
		return ""
	}
	return strconv.FormatUint(*d.v, 10)
}

func (d decimal) Set(s string) error {
	if s == "" || strings.TrimLeft(s, "0123456789") != "" {
		return fmt.Errorf("use a whole number written with the digits 0-9")
	}
	v, err := strconv.ParseUint(s, 10, 64)
	if err != nil {
		return fmt.Errorf("too large: at most %d", uint64(1<<64-1))
	}
	*d.v = v
	return nil
}

func decimalFlag(fs *flag.FlagSet, name string, def uint64, usage string) *uint64 {
	v := def
	fs.Var(decimal{&v, name}, name, usage)
	return &v
}

// caliperValue reads --caliper: a decimal number of SDs, 0 for none.
func caliperValue(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || strings.TrimLeft(s, "0123456789.") != "" || strings.Count(s, ".") > 1 {
		return 0, fmt.Errorf("--caliper %q: use 0 (none) or a positive number of SDs of the logit score written in decimal, e.g. 0.2", s)
	}
	return v, nil
}

// covariateList splits --covariates, refusing empty names (", ," would
// otherwise run unadjusted) and names given twice.
func covariateList(s string) ([]string, error) { return nameList("--covariates", s) }

// nameList reads the comma-separated column names of a flag: no empty name,
// none twice.
func nameList(flag, s string) ([]string, error) {
	parts := strings.Split(s, ",")
	seen := map[string]bool{}
	names := make([]string, 0, len(parts))
	for i, c := range parts {
		c = strings.TrimSpace(c)
		if c == "" {
			return nil, fmt.Errorf("%s %q: name %d of %d is empty: list column names separated by commas, e.g. %s age,income", flag, s, i+1, len(parts), flag)
		}
		if seen[c] {
			return nil, fmt.Errorf("%s: %q is listed twice", flag, c)
		}
		seen[c] = true
		names = append(names, c)
	}
	return names, nil
}

// checkOutputPaths refuses an output on top of the data or of the other
// output.
func checkOutputPaths(data, jsonOut, htmlOut string) error {
	outs := []struct{ flag, path string }{{"--json", jsonOut}, {"--html", htmlOut}}
	if jsonOut == "-" {
		outs = outs[1:]
	}
	for i, o := range outs {
		if kernel.SamePath(o.path, data) {
			return fmt.Errorf("%s %s is the --data file: choose another path, or the data would be overwritten", o.flag, o.path)
		}
		for _, p := range outs[i+1:] {
			if kernel.SamePath(o.path, p.path) {
				return fmt.Errorf("%s and %s are the same file %s: give each its own path", o.flag, p.flag, o.path)
			}
		}
	}
	return nil
}

// flagFor names a Study setting as the report command's flag.
func flagFor(setting, value string) string {
	name := map[string]string{"Treat": "--treatment", "TreatedLevel": "--treated-level", "Outcome": "--outcome",
		"Adjust": "--covariates", "DropIncomplete": "--drop-incomplete", "AsCategory": "--categorical"}[setting]
	if name == "" {
		return causal.MethodName(setting, value)
	}
	if value != "" && (setting == "TreatedLevel" || setting == "AsCategory") {
		return name + " " + strconv.Quote(value)
	}
	return name
}

// buildInterruptible runs build, returning at once when the context is
// cancelled (loading and fitting cannot be stopped midway: their goroutine is
// left to the process's exit). With partial, a cancelled build is waited for,
// so a bootstrap cut short can still be written; a second signal then ends
// the process.
func buildInterruptible(ctx interface{ Done() <-chan struct{} }, partial bool, build func() (*causal.Report, error)) (*causal.Report, error) {
	type built struct {
		r   *causal.Report
		err error
	}
	done := make(chan built, 1)
	go func() {
		defer func() {
			if p := recover(); p != nil {
				done <- built{nil, fmt.Errorf("internal error: %v", p)}
			}
		}()
		r, err := build()
		done <- built{r, err}
	}()
	var b built
	select {
	case b = <-done:
	case <-ctx.Done():
		if !partial {
			return nil, interruption("no output written or replaced")
		}
		b = <-done
	}
	if b.err != nil {
		if ierr := interruption("no output written or replaced"); ierr != nil {
			return nil, ierr
		}
		return nil, errors.New(causal.RephraseSettings(b.err, flagFor))
	}
	return b.r, nil
}

// partialBootstrap reports whether r may be written after an interrupt: the
// user asked for it and r holds a bootstrap cut short with estimates.
func partialBootstrap(r *causal.Report, asked bool) bool {
	if !asked || r == nil || r.Bootstrap == nil {
		return false
	}
	st, _ := r.Bootstrap.Status()
	return st == causal.BootstrapPartial
}

// staged is the report's outputs, ready to be put in place together.
type staged struct {
	files  []*kernel.StagedFile
	flags  []string // the flag of each file
	stdout []byte
}

// reportOutputs encodes the report and stages each file output beside its
// target; the first failure discards what was staged and names the flag.
func reportOutputs(r *causal.Report, jsonOut, htmlOut string) (*staged, error) {
	out := &staged{}
	stage := func(flag, path string, data []byte) error {
		f, err := kernel.StageFile(path, data, 0o644)
		if err != nil {
			out.discard()
			return fmt.Errorf("%s %s: cannot write it (%v); nothing was written or replaced", flag, path, unwrapPath(err))
		}
		out.files, out.flags = append(out.files, f), append(out.flags, flag)
		return nil
	}
	if jsonOut != "" {
		b, err := json.MarshalIndent(r, "", "  ")
		if err != nil {
			return nil, fmt.Errorf("encoding the report: %v", err)
		}
		b = append(b, '\n')
		if jsonOut == "-" {
			out.stdout = b
		} else if err := stage("--json", jsonOut, b); err != nil {
			return nil, err
		}
	}
	if htmlOut != "" {
		js, jerr := kernel.EChartsJS()
		if jerr != nil {
			fmt.Fprintf(os.Stderr, "counterpart report: %v; the HTML shows static pictures only\n", jerr)
			js = nil
		}
		if err := stage("--html", htmlOut, []byte(widgets.ReportPage(r, js))); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// unwrapPath drops the *os.PathError's repetition of the path.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

func (s *staged) discard() {
	for _, f := range s.files {
		f.Discard()
	}
	s.files = nil
}

// commit puts every staged file in place, then writes the stdout output.
// Signals are caught meanwhile (signalContext), so an interrupt cannot stop
// it between two renames.
func (s *staged) commit() error {
	for i, f := range s.files {
		if err := f.Commit(); err != nil {
			for _, g := range s.files[i+1:] {
				g.Discard()
			}
			return fmt.Errorf("%s %s: cannot put it in place (%v)", s.flags[i], f.Path, unwrapPath(err))
		}
	}
	s.files = nil
	if s.stdout != nil {
		if _, err := os.Stdout.Write(s.stdout); err != nil {
			return fmt.Errorf("--json -: writing to standard output: %v", err)
		}
	}
	return nil
}
