package leakage

import (
	"context"
	"database/sql/driver"
	"errors"
	"math"
	"strconv"

	"splitsmith/ingest"
)

// The bulk paths (reading a million rows, writing a million finding rows) go through the
// driver's own interface inside conn.Raw: database/sql's per-row Scan and per-statement
// argument conversion cost more than SQLite's own work there. The values are the ones
// database/sql would hand over (int64, float64, string, []byte, nil). Inside fn nothing may use
// conn itself (database/sql holds the connection's lock).

// rawQuery is ingest.QueryRaw: one row at a time through the driver, vals reused.
var rawQuery = ingest.QueryRaw

// rawInserter writes rows of `width` values with multi-row INSERT statements of `per` rows
// through the driver's statement interface (inside conn.Raw).
type rawInserter struct {
	ctx   context.Context
	pc    driver.ConnPrepareContext
	head  string
	width int
	per   int
	args  []driver.NamedValue
	full  driver.Stmt
}

func newRawInserter(ctx context.Context, dc any, head string, width, per int) (*rawInserter, error) {
	pc, ok := dc.(driver.ConnPrepareContext)
	if !ok {
		return nil, errors.New("driver connection cannot prepare statements")
	}
	return &rawInserter{ctx: ctx, pc: pc, head: head, width: width, per: per, args: make([]driver.NamedValue, 0, width*per)}, nil
}

func (r *rawInserter) add(vals ...driver.Value) error {
	for _, v := range vals {
		r.args = append(r.args, driver.NamedValue{Ordinal: len(r.args) + 1, Value: v})
	}
	if len(r.args) < r.width*r.per {
		return nil
	}
	if r.full == nil {
		st, err := r.pc.PrepareContext(r.ctx, multiRowSQL(r.head, r.width, r.per))
		if err != nil {
			return err
		}
		r.full = st
	}
	if err := rawExec(r.ctx, r.full, r.args); err != nil {
		return err
	}
	r.args = r.args[:0]
	return nil
}

// flush writes the remaining rows and closes the statements.
func (r *rawInserter) flush() error {
	if r.full != nil {
		defer r.full.Close()
	}
	if len(r.args) == 0 {
		return nil
	}
	st, err := r.pc.PrepareContext(r.ctx, multiRowSQL(r.head, r.width, len(r.args)/r.width))
	if err != nil {
		return err
	}
	defer st.Close()
	err = rawExec(r.ctx, st, r.args)
	r.args = r.args[:0]
	return err
}

func rawExec(ctx context.Context, st driver.Stmt, args []driver.NamedValue) error {
	ex, ok := st.(driver.StmtExecContext)
	if !ok {
		return errors.New("driver statement cannot execute with a context")
	}
	_, err := ex.ExecContext(ctx, args)
	return err
}

func multiRowSQL(head string, width, n int) string {
	one := make([]byte, 0, 2*width+1)
	one = append(one, '(')
	for i := 0; i < width; i++ {
		if i > 0 {
			one = append(one, ',')
		}
		one = append(one, '?')
	}
	one = append(one, ')')
	b := make([]byte, 0, len(head)+n*(len(one)+1))
	b = append(b, head...)
	for i := 0; i < n; i++ {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, one...)
	}
	return string(b)
}

// maxGoRoundDigits is the most significant digits roundSignificant computes in Go.
const maxGoRoundDigits = 11

// roundSignificant is SQLite's printf('%.{digits-1}e', x) computed in Go, for digits 1..11,
// or ok = false when it cannot be sure to agree with SQLite: SQLite rounds half up on its own
// decimal approximation of x, Go rounds the exact binary value, so the two can differ only
// when x lies within SQLite's approximation error of a rounding boundary. Values whose
// decimal tail after the kept digits is within 10^-4 of a unit (at 9 digits; 10^-(17-digits-4) in
// general, never under 10^-14 of x) of one half, zeros, infinities and values outside
// 1e-290..1e290 are left to SQLite (the audit asks it for those few values).
func roundSignificant(buf []byte, x float64, digits int) (string, []byte, bool) {
	if digits < 1 || digits > maxGoRoundDigits || x == 0 || math.IsInf(x, 0) || math.IsNaN(x) {
		return "", buf, false
	}
	if ax := math.Abs(x); ax < 1e-290 || ax > 1e290 {
		return "", buf, false
	}
	if r, ok, sure := roundFast(x, digits); sure {
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
		return "", buf, false
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
	return string(appendSci(x < 0, dg[:digits], exp)), buf, true
}

var pow10f = [23]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// roundFast is roundSignificant in float arithmetic: m = |x|·10^(digits-1-e) lands in
// [10^(digits-1), 10^digits) with one rounding (powers of ten up to 10^22 are exact), so its
// error is under 1.2e-5 of a unit at 11 digits, well inside the 1e-4 band around one half
// that is left to SQLite. sure = false when the scale is out of that range (the caller
// then decides with 17 digits).
func roundFast(x float64, digits int) (r string, ok, sure bool) {
	ax := math.Abs(x)
	// floor(log10 ax) to within one (fixed below): ax is in [2^(e2-1), 2^e2).
	_, e2 := math.Frexp(ax)
	e := int(math.Floor(float64(e2-1) * math.Log10E / math.Log2E))
	var m float64
	for try := 0; try < 2; try++ {
		shift := digits - 1 - e
		switch {
		case shift >= 0 && shift <= 22:
			m = ax * pow10f[shift]
		case shift < 0 && shift >= -22:
			m = ax / pow10f[-shift]
		default:
			return "", false, false
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
			return "", false, false
		}
	}
	fl := math.Floor(m)
	frac := m - fl
	if math.Abs(frac-0.5) < 1e-4 {
		return "", false, true
	}
	n := int64(fl)
	if frac > 0.5 {
		n++
	}
	if float64(n) == pow10f[digits] {
		n /= 10
		e++
	}
	var nb [24]byte
	dg := strconv.AppendInt(nb[:0], n, 10)
	return string(appendSci(x < 0, dg, e)), true, true
}

func pow10i(n int) int {
	p := 1
	for ; n > 0; n-- {
		p *= 10
	}
	return p
}

// appendSci renders digits d.ddd with exponent exp as SQLite's printf('%.Ne') does:
// "-1.235e+02", at least two exponent digits.
func appendSci(neg bool, digits []byte, exp int) []byte {
	out := make([]byte, 0, len(digits)+8)
	if neg {
		out = append(out, '-')
	}
	out = append(out, digits[0])
	if len(digits) > 1 {
		out = append(out, '.')
		out = append(out, digits[1:]...)
	}
	out = append(out, 'e')
	if exp < 0 {
		out = append(out, '-')
		exp = -exp
	} else {
		out = append(out, '+')
	}
	if exp < 10 {
		out = append(out, '0')
	}
	return strconv.AppendInt(out, int64(exp), 10)
}
