package causal

import (
	"errors"
	"fmt"
	"strings"
)

// ErosionStep is the overlap left after adjusting for the covariates up to
// and including Added.
type ErosionStep struct {
	Added string `json:"added"`
	Cells int    `json:"cells"` // non-empty cells
	// Share of all units in cells where both arms are present.
	ShareBoth float64 `json:"share_both"`
	// Share of treated units in cells that have controls (what ATT needs),
	// and of controls in cells that have treated units (what ATC needs).
	TreatedCovered float64 `json:"treated_covered"`
	ControlCovered float64 `json:"control_covered"`
	Violating      int     `json:"violating_cells"`
}

// Erosion shows how common support shrinks as covariates are added one at a
// time: the more one adjusts for (to make unconfoundedness plausible), the
// fewer units sit in cells where both arms are present. Each step uses the
// cells of CellOptions (default 5 quantile bins).
type Erosion struct {
	Order   []string
	Steps   []ErosionStep
	Greedy  bool
	Options CellOptions
	err     error
}

// Err returns why the curve could not be computed, or nil.
func (e *Erosion) Err() error {
	if e == nil {
		return errors.New("nil Erosion")
	}
	return e.err
}

// Erosion adds the named covariates in the order given (default: the
// Study's covariates in their order).
func (s *Study) Erosion(columns ...string) *Erosion {
	return s.ErosionWith(CellOptions{}, false, columns...)
}

// ErosionGreedy picks, at each step, the covariate that keeps the largest
// share of units in cells with both arms (from the named columns, default
// the Study's covariates).
func (s *Study) ErosionGreedy(columns ...string) *Erosion {
	return s.ErosionWith(CellOptions{}, true, columns...)
}

// ErosionWith is Erosion with cell options and an optional greedy order.
func (s *Study) ErosionWith(o CellOptions, greedy bool, columns ...string) *Erosion {
	d, err := s.Design()
	if err != nil {
		return &Erosion{err: err}
	}
	if len(columns) == 0 {
		columns = s.covariates
	}
	if len(columns) == 0 {
		return &Erosion{err: settingErr("Adjust", "", "erosion: no covariates: set them with ", " or name columns")}
	}
	o = o.withDefaults()
	codes, cuts, err := discretizeAll(s, d, columns, o.Bins, "erosion")
	if err != nil {
		return &Erosion{err: err}
	}
	sizes := make([]int, len(columns))
	for j := range cuts {
		sizes[j] = len(cuts[j].Labels)
	}
	e := &Erosion{Greedy: greedy, Options: o}
	// key holds the cell of each row for the covariates chosen so far,
	// renumbered densely after every step.
	key := make([]int64, d.N)
	used := make([]bool, len(columns))
	for step := 0; step < len(columns); step++ {
		best := -1
		var bestStep ErosionStep
		var bestKey []int64
		for j := range columns {
			if used[j] || (!greedy && j != step) {
				continue
			}
			nk, st := erosionStep(d, key, codes[j], int64(sizes[j]))
			st.Added = columns[j]
			if best < 0 || st.ShareBoth > bestStep.ShareBoth {
				best, bestStep, bestKey = j, st, nk
			}
		}
		used[best] = true
		key = bestKey
		e.Order = append(e.Order, columns[best])
		e.Steps = append(e.Steps, bestStep)
	}
	return e
}

// erosionStep refines the cells key by one more coded covariate and
// measures overlap. The refined keys are renumbered 0..cells−1.
func erosionStep(d *Design, key []int64, codes []int32, size int64) ([]int64, ErosionStep) {
	raw := make([]int64, d.N)
	for i := range raw {
		raw[i] = key[i]*size + int64(codes[i])
	}
	dense := map[int64]int64{}
	nk := make([]int64, d.N)
	for i, k := range raw {
		v, ok := dense[k]
		if !ok {
			v = int64(len(dense))
			dense[k] = v
		}
		nk[i] = v
	}
	n1 := make([]int, len(dense))
	n0 := make([]int, len(dense))
	for i, k := range nk {
		if d.T[i] == 1 {
			n1[k]++
		} else {
			n0[k]++
		}
	}
	st := ErosionStep{Cells: len(dense)}
	var both, tc, cc int
	for k := range n1 {
		if n1[k] > 0 && n0[k] > 0 {
			both += n1[k] + n0[k]
			tc += n1[k]
			cc += n0[k]
		} else {
			st.Violating++
		}
	}
	st.ShareBoth = float64(both) / float64(d.N)
	st.TreatedCovered = float64(tc) / float64(d.Treated)
	st.ControlCovered = float64(cc) / float64(d.Control)
	return nk, st
}

// String is the terminal view.
func (e *Erosion) String() string {
	if err := e.Err(); err != nil {
		return "erosion: " + err.Error()
	}
	var b strings.Builder
	order := "as given"
	if e.Greedy {
		order = "greedy: the covariate keeping most overlap first"
	}
	fmt.Fprintf(&b, "Dimensional erosion of overlap (%s; %d bins for continuous covariates)\n", order, e.Options.Bins)
	fmt.Fprintf(&b, "  %-3s %-24s %8s %12s %16s %16s\n", "k", "+ covariate", "cells", "both arms", "treated w/ ctrl", "ctrl w/ treated")
	for k, s := range e.Steps {
		fmt.Fprintf(&b, "  %-3d %-24s %8d %11.1f%% %15.1f%% %15.1f%%\n", k+1, s.Added, s.Cells, 100*s.ShareBoth, 100*s.TreatedCovered, 100*s.ControlCovered)
	}
	return b.String()
}
