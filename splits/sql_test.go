package splits

import (
	"strings"
	"testing"
)

// The SQL functions return exactly what the Go functions return, row by row, including NULL.
func TestSQL_MatchesGo(t *testing.T) {
	path := newDB(t)
	rows := [][]any{{int64(0), int64(1), "S-0042"}, {int64(-1), int64(42), "río"}, {int64(1854158007365103010), int64(-1), ""}, {int64(7), int64(0), nil}, {nil, int64(3), "x"}}
	makeTable(t, path, "k", []col{{"d", "INTEGER"}, {"seed", "INTEGER"}, {"s", "TEXT"}}, rows, nil)
	got := query(t, path, `SELECT split_hash_u(d, seed), split_bucket(d, seed, 7), split_side(d, seed, 'a=0.5,b=0.3,c=0.2'), hex(split_key(s, d)), split_side(split_key(s), seed, 'train=0.8,holdout=0.2') FROM k ORDER BY ss_row`)
	for i, r := range rows {
		var want string
		k2, _ := Key(r[2], r[0])
		k3, _ := Key(r[2])
		side3 := []string{"train", "holdout"}[SideIndex(HashU(k3, uint64(r[1].(int64))), Cumulative([]float64{0.8, 0.2}))]
		if r[0] == nil {
			want = "NULL|NULL|NULL|" + upperHex(k2) + "|" + side3
		} else {
			d, s := r[0].(int64), uint64(r[1].(int64))
			u := HashU(DigestKey(d), s)
			side := []string{"a", "b", "c"}[SideIndex(u, Cumulative([]float64{0.5, 0.3, 0.2}))]
			want = fmtF(u) + "|" + itoa(int64(Bucket(DigestKey(d), s, 7))) + "|" + side + "|" + upperHex(k2) + "|" + side3
		}
		if got[i] != want {
			t.Errorf("row %d: SQL %s, Go %s", i+1, got[i], want)
		}
	}
	// The seal aggregate equals Seal over the same digests, in any order; empty set too.
	seal := query(t, path, `SELECT split_seal(ss_digest), (SELECT split_seal(ss_digest) FROM (SELECT ss_digest FROM k ORDER BY ss_digest DESC)), (SELECT split_seal(ss_digest) FROM k WHERE 0) FROM k`)
	var ds []int64
	for _, r := range query(t, path, `SELECT ss_digest FROM k`) {
		ds = append(ds, parseInt(r))
	}
	want := Seal(ds) + "|" + Seal(ds) + "|" + Seal(nil)
	if seal[0] != want {
		t.Errorf("split_seal: SQL %s, Go %s", seal[0], want)
	}
	// Bad arguments are located.
	db := openDB(t, path)
	var x any
	if err := db.QueryRow(`SELECT split_side(1, 'x', 'a=1')`).Scan(&x); err == nil || !strings.Contains(err.Error(), "split_side: argument 2 (seed) must be INTEGER, got TEXT") {
		t.Errorf("bad seed: %v", err)
	}
	if err := db.QueryRow(`SELECT split_side(1, 1, 'a=0.5,b=0.4')`).Scan(&x); err == nil {
		t.Error("sides not summing to 1 accepted")
	}
}

func upperHex(b []byte) string {
	const h = "0123456789ABCDEF"
	out := make([]byte, 0, 2*len(b))
	for _, c := range b {
		out = append(out, h[c>>4], h[c&15])
	}
	return string(out)
}

func fmtF(f float64) string { return sqlRender(f) }

func parseInt(s string) int64 {
	var n int64
	neg := false
	for i, c := range s {
		if i == 0 && c == '-' {
			neg = true
			continue
		}
		n = n*10 + int64(c-'0')
	}
	if neg {
		return -n
	}
	return n
}
