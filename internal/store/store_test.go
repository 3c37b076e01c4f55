package store

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestUpdate_CreateCommitsAndRecordsRun(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "a.db")
	err := Update(ctx, path, Options{}, true, Run{Command: "test", Args: []string{"x"}}, func(ctx context.Context, tx *Tx) error {
		if !tx.NewFile {
			t.Error("want NewFile for a missing file")
		}
		_, err := tx.Conn.ExecContext(ctx, `CREATE TABLE t(x)`)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	db, err := Open(ctx, path, Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var cmd, args, outcome string
	if err := db.QueryRow(`SELECT command, args_json, outcome FROM ss_runs`).Scan(&cmd, &args, &outcome); err != nil {
		t.Fatal(err)
	}
	if cmd != "test" || args != `["x"]` || outcome != "ok" {
		t.Errorf("run = %q %q %q", cmd, args, outcome)
	}
	var v int
	db.QueryRow(`PRAGMA user_version`).Scan(&v)
	if v != SchemaVersion() {
		t.Errorf("user_version %d, want %d", v, SchemaVersion())
	}
	entries, _ := os.ReadDir(filepath.Dir(path))
	if len(entries) != 1 {
		t.Errorf("leftover files beside the database: %v", entries)
	}
}

func TestUpdate_ErrorLeavesNothing(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	path := filepath.Join(dir, "a.db")
	boom := errors.New("boom")
	err := Update(ctx, path, Options{}, true, Run{Command: "test"}, func(ctx context.Context, tx *Tx) error { return boom })
	if !errors.Is(err, boom) {
		t.Fatalf("err = %v", err)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 0 {
		t.Errorf("a failed create left %v", entries)
	}
	// Existing file: a failing command changes nothing.
	if err := Update(ctx, path, Options{}, true, Run{Command: "first"}, func(ctx context.Context, tx *Tx) error { return nil }); err != nil {
		t.Fatal(err)
	}
	before, _ := os.ReadFile(path)
	err = Update(ctx, path, Options{}, false, Run{Command: "second"}, func(ctx context.Context, tx *Tx) error {
		tx.Conn.ExecContext(ctx, `CREATE TABLE u(x)`)
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("err = %v", err)
	}
	after, _ := os.ReadFile(path)
	if string(before) != string(after) {
		t.Error("a failed command changed the file")
	}
}

func TestOpen_ReadOnlyDeniesWrites(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "a.db")
	if err := Update(ctx, path, Options{}, true, Run{Command: "test"}, func(ctx context.Context, tx *Tx) error {
		_, err := tx.Conn.ExecContext(ctx, `CREATE TABLE t(x); INSERT INTO t VALUES(1)`)
		return err
	}); err != nil {
		t.Fatal(err)
	}
	db, err := Open(ctx, path, Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	for _, q := range []string{`INSERT INTO t VALUES(2)`, `CREATE TEMP TABLE x(y)`, `ATTACH 'other.db' AS o`, `PRAGMA user_version=9`, `DELETE FROM t`} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("%s: want an error in read-only mode", q)
		}
	}
	var n int
	for _, q := range []string{`SELECT count(*) FROM pragma_table_info('t')`, `SELECT count(*) FROM pragma_integrity_check`, `PRAGMA user_version`} {
		if err := db.QueryRow(q).Scan(&n); err != nil {
			t.Errorf("%s: a reading pragma was refused: %v", q, err)
		}
	}
	if err := db.QueryRow(`SELECT count(*) FROM t`).Scan(&n); err != nil || n != 1 {
		t.Errorf("read: n=%d err=%v", n, err)
	}
	if err := db.QueryRow(`SELECT count(*) FROM tool_functions`).Scan(&n); err != nil {
		t.Errorf("catalog unreadable: %v", err)
	}
}

func TestOpen_RefusesNewerSchema(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "a.db")
	if err := Update(ctx, path, Options{}, true, Run{Command: "test"}, func(ctx context.Context, tx *Tx) error {
		_, err := tx.Conn.ExecContext(ctx, `PRAGMA user_version = 999`)
		return err
	}); err != nil {
		t.Fatal(err)
	}
	_, err := Open(ctx, path, Options{})
	if err == nil || !strings.Contains(err.Error(), "newer splitsmith") {
		t.Fatalf("err = %v, want a refusal naming a newer splitsmith", err)
	}
}

func TestCheckUserName(t *testing.T) {
	tests := []struct {
		name string
		ok   bool
	}{{"pipes", true}, {"ss_runs", false}, {"SS_x", false}, {"sqlite_master", false}, {"", false}, {"tool_functions", false}}
	for _, tt := range tests {
		if err := CheckUserName("table", tt.name); (err == nil) != tt.ok {
			t.Errorf("%q: err = %v", tt.name, err)
		}
	}
}

func TestUpdate_RemovesStaleBuilds(t *testing.T) {
	dir := t.TempDir()
	stale := filepath.Join(dir, ".a.db.tmp-999999999") // no such process
	if err := os.WriteFile(stale, []byte("half-built"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := Update(context.Background(), filepath.Join(dir, "a.db"), Options{}, true, Run{Command: "test"}, func(context.Context, *Tx) error { return nil }); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("stale build %s was not removed", stale)
	}
}
