package causal

import (
	"context"
	"encoding/json"
	"math"
	"runtime"
	"strings"
	"testing"
)

// Replicates use their own generator per (seed, index): the same results
// for any number of workers or cores.
func TestBootstrapIndependentOfCores(t *testing.T) {
	sc := nswStudy().Propensity()
	run := func(workers int) *Bootstrap {
		bs := sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: 40, Seed: 7, Workers: workers})
		if bs.Err() != nil || bs.Failed > 0 {
			t.Fatal(bs.Err(), bs.FailReason)
		}
		return bs
	}
	a := run(1)
	b := run(3)
	prev := runtime.GOMAXPROCS(1)
	c := run(0)
	runtime.GOMAXPROCS(prev)
	for i := range a.Replicates {
		if a.Replicates[i] != b.Replicates[i] || a.Replicates[i] != c.Replicates[i] {
			t.Fatalf("replicate %d differs: %v %v %v", i, a.Replicates[i], b.Replicates[i], c.Replicates[i])
		}
	}
	if a.SE != c.SE || a.Percentile != c.Percentile {
		t.Error("summaries differ across core counts")
	}
	if d := run(2); d.Replicates[0] == sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: 2, Seed: 8}).Replicates[0] {
		t.Error("different seeds give the same first replicate")
	}
}

// A replicate with multinomial counts as frequency weights equals the
// estimator on the resampled data written out row by row (each unit
// repeated count times) with every model refitted from scratch.
func TestBootstrapReplicateIsResampledData(t *testing.T) {
	s := nswStudy()
	sc := s.Propensity()
	d := sc.Design
	for _, est := range []Estimator{AIPW, IPWNormalized, IPW, OverlapWeighted, RegressionAdjustment, DifferenceInMeans} {
		target := ATE
		if est == OverlapWeighted {
			target = ATO
		}
		rp := newReplicator(sc, est, target, 3)
		ws := rp.workspace()
		got, err := rp.run(5, ws)
		if err != nil {
			t.Fatal(err)
		}
		// Materialise the resample.
		num := map[string][]float64{}
		names := append(append([]string{}, nswCovariates...), "treat", "re78")
		for i := 0; i < d.N; i++ {
			for k := 0; k < int(ws.fw[i]); k++ {
				for j, name := range nswCovariates {
					num[name] = append(num[name], d.X[i*d.P+j+1])
				}
				num["treat"] = append(num["treat"], d.T[i])
				num["re78"] = append(num["re78"], d.Y[i])
			}
		}
		f, err := NewFrame(names, num, nil)
		if err != nil {
			t.Fatal(err)
		}
		want := FromSource(f).Treat("treat").Outcome("re78").Adjust(nswCovariates...).Propensity().Effect(est, target)
		if want.Err() != nil {
			t.Fatal(want.Err())
		}
		relClose(t, est.String()+" replicate vs materialised resample", got, want.Value, 1e-8)
	}
}

// Reference: the sandwich / influence-function SEs of nsw_reference.R. The
// bootstrap SE (1000 replicates, Monte Carlo error about 2.2%) agrees within
// 10%; testdata/reference/README.md reports 671–682 from 3000 replicates.
func TestBootstrapSEAgreesWithAnalytic(t *testing.T) {
	sc := nswStudy().Propensity()
	for _, c := range []struct {
		est Estimator
		t   Estimand
	}{{AIPW, ATE}, {IPWNormalized, ATT}, {OverlapWeighted, ATO}} {
		e := sc.Effect(c.est, c.t)
		var calls, last int
		bs := sc.Bootstrap(context.Background(), c.est, c.t, BootstrapOptions{Replicates: 1000, Seed: 2026,
			Progress: func(done, total int) {
				if done < last || total != 1000 {
					t.Errorf("progress %d/%d after %d", done, total, last)
				}
				last = done
				calls++
			}})
		if bs.Err() != nil || bs.Failed > 0 || bs.Partial {
			t.Fatal(bs.Err(), bs.FailReason)
		}
		if last != 1000 || calls < 10 || calls > 1001 {
			t.Errorf("progress ended at %d after %d calls", last, calls)
		}
		if r := bs.SE / e.SE; r < 0.9 || r > 1.1 {
			t.Errorf("%s %s: bootstrap SE %.1f vs analytic %.1f", c.est, c.t, bs.SE, e.SE)
		}
		if bs.Estimate != e.Value {
			t.Errorf("bootstrap estimate %v, effect %v", bs.Estimate, e.Value)
		}
		if !(bs.Percentile.Lo < e.Value && e.Value < bs.Percentile.Hi) || math.Abs(bs.Normal.Hi-bs.Normal.Lo-2*z975*bs.SE) > 1e-9 {
			t.Errorf("intervals %+v %+v", bs.Percentile, bs.Normal)
		}
		b, err := json.Marshal(bs)
		if err != nil || !strings.Contains(string(b), `"percentile_ci95":[`) || !strings.Contains(string(b), `"partial":false`) {
			t.Errorf("JSON %s %v", b, err)
		}
	}
}

func TestBootstrapEdgeCases(t *testing.T) {
	sc := nswStudy().Propensity()
	for _, k := range []int{0, 1, -5} {
		bs := sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: k})
		wantErr(t, bs.Err(), "replicates", "at least 2")
	}
	wantErr(t, sc.Bootstrap(context.Background(), OverlapWeighted, ATE, BootstrapOptions{Replicates: 10}).Err(), "ATO only")
	// Cancelled: the context is cancelled at the first progress report of a
	// run far too long to finish; it returns with what was done, partial.
	ctx, cancel := context.WithCancel(context.Background())
	bs := sc.Bootstrap(ctx, AIPW, ATE, BootstrapOptions{Replicates: 10000000, Seed: 1,
		Progress: func(done, total int) { cancel() }})
	if !bs.Partial || bs.Done == 0 || bs.Done >= bs.Requested || len(bs.Replicates) != bs.Done {
		t.Fatalf("cancelled run: partial %v, done %d of %d", bs.Partial, bs.Done, bs.Requested)
	}
	if !strings.Contains(bs.String(), "PARTIAL") {
		t.Errorf("partial run not marked:\n%s", bs)
	}
	// Already cancelled: nothing done, no panic, no interval.
	bs = sc.Bootstrap(ctx, AIPW, ATE, BootstrapOptions{Replicates: 100})
	if !bs.Partial || bs.Done != 0 || !math.IsNaN(bs.SE) {
		t.Errorf("pre-cancelled run: %+v", bs)
	}
	if _, err := json.Marshal(bs); err != nil {
		t.Error(err)
	}
	// Separation: the pinned units keep their scores of 0 or 1 and the rest
	// of the model is refitted.
	sep := Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "household_size", "lot_m2", "pool").Propensity()
	bs = sep.Bootstrap(context.Background(), IPWNormalized, ATT, BootstrapOptions{Replicates: 50, Seed: 3})
	if bs.Err() != nil || bs.Failed > 0 {
		t.Fatal(bs.Err(), bs.FailReason)
	}
	if e := sep.Effect(IPWNormalized, ATT); math.Abs(bs.SE/e.SE-1) > 0.35 {
		t.Errorf("separated data: bootstrap SE %g vs sandwich %g", bs.SE, e.SE)
	}
}

// With a ridge penalty the stacked sandwich uses the penalised information
// (X'WX + λS²)⁻¹ and the penalised score equations; its SE must agree with
// the bootstrap, whose replicates refit with the same penalty (a consistency
// check of the whole; the per-unit penalty share −(λ/n)S²β itself only
// shifts every ψ_i by a constant and changes the SE by a negligible amount).
func TestRidgeSandwichAgreesWithBootstrap(t *testing.T) {
	sc := nswStudy().Propensity(Ridge(20))
	if sc.Err() != nil {
		t.Fatal(sc.Err())
	}
	plain := nswStudy().Propensity()
	for _, c := range []struct {
		est Estimator
		t   Estimand
	}{{IPWNormalized, ATE}, {OverlapWeighted, ATO}} {
		e := sc.Effect(c.est, c.t)
		if e.Value == plain.Effect(c.est, c.t).Value {
			t.Fatal("ridge changed nothing")
		}
		bs := sc.Bootstrap(context.Background(), c.est, c.t, BootstrapOptions{Replicates: 1000, Seed: 11})
		if r := bs.SE / e.SE; bs.Err() != nil || r < 0.9 || r > 1.1 {
			t.Errorf("%s ridge: sandwich SE %.2f, bootstrap %.2f (%v)", c.est, e.SE, bs.SE, bs.Err())
		}
	}
}

func TestTrimmedBootstrap(t *testing.T) {
	tr := waterStudy().Propensity().Trim(Symmetric(0.1))
	bs := tr.Bootstrap(context.Background(), IPWNormalized, ATE, BootstrapOptions{Replicates: 50, Seed: 1})
	if bs.Err() != nil || !strings.Contains(bs.Population, "2793 kept units") || bs.Estimate != tr.Effect(IPWNormalized, ATE).Value {
		t.Errorf("%v %q", bs.Err(), bs.Population)
	}
}
