package causal

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// Interval is a closed range [Lo, Hi].
type Interval struct{ Lo, Hi float64 }

// MarshalJSON writes [lo, hi].
func (iv Interval) MarshalJSON() ([]byte, error) { return jsonArray(iv.Lo, iv.Hi), nil }

// HistBin is one score bin with its count per arm.
type HistBin struct {
	Lo, Hi           float64
	Treated, Control int
}

// ProfileRow compares the units outside the common-support band with those
// inside on one design term.
type ProfileRow struct {
	Term        string  `json:"term"`
	MeanOutside float64 `json:"mean_outside"`
	MeanInside  float64 `json:"mean_inside"`
	// SMD of outside versus inside (pooled-SD form, Austin 2009).
	SMD float64 `json:"smd"`
}

// ExtremeShares are the shares of each arm with scores beyond a threshold.
type ExtremeShares struct {
	Threshold float64 `json:"threshold"` // t: counts scores < t and > 1 − t
	// Shares among treated and controls of scores below t and above 1 − t.
	TreatedBelow, TreatedAbove, ControlBelow, ControlAbove float64
}

// Support describes the propensity scores by arm: the common-support band
// [max of the arms' minimum scores, min of their maximum scores], the units
// of each arm outside it, the shares at extreme scores, a profile of the
// units outside, and a score histogram per arm (for charts; the number of
// bins is bounded whatever n is).
type Support struct {
	Scores         *Scores
	Band           Interval
	TreatedRange   Interval
	ControlRange   Interval
	OutsideTreated int
	OutsideControl int
	Treated        int
	Control        int
	Outside        []bool // per used row: outside the band
	Extremes       []ExtremeShares
	Profile        []ProfileRow
	Histogram      []HistBin
	err            error
}

// Err returns why the support could not be computed, or nil.
func (s *Support) Err() error {
	if s == nil {
		return errors.New("nil Support")
	}
	if s.err == nil && (s.Scores == nil) {
		return errors.New("support not computed: use Scores.Support()")
	}
	return s.err
}

// ShareOutside is the share of all units outside the band.
func (s *Support) ShareOutside() float64 {
	if s.Err() != nil || s.Treated+s.Control == 0 {
		return math.NaN()
	}
	return float64(s.OutsideTreated+s.OutsideControl) / float64(s.Treated+s.Control)
}

// Support computes support by arm with 40 histogram bins over [0, 1].
func (sc *Scores) Support() *Support { return sc.SupportBins(40) }

// SupportBins is Support with a chosen number of histogram bins (1 to 200).
func (sc *Scores) SupportBins(bins int) *Support {
	if err := sc.Err(); err != nil {
		return &Support{err: err}
	}
	if bins < 1 || bins > 200 {
		return &Support{err: fmt.Errorf("histogram bins must be between 1 and 200, got %d", bins)}
	}
	d := sc.Design
	s := sc.supportBand()
	for _, t := range []float64{0.05, 0.1} {
		x := ExtremeShares{Threshold: t}
		for i, e := range sc.E {
			below, above := 0.0, 0.0
			if e < t {
				below = 1
			}
			if e > 1-t {
				above = 1
			}
			if d.T[i] == 1 {
				x.TreatedBelow += below
				x.TreatedAbove += above
			} else {
				x.ControlBelow += below
				x.ControlAbove += above
			}
		}
		x.TreatedBelow /= float64(d.Treated)
		x.TreatedAbove /= float64(d.Treated)
		x.ControlBelow /= float64(d.Control)
		x.ControlAbove /= float64(d.Control)
		s.Extremes = append(s.Extremes, x)
	}
	s.Histogram = make([]HistBin, bins)
	for b := range s.Histogram {
		s.Histogram[b] = HistBin{Lo: float64(b) / float64(bins), Hi: float64(b+1) / float64(bins)}
	}
	for i, e := range sc.E {
		b := int(e * float64(bins))
		if b >= bins {
			b = bins - 1
		}
		if b < 0 {
			b = 0
		}
		if d.T[i] == 1 {
			s.Histogram[b].Treated++
		} else {
			s.Histogram[b].Control++
		}
	}
	if s.OutsideTreated+s.OutsideControl > 0 && s.OutsideTreated+s.OutsideControl < d.N {
		s.Profile = profile(d, s.Outside)
	}
	return s
}

// profile compares rows flagged in mask with the rest, per design term.
func profile(d *Design, mask []bool) []ProfileRow { return profileAmong(d, mask, nil) }

// profileAmong is profile restricted to the rows flagged in among (all rows
// when among is nil): the flagged rows against the other rows of among.
func profileAmong(d *Design, mask, among []bool) []ProfileRow {
	mean, variance := splitMoments(d, mask, among)
	var out []ProfileRow
	for j := 1; j < d.P; j++ {
		ma, mb := mean[0][j], mean[1][j]
		va, vb := variance[0][j], variance[1][j]
		r := ProfileRow{Term: d.Terms[j].Name, MeanOutside: ma, MeanInside: mb}
		if d.Terms[j].Binary {
			va, vb = ma*(1-ma), mb*(1-mb)
		}
		r.SMD = smdValue(ma, mb, va, vb)
		out = append(out, r)
	}
	return out
}

// splitMoments returns the mean and variance (n − 1 denominator; NaN for
// fewer than two rows, the mean NaN for none) of every design column in
// the rows flagged in mask (index 0) and the others (index 1), among the
// rows flagged in among (nil: all rows): two passes
// over blocks of rows in parallel (chunking: blocks fixed by n), partial
// sums reduced in block order, so results do not depend on the cores.
func splitMoments(d *Design, mask, among []bool) (mean, variance [2][]float64) {
	n, p := d.N, d.P
	_, count := chunking(n)
	parts := make([][]float64, count) // per block: [group][count, sums of p columns]
	parallelChunks(n, func(k, lo, hi int) {
		acc := make([]float64, 2*(p+1))
		for i := lo; i < hi; i++ {
			if among != nil && !among[i] {
				continue
			}
			g := acc[(p + 1):]
			if mask[i] {
				g = acc[:p+1]
			}
			g[0]++
			row := d.X[i*p : (i+1)*p]
			for j, v := range row {
				g[1+j] += v
			}
		}
		parts[k] = acc
	})
	var cnt [2]float64
	for g := 0; g < 2; g++ {
		mean[g], variance[g] = make([]float64, p), make([]float64, p)
	}
	for _, acc := range parts {
		for g := 0; g < 2; g++ {
			a := acc[g*(p+1):]
			cnt[g] += a[0]
			for j := 0; j < p; j++ {
				mean[g][j] += a[1+j]
			}
		}
	}
	for g := 0; g < 2; g++ {
		for j := range mean[g] {
			mean[g][j] /= cnt[g] // NaN when the group is empty
		}
	}
	parallelChunks(n, func(k, lo, hi int) {
		acc := parts[k][:2*p]
		clear(acc)
		for i := lo; i < hi; i++ {
			if among != nil && !among[i] {
				continue
			}
			g, m := acc[p:], mean[1]
			if mask[i] {
				g, m = acc[:p], mean[0]
			}
			row := d.X[i*p : (i+1)*p]
			for j, v := range row {
				g[j] += (v - m[j]) * (v - m[j])
			}
		}
	})
	for _, acc := range parts {
		for g := 0; g < 2; g++ {
			for j := 0; j < p; j++ {
				variance[g][j] += acc[g*p+j]
			}
		}
	}
	for g := 0; g < 2; g++ {
		for j := range variance[g] {
			if cnt[g] > 1 {
				variance[g][j] /= cnt[g] - 1
			} else {
				variance[g][j] = math.NaN()
			}
		}
	}
	return mean, variance
}

// smdValue = (m1 − m0)/sqrt((v1+v0)/2), 0 when both are equal and spread is 0.
func smdValue(m1, m0, v1, v0 float64) float64 {
	den := math.Sqrt((v1 + v0) / 2)
	if den == 0 {
		if m1 == m0 {
			return 0
		}
		return math.Copysign(math.Inf(1), m1-m0)
	}
	return (m1 - m0) / den
}

// String is the terminal view.
func (s *Support) String() string {
	if err := s.Err(); err != nil {
		return "support: " + err.Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Support by arm (propensity scores)\n")
	fmt.Fprintf(&b, "  treated scores   [%.4f, %.4f]   n = %d\n", s.TreatedRange.Lo, s.TreatedRange.Hi, s.Treated)
	fmt.Fprintf(&b, "  control scores   [%.4f, %.4f]   n = %d\n", s.ControlRange.Lo, s.ControlRange.Hi, s.Control)
	if s.Band.Lo > s.Band.Hi {
		fmt.Fprintf(&b, "  common support   none: the arms' score ranges do not overlap\n")
	} else {
		fmt.Fprintf(&b, "  common support   [%.4f, %.4f]\n", s.Band.Lo, s.Band.Hi)
	}
	fmt.Fprintf(&b, "  outside the band treated %d (%.1f%%), control %d (%.1f%%)\n", s.OutsideTreated, pct(s.OutsideTreated, s.Treated), s.OutsideControl, pct(s.OutsideControl, s.Control))
	for _, x := range s.Extremes {
		fmt.Fprintf(&b, "  scores < %.2f or > %.2f   treated %.1f%% / %.1f%%, control %.1f%% / %.1f%%\n", x.Threshold, 1-x.Threshold,
			100*x.TreatedBelow, 100*x.TreatedAbove, 100*x.ControlBelow, 100*x.ControlAbove)
	}
	if len(s.Profile) > 0 {
		fmt.Fprintf(&b, "  units outside vs inside (largest differences):\n")
		for _, r := range topProfile(s.Profile, 5) {
			fmt.Fprintf(&b, "    %-24s outside %10.4g  inside %10.4g  SMD %+.2f\n", r.Term, r.MeanOutside, r.MeanInside, r.SMD)
		}
	}
	return b.String()
}

// topProfile returns up to k rows with the largest |SMD|.
func topProfile(rows []ProfileRow, k int) []ProfileRow {
	c := append([]ProfileRow(nil), rows...)
	for i := 0; i < len(c); i++ {
		for j := i + 1; j < len(c); j++ {
			if math.Abs(c[j].SMD) > math.Abs(c[i].SMD) {
				c[i], c[j] = c[j], c[i]
			}
		}
	}
	if len(c) > k {
		c = c[:k]
	}
	return c
}

func pct(a, b int) float64 {
	if b == 0 {
		return 0
	}
	return 100 * float64(a) / float64(b)
}
