package leakage

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/ingest"
	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

// fixCol is a user column of a fixture table: name, logical type, storage type.
type fixCol struct{ name, logical, sqlType string }

// fixture is an ingested table and one split, written with plain SQL per the DEVELOPERS.md
// contract (ss_columns, ss_splits, ss_split_sides, ss_split_rows). It is the one place to
// update if the splits tables change.
type fixture struct {
	table   string
	cols    []fixCol
	rows    [][]any  // user values per row (row i has ss_row i+1)
	sides   []string // side of each row ('' = dropped)
	split   string
	roles   map[string]string // side -> role; sides in order of first appearance
	order   []string
	groups  []string
	timeCol string
	gap     string
	// noNormDigest makes a table as ingested before ss_norm_digest existed.
	noNormDigest bool
}

func sets() []sqlfn.Set { return []sqlfn.Set{ingest.SQL(), SQL()} }

func (f *fixture) create(t testing.TB) string {
	t.Helper()
	return f.createAt(t, filepath.Join(t.TempDir(), "fx.db"))
}

func (f *fixture) createAt(t testing.TB, path string) string {
	t.Helper()
	ctx := context.Background()
	err := store.Update(ctx, path, store.Options{SQL: sets()}, true, store.Run{Command: "fixture"}, func(ctx context.Context, tx *store.Tx) error {
		return f.write(ctx, tx.Conn, tx.RunID)
	})
	if err != nil {
		t.Fatal(err)
	}
	return path
}

// fillNormDigest adds ss_norm_digest as ingest stores it, computed by SQLite with the
// recomputation SQL (ingest.NormExprSQL and ingest_norm_digest): SQLite itself rounds.
func (f *fixture) fillNormDigest(ctx context.Context, c *sql.Conn) error {
	if _, err := c.ExecContext(ctx, fmt.Sprintf(`ALTER TABLE %s ADD COLUMN ss_norm_digest INTEGER`, quoteIdent(f.table))); err != nil {
		return err
	}
	var exprs []string
	for _, col := range f.cols {
		exprs = append(exprs, ingest.NormExprSQL(col.sqlType, quoteIdent(col.name)))
	}
	_, err := c.ExecContext(ctx, fmt.Sprintf(`UPDATE %s SET ss_norm_digest = ingest_norm_digest(%s)`, quoteIdent(f.table), strings.Join(exprs, ", ")))
	return err
}

func (f *fixture) write(ctx context.Context, c *sql.Conn, runID int64) (err error) {
	var defs []string
	for _, col := range f.cols {
		defs = append(defs, fmt.Sprintf("%s %s", quoteIdent(col.name), col.sqlType))
	}
	if _, err := c.ExecContext(ctx, fmt.Sprintf(`CREATE TABLE %s (ss_row INTEGER PRIMARY KEY, ss_source TEXT NOT NULL, ss_line INTEGER NOT NULL, ss_digest INTEGER NOT NULL, %s)`,
		quoteIdent(f.table), strings.Join(defs, ", "))); err != nil {
		return err
	}
	if !f.noNormDigest {
		defer func() {
			if err == nil {
				err = f.fillNormDigest(ctx, c)
			}
		}()
	}
	for i, col := range f.cols {
		if _, err := c.ExecContext(ctx, `INSERT INTO ss_columns(table_name, position, name, logical_type, sql_type, reason, missing) VALUES(?,?,?,?,?,'fixture',0)`,
			f.table, i+1, col.name, col.logical, col.sqlType); err != nil {
			return err
		}
	}
	ph := strings.TrimSuffix(strings.Repeat("?,", len(f.cols)+4), ",")
	var names []string
	for _, col := range f.cols {
		names = append(names, quoteIdent(col.name))
	}
	ins, err := c.PrepareContext(ctx, fmt.Sprintf(`INSERT INTO %s (ss_row, ss_source, ss_line, ss_digest, %s) VALUES(%s)`, quoteIdent(f.table), strings.Join(names, ", "), ph))
	if err != nil {
		return err
	}
	defer ins.Close()
	for i, r := range f.rows {
		d, err := ingest.Digest(r...)
		if err != nil {
			return err
		}
		args := append([]any{i + 1, "fixture.csv", i + 2, d}, r...)
		if _, err := ins.ExecContext(ctx, args...); err != nil {
			return err
		}
	}
	g, _ := json.Marshal(orEmpty(f.groups))
	spec, _ := json.Marshal(map[string]any{"name": f.split, "table": f.table, "group": f.groups, "time": f.timeCol, "gap": f.gap})
	var tc any
	if f.timeCol != "" {
		tc = f.timeCol
	}
	if _, err := c.ExecContext(ctx, `INSERT INTO ss_splits(split_name, table_name, strategy, spec_json, seed, run_id, table_rows, assigned_rows, dropped_rows, group_columns, time_column, table_seal, summary_json)
		VALUES(?,?,'random',?,1,?,?,?,0,?,?,'','{}')`, f.split, f.table, string(spec), runID, len(f.rows), len(f.rows), string(g), tc); err != nil {
		return err
	}
	counts := map[string]int{}
	for _, s := range f.sides {
		counts[s]++
	}
	for i, s := range f.order {
		if _, err := c.ExecContext(ctx, `INSERT INTO ss_split_sides(split_name, side, position, role, target_fraction, rows, row_fraction, digest, view_name) VALUES(?,?,?,?,NULL,?,?,'',?)`,
			f.split, s, i+1, f.roles[s], counts[s], float64(counts[s])/float64(len(f.rows)), f.split+"_"+s); err != nil {
			return err
		}
	}
	for i, s := range f.sides {
		if _, err := c.ExecContext(ctx, `INSERT INTO ss_split_rows(split_name, row_id, side) VALUES(?,?,?)`, f.split, i+1, s); err != nil {
			return err
		}
	}
	return nil
}

// audit runs Run on the fixture database in one store transaction.
func runAudit(t testing.TB, path string, opts Options) (*Report, error) {
	t.Helper()
	var rep *Report
	err := store.Update(context.Background(), path, store.Options{SQL: sets()}, false, store.Run{Command: "audit"}, func(ctx context.Context, tx *store.Tx) error {
		var err error
		rep, err = Run(ctx, tx.Conn, tx.RunID, tx, opts)
		return err
	})
	return rep, err
}

// replay runs every stored check query of the split's audit and returns the non-empty ones.
func replay(t testing.TB, path, split string) map[string]int {
	t.Helper()
	db, err := store.Open(context.Background(), path, store.Options{SQL: sets(), ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	// Stock SQL: queries that need no tool function run on a connection without any.
	stock, err := store.Open(context.Background(), path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer stock.Close()
	rows, err := db.Query(`SELECT name, sql, needs_tool FROM ss_audit_queries WHERE subject = ? AND kind = 'check' ORDER BY name`, "audit:"+split)
	if err != nil {
		t.Fatal(err)
	}
	type q struct {
		name, sql string
		tool      bool
	}
	var qs []q
	for rows.Next() {
		var x q
		rows.Scan(&x.name, &x.sql, &x.tool)
		qs = append(qs, x)
	}
	rows.Close()
	out := map[string]int{}
	for _, x := range qs {
		conn := stock
		if x.tool {
			conn = db
		}
		r, err := conn.Query(x.sql)
		if err != nil {
			t.Fatalf("query %s: %v\n%s", x.name, err, x.sql)
		}
		n := 0
		for r.Next() {
			n++
		}
		r.Close()
		out[x.name] = n
	}
	return out
}

func openRW(t testing.TB, path string) *sql.DB {
	db, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	return db
}

// replayClean fails the test for every stored check query of the split's audit that returns
// rows (on intact data each must return none), naming the case.
func replayClean(t testing.TB, path, split, name string) {
	t.Helper()
	got := replay(t, path, split)
	if len(got) == 0 {
		t.Errorf("%sno stored check queries for split %s", name, split)
	}
	for q, n := range got {
		if n != 0 {
			t.Errorf("%sstored query %s returns %d rows, want 0", name, q, n)
		}
	}
}

func replayText(t testing.TB, path, name string) string {
	db := openRW(t, path)
	defer db.Close()
	var q string
	if err := db.QueryRow(`SELECT sql FROM ss_audit_queries WHERE name = ?`, name).Scan(&q); err != nil {
		t.Fatal(err)
	}
	return q
}
