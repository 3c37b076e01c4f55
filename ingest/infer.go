package ingest

import (
	"bytes"
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Type is a column's logical type.
type Type uint8

// Logical types, in the order inference prefers them.
const (
	TypeText Type = iota
	TypeInteger
	TypeReal
	TypeBoolean
	TypeDate
	TypeTimestamp
)

var typeNames = [...]string{"TEXT", "INTEGER", "REAL", "BOOLEAN", "DATE", "TIMESTAMP"}

func (t Type) String() string { return typeNames[t] }

// SQLType is the declared column type that stores t: INTEGER, REAL or TEXT.
func (t Type) SQLType() string {
	switch t {
	case TypeInteger, TypeBoolean:
		return "INTEGER"
	case TypeReal:
		return "REAL"
	}
	return "TEXT"
}

// ParseType parses a type name (case-insensitive): integer, real, boolean, date, timestamp,
// text.
func ParseType(s string) (Type, error) {
	for i, n := range typeNames {
		if strings.EqualFold(s, n) {
			return Type(i), nil
		}
	}
	return 0, fmt.Errorf("unknown type %q (want integer, real, boolean, date, timestamp or text)", s)
}

// Candidate masks: bit t is set when a value (or every value of a column) parses as Type t.
const (
	mInteger   = 1 << TypeInteger
	mReal      = 1 << TypeReal
	mBoolean   = 1 << TypeBoolean
	mDate      = 1 << TypeDate
	mTimestamp = 1 << TypeTimestamp
	mAll       = mInteger | mReal | mBoolean | mDate | mTimestamp
)

// DefaultMissing are the tokens read as missing (NULL) besides the empty string.
var DefaultMissing = []string{"NA", "N/A", "null", "NaN"}

// classify returns the candidate mask of one non-missing value under the inference rules
// (see the package doc), and whether a timestamp carries a zone.
func classify(b []byte) (mask uint8, zoned bool) {
	if len(b) == 0 {
		return 0, false
	}
	switch c := b[0]; {
	case c == '-' || c == '.' || (c >= '0' && c <= '9'):
		if len(b) >= 10 && b[4] == '-' {
			if len(b) == 10 {
				if isDate(b) {
					return mDate, false
				}
				return 0, false
			}
			if ok, z := isTimestamp(b); ok {
				return mTimestamp, z
			}
			return 0, false
		}
		return classifyNumber(b), false
	case c == 't' || c == 'T' || c == 'f' || c == 'F':
		if _, ok := parseBoolStrict(b); ok {
			return mBoolean, false
		}
	}
	return 0, false
}

// classifyNumber: INTEGER is -?(0|[1-9][0-9]*) within int64; REAL is a decimal with a
// fraction or an exponent, no leading zeros before the point (other than a single 0), finite.
// An integer literal that overflows int64 is neither (kept exact as TEXT).
func classifyNumber(b []byte) uint8 {
	i := 0
	if b[0] == '-' {
		i = 1
	}
	intStart := i
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		i++
	}
	nInt := i - intStart
	if nInt > 1 && b[intStart] == '0' {
		return 0 // leading zero: a code, not a number
	}
	if i == len(b) {
		if nInt == 0 {
			return 0
		}
		if _, ok := parseIntStrict(b); ok {
			return mInteger | mReal
		}
		return 0
	}
	hasFrac, hasExp := false, false
	if b[i] == '.' {
		i++
		fs := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		if i == fs && nInt == 0 {
			return 0
		}
		if i == fs {
			return 0 // "5." is not accepted
		}
		hasFrac = true
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		if nInt == 0 && !hasFrac {
			return 0
		}
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		es := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		if i == es {
			return 0
		}
		hasExp = true
	}
	if i != len(b) || (!hasFrac && !hasExp) {
		return 0
	}
	if hasExp {
		if _, err := strconv.ParseFloat(string(b), 64); err != nil {
			return 0 // out of range
		}
	}
	return mReal
}

// parseIntStrict parses -?[0-9]+ into an int64, reporting overflow as !ok.
func parseIntStrict(b []byte) (int64, bool) {
	neg := false
	i := 0
	if len(b) > 0 && b[0] == '-' {
		neg = true
		i = 1
	}
	if i == len(b) {
		return 0, false
	}
	var u uint64
	for ; i < len(b); i++ {
		c := b[i]
		if c < '0' || c > '9' {
			return 0, false
		}
		if u > (1<<63)/10 {
			return 0, false
		}
		u = u*10 + uint64(c-'0')
		if u > 1<<63 {
			return 0, false
		}
	}
	if neg {
		return -int64(u), true // -(1<<63) wraps to itself, which is right
	}
	if u > 1<<63-1 {
		return 0, false
	}
	return int64(u), true
}

func parseBoolStrict(b []byte) (bool, bool) {
	switch len(b) {
	case 4:
		if bytes.EqualFold(b, []byte("true")) {
			return true, true
		}
	case 5:
		if bytes.EqualFold(b, []byte("false")) {
			return false, true
		}
	}
	return false, false
}

func digits(b []byte) (int, bool) {
	n := 0
	for _, c := range b {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, len(b) > 0
}

// isDate checks YYYY-MM-DD with a real calendar day (Gregorian leap years).
func isDate(b []byte) bool {
	if len(b) != 10 || b[4] != '-' || b[7] != '-' {
		return false
	}
	y, ok1 := digits(b[0:4])
	m, ok2 := digits(b[5:7])
	d, ok3 := digits(b[8:10])
	if !ok1 || !ok2 || !ok3 || m < 1 || m > 12 || d < 1 {
		return false
	}
	return d <= daysIn(y, m)
}

func daysIn(y, m int) int {
	switch m {
	case 2:
		if y%4 == 0 && (y%100 != 0 || y%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// isTimestamp checks YYYY-MM-DD[T ]hh:mm[:ss[.f+]][Z|±hh:mm|±hhmm] and reports whether it has
// a zone.
func isTimestamp(b []byte) (ok, zoned bool) {
	var buf [64]byte
	if len(b) > len(buf)-4 {
		_, ok, zoned = canonTimestamp(b, nil)
		return ok, zoned
	}
	_, ok, zoned = canonTimestamp(b, buf[:0])
	return ok, zoned
}

// canonTimestamp validates a timestamp and appends its canonical RFC 3339 form to dst:
// 'T' separator, seconds always present, fraction as given, 'Z' or ±hh:mm when zoned.
func canonTimestamp(b, dst []byte) ([]byte, bool, bool) {
	if len(b) < 16 || !isDate(b[:10]) || (b[10] != 'T' && b[10] != ' ' && b[10] != 't') {
		return dst, false, false
	}
	h, ok1 := digits(b[11:13])
	mi, ok2 := digits(b[14:16])
	if !ok1 || !ok2 || b[13] != ':' || h > 23 || mi > 59 {
		return dst, false, false
	}
	dst = append(dst, b[:10]...)
	dst = append(dst, 'T')
	dst = append(dst, b[11:16]...)
	i := 16
	if i < len(b) && b[i] == ':' {
		if i+3 > len(b) {
			return dst, false, false
		}
		s, ok := digits(b[i+1 : i+3])
		if !ok || s > 59 {
			return dst, false, false
		}
		dst = append(dst, b[i:i+3]...)
		i += 3
		if i < len(b) && b[i] == '.' {
			j := i + 1
			for j < len(b) && b[j] >= '0' && b[j] <= '9' {
				j++
			}
			if j == i+1 {
				return dst, false, false
			}
			dst = append(dst, b[i:j]...)
			i = j
		}
	} else {
		dst = append(dst, ":00"...)
	}
	if i == len(b) {
		return dst, true, false
	}
	switch b[i] {
	case 'Z', 'z':
		if i+1 != len(b) {
			return dst, false, false
		}
		return append(dst, 'Z'), true, true
	case '+', '-':
		z := b[i+1:]
		var zh, zm int
		var ok1, ok2 bool
		switch {
		case len(z) == 5 && z[2] == ':':
			zh, ok1 = digits(z[0:2])
			zm, ok2 = digits(z[3:5])
		case len(z) == 4:
			zh, ok1 = digits(z[0:2])
			zm, ok2 = digits(z[2:4])
		}
		if !ok1 || !ok2 || zh > 23 || zm > 59 {
			return dst, false, false
		}
		dst = append(dst, b[i], z[0], z[1], ':', z[len(z)-2], z[len(z)-1])
		return dst, true, true
	}
	return dst, false, false
}

// InferValue returns the type inference would give a column holding only s: TEXT for
// anything that is not a number, boolean, date or timestamp (leading-zero codes such as
// "00123" included), and ok=false when s is a missing token (empty or one of missing;
// nil missing means DefaultMissing).
func InferValue(s string, missing []string) (t Type, ok bool) {
	if missing == nil {
		missing = DefaultMissing
	}
	if s == "" {
		return TypeText, false
	}
	for _, m := range missing {
		if s == m {
			return TypeText, false
		}
	}
	mask, _ := classify([]byte(s))
	return pick(mask), true
}

// pick chooses the preferred type of a candidate mask.
func pick(mask uint8) Type {
	for _, t := range []Type{TypeInteger, TypeReal, TypeBoolean, TypeDate, TypeTimestamp} {
		if mask&(1<<t) != 0 {
			return t
		}
	}
	return TypeText
}

func maskNames(mask uint8) string {
	var out []string
	for _, t := range []Type{TypeInteger, TypeReal, TypeBoolean, TypeDate, TypeTimestamp} {
		if mask&(1<<t) != 0 {
			out = append(out, t.String())
		}
	}
	return strings.Join(out, " or ")
}

// colStat accumulates one column's inference over pass 1.
type colStat struct {
	mask            uint8
	nonMissing      int64
	missing         int64
	zoned, naive    bool
	killValue       string // the value that removed the last candidate type
	killLine        int64
	killSource      string
	killMask        uint8 // candidates just before it
	schema          bool
	schemaType      Type
	mixedZoneLine   int64
	mixedZoneSource string
	mixedZoneValue  string
}

// observe adds one non-missing value. It reports whether the column's type decision may
// have changed (candidates dropped, first value, zones newly mixed).
func (c *colStat) observe(b []byte, src string, line int64) bool {
	c.nonMissing++
	if c.schema || c.mask == 0 {
		return false
	}
	m, z := classify(b)
	nm := c.mask & m
	changed := nm != c.mask || c.nonMissing == 1
	if nm&mTimestamp != 0 {
		if z {
			c.zoned = true
		} else {
			c.naive = true
		}
		if c.zoned && c.naive && c.mixedZoneLine == 0 {
			c.mixedZoneLine, c.mixedZoneSource, c.mixedZoneValue = line, src, clip(string(b))
			changed = true
		}
	}
	if nm == 0 {
		c.killValue, c.killLine, c.killSource, c.killMask = clip(string(b)), line, src, c.mask
	}
	c.mask = nm
	return changed
}

// typ is decide's type without the reason.
func (c *colStat) typ() Type {
	switch {
	case c.schema:
		return c.schemaType
	case c.nonMissing == 0:
		return TypeText
	}
	t := pick(c.mask)
	if t == TypeTimestamp && c.zoned && c.naive {
		return TypeText
	}
	return t
}

func clip(s string) string {
	if len(s) <= 40 {
		return s
	}
	i := 40
	for i > 0 && !utf8.RuneStart(s[i]) {
		i--
	}
	return s[:i] + "…"
}

// decide returns the column's type and the reason for it.
func (c *colStat) decide() (Type, string) {
	if c.schema {
		return c.schemaType, "--schema"
	}
	if c.nonMissing == 0 {
		return TypeText, "no non-missing values"
	}
	t := pick(c.mask)
	if t == TypeTimestamp && c.zoned && c.naive {
		return TypeText, fmt.Sprintf("timestamps with and without a zone are mixed (first at %s:%d %q)", c.mixedZoneSource, c.mixedZoneLine, c.mixedZoneValue)
	}
	if t != TypeText {
		return t, fmt.Sprintf("all %d non-missing values parse as %s", c.nonMissing, t)
	}
	if c.killMask == mAll {
		why := "is not a number, boolean, date or timestamp"
		if m := classifyNumber([]byte(strings.TrimPrefix(c.killValue, "-"))); m == 0 && len(c.killValue) > 1 && looksLeadingZero(c.killValue) {
			why = "has a leading zero (kept as a code)"
		}
		return TypeText, fmt.Sprintf("first value %q (%s:%d) %s", c.killValue, c.killSource, c.killLine, why)
	}
	return TypeText, fmt.Sprintf("%q (%s:%d) does not parse as %s like the values before it", c.killValue, c.killSource, c.killLine, maskNames(c.killMask))
}

func looksLeadingZero(s string) bool {
	s = strings.TrimPrefix(s, "-")
	if len(s) < 2 || s[0] != '0' || s[1] == '.' {
		return false
	}
	for _, r := range s {
		if (r < '0' || r > '9') && r != '.' {
			return false
		}
	}
	return true
}

var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseFloatFast parses -?[0-9]*(.[0-9]*)? with at most 15 digits in all, or reports !ok.
// The digits form an integer below 2^53 and 10^k (k <= 22) is exact, so one correctly
// rounded IEEE division gives the correctly rounded value, as strconv.ParseFloat does
// (Clinger's fast path, "How to read floating point numbers accurately", PLDI 1990).
func parseFloatFast(b []byte) (float64, bool) {
	i, neg := 0, false
	if len(b) > 0 && b[0] == '-' {
		i, neg = 1, true
	}
	var m uint64
	nd, frac, dot := 0, 0, false
	for ; i < len(b); i++ {
		c := b[i]
		if c == '.' {
			if dot {
				return 0, false
			}
			dot = true
			continue
		}
		if c < '0' || c > '9' || nd == 15 {
			return 0, false
		}
		m = m*10 + uint64(c-'0')
		nd++
		if dot {
			frac++
		}
	}
	if nd == 0 {
		return 0, false
	}
	f := float64(m) / pow10[frac]
	if neg {
		f = -f
	}
	return f, true
}

// trimFraction drops trailing zeros of a decimal's fraction, and the point when nothing is
// left after it ("200.000" → "200", "1.50" → "1.5"); text without a point is returned as is.
func trimFraction(b []byte) []byte {
	dot := false
	for _, c := range b {
		switch c {
		case 'e', 'E':
			return b
		case '.':
			dot = true
		}
	}
	if !dot {
		return b
	}
	for len(b) > 0 && b[len(b)-1] == '0' {
		b = b[:len(b)-1]
	}
	if len(b) > 0 && b[len(b)-1] == '.' {
		b = b[:len(b)-1]
	}
	return b
}

// realTextCanonical reports whether b, a decimal that parses as a float64, is already the text
// strconv.FormatFloat(x, 'g', -1, 64) gives for it, so the digest can hash b without
// formatting x: at most 15 significant digits (DBL_DIG, so the shortest round-trip form has
// the same digits), no leading zeros, a digit before any point, no trailing fraction zeros,
// no exponent, and a decimal exponent in [-4, 5] (where 'g' uses plain notation).
func realTextCanonical(b []byte) bool {
	i := 0
	if len(b) > 0 && b[0] == '-' {
		i = 1
	}
	s := i
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		i++
	}
	nInt := i - s
	if nInt == 0 || (nInt > 1 && b[s] == '0') {
		return false
	}
	nFrac := 0
	if i < len(b) {
		if b[i] != '.' {
			return false
		}
		i++
		fs := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		nFrac = i - fs
		if i != len(b) || nFrac == 0 || b[len(b)-1] == '0' {
			return false
		}
	}
	var sig, exp int
	if b[s] != '0' {
		sig, exp = nInt+nFrac, nInt-1
	} else {
		if nFrac == 0 {
			return i == 1 // "0"; not "-0", which is stored as 0 (SQLite keeps no negative zero)
		}
		z := 0
		for z < nFrac && b[s+2+z] == '0' {
			z++
		}
		sig, exp = nFrac-z, -(z + 1)
	}
	return sig <= 15 && exp >= -4 && exp <= 5
}
