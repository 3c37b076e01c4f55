package estimate

import (
	"context"
	"database/sql"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

// openSQLTest creates an empty splitsmith database with this package's functions.
func openSQLTest(t *testing.T) *store.DB {
	t.Helper()
	path := filepath.Join(t.TempDir(), "t.db")
	sets := []sqlfn.Set{SQL()}
	if err := store.Update(context.Background(), path, store.Options{SQL: sets}, true, store.Run{Command: "test"}, func(context.Context, *store.Tx) error { return nil }); err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(context.Background(), path, store.Options{SQL: sets})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

// TestSQL_MatchesGo: every est_ scalar returns exactly what its Go function returns, NULL in
// gives NULL out, and est_fit_pow3 equals FitFamily on the same rows.
func TestSQL_MatchesGo(t *testing.T) {
	db := openSQLTest(t)
	q := func(query string, args ...any) any {
		t.Helper()
		var v any
		if err := db.QueryRow(query, args...).Scan(&v); err != nil {
			t.Fatalf("%s: %v", query, err)
		}
		return v
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < 50; i++ {
		n := math.Exp(rng.Float64() * 12)
		a, b, c := rng.Float64()*0.3, rng.Float64()*5, 0.1+rng.Float64()
		if got := q(`SELECT est_pow3(?, ?, ?, ?)`, n, a, b, c); got != Pow3(n, a, b, c) {
			t.Errorf("est_pow3(%g, %g, %g, %g) = %v, Go %v", n, a, b, c, got, Pow3(n, a, b, c))
		}
		T := a + rng.Float64()*0.5
		if got := q(`SELECT est_nstar_pow3(?, ?, ?, ?)`, T, a, b, c); got != NStarPow3(T, a, b, c) {
			t.Errorf("est_nstar_pow3 = %v, Go %v", got, NStarPow3(T, a, b, c))
		}
		js := paramsJSON("pow3", []float64{a, b, c})
		if got := q(`SELECT est_predict('pow3', ?, ?)`, n, js); got != Pow3(n, a, b, c) {
			t.Errorf("est_predict = %v, Go %v", got, Pow3(n, a, b, c))
		}
		z0, acc, al := rng.Float64()-0.5, (rng.Float64()-0.5)*0.2, rng.Float64()
		if got := q(`SELECT est_bca_level(?, ?, ?)`, z0, acc, al); got != BCaLevel(z0, acc, al) {
			t.Errorf("est_bca_level = %v, Go %v", got, BCaLevel(z0, acc, al))
		}
	}
	ss, _ := RileyBinary(24, 0.288, 0.174, 0.9)
	if got := q(`SELECT est_riley_binary(24, 0.288, 0.174, 0.9)`); got != int64(ss.N) {
		t.Errorf("est_riley_binary = %v, Go %d", got, ss.N)
	}
	sc, _ := RileyContinuous(10, 0.5, 20, 8, 0.9)
	if got := q(`SELECT est_riley_continuous(10, 0.5, 20, 8, 0.9)`); got != int64(sc.N) {
		t.Errorf("est_riley_continuous = %v, Go %d", got, sc.N)
	}
	for _, d := range []string{"fixed", "random"} {
		want, _ := OLSHoldoutMSE(1.5, 7, 40, d)
		if got := q(`SELECT est_ols_holdout_mse(1.5, 7, 40, ?)`, d); got != want {
			t.Errorf("est_ols_holdout_mse %s = %v, Go %v", d, got, want)
		}
	}
	for _, nullQ := range []string{`SELECT est_pow3(NULL, 1, 1, 1)`, `SELECT est_nstar_pow3(0.1, 0.2, 1, 1)`, `SELECT est_riley_binary(NULL, 0.2, 0.2, 0.9)`,
		`SELECT est_ols_holdout_mse(1, 5, 6, 'random')`, `SELECT est_fit_pow3(n, e) FROM (SELECT 1 AS n, 1 AS e) WHERE n > 1`} {
		if got := q(nullQ); got != nil {
			t.Errorf("%s = %v, want NULL", nullQ, got)
		}
	}
	// aggregate ≡ FitFamily
	if _, err := db.Exec(`CREATE TABLE pts(n REAL, e REAL)`); err != nil {
		t.Fatal(err)
	}
	pts := pow3Points(rng, geomSizes(100, 7, 2), 4, 0.1, 2, 0.5, 0.003)
	for _, p := range pts {
		if _, err := db.Exec(`INSERT INTO pts VALUES(?, ?)`, p.N, p.Err); err != nil {
			t.Fatal(err)
		}
	}
	f, err := FitFamily(pts, "pow3")
	if err != nil {
		t.Fatal(err)
	}
	if got := q(`SELECT est_fit_pow3(n, e ORDER BY rowid) FROM pts`); got != Pow3FitJSON(f) {
		t.Errorf("est_fit_pow3 = %v, Go %v", got, Pow3FitJSON(f))
	}
	// and FitFamily is the very fit Extrapolate reports (what the stored audit query relies on)
	res, err := Extrapolate(pts, &Options{Bootstrap: 10})
	if err != nil {
		t.Fatal(err)
	}
	if Pow3FitJSON(res.Fits[0]) != Pow3FitJSON(f) {
		t.Errorf("Extrapolate's pow3 %v, FitFamily %v", res.Fits[0].Params, f.Params)
	}
	// bad argument types are errors naming the argument
	var v any
	if err := db.QueryRow(`SELECT est_pow3('many', 1, 1, 1)`).Scan(&v); err == nil {
		t.Error("TEXT n accepted")
	}
	var _ = sql.ErrNoRows
}
