package lab

import (
	"fmt"
	"math"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// TrimmingGrid sets up the trimming experiment (see [Trimming]).
type TrimmingGrid struct {
	Seed       uint64
	Units      int       // units per simulated sample
	Alphas     []float64 // trimming thresholds: scores kept in [α, 1 − α]
	Replicates int       // simulated samples (0 means 1); every α uses the same samples
	// Slope is the steepness of the true score, expit(Slope·x) (0: 2.5).
	Slope float64
	// Estimator of the ATE on the kept units (0: causal.IPWNormalized).
	Estimator causal.Estimator
}

// TrimmingRow is one threshold α of the trimming experiment over the
// replicates.
type TrimmingRow struct {
	Alpha float64 `json:"alpha"`
	// Mean is the mean estimate over the replicates where one was made.
	Mean float64 `json:"mean"`
	// Bias is Mean minus the population ATE of the whole sample, 3.
	Bias float64 `json:"bias"`
	// SD is the standard deviation of the estimates over the replicates.
	SD float64 `json:"sd"`
	// RMSE is the root mean squared error around 3: sqrt(mean((est − 3)²)).
	RMSE float64 `json:"rmse"`
	// KeptShare is the mean share of units kept.
	KeptShare float64 `json:"kept_share"`
	// KeptEffect is the mean true average effect, 2 + x², of the units kept
	// (known because the data are simulated): the target trimming moves to.
	KeptEffect float64 `json:"kept_effect"`
	// Estimated counts the replicates that gave an estimate at this α.
	Estimated int `json:"estimated"`
}

// Trimming simulates Replicates samples of scenario.SteepScores (effect
// 2 + x², population ATE 3, steep true scores), fits the propensity model
// (logistic in x) once per sample and, for each α, estimates the ATE on the
// units with fitted scores in [α, 1 − α] (causal.Scores.Sweep: symmetric
// trimming, scores refitted on the kept units). It returns, per α, the mean,
// bias, SD and RMSE of the estimates around the full-sample ATE of 3, the
// share of units kept and their true average effect.
//
// Trimming removes the units with extreme weights, so the SD falls; the kept
// units have x nearer 0, where the effect is smaller, so the bias grows
// (Crump, Hotz, Imbens & Mitnik 2009, Biometrika 96(1), 187–199, on the
// trade-off: the trimmed estimate targets the kept population).
func Trimming(g TrimmingGrid) ([]TrimmingRow, error) {
	if err := checkGrid("Trimming", g.Units, len(g.Alphas), g.Replicates); err != nil {
		return nil, err
	}
	for i, a := range g.Alphas {
		if !(a >= 0 && a < 0.5) {
			return nil, fmt.Errorf("lab.Trimming: Alphas[%d] = %v; give thresholds in [0, 0.5)", i, a)
		}
	}
	if err := finiteOr("lab.Trimming: Slope", g.Slope); err != nil {
		return nil, err
	}
	slope := g.Slope
	if slope == 0 {
		slope = 2.5
	}
	est := g.Estimator
	if est == 0 {
		est = causal.IPWNormalized
	}
	reps := max(1, g.Replicates)
	na := len(g.Alphas)
	value, kept, effect, err := trimmingRuns(g, reps, slope, est)
	if err != nil {
		return nil, err
	}
	rows := make([]TrimmingRow, na)
	for k, a := range g.Alphas {
		var m, ks, ke moments
		var sq float64
		for r := 0; r < reps; r++ {
			i := r*na + k
			ks.add(kept[i])
			if !math.IsNaN(effect[i]) {
				ke.add(effect[i])
			}
			if v := value[i]; !math.IsNaN(v) {
				m.add(v)
				sq += (v - scenario.SteepScoresATE) * (v - scenario.SteepScoresATE)
			}
		}
		rows[k] = TrimmingRow{Alpha: a, Mean: m.meanOrNaN(), Bias: m.meanOrNaN() - scenario.SteepScoresATE, SD: m.sd(),
			RMSE: math.Sqrt(sq / float64(max(1, m.n))), KeptShare: ks.mean, KeptEffect: ke.meanOrNaN(), Estimated: m.n}
		if m.n == 0 {
			rows[k].RMSE = math.NaN()
		}
	}
	return rows, nil
}

// trimmingRuns simulates the replicates of the trimming experiment and
// returns, at index r·len(Alphas) + k (replicate r, threshold k), the
// estimate (NaN where none was made), the share of units kept and their
// true average effect.
func trimmingRuns(g TrimmingGrid, reps int, slope float64, est causal.Estimator) (value, kept, effect []float64, err error) {
	na := len(g.Alphas)
	value = make([]float64, reps*na)
	kept = make([]float64, reps*na)
	effect = make([]float64, reps*na)
	err = parallel(reps, func(r int) error {
		d, err := scenario.SteepScores(sampleSeed(g.Seed, r), g.Units, slope)
		if err != nil {
			return fmt.Errorf("lab.Trimming: %w", err)
		}
		sc := causal.FromColumns(d.Names, d.Num, d.Str).Treat("t").Outcome("y").Adjust("x").Propensity()
		sw := sc.Sweep(est, causal.ATE, g.Alphas...)
		if sw.Err() != nil {
			return fmt.Errorf("lab.Trimming (replicate %d): %w", r+1, sw.Err())
		}
		y0, y1 := d.Truth["y0"], d.Truth["y1"]
		for k, a := range g.Alphas {
			i := r*na + k
			value[i] = math.NaN()
			if row := sw.Rows[k]; row.Err == "" && !math.IsNaN(row.Value) {
				value[i] = row.Value
			}
			n, sum := 0, 0.0
			for u, e := range sc.E {
				if e >= a && e <= 1-a {
					n++
					sum += y1[u] - y0[u]
				}
			}
			kept[i] = float64(n) / float64(len(sc.E))
			effect[i] = math.NaN()
			if n > 0 {
				effect[i] = sum / float64(n)
			}
		}
		return nil
	})
	if err != nil {
		return nil, nil, nil, err
	}
	return value, kept, effect, nil
}
