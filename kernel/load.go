package kernel

import (
	"os"
	"path/filepath"

	"github.com/counterpartlab/counterpart/causal"
)

// loadBarFrom is the file size from which Load shows a progress bar.
const loadBarFrom = 16 << 20

// Load is causal.Load with a progress bar (in the cell, or on a terminal)
// for files of 16 MB or more:
//
//	study := kernel.Load("big.csv").Treat("t").Outcome("y").Adjust("a", "b")
//
// In a notebook, where every cell is a new process, the parsed columns are
// kept in the kernel session's folder (GoNB's, removed when the kernel
// stops; see causal.LoadCached): a later cell loading the same file,
// unchanged, reads them instead of parsing, and a propensity fit of the same
// data and specification starts from the previous cell's coefficients. A
// changed file (path, size, modification time or its first and last 64 KiB)
// is parsed again.
func Load(path string) *causal.Study {
	dir := ""
	if IsNotebook() {
		dir = sessionDir()
	}
	fi, err := os.Stat(path)
	if err != nil || fi.Size() < loadBarFrom {
		return causal.LoadCached(path, dir, nil)
	}
	update, finish := Progress("reading " + filepath.Base(path))
	defer finish()
	return causal.LoadCached(path, dir, update)
}
