package widgets_test

import (
	"fmt"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/widgets"
)

func waterAudits() *causal.Study {
	return causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
}

// A chart on its own: the ECharts option, a static PNG for readers without
// scripts, and (in a notebook) kernel.Show(chart) or chart.HTML().
func ExampleSupportHistogram() {
	c, err := widgets.SupportHistogram(waterAudits().Propensity().Support())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Title)
	fmt.Println(strings.HasPrefix(string(c.Fallback), "\x89PNG"), strings.Contains(c.HTML(), widgets.ChartMarker))
	// Output:
	// Propensity scores by arm
	// true true
}

// The sweep's slider works from data embedded in the page: no kernel is
// needed once the output is saved.
func ExampleTrimmingSweep() {
	sweep := waterAudits().Propensity().Sweep(causal.IPWNormalized, causal.ATE, 0, 0.05, 0.1)
	c, err := widgets.TrimmingSweep(sweep)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Title)
	fmt.Println(strings.Contains(string(c.Controls), `type="range"`))
	fmt.Println(widgets.Headline(sweep))
	// Output:
	// Trimming sweep: IPW, normalised (Hájek), ATE
	// true
	// As α rises from 0.00 to 0.10 the ATE estimate moves from -77.65 to -87.45 while the units kept fall from 4,000 to 2,676; the optimal α of Crump et al. (2009) is 0.081.
}

// Errors are shown as a panel that names what to fix.
func ExampleView_error() {
	s := causal.Load("missing.csv").Treat("audit")
	v := widgets.View(s.Propensity())
	fmt.Println(strings.HasPrefix(v.HTML(), `<div class="cp-error"`), strings.Contains(v.HTML(), "missing.csv"))
	fmt.Println(strings.HasPrefix(v.String(), "error: "))
	// Output:
	// true true
	// true
}
