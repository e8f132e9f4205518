package scenario

import (
	"bytes"
	"encoding/csv"
	"math"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// generators lists every scenario with fixed arguments, for the checks that
// apply to all of them.
var generators = []struct {
	name string
	gen  func(seed uint64) (*Data, error)
}{
	{"WaterAudits", func(s uint64) (*Data, error) { return WaterAudits(s, 300) }},
	{"OverlapBoxes", func(s uint64) (*Data, error) { return OverlapBoxes(s, 300, 3, 0.5) }},
	{"Extrapolation", func(s uint64) (*Data, error) { return Extrapolation(s, 300, 2) }},
	{"KangSchafer", func(s uint64) (*Data, error) { return KangSchafer(s, 300) }},
	{"RandomisedSimple", func(s uint64) (*Data, error) { return RandomisedSimple(s, 300, 1.5) }},
	{"Wide", func(s uint64) (*Data, error) { return Wide(s, 300, 9) }},
	{"SteepScores", func(s uint64) (*Data, error) { return SteepScores(s, 300, 2.5) }},
}

func csvBytes(t *testing.T, d *Data) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := d.WriteCSV(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestSameSeedSameBytes(t *testing.T) {
	for _, g := range generators {
		t.Run(g.name, func(t *testing.T) {
			a, err := g.gen(42)
			if err != nil {
				t.Fatal(err)
			}
			b, err := g.gen(42)
			if err != nil {
				t.Fatal(err)
			}
			c, err := g.gen(43)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(csvBytes(t, a), csvBytes(t, b)) {
				t.Error("two runs with seed 42 wrote different CSV bytes")
			}
			if bytes.Equal(csvBytes(t, a), csvBytes(t, c)) {
				t.Error("seeds 42 and 43 wrote the same CSV bytes")
			}
			if a.Notes != b.Notes || a.Notes == "" {
				t.Errorf("notes empty or not reproducible: %q", a.Notes)
			}
		})
	}
}

// TestCSVRoundTrip reads the written CSV back with encoding/csv and checks
// every cell against the stored column, so the text form loses nothing.
func TestCSVRoundTrip(t *testing.T) {
	for _, g := range generators {
		t.Run(g.name, func(t *testing.T) {
			d, err := g.gen(7)
			if err != nil {
				t.Fatal(err)
			}
			recs, err := csv.NewReader(bytes.NewReader(csvBytes(t, d))).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			if len(recs) != d.Rows()+1 || strings.Join(recs[0], ",") != strings.Join(d.Names, ",") {
				t.Fatalf("got %d records with header %v; want %d rows with header %v", len(recs), recs[0], d.Rows()+1, d.Names)
			}
			for j, name := range d.Names {
				for i, rec := range recs[1:] {
					if num, ok := d.Num[name]; ok {
						v, err := strconv.ParseFloat(rec[j], 64)
						if err != nil || v != num[i] || strings.ContainsAny(rec[j], "eE") {
							t.Fatalf("column %s row %d: text %q, stored %v", name, i+1, rec[j], num[i])
						}
					} else if rec[j] != d.Str[name][i] {
						t.Fatalf("column %s row %d: text %q, stored %q", name, i+1, rec[j], d.Str[name][i])
					}
				}
			}
		})
	}
}

func TestWriteCSVErrors(t *testing.T) {
	cases := map[string]*Data{
		"no columns":      {},
		"missing column":  {Names: []string{"a", "b"}, Num: map[string][]float64{"a": {1}}},
		"unequal lengths": {Names: []string{"a", "b"}, Num: map[string][]float64{"a": {1, 2}}, Str: map[string][]string{"b": {"x"}}},
		"in both maps":    {Names: []string{"a"}, Num: map[string][]float64{"a": {1}}, Str: map[string][]string{"a": {"x"}}},
	}
	for name, d := range cases {
		if err := d.WriteCSV(&bytes.Buffer{}); err == nil {
			t.Errorf("%s: WriteCSV gave no error", name)
		}
	}
}

func TestArgumentErrors(t *testing.T) {
	cases := []struct {
		name, want string
		call       func() (*Data, error)
	}{
		{"water n", "n = 9", func() (*Data, error) { return WaterAudits(1, 9) }},
		{"boxes n", "n = 0", func() (*Data, error) { return OverlapBoxes(1, 0, 2, 0.5) }},
		{"boxes d", "d = 0", func() (*Data, error) { return OverlapBoxes(1, 100, 0, 0.5) }},
		{"boxes n·d", "n·d", func() (*Data, error) { return OverlapBoxes(1, 1_000_000, 1000, 0.5) }},
		{"boxes shift", "shift", func() (*Data, error) { return OverlapBoxes(1, 100, 2, math.NaN()) }},
		{"extrap n", "n = -1", func() (*Data, error) { return Extrapolation(1, -1, 1) }},
		{"extrap separation", "negative", func() (*Data, error) { return Extrapolation(1, 100, -1) }},
		{"extrap inf", "separation", func() (*Data, error) { return Extrapolation(1, 100, math.Inf(1)) }},
		{"ks n", "n = 3", func() (*Data, error) { return KangSchafer(1, 3) }},
		{"ks huge", "smaller n", func() (*Data, error) { return KangSchafer(1, maxCells+1) }},
		{"rand n", "n = 5", func() (*Data, error) { return RandomisedSimple(1, 5, 1) }},
		{"rand ate", "ate", func() (*Data, error) { return RandomisedSimple(1, 100, math.NaN()) }},
		{"wide n", "n = 2", func() (*Data, error) { return Wide(1, 2, 5) }},
		{"wide p", "p = 0", func() (*Data, error) { return Wide(1, 100, 0) }},
		{"wide n·p", "n·p", func() (*Data, error) { return Wide(1, maxCells/2, 20) }},
		{"steep n", "n = 2", func() (*Data, error) { return SteepScores(1, 2, 2.5) }},
		{"steep slope", "slope", func() (*Data, error) { return SteepScores(1, 100, math.Inf(-1)) }},
	}
	for _, c := range cases {
		d, err := c.call()
		if err == nil || d != nil {
			t.Errorf("%s: got data %v and error %v; want an error", c.name, d != nil, err)
			continue
		}
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q does not mention %q", c.name, err, c.want)
		}
	}
}

// within checks |got − want| <= tol and names the quantity on failure.
func within(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.6g; want %.6g ± %.3g", what, got, want, tol)
	}
}

func count(v []float64) (ones int) {
	for _, x := range v {
		if x == 1 {
			ones++
		}
	}
	return ones
}

// TestOverlapBoxesShare checks the share of units inside the shared box
// [shift, 1]^d against its design value (1 − shift)^d = 0.5^d. Each unit is
// inside independently with that probability, so the count is binomial; the
// tolerance is 4 binomial standard deviations, sqrt(p(1−p)/n) (the seed is
// fixed, so the check is reproducible).
func TestOverlapBoxesShare(t *testing.T) {
	const n, shift = 20000, 0.5
	for d := 1; d <= 6; d++ {
		data, err := OverlapBoxes(11, n, d, shift)
		if err != nil {
			t.Fatal(err)
		}
		if got := count(data.Num["t"]); got != n/2 {
			t.Fatalf("d=%d: %d treated; want %d", d, got, n/2)
		}
		inside := 0
		for i := 0; i < n; i++ {
			in := true
			for j := 1; j <= d; j++ {
				x := data.Num["x"+strconv.Itoa(j)][i]
				lo, hi := 0.0, 1.0
				if data.Num["t"][i] == 0 {
					lo, hi = shift, 1+shift
				}
				if x < lo || x > hi {
					t.Fatalf("d=%d row %d: x%d = %v outside its arm's box [%v, %v]", d, i+1, j, x, lo, hi)
				}
				if x < shift || x > 1 {
					in = false
				}
			}
			if in {
				inside++
			}
		}
		p := math.Pow(0.5, float64(d))
		within(t, "share inside for d="+strconv.Itoa(d), float64(inside)/n, p, 4*math.Sqrt(p*(1-p)/n))
	}
}

// linearImputation fits y = a + b·x by least squares in each arm (gonum's
// stat.LinearRegression) and returns the mean over all units of the fitted
// treated line minus the fitted control line.
func linearImputation(x, tr, y []float64) float64 {
	var x0, y0, x1, y1 []float64
	for i := range x {
		if tr[i] == 1 {
			x1, y1 = append(x1, x[i]), append(y1, y[i])
		} else {
			x0, y0 = append(x0, x[i]), append(y0, y[i])
		}
	}
	a0, b0 := stat.LinearRegression(x0, y0, nil, false)
	a1, b1 := stat.LinearRegression(x1, y1, nil, false)
	s := 0.0
	for _, v := range x {
		s += (a1 + b1*v) - (a0 + b0*v)
	}
	return s / float64(len(x))
}

// TestExtrapolation checks the arm centres (tolerance 4 standard errors,
// 4/sqrt(n/2), for N(±s/2, 1)), the constant effect, and that the scenario
// shows what it is for: per-arm linear imputation is near the true effect 2
// when the arms coincide and far from it when they are 4 sd apart.
func TestExtrapolation(t *testing.T) {
	const n = 4000
	for _, sep := range []float64{0, 4} {
		d, err := Extrapolation(5, n, sep)
		if err != nil {
			t.Fatal(err)
		}
		x, tr := d.Num["x"], d.Num["t"]
		var x1, x0 []float64
		for i := range x {
			if tr[i] == 1 {
				x1 = append(x1, x[i])
			} else {
				x0 = append(x0, x[i])
			}
			within(t, "y1 - y0", d.Truth["y1"][i]-d.Truth["y0"][i], 2, 1e-9)
		}
		se := 4 / math.Sqrt(n/2)
		within(t, "treated mean x", stat.Mean(x1, nil), sep/2, se)
		within(t, "control mean x", stat.Mean(x0, nil), -sep/2, se)
		if d.TrueATE != 2 || d.TrueATT != 2 {
			t.Errorf("true effects %v, %v; want 2, 2", d.TrueATE, d.TrueATT)
		}
		bias := linearImputation(x, tr, d.Num["y"]) - 2
		if sep == 0 && math.Abs(bias) > 0.25 {
			t.Errorf("separation 0: linear imputation off by %.3f; want within 0.25 of the true effect", bias)
		}
		if sep == 4 && math.Abs(bias) < 1 {
			t.Errorf("separation 4: linear imputation off by only %.3f; the scenario should show an extrapolation error above 1", bias)
		}
	}
}

// TestKangSchafer checks the seen covariates against their formulas in z, the
// constant effect, and two moments of the design: E[y(0)] = 210 with sd
// sqrt(27.4² + 3·13.7² + 1) ≈ 36.3, and P(t=1) = 0.5 (the score's linear
// predictor is symmetric about 0). Tolerances are 4 standard errors.
func TestKangSchafer(t *testing.T) {
	const n = 20000
	d, err := KangSchafer(3, n)
	if err != nil {
		t.Fatal(err)
	}
	c := d.Num
	for i := 0; i < n; i++ {
		z1, z2, z3, z4 := c["z1"][i], c["z2"][i], c["z3"][i], c["z4"][i]
		// z is stored to 6 decimals, so allow for that rounding in the derived values.
		within(t, "x1", c["x1"][i], math.Exp(z1/2), 1e-5*(1+c["x1"][i]))
		within(t, "x2", c["x2"][i], z2/(1+math.Exp(z1))+10, 1e-5)
		within(t, "x3", c["x3"][i], math.Pow(z1*z3/25+0.6, 3), 1e-5)
		within(t, "x4", c["x4"][i], (z2+z4+20)*(z2+z4+20), 1e-3)
		within(t, "y1 - y0", d.Truth["y1"][i]-d.Truth["y0"][i], 10, 1e-9)
	}
	sd := math.Sqrt(27.4*27.4 + 3*13.7*13.7 + 1)
	within(t, "mean y(0)", stat.Mean(d.Truth["y0"], nil), 210, 4*sd/math.Sqrt(n))
	within(t, "share treated", float64(count(c["t"]))/n, 0.5, 4*0.5/math.Sqrt(n))
	if d.TrueATE != 10 || d.TrueATT != 10 {
		t.Errorf("true effects %v, %v; want 10, 10", d.TrueATE, d.TrueATT)
	}
}

// TestRandomisedSimple checks complete randomisation (exactly n/2 treated)
// and that the difference in means is within 4 standard errors of the true
// ATE (Neyman's variance s1²/n1 + s0²/n0).
func TestRandomisedSimple(t *testing.T) {
	const n, ate = 10000, 1.5
	d, err := RandomisedSimple(9, n, ate)
	if err != nil {
		t.Fatal(err)
	}
	if got := count(d.Num["t"]); got != n/2 {
		t.Fatalf("%d treated; want %d", got, n/2)
	}
	var y1, y0 []float64
	for i, tr := range d.Num["t"] {
		if tr == 1 {
			y1 = append(y1, d.Num["y"][i])
		} else {
			y0 = append(y0, d.Num["y"][i])
		}
	}
	m1, v1 := stat.MeanVariance(y1, nil)
	m0, v0 := stat.MeanVariance(y0, nil)
	se := math.Sqrt(v1/float64(len(y1)) + v0/float64(len(y0)))
	within(t, "difference in means", m1-m0, ate, 4*se)
	if d.TrueATE != ate || d.TrueATT != ate {
		t.Errorf("true effects %v, %v; want %v", d.TrueATE, d.TrueATT, ate)
	}
}

// TestWide checks the design of the Wide scenario: every 4th covariate is
// 0/1 with its design share, the others have mean 0 and variance 1, the
// share treated matches the mean true propensity, and the sample ATE is
// 1 + 0.5·mean(x1). Tolerances are 4 standard errors of each mean (binomial
// sqrt(p(1−p)/n), normal 1/sqrt(n), variance sqrt(2/n)).
func TestWide(t *testing.T) {
	const n, p = 20000, 9
	d, err := Wide(5, n, p)
	if err != nil {
		t.Fatal(err)
	}
	if len(d.Names) != p+2 || d.Names[p] != "t" || d.Names[p+1] != "y" {
		t.Fatalf("columns %v", d.Names)
	}
	for j := 1; j <= p; j++ {
		x := d.Num["x"+strconv.Itoa(j)]
		m, v := stat.MeanVariance(x, nil)
		if j%4 == 0 {
			share := 0.2 + 0.1*float64((j/4)%4)
			if count(x) != int(m*n+0.5) {
				t.Errorf("x%d is not 0/1", j)
			}
			within(t, "share of x"+strconv.Itoa(j), m, share, 4*math.Sqrt(share*(1-share)/n))
			continue
		}
		within(t, "mean of x"+strconv.Itoa(j), m, 0, 4/math.Sqrt(n))
		within(t, "variance of x"+strconv.Itoa(j), v, 1, 4*math.Sqrt(2.0/n))
	}
	pm := stat.Mean(d.Truth["propensity"], nil)
	within(t, "share treated", float64(count(d.Num["t"]))/n, pm, 4*math.Sqrt(pm*(1-pm)/n))
	lo, hi := 1.0, 0.0
	for _, e := range d.Truth["propensity"] {
		lo, hi = math.Min(lo, e), math.Max(hi, e)
	}
	if lo < 0.02 || hi > 0.98 {
		t.Errorf("true scores span [%.3f, %.3f]; the design keeps them inside [0.02, 0.98]", lo, hi)
	}
	within(t, "sample ATE", d.TrueATE, 1+0.5*stat.Mean(d.Num["x1"], nil), 1e-3) // rounding of y to 4 decimals
	within(t, "sample ATE around the population ATE", d.TrueATE, 1, 4*0.5/math.Sqrt(n))
}

// TestSteepScoresTruth checks SteepScores against its design: the sample ATE
// is the mean of 2 + x² with x ~ N(0, 1), whose expectation is 3 and whose
// variance is Var(x²) = 2 (moments of the normal distribution), so it lies
// within 4·sqrt(2/n) of 3; the share treated is E[expit(2.5x)] = 1/2 by
// symmetry, within 4 binomial standard deviations; and y(1) − y(0) = 2 + x².
func TestSteepScoresTruth(t *testing.T) {
	const n = 20000
	d, err := SteepScores(7, n, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	within(t, "sample ATE", d.TrueATE, SteepScoresATE, 4*math.Sqrt(2.0/n))
	within(t, "share treated", float64(count(d.Num["t"]))/n, 0.5, 4*math.Sqrt(0.25/n))
	for i, x := range d.Num["x"] {
		within(t, "y1 - y0", d.Truth["y1"][i]-d.Truth["y0"][i], 2+x*x, 2e-6)
		if i > 50 {
			break
		}
	}
	extreme := 0
	for _, p := range d.Truth["propensity"] {
		if p < 0.05 || p > 0.95 {
			extreme++
		}
	}
	// P(|2.5x| > logit(0.95) = 2.944) = P(|x| > 1.178) = 0.239 (normal table).
	within(t, "share with true score outside [0.05, 0.95]", float64(extreme)/n, 0.239, 4*math.Sqrt(0.239*0.761/n)+0.002)
}
