package leakage

import (
	"context"
	"database/sql/driver"

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
// through the driver's statement interface (inside conn.Raw). prefix, when set, is SQL text
// of literal values that starts every row (values that are the same in all rows, so they
// are not bound a million times).
type rawInserter struct {
	ctx    context.Context
	dc     any
	head   string
	prefix string
	width  int
	per    int
	args   []driver.NamedValue
	full   *ingest.RawStmt
}

// newRawInserter is a rawInserter on dc, the driver connection conn.Raw hands over (its
// statements are prepared by ingest.PrepareRaw, which reports a connection that cannot).
func newRawInserter(ctx context.Context, dc any, head string, width, per int) *rawInserter {
	return &rawInserter{ctx: ctx, dc: dc, head: head, width: width, per: per, args: make([]driver.NamedValue, 0, width*per)}
}

func (r *rawInserter) add(vals ...driver.Value) error {
	for _, v := range vals {
		r.args = append(r.args, driver.NamedValue{Ordinal: len(r.args) + 1, Value: v})
	}
	if len(r.args) < r.width*r.per {
		return nil
	}
	if r.full == nil {
		st, err := ingest.PrepareRaw(r.ctx, r.dc, multiRowSQL(r.head, r.prefix, r.width, r.per))
		if err != nil {
			return err
		}
		r.full = st
	}
	if err := r.full.Exec(r.ctx, r.args); err != nil {
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
	st, err := ingest.PrepareRaw(r.ctx, r.dc, multiRowSQL(r.head, r.prefix, r.width, len(r.args)/r.width))
	if err != nil {
		return err
	}
	defer st.Close()
	err = st.Exec(r.ctx, r.args)
	r.args = r.args[:0]
	return err
}

func multiRowSQL(head, prefix string, width, n int) string {
	one := make([]byte, 0, len(prefix)+2*width+2)
	one = append(one, '(')
	one = append(one, prefix...)
	for i := 0; i < width; i++ {
		if i > 0 || prefix != "" {
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
const maxGoRoundDigits = ingest.MaxGoRoundDigits

// roundSignificant is SQLite's printf('%.{digits-1}e', x) computed in Go, or ok = false when
// SQLite must decide: ingest.RoundSignificant, which the normalised digest stored at ingest
// uses too.
func roundSignificant(buf []byte, x float64, digits int) (string, []byte, bool) {
	return ingest.RoundSignificant(buf, x, digits)
}

// appendSci renders digits d.ddd with exponent exp as SQLite's printf('%.Ne') does
// (ingest.AppendSci).
func appendSci(neg bool, digits []byte, exp int) []byte { return ingest.AppendSci(neg, digits, exp) }
