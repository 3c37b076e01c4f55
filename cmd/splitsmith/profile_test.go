package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestProfile_ExitCodes checks the documented exit status of profile: 0 ok, 1 error,
// 2 usage, 3 findings at or above --fail-on.
func TestProfile_ExitCodes(t *testing.T) {
	dir := t.TempDir()
	csv := filepath.Join(dir, "r.csv")
	os.WriteFile(csv, []byte("id,x\n1,2.5\n2,3.5\n2,3.5\n"), 0o644)
	db := filepath.Join(dir, "p.db")
	call := func(args ...string) (int, string) {
		var out, errb bytes.Buffer
		code := run(append([]string{"splitsmith"}, args...), strings.NewReader(""), &out, &errb)
		return code, errb.String()
	}
	if code, e := call("ingest", "--db", db, csv); code != 0 {
		t.Fatalf("ingest: %d %s", code, e)
	}
	tests := []struct {
		name string
		args []string
		want int
	}{
		{"ok", []string{"profile", "--db", db, "--table", "r"}, exitOK},
		{"only warn, fail on error", []string{"profile", "--db", db, "--table", "r", "--fail-on", "error"}, exitOK},
		{"duplicate row, fail on warn", []string{"profile", "--db", db, "--table", "r", "--fail-on", "warn"}, exitFindings},
		{"duplicate key, fail on error", []string{"profile", "--db", db, "--table", "r", "--key", "id", "--fail-on", "error"}, exitFindings},
		{"unknown table", []string{"profile", "--db", db, "--table", "q"}, exitUsage},
		{"unknown key", []string{"profile", "--db", db, "--table", "r", "--key", "y"}, exitUsage},
		{"bad fail-on", []string{"profile", "--db", db, "--table", "r", "--fail-on", "info"}, exitUsage},
		{"no table", []string{"profile", "--db", db}, exitUsage},
		{"missing database", []string{"profile", "--db", filepath.Join(dir, "none.db"), "--table", "r"}, exitError},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if code, e := call(tt.args...); code != tt.want {
				t.Errorf("exit %d, want %d (stderr %q)", code, tt.want, e)
			}
		})
	}
}

// TestProfile_AuditQueryHolds: the stored duplicate check returns no rows right after the
// profile, and a row once the table changes.
func TestProfile_AuditQueryHolds(t *testing.T) {
	dir := t.TempDir()
	csv := filepath.Join(dir, "r.csv")
	os.WriteFile(csv, []byte("id,x\n1,2.5\n2,3.5\n2,3.5\n"), 0o644)
	db := filepath.Join(dir, "p.db")
	for _, args := range [][]string{{"ingest", "--db", db, csv}, {"profile", "--db", db, "--table", "r"}} {
		var out, errb bytes.Buffer
		if code := run(append([]string{"splitsmith"}, args...), strings.NewReader(""), &out, &errb); code != 0 {
			t.Fatalf("%v: %d %s", args, code, errb.String())
		}
	}
	count := func() int {
		d, err := openRead(context.Background(), db, false)
		if err != nil {
			t.Fatal(err)
		}
		defer d.Close()
		var q string
		if err := d.QueryRow(`SELECT sql FROM ss_audit_queries WHERE subject = 'profile:r' AND name = 'duplicate_rows'`).Scan(&q); err != nil {
			t.Fatal(err)
		}
		rows, err := d.Query(q)
		if err != nil {
			t.Fatal(err)
		}
		defer rows.Close()
		n := 0
		for rows.Next() {
			n++
		}
		return n
	}
	if n := count(); n != 0 {
		t.Fatalf("check returned %d rows right after the profile", n)
	}
	d, err := openRead(context.Background(), db, false)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := d.Exec(`DELETE FROM r WHERE ss_row = 3`); err != nil {
		t.Fatal(err)
	}
	d.Close()
	if n := count(); n != 1 {
		t.Errorf("check returned %d rows after removing the copy, want 1", n)
	}
}
