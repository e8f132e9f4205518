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
func Load(path string) *causal.Study {
	fi, err := os.Stat(path)
	if err != nil || fi.Size() < loadBarFrom {
		return causal.Load(path)
	}
	update, finish := Progress("reading " + filepath.Base(path))
	defer finish()
	return causal.LoadProgress(path, update)
}
