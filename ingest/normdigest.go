package ingest

import (
	"database/sql/driver"
	"fmt"
	"math"
	"strconv"
	"strings"
	"unsafe"
)

// The normalised digest (ss_norm_digest, DEVELOPERS.md "Normalised digest") is a row digest
// that can be taken apart by column: it is the sum mod 2^64 of one term per user column,
// NormTerm(position, normalised value). An audit that compares rows on all but a few columns
// reads the one stored integer and subtracts the terms of the columns it leaves out, instead
// of reading and hashing every feature value again.

// NormDigits is the significant digits a REAL keeps in the normalised digest (and the
// default of the audit's exact-duplicate comparison).
const NormDigits = 9

// MaxGoRoundDigits is the most significant digits RoundSignificant computes in Go.
const MaxGoRoundDigits = 11

// fmix64 is the 64-bit finaliser of Austin Appleby's MurmurHash3: it spreads every input bit
// over the output, so sums of terms do not inherit FNV's weak high bits.
func fmix64(k uint64) uint64 {
	k ^= k >> 33
	k *= 0xff51afd7ed558ccd
	k ^= k >> 33
	k *= 0xc4ceb9fe1a85ec53
	k ^= k >> 33
	return k
}

// posHash is FNV-1a 64 (fnvOffset, fnvPrime and fnvString of profile_scan.go) over pos as 4
// bytes big-endian: the start of every term of that column.
func posHash(pos int) uint64 {
	h := uint64(fnvOffset)
	for _, b := range [4]byte{byte(pos >> 24), byte(pos >> 16), byte(pos >> 8), byte(pos)} {
		h = fnvByte(h, b)
	}
	return h
}

// NormTerm is one value's term of the normalised digest: FNV-1a 64 over pos (the column's
// 1-based position in ss_columns, below 2^31) as 4 bytes big-endian, then 'n' for NULL or 'v' followed by
// the normalised text, passed through MurmurHash3's fmix64 finaliser.
func NormTerm(pos int, norm string, null bool) uint64 {
	h := posHash(pos)
	if null {
		return fmix64(fnvByte(h, 'n'))
	}
	return fmix64(fnvString(fnvByte(h, 'v'), norm))
}

// termText is NormTerm(pos, NormalizeText(s), false) from the column's posHash, in one pass
// over s that hashes it lower-cased (normalizedState's checks inline), without a copy of s
// unless it has whitespace to fix (the rare case).
func termText(ph uint64, s string) uint64 {
	h := fnvByte(ph, 'v')
	if s == "" {
		return fmix64(h)
	}
	if s[0] == ' ' || s[len(s)-1] == ' ' {
		return fmix64(fnvString(h, normalizeFull(s)))
	}
	prevSpace := false
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == ' ':
			if prevSpace {
				return fmix64(fnvString(fnvByte(ph, 'v'), normalizeFull(s)))
			}
			prevSpace = true
			h = fnvByte(h, c)
			continue
		case c == '\t' || c == '\n' || c == '\r' || c == 1:
			return fmix64(fnvString(fnvByte(ph, 'v'), normalizeFull(s)))
		case c >= 'A' && c <= 'Z':
			c += 'a' - 'A'
		}
		prevSpace = false
		h = fnvByte(h, c)
	}
	return fmix64(h)
}

// termBytes is NormTerm(pos, string(b), false) from the column's posHash.
func termBytes(ph uint64, b []byte) uint64 {
	return fmix64(fnvString(fnvByte(ph, 'v'), unsafe.String(unsafe.SliceData(b), len(b))))
}

// termNull is NormTerm(pos, "", true) from the column's posHash.
func termNull(ph uint64) uint64 { return fmix64(fnvByte(ph, 'n')) }

// zeroSci is SQLite's printf('%.8e', 0.0).
const zeroSci = "0.00000000e+00"

// NormValue returns the normalised text of a stored value v of a column whose declared SQL
// type is sqlType (TEXT, INTEGER or REAL): TEXT by NormalizeText, INTEGER as decimal, REAL
// rounded to NormDigits significant digits as SQLite's printf('%.8e', v) writes it. ok is
// false when Go cannot be sure of the text: a REAL near a rounding boundary (see
// RoundSignificant), or a value whose storage class does not match the column (a BLOB, text
// in a REAL column, a REAL in an INTEGER column). The caller then has SQLite evaluate
// NormExprSQL(sqlType, "?1") with v (for a REAL: printf('%.8e', ?1)) and uses that text.
func NormValue(sqlType string, v driver.Value) (norm string, null, ok bool) {
	if v == nil {
		return "", true, true
	}
	switch sqlType {
	case "TEXT":
		if s, isStr := v.(string); isStr {
			return NormalizeText(s), false, true
		}
	case "INTEGER":
		switch x := v.(type) {
		case int64:
			return strconv.FormatInt(x, 10), false, true
		case string: // text INTEGER affinity could not convert: CAST(x AS TEXT) is x
			return x, false, true
		}
	case "REAL":
		if x, isFloat := v.(float64); isFloat {
			var out [32]byte
			r, _, ok := appendNormReal(out[:0], nil, x)
			if ok {
				return string(r), false, true
			}
		}
	default:
		panic("ingest: NormValue: SQL type must be TEXT, INTEGER or REAL, got " + strconv.Quote(sqlType))
	}
	return "", false, false
}

// ValueTerm is NormTerm(pos, NormValue(sqlType, v)) without allocating: scratch is reused
// (returned for the next call). ok is false exactly when NormValue's is; the caller then has
// SQLite normalise v (NormExprSQL) and adds NormTerm of that text.
func ValueTerm(pos int, sqlType string, v driver.Value, scratch []byte) (uint64, []byte, bool) {
	ph := posHash(pos)
	if v == nil {
		return termNull(ph), scratch, true
	}
	switch sqlType {
	case "TEXT":
		if s, isStr := v.(string); isStr {
			return termText(ph, s), scratch, true
		}
	case "INTEGER":
		switch x := v.(type) {
		case int64:
			scratch = strconv.AppendInt(scratch[:0], x, 10)
			return termBytes(ph, scratch), scratch, true
		case string:
			return fmix64(fnvString(fnvByte(ph, 'v'), x)), scratch, true
		}
	case "REAL":
		if x, isFloat := v.(float64); isFloat {
			var out [32]byte
			r, sc, ok := appendNormReal(out[:0], scratch, x)
			if ok {
				return termBytes(ph, r), sc, true
			}
			return 0, sc, false
		}
	default:
		panic("ingest: ValueTerm: SQL type must be TEXT, INTEGER or REAL, got " + strconv.Quote(sqlType))
	}
	return 0, scratch, false
}

// appendNormReal appends x's normalised text (printf('%.8e', x)) to dst; ok = false when
// SQLite must decide (see RoundSignificant). scratch is reused for the 17-digit fallback.
func appendNormReal(dst, scratch []byte, x float64) ([]byte, []byte, bool) {
	if x == 0 && !math.Signbit(x) {
		return append(dst, zeroSci...), scratch, true
	}
	return appendRound(dst, scratch, x, NormDigits)
}

// NormExprSQL is the stock-SQL normalised text of expr for a column of SQL type sqlType, NULL
// when expr is NULL: TEXT NormalizeTextSQL(expr), INTEGER CAST(expr AS TEXT) (decimal),
// REAL printf('%.8e', expr). Its values are what NormValue computes, with SQLite deciding.
func NormExprSQL(sqlType, expr string) string {
	var s string
	switch sqlType {
	case "TEXT":
		s = NormalizeTextSQL(expr)
	case "INTEGER":
		s = "CAST(" + expr + " AS TEXT)"
	case "REAL":
		s = "printf('%.8e', " + expr + ")"
	default:
		panic("ingest: NormExprSQL: SQL type must be TEXT, INTEGER or REAL, got " + strconv.Quote(sqlType))
	}
	return "CASE WHEN " + expr + " IS NULL THEN NULL ELSE " + s + " END"
}

// normArg turns ingest_norm_digest's (and ingest_norm_term's) argument i into
// normalised text: NULL, TEXT or BLOB as it is, INTEGER as decimal. A REAL is refused: its
// normalised text is printf('%.8e', x), which the caller must write.
func normArg(args []driver.Value, i int, name string) (string, bool, error) {
	switch v := args[i].(type) {
	case nil:
		return "", true, nil
	case string:
		return v, false, nil
	case []byte:
		return string(v), false, nil
	case int64:
		return strconv.FormatInt(v, 10), false, nil
	case bool:
		if v {
			return "1", false, nil
		}
		return "0", false, nil
	case float64:
		return "", false, fmt.Errorf("argument %d (%s) must be normalised TEXT (for a REAL: printf('%%.8e', x)), got REAL", i+1, name)
	}
	return "", false, fmt.Errorf("argument %d (%s) must be normalised TEXT, got %T", i+1, name, args[i])
}

// ---- text normalisation ----

// NormalizeText is the text normalisation of the normalised digest and of the audit's exact
// duplicates: tabs, carriage returns and line feeds become spaces, runs of spaces collapse to
// one, the ends are trimmed of spaces and ASCII letters are lower-cased. It is defined by the
// same string operations as its stock-SQL form (NormalizeTextSQL), so stored queries reproduce
// it with plain SQLite: lower(trim(collapse(x))), where collapse replaces ' ' by ' '||char(1),
// removes char(1)||' ' and then char(1).
func NormalizeText(s string) string {
	switch normalizedState(s) {
	case isNormal:
		return s
	case onlyUpper:
		return asciiLower(s)
	}
	return normalizeFull(s)
}

// normalizeFull is NormalizeText without the shortcut for values already normalised.
func normalizeFull(s string) string {
	s = strings.ReplaceAll(s, "\t", " ")
	s = strings.ReplaceAll(s, "\n", " ")
	s = strings.ReplaceAll(s, "\r", " ")
	s = strings.ReplaceAll(s, " ", " \x01")
	s = strings.ReplaceAll(s, "\x01 ", "")
	s = strings.ReplaceAll(s, "\x01", "")
	s = strings.Trim(s, " ")
	return asciiLower(s)
}

// NormalizeTextSQL is NormalizeText as a stock SQLite expression over expr.
func NormalizeTextSQL(expr string) string {
	return fmt.Sprintf(`lower(trim(replace(replace(replace(replace(replace(replace(%s, char(9), ' '), char(10), ' '), char(13), ' '), ' ', ' ' || char(1)), char(1) || ' ', ''), char(1), '')))`, expr)
}

const (
	isNormal  = iota // NormalizeText(s) == s
	onlyUpper        // NormalizeText(s) == asciiLower(s): only ASCII capitals to change
	needsFull        // spaces, tabs, line breaks or \x01 to change
)

// normalizedState says how much NormalizeText has to do to s, in one pass without a copy.
func normalizedState(s string) int {
	if s == "" {
		return isNormal
	}
	if s[0] == ' ' || s[len(s)-1] == ' ' {
		return needsFull
	}
	state := isNormal
	prevSpace := false
	for i := 0; i < len(s); i++ {
		switch c := s[i]; {
		case c == ' ':
			if prevSpace {
				return needsFull
			}
			prevSpace = true
			continue
		case c == '\t' || c == '\n' || c == '\r' || c == 1:
			return needsFull
		case c >= 'A' && c <= 'Z':
			state = onlyUpper
		}
		prevSpace = false
	}
	return state
}

func asciiLower(s string) string {
	for i := 0; i < len(s); i++ {
		if c := s[i]; c >= 'A' && c <= 'Z' {
			b := []byte(s)
			for j := i; j < len(b); j++ {
				if b[j] >= 'A' && b[j] <= 'Z' {
					b[j] += 'a' - 'A'
				}
			}
			return string(b)
		}
	}
	return s
}

// ---- REAL rounding ----

// RoundSignificant is SQLite's printf('%.{digits-1}e', x) computed in Go, for digits 1..11,
// or ok = false when it cannot be sure to agree with SQLite: SQLite rounds half up on its own
// decimal approximation of x, Go rounds the exact binary value, so the two can differ only
// when x lies within SQLite's approximation error of a rounding boundary. Values whose
// decimal tail after the kept digits is within 10^-4 of a unit (at 9 digits; 10^-(17-digits-4) in
// general, never under 10^-14 of x) of one half, zeros, infinities and values outside
// 1e-290..1e290 are left to SQLite (the caller asks it for those few values). buf is scratch
// space, returned for reuse.
func RoundSignificant(buf []byte, x float64, digits int) (string, []byte, bool) {
	var out [32]byte
	r, buf, ok := appendRound(out[:0], buf, x, digits)
	if !ok {
		return "", buf, false
	}
	return string(r), buf, true
}

// appendRound is RoundSignificant appending its text to dst (no allocation when dst and buf
// have room).
func appendRound(dst, buf []byte, x float64, digits int) ([]byte, []byte, bool) {
	if digits < 1 || digits > MaxGoRoundDigits || x == 0 || math.IsInf(x, 0) || math.IsNaN(x) {
		return dst, buf, false
	}
	if ax := math.Abs(x); ax < 1e-290 || ax > 1e290 {
		return dst, buf, false
	}
	if r, ok, sure := roundFast(dst, x, digits); sure {
		return r, buf, ok
	}
	// 17 significant digits, correctly rounded: d.dddddddddddddddde±XX
	buf = strconv.AppendFloat(buf[:0], x, 'e', 16, 64)
	s := buf
	if s[0] == '-' {
		s = s[1:]
	}
	// digits of s: s[0], s[2..17]
	tail := 0 // the 17-digits digits after the kept ones, as an integer
	for k := digits; k < 17; k++ {
		tail = tail*10 + int(s[k+1]-'0')
	}
	l := 17 - digits
	half := 5 * pow10i(l-1)
	band := pow10i(max(l-4, 2))
	if d := tail - half; d > -band && d < band {
		return dst, buf, false
	}
	// Round the 17 digits half up at the kept digits (not at a boundary, so this is the
	// correctly rounded result), with the carry.
	exp := 0
	for _, c := range s[20:] {
		exp = exp*10 + int(c-'0')
	}
	if s[19] == '-' {
		exp = -exp
	}
	var dg [17]byte
	dg[0] = s[0]
	copy(dg[1:], s[2:18])
	if tail > half {
		k := digits - 1
		for ; k >= 0 && dg[k] == '9'; k-- {
			dg[k] = '0'
		}
		if k < 0 {
			dg[0] = '1'
			exp++
		} else {
			dg[k]++
		}
	}
	return appendSci(dst, x < 0, dg[:digits], exp), buf, true
}

var pow10f = [23]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// roundFast is RoundSignificant in float arithmetic: m = |x|·10^(digits-1-e) lands in
// [10^(digits-1), 10^digits) with one rounding (powers of ten up to 10^22 are exact), so its
// error is under 1.2e-5 of a unit at 11 digits, well inside the 1e-4 band around one half
// that is left to SQLite. sure = false when the scale is out of that range (the caller
// then decides with 17 digits). The text is appended to dst.
func roundFast(dst []byte, x float64, digits int) (r []byte, ok, sure bool) {
	ax := math.Abs(x)
	// floor(log10 ax) to within one (fixed below): ax is in [2^be, 2^(be+1)) with be its
	// binary exponent (ax is normal: the caller keeps ax >= 1e-290), and (be·78913) >> 18 is
	// floor(be·log10 2) for every |be| <= 1100 (78913/2^18 = 0.3010292…; checked in a test).
	be := int(math.Float64bits(ax)>>52&0x7ff) - 1023
	e := (be * 78913) >> 18
	var m float64
	for try := 0; try < 2; try++ {
		shift := digits - 1 - e
		switch {
		case shift >= 0 && shift <= 22:
			m = ax * pow10f[shift]
		case shift < 0 && shift >= -22:
			m = ax / pow10f[-shift]
		default:
			return dst, false, false
		}
		lo, hi := pow10f[digits-1], pow10f[digits]
		if m < lo {
			e--
		} else if m >= hi {
			e++
		} else {
			break
		}
		if try == 1 {
			return dst, false, false
		}
	}
	n := int64(m) // m is positive and under 10^11: truncation is floor
	frac := m - float64(n)
	if math.Abs(frac-0.5) < 1e-4 {
		return dst, false, true
	}
	if frac > 0.5 {
		n++
	}
	if float64(n) == pow10f[digits] {
		n /= 10
		e++
	}
	var nb [12]byte // n has digits (at most 11) digits: written two at a time
	u := uint64(n)
	k := digits
	for ; k >= 2; k -= 2 {
		q := u / 100
		r := u - q*100
		nb[k-1], nb[k-2] = digitPairs[2*r+1], digitPairs[2*r]
		u = q
	}
	if k == 1 {
		nb[0] = byte('0' + u)
	}
	return appendSci(dst, x < 0, nb[:digits], e), true, true
}

// digitPairs holds "00".."99".
const digitPairs = "00010203040506070809101112131415161718192021222324252627282930313233343536373839" +
	"40414243444546474849505152535455565758596061626364656667686970717273747576777879" +
	"8081828384858687888990919293949596979899"

func pow10i(n int) int {
	p := 1
	for ; n > 0; n-- {
		p *= 10
	}
	return p
}

// AppendSci renders digits d.ddd with exponent exp as SQLite's printf('%.Ne') does:
// "-1.235e+02", at least two exponent digits. It returns a new slice.
func AppendSci(neg bool, digits []byte, exp int) []byte {
	return appendSci(make([]byte, 0, len(digits)+8), neg, digits, exp)
}

// appendSci is AppendSci appending to dst.
func appendSci(dst []byte, neg bool, digits []byte, exp int) []byte {
	if neg {
		dst = append(dst, '-')
	}
	dst = append(dst, digits[0])
	if len(digits) > 1 {
		dst = append(dst, '.')
		dst = append(dst, digits[1:]...)
	}
	dst = append(dst, 'e')
	if exp < 0 {
		dst = append(dst, '-')
		exp = -exp
	} else {
		dst = append(dst, '+')
	}
	if exp < 10 {
		return append(dst, '0', byte('0'+exp))
	}
	if exp < 100 {
		return append(dst, byte('0'+exp/10), byte('0'+exp%10))
	}
	return strconv.AppendInt(dst, int64(exp), 10)
}
