package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

// funcDB is a database with this package's SQL functions (SQLite is the reference for the
// checks below: the printf, lower, trim and replace of the bundled modernc.org/sqlite).
func funcDB(t testing.TB) *sql.DB {
	t.Helper()
	path := filepath.Join(t.TempDir(), "f.db")
	if _, err := loadInto(t, path, []Input{csvIn("x.csv", "a\n1\n")}, Options{}); err != nil {
		t.Fatal(err)
	}
	return openDB(t, path).DB
}

// Reference terms computed outside Go with /usr/bin/python3: FNV-1a 64 (offset
// 14695981039346656037, prime 1099511628211) over pos.to_bytes(4, 'big') + (b'n' if NULL else
// b'v' + text.encode()), then MurmurHash3's fmix64 (shift 33, multiply 0xff51afd7ed558ccd,
// shift 33, multiply 0xc4ceb9fe1a85ec53, shift 33), all mod 2**64.
func TestNormTerm_ReferenceValues(t *testing.T) {
	tests := []struct {
		pos  int
		norm string
		null bool
		want uint64
	}{
		{1, "cast iron", false, 7959175019168693180},
		{2, "", true, 10151467352820933436},
		{3, "", false, 4985353467576683788},
		{70000, "río", false, 376526426411977960},
		{1, "1.50000000e+00", false, 1359098972665263588},
	}
	db := funcDB(t)
	for _, tc := range tests {
		if got := NormTerm(tc.pos, tc.norm, tc.null); got != tc.want {
			t.Errorf("NormTerm(%d, %q, %v) = %d, want %d (python3)", tc.pos, tc.norm, tc.null, got, tc.want)
		}
		var arg any = tc.norm
		if tc.null {
			arg = nil
		}
		var got int64
		if err := db.QueryRow(`SELECT ingest_norm_term(?, ?)`, tc.pos, arg).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if uint64(got) != tc.want {
			t.Errorf("ingest_norm_term(%d, %v) = %d, want %d (python3)", tc.pos, arg, got, int64(tc.want))
		}
	}
	// The hot-path forms used while loading agree with NormTerm.
	for _, s := range []string{"", "abc", "ABC def", "  a\tB ", "a\x01 b", "00123"} {
		if got, want := termText(posHash(4), s), NormTerm(4, NormalizeText(s), false); got != want {
			t.Errorf("termText(%q) = %d, NormTerm %d", s, got, want)
		}
		if got, want := termBytes(posHash(4), []byte(s)), NormTerm(4, s, false); got != want {
			t.Errorf("termBytes(%q) = %d, NormTerm %d", s, got, want)
		}
	}
	if termNull(posHash(9)) != NormTerm(9, "", true) {
		t.Error("termNull differs from NormTerm of NULL")
	}
}

// The examples of ingest_norm_term and ingest_norm_digest state what the Go functions give
// (and the first term is the python3 value above).
func TestSQL_NormExamplesEqualGo(t *testing.T) {
	want := map[string]int64{
		"SELECT ingest_norm_term(1, 'cast iron')":                                               int64(NormTerm(1, "cast iron", false)),
		"SELECT ingest_norm_term(2, NULL)":                                                      int64(NormTerm(2, "", true)),
		"SELECT ingest_norm_digest('cast iron', NULL, 42, '1.50000000e+00')":                    int64(NormTerm(1, "cast iron", false) + NormTerm(2, "", true) + NormTerm(3, "42", false) + NormTerm(4, "1.50000000e+00", false)),
		"SELECT ingest_norm_digest(lower(trim('  Cast IRON ')), NULL, 42, printf('%.8e', 1.5))": int64(NormTerm(1, "cast iron", false) + NormTerm(2, "", true) + NormTerm(3, "42", false) + NormTerm(4, "1.50000000e+00", false)),
	}
	db := funcDB(t)
	seen := 0
	for _, f := range SQL().Funcs {
		if !strings.HasPrefix(f.Name, "ingest_norm_") {
			continue
		}
		for _, e := range f.Examples {
			w, ok := want[e.SQL]
			if !ok {
				t.Errorf("example %s has no Go value in this test", e.SQL)
				continue
			}
			seen++
			if e.Want != strconv.FormatInt(w, 10) {
				t.Errorf("%s: example says %s, Go gives %d", e.SQL, e.Want, w)
			}
			var got int64
			if err := db.QueryRow(e.SQL).Scan(&got); err != nil {
				t.Fatal(err)
			}
			if got != w {
				t.Errorf("%s = %d, Go %d", e.SQL, got, w)
			}
		}
	}
	if seen != len(want) {
		t.Errorf("checked %d examples, want %d", seen, len(want))
	}
	var msg string
	if err := db.QueryRow(`SELECT ingest_norm_term(0, 'a')`).Scan(&msg); err == nil || !strings.Contains(err.Error(), "argument 1 (pos) must be a column position from 1, got 0") {
		t.Errorf("position 0: %v", err)
	}
	if err := db.QueryRow(`SELECT ingest_norm_digest('a', 1.5)`).Scan(&msg); err == nil || !strings.Contains(err.Error(), "argument 2 (t2) must be normalised TEXT (for a REAL: printf('%.8e', x)), got REAL") {
		t.Errorf("a REAL argument: %v", err)
	}
}

// The digest is a sum: the order in which terms are added does not matter, but a value's
// position does (the same values in another column order give another digest), and SQL's
// ingest_norm_digest equals the Go sum on random rows.
func TestNormDigest_SumOrderAndPosition(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 11))
	db := funcDB(t)
	words := []string{"cast iron", "pvc", "", "42", "-7", "1.25000000e-01", "río"}
	for n := 0; n < 200; n++ {
		k := 1 + r.IntN(6)
		vals := make([]any, k)
		var fwd, back uint64
		for i := range vals {
			if r.IntN(5) == 0 {
				vals[i] = nil
			} else {
				vals[i] = words[r.IntN(len(words))]
			}
		}
		term := func(i int) uint64 {
			s, _ := vals[i].(string)
			return NormTerm(i+1, s, vals[i] == nil)
		}
		for i := range vals {
			fwd += term(i)
		}
		for i := k - 1; i >= 0; i-- {
			back += term(i)
		}
		if fwd != back {
			t.Fatalf("sum depends on order: %d vs %d", fwd, back)
		}
		var got int64
		if err := db.QueryRow(`SELECT ingest_norm_digest(`+strings.TrimSuffix(strings.Repeat("?,", k), ",")+`)`, vals...).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if uint64(got) != fwd {
			t.Errorf("ingest_norm_digest%v = %d, Go %d", vals, got, int64(fwd))
		}
	}
	if NormTerm(1, "pvc", false) == NormTerm(2, "pvc", false) {
		t.Error("the same value has the same term in two positions")
	}
	if NormTerm(1, "a", false)+NormTerm(2, "b", false) == NormTerm(1, "b", false)+NormTerm(2, "a", false) {
		t.Error("swapping two values keeps the digest")
	}
	if NormTerm(1, "", false) == NormTerm(1, "", true) {
		t.Error("NULL and the empty string have the same term")
	}
}

// The shortcut of NormalizeText (values already normalised are returned as they are) must
// agree with the full sequence of string operations, and both with the stock-SQL form
// evaluated by SQLite, on every string: random strings over the characters the operations
// treat specially, and hand-picked tricky ones.
func TestNormalizeText_MatchesSQLite(t *testing.T) {
	db := funcDB(t)
	st, err := db.Prepare(`SELECT ` + NormalizeTextSQL("?"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	viaSQL := func(s string) string {
		var got string
		if err := st.QueryRow(s).Scan(&got); err != nil {
			t.Fatal(err)
		}
		return got
	}
	tricky := []string{"", " ", "  ", "a", "  Cast  IRON ", "\tA\r\nB\t", "a\x01 b", "a \x01b", "\x01", " \x01 ", "ÉCOLE  École", "x  \n  y", "ABC", "abc", "a b", "a  b", "\u00a0a\u00a0"}
	r := rand.New(rand.NewPCG(3, 3))
	alpha := []string{"a", "z", "A", "Z", " ", " ", "\t", "\n", "\r", "\x01", "é", "É", "0"}
	shortcuts := 0
	for i := 0; i < 20000; i++ {
		s := ""
		if i < len(tricky) {
			s = tricky[i]
		} else {
			for n := r.IntN(8); n > 0; n-- {
				s += alpha[r.IntN(len(alpha))]
			}
		}
		got := NormalizeText(s)
		if full := normalizeFull(s); got != full {
			t.Fatalf("NormalizeText(%q) = %q, the full operations give %q", s, got, full)
		}
		if got == s {
			shortcuts++
		}
		if i < len(tricky) || i%10 == 0 {
			if want := viaSQL(s); got != want {
				t.Errorf("NormalizeText(%q) = %q, SQLite %s gives %q", s, got, NormalizeTextSQL("?"), want)
			}
		}
	}
	if shortcuts == 0 {
		t.Fatal("no string was already normalised")
	}
}

// RoundSignificant (and so the REAL part of NormValue) must give SQLite's own
// printf('%.{d-1}e', x) (the reference: printf of the bundled modernc.org/sqlite) whenever it
// answers: random values of every magnitude, decimal
// fractions, and exact binary halves (0.125 to 2 digits and 2.5 to 1 digit round half up in
// SQLite's decimal approximation; Go's strconv rounds them to even).
func TestRoundSignificant_MatchesSQLitePrintf(t *testing.T) {
	db := funcDB(t)
	r := rand.New(rand.NewPCG(7, 7))
	xs := []float64{0.125, 2.5, 1234.5, 0.5, 1.5, -7.25, 9.9999999995, 99999.99995, 123456789.5, 1.234567885, 1e-300, 1e300}
	for i := 0; i < 4000; i++ {
		xs = append(xs, (r.Float64()-0.5)*math.Pow(10, float64(r.IntN(80)-40)))
		xs = append(xs, float64(r.IntN(2000000)-1000000)/math.Pow(10, float64(r.IntN(12))))
		xs = append(xs, float64(r.IntN(1<<20)*2+1)/math.Pow(2, float64(r.IntN(30)+1)))
	}
	xs = append(xs, 0, -0.0, math.SmallestNonzeroFloat64, math.MaxFloat64)
	answered, left := 0, 0
	for d := 1; d <= MaxGoRoundDigits; d++ {
		st, err := db.Prepare(fmt.Sprintf(`SELECT printf('%%.%de', ?)`, d-1))
		if err != nil {
			t.Fatal(err)
		}
		for i, x := range xs {
			got, _, ok := RoundSignificant(nil, x, d)
			if !ok {
				if i >= 12 && i < 12+12000 && (i-12)%3 == 0 {
					left++ // a value drawn uniformly
				}
				continue
			}
			answered++
			var want string
			if err := st.QueryRow(x).Scan(&want); err != nil {
				t.Fatal(err)
			}
			if got != want {
				t.Errorf("RoundSignificant(%v, %d) = %q, SQLite printf gives %q", x, d, got, want)
			}
		}
		st.Close()
	}
	if _, _, ok := RoundSignificant(nil, 1.2345, MaxGoRoundDigits+1); ok {
		t.Errorf("RoundSignificant answers for %d digits", MaxGoRoundDigits+1)
	}
	// Uniform values are near a rounding boundary with probability about 2×10^-4 per digit
	// count: far fewer than 1% may be left to SQLite.
	t.Logf("answered %d; uniform values left to SQLite: %d of %d", answered, left, 4000*MaxGoRoundDigits)
	if left > 4000*MaxGoRoundDigits/100 {
		t.Errorf("RoundSignificant leaves %d uniform values to SQLite", left)
	}
	// Exact halves at the kept digits are left to SQLite (its half-up answer is the one).
	for _, c := range []struct {
		x float64
		d int
	}{{0.125, 2}, {2.5, 1}, {123456789.5, 9}} {
		if s, _, ok := RoundSignificant(nil, c.x, c.d); ok {
			t.Errorf("RoundSignificant(%v, %d) = %q, want it left to SQLite", c.x, c.d, s)
		}
	}
	if got := string(AppendSci(true, []byte("1235"), 2)); got != "-1.235e+02" {
		t.Errorf("AppendSci = %q, want -1.235e+02 (SQLite printf('%%.3e', -123.5))", got)
	}
}

// NormValue agrees with SQLite evaluating NormExprSQL on the same value, whenever it answers,
// for every SQL type and for values of another storage class; it leaves to SQLite what it
// cannot be sure of.
func TestNormValue_MatchesNormExprSQL(t *testing.T) {
	db := funcDB(t)
	vals := []driver.Value{nil, "  Cast  IRON ", "pvc", "", "12", int64(0), int64(-42), int64(math.MinInt64), 0.0, math.Copysign(0, -1), 2.5, 0.125, -7.25, 1e-5, 123456789.5, 1.234567885, 0.1, []byte("Ab")}
	left := map[string]int{}
	for _, typ := range []string{"TEXT", "INTEGER", "REAL"} {
		st, err := db.Prepare(`SELECT ` + NormExprSQL(typ, "?1"))
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range vals {
			norm, null, ok := NormValue(typ, v)
			// ValueTerm is the same term without the string (checked against NormTerm here).
			for pos := 1; pos <= 3; pos++ {
				term, _, tok := ValueTerm(pos, typ, v, nil)
				if tok != ok || (ok && term != NormTerm(pos, norm, null)) {
					t.Errorf("ValueTerm(%d, %s, %#v) = %d %v; NormTerm(NormValue) = %d %v", pos, typ, v, term, tok, NormTerm(pos, norm, null), ok)
				}
			}
			if !ok {
				left[typ]++
				continue
			}
			var want sql.NullString
			if err := st.QueryRow(v).Scan(&want); err != nil {
				t.Fatal(err)
			}
			if null != !want.Valid || norm != want.String {
				t.Errorf("NormValue(%s, %#v) = %q null=%v; SQLite %s gives %v", typ, v, norm, null, NormExprSQL(typ, "?"), want)
			}
		}
		st.Close()
	}
	// TEXT: the 3 INTEGERs, 9 REALs and the BLOB; INTEGER: the 9 REALs and the BLOB; REAL:
	// -0, the two values at a 9-digit boundary, the 4 texts, the 3 INTEGERs and the BLOB.
	if want := map[string]int{"TEXT": 13, "INTEGER": 10, "REAL": 11}; fmt.Sprint(left) != fmt.Sprint(want) {
		t.Errorf("values left to SQLite per type: %v, want %v", left, want)
	}
	if n, _, ok := NormValue("REAL", 0.0); !ok || n != "0.00000000e+00" {
		t.Errorf("NormValue(REAL, 0) = %q %v", n, ok)
	}
}

// normCSV mixes what the normalised digest has to get right: text with case and whitespace to
// normalise, NULLs, integers and negative numbers, booleans, dates and timestamps (TEXT),
// exact binary halves, zeros, and REALs built to sit on a 9-digit rounding boundary
// (123456789.5 exactly, 1.234567885 and -2.000000005 within 1e-15 of one), which Go leaves to
// SQLite's printf during the load.
const normCSV = "id,material,depth,ok,day,at,note\n" +
	"1,  Cast  IRON ,0.125,true,2024-03-01,2024-03-01T08:15:00Z,\"two\r\nlines\"\n" +
	"2,pvc,2.5,false,2024-03-02,2024-03-02 09:00,plain\n" +
	"3,PVC,123456789.5,TRUE,,,\n" +
	"-4,\tpvc\t,1.234567885,false,2024-03-04,2024-03-04T00:00:00+01:00,NA\n" +
	"5,,-2.000000005,,2024-03-05,,\"a\x01 b\"\n" +
	"6,steel,0,true,2024-03-06,2024-03-06T10:00:00Z,x\n" +
	"-7,Steel ,-0.000,false,2024-03-07,2024-03-07T11:30:00Z,\"  \"\n" +
	"8,steel,,true,2024-03-08,2024-03-08T12:00:00Z,ÉCOLE  École\n" +
	"9,steel,-7.25,true,2024-03-09,2024-03-09T12:00:00Z,1e-5\n"

// Every stored ss_norm_digest equals its recomputation by the stored SQL (the reference:
// SQLite does the normalising and the rounding there, with the lower/trim/replace and
// printf('%.8e') of the bundled modernc.org/sqlite), and the fix-up path through SQLite's
// printf ran for the boundary values.
func TestLoad_NormDigestMatchesSQLite(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	before := normFixups.Load()
	res, err := loadInto(t, path, []Input{csvIn("n.csv", normCSV)}, Options{Table: "n"})
	if err != nil {
		t.Fatal(err)
	}
	if fixed := normFixups.Load() - before; fixed < 3 {
		t.Errorf("%d values were rounded by SQLite during the load, want at least the 3 boundary values", fixed)
	}
	if res.NormDigestCheckSQL == "" || !strings.Contains(res.NormDigestCheckSQL, "printf('%.8e', \"depth\")") {
		t.Fatalf("check SQL %q", res.NormDigestCheckSQL)
	}
	db := openDB(t, path)
	if bad := query(t, db.DB, res.NormDigestCheckSQL); len(bad) != 0 {
		t.Errorf("rows whose ss_norm_digest does not recompute in SQLite: %v\n%s", bad, res.NormDigestCheckSQL)
	}
	rows := query(t, db.DB, `SELECT ss_norm_digest FROM n ORDER BY ss_row`)
	seen := map[any]bool{}
	for _, r := range rows {
		seen[r[0]] = true
	}
	if len(rows) != 9 || len(seen) != 9 {
		t.Errorf("digests %v: want 9 distinct", rows)
	}
	// Go's NormValue with SQLite deciding what it leaves gives the same sums.
	var sqlTypes []string
	for _, c := range res.Columns {
		sqlTypes = append(sqlTypes, c.SQLType)
	}
	for _, r := range query(t, db.DB, `SELECT * FROM n ORDER BY ss_row`) {
		var sum uint64
		for i, v := range r[5:] {
			norm, null, ok := NormValue(sqlTypes[i], v)
			if !ok {
				var s string
				if err := db.QueryRow(`SELECT `+NormExprSQL(sqlTypes[i], "?1"), v).Scan(&s); err != nil {
					t.Fatal(err)
				}
				norm = s
			}
			sum += NormTerm(i+1, norm, null)
		}
		if int64(sum) != r[4] {
			t.Errorf("row %v: ss_norm_digest %v, Go with SQLite fix-ups %d", r[0], r[4], int64(sum))
		}
	}
	// A change the normalisation ignores keeps the digest; one it sees is listed.
	if err := store.Update(context.Background(), path, store.Options{SQL: []sqlfn.Set{SQL()}}, false, store.Run{Command: "test"},
		func(ctx context.Context, tx *store.Tx) error {
			_, err := tx.Conn.ExecContext(ctx, `UPDATE n SET material = 'PVC  ' WHERE ss_row = 2; UPDATE n SET depth = 2.5000000001 WHERE ss_row = 2; UPDATE n SET note = 'changed' WHERE ss_row = 6`)
			return err
		}); err != nil {
		t.Fatal(err)
	}
	db2 := openDB(t, path)
	if bad := query(t, db2.DB, res.NormDigestCheckSQL); fmt.Sprint(bad) != "[[6]]" {
		t.Errorf("after edits the check lists %v, want [[6]]", bad)
	}
}

// Appending to a table made before ss_norm_digest existed loads without it.
func TestLoad_AppendToTableWithoutNormDigest(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	if _, err := loadInto(t, path, []Input{csvIn("a.csv", "n,s,x\n1,x,0.5\n2,y,1.5\n")}, Options{Table: "t"}); err != nil {
		t.Fatal(err)
	}
	if err := store.Update(context.Background(), path, store.Options{SQL: []sqlfn.Set{SQL()}}, false, store.Run{Command: "test"},
		func(ctx context.Context, tx *store.Tx) error {
			_, err := tx.Conn.ExecContext(ctx, `ALTER TABLE t DROP COLUMN ss_norm_digest`)
			return err
		}); err != nil {
		t.Fatal(err)
	}
	res, err := loadInto(t, path, []Input{csvIn("b.csv", "n,s,x\n3,z,123456789.5\n")}, Options{Table: "t", Append: true})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 1 || res.FirstRow != 3 || res.NormDigestCheckSQL != "" {
		t.Errorf("append result %+v", res)
	}
	db := openDB(t, path)
	if bad := query(t, db.DB, res.DigestCheckSQL); len(bad) != 0 {
		t.Errorf("digest check lists %v", bad)
	}
	got := query(t, db.DB, `SELECT ss_row, n, s, x FROM t ORDER BY ss_row`)
	if fmt.Sprint(got) != "[[1 1 x 0.5] [2 2 y 1.5] [3 3 z 1.234567895e+08]]" {
		t.Errorf("rows %v", got)
	}
	// And a table that has it keeps getting it on append.
	res, err = loadInto(t, path, []Input{csvIn("c.csv", "n,s,x\n4,w,2.5\n")}, Options{Table: "u"})
	if err != nil {
		t.Fatal(err)
	}
	res, err = loadInto(t, path, []Input{csvIn("d.csv", "n,s,x\n5,v,1.234567885\n")}, Options{Table: "u", Append: true})
	if err != nil {
		t.Fatal(err)
	}
	if bad := query(t, openDB(t, path).DB, res.NormDigestCheckSQL); res.NormDigestCheckSQL == "" || len(bad) != 0 {
		t.Errorf("appended table u: check %q lists %v", res.NormDigestCheckSQL, bad)
	}
}

// The load's per-value term computation allocates nothing for values already normalised,
// integers and REALs (the producer goroutine is on the load's critical path).
func TestNormTerms_NoAllocation(t *testing.T) {
	z := newNormScratch(3)
	f := []byte("-12345")
	n := testing.AllocsPerRun(200, func() {
		var ns uint64
		ns += termText(z.pos[0], "cast iron")
		ns += termText(z.pos[0], "Cast Iron")
		ns += termBytes(z.pos[1], f)
		var ok bool
		z.num, z.scratch, ok = appendNormReal(z.num[:0], z.scratch, 16.881)
		if ok {
			ns += termBytes(z.pos[2], z.num)
		}
		z.num, z.scratch, _ = appendNormReal(z.num[:0], z.scratch, 1.0000000000000002e-250)
		ns += z.null[2]
		_ = ns
	})
	if n != 0 {
		t.Errorf("%v allocations per row", n)
	}
}

func BenchmarkNormTerms(b *testing.B) {
	z := newNormScratch(3)
	f := []byte("1042")
	for b.Loop() {
		var ns uint64
		ns += termText(z.pos[0], "cast iron")
		ns += termBytes(z.pos[1], f)
		z.num, z.scratch, _ = appendNormReal(z.num[:0], z.scratch, 16.881)
		ns += termBytes(z.pos[2], z.num)
		_ = ns
	}
}

// roundFast's decimal exponent estimate (be·78913) >> 18 equals floor(be·log10 2) over the
// binary exponents it meets (checked also with /usr/bin/python3:
// all((k*78913)>>18 == math.floor(k*math.log10(2)) for k in range(-1100, 1101)) is True).
func TestRoundFast_ExponentEstimate(t *testing.T) {
	for be := -1100; be <= 1100; be++ {
		if got, want := (be*78913)>>18, int(math.Floor(float64(be)*math.Log10(2))); got != want {
			t.Fatalf("be=%d: estimate %d, floor(be·log10 2) = %d", be, got, want)
		}
	}
}
