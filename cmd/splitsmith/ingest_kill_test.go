package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"splitsmith/internal/store"
)

// writeKillCSV writes a generated CSV of n rows (invented values, for this test only).
func writeKillCSV(t *testing.T, path string, n int) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	fmt.Fprintln(w, "inspection_id,segment_id,inspected_at,pressure_kpa,material,note,repaired")
	for i := 1; i <= n; i++ {
		fmt.Fprintf(w, "%d,%d,2022-%02d-%02dT08:%02d:00Z,%d.%03d,pvc,note about segment %d and its joints,%d\n",
			i, i%2000, 1+i%12, 1+i%28, i%60, 200+i%600, i%1000, i%2000, i%2)
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	f.Close()
}

// waitGrow waits until the file at path exists and is larger than size, or fails.
func waitGrow(t *testing.T, cmd *exec.Cmd, path string, size int64) {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if st, err := os.Stat(path); err == nil && st.Size() > size {
			return
		}
		if cmd.ProcessState != nil {
			t.Fatal("ingest ended before it could be killed")
		}
		time.Sleep(2 * time.Millisecond)
	}
	t.Fatalf("%s never grew past %d bytes", path, size)
}

// TestIngest_KillMidway kills an ingest with SIGKILL while it is inserting rows: into an
// existing database, the next open rolls the journal back and the file holds exactly its
// earlier tables and rows; into a fresh target, no database file appears.
func TestIngest_KillMidway(t *testing.T) {
	if testing.Short() {
		t.Skip("kill test loads 200,000 rows")
	}
	bin, err := exec.LookPath("splitsmith") // the test binary, put on PATH by testscript.Main
	if err != nil {
		t.Skip("splitsmith test command not on PATH")
	}
	dir := t.TempDir()
	big := filepath.Join(dir, "big.csv")
	writeKillCSV(t, big, 200_000)
	small := filepath.Join(dir, "small.csv")
	writeKillCSV(t, small, 50)

	t.Run("existing database", func(t *testing.T) {
		db := filepath.Join(dir, "pipes.db")
		if code := run([]string{"splitsmith", "ingest", "--db", db, "--table", "earlier", small}, nil, io.Discard, io.Discard); code != 0 {
			t.Fatalf("setup ingest: exit %d", code)
		}
		before, err := dumpDB(db)
		if err != nil {
			t.Fatal(err)
		}
		st, _ := os.Stat(db)
		cmd := exec.Command(bin, "ingest", "--db", db, "--table", "big", big)
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// Rows are being inserted once the file grows past its old size (new pages).
		waitGrow(t, cmd, db, st.Size()+256<<10)
		cmd.Process.Kill()
		cmd.Wait()
		if _, err := os.Stat(db + "-journal"); err != nil {
			t.Fatalf("no hot journal after the kill (was the ingest already done?): %v", err)
		}
		// Opening read-write rolls the hot journal back.
		sdb, err := store.Open(context.Background(), db, store.Options{SQL: sqlSets()})
		if err != nil {
			t.Fatal(err)
		}
		var ic string
		if err := sdb.QueryRow(`PRAGMA integrity_check`).Scan(&ic); err != nil || ic != "ok" {
			t.Fatalf("integrity_check = %q, %v", ic, err)
		}
		sdb.Close()
		after, err := dumpDB(db)
		if err != nil {
			t.Fatal(err)
		}
		if after != before {
			t.Errorf("database changed by a killed ingest:\nbefore:\n%s\nafter:\n%s", before, after)
		}
	})

	t.Run("fresh target", func(t *testing.T) {
		db := filepath.Join(dir, "fresh.db")
		cmd := exec.Command(bin, "ingest", "--db", db, big)
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		tmp := filepath.Join(dir, ".fresh.db.tmp-"+strconv.Itoa(cmd.Process.Pid))
		waitGrow(t, cmd, tmp, 1<<20)
		cmd.Process.Kill()
		cmd.Wait()
		if _, err := os.Stat(db); err == nil {
			t.Errorf("a killed ingest into a fresh target left %s", db)
		}
	})
}
