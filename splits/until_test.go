package splits

import (
	"context"
	"fmt"
	"reflect"
	"strings"
	"testing"

	"splitsmith/internal/store"
)

// --until drops rows later than TIME before the cutoff is placed by the fractions: 20
// plausible days and 3 rows dated 2091. With train=0.8 the boundary is the row at position
// round(0.8·20) = 16 of the plausible rows (2024-01-17), not round(0.8·23) = 18.
// Entity "a" straddles TIME: only its 2091 row is dropped, its 2024 rows stay on their sides.
func TestSplit_UntilDropsLaterRowsFirst(t *testing.T) {
	path := newDB(t)
	var rows [][]any
	for i := 0; i < 20; i++ {
		g := fmt.Sprintf("g%02d", i)
		if i < 3 {
			g = "a"
		}
		rows = append(rows, []any{g, fmt.Sprintf("2024-01-%02d", i+1)})
	}
	rows = append(rows, []any{"a", "2091-01-05"}, []any{"z", "2091-03-09"}, []any{"y", "2091-11-30T08:00:00Z"})
	makeTable(t, path, "u", []col{{"g", "TEXT"}, {"d", "DATE"}}, rows, nil)
	for _, sp := range []Spec{
		{Name: "u", Table: "u", Time: "d", Until: "2026-12-31"},
		{Name: "ug", Table: "u", Time: "d", Until: "2026-12-31", Group: []string{"g"}, Span: "earlier"},
	} {
		res := mustSplit(t, path, sp)
		got := readRows(t, path, sp.Name)
		for id, a := range got {
			day := rows[id-1][1].(string)
			var want rowAssign
			switch {
			case day > "2026":
				want = rowAssign{reason: "after_until"}
			case day >= "2024-01-17":
				want = rowAssign{side: "holdout"}
			default:
				want = rowAssign{side: "train"}
			}
			if a != want {
				t.Errorf("%s: row %d (%s, %s) = %+v, want %+v", sp.Name, id, rows[id-1][0], day, a, want)
			}
		}
		if res.Dropped["after_until"] != 3 || res.Assigned != 20 || res.Sides[1].Rows != 4 {
			t.Errorf("%s: dropped %v, assigned %d, holdout %d rows", sp.Name, res.Dropped, res.Assigned, res.Sides[1].Rows)
		}
		if !strings.Contains(res.SpecJSON, `"until":"2026-12-31"`) {
			t.Errorf("%s: stored spec %s has no until", sp.Name, res.SpecJSON)
		}
		if rep := verify(t, path, sp.Name); !rep.Intact {
			t.Errorf("%s: does not verify: %+v", sp.Name, rep.Changes)
		}
		checkAuditQueries(t, path, sp.Name)
	}
	// The until check is not vacuous: a training row moved past TIME is reported.
	update(t, path, func(ctx context.Context, tx *store.Tx) error {
		_, err := tx.Conn.ExecContext(ctx, `UPDATE u SET d = '2091-01-01' WHERE ss_row = 1`)
		return err
	})
	sqlText := query(t, path, `SELECT sql FROM ss_audit_queries WHERE subject = 'split:u' AND name = 'until'`)[0]
	if got := query(t, path, sqlText); len(got) != 1 || !strings.HasPrefix(got[0], "1|train|") {
		t.Errorf("until check after moving row 1 past TIME: %v", got)
	}
	if rep := verify(t, path, "u"); rep.Intact || rep.Counts["moved"] == 0 {
		t.Errorf("verify after moving row 1 past TIME: %+v", rep.Counts)
	}
}

// Rolling-origin folds after --until: the 12 plausible rows give the folds scikit-learn's
// TimeSeriesSplit gives for 12 rows (the same reference values as
// TestSplit_RollingOriginMatchesTimeSeriesSplit: n_splits=3, test_size=2, gap=2), and the
// two later rows are dropped as after_until. Numeric time column.
func TestSplit_UntilRollingNumeric(t *testing.T) {
	wantTrain := [][]int{{0, 1, 2, 3}, {0, 1, 2, 3, 4, 5}, {0, 1, 2, 3, 4, 5, 6, 7}}
	wantTest := [][]int{{6, 7}, {8, 9}, {10, 11}}
	path := newDB(t)
	var rows [][]any
	for _, i := range []int{5, 0, 11, 90, 3, 8, 1, 10, 2, 7, 4, 99, 9, 6} {
		rows = append(rows, []any{int64(i)})
	}
	makeTable(t, path, "n", []col{{"t", "INTEGER"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "r", Table: "n", Time: "t", Until: "11", Folds: 3, TestSize: 2, GapRows: 2})
	got := readRows(t, path, "r")
	for id, a := range got {
		if i := rows[id-1][0].(int64); i > 11 && a != (rowAssign{reason: "after_until"}) {
			t.Errorf("row t=%d after --until 11: %+v", i, a)
		}
	}
	for k := 1; k <= 3; k++ {
		train, test := foldMembers(got, rows, k) // rows after --until are in neither
		if !reflect.DeepEqual(train, wantTrain[k-1]) || !reflect.DeepEqual(test, wantTest[k-1]) {
			t.Errorf("fold %d: train %v test %v, want %v %v (TimeSeriesSplit)", k, train, test, wantTrain[k-1], wantTest[k-1])
		}
	}
	if res.Dropped["after_until"] != 2 {
		t.Errorf("dropped %v", res.Dropped)
	}
	if rep := verify(t, path, "r"); !rep.Intact {
		t.Errorf("does not verify: %+v", rep.Changes)
	}
	checkAuditQueries(t, path, "r")
}

func TestSpec_UntilErrors(t *testing.T) {
	for _, tt := range []struct {
		spec Spec
		want string
	}{
		{Spec{Name: "a", Table: "t", Until: "2026-12-31"}, "--until: needs --time"},
		{Spec{Name: "a", Table: "t", Time: "d", Until: "next year"}, `--until: "next year" is not a date`},
		{Spec{Name: "a", Table: "t", Time: "d", Until: "2026-02-30"}, `--until: "2026-02-30" is not a date`},
	} {
		if err := tt.spec.Resolve(); err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%+v: err = %v, want %q", tt.spec, err, tt.want)
		}
	}
	path := newDB(t)
	makeTable(t, path, "n", []col{{"t", "INTEGER"}}, [][]any{{int64(1)}, {int64(2)}}, nil)
	if _, err := split(t, path, Spec{Name: "a", Table: "n", Time: "t", Until: "2026-12-31"}, false); err == nil || !strings.Contains(err.Error(), `--until: "2026-12-31" is not a number like the values of "t"`) {
		t.Errorf("date until on a numeric time: %v", err)
	}
	if _, err := split(t, path, Spec{Name: "a", Table: "n", Time: "t", Cutoff: "2", Until: "1"}, false); err == nil || !strings.Contains(err.Error(), `--until: "1" is before --cutoff "2"`) {
		t.Errorf("until before cutoff: %v", err)
	}
	if _, err := split(t, path, Spec{Name: "a", Table: "n", Time: "t", Until: "0"}, false); err == nil || !strings.Contains(err.Error(), "no row has a usable time at or before --until 0") {
		t.Errorf("until before every row: %v", err)
	}
}
