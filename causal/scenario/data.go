package scenario

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
)

// Data is one generated data set, held by named columns.
//
// Names gives the column order. Every name is a key of exactly one of Num
// (numeric columns) or Str (string columns, such as "yes"/"no" or district
// names), and every column has the same length.
//
// TrueATE and TrueATT are the sample average treatment effect over all units
// and over the treated units, computed from the individual effects
// y(1) − y(0) of the DGP; they are NaN when the scenario has no outcome
// (OverlapBoxes), and TrueATT is NaN when the sample has no treated unit.
//
// Truth holds per-unit quantities known only because the data are simulated:
// "propensity" (the true treatment probability), "y0" and "y1" (the potential
// outcomes), where the scenario defines them. Truth is not written by
// WriteCSV.
//
// Notes describes the scenario, its DGP and its true effects in plain text.
type Data struct {
	Names   []string
	Num     map[string][]float64
	Str     map[string][]string
	Truth   map[string][]float64
	TrueATE float64
	TrueATT float64
	Notes   string
}

// Rows is the number of units (rows).
func (d *Data) Rows() int {
	if len(d.Names) == 0 {
		return 0
	}
	if v, ok := d.Num[d.Names[0]]; ok {
		return len(v)
	}
	return len(d.Str[d.Names[0]])
}

// String is a short terminal summary: size, columns and true effects.
func (d *Data) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d rows; columns: %s\n", d.Rows(), strings.Join(d.Names, ", "))
	fmt.Fprintf(&b, "true sample ATE: %s; true sample ATT: %s\n", fmtEffect(d.TrueATE), fmtEffect(d.TrueATT))
	return b.String()
}

func fmtEffect(v float64) string {
	if math.IsNaN(v) {
		return "not defined"
	}
	return strconv.FormatFloat(v, 'f', 4, 64)
}

// WriteCSV writes the columns named in Names as CSV (encoding/csv) with a
// header row. Numbers are written in plain decimal notation (no exponent) with
// the shortest digits that give back the stored value. It returns an error,
// naming the column, when a name has no column or the columns differ in length.
func (d *Data) WriteCSV(w io.Writer) error {
	if len(d.Names) == 0 {
		return fmt.Errorf("scenario: Data has no columns to write; build it with one of the generators such as WaterAudits")
	}
	n := d.Rows()
	nums := make([][]float64, len(d.Names))
	strs := make([][]string, len(d.Names))
	for j, name := range d.Names {
		v, isNum := d.Num[name]
		s, isStr := d.Str[name]
		switch {
		case isNum && isStr:
			return fmt.Errorf("scenario: column %q is in both Num and Str; keep it in one", name)
		case isNum:
			nums[j] = v
			if len(v) != n {
				return fmt.Errorf("scenario: column %q has %d rows but column %q has %d; all columns must have the same length", name, len(v), d.Names[0], n)
			}
		case isStr:
			strs[j] = s
			if len(s) != n {
				return fmt.Errorf("scenario: column %q has %d rows but column %q has %d; all columns must have the same length", name, len(s), d.Names[0], n)
			}
		default:
			return fmt.Errorf("scenario: column %q is listed in Names but is in neither Num nor Str", name)
		}
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(d.Names); err != nil {
		return fmt.Errorf("scenario: writing CSV header: %w", err)
	}
	rec := make([]string, len(d.Names))
	for i := 0; i < n; i++ {
		for j := range d.Names {
			if nums[j] != nil {
				rec[j] = strconv.FormatFloat(nums[j][i], 'f', -1, 64)
			} else {
				rec[j] = strs[j][i]
			}
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("scenario: writing CSV row %d: %w", i+1, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("scenario: writing CSV: %w", err)
	}
	return nil
}

// maxCells bounds n (times d) so that a mistyped size gives an error rather
// than exhausting memory.
const maxCells = 100_000_000

func checkN(fn string, n int) error {
	if n < 10 {
		return fmt.Errorf("scenario.%s: n = %d is too few units; use n >= 10", fn, n)
	}
	if n > maxCells {
		return fmt.Errorf("scenario.%s: n = %d is more than the %d units a generator makes at once; use a smaller n", fn, n, maxCells)
	}
	return nil
}

func checkFinite(fn, name string, v float64) error {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("scenario.%s: %s = %v is not a finite number; give a finite value", fn, name, v)
	}
	return nil
}

// newRand returns the generator's random stream. stream differs per scenario,
// so one seed gives unrelated draws in different scenarios.
func newRand(seed, stream uint64) (*rand.Rand, rand.Source) {
	src := rand.NewPCG(seed, stream)
	return rand.New(src), src
}

// round rounds v to dec decimals, turning −0 into 0.
func round(v float64, dec int) float64 {
	p := math.Pow(10, float64(dec))
	r := math.Round(v*p) / p
	if r == 0 {
		return 0
	}
	return r
}

// normTrunc draws a standard normal truncated to [−lim, lim] by redrawing.
func normTrunc(r *rand.Rand, lim float64) float64 {
	for {
		z := r.NormFloat64()
		if math.Abs(z) <= lim {
			return z
		}
	}
}

// assignHalf returns a 0/1 vector with exactly n/2 (rounded down) ones in
// random order (complete randomisation).
func assignHalf(r *rand.Rand, n int) []float64 {
	t := make([]float64, n)
	for _, i := range r.Perm(n)[:n/2] {
		t[i] = 1
	}
	return t
}

func expit(x float64) float64 { return 1 / (1 + math.Exp(-x)) }

// sampleEffects returns the mean of y1−y0 over all units and over the units
// with t = 1 (NaN if there are none).
func sampleEffects(y0, y1, t []float64) (ate, att float64) {
	var sAll, sT float64
	nT := 0
	for i := range y0 {
		e := y1[i] - y0[i]
		sAll += e
		if t[i] == 1 {
			sT += e
			nT++
		}
	}
	ate = sAll / float64(len(y0))
	att = math.NaN()
	if nT > 0 {
		att = sT / float64(nT)
	}
	return ate, att
}
