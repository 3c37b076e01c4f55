package leakage

import (
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"testing"
	"time"

	"splitsmith/internal/store"
)

var (
	bigOnce  sync.Once
	bigPath  string
	benchDir string
	// benchRows is the size of the benchmark table (SPLITSMITH_BENCH_ROWS overrides 1,000,000
	// for profiling).
	benchRows = envInt("SPLITSMITH_BENCH_ROWS", 1_000_000)
)

func envInt(name string, def int) int {
	if v, err := strconv.Atoi(os.Getenv(name)); err == nil && v > 0 {
		return v
	}
	return def
}

func TestMain(m *testing.M) {
	code := m.Run()
	if benchDir != "" {
		os.RemoveAll(benchDir)
	}
	os.Exit(code)
}

// bigFixture is a 1,000,000-row table of 9 user columns (invented pipe-inspection-like
// values; 1% of rows planted as copies of earlier rows) split 80/20 at random, built once.
func bigFixture(b *testing.B) string {
	bigOnce.Do(func() {
		// SPLITSMITH_BENCH_DB names a file to keep the fixture in between runs (profiling);
		// an existing file there is used as it is.
		if p := os.Getenv("SPLITSMITH_BENCH_DB"); p != "" {
			if _, err := os.Stat(p); err == nil {
				bigPath = p
				return
			}
		}
		r := rand.New(rand.NewPCG(1, 1))
		f := &fixture{table: "big", split: "s", roles: map[string]string{"train": "train", "holdout": "holdout"}, order: []string{"train", "holdout"}, groups: []string{"segment"},
			cols: []fixCol{{"segment", "TEXT", "TEXT"}, {"d1", "REAL", "REAL"}, {"d2", "REAL", "REAL"}, {"d3", "REAL", "REAL"}, {"d4", "REAL", "REAL"},
				{"i1", "INTEGER", "INTEGER"}, {"i2", "INTEGER", "INTEGER"}, {"material", "TEXT", "TEXT"}, {"code", "TEXT", "TEXT"}}}
		mats := []string{"cast iron", "PVC", "ductile", "steel", "asbestos cement"}
		n := benchRows
		for i := 0; i < n; i++ {
			var row []any
			if i > 1000 && r.IntN(100) == 0 {
				row = f.rows[r.IntN(i)]
			} else {
				row = []any{fmt.Sprintf("S%06d", r.IntN(200000)), r.Float64() * 300, r.NormFloat64(), r.ExpFloat64(), float64(r.IntN(1000)) / 10,
					int64(r.IntN(100)), int64(1950 + r.IntN(70)), mats[r.IntN(len(mats))], fmt.Sprintf("C-%05d", r.IntN(50000))}
			}
			f.rows = append(f.rows, row)
			side := "train"
			if r.IntN(5) == 0 {
				side = "holdout"
			}
			f.sides = append(f.sides, side)
		}
		if p := os.Getenv("SPLITSMITH_BENCH_DB"); p != "" {
			bigPath = f.createAt(b, p)
			return
		}
		dir, err := os.MkdirTemp("", "leakage-bench-")
		if err != nil {
			b.Fatal(err)
		}
		benchDir = dir
		bigPath = f.createAt(b, filepath.Join(dir, "big.db"))
	})
	return bigPath
}

func benchAudit(b *testing.B, params map[string]float64, checks ...string) {
	var entity []string
	if params != nil {
		entity = []string{} // every column a feature: the ss_digest path
	}
	benchAuditOpts(b, Options{Split: "s", Checks: checks, Params: params, Entity: entity})
}

func benchAuditOpts(b *testing.B, opts Options) {
	if !benchSelected("1M") {
		b.Skip("builds a 1,000,000-row database: run with -bench 1M")
	}
	path := bigFixture(b)
	traceHook = func(step string, d time.Duration) { b.Logf("%s: %v", step, d) }
	defer func() { traceHook = nil }()
	b.ResetTimer()
	defer cpuMeter(b)()
	for i := 0; i < b.N; i++ {
		if _, err := runAudit(b, path, opts); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAudit_ExactDuplicate1M: exact duplicates across sides over 1,000,000 rows
// (target < 1.5 s), the default normalised comparison: read ss_norm_digest and the excluded
// entity column, subtract its terms, group, store findings and queries.
func BenchmarkAudit_ExactDuplicate1M(b *testing.B) { benchAudit(b, nil, "exact_duplicate") }

// BenchmarkAudit_ExactDuplicateValues1M: the same reading, normalising and hashing the 9
// feature values of every row (the path of tables without ss_norm_digest).
func BenchmarkAudit_ExactDuplicateValues1M(b *testing.B) {
	normDigestKeys = false
	defer func() { normDigestKeys = true }()
	benchAudit(b, nil, "exact_duplicate")
}

// BenchmarkAudit_ExactDuplicateSQLKeys1M: the same with SQLite building the keys.
func BenchmarkAudit_ExactDuplicateSQLKeys1M(b *testing.B) {
	sqlBuiltKeys = true
	defer func() { sqlBuiltKeys = false }()
	benchAudit(b, nil, "exact_duplicate")
}

// BenchmarkAudit_ExactDuplicateDigest1M: the same on the stored content digests
// (exact_duplicate.normalize=0 with no column excluded; target < 1.5 s).
func BenchmarkAudit_ExactDuplicateDigest1M(b *testing.B) {
	benchAudit(b, map[string]float64{"exact_duplicate.normalize": 0}, "exact_duplicate")
}

// BenchmarkAudit_SharedEntity1M: shared entities over 1,000,000 rows (target < 1.5 s).
func BenchmarkAudit_SharedEntity1M(b *testing.B) { benchAudit(b, nil, "shared_entity") }

// BenchmarkBaseline_GroupDigest1M is the baseline the targets are set against: SQLite
// grouping the 1,000,000 stored ss_digest values of the split's rows by side, no index.
func BenchmarkBaseline_GroupDigest1M(b *testing.B) {
	if !benchSelected("1M") {
		b.Skip("run with -bench 1M")
	}
	path := bigFixture(b)
	db, err := store.Open(context.Background(), path, store.Options{ReadOnly: true})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	b.ResetTimer()
	defer cpuMeter(b)()
	for i := 0; i < b.N; i++ {
		var n int
		if err := db.QueryRow(`SELECT count(*) FROM (SELECT t.ss_digest FROM ss_split_rows r JOIN big t ON t.ss_row = r.row_id WHERE r.split_name = 's' GROUP BY t.ss_digest HAVING count(DISTINCT r.side) > 1)`).Scan(&n); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAudit_AllChecks1M: every check the fixture has inputs for (no text or time
// column; i1, an integer 0..99, as the label) over 1,000,000 rows, with each step's time.
func BenchmarkAudit_AllChecks1M(b *testing.B) {
	benchAuditOpts(b, Options{Split: "s", Label: "i1"})
}

// BenchmarkAudit_NearNumericTol1M: near_duplicate_numeric in its tolerance mode (tol 1%) over
// 1,000,000 rows.
func BenchmarkAudit_NearNumericTol1M(b *testing.B) {
	benchAuditOpts(b, Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Params: map[string]float64{"near_duplicate_numeric.tol": 0.01}})
}

// BenchmarkAudit_NearNumericTolNoText1M: the same with the text columns ignored, so only
// the grid separates the rows.
func BenchmarkAudit_NearNumericTolNoText1M(b *testing.B) {
	benchAuditOpts(b, Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Ignore: []string{"material", "code"}, Params: map[string]float64{"near_duplicate_numeric.tol": 0.01}})
}
