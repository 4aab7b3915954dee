package main

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCapacityCommandLayout: capacity on the multi-cell example (7 sites ×
// 3 sectors = 21 cells) counts users per cell in every output — table,
// CSV (users_per_cell, layout_users, load_feasible empty) and the HTML
// report, which records the multi-cell engine that ran the search — and
// never claims a feasible load or "users in all".
func TestCapacityCommandLayout(t *testing.T) {
	dir := t.TempDir()
	report, town := filepath.Join(dir, "cap.html"), filepath.Join(dir, "town.yaml")
	if err := os.WriteFile(town, multiCellScenarioYAML, 0o644); err != nil { // fadeloop example --multi-cell
		t.Fatal(err)
	}
	args := []string{"capacity", town, "--slots", "300", "--quiet", "--direct",
		"--outage-limit", "0.2", "--min-count", "2", "--max-count", "4", "--replications", "2"}
	r := ok(t, append(args, "--report", report)...)
	for _, want := range []string{"users per cell (", "in the layout's 21 cells", "feasibility not computed in multi-cell mode",
		"Pole capacity of one cell (Gilhousen et al. 1991)", "measured in the layout"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("capacity table lacks %q:\n%s", want, r.stdout)
		}
	}
	for _, bad := range []string{"users in all", "  feasible  ", "f = 0,"} {
		if strings.Contains(r.stdout, bad) {
			t.Errorf("capacity table has %q:\n%s", bad, r.stdout)
		}
	}
	page, err := os.ReadFile(report)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"users per cell (", "fadeloop-multicell/", "2 per count"} {
		if !strings.Contains(string(page), want) {
			t.Errorf("capacity report lacks %q", want)
		}
	}
	if strings.Contains(string(page), "not recorded in this result") {
		t.Error("capacity report: engine version not recorded")
	}
	r = ok(t, append(args, "--format", "csv")...)
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	if _, ok := col["total_users"]; ok {
		t.Errorf("layout capacity CSV has total_users (it holds users per cell): %v", rows[0])
	}
	for _, row := range rows[1:] {
		per, all, feas := row[col["users_per_cell"]], row[col["layout_users"]], row[col["load_feasible"]]
		if per == "" || all == "" || feas != "" {
			t.Errorf("row %v: users_per_cell %q, layout_users %q, load_feasible %q (want empty)", row, per, all, feas)
		}
	}
}
