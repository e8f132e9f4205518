// Package jupyter installs the counterpart notebook kernel and executes
// notebooks headless through Jupyter. It backs the setup, run and demo
// commands of kernel/cmd/counterpart.
package jupyter

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"

	"golang.org/x/mod/modfile"
)

// ModulePath is the import path of this module.
const ModulePath = "github.com/counterpartlab/counterpart"

// DefaultKernelName is the kernelspec name setup installs and run uses.
const DefaultKernelName = "counterpart"

// DefaultDisplayName is the kernel's name in Jupyter's menus.
const DefaultDisplayName = "Go · counterpart"

// The commands that install what is missing, named in error messages.
const (
	aptJupyter = "apt-get update && apt-get install -y jupyter-notebook jupyter-nbconvert python3-nbclient jupyter-client"
	aptNpm     = "apt-get update && apt-get install -y npm"
)

// debianJupyter is Debian's jupyter, which runs on the system python3 that
// has nbformat and nbclient; the python3 first on PATH may lack them.
const debianJupyter = "/usr/bin/jupyter"

// findJupyter returns the jupyter command to use.
func findJupyter() (string, error) {
	if fi, err := os.Stat(debianJupyter); err == nil && !fi.IsDir() {
		return debianJupyter, nil
	}
	if p, err := exec.LookPath("jupyter"); err == nil {
		return p, nil
	}
	return "", fmt.Errorf("jupyter not found: %s", aptJupyter)
}

// findGo returns the go command.
func findGo() (string, error) {
	if p, err := exec.LookPath("go"); err == nil {
		return p, nil
	}
	if p := filepath.Join(runtime.GOROOT(), "bin", "go"); fileExists(p) {
		return p, nil
	}
	return "", errors.New("go not found on PATH: install Go 1.26 or newer and put its bin folder on PATH (Debian: apt-get install -y golang-go, if its version is recent enough)")
}

func findNpm() (string, error) {
	if p, err := exec.LookPath("npm"); err == nil {
		return p, nil
	}
	return "", fmt.Errorf("npm not found (needed once, to fetch ECharts %s): %s", "5.6.0", aptNpm)
}

func fileExists(p string) bool {
	fi, err := os.Stat(p)
	return err == nil && !fi.IsDir()
}

// output runs a command and returns its standard output; on failure the
// error carries the tail of its standard error.
func output(ctx context.Context, dir string, env []string, name string, args ...string) ([]byte, error) {
	cmd := exec.CommandContext(ctx, name, args...)
	cmd.Dir = dir
	if env != nil {
		cmd.Env = env
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return out, fmt.Errorf("%s %s: %v\n%s", filepath.Base(name), strings.Join(args, " "), err, tail(stderr.String(), 30))
	}
	return out, nil
}

// tail returns the last n lines of s.
func tail(s string, n int) string {
	s = strings.TrimRight(s, "\n")
	lines := strings.Split(s, "\n")
	if len(lines) > n {
		lines = append([]string{"..."}, lines[len(lines)-n:]...)
	}
	return strings.Join(lines, "\n")
}

// FindModuleRoot returns the folder of this module's go.mod: start (or a
// parent of it) when it lies inside the checkout, else the checkout this
// program was built from, when it is still on disk.
func FindModuleRoot(start string) (string, error) {
	if start != "" {
		if root, ok := walkUp(start); ok {
			return root, nil
		}
	}
	// The source folder this binary was compiled from (absent with -trimpath).
	if _, file, _, ok := runtime.Caller(0); ok && filepath.IsAbs(file) {
		if root, ok := walkUp(filepath.Dir(file)); ok {
			return root, nil
		}
	}
	return "", fmt.Errorf("cannot find the %s checkout from %s: run inside it or pass --repo /path/to/checkout", ModulePath, start)
}

func walkUp(dir string) (string, bool) {
	dir, err := filepath.Abs(dir)
	if err != nil {
		return "", false
	}
	for {
		if f, err := readModFile(dir); err == nil && f.Module != nil && f.Module.Mod.Path == ModulePath {
			return dir, true
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			return "", false
		}
		dir = parent
	}
}

func readModFile(dir string) (*modfile.File, error) {
	p := filepath.Join(dir, "go.mod")
	data, err := os.ReadFile(p)
	if err != nil {
		return nil, err
	}
	return modfile.Parse(p, data, nil)
}

// requiredVersion returns the version go.mod requires of module path.
func requiredVersion(f *modfile.File, path string) (string, error) {
	for _, r := range f.Require {
		if r.Mod.Path == path {
			return r.Mod.Version, nil
		}
	}
	return "", fmt.Errorf("go.mod does not require %s: add it with `go get -tool %s`", path, path)
}
