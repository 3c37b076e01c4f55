package splits

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"testing"

	"splitsmith/ingest"

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

// verify checks ss_norm_digest too (the audit reads it in place of the feature values). The
// digest is filled by SQLite itself with ingest's recomputation SQL, so SQLite's printf is
// the reference; the values include REALs at an exact half at 9 significant digits
// (123456789.5, 2.5e-7·5), which Go leaves to SQLite, so verify's SQLite fix-ups run.
func TestVerify_NormDigest(t *testing.T) {
	path := newDB(t)
	cols := []col{{"name", "TEXT"}, {"x", "REAL"}, {"n", "INTEGER"}}
	var rows [][]any
	for i := 0; i < 40; i++ {
		var x any = float64(i) + 0.25
		switch i % 4 {
		case 1:
			x = 123456789.5 + float64(i)
		case 2:
			x = nil
		}
		rows = append(rows, []any{fmt.Sprintf("  Seg %02d ", i%7), x, int64(i * 3)})
	}
	makeTable(t, path, "t", cols, rows, nil)
	var exprs []string
	for _, c := range cols {
		st := map[string]string{"INTEGER": "INTEGER", "REAL": "REAL"}[c.typ]
		if st == "" {
			st = "TEXT"
		}
		exprs = append(exprs, ingest.NormExprSQL(st, quoteIdent(c.name)))
	}
	exec(t, path, `ALTER TABLE t ADD COLUMN ss_norm_digest INTEGER`)
	exec(t, path, `UPDATE t SET ss_norm_digest = ingest_norm_digest(`+strings.Join(exprs, ", ")+`)`)
	mustSplit(t, path, Spec{Name: "v", Table: "t", Seed: 4})
	if rep := verify(t, path, "v"); !rep.Intact {
		t.Fatalf("fresh split does not verify: %+v", rep.Changes)
	}
	checkAuditQueries(t, path, "v") // row_norm_digests among them
	exec(t, path, `UPDATE t SET ss_norm_digest = ss_norm_digest + 1 WHERE ss_row = 6`)
	q := query(t, path, `SELECT sql FROM ss_audit_queries WHERE subject = 'split:v' AND name = 'row_norm_digests'`)
	if len(q) != 1 || fmt.Sprint(query(t, path, q[0])) != "[6|data.csv|7]" {
		t.Errorf("row_norm_digests after the change: %v", query(t, path, q[0]))
	}
	rep := verify(t, path, "v")
	if rep.Intact || len(rep.Changes) != 1 || rep.Changes[0].RowID != 6 || !strings.Contains(rep.Changes[0].Detail, "normalised digest no longer matches") {
		t.Errorf("altered ss_norm_digest: %+v", rep.Changes)
	}
}
