package causal

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// benchFrame builds n rows of p standard-normal covariates x1..xp and a
// treatment drawn from a logistic model in them (effectFrame's data; its
// outcome column is not used here).
func benchFrame(n, p int, seed uint64) (*Frame, []string) { return effectFrame(n, p, seed) }

var benchSink any

// Target (issue 2): n = 1e6, p = 20 fit ≤ 0.5 s on 2 cores.
func BenchmarkPropensityFit(b *testing.B) {
	for _, n := range []int{100000, 1000000} {
		f, names := benchFrame(n, 20, 1)
		d, err := FromSource(f).Treat("t").Adjust(names...).Design()
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("n=%d/p=20", n), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				benchSink = propensityFor(d, logitOptions{})
			}
		})
	}
}

// Target (issue 2): CSV of 1e6 rows × 21 numeric columns loads in ≤ 1.2 s.
func BenchmarkLoadCSV(b *testing.B) {
	for _, n := range []int{100000, 1000000} {
		path := filepath.Join(b.TempDir(), "bench.csv")
		fh, err := os.Create(path)
		if err != nil {
			b.Fatal(err)
		}
		w := bufio.NewWriter(fh)
		r := rand.New(rand.NewPCG(2, 2))
		for j := 1; j <= 20; j++ {
			fmt.Fprintf(w, "x%d,", j)
		}
		w.WriteString("t\n")
		buf := make([]byte, 0, 32)
		for i := 0; i < n; i++ {
			for j := 0; j < 20; j++ {
				buf = strconv.AppendFloat(buf[:0], r.NormFloat64()*1000, 'f', 3, 64)
				w.Write(buf)
				w.WriteByte(',')
			}
			w.WriteByte(byte('0' + r.IntN(2)))
			w.WriteByte('\n')
		}
		w.Flush()
		fh.Close()
		st, _ := os.Stat(path)
		b.Run(fmt.Sprintf("n=%d/cols=21/%dMB", n, st.Size()>>20), func(b *testing.B) {
			b.SetBytes(st.Size())
			for i := 0; i < b.N; i++ {
				f, err := ReadCSV(path)
				if err != nil {
					b.Fatal(err)
				}
				benchSink = f
			}
		})
	}
}

// Target (issue 2): positivity cells for 1e6 rows × 4 covariates × 5 bins
// ≤ 0.13 s, linear in n up to 1e7.
func BenchmarkCells(b *testing.B) {
	for _, n := range []int{1000000, 10000000} {
		if n > 1000000 && testing.Short() {
			continue
		}
		f, names := benchFrame(n, 4, 3)
		s := FromSource(f).Treat("t").Adjust(names...)
		if _, err := s.Design(); err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("n=%d/cov=4/bins=5", n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				c := s.Cells(names...)
				if c.Err() != nil {
					b.Fatal(c.Err())
				}
				benchSink = c
			}
		})
	}
}

// Balance before and after ATE weights (KS: each arm sorted once per
// covariate), n = 1e6, p = 20.
func BenchmarkBalance(b *testing.B) {
	f, names := benchFrame(1000000, 20, 5)
	sc := FromSource(f).Treat("t").Adjust(names...).Propensity()
	w := sc.Weights(ATE)
	if w.Err() != nil {
		b.Fatal(w.Err())
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		benchSink = w.Balance()
	}
}
