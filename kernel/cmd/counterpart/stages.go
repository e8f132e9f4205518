package main

import (
	"fmt"
	"io"
	"os"
	"runtime/debug"
	"strings"
	"sync"
	"time"
)

// stageClock follows the stages of a long command: on a terminal it shows
// the current stage on one line of standard error (cleared at the end), and
// with --verbose it prints one line with the time of every stage.
type stageClock struct {
	mu       sync.Mutex // the stages may run in another goroutine
	out      io.Writer
	terminal bool
	verbose  bool
	names    []string
	times    []time.Duration
	begun    time.Time
	first    time.Time
}

func newStageClock(verbose bool) *stageClock {
	fi, err := os.Stderr.Stat()
	terminal := err == nil && fi.Mode()&os.ModeCharDevice != 0
	return &stageClock{out: os.Stderr, terminal: terminal, verbose: verbose}
}

// start ends the current stage and begins the named one ("" ends it only).
// Stage names are the program's own words (no user text reaches the
// terminal through them).
func (c *stageClock) start(name string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.startLocked(name)
}

func (c *stageClock) startLocked(name string) {
	now := time.Now()
	if c.first.IsZero() {
		c.first = now
	}
	if len(c.names) > 0 && c.times[len(c.times)-1] < 0 {
		c.times[len(c.times)-1] = now.Sub(c.begun)
	}
	if name == "" {
		return
	}
	c.names = append(c.names, name)
	c.times = append(c.times, -1)
	c.begun = now
	if c.terminal {
		fmt.Fprintf(c.out, "\r\033[Kcounterpart report: %s…", name)
	}
}

// finish ends the last stage, clears the terminal line and, with
// --verbose, prints the timing line.
func (c *stageClock) finish() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.startLocked("")
	if c.terminal {
		fmt.Fprint(c.out, "\r\033[K")
	}
	if !c.verbose || len(c.names) == 0 {
		return
	}
	parts := make([]string, len(c.names))
	for i, n := range c.names {
		parts[i] = fmt.Sprintf("%s %.2f s", n, c.times[i].Seconds())
	}
	fmt.Fprintf(c.out, "counterpart report: timing: %s; total %.2f s\n", strings.Join(parts, ", "), time.Since(c.first).Seconds())
}

// paceMemory sets a soft memory limit of four times the size of the data
// file (at least 256 MiB), unless GOMEMLIMIT or GOGC is set: the garbage
// collector then runs more often as the heap nears it, which keeps the
// report's peak memory near three times the numeric data instead of the
// default pacing's five. It is soft: a report that needs more still gets it
// (the collector only works harder).
func paceMemory(fileSize int64) {
	if os.Getenv("GOMEMLIMIT") != "" || os.Getenv("GOGC") != "" {
		return
	}
	debug.SetMemoryLimit(max(256<<20, 4*fileSize))
}
