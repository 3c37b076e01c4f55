package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

func newTestDB(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "t.db")
	err := store.Update(context.Background(), path, store.Options{SQL: sqlSets()}, true, store.Run{Command: "test"}, func(ctx context.Context, tx *store.Tx) error {
		_, err := tx.Conn.ExecContext(ctx, `CREATE TABLE pipes(x INTEGER, note TEXT); INSERT INTO pipes VALUES (1,'a'),(2,'b')`)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return path
}

func runCmd(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(append([]string{"splitsmith"}, args...), strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

func TestSQL_ReadOnlyDeniesEveryWrite(t *testing.T) {
	path := newTestDB(t)
	before, _ := os.ReadFile(path)
	for _, q := range []string{
		`INSERT INTO pipes VALUES (3,'c')`,
		`UPDATE pipes SET x = 9`,
		`DELETE FROM pipes`,
		`DROP TABLE pipes`,
		`CREATE TABLE other(y)`,
		`CREATE TEMP TABLE scratch(y)`,
		`ATTACH DATABASE 'evil.db' AS evil`,
		`PRAGMA user_version = 42`,
		`SELECT 1; DELETE FROM pipes`,
	} {
		code, _, stderr := runCmd("sql", "--db", path, "--readonly", q)
		if code != exitError || !strings.Contains(stderr, "splitsmith:") {
			t.Errorf("%s: exit %d, stderr %q; want exit 1 with a message", q, code, stderr)
		}
	}
	after, _ := os.ReadFile(path)
	if !bytes.Equal(before, after) {
		t.Error("read-only sql changed the file")
	}
	code, out, stderr := runCmd("sql", "--db", path, "--readonly", "--format", "csv", "SELECT x, note FROM pipes ORDER BY x")
	if code != 0 || out != "x,note\n1,a\n2,b\n" {
		t.Errorf("read: exit %d out %q err %q", code, out, stderr)
	}
}

func TestSQL_StatementsSplitOutsideQuotes(t *testing.T) {
	got := splitStatements("SELECT ';' AS a; -- c;\nSELECT \"x;y\" FROM t; /* ; */ SELECT 3;")
	want := []string{"SELECT ';' AS a", "-- c;\nSELECT \"x;y\" FROM t", "/* ; */ SELECT 3"}
	if strings.Join(got, "|") != strings.Join(want, "|") {
		t.Errorf("split = %q, want %q", got, want)
	}
}

// The file stays a self-contained artifact: stock sqlite3 opens it, and no schema object
// (view, index, trigger, CHECK, generated column) calls a splitsmith function.
func TestStockSQLiteOpensFile(t *testing.T) {
	path := newTestDB(t)
	assertPlainSchema(t, path)
}

// assertPlainSchema fails when a schema object uses a tool function or stock sqlite3 cannot
// read the file. Other tests call it on databases built by real commands.
func assertPlainSchema(t *testing.T, path string) {
	t.Helper()
	db, err := store.Open(context.Background(), path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	rows, err := db.Query(`SELECT name, coalesce(sql,'') FROM sqlite_schema`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	for rows.Next() {
		var name, q string
		rows.Scan(&name, &q)
		lq := strings.ToLower(stripSQLComments(q))
		for _, f := range sqlfn.All(sqlSets()...) {
			if strings.Contains(lq, f.Name+"(") {
				t.Errorf("schema object %s calls tool function %s: %s", name, f.Name, q)
			}
		}
	}
	sqlite3, err := exec.LookPath("sqlite3")
	if err != nil {
		t.Log("sqlite3 CLI not installed; skipping the stock-SQLite open check")
		return
	}
	out, err := exec.Command(sqlite3, path, "PRAGMA integrity_check; SELECT count(*) > 0 FROM ss_runs;").CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "ok\n1" {
		t.Errorf("stock sqlite3: %v: %s", err, out)
	}
}

// stripSQLComments removes -- and /* */ comments and string literals, so that only code is
// searched for function calls.
func stripSQLComments(q string) string {
	var b strings.Builder
	for i := 0; i < len(q); i++ {
		switch {
		case q[i] == '\'':
			j := strings.IndexByte(q[i+1:], '\'')
			if j < 0 {
				return b.String()
			}
			i += j + 1
			b.WriteString("''")
		case q[i] == '-' && i+1 < len(q) && q[i+1] == '-':
			j := strings.IndexByte(q[i:], '\n')
			if j < 0 {
				return b.String()
			}
			i += j
			b.WriteByte('\n')
		case q[i] == '/' && i+1 < len(q) && q[i+1] == '*':
			j := strings.Index(q[i+2:], "*/")
			if j < 0 {
				return b.String()
			}
			i += j + 3
		default:
			b.WriteByte(q[i])
		}
	}
	return b.String()
}
