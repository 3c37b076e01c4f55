package ingest

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/internal/store"
)

// makeTable creates an ingested-shaped table by plain SQL per the DEVELOPERS.md contract
// (ss_row, ss_source, ss_line, ss_digest, user columns; rows in ss_columns). Each row's
// values are given in column order; line = row + 1 (header on line 1).
func makeTable(t testing.TB, conn *sql.Conn, name string, cols []string, logical []string, rows [][]any) {
	t.Helper()
	ctx := context.Background()
	sqlTypeOf := func(l string) string {
		switch l {
		case "INTEGER", "BOOLEAN":
			return "INTEGER"
		case "REAL":
			return "REAL"
		}
		return "TEXT"
	}
	var defs []string
	for i, c := range cols {
		defs = append(defs, profQuote(c)+" "+sqlTypeOf(logical[i]))
	}
	if _, err := conn.ExecContext(ctx, `CREATE TABLE `+profQuote(name)+`(ss_row INTEGER PRIMARY KEY, ss_source TEXT NOT NULL, ss_line INTEGER NOT NULL, ss_digest INTEGER NOT NULL, `+strings.Join(defs, ", ")+`)`); err != nil {
		t.Fatal(err)
	}
	for i, c := range cols {
		sqlType := sqlTypeOf(logical[i])
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_columns(table_name, position, name, logical_type, sql_type, reason, missing) VALUES(?,?,?,?,?,?,0)`, name, i+1, c, logical[i], sqlType, "test"); err != nil {
			t.Fatal(err)
		}
	}
	ph := strings.TrimSuffix(strings.Repeat("?,", len(cols)+4), ",")
	for i, r := range rows {
		d, err := Digest(r...)
		if err != nil {
			t.Fatal(err)
		}
		args := append([]any{i + 1, "in.csv", i + 2, d}, r...)
		if _, err := conn.ExecContext(ctx, `INSERT INTO `+profQuote(name)+` VALUES(`+ph+`)`, args...); err != nil {
			t.Fatal(err)
		}
	}
}

// withTx runs fn in a store transaction on a fresh database.
func withTx(t testing.TB, fn func(ctx context.Context, tx *store.Tx) error) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "t.db")
	err := store.Update(context.Background(), path, store.Options{}, true, store.Run{Command: "test"}, fn)
	if err != nil {
		t.Fatal(err)
	}
	return path
}

func findingsOf(res *ProfileResult, check, column string) []ProfileFinding {
	var out []ProfileFinding
	for _, f := range res.Findings {
		if f.Check == check && f.Column == column {
			out = append(out, f)
		}
	}
	return out
}

func TestProfile_Findings(t *testing.T) {
	cols := []string{"id", "moisture", "material", "plant", "inspected", "reading", "flag"}
	logical := []string{"INTEGER", "TEXT", "TEXT", "TEXT", "TEXT", "REAL", "BOOLEAN"}
	var rows [][]any
	materials := []string{"cast iron", "ductile iron", "PVC", "steel"}
	for i := 0; i < 150; i++ {
		date := fmt.Sprintf("2020-%02d-%02d", i%12+1, i%28+1)
		rows = append(rows, []any{int64(i + 1), fmt.Sprintf("%d.%d", 10+i%20, i%10), materials[i%4], "north", date, float64(50 + i%7), int64(i % 2)})
	}
	// Planted: three non-numbers in a numeric-looking TEXT column (lines 152..154), a
	// case/whitespace variant, an impossible date, a far outlier, a missing value.
	rows = append(rows,
		[]any{int64(151), "calm", "Cast Iron", "north", "2019-02-30", 51.0, int64(0)},
		[]any{int64(152), "7,4", " cast iron", "north", "2020-01-02", 52.0, int64(1)},
		[]any{int64(153), "81F", "cast iron", "north", "2020-01-03", 5000.0, nil},
	)
	// An exact copy of row 5 (twice-imported) and of row 6 twice.
	rows = append(rows, rows[4], rows[5], rows[5])
	var res *ProfileResult
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "readings", cols, logical, rows)
		var err error
		res, err = Profile(ctx, tx.Conn, ProfileOptions{Table: "readings", Key: []string{"id"}})
		if err != nil {
			return err
		}
		return StoreProfile(ctx, tx.Conn, tx.RunID, res)
	})
	if res.Rows != 156 {
		t.Fatalf("rows %d", res.Rows)
	}

	// type_conformity on a TEXT column: 150 numbers and "calm", "7,4", "81F" with their lines.
	tc := findingsOf(res, "type_conformity", "moisture")
	if len(tc) != 1 || tc[0].Count != 3 || tc[0].Severity != SeverityWarn {
		t.Fatalf("moisture conformity: %+v", tc)
	}
	got := map[string]int64{}
	for _, e := range tc[0].Examples {
		got[e.Value.(string)] = e.Lines[0]
	}
	if got["calm"] != 152 || got["7,4"] != 153 || got["81F"] != 154 {
		t.Errorf("nonconforming values and lines: %v", got)
	}
	moist := res.Columns[1]
	if moist.Kind != kindNumber || moist.Conforming != 153 || moist.Nonconforming != 3 || moist.Mean == nil {
		t.Errorf("moisture profile %+v", moist)
	}

	// A date column stored as TEXT with one impossible date.
	tc = findingsOf(res, "type_conformity", "inspected")
	if len(tc) != 1 || tc[0].Count != 1 || tc[0].Examples[0].Value != "2019-02-30" || tc[0].Examples[0].Lines[0] != 152 {
		t.Errorf("date conformity: %+v", tc)
	}
	if res.Columns[4].Kind != kindDate || res.Columns[4].Min != "2020-01-01" {
		t.Errorf("date column: %+v", res.Columns[4])
	}

	// Case and whitespace variants of "cast iron".
	cv := findingsOf(res, "case_variants", "material")
	if len(cv) != 1 || !strings.Contains(cv[0].Message, `"Cast Iron"`) || !strings.Contains(cv[0].Message, `" cast iron"`) {
		t.Errorf("case variants: %+v", cv)
	}

	// Constant column.
	if c := findingsOf(res, "constant", "plant"); len(c) != 1 {
		t.Errorf("constant: %+v", c)
	}

	// Far outlier 5000 (line 154) in reading.
	o := findingsOf(res, "outliers", "reading")
	if len(o) != 1 || o[0].Severity != SeverityWarn || o[0].Examples[0].Value != 5000.0 || o[0].Examples[0].Lines[0] != 154 {
		t.Errorf("outliers: %+v", o)
	}

	// Missing flag (info).
	if m := findingsOf(res, "missing", "flag"); len(m) != 1 || m[0].Count != 1 || m[0].Severity != SeverityInfo || m[0].Examples[0].Lines[0] != 154 {
		t.Errorf("missing: %+v", m)
	}

	// Duplicates: row 5 copied once, row 6 copied twice: 3 extra rows in 2 groups.
	if res.DuplicateRows != 3 || res.DuplicateGroups != 2 {
		t.Errorf("duplicates %d rows in %d groups", res.DuplicateRows, res.DuplicateGroups)
	}
	d := findingsOf(res, "duplicate_rows", "")
	if len(d) != 1 || fmt.Sprint(d[0].Examples[0].Rows) != "[5 154]" || fmt.Sprint(d[0].Examples[1].Rows) != "[6 155 156]" {
		t.Errorf("duplicate groups: %+v", d)
	}
	// The copies repeat ids 5 and 6: duplicate_key is an error.
	k := findingsOf(res, "duplicate_key", "")
	if len(k) != 1 || k[0].Severity != SeverityError || k[0].Count != 5 || res.Worst() != SeverityError {
		t.Errorf("duplicate key: %+v", k)
	}
	// id is not id-like because of the copies; no id_like finding.
	if f := findingsOf(res, "id_like", "id"); len(f) != 0 {
		t.Errorf("id_like: %+v", f)
	}
	// Errors sort first.
	if res.Findings[0].Severity != SeverityError {
		t.Errorf("first finding %+v", res.Findings[0])
	}
}

func TestProfile_StatsMatchGo(t *testing.T) {
	// The profile's SQL path must give what the Go functions give on the same values.
	x := readNIST(t, "Michelso")
	var rows [][]any
	for i, v := range x {
		rows = append(rows, []any{int64(i + 1), v})
	}
	var res *ProfileResult
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "light", []string{"id", "speed"}, []string{"INTEGER", "REAL"}, rows)
		var err error
		res, err = Profile(ctx, tx.Conn, ProfileOptions{Table: "light"})
		return err
	})
	c := res.Columns[1]
	m, s := MeanSD(x)
	q := Quantiles(x, 0.05, 0.25, 0.5, 0.75, 0.95)
	if *c.Mean != m || *c.SD != s || c.P05 != q[0] || c.Q1 != q[1] || c.Median != q[2] || c.Q3 != q[3] || c.P95 != q[4] {
		t.Errorf("column %+v; Go mean %v sd %v quantiles %v", c, m, s, q)
	}
	// NIST StRD Michelso.dat certified mean 299.852400000000 and s 0.0790105478190518.
	if lre(*c.Mean, 299.852400000000) < 15 || lre(*c.SD, 0.0790105478190518) < 13.5 {
		t.Errorf("mean %v sd %v", *c.Mean, *c.SD)
	}
	if f := findingsOf(res, "id_like", "id"); len(f) != 1 {
		t.Errorf("id_like: %+v", res.Findings)
	}
	if math.IsNaN(*c.SD) {
		t.Error("sd NaN")
	}
}

func TestProfile_UsageErrors(t *testing.T) {
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "pipes", []string{"a"}, []string{"INTEGER"}, [][]any{{int64(1)}})
		if _, err := tx.Conn.ExecContext(ctx, `CREATE TABLE other(x)`); err != nil {
			return err
		}
		tests := []struct {
			name string
			opts ProfileOptions
			want string
		}{
			{"unknown table", ProfileOptions{Table: "pipez"}, `unknown table "pipez" (ingested tables: pipes)`},
			{"not ingested", ProfileOptions{Table: "other"}, `"other" was not loaded by splitsmith ingest`},
			{"unknown key", ProfileOptions{Table: "pipes", Key: []string{"b"}}, `--key: table "pipes" has no column "b"`},
			{"key twice", ProfileOptions{Table: "pipes", Key: []string{"a", "a"}}, `column "a" given twice`},
		}
		for _, tt := range tests {
			_, err := Profile(ctx, tx.Conn, tt.opts)
			if !errors.Is(err, ErrProfileUsage) || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("%s: %v", tt.name, err)
			}
		}
		return nil
	})
}

func TestProfile_EmptyAndAllMissing(t *testing.T) {
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "e", []string{"a", "b"}, []string{"INTEGER", "TEXT"}, [][]any{{int64(1), nil}, {int64(2), nil}})
		res, err := Profile(ctx, tx.Conn, ProfileOptions{Table: "e"})
		if err != nil {
			return err
		}
		if f := findingsOf(res, "all_missing", "b"); len(f) != 1 || res.Columns[1].Kind != kindEmpty {
			t.Errorf("all missing: %+v", res.Findings)
		}
		return StoreProfile(ctx, tx.Conn, tx.RunID, res)
	})
}

// benchProfileDB builds a 100,000-row ingested-shaped table of demo-like columns once.
func benchProfileDB(b *testing.B) *store.DB {
	b.Helper()
	path := filepath.Join(b.TempDir(), "bench.db")
	materials := []string{"cast iron", "ductile iron", "PVC", "steel", "HDPE"}
	err := store.Update(context.Background(), path, store.Options{}, true, store.Run{Command: "bench"}, func(ctx context.Context, tx *store.Tx) error {
		var rows [][]any
		for i := 0; i < 100000; i++ {
			x := float64((i*7919)%10007) / 100
			rows = append(rows, []any{int64(i + 1), fmt.Sprintf("SEG-%05d", i%2000), x, fmt.Sprintf("%.1f", x/3), materials[i%5],
				fmt.Sprintf("2020-%02d-%02d", i%12+1, i%28+1), fmt.Sprintf("note %d about joint %d", i%9000, i%37)})
		}
		makeTable(b, tx.Conn, "t", []string{"id", "segment", "wall", "moisture", "material", "day", "note"},
			[]string{"INTEGER", "TEXT", "REAL", "TEXT", "TEXT", "DATE", "TEXT"}, rows)
		return nil
	})
	if err != nil {
		b.Fatal(err)
	}
	db, err := store.Open(context.Background(), path, store.Options{ReadOnly: true})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { db.Close() })
	return db
}

// BenchmarkProfile is the whole profile of a 100k-row, 7-column table; compare it with
// BenchmarkProfileBaselineSQL in the same run (ratio = ns/op of this / of the baseline).
func BenchmarkProfile(b *testing.B) {
	db := benchProfileDB(b)
	ctx := context.Background()
	conn, err := db.Conn(ctx)
	if err != nil {
		b.Fatal(err)
	}
	defer conn.Close()
	for b.Loop() {
		if _, err := Profile(ctx, conn, ProfileOptions{Table: "t"}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkProfileBaselineSQL is the baseline: plain SQL count, count(DISTINCT), min, max and
// avg of every column of the same table (no quantiles, outliers, conformity or duplicates).
func BenchmarkProfileBaselineSQL(b *testing.B) {
	db := benchProfileDB(b)
	for b.Loop() {
		for _, c := range []string{"id", "segment", "wall", "moisture", "material", "day", "note"} {
			var n, d int64
			var lo, hi, avg any
			if err := db.QueryRow(`SELECT count(`+c+`), count(DISTINCT `+c+`), min(`+c+`), max(`+c+`), avg(`+c+`) FROM t`).Scan(&n, &d, &lo, &hi, &avg); err != nil {
				b.Fatal(err)
			}
		}
	}
}

func TestProfile_TimestampBooleanAndInfinity(t *testing.T) {
	var rows [][]any
	for i := 0; i < 40; i++ {
		rows = append(rows, []any{fmt.Sprintf("2024-03-01T08:%02d:00Z", i), int64(i % 2), float64(i)})
	}
	rows = append(rows, []any{"2024-03-01T09:00:00Z", int64(1), math.Inf(1)})
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "ts", []string{"at", "ok", "x"}, []string{"TIMESTAMP", "BOOLEAN", "REAL"}, rows)
		res, err := Profile(ctx, tx.Conn, ProfileOptions{Table: "ts"})
		if err != nil {
			return err
		}
		at, ok, x := res.Columns[0], res.Columns[1], res.Columns[2]
		if at.Kind != kindTimestamp || at.Min != "2024-03-01T08:00:00Z" || at.Max != "2024-03-01T09:00:00Z" || at.Mean != nil {
			t.Errorf("timestamp column %+v", at)
		}
		if ok.Kind != kindBoolean || *ok.Mean != 21.0/41 || ok.Outliers != nil || ok.Distinct != 2 {
			t.Errorf("boolean column %+v", ok)
		}
		// +Inf is not a usable number: reported as nonconforming, kept out of the statistics.
		if x.Nonconforming != 1 || *x.Mean != 19.5 || len(findingsOf(res, "type_conformity", "x")) != 1 {
			t.Errorf("infinity: %+v", x)
		}
		return StoreProfile(ctx, tx.Conn, tx.RunID, res)
	})
}

func TestProfile_NullKey(t *testing.T) {
	withTx(t, func(ctx context.Context, tx *store.Tx) error {
		makeTable(t, tx.Conn, "k", []string{"a", "b"}, []string{"INTEGER", "TEXT"},
			[][]any{{int64(1), "x"}, {nil, "y"}, {int64(1), "x"}, {int64(2), nil}})
		res, err := Profile(ctx, tx.Conn, ProfileOptions{Table: "k", Key: []string{"a", "b"}})
		if err != nil {
			return err
		}
		k := findingsOf(res, "duplicate_key", "")
		if len(k) != 2 || k[0].Count != 2 || k[1].Count != 2 || !strings.Contains(k[1].Message, "missing on 2 rows (lines 3, 5)") {
			t.Errorf("duplicate_key findings %+v", k)
		}
		if res.DuplicateKeys == nil || *res.DuplicateKeys != 2 {
			t.Errorf("duplicate keys %v", res.DuplicateKeys)
		}
		return nil
	})
}
