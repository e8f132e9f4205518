// Package lab runs the teaching experiments of counterpart's methods lab
// over a parameter grid and returns their results as rows, ready to draw
// (widgets.Series) or to print: the erosion of overlap with dimension, the
// extrapolation of outcome models across separated supports, and the
// bias–variance trade-off of trimming.
//
// Each experiment simulates data with a generator of causal/scenario and
// analyses it with package causal. It lives in a package of its own because
// causal's own tests use causal/scenario, so causal/scenario cannot import
// causal.
//
// Every simulated sample gets its own seed, derived from the grid's Seed and
// the sample's index (grid point, replicate) alone, and samples run in
// parallel on GOMAXPROCS workers, each writing its own slot; the slots are
// then reduced in index order. The rows therefore do not depend on the
// number of cores or on the order in which samples finish.
//
// Simulated data show how the methods behave when the truth is known. They
// cannot verify unconfoundedness in real data, where estimates depend on the
// covariates measured.
package lab

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
)

// maxSamples bounds the simulated samples of one call (grid points times
// replicates), so that a mistyped grid gives an error rather than hours of
// work.
const maxSamples = 100_000

// sampleSeed derives the seed of sample k from the grid's seed with the
// SplitMix64 finaliser (Steele, Lea & Flood 2014, "Fast splittable
// pseudorandom number generators", OOPSLA; the constants are those of
// Vigna's public-domain splitmix64.c, recalled from memory), so
// neighbouring k give unrelated seeds.
func sampleSeed(seed uint64, k int) uint64 {
	z := seed + 0x9e3779b97f4a7c15*uint64(k+1)
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// parallel runs work(0..n−1) on up to GOMAXPROCS goroutines and returns the
// error of the lowest index that failed (so the error, too, does not depend
// on scheduling). A panic in work is returned as an error of that index.
func parallel(n int, work func(i int) error) error {
	if n <= 0 {
		return nil
	}
	errs := make([]error, n)
	var next atomic.Int64
	workers := max(1, min(runtime.GOMAXPROCS(0), n))
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				errs[i] = guarded(i, work)
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

func guarded(i int, work func(int) error) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("sample %d failed: %v", i, r)
		}
	}()
	return work(i)
}

// checkGrid validates the sizes shared by every experiment; field names are
// those of the grid struct, so the message says what to change.
func checkGrid(exp string, units, points, replicates int) error {
	if units < 10 {
		return fmt.Errorf("lab.%s: Units = %d; give at least 10 units per simulated sample", exp, units)
	}
	if points < 1 {
		return fmt.Errorf("lab.%s: the grid is empty; give at least one value to try", exp)
	}
	if replicates < 0 {
		return fmt.Errorf("lab.%s: Replicates = %d; give a positive number (0 means 1)", exp, replicates)
	}
	if total := points * max(1, replicates); total > maxSamples || total/max(1, replicates) != points {
		return fmt.Errorf("lab.%s: %d grid points × %d replicates is more than %d simulated samples; use fewer", exp, points, max(1, replicates), maxSamples)
	}
	return nil
}

// moments accumulates a mean and a variance (Welford's update).
type moments struct {
	n    int
	mean float64
	m2   float64
}

func (m *moments) add(x float64) {
	m.n++
	d := x - m.mean
	m.mean += d / float64(m.n)
	m.m2 += d * (x - m.mean)
}

// sd is the sample standard deviation (n − 1 denominator); NaN for n < 2.
func (m moments) sd() float64 {
	if m.n < 2 {
		return math.NaN()
	}
	return math.Sqrt(m.m2 / float64(m.n-1))
}

func (m moments) meanOrNaN() float64 {
	if m.n == 0 {
		return math.NaN()
	}
	return m.mean
}

func finiteOr(what string, v float64) error {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return errors.New(what + " is not a finite number; give a finite value")
	}
	return nil
}
