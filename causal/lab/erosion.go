package lab

import (
	"fmt"
	"math"
	"strconv"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// ErosionGrid sets up the erosion experiment (see [Erosion]).
type ErosionGrid struct {
	Seed       uint64
	Units      int     // units per simulated sample
	MaxDims    int     // covariates x1..xMaxDims, added one at a time
	Shift      float64 // controls live on [Shift, 1+Shift]^d, treated on [0, 1]^d
	Bins       int     // quantile bins per covariate for the cells (0: causal's default)
	Replicates int     // simulated samples averaged (0 means 1)
}

// ErosionRow is one dimension of the erosion experiment, averaged over the
// replicates.
type ErosionRow struct {
	// Dims is the number of covariates adjusted for.
	Dims int `json:"dims"`
	// CellsWithBothArms is the share of units in positivity cells (Bins
	// quantile bins per covariate) that hold both arms: what the data show.
	CellsWithBothArms float64 `json:"cells_with_both_arms"`
	// InSharedBox is the share of units inside the box where both arms have
	// support, [Shift, 1]^d (for Shift ≥ 0): what is true of the sample.
	InSharedBox float64 `json:"in_shared_box"`
	// TrueOverlap is the design value of InSharedBox, (1 − |Shift|)^d.
	TrueOverlap float64 `json:"true_overlap"`
	// BinomialSE is the simulation error of InSharedBox around TrueOverlap:
	// sqrt(p(1 − p)/(Units·Replicates)) with p = TrueOverlap, since each unit
	// falls in the box independently with probability p.
	BinomialSE float64 `json:"binomial_se"`
}

// Erosion simulates Replicates samples of scenario.OverlapBoxes (Units
// units, MaxDims covariates, the given Shift) and, for d = 1..MaxDims,
// returns the share of units in cells with both arms (the erosion curve of
// causal.Study.ErosionWith, covariates added in order x1, x2, …), the share
// inside the shared box and its design value (1 − |Shift|)^d.
//
// Two errors pull the cell share away from the truth: cells straddling the
// edge of the shared box count single-arm units as covered (an
// overstatement that shrinks as Bins grows), and in many dimensions cells
// are so sparse that some lack an arm by chance (an understatement that
// grows with Bins^d).
func Erosion(g ErosionGrid) ([]ErosionRow, error) {
	if err := checkGrid("Erosion", g.Units, g.MaxDims, g.Replicates); err != nil {
		return nil, err
	}
	if err := finiteOr("lab.Erosion: Shift", g.Shift); err != nil {
		return nil, err
	}
	if g.Bins < 0 {
		return nil, fmt.Errorf("lab.Erosion: Bins = %d; give a positive number of bins (0: the default)", g.Bins)
	}
	reps := max(1, g.Replicates)
	both := make([][]float64, reps)
	inside := make([][]float64, reps)
	covs := make([]string, g.MaxDims)
	for j := range covs {
		covs[j] = "x" + strconv.Itoa(j+1)
	}
	lo, hi := math.Max(0, g.Shift), math.Min(1, 1+g.Shift)
	err := parallel(reps, func(r int) error {
		d, err := scenario.OverlapBoxes(sampleSeed(g.Seed, r), g.Units, g.MaxDims, g.Shift)
		if err != nil {
			return fmt.Errorf("lab.Erosion: %w", err)
		}
		e := causal.FromColumns(d.Names, d.Num, d.Str).Treat("t").Adjust(covs...).
			ErosionWith(causal.CellOptions{Bins: g.Bins}, false)
		if e.Err() != nil {
			return fmt.Errorf("lab.Erosion (replicate %d): %w", r+1, e.Err())
		}
		both[r] = make([]float64, g.MaxDims)
		for k, st := range e.Steps {
			both[r][k] = st.ShareBoth
		}
		// Units inside the shared box in the first k dimensions.
		in := make([]int, g.MaxDims)
		for i := 0; i < g.Units; i++ {
			for k, name := range covs {
				x := d.Num[name][i]
				if x < lo || x > hi {
					break
				}
				in[k]++
			}
		}
		inside[r] = make([]float64, g.MaxDims)
		for k := range in {
			inside[r][k] = float64(in[k]) / float64(g.Units)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	rows := make([]ErosionRow, g.MaxDims)
	for k := range rows {
		var b, in float64
		for r := 0; r < reps; r++ {
			b += both[r][k]
			in += inside[r][k]
		}
		p := math.Pow(math.Max(0, 1-math.Abs(g.Shift)), float64(k+1))
		rows[k] = ErosionRow{Dims: k + 1, CellsWithBothArms: b / float64(reps), InSharedBox: in / float64(reps),
			TrueOverlap: p, BinomialSE: math.Sqrt(p * (1 - p) / float64(g.Units*reps))}
	}
	return rows, nil
}
