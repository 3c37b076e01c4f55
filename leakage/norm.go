package leakage

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"splitsmith/ingest"
)

// NormalizeValue is the text normalisation of exact_duplicate (and the SQL function
// leak_norm): ingest.NormalizeText, the one the normalised digest stored at ingest
// (ss_norm_digest) uses. Tabs, carriage returns and line feeds become spaces, runs of spaces
// collapse to one, the ends are trimmed of spaces and ASCII letters are lower-cased; its
// stock-SQL form is NormalizeSQL.
func NormalizeValue(s string) string { return ingest.NormalizeText(s) }

// NormalizeSQL is NormalizeValue as a stock SQLite expression over expr
// (ingest.NormalizeTextSQL).
func NormalizeSQL(expr string) string { return ingest.NormalizeTextSQL(expr) }

// RoundSignificantSQL rounds a number to digits significant digits as text with SQLite's
// own printf('%.{digits-1}e', x) (e.g. 3 digits: 1234.5 -> '1.23e+03'). The audit has SQLite
// compute these while it reads the rows, so stored queries group exactly as it did: SQLite
// rounds some exact halves differently from Go's strconv (measured in a test).
func RoundSignificantSQL(expr string, digits int) string {
	if digits < 1 {
		digits = 1
	}
	return fmt.Sprintf(`printf('%%.%de', %s)`, digits-1, expr)
}

// keySpec says how a row's feature key is formed.
type keySpec struct {
	cols      []string
	normalize bool // text normalised (NormalizeValue); otherwise raw
	realDig   int  // significant digits for REAL values
	intDig    int  // significant digits for INTEGER values; 0 = exact
	digest    bool // the row's stored content digest (ss_digest) is the key
}

// Each value contributes 'n' when NULL, else 'v' || length(s) || ':' || s, where s is the
// normalised value; values are joined with '|'. Length-prefixing makes the key unambiguous.
func (a *audit) keySQL(k keySpec, alias string) string {
	if k.digest {
		return alias + ".ss_digest"
	}
	if len(k.cols) == 0 {
		return "''"
	}
	var parts []string
	for _, name := range k.cols {
		c := a.colType(name)
		x := alias + "." + quoteIdent(name)
		var s string
		switch {
		case c.SQLType == "TEXT" && k.normalize:
			s = NormalizeSQL(x)
		case c.SQLType == "TEXT":
			s = x
		case c.SQLType == "INTEGER" && k.intDig == 0:
			s = x
		case c.SQLType == "INTEGER":
			s = RoundSignificantSQL(x, k.intDig)
		default:
			s = RoundSignificantSQL(x, k.realDig)
		}
		parts = append(parts, fmt.Sprintf("CASE WHEN %s IS NULL THEN 'n' ELSE 'v' || length(%s) || ':' || %s END", x, s, s))
	}
	return strings.Join(parts, " || '|' || ")
}

// keys computes every row's key hash (FNV-1a 64 over the same bytes keySQL builds).
func (a *audit) keys(k keySpec) []uint64 {
	out := make([]uint64, len(a.rowID))
	if ks, ok := a.sqlKeys[a.keySQL(k, "t")]; ok {
		// Built by SQLite while the rows were read: hash the same bytes.
		parallel(len(out), a.workers, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				h := uint64(fnvOffset)
				s := ks[i]
				for j := 0; j < len(s); j++ {
					h ^= uint64(s[j])
					h *= fnvPrime
				}
				out[i] = h
			}
		})
		return out
	}
	if k.digest {
		for i, d := range a.digest {
			out[i] = uint64(d)
		}
		return out
	}
	if a.useNormDigest && a.normDigestServes(k) {
		return a.normKeys()
	}
	if ks, ok := a.streamed[a.keySQL(k, "t")]; ok && len(ks) == len(out) {
		copy(out, ks) // hashed while the rows were read
		return out
	}
	cols := a.keyCols(k)
	parallel(len(out), a.workers, func(lo, hi int) {
		var buf []byte
		for i := lo; i < hi; i++ {
			out[i], buf = rowKey(cols, k, i, buf)
		}
	})
	return out
}

func (a *audit) keyCols(k keySpec) []*column {
	cols := make([]*column, len(k.cols))
	for i, n := range k.cols {
		cols[i] = a.data[n]
	}
	return cols
}

// rowKey is row i's key hash: FNV-1a 64 over the bytes keySQL builds.
func rowKey(cols []*column, k keySpec, i int, buf []byte) (uint64, []byte) {
	buf = buf[:0]
	for j, c := range cols {
		if j > 0 {
			buf = append(buf, '|')
		}
		if c.null[i] {
			buf = append(buf, 'n')
			continue
		}
		var s string
		switch {
		case c.SQLType == "TEXT" && k.normalize:
			s = NormalizeValue(c.str[i])
		case c.SQLType == "TEXT":
			s = c.str[i]
		case c.SQLType == "INTEGER" && k.intDig == 0:
			var nb [24]byte
			num := strconv.AppendInt(nb[:0], c.ints[i], 10) // ASCII: one rune per byte
			buf = append(buf, 'v', byte('0'+len(num)))      // at most 20 digits: one or two
			if len(num) >= 10 {
				buf = append(buf[:len(buf)-1], '0'+byte(len(num)/10), '0'+byte(len(num)%10))
			}
			buf = append(buf, ':')
			buf = append(buf, num...)
			continue
		case c.SQLType == "INTEGER":
			s = c.rounded[k.intDig][i]
		case k.realDig == c.roundOnly && c.ro != nil:
			s = c.ro[i] // also while the rows are still being read
		default:
			s = c.rounded[k.realDig][i]
		}
		buf = append(buf, 'v')
		if n := utf8.RuneCountInString(s); n < 10 {
			buf = append(buf, byte('0'+n))
		} else {
			buf = strconv.AppendInt(buf, int64(n), 10)
		}
		buf = append(buf, ':')
		buf = append(buf, s...)
	}
	h := uint64(fnvOffset)
	for _, b := range buf {
		h ^= uint64(b)
		h *= fnvPrime
	}
	return h, buf
}

// groupsOf returns the runs of row indexes sharing a key, for runs longer than one, each
// ascending, ordered by their first index.
func groupsOf(keys []uint64) [][]int32 {
	type kv struct {
		k uint64
		i int32
	}
	arr := make([]kv, len(keys))
	for i, k := range keys {
		arr[i] = kv{k, int32(i)}
	}
	slices.SortFunc(arr, func(x, y kv) int {
		if c := cmpU64(x.k, y.k); c != 0 {
			return c
		}
		return int(x.i - y.i)
	})
	var out [][]int32
	for i := 0; i < len(arr); {
		j := i + 1
		for j < len(arr) && arr[j].k == arr[i].k {
			j++
		}
		if j-i > 1 {
			g := make([]int32, j-i)
			for t := range g {
				g[t] = arr[i+t].i
			}
			out = append(out, g)
		}
		i = j
	}
	slices.SortFunc(out, func(x, y []int32) int { return int(x[0] - y[0]) })
	return out
}
