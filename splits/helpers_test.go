package splits

import (
	"context"
	"database/sql"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/ingest"
	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

func testSets() []sqlfn.Set { return []sqlfn.Set{ingest.SQL(), SQL()} }

// newDB creates an empty splitsmith database and returns its path.
func newDB(t testing.TB) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "t.db")
	if err := store.Update(context.Background(), path, store.Options{SQL: testSets()}, true, store.Run{Command: "test"}, func(context.Context, *store.Tx) error { return nil }); err != nil {
		t.Fatal(err)
	}
	return path
}

// col is a user column of a test table: name and logical type.
type col struct{ name, typ string }

// makeTable creates an ingested-shaped table (DEVELOPERS.md contract) with rows of user values;
// source names the input file of every row unless sources is given per row.
func makeTable(t testing.TB, path, name string, cols []col, rows [][]any, sources []string) {
	t.Helper()
	update(t, path, func(ctx context.Context, tx *store.Tx) error {
		return insertRows(ctx, tx.Conn, name, cols, rows, sources, true)
	})
}

// appendRows adds rows to an existing test table, continuing ss_row.
func appendRows(t testing.TB, path, name string, cols []col, rows [][]any) {
	t.Helper()
	update(t, path, func(ctx context.Context, tx *store.Tx) error {
		return insertRows(ctx, tx.Conn, name, cols, rows, nil, false)
	})
}

func insertRows(ctx context.Context, c *sql.Conn, name string, cols []col, rows [][]any, sources []string, create bool) error {
	if create {
		defs := []string{"ss_row INTEGER PRIMARY KEY", "ss_source TEXT NOT NULL", "ss_line INTEGER NOT NULL", "ss_digest INTEGER NOT NULL"}
		for i, cl := range cols {
			st := map[string]string{"INTEGER": "INTEGER", "BOOLEAN": "INTEGER", "REAL": "REAL"}[cl.typ]
			if st == "" {
				st = "TEXT"
			}
			defs = append(defs, quoteIdent(cl.name)+" "+st)
			if _, err := c.ExecContext(ctx, `INSERT INTO ss_columns(table_name, position, name, logical_type, sql_type, reason, missing) VALUES(?,?,?,?,?,'test',0)`, name, i+1, cl.name, cl.typ, st); err != nil {
				return err
			}
		}
		if _, err := c.ExecContext(ctx, `CREATE TABLE `+quoteIdent(name)+`(`+strings.Join(defs, ", ")+`)`); err != nil {
			return err
		}
	}
	var start int64
	c.QueryRowContext(ctx, `SELECT coalesce(max(ss_row), 0) FROM `+quoteIdent(name)).Scan(&start)
	q := `INSERT INTO ` + quoteIdent(name) + ` VALUES(?,?,?,?` + strings.Repeat(",?", len(cols)) + `)`
	for i, r := range rows {
		dg, err := ingest.Digest(r...)
		if err != nil {
			return err
		}
		src := "data.csv"
		if sources != nil {
			src = sources[i]
		}
		args := append([]any{start + int64(i) + 1, src, start + int64(i) + 2, dg}, r...)
		if _, err := c.ExecContext(ctx, q, args...); err != nil {
			return err
		}
	}
	return nil
}

func update(t testing.TB, path string, fn func(ctx context.Context, tx *store.Tx) error) {
	t.Helper()
	if err := store.Update(context.Background(), path, store.Options{SQL: testSets()}, false, store.Run{Command: "test"}, fn); err != nil {
		t.Fatal(err)
	}
}

// split runs Split in its own transaction and returns the result or the error.
func split(t testing.TB, path string, spec Spec, replace bool) (*Result, error) {
	t.Helper()
	var res *Result
	err := store.Update(context.Background(), path, store.Options{SQL: testSets()}, false, store.Run{Command: "split"}, func(ctx context.Context, tx *store.Tx) error {
		r, err := Split(ctx, tx.Conn, &spec, Options{RunID: tx.RunID, Replace: replace})
		if err != nil {
			return err
		}
		res = r
		for _, q := range r.AuditQueries {
			if err := tx.AddAuditQuery(ctx, "split:"+spec.Name, q.Name, q.Kind, q.Description, q.SQL, q.NeedsTool); err != nil {
				return err
			}
		}
		return nil
	})
	return res, err
}

func mustSplit(t testing.TB, path string, spec Spec) *Result {
	t.Helper()
	r, err := split(t, path, spec, true)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func openDB(t testing.TB, path string) *store.DB {
	t.Helper()
	db, err := store.Open(context.Background(), path, store.Options{SQL: testSets(), ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

// assignment reads a split's rows: row_id -> "side/fold/train_from/reason".
type rowAssign struct {
	side     string
	fold, tf int64
	reason   string
}

func readRows(t testing.TB, path, name string) map[int64]rowAssign {
	t.Helper()
	db := openDB(t, path)
	rows, err := db.Query(`SELECT row_id, side, coalesce(fold, 0), coalesce(train_from, 0), reason FROM ss_split_rows WHERE split_name = ? ORDER BY row_id`, name)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	out := map[int64]rowAssign{}
	for rows.Next() {
		var id int64
		var r rowAssign
		rows.Scan(&id, &r.side, &r.fold, &r.tf, &r.reason)
		out[id] = r
	}
	return out
}

// query returns the rows of q as strings "a|b|c".
func query(t testing.TB, path, q string, args ...any) []string {
	t.Helper()
	db := openDB(t, path)
	rows, err := db.Query(q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	cols, _ := rows.Columns()
	var out []string
	for rows.Next() {
		vals := make([]any, len(cols))
		ptrs := make([]any, len(cols))
		for i := range vals {
			ptrs[i] = &vals[i]
		}
		rows.Scan(ptrs...)
		parts := make([]string, len(vals))
		for i, v := range vals {
			parts[i] = sqlfn.Render(normalize(v))
		}
		out = append(out, strings.Join(parts, "|"))
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// checkAuditQueries runs every stored check query of a split; each must return no rows.
func checkAuditQueries(t testing.TB, path, name string) {
	t.Helper()
	qs := query(t, path, `SELECT name FROM ss_audit_queries WHERE subject = ? AND kind = 'check' ORDER BY name`, "split:"+name)
	if len(qs) == 0 {
		t.Fatal("no audit queries stored")
	}
	for _, q := range qs {
		sqlText := query(t, path, `SELECT sql FROM ss_audit_queries WHERE subject = ? AND name = ?`, "split:"+name, q)[0]
		if got := query(t, path, sqlText); len(got) > 0 {
			t.Errorf("audit query %s returned %d rows on an intact split, first %s", q, len(got), got[0])
		}
	}
}

func sideCounts(rows map[int64]rowAssign) map[string]int {
	c := map[string]int{}
	for _, r := range rows {
		c[r.side]++
	}
	return c
}

var _ = fmt.Sprint

func sqlRender(v any) string { return sqlfn.Render(v) }
