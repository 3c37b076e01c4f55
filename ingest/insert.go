package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"sync/atomic"
	"unsafe"
)

// maxParams stays under SQLite's default limit of bound parameters per statement (32766).
const maxParams = 32000

// batch is rows*width bound values for one multi-row INSERT, plus rejected rows met on the way.
type batch struct {
	args    []driver.NamedValue
	arena   []byte // bytes of the batch's text values (their strings point here)
	n       int
	src     int // index of the source every row of the batch comes from
	rejects []Problem
	fixes   []normFix // REAL values whose normalised text SQLite decides (see normFix)
}

// normFix is a REAL value of a batch near a rounding boundary at NormDigits digits, where Go
// cannot be sure to round as SQLite's printf does (RoundSignificant): the producer leaves its
// term out of the row's ss_norm_digest, and the consumer, which holds the connection, asks
// SQLite for printf('%.8e', x) and adds the term before it executes the batch.
type normFix struct {
	arg int // index in batch.args of the row's ss_norm_digest
	pos int // the column's 1-based position
	x   float64
}

func newBatch(per, width int) *batch {
	b := &batch{args: make([]driver.NamedValue, per*width)}
	for i := range b.args {
		b.args[i].Ordinal = i + 1
	}
	return b
}

// pass2 reads every input again and loads it: a producer goroutine parses, converts and
// digests rows into batches while this goroutine executes multi-row INSERTs through the
// driver's own statement interface (no database/sql conversion per value).
func (l *loader) pass2(ctx context.Context, conn *sql.Conn) (*Result, error) {
	width := l.sysBound() + len(l.cols) // ss_line, ss_digest, ss_norm_digest, user columns (ss_row and ss_source are not bound)
	per := l.opts.BatchRows
	if per*width > maxParams {
		per = max(1, maxParams/width)
	}
	res := &Result{Table: l.table, Mode: l.mode, FirstRow: l.firstRow}
	pctx, cancel := context.WithCancel(ctx)
	defer cancel()
	free := make(chan *batch, 4)
	full := make(chan *batch, 4)
	for range 4 {
		free <- newBatch(per, width)
	}
	var perr error
	go func() {
		perr = l.produce(pctx, free, full, per, width)
		close(full)
	}()
	cerr := conn.Raw(func(dc any) error { return l.consume(ctx, dc, full, free, per, width) })
	if cerr != nil {
		cancel()
	}
	for range full { // drain, so the producer finishes (and perr is visible) before we go on
	}
	if err := ctx.Err(); err != nil {
		return nil, err // interrupted: report that, not the statement the interrupt broke
	}
	if cerr != nil {
		return nil, cerr
	}
	if perr != nil {
		return nil, perr
	}
	for _, s := range l.srcs {
		res.Rows += s.rows
		res.Skipped += s.skipped
		res.Rejected += s.rejected
	}
	return res, nil
}

// sysBound is how many system columns each row binds: ss_line, ss_digest and, unless the
// appended table was made before it existed, ss_norm_digest.
func (l *loader) sysBound() int {
	if l.normDigest {
		return 3
	}
	return 2
}

// insertSQL is a multi-row INSERT for one source. ss_row is left to SQLite: an INTEGER
// PRIMARY KEY without a value gets max(ss_row)+1, so rows are numbered in load order and an
// append continues the sequence. The source name is a literal, not a bound value.
func (l *loader) insertSQL(src string, rows int) string {
	var b strings.Builder
	b.WriteString("INSERT INTO " + quoteIdent(l.table) + " (ss_source, ss_line, ss_digest")
	if l.normDigest {
		b.WriteString(", ss_norm_digest")
	}
	for _, c := range l.cols {
		b.WriteString(", " + quoteIdent(c))
	}
	b.WriteString(") VALUES ")
	one := "(" + quoteString(src) + strings.Repeat(",?", l.sysBound()+len(l.cols)) + ")"
	for i := range rows {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString(one)
	}
	return b.String()
}

func (l *loader) consume(ctx context.Context, dc any, full <-chan *batch, free chan<- *batch, per, width int) error {
	pc, ok := dc.(driver.ConnPrepareContext)
	if !ok {
		return errors.New("ingest: driver connection cannot prepare statements")
	}
	prepare := func(q string) (*RawStmt, func(), error) {
		st, err := PrepareRaw(ctx, dc, q)
		if err != nil {
			return nil, nil, err
		}
		return st, func() { st.Close() }, nil
	}
	var stFull *RawStmt
	closeFull := func() {}
	defer func() { closeFull() }()
	curSrc := -1
	var stRej *RawStmt
	rejArgs := make([]driver.NamedValue, 8)
	for i := range rejArgs {
		rejArgs[i].Ordinal = i + 1
	}
	var stFix driver.StmtQueryContext
	fixArg := make([]driver.NamedValue, 1)
	fixArg[0].Ordinal = 1
	fixVal := make([]driver.Value, 1)
	for b := range full {
		for _, fx := range b.fixes {
			if stFix == nil {
				st, err := pc.PrepareContext(ctx, `SELECT printf('%.8e', ?)`)
				if err != nil {
					return fmt.Errorf("normalised digest: %w", err)
				}
				defer st.Close()
				if stFix, ok = st.(driver.StmtQueryContext); !ok {
					return errors.New("ingest: driver statement cannot query with a context")
				}
			}
			fixArg[0].Value = fx.x
			text, err := queryText(ctx, stFix, fixArg, fixVal)
			if err != nil {
				return fmt.Errorf("normalised digest: printf('%%.8e', %v): %w", fx.x, err)
			}
			sum := uint64(b.args[fx.arg].Value.(int64)) + NormTerm(fx.pos, text, false)
			b.args[fx.arg].Value = int64(sum)
			normFixups.Add(1)
		}
		if b.n > 0 && b.src != curSrc {
			closeFull()
			var err error
			if stFull, closeFull, err = prepare(l.insertSQL(l.srcs[b.src].name, per)); err != nil {
				return fmt.Errorf("insert into %s: %w", l.table, err)
			}
			curSrc = b.src
		}
		if b.n == per {
			if err := stFull.Exec(ctx, b.args); err != nil {
				return fmt.Errorf("insert into %s: %w", l.table, err)
			}
		} else if b.n > 0 {
			st, closeSt, err := prepare(l.insertSQL(l.srcs[b.src].name, b.n))
			if err != nil {
				return fmt.Errorf("insert into %s: %w", l.table, err)
			}
			err = st.Exec(ctx, b.args[:b.n*width])
			closeSt()
			if err != nil {
				return fmt.Errorf("insert into %s: %w", l.table, err)
			}
		}
		for _, p := range b.rejects {
			if stRej == nil {
				var closeRej func()
				var err error
				stRej, closeRej, err = prepare(`INSERT INTO ss_rejects(run_id, table_name, source, line, column_name, value, reason, raw) VALUES(?,?,?,?,?,?,?,?)`)
				if err != nil {
					return fmt.Errorf("quarantine: %w", err)
				}
				defer closeRej()
			}
			vals := []driver.Value{l.opts.RunID, l.table, p.Source, p.Line, nullIfEmpty(p.Column), nullIfEmpty(p.Value), p.Reason, p.Raw}
			for i, v := range vals {
				rejArgs[i].Value = v
			}
			if err := stRej.Exec(ctx, rejArgs); err != nil {
				return fmt.Errorf("quarantine: %w", err)
			}
		}
		free <- b
	}
	return nil
}

// normFixups counts the REAL values whose normalised text SQLite decided (tests assert the
// path ran).
var normFixups atomic.Int64

// queryText runs a one-row, one-column query and returns its value as text.
func queryText(ctx context.Context, st driver.StmtQueryContext, args []driver.NamedValue, vals []driver.Value) (string, error) {
	rows, err := st.QueryContext(ctx, args)
	if err != nil {
		return "", err
	}
	defer rows.Close()
	if err := rows.Next(vals); err != nil {
		return "", err
	}
	switch v := vals[0].(type) {
	case string:
		return v, nil
	case []byte:
		return string(v), nil
	}
	return "", fmt.Errorf("got %T, not text", vals[0])
}

// normScratch is the producer's state for the normalised digest: each column's posHash and
// NULL term, and reused buffers (no allocation per value).
type normScratch struct {
	pos, null    []uint64
	num, scratch []byte
}

func newNormScratch(n int) *normScratch {
	z := &normScratch{pos: make([]uint64, n), null: make([]uint64, n), num: make([]byte, 0, 32), scratch: make([]byte, 0, 32)}
	for i := range n {
		z.pos[i] = posHash(i + 1)
		z.null[i] = termNull(z.pos[i])
	}
	return z
}

func nullIfEmpty(s string) driver.Value {
	if s == "" {
		return nil
	}
	return s
}

// str returns p as a string stored in the batch's arena, without a heap allocation per value.
// The batch is refilled only after the consumer has executed it, and the driver copies text
// when it binds it, so the bytes never change while a string of them is in use.
func (b *batch) str(p []byte) string {
	start := len(b.arena)
	b.arena = append(b.arena, p...)
	return unsafe.String(unsafe.SliceData(b.arena[start:]), len(p))
}

// produce is pass 2's reading side.
func (l *loader) produce(ctx context.Context, free <-chan *batch, full chan<- *batch, per, width int) error {
	conv := &converter{}
	d := NewDigester()
	rowID := l.firstRow
	var b *batch
	src := 0
	get := func() error {
		select {
		case b = <-free:
			b.n = 0
			b.arena = b.arena[:0]
			b.src = src
			b.rejects = b.rejects[:0]
			b.fixes = b.fixes[:0]
			return nil
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	send := func() error {
		select {
		case full <- b:
			b = nil
			return nil
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	if err := get(); err != nil {
		return err
	}
	for si, s := range l.srcs {
		if err := s.unchanged(); err != nil {
			return err
		}
		if b.n > 0 || len(b.rejects) > 0 { // a batch holds rows of one source only
			if err := send(); err != nil {
				return err
			}
			if err := get(); err != nil {
				return err
			}
		}
		b.src, src = si, si
		rr, done, err := s.open(l.inferring, l.progress)
		if err != nil {
			return err
		}
		err = l.produceSource(ctx, si, s, rr, conv, d, &rowID, &b, per, width, send, get)
		done()
		if err != nil {
			return err
		}
	}
	if b.n > 0 || len(b.rejects) > 0 {
		return send()
	}
	return nil
}

func (l *loader) produceSource(ctx context.Context, si int, s *source, rr recordReader, conv *converter, d *Digester, rowID *int64, bp **batch, per, width int, send, get func() error) error {
	hline, err := l.readHeader(si, s, rr)
	if err != nil {
		return err
	}
	nz := newNormScratch(len(l.cols))
	records := 0
	for {
		ok, err := rr.next()
		if err != nil {
			return fmt.Errorf("read %s: %w", s.name, err)
		}
		if !ok {
			if records == 0 {
				return &Problem{Source: s.name, Line: hline, Reason: "header only: no data rows"}
			}
			return nil
		}
		records++
		b := *bp
		off := l.sysBound()
		r := rr.rec()
		if p := l.rowProblem(s, r, conv); p != nil {
			if l.inferring && l.opts.OnError != "fail" {
				l.keep(p) // a one-pass load meets its problems here, not in pass 1
			}
			if l.opts.OnError == "quarantine" {
				s.rejected++
				b.rejects = append(b.rejects, *p)
				if len(b.rejects) >= per {
					if err := send(); err != nil {
						return err
					}
					if err := get(); err != nil {
						return err
					}
				}
			} else if l.opts.OnError == "skip" {
				s.skipped++
			} else {
				return p
			}
			continue
		}
		if l.inferring {
			for i, f := range r.fields {
				if l.isMissing(f) {
					l.stats[i].missing++
				} else if l.stats[i].observe(f, s.name, r.line) && l.stats[i].typ() != l.types[i] {
					return errRestart
				}
			}
		}
		args := b.args[b.n*width : (b.n+1)*width]
		args[0].Value = r.line
		d.Reset()
		var ns uint64 // the row's normalised digest: the sum of its columns' NormTerm
		for i, f := range r.fields {
			if l.isMissing(f) {
				args[off+i].Value = nil
				d.Null()
				ns += nz.null[i]
				continue
			}
			var v driver.Value
			switch l.types[i] {
			case TypeText:
				v, ok = b.str(f), true
			case TypeDate:
				if ok = isDate(f); ok {
					v = b.str(f)
				}
			case TypeTimestamp:
				conv.ts, ok, _ = canonTimestamp(f, conv.ts[:0])
				if ok {
					v = b.str(conv.ts)
				}
			default:
				v, ok = conv.value(l.types[i], l.lenient[i], f)
			}
			if !ok {
				if l.inferring {
					return errRestart
				}
				return &Problem{Source: s.name, Line: r.line, Column: l.cols[i], Value: string(f),
					Reason: fmt.Sprintf("value %q no longer parses as %s (did the input change while loading?)", clip(string(f)), l.types[i])}
			}
			switch x := v.(type) {
			case int64:
				if !l.lenient[i] && l.types[i] == TypeInteger && !(len(f) == 2 && f[0] == '-') {
					d.intText(f) // strict integers are already AppendInt's text ("-0" is not)
					ns += termBytes(nz.pos[i], f)
				} else {
					d.Int(x)
					ns += termBytes(nz.pos[i], strconv.AppendInt(nz.num[:0], x, 10))
				}
			case float64:
				if t := trimFraction(f); realTextCanonical(t) {
					d.realText(t)
				} else {
					d.Real(x)
				}
				var sure bool
				if nz.num, nz.scratch, sure = appendNormReal(nz.num[:0], nz.scratch, x); sure {
					ns += termBytes(nz.pos[i], nz.num)
				} else if l.normDigest {
					b.fixes = append(b.fixes, normFix{arg: b.n*width + 2, pos: i + 1, x: x})
				}
			case string:
				d.Text(x)
				ns += termText(nz.pos[i], x)
			}
			args[off+i].Value = v
		}
		args[1].Value = d.Sum()
		if l.normDigest {
			args[2].Value = int64(ns)
		}
		*rowID++
		s.rows++
		b.n++
		if b.n == per {
			if err := send(); err != nil {
				return err
			}
			if err := get(); err != nil {
				return err
			}
		}
		if s.rows&4095 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
	}
}
