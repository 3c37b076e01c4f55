package leakage

import (
	"fmt"
	"testing"
)

// componentFixture: 10 rows grouped by the split over segment and main (constructed; the
// components are worked out by hand): {1,2} linked by main M1 (train, holdout); {3,4} by
// segment C (train only); {5,6} by segment D (holdout, train); {7,8,9} by the chain
// 7 -M4- 9 -F- 8 (holdout, train, train); row 10 is NULL in both and belongs to none.
func componentFixture() *fixture {
	f := &fixture{table: "mains", split: "g", roles: map[string]string{"train": "train", "holdout": "holdout"}, order: []string{"train", "holdout"}, groups: []string{"segment", "main"},
		cols: []fixCol{{"segment", "TEXT", "TEXT"}, {"main", "TEXT", "TEXT"}, {"x", "REAL", "REAL"}}}
	rows := []struct {
		seg, main any
		side      string
	}{
		{"A", "M1", "train"}, {"B", "M1", "holdout"}, {"C", "M2", "train"}, {"C", nil, "train"}, {"D", "M3", "holdout"},
		{"D", nil, "train"}, {"E", "M4", "holdout"}, {"F", "M5", "train"}, {"F", "M4", "train"}, {nil, nil, "holdout"},
	}
	for i, r := range rows {
		f.rows = append(f.rows, []any{r.seg, r.main, float64(i) + 0.5})
		f.sides = append(f.sides, r.side)
	}
	return f
}

// With the split's own group columns, shared_entity reports each connected component once;
// with one entity column given, column by column as before. The stored stock-SQL query
// (a recursive CTE) agrees with the findings, and detects a change of linkage.
func TestSharedEntity_ConnectedComponents(t *testing.T) {
	path := componentFixture().create(t)
	rep, err := runAudit(t, path, Options{Split: "g", Checks: []string{"shared_entity"}})
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, f := range rep.Findings {
		out = append(out, fmt.Sprintf("%s %s %v", f.Subject, f.Severity, itemsText(f.Items)))
	}
	want := "[segment+main error [segment=A@1{train:1 holdout:1} segment=D@5{train:1 holdout:1} segment=E@7{train:2 holdout:1}]]"
	if fmt.Sprint(out) != want {
		t.Errorf("findings:\n got %v\nwant %s", out, want)
	}
	if m := rep.Findings[0].Message; m != "3 of 4 entities over segment, main (75.0%) have rows on more than one side, 7 rows in all: 4 on train, 3 on holdout; e.g. segment=A (1 on train, 1 on holdout); segment=D (1 on train, 1 on holdout); segment=E (2 on train, 1 on holdout)" {
		t.Errorf("message = %q", m)
	}
	got := replay(t, path, "g")
	if n, ok := got["shared_entity.components"]; !ok || n != 0 {
		t.Errorf("replay of shared_entity.components = %d (stored: %v), want 0 rows", n, ok)
	}
	// Unlink row 9 from row 7 (main M4 -> M9): the stored query now disagrees.
	db := openRW(t, path)
	if _, err := db.Exec(`UPDATE mains SET main = 'M9' WHERE ss_row = 9`); err != nil {
		t.Fatal(err)
	}
	db.Close()
	if n := replay(t, path, "g")["shared_entity.components"]; n == 0 {
		t.Error("replay does not detect the changed linkage")
	}

	// One entity column given: per column, as before.
	path2 := componentFixture().create(t)
	rep, err = runAudit(t, path2, Options{Split: "g", Checks: []string{"shared_entity"}, Entity: []string{"main"}})
	if err != nil {
		t.Fatal(err)
	}
	out = out[:0]
	for _, f := range rep.Findings {
		out = append(out, f.Subject+" "+fmt.Sprint(itemsText(f.Items)))
	}
	if fmt.Sprint(out) != "[main [M1@1{train:1 holdout:1} M4@7{train:1 holdout:1}]]" {
		t.Errorf("per-column findings = %v", out)
	}
}
