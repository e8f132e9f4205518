package causal

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
)

// BootstrapOptions tune Scores.Bootstrap.
type BootstrapOptions struct {
	// Replicates is the number of bootstrap samples (at least 2; 1000 or
	// more for percentile intervals, Efron & Tibshirani 1993, ch. 13).
	Replicates int
	// Seed makes the replicates reproducible: replicate b draws from its
	// own generator seeded by (Seed, b), so results do not depend on the
	// number of cores or on Workers.
	Seed uint64
	// Progress, when set, is called with the number of replicates finished
	// and the total, from one goroutine at a time, in increasing order,
	// every 1% of the work (at most every 50 replicates) and at the end.
	Progress func(done, total int)
	// Workers is the number of replicates run at once (0: one per core).
	Workers int
}

// Bootstrap is the nonparametric bootstrap distribution of an estimator
// (Efron & Tibshirani 1993): each replicate resamples the n units with
// replacement — as multinomial counts used as frequency weights, so the data
// are never copied — and refits what the estimator uses: the propensity
// model (Newton iterations warm-started from the full-sample coefficients)
// and the outcome models of each arm. The spread of the replicate estimates
// gives the standard error; the intervals are
//
//	percentile:  [q(0.025), q(0.975)] of the replicate estimates
//	normal:      estimate ± 1.96 · SE_boot
//
// (Efron & Tibshirani 1993, ch. 13 and 6). A replicate whose refit fails (a
// resample with one arm missing, a singular outcome model, a propensity fit
// that does not converge because the resample is separated) is counted in
// Failed and left out; the intervals are then conditional on success.
type Bootstrap struct {
	Estimator Estimator
	Estimand  Estimand
	Seed      uint64
	// Estimate is the full-sample estimate.
	Estimate float64
	// Replicates holds the successful replicate estimates in replicate
	// order.
	Replicates []float64
	// Requested, Done (finished, successful or not) and Failed replicates.
	Requested, Done, Failed int
	FailReason              string // the first failure, when any
	// Partial is true when the run was cancelled before every replicate
	// finished; the summaries then use the replicates done.
	Partial bool
	// SE is the standard deviation of the replicate estimates (n − 1 form);
	// Bias is their mean minus Estimate.
	SE, Bias   float64
	Percentile Interval
	Normal     Interval
	Population string
	Notes      []string
	err        error
}

// Err returns why the bootstrap could not run, or nil.
func (b *Bootstrap) Err() error {
	if b == nil {
		return errors.New("nil Bootstrap")
	}
	return b.err
}

// Bootstrap statuses (Bootstrap.Status; "status" in its JSON).
const (
	BootstrapOK      = "ok"      // every replicate requested ran; at least 2 succeeded
	BootstrapPartial = "partial" // cancelled before every replicate ran; at least 2 succeeded
	BootstrapFailed  = "failed"  // it could not run, or fewer than 2 replicates succeeded
)

// Status says whether the bootstrap gave a standard error: BootstrapOK,
// BootstrapPartial or BootstrapFailed, with why it failed (Err's message, or
// how few replicates succeeded and the first failure).
func (b *Bootstrap) Status() (status, why string) {
	if err := b.Err(); err != nil {
		return BootstrapFailed, strings.TrimPrefix(err.Error(), "bootstrap: ")
	}
	if k := len(b.Replicates); k < 2 {
		why = fmt.Sprintf("%d of %d replicates succeeded: no standard error or interval", k, b.Done)
		if b.FailReason != "" {
			why += "; first failure: " + b.FailReason
		}
		return BootstrapFailed, why
	}
	if b.Partial {
		return BootstrapPartial, ""
	}
	return BootstrapOK, ""
}

// Bootstrap runs the bootstrap of the estimator for the estimand. It stops
// early when ctx is cancelled and returns what was done, marked Partial.
func (sc *Scores) Bootstrap(ctx context.Context, est Estimator, target Estimand, o BootstrapOptions) *Bootstrap {
	nan := math.NaN()
	bs := &Bootstrap{Estimator: est, Estimand: target, Seed: o.Seed, Requested: o.Replicates, Estimate: nan, SE: nan, Bias: nan,
		Percentile: Interval{nan, nan}, Normal: Interval{nan, nan}, Population: target.population()}
	if err := sc.Err(); err != nil {
		bs.err = err
		return bs
	}
	if err := checkEstimator(est, target); err != nil {
		bs.err = err
		return bs
	}
	if o.Replicates < 2 {
		bs.err = fmt.Errorf("bootstrap: %d replicates requested: ask for at least 2 (1000 or more for percentile intervals)", o.Replicates)
		return bs
	}
	if ctx == nil {
		ctx = context.Background()
	}
	d := sc.Design
	if d.Y == nil {
		bs.err = settingErr("Outcome", "column", "bootstrap: no outcome: set one with ", "")
		return bs
	}
	full, err := evaluate(sc, est, target, nil, nil, nil, false)
	if err != nil {
		bs.err = fmt.Errorf("bootstrap: the full-sample estimate fails: %w", err)
		return bs
	}
	bs.Estimate = full.value
	rp := newReplicator(sc, est, target, o.Seed)

	workers := o.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, o.Replicates)
	// Results are kept per worker (memory grows with the replicates done,
	// not with the number requested) and put in replicate order at the end.
	type result struct {
		b   int
		v   float64
		err error
	}
	results := make([][]result, workers)
	var next atomic.Int64
	var mu sync.Mutex
	done := 0
	step := min(max(1, o.Replicates/100), 50)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			ws := rp.workspace()
			for {
				if ctx.Err() != nil {
					return
				}
				b := int(next.Add(1) - 1)
				if b >= o.Replicates {
					return
				}
				v, err := rp.safeRun(b, ws)
				results[w] = append(results[w], result{b, v, err})
				mu.Lock()
				done++
				if o.Progress != nil && (done%step == 0 || done == o.Replicates) {
					o.Progress(done, o.Replicates)
				}
				mu.Unlock()
			}
		}(w)
	}
	wg.Wait()
	var all []result
	for _, r := range results {
		all = append(all, r...)
	}
	sort.Slice(all, func(i, j int) bool { return all[i].b < all[j].b })
	for _, r := range all {
		bs.Done++
		if r.err != nil {
			bs.Failed++
			if bs.FailReason == "" {
				bs.FailReason = fmt.Sprintf("replicate %d: %v", r.b, r.err)
			}
			continue
		}
		bs.Replicates = append(bs.Replicates, r.v)
	}
	bs.Partial = bs.Done < o.Replicates
	if bs.Partial {
		bs.Notes = append(bs.Notes, fmt.Sprintf("PARTIAL: cancelled after %d of %d replicates; the summaries use the replicates done", bs.Done, o.Replicates))
	}
	bs.summarise()
	if bs.Failed > 0 {
		bs.Notes = append(bs.Notes, fmt.Sprintf("%d replicate%s failed and %s left out (the intervals are conditional on success); first: %s",
			bs.Failed, plural(bs.Failed, "", "s"), plural(bs.Failed, "is", "are"), bs.FailReason))
	}
	return bs
}

func (bs *Bootstrap) summarise() {
	k := len(bs.Replicates)
	if k < 2 {
		bs.Notes = append(bs.Notes, fmt.Sprintf("only %d successful replicate%s: no standard error or interval", k, plural(k, "", "s")))
		return
	}
	var s float64
	for _, v := range bs.Replicates {
		s += v
	}
	m := s / float64(k)
	var q float64
	for _, v := range bs.Replicates {
		q += (v - m) * (v - m)
	}
	bs.SE = math.Sqrt(q / float64(k-1))
	bs.Bias = m - bs.Estimate
	sorted := append([]float64(nil), bs.Replicates...)
	sort.Float64s(sorted)
	bs.Percentile = Interval{quantileSorted(sorted, 0.025), quantileSorted(sorted, 0.975)}
	bs.Normal = Interval{bs.Estimate - z975*bs.SE, bs.Estimate + z975*bs.SE}
	if k < 1000 {
		bs.Notes = append(bs.Notes, fmt.Sprintf("%d replicates: percentile limits are noisy below about 1000 (Efron & Tibshirani 1993)", k))
	}
}

// replicator holds what every replicate shares: the design, the
// full-sample fit to warm-start from, and, when the full-sample fit pinned
// separated units at scores 0 or 1, the columns still estimated.
type replicator struct {
	sc     *Scores
	est    Estimator
	target Estimand
	seed   uint64
	// Propensity refit: design columns with a finite full-sample estimate;
	// X itself when every column is free, else a copy of the free columns
	// (made once, not per replicate).
	xp     []float64
	pp     int
	start  []float64
	pinned []bool // units whose score stays at the full-sample 0 or 1
	npin   int
	scale  []float64 // RMS of the columns of xp (conditioning of the solves)
}

func newReplicator(sc *Scores, est Estimator, target Estimand, seed uint64) *replicator {
	rp := &replicator{sc: sc, est: est, target: target, seed: seed}
	if !est.usesScores() {
		return rp
	}
	d := sc.Design
	var free []int
	for j := 0; j < d.P; j++ {
		if v := sc.cov[j*d.P+j]; !math.IsNaN(v) && !math.IsInf(v, 0) {
			free = append(free, j)
		}
	}
	rp.pinned = make([]bool, d.N)
	for i, e := range sc.E {
		if e == 0 || e == 1 {
			rp.pinned[i] = true
			rp.npin++
		}
	}
	rp.pp = len(free)
	rp.start = make([]float64, rp.pp)
	for a, j := range free {
		rp.start[a] = sc.beta[j]
	}
	rp.scale = make([]float64, rp.pp)
	for a, j := range free {
		rp.scale[a] = rmsCol(d, j)
		if rp.scale[a] == 0 {
			rp.scale[a] = 1
		}
	}
	if rp.pp == d.P {
		rp.xp = d.X
	} else {
		rp.xp = make([]float64, d.N*rp.pp)
		for i := 0; i < d.N; i++ {
			for a, j := range free {
				rp.xp[i*rp.pp+a] = d.X[i*d.P+j]
			}
		}
	}
	return rp
}

type bootWorkspace struct {
	fw, fwp []float64
	e, mu   []float64
	delta   []float64
}

func (rp *replicator) workspace() *bootWorkspace {
	n := rp.sc.Design.N
	ws := &bootWorkspace{fw: make([]float64, n)}
	if rp.est.usesScores() {
		ws.e = make([]float64, n)
		ws.mu = make([]float64, n)
		ws.delta = make([]float64, rp.pp)
		if rp.npin > 0 {
			ws.fwp = make([]float64, n)
		}
	}
	return ws
}

// replicateRand is the generator of replicate b: ChaCha8 keyed by the seed
// and the replicate index, so every replicate has its own stream.
func replicateRand(seed uint64, b int) *rand.Rand {
	var key [32]byte
	binary.LittleEndian.PutUint64(key[0:], seed)
	binary.LittleEndian.PutUint64(key[8:], uint64(b))
	copy(key[16:], "counterpart/boot")
	return rand.New(rand.NewChaCha8(key))
}

// safeRun is run with a panic turned into a failed replicate (nothing
// panics out of the public API).
func (rp *replicator) safeRun(b int, ws *bootWorkspace) (v float64, err error) {
	defer func() {
		if r := recover(); r != nil {
			v, err = 0, fmt.Errorf("internal error: %v", r)
		}
	}()
	return rp.run(b, ws)
}

// run computes replicate b.
func (rp *replicator) run(b int, ws *bootWorkspace) (float64, error) {
	sc := rp.sc
	d := sc.Design
	n := d.N
	r := replicateRand(rp.seed, b)
	fw := ws.fw
	clear(fw)
	for k := 0; k < n; k++ {
		fw[r.IntN(n)]++
	}
	var n1 float64
	for i, f := range fw {
		n1 += f * d.T[i]
	}
	if n1 == 0 || n1 == float64(n) {
		return 0, errors.New("the resample has units of one arm only")
	}
	var e []float64
	var score func(i int) float64
	var err error
	if rp.est.usesScores() {
		fwp := fw
		if rp.npin > 0 {
			fwp = ws.fwp
			for i, f := range fw {
				if rp.pinned[i] {
					fwp[i] = 0
				} else {
					fwp[i] = f
				}
			}
		}
		// Warm start at the full-sample β, whose fitted probabilities are
		// the full-sample scores: the first Newton pass needs no exp.
		o := sc.opts
		o.lean, o.stepTol, o.startMu, o.scale, o.muOut = true, 1e-4, sc.E, rp.scale, ws.mu
		fit, err := fitLogistic(rp.xp, n, rp.pp, d.T, fwp, rp.start, o)
		if err != nil {
			return 0, fmt.Errorf("propensity refit: %w", err)
		}
		if !fit.converged {
			return 0, fmt.Errorf("propensity refit did not converge in %d iterations (separation in the resample?)", fit.iterations)
		}
		// Scores where they are used (fw > 0); pinned units keep 0 or 1.
		// From μ at the last evaluated β and the final step Δ (below 1e-4
		// in scaled units): e = μ + μ(1 − μ)·x'Δ, exact to O(|x'Δ|²).
		delta := ws.delta
		for j := range delta {
			delta[j] = fit.beta[j] - fit.muBeta[j]
		}
		mu := ws.mu
		score = func(i int) float64 {
			if rp.npin > 0 && rp.pinned[i] {
				return sc.E[i]
			}
			row := rp.xp[i*rp.pp : (i+1)*rp.pp]
			dl := delta[:len(row)]
			var s float64
			for j, v := range row {
				s += v * dl[j]
			}
			m := mu[i]
			return m + m*(1-m)*s
		}
		if rp.est != AIPW {
			e = ws.e
			for i, f := range fw {
				if f == 0 {
					e[i] = 0.5 // unused: the unit is not in the resample
				} else {
					e[i] = score(i)
				}
			}
		}
	}
	var oc *outcomes
	if rp.est.usesOutcomeModels() {
		m1, m0, err := outcomeModels(d, fw, false)
		if err != nil {
			return 0, err
		}
		oc = &outcomes{m1: m1, m0: m0}
	}
	var out estOut
	if rp.est == AIPW {
		// Scores computed in the same pass, each unit's own-arm prediction only.
		out = aipwFromModels(d, score, oc.m1, oc.m0, rp.target, fw)
	} else if out, err = evaluate(sc, rp.est, rp.target, e, oc, fw, false); err != nil {
		return 0, err
	}
	if math.IsNaN(out.value) || math.IsInf(out.value, 0) {
		return 0, errors.New("the replicate estimate is not finite")
	}
	return out.value, nil
}

// String is the terminal view.
func (b *Bootstrap) String() string {
	if err := b.Err(); err != nil {
		return "bootstrap: " + err.Error()
	}
	var s strings.Builder
	fmt.Fprintf(&s, "Bootstrap of %s %s: %d of %d replicates (seed %d)\n", b.Estimator, b.Estimand, len(b.Replicates), b.Requested, b.Seed)
	fmt.Fprintf(&s, "  estimate %s; bootstrap SE %s; bias %s\n", fmtG(b.Estimate), fmtG(b.SE), fmtG(b.Bias))
	fmt.Fprintf(&s, "  95%% percentile interval [%s, %s]; 95%% normal interval [%s, %s]\n", fmtG(b.Percentile.Lo), fmtG(b.Percentile.Hi), fmtG(b.Normal.Lo), fmtG(b.Normal.Hi))
	fmt.Fprintf(&s, "  each replicate resamples units (multinomial weights) and refits %s (Efron & Tibshirani 1993)\n", b.refits())
	for _, n := range b.Notes {
		fmt.Fprintf(&s, "  note: %s\n", n)
	}
	return s.String()
}

func (b *Bootstrap) refits() string {
	switch {
	case b.Estimator.usesScores() && b.Estimator.usesOutcomeModels():
		return "the propensity model and both outcome models"
	case b.Estimator.usesScores():
		return "the propensity model"
	case b.Estimator.usesOutcomeModels():
		return "both outcome models"
	}
	return "nothing (the estimator has no model)"
}

// MarshalJSON is the pipeline view: summaries and a 30-bin histogram of
// the replicate estimates (bounded size).
func (b *Bootstrap) MarshalJSON() ([]byte, error) {
	if b == nil {
		return failedJSON(b.Err())
	}
	if err := b.err; err != nil {
		// What was asked for, with why it failed: the section stays in a report.
		return json.Marshal(struct {
			Status    string `json:"status"`
			Error     string `json:"error"`
			Estimator string `json:"estimator"`
			Estimand  string `json:"estimand"`
			Requested int    `json:"replicates_requested"`
			Seed      uint64 `json:"seed"`
		}{"failed", strings.TrimPrefix(err.Error(), "bootstrap: "), b.Estimator.String(), b.Estimand.String(), b.Requested, b.Seed})
	}
	type bin struct {
		Lo    float64 `json:"lo"`
		Hi    float64 `json:"hi"`
		Count int     `json:"count"`
	}
	var hist []bin
	if len(b.Replicates) > 1 {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range b.Replicates {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		k := 30
		if hi == lo {
			hi = lo + 1
		}
		hist = make([]bin, k)
		for i := range hist {
			hist[i] = bin{lo + (hi-lo)*float64(i)/float64(k), lo + (hi-lo)*float64(i+1)/float64(k), 0}
		}
		for _, v := range b.Replicates {
			i := min(k-1, int((v-lo)/(hi-lo)*float64(k)))
			hist[i].Count++
		}
	}
	ci := func(iv Interval) *[2]Num {
		if math.IsNaN(iv.Lo) {
			return nil
		}
		return &[2]Num{Num(iv.Lo), Num(iv.Hi)}
	}
	status, why := b.Status()
	return json.Marshal(struct {
		Status     string   `json:"status"`
		Error      string   `json:"error,omitempty"`
		Estimator  string   `json:"estimator"`
		Estimand   string   `json:"estimand"`
		Estimate   Num      `json:"estimate"`
		SE         Num      `json:"se"`
		SEMethod   string   `json:"se_method"`
		Bias       Num      `json:"bias"`
		Percentile *[2]Num  `json:"percentile_ci95"`
		Normal     *[2]Num  `json:"normal_ci95"`
		Requested  int      `json:"replicates_requested"`
		Done       int      `json:"replicates_done"`
		Failed     int      `json:"replicates_failed"`
		Partial    bool     `json:"partial"`
		Seed       uint64   `json:"seed"`
		Refits     string   `json:"refits"`
		Notes      []string `json:"notes"`
		Histogram  []bin    `json:"histogram"`
	}{status, why, b.Estimator.String(), b.Estimand.String(), Num(b.Estimate), Num(b.SE), "bootstrap", Num(b.Bias), ci(b.Percentile), ci(b.Normal),
		b.Requested, b.Done, b.Failed, b.Partial, b.Seed, b.refits(), append([]string{}, b.Notes...), hist})
}
