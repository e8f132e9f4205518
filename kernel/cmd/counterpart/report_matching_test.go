package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReportMatchingEstimates: with --estimand ATT the report's estimates
// include nearest_neighbour_matching and subclassification, equal to the R
// script testdata/reference/matching_reference.R (1e-9); --caliper 0.2
// restricts matching on the water-audit scenario and says so in a flag, and
// the HTML report shows the matching and strata views.
func TestReportMatchingEstimates(t *testing.T) {
	dir := t.TempDir()
	js := filepath.Join(dir, "r.json")
	if r := runCmd(t, "report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", nswCovs,
		"--estimand", "ATT", "--json", js); r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	m := validate(t, js)
	var ref struct {
		Matching []struct {
			Estimand  string
			K         int
			Value, SE float64
		}
		Subclassification struct {
			Estimates []struct {
				Estimand  string
				Value, SE float64
			}
		}
	}
	b, err := os.ReadFile("../../../testdata/reference/matching_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	want := map[string][2]float64{"nearest_neighbour_matching": {ref.Matching[0].Value, ref.Matching[0].SE}}
	for _, e := range ref.Subclassification.Estimates {
		if e.Estimand == "ATT" {
			want["subclassification"] = [2]float64{e.Value, e.SE}
		}
	}
	found := 0
	for _, e := range m["estimates"].([]any) {
		ee := e.(map[string]any)
		if w, ok := want[ee["estimator"].(string)]; ok {
			found++
			if ee["estimand"] != "ATT" || !rel(ee["value"].(float64), w[0], 1e-9) || !rel(ee["se"].(float64), w[1], 1e-9) {
				t.Errorf("%v %v: %v (se %v); R %v (se %v)", ee["estimator"], ee["estimand"], ee["value"], ee["se"], w[0], w[1])
			}
		}
	}
	if found != 2 {
		t.Errorf("%d of the 2 estimates found", found)
	}

	js2 := filepath.Join(dir, "w.json")
	r := runCmd(t, "report", "--data", "../../../testdata/water_audits.csv", "--treatment", "audit", "--treated-level", "yes",
		"--outcome", "litres_per_day", "--covariates", "household_size,lot_m2,home_age,pool,last_summer_lpd",
		"--estimand", "ATT", "--caliper", "0.2", "--json", js2, "--html", filepath.Join(dir, "w.html"))
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	if !strings.Contains(r.stdout, "nearest_neighbour_matching") {
		t.Errorf("summary lacks the matching estimate:\n%s", r.stdout)
	}
	if h, err := os.ReadFile(filepath.Join(dir, "w.html")); err != nil || !strings.Contains(string(h), `data-cp-view="matching"`) ||
		!strings.Contains(string(h), "Who the unmatched treated units are") || !strings.Contains(string(h), `data-cp-view="strata"`) {
		t.Errorf("the HTML report lacks the matching and strata views (%v)", err)
	}
	for _, e := range validate(t, js2)["estimates"].([]any) {
		ee := e.(map[string]any)
		if ee["estimator"] == "nearest_neighbour_matching" {
			if b, _ := json.Marshal(ee["flags"]); !strings.Contains(string(b), "restricted_population") {
				t.Errorf("caliper 0.2 on the water audits leaves treated unmatched; flags %s", b)
			}
		}
	}
	if r := runCmd(t, "report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", nswCovs, "--caliper", "-1"); r.code != 1 || !strings.Contains(r.stderr, "--caliper") {
		t.Errorf("--caliper -1: exit %d, %s", r.code, r.stderr)
	}
}
