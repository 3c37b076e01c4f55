package leakage

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// tolFixture (constructed; the answer worked out by hand for tol 0.01): rows 1/2 differ by
// 0.5 in 100 (0.5%, and 100.5 rounds to 1.01e+02 at 3 digits while 100 gives 1.00e+02, so the
// rounding mode misses them); 3/4 by 1.5%; 5/6 are exact copies; 7 is 0.0001 where 5 is 0;
// 8/9 differ in sign; 10-11-12 chain (0.8% steps; 10 and 12 are 1.6% apart, linked through 11);
// 13/14 are copies with a NULL; 16/17 are both on train.
func tolFixture() *fixture {
	f := &fixture{table: "m", split: "s", roles: map[string]string{"train": "train", "holdout": "holdout"}, order: []string{"train", "holdout"},
		cols: []fixCol{{"material", "TEXT", "TEXT"}, {"d", "REAL", "REAL"}, {"n", "INTEGER", "INTEGER"}}}
	add := func(mat string, d any, n int64, side string) {
		f.rows = append(f.rows, []any{mat, d, n})
		f.sides = append(f.sides, side)
	}
	add("PVC", 100.0, 50, "train")
	add(" pvc", 100.5, 50, "holdout")
	add("PVC", 200.0, 10, "train")
	add("PVC", 203.0, 10, "holdout")
	add("steel", 0.0, 5, "train")
	add("steel", 0.0, 5, "holdout")
	add("steel", 0.0001, 5, "holdout")
	add("PVC", -50.0, 7, "train")
	add("PVC", 50.0, 7, "holdout")
	add("cast iron", 10.00, 1, "train")
	add("cast iron", 10.08, 1, "holdout")
	add("cast iron", 10.16, 1, "train")
	add("PVC", nil, 3, "train")
	add("PVC", nil, 3, "holdout")
	add("PVC", nil, 4, "holdout")
	add("ductile", 300.0, 2, "train")
	add("ductile", 300.1, 2, "train")
	return f
}

func TestNearNumericTol_Constructed(t *testing.T) {
	path := tolFixture().create(t)
	opts := Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Entity: []string{}, Params: map[string]float64{"near_duplicate_numeric.tol": 0.01}}
	rep, err := runAudit(t, path, opts)
	if err != nil {
		t.Fatal(err)
	}
	if g := fmt.Sprint(summarize(rep, "near_duplicate_numeric")); g != "[{near_duplicate_numeric across sides warn train:[1] holdout:[2]} {near_duplicate_numeric across sides warn train:[10 12] holdout:[11]}]" {
		t.Errorf("tol 0.01: %s", g)
	}
	replayClean(t, path, "s", "")
	// The rounding mode (3 digits) misses rows 1/2, which straddle a rounding boundary.
	rep, err = runAudit(t, path, Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Entity: []string{}})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range rep.Findings {
		if len(f.Sides) > 0 && f.Sides[0].Rows[0] == 1 {
			t.Errorf("rounding mode found rows 1/2: %v", f.Sides)
		}
	}
	// Tampering: row 2 moves to 102 (2%): the stored tolerance query disagrees.
	rep, err = runAudit(t, path, opts)
	if err != nil {
		t.Fatal(err)
	}
	db := openRW(t, path)
	if _, err := db.Exec(`UPDATE m SET d = 102 WHERE ss_row = 2`); err != nil {
		t.Fatal(err)
	}
	db.Close()
	if n := replay(t, path, "s")["near_duplicate_numeric.across"]; n != 2 {
		t.Errorf("replay after moving row 2 = %d rows, want 2 (rows 1 and 2 stored, not recomputed)", n)
	}
	// A tolerance outside (0, 1) is refused.
	_, err = runAudit(t, path, Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Params: map[string]float64{"near_duplicate_numeric.tol": 1.5}})
	if err == nil || !strings.Contains(err.Error(), "tol=1.5: a relative tolerance must be above 0 and below 1") {
		t.Errorf("tol 1.5: %v", err)
	}
}

// The grid search finds exactly the groups an all-pairs comparison finds, on generated rows
// with planted copies carrying up to ±1.5% noise (tol 2%), NULLs and zeros.
func TestNearNumericTol_EqualsAllPairs(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	f := &fixture{table: "g", split: "s", roles: map[string]string{"train": "train", "holdout": "holdout"}, order: []string{"train", "holdout"},
		cols: []fixCol{{"material", "TEXT", "TEXT"}, {"x", "REAL", "REAL"}, {"y", "REAL", "REAL"}, {"n", "INTEGER", "INTEGER"}}}
	mats := []string{"PVC", "steel", "cast iron"}
	for i := 0; i < 3000; i++ {
		var row []any
		if i > 50 && r.IntN(8) == 0 {
			src := f.rows[r.IntN(len(f.rows))]
			row = append([]any(nil), src...)
			for _, j := range []int{1, 2} {
				if v, ok := row[j].(float64); ok {
					row[j] = v * (1 + (r.Float64()-0.5)*0.03)
				}
			}
		} else {
			var y any = r.NormFloat64() * 10
			switch r.IntN(20) {
			case 0:
				y = nil
			case 1:
				y = 0.0
			}
			row = []any{mats[r.IntN(3)], 1 + r.Float64()*999, y, int64(r.IntN(40))}
		}
		f.rows = append(f.rows, row)
		side := "train"
		if r.IntN(4) == 0 {
			side = "holdout"
		}
		f.sides = append(f.sides, side)
	}
	path := f.create(t)
	const tol = 0.02
	rep, err := runAudit(t, path, Options{Split: "s", Checks: []string{"near_duplicate_numeric"}, Entity: []string{}, Params: map[string]float64{"near_duplicate_numeric.tol": tol}})
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, fd := range rep.Findings {
		var rows []int64
		for _, s := range fd.Sides {
			rows = append(rows, s.Rows...)
		}
		slices.Sort(rows)
		got = append(got, fmt.Sprint(rows))
	}
	// All pairs: exact-key classes (normalised text, values at 9 digits, as exact_duplicate),
	// linked by every cross-side pair that meets the condition.
	key := func(i int) string {
		var b strings.Builder
		for _, v := range f.rows[i] {
			switch x := v.(type) {
			case nil:
				b.WriteString("n|")
			case string:
				b.WriteString("s" + NormalizeValue(x) + "|")
			case float64:
				b.WriteString(fmt.Sprintf("%.8e|", x))
			default:
				b.WriteString(fmt.Sprint(x) + "|")
			}
		}
		return b.String()
	}
	n := len(f.rows)
	parent := make([]int, n)
	for i := range parent {
		parent[i] = i
	}
	var find func(int) int
	find = func(x int) int {
		if parent[x] != x {
			parent[x] = find(parent[x])
		}
		return parent[x]
	}
	union := func(x, y int) {
		if a, b := find(x), find(y); a != b {
			parent[max(a, b)] = min(a, b)
		}
	}
	keys := make([]string, n)
	for i := range keys {
		keys[i] = key(i)
	}
	near := func(i, k int) bool {
		ri, rk := f.rows[i], f.rows[k]
		if NormalizeValue(ri[0].(string)) != NormalizeValue(rk[0].(string)) {
			return false
		}
		for j := 1; j < len(ri); j++ {
			if (ri[j] == nil) != (rk[j] == nil) {
				return false
			}
			if ri[j] == nil {
				continue
			}
			var x, y float64
			switch v := ri[j].(type) {
			case float64:
				x, y = v, rk[j].(float64)
			case int64:
				x, y = float64(v), float64(rk[j].(int64))
			}
			if !(math.Abs(x-y) <= tol*math.Max(math.Abs(x), math.Abs(y))) {
				return false
			}
		}
		return true
	}
	linked := make([]bool, n)
	for i := 0; i < n; i++ {
		for k := i + 1; k < n; k++ {
			if keys[i] == keys[k] {
				union(i, k) // one class: all its rows belong to the group
				continue
			}
			if f.sides[i] != f.sides[k] && near(i, k) {
				union(i, k)
				linked[i], linked[k] = true, true
			}
		}
	}
	groups := map[int][]int64{}
	var order []int
	hasLink := map[int]bool{}
	for i := 0; i < n; i++ {
		root := find(i)
		if _, ok := groups[root]; !ok {
			order = append(order, root)
		}
		groups[root] = append(groups[root], int64(i+1))
		if linked[i] {
			hasLink[root] = true
		}
	}
	var want []string
	for _, root := range order {
		if hasLink[root] {
			want = append(want, fmt.Sprint(groups[root]))
		}
	}
	if len(want) < 50 {
		t.Fatalf("only %d groups by all pairs: the fixture should plant more", len(want))
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("grid search: %d groups, all pairs: %d; they differ\n got %.300v\nwant %.300v", len(got), len(want), got, want)
	}
	replayClean(t, path, "s", "")
}
