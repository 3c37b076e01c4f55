package splits

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
)

// sideSeals (one radix sort for every side) must equal Seal per side, duplicates and dropped
// rows included, with negative and positive digests.
func TestSideSeals_EqualSealPerSide(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for _, n := range []int{0, 1, 2, 17, 5000} {
		dig := make([]int64, n)
		side := make([]int16, n)
		for i := range dig {
			switch r.IntN(4) {
			case 0:
				dig[i] = int64(r.Uint64())
			case 1:
				dig[i] = int64(r.IntN(50)) - 25 // small values and duplicates
			case 2:
				dig[i] = -int64(r.Uint64() >> 1)
			default:
				if i > 0 {
					dig[i] = dig[r.IntN(i)]
				}
			}
			side[i] = int16(r.IntN(4)) - 1 // -1 = dropped
		}
		orig := append([]int64(nil), dig...)
		table, per := sideSeals(dig, side, 3)
		if want := Seal(append([]int64(nil), dig...)); table != want {
			t.Errorf("n=%d: table seal %s, Seal gives %s", n, table, want)
		}
		for s := range 3 {
			var ds []int64
			for i, d := range dig {
				if side[i] == int16(s) {
					ds = append(ds, d)
				}
			}
			if want := Seal(ds); per[s] != want {
				t.Errorf("n=%d side %d: seal %s, Seal gives %s", n, s, per[s], want)
			}
		}
		for i := range dig {
			if dig[i] != orig[i] {
				t.Fatalf("n=%d: sideSeals modified its input", n)
			}
		}
	}
}

// The assignment tables must not depend on the number of cores: the same splits made with
// GOMAXPROCS 1, 2 and 4 (hashing and union-find in many small chunks) store identical rows.
func TestSplit_SameWithOneOrTwoCores(t *testing.T) {
	defer func(c, g int) { hashChunk, groupChunkRows = c, g }(hashChunk, groupChunkRows)
	hashChunk, groupChunkRows = 37, 29
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	specs := []Spec{
		{Name: "r", Sides: Sides{{"train", 0.7}, {"valid", 0.15}, {"holdout", 0.15}}},
		{Name: "g", Group: []string{"grp"}},
		{Name: "tm", Time: "day", Gap: "7d"},
		{Name: "f", Folds: 5},
		{Name: "fg", Group: []string{"grp"}, Folds: 5},
		{Name: "k", Key: []string{"id"}, Stratify: "cls", Folds: 3},
		{Name: "ro", Time: "day", Folds: 3},
		{Name: "g2", Group: []string{"grp", "id"}, Folds: 3},
	}
	dump := func(procs int) string {
		runtime.GOMAXPROCS(procs)
		path := newDB(t)
		makeTable(t, path, "t", genCols, genRows(11, 1500, 200, 1), nil)
		var b strings.Builder
		for _, sp := range specs {
			sp.Table, sp.Seed = "t", 9
			mustSplit(t, path, sp)
		}
		for _, q := range []string{
			`SELECT split_name, row_id, side, fold, train_from, reason FROM ss_split_rows ORDER BY 1, 2`,
			`SELECT * FROM ss_split_sides ORDER BY 1, 2`,
			`SELECT * FROM ss_split_folds ORDER BY 1, 2`,
			`SELECT split_name, strategy, spec_json, seed, table_rows, assigned_rows, dropped_rows, table_seal, summary_json FROM ss_splits ORDER BY 1`,
		} {
			b.WriteString(strings.Join(query(t, path, q), "\n"))
			b.WriteString("\n--\n")
		}
		return b.String()
	}
	// GOMAXPROCS 4 gives three hashing workers where 1 and 2 give one.
	one, two, four := dump(1), dump(2), dump(4)
	if one != two || one != four {
		t.Errorf("GOMAXPROCS 1, 2 and 4 give different split tables")
	}
	if !strings.Contains(one, "|holdout|") || !strings.Contains(one, "fg|") {
		t.Errorf("dump looks empty:\n%.300s", one)
	}
}

// The radix time order equals the stable comparison sort by time (ties in row order), with
// negative times, -0 and +0, infinities and many equal times.
func TestTimeOrder_RadixEqualsStableSort(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{0, 1, 2, 3, 1000, 20000} {
		d := &data{n: n, t: make([]float64, n), tBad: make([]bool, n)}
		for i := range d.t {
			switch r.IntN(6) {
			case 0:
				d.t[i] = float64(r.IntN(20) - 10)
			case 1:
				d.t[i] = math.Copysign(0, -1)
			case 2:
				d.t[i] = r.NormFloat64() * 1e9
			case 3:
				d.t[i] = math.Inf(2*r.IntN(2) - 1)
			default:
				d.t[i] = float64(1.5e9 + float64(r.IntN(2000))*86400)
			}
			d.tBad[i] = r.IntN(10) == 0
		}
		got := timeOrder(d, nil)
		var rows []int
		for i := 0; i < n; i++ {
			if !d.tBad[i] {
				rows = append(rows, i)
			}
		}
		want := timeOrderCmp(d, rows)
		if !slices.Equal(got, want) {
			t.Fatalf("n=%d: radix time order differs from the stable sort", n)
		}
	}
}

// Verify's report must not depend on the number of cores either (digests in small chunks).
func TestVerify_SameWithOneOrTwoCores(t *testing.T) {
	defer func(c, v int) { hashChunk, verifyChunkRows = c, v }(hashChunk, verifyChunkRows)
	hashChunk, verifyChunkRows = 37, 23
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(12, 800, 100, 1), nil)
	mustSplit(t, path, Spec{Name: "v", Table: "t", Seed: 5, Folds: 3})
	exec(t, path, `UPDATE t SET x = x + 1 WHERE ss_row IN (3, 300, 301, 799)`)
	exec(t, path, `UPDATE t SET ss_digest = 7 WHERE ss_row = 500`)
	exec(t, path, `DELETE FROM t WHERE ss_row IN (10, 640)`)
	exec(t, path, `UPDATE ss_split_rows SET side = 'holdout' WHERE split_name = 'v' AND row_id = 20`)
	appendRows(t, path, "t", genCols, genRows(13, 30, 100, 801))
	var reps []string
	for _, procs := range []int{1, 2, 4} {
		runtime.GOMAXPROCS(procs)
		rep := verify(t, path, "v")
		b, _ := json.Marshal(rep)
		reps = append(reps, string(b))
	}
	if reps[0] != reps[1] || reps[0] != reps[2] {
		t.Errorf("GOMAXPROCS 1, 2 and 4 give different verify reports:\n%s\n%s\n%s", reps[0], reps[1], reps[2])
	}
	var rep Report
	json.Unmarshal([]byte(reps[0]), &rep)
	if rep.Counts["changed"] != 5 || rep.Counts["removed"] != 2 || rep.Counts["added"] != 30 || rep.Counts["moved"] < 1 {
		t.Errorf("counts %v, want 5 changed, 2 removed, 30 added, a moved row", rep.Counts)
	}
}

// readStored (packed by SQL, odd rows read as stored) gives what the plain column-by-column
// read gives, for well-formed rows, tampered ones, and when most rows are tampered.
func TestReadStored_EqualsPlainRead(t *testing.T) {
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(14, 1200, 100, 1), nil)
	mustSplit(t, path, Spec{Name: "v", Table: "t", Seed: 5, Time: "day", Folds: 3, Gap: "2d"})
	mustSplit(t, path, Spec{Name: "w", Table: "t", Seed: 5})
	same := func(label, name string) {
		t.Helper()
		db := openDB(t, path)
		conn, err := db.Conn(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		defer conn.Close()
		ids1, st1, err1 := readStored(context.Background(), conn, name)
		ids2, st2, err2 := readStoredPlain(context.Background(), conn, name)
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v / %v", label, err1, err2)
		}
		if !slices.Equal(ids1, ids2) || !slices.Equal(st1, st2) {
			t.Errorf("%s: packed read differs from the plain read", label)
		}
		if len(ids1) != 1200 {
			t.Errorf("%s: %d rows", label, len(ids1))
		}
	}
	same("fresh", "v")
	same("no folds", "w")
	exec(t, path, `UPDATE ss_split_rows SET side = 'bogus' WHERE split_name = 'v' AND row_id = 5`)
	exec(t, path, `UPDATE ss_split_rows SET side = CAST('train' AS BLOB) WHERE split_name = 'v' AND row_id = 6`)
	exec(t, path, `UPDATE ss_split_rows SET fold = 0 WHERE split_name = 'v' AND row_id = 7`)
	exec(t, path, `UPDATE ss_split_rows SET fold = 70000, train_from = 2.0 WHERE split_name = 'v' AND row_id = 8`)
	exec(t, path, `UPDATE ss_split_rows SET side = 12 WHERE split_name = 'v' AND row_id = 9`)
	exec(t, path, `UPDATE ss_split_rows SET fold = '3' WHERE split_name = 'v' AND row_id = 11`)
	exec(t, path, `UPDATE ss_split_rows SET train_from = CAST('1' AS BLOB) WHERE split_name = 'v' AND row_id = 12`)
	same("a few tampered rows", "v")
	// A fractional fold is an error for both reads (it cannot be a fold number).
	exec(t, path, `UPDATE ss_split_rows SET fold = 2.5 WHERE split_name = 'v' AND row_id = 10`)
	{
		db := openDB(t, path)
		conn, _ := db.Conn(context.Background())
		_, _, err1 := readStored(context.Background(), conn, "v")
		_, _, err2 := readStoredPlain(context.Background(), conn, "v")
		conn.Close()
		if err1 == nil || err2 == nil {
			t.Errorf("fold 2.5: errors %v / %v, want both", err1, err2)
		}
	}
	exec(t, path, `UPDATE ss_split_rows SET side = 'x' || row_id WHERE split_name = 'w'`)
	same("every row tampered", "w")
}
