package main

import (
	"bytes"
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
