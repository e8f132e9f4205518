package widgets

import (
	"os"
	"testing"
)

func TestZZFallbacks(t *testing.T) {
	if os.Getenv("CP_FB") == "" {
		t.Skip()
	}
	r := waterResults(t)
	for _, b := range chartBuilders {
		c, err := b.build(r)
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile("/tmp/fb_"+b.name+".png", c.Fallback, 0o644)
	}
	e := resultsOf(t, extrapolationStudy(t, 2000), "x", "x", "x")
	c, err := ExtrapolationPlot(e.Curve)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile("/tmp/fb_Extrapolation.png", c.Fallback, 0o644)
}
