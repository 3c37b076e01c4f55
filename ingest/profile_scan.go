package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Distinct counts, top values and case variants are computed from 64-bit FNV-1a hashes of the
// values collected in one streaming pass (8 bytes per value, 16 more per text value), which
// is much faster on a million rows than SQL's COUNT(DISTINCT) and GROUP BY (they spill to
// temporary files). Two different values share a hash with probability about n²/2⁶⁵
// (< 1e-7 at a million distinct values); the strings shown are then fetched in a second pass.

const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
)

func fnvByte(h uint64, b byte) uint64 { return (h ^ uint64(b)) * fnvPrime }

func fnvString(h uint64, s string) uint64 {
	for i := 0; i < len(s); i++ {
		h = (h ^ uint64(s[i])) * fnvPrime
	}
	return h
}

// profHash hashes a stored value with its storage class; an integral REAL hashes like the
// INTEGER of the same value, as SQL's DISTINCT compares them equal.
func profHash(v any) (h uint64, text string, isText bool) {
	h = fnvOffset
	switch x := v.(type) {
	case int64:
		return fnvString(fnvByte(h, 1), strconv.FormatInt(x, 10)), "", false
	case float64:
		if x == math.Trunc(x) && math.Abs(x) < 1<<62 {
			return fnvString(fnvByte(h, 1), strconv.FormatInt(int64(x), 10)), "", false
		}
		return fnvString(fnvByte(h, 2), strconv.FormatFloat(x, 'g', -1, 64)), "", false
	case string:
		return fnvString(fnvByte(h, 3), x), x, true
	case []byte:
		return fnvString(fnvByte(h, 4), string(x)), "", false
	case bool:
		if x {
			return fnvString(fnvByte(h, 1), "1"), "", false
		}
		return fnvString(fnvByte(h, 1), "0"), "", false
	}
	return fnvString(fnvByte(h, 5), fmt.Sprint(v)), "", false
}

func isASCIISpace(b byte) bool { return b == ' ' || b == '\t' || b == '\n' || b == '\r' }

// profNormHash hashes s with ASCII letters lowered and surrounding whitespace removed.
func profNormHash(s string) uint64 {
	i, j := 0, len(s)
	for i < j && isASCIISpace(s[i]) {
		i++
	}
	for j > i && isASCIISpace(s[j-1]) {
		j--
	}
	h := fnvByte(fnvOffset, 3)
	for k := i; k < j; k++ {
		c := s[k]
		if c >= 'A' && c <= 'Z' {
			c += 'a' - 'A'
		}
		h = (h ^ uint64(c)) * fnvPrime
	}
	return h
}

func profNorm(s string) string { return strings.ToLower(strings.Trim(s, " \t\n\r")) }

type profPair struct{ norm, raw uint64 }

type hashCount struct {
	h uint64
	n int64
}

// caseSet is a set of spellings that normalise to the same value.
type caseSet struct {
	norm      uint64
	rows, off int64
	members   []hashCount
}

// profScan is the result of the first pass over a column.
type profScan struct {
	nonMissing, text   int64
	nNum, nDate, nTS   int64
	distinct           int64
	top                []hashCount // up to 5, count descending
	caseSets, caseRows int64       // all sets; rows off their set's most common spelling
	caseExamples       []caseSet   // up to maxExamples sets, most rows first
}

func scanColumn(ctx context.Context, conn *sql.Conn, t, q string, classify bool) (*profScan, error) {
	ps := &profScan{}
	var hashes []uint64
	var pairs []profPair
	err := rawQuery(ctx, conn, `SELECT `+q+` FROM `+t+` WHERE `+q+` IS NOT NULL`, 1, func(vals []driver.Value) (bool, error) {
		ps.nonMissing++
		h, s, isText := profHash(vals[0])
		hashes = append(hashes, h)
		if !isText {
			return true, nil
		}
		ps.text++
		pairs = append(pairs, profPair{profNormHash(s), h})
		if classify {
			if _, ok := profNumber(s); ok {
				ps.nNum++
			} else if _, ok := profDate(s); ok {
				ps.nDate++
			} else if _, ok := profTimestamp(s); ok {
				ps.nTS++
			}
		}
		return true, nil
	})
	if err != nil {
		return nil, err
	}

	// Distinct values and the five most frequent (ties: smaller hash first, deterministic).
	slices.Sort(hashes)
	for i := 0; i < len(hashes); {
		j := i + 1
		for j < len(hashes) && hashes[j] == hashes[i] {
			j++
		}
		ps.distinct++
		ps.top = pushTop(ps.top, hashCount{hashes[i], int64(j - i)}, 5)
		i = j
	}

	// Case and whitespace variants.
	slices.SortFunc(pairs, func(a, b profPair) int {
		if a.norm != b.norm {
			return cmpU64(a.norm, b.norm)
		}
		return cmpU64(a.raw, b.raw)
	})
	for i := 0; i < len(pairs); {
		j := i
		var members []hashCount
		for j < len(pairs) && pairs[j].norm == pairs[i].norm {
			k := j + 1
			for k < len(pairs) && pairs[k] == pairs[j] {
				k++
			}
			members = append(members, hashCount{pairs[j].raw, int64(k - j)})
			j = k
		}
		if len(members) > 1 {
			cs := caseSet{norm: pairs[i].norm}
			var most int64
			for _, m := range members {
				cs.rows += m.n
				most = max(most, m.n)
			}
			cs.off = cs.rows - most
			cs.members = members
			ps.caseSets++
			ps.caseRows += cs.off
			ps.caseExamples = append(ps.caseExamples, cs)
			if len(ps.caseExamples) > 4*maxExamples {
				ps.caseExamples = trimCaseSets(ps.caseExamples)
			}
		}
		i = j
	}
	ps.caseExamples = trimCaseSets(ps.caseExamples)
	return ps, nil
}

func cmpU64(a, b uint64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func pushTop(top []hashCount, c hashCount, k int) []hashCount {
	better := func(a, b hashCount) bool { return a.n > b.n || a.n == b.n && a.h < b.h }
	if len(top) == k && !better(c, top[k-1]) {
		return top
	}
	top = append(top, c)
	for i := len(top) - 1; i > 0 && better(top[i], top[i-1]); i-- {
		top[i], top[i-1] = top[i-1], top[i]
	}
	if len(top) > k {
		top = top[:k]
	}
	return top
}

func trimCaseSets(s []caseSet) []caseSet {
	slices.SortStableFunc(s, func(a, b caseSet) int {
		if a.rows != b.rows {
			if a.rows > b.rows {
				return -1
			}
			return 1
		}
		return cmpU64(a.norm, b.norm)
	})
	if len(s) > maxExamples {
		s = s[:maxExamples]
	}
	return s
}

type fetched struct {
	value any
	line  int64
}

// fetchValues returns the first occurrence (value and line) of each wanted hash.
func fetchValues(ctx context.Context, conn *sql.Conn, t, q string, want map[uint64]bool) (map[uint64]fetched, error) {
	out := map[uint64]fetched{}
	if len(want) == 0 {
		return out, nil
	}
	err := rawQuery(ctx, conn, `SELECT ss_line, `+q+` FROM `+t+` WHERE `+q+` IS NOT NULL ORDER BY ss_row`, 2, func(vals []driver.Value) (bool, error) {
		h, _, _ := profHash(vals[1])
		if want[h] {
			if _, done := out[h]; !done {
				v := vals[1]
				if b, ok := v.([]byte); ok {
					v = string(b)
				}
				line, _ := vals[0].(int64)
				out[h] = fetched{v, line}
				if len(out) == len(want) {
					return false, nil
				}
			}
		}
		return true, nil
	})
	return out, err
}

// rawQuery runs a query through the driver's own statement interface and calls fn with each
// row's values (valid only during the call): database/sql's per-row locking and conversion
// cost more than SQLite's own work on a full-table scan.
func rawQuery(ctx context.Context, conn *sql.Conn, query string, ncols int, fn func(v []driver.Value) (bool, error)) error {
	return conn.Raw(func(dc any) error {
		pc, ok := dc.(driver.ConnPrepareContext)
		if !ok {
			return fmt.Errorf("profile: driver connection cannot prepare")
		}
		st, err := pc.PrepareContext(ctx, query)
		if err != nil {
			return err
		}
		defer st.Close()
		sq, ok := st.(driver.StmtQueryContext)
		if !ok {
			return fmt.Errorf("profile: driver statement cannot query")
		}
		rows, err := sq.QueryContext(ctx, nil)
		if err != nil {
			return err
		}
		defer rows.Close()
		vals := make([]driver.Value, ncols)
		for n := 0; ; n++ {
			if n&4095 == 0 {
				if err := ctx.Err(); err != nil {
					return err
				}
			}
			if err := rows.Next(vals); err != nil {
				if err == io.EOF {
					return nil
				}
				return err
			}
			more, err := fn(vals)
			if err != nil || !more {
				return err
			}
		}
	})
}
