package splits

import (
	"context"
	"strconv"
	"testing"

	"splitsmith/internal/store"
)

func verify(t *testing.T, path, name string) *Report {
	t.Helper()
	db := openDB(t, path)
	conn, err := db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	rep, err := Verify(context.Background(), conn, name)
	if err != nil {
		t.Fatal(err)
	}
	return rep
}

func exec(t *testing.T, path, q string) {
	t.Helper()
	update(t, path, func(ctx context.Context, tx *store.Tx) error {
		_, err := tx.Conn.ExecContext(ctx, q)
		return err
	})
}

func TestVerify_DetectsEveryChange(t *testing.T) {
	specs := []Spec{
		{Name: "v", Table: "t", Seed: 4},
		{Name: "v", Table: "t", Seed: 4, Group: []string{"grp"}, Folds: 3},
		{Name: "v", Table: "t", Seed: 4, Stratify: "cls"},
		{Name: "v", Table: "t", Seed: 4, Time: "day", Gap: "5d"},
		{Name: "v", Table: "t", Seed: 4, Time: "day", Folds: 3, GapRows: 4},
	}
	for _, sp := range specs {
		t.Run(sp.Strategy()+sp.FoldScheme(), func(t *testing.T) {
			path := newDB(t)
			makeTable(t, path, "t", genCols, genRows(7, 600, 80, 1), nil)
			mustSplit(t, path, sp)
			if rep := verify(t, path, "v"); !rep.Intact {
				t.Fatalf("fresh split does not verify: %+v", rep.Changes)
			}
			var holdoutRow string
			if h := query(t, path, `SELECT min(row_id) FROM ss_split_rows WHERE split_name = 'v' AND side = (SELECT side FROM ss_split_sides WHERE split_name = 'v' ORDER BY position DESC LIMIT 1)`); len(h) > 0 {
				holdoutRow = h[0]
			}
			// Tamper with one value of a holdout row with plain SQL.
			exec(t, path, `UPDATE t SET x = x + 1 WHERE ss_row = `+holdoutRow)
			rep := verify(t, path, "v")
			if rep.Intact || rep.Counts["changed"] != 1 || rep.Changes[0].Kind != "changed" || itoa(rep.Changes[0].RowID) != holdoutRow || rep.Changes[0].Source == "" {
				t.Errorf("tampered value: %+v", rep.Changes)
			}
			// Move a row by hand, add one and delete one.
			exec(t, path, `UPDATE t SET x = x - 1 WHERE ss_row = `+holdoutRow)
			exec(t, path, `UPDATE ss_split_rows SET side = CASE side WHEN 'train' THEN 'holdout' ELSE 'train' END WHERE split_name = 'v' AND row_id = 10`)
			exec(t, path, `INSERT INTO t SELECT 601, 'late.csv', 2, ss_digest, id, grp, cls, day, x FROM t WHERE ss_row = 5`)
			exec(t, path, `DELETE FROM t WHERE ss_row = 20`)
			rep = verify(t, path, "v")
			if rep.Counts["moved"] < 1 || rep.Counts["added"] != 1 || rep.Counts["removed"] != 1 || rep.Counts["count"] == 0 {
				t.Errorf("counts %v", rep.Counts)
			}
			found := false
			for _, c := range rep.Changes {
				if c.Kind == "moved" && c.RowID == 10 {
					found = true
				}
			}
			if !found {
				t.Errorf("row 10 moved by hand not reported: %+v", rep.Changes)
			}
			// The seal catches a digest rewritten to match tampered values.
			exec(t, path, `DELETE FROM t WHERE ss_row = 601`)
			exec(t, path, `INSERT INTO t SELECT 20, 'data.csv', 21, 0, 0, 'G', 'a', '2020-01-01', 0`)
			exec(t, path, `UPDATE t SET ss_digest = ingest_digest(id, grp, cls, day, x) WHERE ss_row = 20`)
			rep = verify(t, path, "v")
			if rep.Counts["seal"] == 0 {
				t.Errorf("re-digested row: no seal mismatch: %v", rep.Counts)
			}
		})
	}
}

func itoa(i int64) string { return strconv.FormatInt(i, 10) }
