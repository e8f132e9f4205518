// Command counterpart installs the notebook kernel, runs notebooks headless
// and (in report.go) writes diagnostic reports.
//
//	counterpart setup                 install the "Go · counterpart" Jupyter kernel
//	counterpart run NOTEBOOK --html OUT.html
//	counterpart demo                  run the tour notebook and write its HTML
//
// Adding a subcommand: in a new file of this package, call register from an
// init function with a *command whose run parses its own flags (newFlags
// gives a flag set with --help wired to the usage and example). Return an
// error for a usage or data problem (exit 1), or exitCode(n, err) for
// another exit status.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"

	"github.com/counterpartlab/counterpart/kernel"
)

// command is one subcommand.
type command struct {
	name    string
	summary string // one line for the command list
	usage   string // e.g. "counterpart run NOTEBOOK [flags]"
	example string // shown by --help
	run     func(args []string) error
}

var commands = map[string]*command{}

// register adds a subcommand; it is called from init functions.
func register(c *command) {
	if _, dup := commands[c.name]; dup {
		panic("counterpart: subcommand " + c.name + " registered twice")
	}
	commands[c.name] = c
}

// exitError carries an exit status other than 1.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// exitCode makes run exit with code, printing err (when not nil).
func exitCode(code int, err error) error { return &exitError{code, err} }

// errHelp means --help was asked for and printed.
var errHelp = errors.New("help shown")

// newFlags returns a flag set for c whose --help prints the usage, the
// flags and the example to stdout.
func newFlags(c *command) *flag.FlagSet {
	fs := flag.NewFlagSet(c.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	return fs
}

func printUsage(w io.Writer, c *command, fs *flag.FlagSet) {
	fmt.Fprintf(w, "%s\n\nusage: %s\n", c.summary, c.usage)
	if fs != nil {
		fmt.Fprintln(w, "\nflags:")
		fs.SetOutput(w)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
	}
	if c.example != "" {
		fmt.Fprintf(w, "\nexample:\n  %s\n", strings.ReplaceAll(c.example, "\n", "\n  "))
	}
}

// parse parses args into fs, printing help for -h/--help and turning flag
// errors into messages that name the fix. It returns the positional
// arguments; flags may come before or after them.
func parse(c *command, fs *flag.FlagSet, args []string) ([]string, error) {
	var positional []string
	rest := args
	for {
		if err := fs.Parse(rest); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				printUsage(os.Stdout, c, fs)
				return nil, errHelp
			}
			// The flag package writes one dash; usage lines and messages write two.
			msg := strings.Replace(strings.Replace(err.Error(), "flag -", "flag --", 1), "defined: -", "defined: --", 1)
			return nil, fmt.Errorf("%s (see: counterpart %s --help)", msg, c.name)
		}
		if fs.NArg() == 0 {
			break
		}
		positional = append(positional, fs.Arg(0))
		rest = fs.Args()[1:]
	}
	return positional, nil
}

func mainUsage(w io.Writer) {
	fmt.Fprintln(w, "counterpart: causal diagnostics in Go notebooks\n\nusage: counterpart COMMAND [flags]\n\ncommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-8s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun `counterpart COMMAND --help` for its flags and an example.")
}

func main() {
	os.Exit(runMain(os.Args[1:]))
}

func runMain(args []string) (code int) {
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(os.Stderr, "counterpart: internal error: %v\n", r)
			code = 1
		}
	}()
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		mainUsage(os.Stdout)
		if len(args) == 0 {
			return 1
		}
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(os.Stderr, "counterpart: unknown command %q\n\n", args[0])
		mainUsage(os.Stderr)
		return 1
	}
	err := c.run(args[1:])
	switch {
	case err == nil:
		return 0
	case errors.Is(err, errHelp):
		return 0
	}
	var ee *exitError
	if errors.As(err, &ee) {
		if ee.err != nil {
			fmt.Fprintf(os.Stderr, "counterpart %s: %s\n", c.name, kernel.TerminalSafe(ee.err.Error()))
		}
		return ee.code
	}
	fmt.Fprintf(os.Stderr, "counterpart %s: %s\n", c.name, kernel.TerminalSafe(err.Error()))
	return 1
}
