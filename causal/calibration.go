package causal

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/stat/distuv"
)

// CalibrationAlpha is the level of the propensity model's calibration tests:
// the Hosmer–Lemeshow test rejects at p < CalibrationAlpha,
// and the tail check flags a tail decile at p < CalibrationAlpha/2 (two tails,
// Bonferroni, so that the flag's family-wise false-alarm rate is at most
// CalibrationAlpha). 0.05 is common practice, no source.
const CalibrationAlpha = 0.05

// CalibrationGroup is one decile of risk: the units whose fitted score lies
// in (Lo, Hi] (the first group also holds Lo).
type CalibrationGroup struct {
	Lo, Hi       float64
	N            int
	Observed     int     // treated units
	Expected     float64 // Σ e over the group's units
	MeanScore    float64 // Expected / N
	ShareTreated float64 // Observed / N
}

// CalibrationTail is the exact check of the lowest or highest decile of risk.
type CalibrationTail struct {
	Decile    string // "lowest" or "highest"
	N         int
	Observed  int
	Expected  float64
	MeanScore float64
	// P is the two-sided exact binomial p-value of Observed treated units
	// among N with success probability MeanScore (binomTestP).
	P float64
	// Flagged is P < CalibrationAlpha/2.
	Flagged bool
}

// CalibrationTest tests whether the fitted propensity scores match how often
// units are treated. For fitted scores e_i and treatment T_i:
//
// Hosmer & Lemeshow (1980) deciles of risk. The units are grouped by the
// deciles of e (breaks at the 0, 0.1, …, 1 quantiles of e by Hyndman & Fan's
// definition 7, the default of R's quantile; tied breaks merged; intervals
// closed on the right, the first also on the left). With O_g treated units,
// E_g = Σ_g e and n_g units in group g of G,
//
//	Ĉ = Σ_g (O_g − E_g)² / (E_g (1 − E_g/n_g)),  df = G − 2,  p = P(χ²_df > Ĉ)
//
// (Hosmer & Lemeshow 1980, Commun. Statist. A9(10), 1043–1069; the G − 2 df
// for scores fitted on the same data). A group with E_g(1 − E_g/n_g) = 0
// adds 0 when O_g = E_g, else +∞.
//
// (Spiegelhalter's 1986 z is not offered: on scores fitted by maximum
// likelihood on the same data, Σ(T − e) = 0 and Σ(T − e)x = 0 make its
// numerator nearly zero; in the simulation of TestCalibrationTailSimulation
// it rejected in 0 of 300 data sets at 5%, misspecified ones included.)
//
// Tails: in the lowest and in the highest decile, an exact binomial test of
// O_g against n_g trials with probability E_g/n_g (two-sided p-value as
// R's binom.test computes it), flagged at p < CalibrationAlpha/2. Under
// correct scores O_g is a sum of independent Bernoulli(e_i), whose variance
// Σe(1−e) is at most that of the binomial with the same mean, n_g ē(1−ē)
// (Hoeffding 1956), so the test leans conservative; the false-alarm rate on
// correctly specified models and the power against an omitted quadratic term
// are measured in TestCalibrationTailSimulation. A flagged tail means the scores that drive
// trimming, weighting and the verdict are not trustworthy where they matter
// most: add terms (splines, interactions) to the propensity model.
type CalibrationTest struct {
	Groups []CalibrationGroup
	// HL is Ĉ with DF = G − 2 degrees of freedom and p-value HLP (NaN when
	// DF < 1: the scores take too few distinct values for deciles).
	HL    float64
	DF    int
	HLP   float64
	Tails []CalibrationTail
	Alpha float64
	err   error
}

// Err returns why the test could not be computed, or nil.
func (c *CalibrationTest) Err() error {
	if c == nil {
		return errors.New("nil CalibrationTest")
	}
	return c.err
}

// TailMiscalibrated returns the flagged tail deciles (none when the scores'
// tails are calibrated or the test could not be computed).
func (c *CalibrationTest) TailMiscalibrated() []CalibrationTail {
	if c.Err() != nil {
		return nil
	}
	var out []CalibrationTail
	for _, t := range c.Tails {
		if t.Flagged {
			out = append(out, t)
		}
	}
	return out
}

// CalibrationTest runs the Hosmer–Lemeshow and tail tests on
// the fitted scores (see CalibrationTest for the formulas and sources).
func (sc *Scores) CalibrationTest() *CalibrationTest {
	if err := sc.Err(); err != nil {
		return &CalibrationTest{err: err}
	}
	groups, units := sc.groups, 0
	for _, g := range groups {
		units += g.N
	}
	if units != len(sc.E) { // scores not built by the fit: group them now
		groups = calibrationGroups(sortScores(sc.E, sc.Design.T))
	}
	return calibrationTest(groups, len(sc.E))
}

func calibrationTest(groups []CalibrationGroup, n int) *CalibrationTest {
	c := &CalibrationTest{Alpha: CalibrationAlpha, HL: math.NaN(), HLP: math.NaN()}
	if n < 2 {
		c.err = fmt.Errorf("calibration test: %d unit%s; it needs at least 2", n, plural(n, "", "s"))
		return c
	}
	c.Groups = append([]CalibrationGroup(nil), groups...)
	// Hosmer–Lemeshow.
	c.DF = len(c.Groups) - 2
	if c.DF >= 1 {
		var hl float64
		for _, g := range c.Groups {
			v := g.Expected * (1 - g.Expected/float64(g.N))
			d := float64(g.Observed) - g.Expected
			switch {
			case v > 0:
				hl += d * d / v
			case math.Abs(d) > 1e-9*math.Max(1, g.Expected):
				hl = math.Inf(1)
			}
		}
		c.HL = hl
		c.HLP = distuv.ChiSquared{K: float64(c.DF)}.Survival(hl)
	}
	// Tails.
	tail := func(name string, g CalibrationGroup) CalibrationTail {
		pv := binomTestP(g.Observed, g.N, g.MeanScore)
		return CalibrationTail{Decile: name, N: g.N, Observed: g.Observed, Expected: g.Expected, MeanScore: g.MeanScore,
			P: pv, Flagged: pv < c.Alpha/2}
	}
	c.Tails = append(c.Tails, tail("lowest", c.Groups[0]))
	if len(c.Groups) > 1 {
		c.Tails = append(c.Tails, tail("highest", c.Groups[len(c.Groups)-1]))
	}
	return c
}

// calibrationGroups forms the deciles of risk of scores sorted ascending:
// breaks at the type-7 quantiles k/10, computed as R's quantile does
// (index = 1 + (n−1)·prob, prob = k·0.1 as R's seq(0, 1, 0.1) gives it,
// q = (1 − h)·x[lo] + h·x[hi]), tied breaks merged, intervals (lo, hi] with
// the first closed on the left; empty groups left out.
func calibrationGroups(p []scoreT) []CalibrationGroup {
	n := len(p)
	if n == 0 {
		return nil
	}
	var breaks []float64
	for k := 0; k <= 10; k++ {
		index := 1 + float64(n-1)*(float64(k)*0.1)
		lo := math.Floor(index)
		hi := math.Ceil(index)
		q := p[int(lo)-1].e
		if xh := p[int(hi)-1].e; index > lo && xh != q {
			h := index - lo
			q = (1-h)*q + h*xh
		}
		if len(breaks) == 0 || q != breaks[len(breaks)-1] {
			breaks = append(breaks, q)
		}
	}
	if len(breaks) == 1 { // every score equal: one group
		breaks = append(breaks, breaks[0])
	}
	var out []CalibrationGroup
	i := 0
	for g := 1; g < len(breaks); g++ {
		grp := CalibrationGroup{Lo: breaks[g-1], Hi: breaks[g]}
		for i < n && (p[i].e <= breaks[g] || g == len(breaks)-1) {
			grp.N++
			grp.Expected += p[i].e
			if p[i].t == 1 {
				grp.Observed++
			}
			i++
		}
		if grp.N == 0 {
			continue
		}
		grp.MeanScore = grp.Expected / float64(grp.N)
		grp.ShareTreated = float64(grp.Observed) / float64(grp.N)
		out = append(out, grp)
	}
	return out
}

// binomTestP is the two-sided exact binomial p-value of x successes in n
// trials with probability p, as R's binom.test computes it: the total
// probability of the outcomes no more likely than x (relative tolerance
// 1 + 1e-7), summed over the other side of the mean n·p and added to the
// tail beyond x.
func binomTestP(x, n int, p float64) float64 {
	if p <= 0 {
		return boolP(x == 0)
	}
	if p >= 1 {
		return boolP(x == n)
	}
	b := distuv.Binomial{N: float64(n), P: p}
	d := b.Prob(float64(x)) * (1 + 1e-7)
	m := float64(n) * p
	var pv float64
	switch {
	case float64(x) == m:
		return 1
	case float64(x) < m:
		y := 0
		for k := int(math.Ceil(m)); k <= n; k++ {
			if b.Prob(float64(k)) <= d {
				y++
			}
		}
		pv = b.CDF(float64(x)) + upperTail(b, n-y, n)
	default:
		y := 0
		for k := 0; k <= int(math.Floor(m)); k++ {
			if b.Prob(float64(k)) <= d {
				y++
			}
		}
		pv = lowerTail(b, y-1) + upperTail(b, x-1, n)
	}
	return math.Min(1, pv)
}

func boolP(ok bool) float64 {
	if ok {
		return 1
	}
	return 0
}

// lowerTail is P(X ≤ k) (0 for k < 0).
func lowerTail(b distuv.Binomial, k int) float64 {
	if k < 0 {
		return 0
	}
	return b.CDF(float64(k))
}

// upperTail is P(X > k) (0 for k ≥ n).
func upperTail(b distuv.Binomial, k, n int) float64 {
	if k >= n {
		return 0
	}
	return b.Survival(float64(k))
}

// String is the terminal view.
func (c *CalibrationTest) String() string {
	if err := c.Err(); err != nil {
		return "calibrationtest: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Calibration of the propensity scores (deciles of risk)\n")
	if c.DF >= 1 {
		fmt.Fprintf(&b, "  Hosmer–Lemeshow (1980): C = %.4g, df %d, p = %.4g\n", c.HL, c.DF, c.HLP)
	} else {
		fmt.Fprintf(&b, "  Hosmer–Lemeshow (1980): not computed (the scores form %d group%s; the test needs 3)\n", len(c.Groups), plural(len(c.Groups), "", "s"))
	}
	fmt.Fprintf(&b, "  %-22s %8s %9s %11s %11s\n", "scores", "units", "treated", "expected", "mean score")
	for _, g := range c.Groups {
		fmt.Fprintf(&b, "  [%8.4f, %8.4f] %8d %9d %11.2f %11.4f\n", g.Lo, g.Hi, g.N, g.Observed, g.Expected, g.MeanScore)
	}
	for _, t := range c.Tails {
		mark := ""
		if t.Flagged {
			mark = "  MISCALIBRATED: the scores that drive the verdict are not trustworthy here; add terms to the propensity model"
		}
		fmt.Fprintf(&b, "  %s decile: %d treated of %d, %.2f expected (mean score %.4f); exact binomial p = %.4g (flag below %g)%s\n",
			t.Decile, t.Observed, t.N, t.Expected, t.MeanScore, t.P, c.Alpha/2, mark)
	}
	return b.String()
}

// MarshalJSON is the pipeline view (report field propensity.calibration_test).
func (c *CalibrationTest) MarshalJSON() ([]byte, error) {
	if err := c.Err(); err != nil {
		return failedJSON(err)
	}
	type group struct {
		Lo        Num `json:"lo"`
		Hi        Num `json:"hi"`
		N         int `json:"n"`
		Observed  int `json:"observed_treated"`
		Expected  Num `json:"expected_treated"`
		MeanScore Num `json:"mean_score"`
	}
	type tail struct {
		Decile    string `json:"decile"`
		N         int    `json:"n"`
		Observed  int    `json:"observed_treated"`
		Expected  Num    `json:"expected_treated"`
		MeanScore Num    `json:"mean_score"`
		P         Num    `json:"p_value"`
		Method    string `json:"method"`
		Flagged   bool   `json:"miscalibrated"`
	}
	out := struct {
		HL struct {
			Statistic Num `json:"statistic"`
			DF        int `json:"df"`
			P         Num `json:"p_value"`
		} `json:"hosmer_lemeshow"`
		Groups []group `json:"groups"`
		Tails  []tail  `json:"tails"`
		Alpha  float64 `json:"alpha"`
	}{Alpha: c.Alpha}
	out.HL.Statistic, out.HL.DF, out.HL.P = Num(c.HL), c.DF, Num(c.HLP)
	for _, g := range c.Groups {
		out.Groups = append(out.Groups, group{Num(g.Lo), Num(g.Hi), g.N, g.Observed, Num(g.Expected), Num(g.MeanScore)})
	}
	for _, t := range c.Tails {
		out.Tails = append(out.Tails, tail{t.Decile, t.N, t.Observed, Num(t.Expected), Num(t.MeanScore), Num(t.P), "exact binomial, two-sided", t.Flagged})
	}
	return json.Marshal(out)
}
