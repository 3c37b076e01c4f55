package leakage

import (
	"context"

	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"splitsmith/internal/store"
	"testing"
)

// procsFixture: 9,000 rows (invented inspection values), enough for the parallel paths
// (pipelined read in batches of 4,096 rows, parallel key hashing): 2% of rows copy an earlier
// row (some with the material re-cased and re-spaced), segments shared across sides, REAL
// values that are exact binary halves at 9 and 3 significant digits (left to SQLite's printf).
func procsFixture() *fixture {
	r := rand.New(rand.NewPCG(11, 12))
	f := &fixture{table: "insp", split: "s", roles: map[string]string{"train": "train", "holdout": "holdout"}, order: []string{"train", "holdout"}, groups: []string{"segment"},
		cols: []fixCol{{"segment", "TEXT", "TEXT"}, {"diameter", "REAL", "REAL"}, {"depth", "REAL", "REAL"}, {"age", "INTEGER", "INTEGER"}, {"material", "TEXT", "TEXT"}, {"failed", "INTEGER", "INTEGER"}}}
	mats := []string{"cast iron", "PVC", "ductile", "  Cast  IRON "}
	for i := 0; i < 9000; i++ {
		var row []any
		if i > 100 && r.IntN(50) == 0 {
			row = append([]any(nil), f.rows[r.IntN(i)]...)
			if r.IntN(2) == 0 {
				row[4] = mats[r.IntN(len(mats))]
			}
		} else {
			var depth any = r.NormFloat64()
			switch r.IntN(10) {
			case 0:
				depth = nil
			case 1:
				depth = float64(r.IntN(4000)*2+1) / 8 // exact halves at some digits
			case 2:
				depth = 12.5
			case 3:
				depth = float64(1<<20+r.IntN(1<<20)) + 0.125 // ten digits ending in 5: a half at 9
			}
			row = []any{fmt.Sprintf("S%05d", r.IntN(2500)), r.Float64() * 300, depth, int64(r.IntN(80)), mats[r.IntN(len(mats))], int64(r.IntN(2))}
		}
		f.rows = append(f.rows, row)
		side := "train"
		if r.IntN(5) == 0 {
			side = "holdout"
		}
		f.sides = append(f.sides, side)
	}
	return f
}

// The audit's findings (their order, rows, messages and evidence), its stored finding rows and
// the stock-SQL replay of its queries are the same with one and with two processors (the
// replay, slow on this many rows, runs on the two-processor result).
func TestAudit_SameResultsWithOneAndTwoProcs(t *testing.T) {
	orig, err := os.ReadFile(procsFixture().create(t))
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	run := func(procs int, params map[string]float64) (*Report, [][]any, map[string]int) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		n++
		path := filepath.Join(t.TempDir(), fmt.Sprintf("run%d.db", n))
		if err := os.WriteFile(path, orig, 0o644); err != nil {
			t.Fatal(err)
		}
		rep, err := runAudit(t, path, Options{Split: "s", Label: "failed", Checks: []string{"exact_duplicate", "near_duplicate_numeric", "label_conflict", "shared_entity"}, Params: params})
		if err != nil {
			t.Fatal(err)
		}
		if procs == 1 {
			return rep, dumpFindingRows(t, path), nil // the findings are compared with the 2-proc run's
		}
		return rep, dumpFindingRows(t, path), replay(t, path, "s")
	}
	for _, params := range []map[string]float64{nil, {"exact_duplicate.digits": 3}} {
		r1, rows1, _ := run(1, params)
		r2, rows2, bad := run(2, params)
		if len(r1.Findings) < 100 {
			t.Fatalf("params %v: only %d findings: the fixture should plant many", params, len(r1.Findings))
		}
		if !reflect.DeepEqual(r1.Findings, r2.Findings) {
			t.Errorf("params %v: findings differ between GOMAXPROCS 1 (%d) and 2 (%d)", params, len(r1.Findings), len(r2.Findings))
		}
		if !reflect.DeepEqual(rows1, rows2) {
			t.Errorf("params %v: ss_finding_rows or ss_finding_items differ between GOMAXPROCS 1 (%d rows) and 2 (%d rows)", params, len(rows1), len(rows2))
		}
		for name, n := range bad {
			if n != 0 {
				t.Errorf("params %v: stored query %s disagrees with the findings: %d rows", params, name, n)
			}
		}
		if len(bad) == 0 {
			t.Errorf("params %v: no stored queries", params)
		}
	}
}

func dumpFindingRows(t *testing.T, path string) [][]any {
	t.Helper()
	db := openRead(t, path)
	defer db.Close()
	rows, err := db.Query(`SELECT seq, side, row_id FROM ss_finding_rows ORDER BY audit_id, seq, side, row_id`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var out [][]any
	for rows.Next() {
		var seq, id int64
		var side string
		if err := rows.Scan(&seq, &side, &id); err != nil {
			t.Fatal(err)
		}
		out = append(out, []any{seq, side, id})
	}
	items, err := db.Query(`SELECT seq, first_row, side, item, rows FROM ss_finding_items ORDER BY audit_id, seq, first_row, side`)
	if err != nil {
		t.Fatal(err)
	}
	defer items.Close()
	for items.Next() {
		var seq, first, n int64
		var side, item string
		if err := items.Scan(&seq, &first, &side, &item, &n); err != nil {
			t.Fatal(err)
		}
		out = append(out, []any{"item", seq, first, side, item, n})
	}
	return out
}

func openRead(t *testing.T, path string) *store.DB {
	t.Helper()
	db, err := store.Open(context.Background(), path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	return db
}
