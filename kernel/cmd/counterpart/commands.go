package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"path/filepath"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/kernel/jupyter"
)

func init() {
	register(setupCommand())
	register(runCommand())
	register(demoCommand())
}

// caughtSignal is the first SIGINT or SIGTERM a signalContext caught.
var caughtSignal atomic.Value

// signalContext is cancelled by Ctrl-C (SIGINT) or SIGTERM, so work and
// child processes stop with us; interruption then gives the exit status.
// After the first signal, a second one ends the process at once.
func signalContext() (context.Context, context.CancelFunc) {
	ctx, cancel := context.WithCancel(context.Background())
	ch := make(chan os.Signal, 1)
	signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
	go func() {
		select {
		case sig := <-ch:
			caughtSignal.CompareAndSwap(nil, sig)
			signal.Stop(ch) // the next signal has its default effect
			cancel()
		case <-ctx.Done():
		}
	}()
	return ctx, func() { signal.Stop(ch); cancel() }
}

// interruption is the exit status for a caught signal (130 for SIGINT, 143
// for SIGTERM: 128 + its number) with what was kept, or nil when no signal came.
func interruption(what string) error {
	sig, _ := caughtSignal.Load().(os.Signal)
	if sig == nil {
		return nil
	}
	code := 130
	if s, ok := sig.(syscall.Signal); ok {
		code = 128 + int(s)
	}
	return exitCode(code, fmt.Errorf("interrupted (%v): %s", sig, what))
}

func setupCommand() *command {
	c := &command{
		name:    "setup",
		summary: "install the Jupyter kernel \"" + jupyter.DefaultDisplayName + "\" (GoNB + this module, offline)",
		usage:   "counterpart setup [--repo DIR] [--kernel NAME] [--force]",
		example: "counterpart setup\njupyter notebook   # then choose \"" + jupyter.DefaultDisplayName + "\" for a new notebook",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		repo := fs.String("repo", "", "the counterpart checkout to serve to notebooks (default: the one containing the working folder)")
		name := fs.String("kernel", jupyter.DefaultKernelName, "kernelspec name")
		dataDir := fs.String("jupyter-data-dir", "", "Jupyter data folder (default $JUPYTER_DATA_DIR or ~/.local/share/jupyter)")
		force := fs.Bool("force", false, "redo every step even when it looks up to date")
		pos, err := parse(c, fs, args)
		if err != nil {
			return err
		}
		if len(pos) > 0 {
			return fmt.Errorf("setup takes no arguments, got %q (see: counterpart setup --help)", pos)
		}
		ctx, stop := signalContext()
		defer stop()
		t0 := time.Now()
		if _, err := jupyter.Setup(ctx, jupyter.SetupOptions{Repo: *repo, KernelName: *name, DataDir: *dataDir, Force: *force}); err != nil {
			if ierr := interruption("setup stopped; run it again to finish"); ierr != nil {
				return ierr
			}
			return err
		}
		fmt.Printf("setup done in %s\n", time.Since(t0).Round(100*time.Millisecond))
		return nil
	}
	return c
}

func runCommand() *command {
	c := &command{
		name:    "run",
		summary: "execute a notebook headless with the counterpart kernel and export it to HTML",
		usage:   "counterpart run NOTEBOOK [--html OUT] [--kernel NAME] [--timeout SECONDS]",
		example: "counterpart run notebooks/tour.ipynb --html tour.html\n" +
			"exit status: 0 every cell ran; 1 a cell failed (an error, a panic, or an error panel it showed), or a usage error;\n" +
			"130 interrupted by Ctrl-C (143 by SIGTERM). Outputs are replaced whole (temporary file, then rename), and not at all when interrupted.",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		html := fs.String("html", "", "write the executed notebook as a self-contained HTML page to this file")
		executed := fs.String("executed", "", "also keep the executed notebook (.ipynb) at this path")
		name := fs.String("kernel", jupyter.DefaultKernelName, "kernelspec to execute with")
		timeout := decimalFlag(fs, "timeout", 900, "seconds allowed per cell, 1 to 604800 (the first cell compiles the imports)")
		pos, err := parse(c, fs, args)
		if err != nil {
			return err
		}
		if len(pos) != 1 {
			return fmt.Errorf("run needs exactly one NOTEBOOK, got %d (see: counterpart run --help)", len(pos))
		}
		if *timeout == 0 || *timeout > 604800 {
			return fmt.Errorf("--timeout %d: use 1 to 604800 seconds (a week)", *timeout)
		}
		ctx, stop := signalContext()
		defer stop()
		_, err = jupyter.Run(ctx, jupyter.RunOptions{Notebook: pos[0], HTML: *html, Executed: *executed,
			KernelName: *name, CellTimeout: time.Duration(*timeout) * time.Second})
		if ierr := interruption("no output written or replaced"); err != nil && ierr != nil {
			return ierr
		}
		return err
	}
	return c
}

func demoCommand() *command {
	c := &command{
		name:    "demo",
		summary: "set up the kernel if needed, run the tour notebook, and write it as HTML",
		usage:   "counterpart demo [--out DIR] [--repo DIR]",
		example: "counterpart demo --out /tmp/counterpart-demo\nchromium /tmp/counterpart-demo/tour.html",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		out := fs.String("out", "", "folder for tour.html (default: the counterpart cache folder)")
		repo := fs.String("repo", "", "the counterpart checkout (default: the one containing the working folder)")
		pos, err := parse(c, fs, args)
		if err != nil {
			return err
		}
		if len(pos) > 0 {
			return fmt.Errorf("demo takes no arguments, got %q (see: counterpart demo --help)", pos)
		}
		start := *repo
		if start == "" {
			if start, err = os.Getwd(); err != nil {
				return err
			}
		}
		root, err := jupyter.FindModuleRoot(start)
		if err != nil {
			return err
		}
		tour := filepath.Join(root, "notebooks", "tour.ipynb")
		if _, err := os.Stat(tour); err != nil {
			return fmt.Errorf("the tour notebook %s is missing: this checkout has no notebooks/tour.ipynb yet (pull a newer version, or run your own with `counterpart run NOTEBOOK --html OUT`)", tour)
		}
		dir := *out
		if dir == "" {
			cache, err := kernel.CacheDir()
			if err != nil {
				return err
			}
			dir = filepath.Join(cache, "demo")
		}
		ctx, stop := signalContext()
		defer stop()
		// Setup skips every step that is up to date, so it also serves as the staleness check.
		if _, err := jupyter.Setup(ctx, jupyter.SetupOptions{Repo: root}); err != nil {
			if ierr := interruption("setup stopped; run it again to finish"); ierr != nil {
				return ierr
			}
			return fmt.Errorf("setting up the kernel: %w", err)
		}
		res, err := jupyter.Run(ctx, jupyter.RunOptions{Notebook: tour, HTML: filepath.Join(dir, "tour.html")})
		if ierr := interruption("no output written or replaced"); err != nil && ierr != nil {
			return ierr
		}
		var cellErrs jupyter.CellErrors
		if errors.As(err, &cellErrs) && res != nil && res.HTML != "" {
			return fmt.Errorf("%w\n(the HTML with the failing cells is at %s)", err, res.HTML)
		}
		if err != nil {
			return err
		}
		fmt.Printf("\nThe tour is at %s\nOpen it in a browser; it needs no network.\n", res.HTML)
		return nil
	}
	return c
}
