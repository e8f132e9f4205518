package widgets

import (
	"context"
	"os"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

func TestZZPreview(t *testing.T) {
	out := os.Getenv("CP_PREVIEW")
	if out == "" {
		t.Skip()
	}
	js, _ := os.ReadFile("/tmp/ech/package/dist/echarts.min.js")
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
	sc := s.Propensity()
	sup := sc.Support()
	cells := s.Cells("district", "lot_m2")
	ero := s.Erosion()
	bal := s.Balance()
	var w []float64
	for i, e := range sc.E {
		if sc.Design.T[i] == 1 {
			w = append(w, 1/e)
		} else {
			w = append(w, 1/(1-e))
		}
	}
	balw := s.BalanceWeighted(w, "ATE weights")
	v := sc.Verdict(causal.VerdictOptions{}, cells)
	var body []string
	xs := []any{sc, sup, cells, ero, bal, balw, v}
	if os.Getenv("CP_EFFECTS") != "" {
		tr := sc.Trim(causal.Symmetric(0.1))
		xs = []any{sc.Effects(causal.ATT, cells), sc.Effects(causal.ATE, cells), sc.Effect(causal.AIPW, causal.ATT), tr, tr.Effects(causal.ATE),
			sc.Bootstrap(context.Background(), causal.IPWNormalized, causal.ATT, causal.BootstrapOptions{Replicates: 300, Seed: 3}), sc.Weights(causal.ATO)}
	}
	if os.Getenv("CP_SWEEP") != "" {
		var alphas []float64
		for a := 0.0; a <= 0.2001; a += 0.005 {
			alphas = append(alphas, a)
		}
		d := sweepByTrimming(t, sc, causal.IPWNormalized, causal.ATE, alphas)
		d.Default = 20
		c, err := sweepChart(d)
		if err != nil {
			t.Fatal(err)
		}
		c2, _ := sweepChart(d)
		body = append(body, c.HTML(), c2.HTML(), `<script>setTimeout(function(){var r=document.querySelectorAll("input.cp-sweep-range")[1]; r.value="2"; r.dispatchEvent(new Event("input"));}, 1500);</script>`)
		xs = nil
	}
	if os.Getenv("CP_EXTRAP") != "" {
		e := extrapolationStudy(t, 3000)
		esc := e.Propensity()
		xs = []any{esc.Extrapolation(causal.ATE), esc.Sweep(causal.IPWNormalized, causal.ATE), sc.Sweep(causal.IPWNormalized, causal.ATE)}
	}
	if os.Getenv("CP_HOSTILE") != "" {
		h := resultsOf(t, hostileStudy(t), hostileColumn, "g", "b")
		xs = []any{h.Cells2, h.Balance, h.Curve, h.Scores}
	}
	if os.Getenv("CP_ALL") != "" {
		r := waterResults(t)
		h := resultsOf(t, hostileStudy(t), hostileColumn, "g", "b")
		xs = append(r.all(), h.all()...)
	}
	for _, x := range xs {
		body = append(body, HTML(x))
		t.Log(Headline(x))
	}
	os.WriteFile(out, []byte(Page("preview", body, js)), 0o644)
}
