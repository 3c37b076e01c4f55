package splits

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
	"time"
)

// genRows makes n rows of (id INTEGER, grp TEXT, cls TEXT, day DATE, x REAL) from a seed:
// ngroups groups, classes a (60%), b (30%), c (10%), days spread over 2020.
func genRows(seed uint64, n, ngroups, from int) [][]any {
	r := rand.New(rand.NewPCG(seed, 99))
	out := make([][]any, n)
	for i := range out {
		cls := "a"
		switch u := r.Float64(); {
		case u > 0.9:
			cls = "c"
		case u > 0.6:
			cls = "b"
		}
		day := fmt.Sprintf("2020-%02d-%02d", 1+r.IntN(12), 1+r.IntN(28))
		out[i] = []any{int64(from + i), fmt.Sprintf("G%04d", r.IntN(ngroups)), cls, day, math.Round(r.NormFloat64()*1000)/1000 + 0} // + 0: no -0 (SQLite stores REAL -0.0 as 0)
	}
	return out
}

var genCols = []col{{"id", "INTEGER"}, {"grp", "TEXT"}, {"cls", "TEXT"}, {"day", "DATE"}, {"x", "REAL"}}

func TestSplit_RandomReproducibleAndSeeded(t *testing.T) {
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(1, 2000, 300, 1), nil)
	spec := Spec{Name: "r", Table: "t", Seed: 7, Sides: Sides{{"train", 0.7}, {"valid", 0.15}, {"holdout", 0.15}}}
	mustSplit(t, path, spec)
	first := readRows(t, path, "r")
	mustSplit(t, path, spec)
	if second := readRows(t, path, "r"); !reflect.DeepEqual(first, second) {
		t.Error("two runs of the same spec differ")
	}
	c := sideCounts(first)
	// Binomial: 2000 rows at 0.7 → sd ≈ 20.5; allow 4 sd (a rule of thumb, no source).
	if math.Abs(float64(c["train"])-1400) > 82 || math.Abs(float64(c["holdout"])-300) > 64 {
		t.Errorf("side counts %v far from 0.7/0.15/0.15 of 2000", c)
	}
	checkAuditQueries(t, path, "r")
	spec.Name, spec.Seed = "r2", 8
	mustSplit(t, path, spec)
	other := readRows(t, path, "r2")
	moved := 0
	for id, a := range first {
		if other[id].side != a.side {
			moved++
		}
	}
	// Independent seeds: P(same side) = 0.7²+2·0.15² = 0.535, so about 930 of 2000 differ.
	if moved < 700 {
		t.Errorf("changing the seed moved only %d of 2000 rows", moved)
	}
	// Default key is the content digest: exact duplicate rows share a side.
	dup := query(t, path, `SELECT count(*) FROM (SELECT t.ss_digest FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 'r' GROUP BY t.ss_digest HAVING count(DISTINCT r.side) > 1)`)
	if dup[0] != "0" {
		t.Errorf("duplicates on two sides: %v", dup)
	}
}

func TestSplit_StableUnderAppend(t *testing.T) {
	tests := []struct {
		name string
		spec Spec
	}{
		{"random", Spec{Sides: Sides{{"train", 0.8}, {"holdout", 0.2}}}},
		{"random key", Spec{Key: []string{"id"}, Sides: Sides{{"train", 0.8}, {"holdout", 0.2}}}},
		{"grouped", Spec{Group: []string{"grp"}}},
		{"grouped two columns", Spec{Group: []string{"grp", "id"}}},
		{"stratified hash", Spec{Stratify: "cls", StratifyMode: "hash"}},
		{"random folds", Spec{Folds: 5}},
		{"time cutoff", Spec{Time: "day", Cutoff: "2020-10-01", Gap: "7d"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := newDB(t)
			makeTable(t, path, "t", genCols, genRows(2, 1000, 150, 1), nil)
			sp := tt.spec
			sp.Name, sp.Table, sp.Seed = "s", "t", 3
			mustSplit(t, path, sp)
			before := readRows(t, path, "s")
			// New rows: new groups and existing groups (G0000..G0149 reused, G0150.. new).
			appendRows(t, path, "t", genCols, genRows(3, 500, 300, 1001))
			mustSplit(t, path, sp)
			after := readRows(t, path, "s")
			if len(after) != 1500 {
				t.Fatalf("after append: %d rows", len(after))
			}
			for id, a := range before {
				if after[id] != a {
					t.Fatalf("row %d moved from %+v to %+v after appending rows", id, a, after[id])
				}
			}
		})
	}
}

func TestSplit_GroupedNoEntityOnTwoSides(t *testing.T) {
	path := newDB(t)
	// Union-find over two columns: rows 1-2 share an email, rows 2-3 share a phone, so rows
	// 1, 2, 3 are one customer; row 4 has NULLs in both (its own entity).
	cols := []col{{"email", "TEXT"}, {"phone", "TEXT"}, {"v", "INTEGER"}}
	var rows [][]any
	rows = append(rows, []any{"a@x", "111", int64(1)}, []any{"a@x", "222", int64(2)}, []any{"b@x", "222", int64(3)}, []any{nil, nil, int64(4)})
	r := rand.New(rand.NewPCG(5, 5))
	for i := 0; i < 3000; i++ {
		rows = append(rows, []any{fmt.Sprintf("u%d@x", r.IntN(800)), fmt.Sprintf("%d", 1000+r.IntN(900)), int64(i)})
	}
	makeTable(t, path, "c", cols, rows, nil)
	res := mustSplit(t, path, Spec{Name: "g", Table: "c", Seed: 1, Group: []string{"email", "phone"}})
	got := readRows(t, path, "g")
	if got[1].side != got[2].side || got[2].side != got[3].side {
		t.Errorf("rows linked by email then phone split across sides: %v %v %v", got[1], got[2], got[3])
	}
	for _, c := range []string{"email", "phone"} {
		bad := query(t, path, `SELECT count(*) FROM (SELECT t.`+c+` FROM ss_split_rows r JOIN c t ON t.ss_row = r.row_id WHERE r.split_name = 'g' AND t.`+c+` IS NOT NULL GROUP BY t.`+c+` HAVING count(DISTINCT r.side) > 1)`)
		if bad[0] != "0" {
			t.Errorf("%s values on two sides: %s", c, bad[0])
		}
	}
	if res.Notes["null_group_rows"] != 1 {
		t.Errorf("null_group_rows = %v, want 1", res.Notes["null_group_rows"])
	}
	var groups int
	for _, s := range res.Sides {
		groups += *s.Groups
	}
	if groups != res.Notes["entities"] {
		t.Errorf("side groups sum %d, entities %v", groups, res.Notes["entities"])
	}
	checkAuditQueries(t, path, "g")
	// Refuse policy names the row.
	_, err := split(t, path, Spec{Name: "g2", Table: "c", Group: []string{"email", "phone"}, GroupNulls: "refuse"}, false)
	var de *DataError
	if !errors.As(err, &de) || !strings.Contains(err.Error(), "data.csv:5 (ss_row 4") {
		t.Errorf("refuse: err = %v", err)
	}
}

func TestSplit_StratifiedWithinOneRow(t *testing.T) {
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(4, 1234, 100, 1), nil)
	fr := []float64{0.6, 0.25, 0.15}
	mustSplit(t, path, Spec{Name: "s", Table: "t", Seed: 9, Stratify: "cls", Sides: Sides{{"train", fr[0]}, {"valid", fr[1]}, {"holdout", fr[2]}}})
	per := query(t, path, `SELECT t.cls, r.side, count(*), (SELECT count(*) FROM t AS u WHERE u.cls = t.cls) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 's' GROUP BY t.cls, r.side`)
	if len(per) != 9 {
		t.Fatalf("want 3 strata × 3 sides, got %v", per)
	}
	idx := map[string]int{"train": 0, "valid": 1, "holdout": 2}
	for _, p := range per {
		f := strings.Split(p, "|")
		var n, ns int
		fmt.Sscan(f[2], &n)
		fmt.Sscan(f[3], &ns)
		if d := math.Abs(float64(n) - fr[idx[f[1]]]*float64(ns)); d >= 1 {
			t.Errorf("stratum %s side %s: %d rows of %d, target %.2f (off by %.2f ≥ 1 row)", f[0], f[1], n, ns, fr[idx[f[1]]]*float64(ns), d)
		}
	}
	checkAuditQueries(t, path, "s")
	// Stratified folds: every stratum within one row of n_s/K in each fold.
	mustSplit(t, path, Spec{Name: "f", Table: "t", Seed: 9, Stratify: "cls", Folds: 4})
	pf := query(t, path, `SELECT t.cls, r.fold, count(*), (SELECT count(*) FROM t AS u WHERE u.cls = t.cls) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 'f' GROUP BY t.cls, r.fold`)
	for _, p := range pf {
		f := strings.Split(p, "|")
		var n, ns int
		fmt.Sscan(f[2], &n)
		fmt.Sscan(f[3], &ns)
		if math.Abs(float64(n)-float64(ns)/4) >= 1 {
			t.Errorf("stratum %s fold %s: %d of %d", f[0], f[1], n, ns)
		}
	}
	// A stratum smaller than K is refused.
	makeTable(t, path, "small", []col{{"cls", "TEXT"}}, [][]any{{"a"}, {"a"}, {"a"}, {"b"}, {"b"}}, nil)
	_, err := split(t, path, Spec{Name: "bad", Table: "small", Stratify: "cls", Folds: 3}, false)
	var fe *FieldError
	if !errors.As(err, &fe) || !strings.Contains(err.Error(), `stratum cls="b" has 2 row(s)`) {
		t.Errorf("small stratum: err = %v", err)
	}
}

// scikit-learn's GroupKFold invariant on the groups of its user guide example: no group in two
// test folds. The fold contents, as sets, equal what
//
//	/usr/bin/python3 -c "import numpy as np; from sklearn.model_selection import GroupKFold;
//	  [print(te.tolist()) for _, te in GroupKFold(n_splits=3).split(np.zeros((10,1)),
//	  groups=[1,1,1,2,2,2,3,3,3,3])]"
//
// prints with scikit-learn 1.2.1 (Debian python3-sklearn): [6, 7, 8, 9], [3, 4, 5], [0, 1, 2].
func TestSplit_GroupKFoldExample(t *testing.T) {
	path := newDB(t)
	g := []int64{1, 1, 1, 2, 2, 2, 3, 3, 3, 3}
	var rows [][]any
	for i, x := range g {
		rows = append(rows, []any{int64(i), x})
	}
	makeTable(t, path, "t", []col{{"i", "INTEGER"}, {"g", "INTEGER"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "k", Table: "t", Seed: 1, Group: []string{"g"}, Folds: 3})
	got := readRows(t, path, "k")
	folds := map[int64][]int{}
	groupFold := map[int64]int64{}
	for id, a := range got {
		grp := g[id-1]
		if f, ok := groupFold[grp]; ok && f != a.fold {
			t.Errorf("group %d in folds %d and %d", grp, f, a.fold)
		}
		groupFold[grp] = a.fold
		folds[a.fold] = append(folds[a.fold], int(id-1))
	}
	var sets []string
	for f := int64(1); f <= 3; f++ {
		s := folds[f]
		sortInts(s)
		sets = append(sets, fmt.Sprint(s))
	}
	sortStrings(sets)
	want := []string{"[0 1 2]", "[3 4 5]", "[6 7 8 9]"}
	if !reflect.DeepEqual(sets, want) {
		t.Errorf("fold test sets %v, want %v (scikit-learn GroupKFold)", sets, want)
	}
	if len(res.Folds) != 3 || res.Folds[0].TestRows+res.Folds[1].TestRows+res.Folds[2].TestRows != 10 {
		t.Errorf("fold summary %+v", res.Folds)
	}
	checkAuditQueries(t, path, "k")
}

// foldMembers lists the first value (an integer index) of the rows that rolling fold k
// trains on and tests, sorted.
func foldMembers(got map[int64]rowAssign, rows [][]any, k int) (train, test []int) {
	for id, a := range got {
		i := int(rows[id-1][0].(int64))
		if a.fold == int64(k) {
			test = append(test, i)
		}
		if a.tf != 0 && a.tf <= int64(k) {
			train = append(train, i)
		}
	}
	sortInts(train)
	sortInts(test)
	return train, test
}

// scikit-learn's TimeSeriesSplit example with a gap, recomputed with
//
//	/usr/bin/python3 -c "import numpy as np; from sklearn.model_selection import TimeSeriesSplit;
//	  [print(tr.tolist(), te.tolist()) for tr, te in
//	  TimeSeriesSplit(n_splits=3, test_size=2, gap=2).split(np.arange(12).reshape(-1,1))]"
//
// (scikit-learn 1.2.1, Debian python3-sklearn):
//
//	[0, 1, 2, 3] [6, 7]
//	[0, 1, 2, 3, 4, 5] [8, 9]
//	[0, 1, 2, 3, 4, 5, 6, 7] [10, 11]
func TestSplit_RollingOriginMatchesTimeSeriesSplit(t *testing.T) {
	wantTrain := [][]int{{0, 1, 2, 3}, {0, 1, 2, 3, 4, 5}, {0, 1, 2, 3, 4, 5, 6, 7}}
	wantTest := [][]int{{6, 7}, {8, 9}, {10, 11}}
	for _, gap := range []struct {
		name string
		spec Spec
	}{{"gap rows", Spec{GapRows: 2}}, {"gap duration", Spec{Gap: "2d"}}} {
		t.Run(gap.name, func(t *testing.T) {
			path := newDB(t)
			var rows [][]any
			// Inserted out of time order to show the ordering is by time, not ss_row.
			for _, i := range []int{5, 0, 11, 3, 8, 1, 10, 2, 7, 4, 9, 6} {
				rows = append(rows, []any{int64(i), fmt.Sprintf("2024-01-%02d", i+1)})
			}
			makeTable(t, path, "ts", []col{{"i", "INTEGER"}, {"d", "DATE"}}, rows, nil)
			sp := gap.spec
			sp.Name, sp.Table, sp.Time, sp.Folds, sp.TestSize = "roll", "ts", "d", 3, 2
			res := mustSplit(t, path, sp)
			got := readRows(t, path, "roll")
			for k := 1; k <= 3; k++ {
				train, test := foldMembers(got, rows, k)
				if !reflect.DeepEqual(train, wantTrain[k-1]) || !reflect.DeepEqual(test, wantTest[k-1]) {
					t.Errorf("fold %d: train %v test %v, want %v %v (TimeSeriesSplit)", k, train, test, wantTrain[k-1], wantTest[k-1])
				}
				if res.Folds[k-1].TrainRows != len(wantTrain[k-1]) || res.Folds[k-1].Excluded != 2 {
					t.Errorf("fold %d summary %+v", k, res.Folds[k-1])
				}
			}
			checkAuditQueries(t, path, "roll")
		})
	}
}

// Purging and embargo as defined by López de Prado, Advances in Financial Machine Learning
// (2018), ch. 7: a training observation whose label interval [t, label_end] overlaps the test
// period is purged; observations immediately before the test period (the gap) are dropped.
func TestSplit_TimeGapAndPurge(t *testing.T) {
	path := newDB(t)
	var rows [][]any
	for i := 0; i < 100; i++ {
		day := fmt.Sprintf("2021-%s", dayOf(i))
		end := fmt.Sprintf("2021-%s", dayOf(i+(i%7)*3)) // label known 0..18 days later
		rows = append(rows, []any{int64(i), day, end})
	}
	makeTable(t, path, "e", []col{{"i", "INTEGER"}, {"d", "DATE"}, {"end", "DATE"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "p", Table: "e", Time: "d", Cutoff: "2021-03-11", Gap: "5d", LabelEnd: "end"})
	got := readRows(t, path, "p")
	cut := "2021-03-11"
	gapStart := "2021-03-06"
	for id, a := range got {
		day, end := rows[id-1][1].(string), rows[id-1][2].(string)
		switch {
		case day >= cut:
			if a.side != "holdout" {
				t.Errorf("row %d (%s) at or after the cutoff is on %q", id, day, a.side)
			}
		case day >= gapStart:
			if a.side != "" || a.reason != "gap" {
				t.Errorf("row %d (%s) inside the 5-day gap: %+v", id, day, a)
			}
		case end >= cut:
			if a.side != "" || a.reason != "purge" {
				t.Errorf("row %d (%s, label end %s) overlaps the holdout: %+v", id, day, end, a)
			}
		default:
			if a.side != "train" {
				t.Errorf("row %d (%s, label end %s) should train: %+v", id, day, end, a)
			}
		}
	}
	if res.Dropped["gap"] != 5 || res.Dropped["purge"] == 0 {
		t.Errorf("dropped %v", res.Dropped)
	}
	checkAuditQueries(t, path, "p")
}

// dayOf renders day i (0 = Jan 1) of 2021 as MM-DD.
func dayOf(i int) string {
	m := []int{31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31}
	mo := 0
	for i >= m[mo] {
		i -= m[mo]
		mo++
	}
	return fmt.Sprintf("%02d-%02d", mo+1, i+1)
}

func TestSplit_TimeFractionsAndSpan(t *testing.T) {
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(6, 3000, 2000, 1), nil)
	for _, span := range []string{"drop", "earlier", "entity"} {
		name := "s_" + span
		res := mustSplit(t, path, Spec{Name: name, Table: "t", Seed: 2, Time: "day", Group: []string{"grp"}, Span: span, Gap: "3d"})
		bad := query(t, path, `SELECT count(*) FROM (SELECT t.grp FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = ? AND r.side <> '' GROUP BY t.grp HAVING count(DISTINCT r.side) > 1)`, name)
		if bad[0] != "0" {
			t.Errorf("span %s: %s groups on two sides", span, bad[0])
		}
		if span != "earlier" {
			order := query(t, path, `SELECT (SELECT max(t.day) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = ? AND r.side = 'train') < (SELECT min(t.day) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = ? AND r.side = 'holdout')`, name, name)
			if order[0] != "1" {
				t.Errorf("span %s: train reaches into the holdout period", span)
			}
			checkAuditQueries(t, path, name)
		}
		if res.Notes["spanning_entities"] == 0 {
			t.Errorf("span %s: no spanning entities reported", span)
		}
	}
	// Ungrouped, by fractions: ties never straddle the boundary.
	mustSplit(t, path, Spec{Name: "tf", Table: "t", Time: "day"})
	order := query(t, path, `SELECT (SELECT max(t.day) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 'tf' AND r.side = 'train') < (SELECT min(t.day) FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 'tf' AND r.side = 'holdout')`)
	if order[0] != "1" {
		t.Error("time split by fractions is not time-ordered")
	}
}

func TestSplit_Adopted(t *testing.T) {
	path := newDB(t)
	rows := [][]any{{int64(1)}, {int64(2)}, {int64(3)}, {int64(4)}, {int64(5)}}
	makeTable(t, path, "d", []col{{"v", "INTEGER"}}, rows, []string{"in/train.csv", "in/train.csv", "in/test.csv.gz", "in/train.csv", "in/test.csv.gz"})
	res := mustSplit(t, path, Spec{Name: "a", Table: "d", FromColumn: "ss_source"})
	got := readRows(t, path, "a")
	want := []string{"train", "train", "test", "train", "test"}
	for i, w := range want {
		if got[int64(i+1)].side != w {
			t.Errorf("row %d: %q, want %q", i+1, got[int64(i+1)].side, w)
		}
	}
	if res.Sides[0].Role != "train" || res.Sides[1].Role != "holdout" {
		t.Errorf("roles %+v", res.Sides)
	}
	checkAuditQueries(t, path, "a")
	_, err := split(t, path, Spec{Name: "b", Table: "d", FromColumn: "ss_source", Map: map[string]string{"in/train.csv": "train"}}, false)
	if err == nil || !strings.Contains(err.Error(), `"in/test.csv.gz"`) {
		t.Errorf("unmapped value: err = %v", err)
	}
}

func sortInts(s []int) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

func sortStrings(s []string) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

func TestSplit_StratifiedGroupedBestEffort(t *testing.T) {
	path := newDB(t)
	makeTable(t, path, "t", genCols, genRows(8, 3000, 600, 1), nil)
	res := mustSplit(t, path, Spec{Name: "sg", Table: "t", Seed: 3, Group: []string{"grp"}, Stratify: "cls"})
	bad := query(t, path, `SELECT count(*) FROM (SELECT t.grp FROM ss_split_rows r JOIN t ON t.ss_row = r.row_id WHERE r.split_name = 'sg' GROUP BY t.grp HAVING count(DISTINCT r.side) > 1)`)
	if bad[0] != "0" {
		t.Errorf("%s groups on two sides", bad[0])
	}
	dev, ok := res.Notes["max_stratum_deviation_rows"].(float64)
	// Each stratum has ~300-1800 rows in entities of ~5 rows: the deviation should be a few
	// entities' worth, far below 10% of the smallest stratum (a rule of thumb, no source).
	if !ok || dev > 30 {
		t.Errorf("max_stratum_deviation_rows = %v", res.Notes["max_stratum_deviation_rows"])
	}
	checkAuditQueries(t, path, "sg")
}

func TestSplit_AdoptedFoldColumn(t *testing.T) {
	path := newDB(t)
	rows := [][]any{{int64(1), int64(1)}, {int64(2), int64(2)}, {int64(3), int64(1)}, {int64(4), int64(3)}, {int64(5), int64(2)}}
	makeTable(t, path, "d", []col{{"v", "INTEGER"}, {"fold", "INTEGER"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "af", Table: "d", FoldColumn: "fold"})
	if len(res.Folds) != 3 || res.Folds[0].TestRows != 2 || res.Folds[0].TrainRows != 3 || res.Folds[2].TestRows != 1 {
		t.Errorf("folds %+v", res.Folds)
	}
	got := readRows(t, path, "af")
	for i, r := range rows {
		if got[int64(i+1)].fold != r[1].(int64) || got[int64(i+1)].side != "train" {
			t.Errorf("row %d: %+v", i+1, got[int64(i+1)])
		}
	}
	if rep := verify(t, path, "af"); !rep.Intact {
		t.Errorf("adopted folds do not verify: %+v", rep.Changes)
	}
	makeTable(t, path, "e", []col{{"fold", "INTEGER"}}, [][]any{{int64(1)}, {nil}}, nil)
	if _, err := split(t, path, Spec{Name: "ae", Table: "e", FoldColumn: "fold"}, false); err == nil || !strings.Contains(err.Error(), "row ss_row 2 has fold NULL or not an integer") {
		t.Errorf("NULL fold: %v", err)
	}
}

// Rolling folds with label ends (purging, López de Prado 2018, ch. 7): a row trains in fold k
// only if its label end is before fold k's first test time. Numeric time column, numeric gap.
func TestSplit_RollingPurgeNumericTime(t *testing.T) {
	path := newDB(t)
	var rows [][]any
	for i := 0; i < 20; i++ {
		rows = append(rows, []any{int64(i), float64(i) + float64(i%3)*1.5}) // label end t + 0, 1.5 or 3
	}
	makeTable(t, path, "n", []col{{"t", "INTEGER"}, {"end", "REAL"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "rp", Table: "n", Time: "t", LabelEnd: "end", Folds: 4, TestSize: 3, Gap: "1"})
	got := readRows(t, path, "rp")
	// Test blocks start at positions 20 - (4-k+1)·3: 8, 11, 14, 17.
	starts := []int64{8, 11, 14, 17}
	for id, a := range got {
		ti := rows[id-1][0].(int64)
		end := rows[id-1][1].(float64)
		for k := 1; k <= 4; k++ {
			s := starts[k-1]
			trains := a.tf != 0 && a.tf <= int64(k)
			want := float64(ti) < float64(s)-1 && end < float64(s)
			if trains != want {
				t.Errorf("row t=%d end=%v fold %d: trains=%v, want %v", ti, end, k, trains, want)
			}
		}
	}
	if res.Folds[0].TrainRows+res.Folds[0].Excluded != 8 {
		t.Errorf("fold 1: %+v", res.Folds[0])
	}
	checkAuditQueries(t, path, "rp")
}

// Rolling-origin folds with --group: the TimeSeriesSplit folds above (12 rows, 3 folds, test
// size 2, gap 2 rows), where entity A has rows 1 and 6 (6 is tested in fold 1), B rows 3 and
// 10 (10 tested in fold 3) and C rows 8 and 9 (tested in fold 2); worked out by hand from the
// rule "an entity trains only in folds after the last one that tests it": row 1 trains from
// fold 2, row 3 never, everything else as TimeSeriesSplit has it.
func TestSplit_RollingOriginGrouped(t *testing.T) {
	wantTrain := [][]int{{0, 2}, {0, 1, 2, 4, 5}, {0, 1, 2, 4, 5, 6, 7}}
	wantTest := [][]int{{6, 7}, {8, 9}, {10, 11}}
	ent := map[int]string{1: "A", 6: "A", 3: "B", 10: "B", 8: "C", 9: "C"}
	path := newDB(t)
	var rows [][]any
	for _, i := range []int{5, 0, 11, 3, 8, 1, 10, 2, 7, 4, 9, 6} {
		g, ok := ent[i]
		if !ok {
			g = fmt.Sprintf("U%d", i)
		}
		rows = append(rows, []any{int64(i), fmt.Sprintf("2024-01-%02d", i+1), g})
	}
	makeTable(t, path, "ts", []col{{"i", "INTEGER"}, {"d", "DATE"}, {"g", "TEXT"}}, rows, nil)
	res := mustSplit(t, path, Spec{Name: "roll", Table: "ts", Time: "d", Folds: 3, TestSize: 2, GapRows: 2, Group: []string{"g"}, Sides: Sides{{Name: "train", Fraction: 1}}})
	got := readRows(t, path, "roll")
	for k := 1; k <= 3; k++ {
		train, test := foldMembers(got, rows, k)
		if !reflect.DeepEqual(train, wantTrain[k-1]) || !reflect.DeepEqual(test, wantTest[k-1]) {
			t.Errorf("fold %d: train %v test %v, want %v %v", k, train, test, wantTrain[k-1], wantTest[k-1])
		}
		// Groups by hand: fold 3 trains A twice (rows 1, 6); fold 2 tests C twice.
		if f := res.Folds[k-1]; f.TrainRows != len(wantTrain[k-1]) || f.TrainGroups == nil || *f.TrainGroups != []int{2, 5, 6}[k-1] || f.TestGroups == nil || *f.TestGroups != []int{2, 1, 2}[k-1] {
			t.Errorf("fold %d summary %+v", k, f)
		}
	}
	checkAuditQueries(t, path, "roll") // group_rolling_fold_1 among them
	if rep := verify(t, path, "roll"); !rep.Intact {
		t.Errorf("verify: %+v", rep.Changes)
	}
	// Moving row 3 (entity B) into training by hand breaks the stored check.
	exec(t, path, `UPDATE ss_split_rows SET train_from = 1 WHERE split_name = 'roll' AND row_id = (SELECT ss_row FROM ts WHERE i = 3)`)
	q := query(t, path, `SELECT sql FROM ss_audit_queries WHERE subject = 'split:roll' AND name = 'group_rolling_fold_1'`)
	if len(q) != 1 || len(query(t, path, q[0])) == 0 {
		t.Errorf("group_rolling_fold_1 does not see entity B trained in its test fold")
	}
}

// Invariant on generated data (2,000 rows over 1,000 days; most entities live about 20 days,
// one in ten spans the whole period; a grouped time holdout with 4 rolling folds inside its
// train side): in no fold does an entity both train and get tested. When entities span the
// whole period a fold is left without training rows, and the split says so.
func TestSplit_RollingGroupedInvariant(t *testing.T) {
	path := newDB(t)
	r := rand.New(rand.NewPCG(5, 6))
	var rows [][]any
	for i := 0; i < 2000; i++ {
		day := r.IntN(1000)
		g := fmt.Sprintf("G%03d", day/20)
		if r.IntN(10) == 0 {
			g = fmt.Sprintf("L%d", r.IntN(5))
		}
		rows = append(rows, []any{int64(i), g, "a", time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC).AddDate(0, 0, day).Format("2006-01-02"), r.Float64()})
	}
	makeTable(t, path, "t", genCols, rows, nil)
	mustSplit(t, path, Spec{Name: "rg", Table: "t", Seed: 3, Time: "day", Group: []string{"grp"}, Span: "earlier", Folds: 4, Gap: "3d"})
	got := readRows(t, path, "rg")
	for k := int64(1); k <= 4; k++ {
		train, test := map[string]bool{}, map[string]bool{}
		for id, a := range got {
			g := rows[id-1][1].(string)
			if a.fold == k {
				test[g] = true
			}
			if a.tf != 0 && a.tf <= k {
				train[g] = true
			}
		}
		if len(test) == 0 || len(train) == 0 {
			t.Fatalf("fold %d: %d training and %d tested groups", k, len(train), len(test))
		}
		for g := range test {
			if train[g] {
				t.Errorf("fold %d: group %s trains and is tested", k, g)
			}
		}
	}
	checkAuditQueries(t, path, "rg")
	// Entities over the whole period: a fold would have nothing to train on.
	path2 := newDB(t)
	makeTable(t, path2, "t", genCols, genRows(5, 2000, 120, 1), nil)
	_, err := split(t, path2, Spec{Name: "rg", Table: "t", Seed: 3, Time: "day", Group: []string{"grp"}, Span: "earlier", Folds: 4, Gap: "3d"}, false)
	if err == nil || !strings.Contains(err.Error(), "rolling fold 1 has no training rows") {
		t.Errorf("entities over the whole period: %v", err)
	}
}
