package lab

import (
	"fmt"
	"math"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// ExtrapolationGrid sets up the extrapolation experiment (see [Extrapolation]).
type ExtrapolationGrid struct {
	Seed        uint64
	Units       int       // units per simulated sample
	Separations []float64 // distances between the arms' centres, in SDs
	Replicates  int       // simulated samples per separation (0 means 1)
}

// ExtrapolationRow is one separation of the extrapolation experiment,
// averaged over the replicates.
type ExtrapolationRow struct {
	Separation float64 `json:"separation"`
	// Estimate is the mean regression-adjustment estimate of the ATE.
	Estimate float64 `json:"estimate"`
	// Error is Estimate minus the true ATE, 2.
	Error float64 `json:"error"`
	// ErrorSE is the simulation error of Error: the SD of the estimates
	// over the replicates divided by sqrt(Replicates); NaN for one replicate.
	ErrorSE float64 `json:"error_se"`
	// RMSE is the root mean squared error of the estimates around 2.
	RMSE float64 `json:"rmse"`
	// OutsideShare is the mean share of the counterfactual predictions
	// (f1 for the controls, f0 for the treated) made at an x outside the
	// observed range of the arm the model was fitted on.
	OutsideShare float64 `json:"outside_share"`
	Replicates   int     `json:"replicates"`
}

// Extrapolation simulates, for each separation, Replicates samples of
// scenario.Extrapolation (one covariate x, the arms centred at
// ±separation/2, a curved outcome, a constant effect of 2), estimates the
// ATE by regression adjustment (a linear outcome model per arm), and
// returns the mean estimate, its error, the simulation error, the RMSE, and
// the share of predictions made outside the fitting arm's data
// (causal.Scores.Extrapolation).
//
// At separation 0 the design is randomised and regression adjustment is
// consistent (Lin 2013, Annals of Applied Statistics 7(1), 295–318), so the
// error is 0 up to simulation error; as the arms move apart, each straight
// line is carried further from its data and the error grows.
func Extrapolation(g ExtrapolationGrid) ([]ExtrapolationRow, error) {
	if err := checkGrid("Extrapolation", g.Units, len(g.Separations), g.Replicates); err != nil {
		return nil, err
	}
	for i, s := range g.Separations {
		if math.IsNaN(s) || math.IsInf(s, 0) || s < 0 {
			return nil, fmt.Errorf("lab.Extrapolation: Separations[%d] = %v; give distances >= 0", i, s)
		}
	}
	reps := max(1, g.Replicates)
	est := make([]float64, len(g.Separations)*reps)
	out := make([]float64, len(est))
	err := parallel(len(est), func(k int) error {
		sep := g.Separations[k/reps]
		d, err := scenario.Extrapolation(sampleSeed(g.Seed, k), g.Units, sep)
		if err != nil {
			return fmt.Errorf("lab.Extrapolation: %w", err)
		}
		sc := causal.FromColumns(d.Names, d.Num, d.Str).Treat("t").Outcome("y").Adjust("x").Propensity()
		ex := sc.Extrapolation(causal.ATE)
		if ex.Err() != nil {
			return fmt.Errorf("lab.Extrapolation (separation %g, replicate %d): %w", sep, k%reps+1, ex.Err())
		}
		if err := ex.Full.Err(); err != nil {
			return fmt.Errorf("lab.Extrapolation (separation %g, replicate %d): %w", sep, k%reps+1, err)
		}
		est[k] = ex.Full.Value
		outside, preds := 0, 0
		for _, m := range ex.Models {
			outside += m.OutsideRange
			preds += m.Predictions
		}
		out[k] = float64(outside) / float64(max(1, preds))
		return nil
	})
	if err != nil {
		return nil, err
	}
	rows := make([]ExtrapolationRow, len(g.Separations))
	for i, sep := range g.Separations {
		var m, o moments
		var sq float64
		for r := 0; r < reps; r++ {
			v := est[i*reps+r]
			m.add(v)
			o.add(out[i*reps+r])
			sq += (v - scenario.ExtrapolationEffect) * (v - scenario.ExtrapolationEffect)
		}
		rows[i] = ExtrapolationRow{Separation: sep, Estimate: m.mean, Error: m.mean - scenario.ExtrapolationEffect,
			ErrorSE: m.sd() / math.Sqrt(float64(reps)), RMSE: math.Sqrt(sq / float64(reps)), OutsideShare: o.mean, Replicates: reps}
	}
	return rows, nil
}
