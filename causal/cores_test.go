package causal_test

import (
	"bytes"
	"encoding/json"
	"runtime"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/causal/scenario"
)

// The report must not depend on the number of cores: row blocks are fixed
// by n and reduced in order, columns are computed one per task, bootstrap
// replicates are seeded by their index. The whole report JSON (with a
// bootstrap and trimming, over enough rows for many blocks) is compared byte
// for byte under GOMAXPROCS 1 and 4.
func TestReportSameOnAnyCores(t *testing.T) {
	d, err := scenario.Wide(3, 60000, 9)
	if err != nil {
		t.Fatal(err)
	}
	covs := d.Names[:9]
	report := func(procs int) []byte {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		s := causal.FromColumns(d.Names, d.Num, d.Str).Treat("t").Outcome("y").Adjust(covs...)
		r, err := causal.BuildReport(s, causal.ReportOptions{Estimand: causal.ATE, Trim: "0.05", Bootstrap: 20, Seed: 2})
		if err != nil {
			t.Fatal(err)
		}
		b, err := json.Marshal(r)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	one, four := report(1), report(4)
	if !bytes.Equal(one, four) {
		i := 0
		for i < len(one) && i < len(four) && one[i] == four[i] {
			i++
		}
		lo := max(0, i-80)
		t.Fatalf("report JSON differs between GOMAXPROCS 1 and 4 at byte %d:\n 1: %s\n 4: %s", i, one[lo:min(len(one), i+80)], four[lo:min(len(four), i+80)])
	}
}
