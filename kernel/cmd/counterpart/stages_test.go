package main

import (
	"bytes"
	"regexp"
	"strings"
	"testing"
)

// On a terminal the current stage is drawn on one line and cleared at the
// end; --verbose adds one timing line naming every stage; neither prints
// anything else.
func TestStageClock(t *testing.T) {
	for _, c := range []struct {
		terminal, verbose bool
	}{{false, false}, {true, false}, {false, true}, {true, true}} {
		var b bytes.Buffer
		clock := &stageClock{out: &b, terminal: c.terminal, verbose: c.verbose}
		clock.start("reading")
		clock.start("design")
		clock.start("")
		clock.start("writing")
		clock.finish()
		out := b.String()
		if got := strings.Contains(out, "\r\033[Kcounterpart report: design…"); got != c.terminal {
			t.Errorf("terminal %v: stage line drawn %v in %q", c.terminal, got, out)
		}
		if c.terminal && !strings.Contains(out, "writing…\r\033[K") {
			t.Errorf("terminal: the stage line is not cleared at the end: %q", out)
		}
		timing := regexp.MustCompile(`counterpart report: timing: reading \d+\.\d\d s, design \d+\.\d\d s, writing \d+\.\d\d s; total \d+\.\d\d s\n`)
		if got := timing.MatchString(out); got != c.verbose {
			t.Errorf("verbose %v: timing line present %v in %q", c.verbose, got, out)
		}
		if !c.terminal && !c.verbose && out != "" {
			t.Errorf("neither terminal nor verbose: printed %q", out)
		}
	}
}
