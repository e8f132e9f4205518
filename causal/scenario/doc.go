// Package scenario generates the simulated data sets that counterpart uses for
// its demos, notebooks and tests: scenarios of our own, each with a known
// data-generating process (DGP), so that the true effects are known exactly.
//
// Every generator takes a seed and is deterministic: it draws from
// math/rand/v2's PCG generator, rand.NewPCG(seed, c), with a constant c of its
// own, in one goroutine, so the same seed gives the same values whatever the
// number of cores. Stored values are rounded to a fixed number of decimals
// (see each generator), so that last-bit differences between the
// floating-point libraries of different processors do not reach the data or
// the CSV bytes (they could only show at an exact rounding tie).
//
// The generators:
//
//   - [WaterAudits]: the tour scenario, a utility's free home water audits,
//     with deliberate positivity problems and heterogeneous effects.
//   - [OverlapBoxes]: uniform boxes that overlap partly in every dimension,
//     to show how common support erodes as dimensions are added.
//   - [Extrapolation]: one covariate, separated arms and a curved outcome, to
//     show what a per-arm linear outcome model does outside common support.
//   - [KangSchafer]: a treatment-effect version of the Kang and Schafer (2007)
//     design, with correctly and wrongly specified covariates.
//   - [RandomisedSimple]: a well-behaved randomised design with a known ATE,
//     for coverage simulations.
//   - [SteepScores]: steep true scores and an effect that grows away from
//     the centre, to show what trimming extreme scores gains and costs.
//
// Each returns a [Data] value: named columns (numbers or strings), the true
// sample ATE and ATT, per-unit true quantities that only a simulation knows
// (propensity, potential outcomes), and notes describing the DGP.
//
// Simulated data show how the diagnostics behave when the truth is known.
// They say nothing about any real utility, household or population.
package scenario
