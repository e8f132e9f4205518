// Package kernel is the only part of counterpart that talks to Jupyter, through
// the GoNB kernel: it sends results to the notebook as display messages
// (Show), reports progress of long work (Progress, Load) and finds the
// pinned ECharts build that the charts need offline. Outside a notebook the
// same calls print plain text, so a cell's code runs unchanged in a terminal
// or a test.
//
// A notebook cell:
//
//	import (
//		"github.com/counterpartlab/counterpart/causal"
//		"github.com/counterpartlab/counterpart/kernel"
//	)
//
//	%%
//	study := kernel.Load("testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
//		Outcome("litres_per_day").Adjust("lot_m2", "pool", "district")
//	scores := study.Propensity()
//	kernel.Show(scores, scores.Support(), scores.Verdict(causal.VerdictOptions{}))
//
// Each shown value becomes one display message carrying text/html (the
// widgets view) and text/plain (its String form). A result that failed is
// shown as an error panel naming the column, row or option to fix.
//
// The subpackage jupyter installs the kernelspec and runs notebooks headless;
// the command kernel/cmd/counterpart (setup, run, report, demo) is built on it.
package kernel
