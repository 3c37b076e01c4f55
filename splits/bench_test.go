package splits

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"sync"
	"syscall"
	"testing"

	"splitsmith/ingest"
	"splitsmith/internal/store"
)

// Benchmarks split 1,000,000 rows (random, grouped with ~50,000 groups, time-ordered, 5 folds)
// including writing the assignments, seal digests, views and the commit, against a baseline
// in the same run: plain SQL writing the same number of assignment rows
// (BenchmarkBaseline_SQLAssign). The table is built once by plain SQL from a recursive CTE.

const benchRows = 1_000_000

var (
	benchOnce sync.Once
	benchBase string
	benchErr  error
)

func benchDB(b *testing.B) string {
	benchOnce.Do(func() {
		dir, err := os.MkdirTemp("", "splits-bench-")
		if err != nil {
			benchErr = err
			return
		}
		benchBase = filepath.Join(dir, "base.db")
		benchErr = store.Update(context.Background(), benchBase, store.Options{SQL: testSets()}, true, store.Run{Command: "bench"}, func(ctx context.Context, tx *store.Tx) error {
			_, err := tx.Conn.ExecContext(ctx, `
CREATE TABLE t(ss_row INTEGER PRIMARY KEY, ss_source TEXT NOT NULL, ss_line INTEGER NOT NULL, ss_digest INTEGER NOT NULL,
  id INTEGER, grp TEXT, day TEXT, x REAL);
INSERT INTO ss_columns VALUES ('t',1,'id','INTEGER','INTEGER','bench',0), ('t',2,'grp','TEXT','TEXT','bench',0),
  ('t',3,'day','DATE','TEXT','bench',0), ('t',4,'x','REAL','REAL','bench',0);
WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c WHERE i < 1000000)
INSERT INTO t(ss_row, ss_source, ss_line, ss_digest, id, grp, day, x) SELECT i, 'bench.csv', i + 1, 0, i, 'G' || (abs(random()) % 50000),
  date('2018-01-01', '+' || (abs(random()) % 2000) || ' days'), (abs(random()) % 100000) / 1000.0 FROM c;
UPDATE t SET ss_digest = ingest_digest(id, grp, day, x);`)
			if err != nil {
				return err
			}
			// The normalised digest, as ingest stores it (verify checks it too).
			_, err = tx.Conn.ExecContext(ctx, `ALTER TABLE t ADD COLUMN ss_norm_digest INTEGER;
UPDATE t SET ss_norm_digest = ingest_norm_digest(`+ingest.NormExprSQL("INTEGER", "id")+`, `+ingest.NormExprSQL("TEXT", "grp")+`, `+
				ingest.NormExprSQL("TEXT", "day")+`, `+ingest.NormExprSQL("REAL", "x")+`);`)
			return err
		})
	})
	if benchErr != nil {
		b.Fatal(benchErr)
	}
	return benchBase
}

func copyFile(dst, src string) error {
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	out, err := os.Create(dst)
	if err != nil {
		return err
	}
	if _, err := io.Copy(out, in); err != nil {
		out.Close()
		return err
	}
	return out.Close()
}

// cpuSeconds is the process's user+system CPU time: on a shared machine wall time swings with
// other load, CPU time much less, so the benchmarks report both (cpu-s/op).
func cpuSeconds() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

func benchSplit(b *testing.B, spec Spec) {
	base := benchDB(b)
	work := filepath.Join(b.TempDir(), "work.db")
	cpu := 0.0
	defer func() { b.ReportMetric(cpu/float64(b.N), "cpu-s/op") }()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		if err := copyFile(work, base); err != nil {
			b.Fatal(err)
		}
		b.StartTimer()
		c0 := cpuSeconds()
		sp := spec
		err := store.Update(context.Background(), work, store.Options{SQL: testSets()}, false, store.Run{Command: "split"}, func(ctx context.Context, tx *store.Tx) error {
			r, err := Split(ctx, tx.Conn, &sp, Options{RunID: tx.RunID})
			if err != nil {
				return err
			}
			if r.TableRows != benchRows {
				return errors.New("wrong row count")
			}
			return nil
		})
		cpu += cpuSeconds() - c0
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(benchRows), "rows/op")
}

func BenchmarkSplit_Random1M(b *testing.B) {
	benchSplit(b, Spec{Name: "r", Table: "t", Seed: 1})
}

func BenchmarkSplit_Grouped1M(b *testing.B) {
	benchSplit(b, Spec{Name: "g", Table: "t", Seed: 1, Group: []string{"grp"}})
}

func BenchmarkSplit_Time1M(b *testing.B) {
	benchSplit(b, Spec{Name: "tm", Table: "t", Seed: 1, Time: "day", Gap: "30d"})
}

func BenchmarkSplit_Folds5Random1M(b *testing.B) {
	benchSplit(b, Spec{Name: "f", Table: "t", Seed: 1, Folds: 5})
}

func BenchmarkSplit_Folds5Grouped1M(b *testing.B) {
	benchSplit(b, Spec{Name: "fg", Table: "t", Seed: 1, Group: []string{"grp"}, Folds: 5})
}

// BenchmarkBaseline_SQLAssign is the floor: stock SQL writing 1,000,000 assignment rows
// (a modulo of the digest, no hashing, no seals) into ss_split_rows, committed.
func BenchmarkBaseline_SQLAssign(b *testing.B) {
	base := benchDB(b)
	work := filepath.Join(b.TempDir(), "work.db")
	cpu := 0.0
	defer func() { b.ReportMetric(cpu/float64(b.N), "cpu-s/op") }()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		if err := copyFile(work, base); err != nil {
			b.Fatal(err)
		}
		b.StartTimer()
		c0 := cpuSeconds()
		err := store.Update(context.Background(), work, store.Options{SQL: testSets()}, false, store.Run{Command: "bench"}, func(ctx context.Context, tx *store.Tx) error {
			_, err := tx.Conn.ExecContext(ctx, `INSERT INTO ss_split_rows(split_name, row_id, side, fold, train_from, reason) SELECT 'b', ss_row, CASE WHEN abs(ss_digest) % 5 = 0 THEN 'holdout' ELSE 'train' END, NULL, NULL, '' FROM t`)
			return err
		})
		cpu += cpuSeconds() - c0
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(benchRows), "rows/op")
}

// BenchmarkVerify_Random1M recomputes and checks a 1M-row random split.
func BenchmarkVerify_Random1M(b *testing.B) {
	base := benchDB(b)
	work := filepath.Join(b.TempDir(), "work.db")
	if err := copyFile(work, base); err != nil {
		b.Fatal(err)
	}
	sp := Spec{Name: "r", Table: "t", Seed: 1}
	if err := store.Update(context.Background(), work, store.Options{SQL: testSets()}, false, store.Run{Command: "split"}, func(ctx context.Context, tx *store.Tx) error {
		_, err := Split(ctx, tx.Conn, &sp, Options{RunID: tx.RunID})
		return err
	}); err != nil {
		b.Fatal(err)
	}
	db, err := store.Open(context.Background(), work, store.Options{SQL: testSets(), ReadOnly: true})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	cpu := 0.0
	defer func() { b.ReportMetric(cpu/float64(b.N), "cpu-s/op") }()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c0 := cpuSeconds()
		conn, _ := db.Conn(context.Background())
		rep, err := Verify(context.Background(), conn, "r")
		conn.Close()
		cpu += cpuSeconds() - c0
		if err != nil {
			b.Fatal(err)
		}
		if !rep.Intact {
			b.Fatal("benchmark split does not verify")
		}
	}
}
