package widgets_test

import (
	"fmt"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/counterpartlab/counterpart/widgets"
)

func waterFive() *causal.Scores {
	return causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").Outcome("litres_per_day").
		Adjust("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd").Propensity()
}

// The matched-pairs chart of 1:1 matching for the ATT within 0.2 SD of the
// logit score (Austin 2011), and the view a notebook shows for the match.
func ExampleMatchedPairs() {
	m := waterFive().Match(causal.MatchOptions{Caliper: causal.AustinCaliper})
	c, err := widgets.MatchedPairs(m)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Title)
	fmt.Println(widgets.Headline(m))
	fmt.Println(strings.Contains(widgets.HTML(m), widgets.ChartMarker))
	// Output:
	// Matched sets on the logit score (ATT)
	// Matching for the ATT matched 1,000 of 1,048 units; 48 treated units (4.6%) found none within the caliper: they lack support, and the estimate describes the matched units only; largest |SMD| after matching 0.211.
	// true
}

func ExampleStrataCounts() {
	st := waterFive().Subclassify(0)
	c, err := widgets.StrataCounts(st)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Title)
	fmt.Println(widgets.Headline(st))
	// Output:
	// Units per score stratum
	// Every one of the 5 score strata holds both arms: subclassification supports the ATE, ATT and ATC on these scores.
}
