package ingest

import (
	"context"
	"database/sql"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

func profileSQLDB(t *testing.T) *sql.DB {
	t.Helper()
	path := filepath.Join(t.TempDir(), "f.db")
	opts := store.Options{SQL: []sqlfn.Set{SQL()}}
	err := store.Update(context.Background(), path, opts, true, store.Run{Command: "test"}, func(ctx context.Context, tx *store.Tx) error {
		if _, err := tx.Conn.ExecContext(ctx, `CREATE TABLE v(name TEXT, y)`); err != nil {
			return err
		}
		for _, name := range []string{"Lew", "Mavro", "Michelso", "NumAcc1", "NumAcc4"} {
			for _, y := range readNIST(t, name) {
				if _, err := tx.Conn.ExecContext(ctx, `INSERT INTO v VALUES(?, ?)`, name, y); err != nil {
					return err
				}
			}
		}
		// NULLs are ignored; integers are widened.
		_, err := tx.Conn.ExecContext(ctx, `INSERT INTO v VALUES('Lew', NULL), ('ints', 1), ('ints', 2), ('ints', 4), ('one', 3.5)`)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(context.Background(), path, store.Options{SQL: []sqlfn.Set{SQL()}, ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db.DB
}

// TestProfileSQL_MatchesGo: the SQL aggregates give exactly what the Go functions give on
// the same values (NIST StRD univariate data, plus NULL, integer and one-row groups).
func TestProfileSQL_MatchesGo(t *testing.T) {
	db := profileSQLDB(t)
	groups := map[string][]float64{"ints": {1, 2, 4}, "one": {3.5}}
	for _, name := range []string{"Lew", "Mavro", "Michelso", "NumAcc1", "NumAcc4"} {
		groups[name] = readNIST(t, name)
	}
	for name, x := range groups {
		t.Run(name, func(t *testing.T) {
			var mean, q1, med, q3 float64
			var sd sql.NullFloat64
			err := db.QueryRow(`SELECT ingest_mean(y), ingest_stddev(y), ingest_quantile(y, 0.25), ingest_quantile(y, 0.5), ingest_quantile(y, 0.75) FROM v WHERE name = ?`, name).
				Scan(&mean, &sd, &q1, &med, &q3)
			if err != nil {
				t.Fatal(err)
			}
			gm, gs := MeanSD(x)
			q := Quantiles(x, 0.25, 0.5, 0.75)
			if mean != gm || q1 != q[0] || med != q[1] || q3 != q[2] {
				t.Errorf("SQL mean %v q %v %v %v; Go %v %v", mean, q1, med, q3, gm, q)
			}
			if len(x) < 2 {
				if sd.Valid {
					t.Errorf("stddev of one row = %v, want NULL", sd.Float64)
				}
			} else if sd.Float64 != gs {
				t.Errorf("SQL sd %v, Go %v", sd.Float64, gs)
			}
		})
	}
	// NIST StRD NumAcc4.dat certified mean 10000000.2 through SQL.
	var m float64
	if err := db.QueryRow(`SELECT ingest_mean(y) FROM v WHERE name = 'NumAcc4'`).Scan(&m); err != nil || lre(m, 10000000.2) < 15 {
		t.Errorf("NumAcc4 mean %v %v", m, err)
	}
}

func TestProfileSQL_NullsAndErrors(t *testing.T) {
	db := profileSQLDB(t)
	var a, b, c any
	if err := db.QueryRow(`SELECT ingest_mean(y), ingest_stddev(y), ingest_quantile(y, 0.5) FROM v WHERE name = 'none'`).Scan(&a, &b, &c); err != nil {
		t.Fatal(err)
	}
	if a != nil || b != nil || c != nil {
		t.Errorf("empty set: %v %v %v, want NULLs", a, b, c)
	}
	tests := []struct{ q, want string }{
		{`SELECT ingest_quantile(y, 1.5) FROM v`, "ingest_quantile: argument 2 (p) must be between 0 and 1"},
		{`SELECT ingest_quantile(y, ss) FROM (SELECT y, rowid % 2 AS ss FROM v)`, "must be the same on every row"},
		{`SELECT ingest_mean(name) FROM v`, "ingest_mean: argument 1 (x) must be REAL, got TEXT"},
		{`SELECT ingest_tukey_outlier(1, 2)`, "takes 3 or 4 arguments"},
		{`SELECT ingest_tukey_outlier('a', 1, 2)`, "argument 1 (x) must be REAL, got TEXT"},
	}
	for _, tt := range tests {
		var v any
		err := db.QueryRow(tt.q).Scan(&v)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: %v, want %q", tt.q, err, tt.want)
		}
	}
	// Tukey's rule in SQL ≡ Go, at and around the fences of the textbook example
	// (Q1 = 10, Q3 = 30: fences -20 and 60, stats_test.go).
	for _, x := range []float64{-20.5, -20, 0, 60, 60.5} {
		var got int64
		if err := db.QueryRow(`SELECT ingest_tukey_outlier(?, 10, 30)`, x).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if want := TukeyOutlier(x, 10, 30); (got == 1) != want {
			t.Errorf("ingest_tukey_outlier(%v, 10, 30) = %d, Go %v", x, got, want)
		}
	}
	var n any
	if err := db.QueryRow(`SELECT ingest_tukey_outlier(NULL, 10, 30)`).Scan(&n); err != nil || n != nil {
		t.Errorf("NULL x: %v %v", n, err)
	}
}
