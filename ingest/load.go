package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"unsafe"
)

// Options say how Load reads and stores its inputs. The zero value infers types, fails on
// the first bad row and refuses an existing table.
type Options struct {
	Table   string          // target table; "" = the first input's base name without extensions
	Format  string          // csv, tsv or jsonl for every input; "" = from each input's extension
	Schema  map[string]Type // column → type, overriding inference (values that break it are bad rows)
	OnError string          // fail (default): stop at the first bad row; skip; quarantine (into ss_rejects)
	Replace bool            // drop an existing table of that name first
	Append  bool            // add rows to an existing ingested table (its types act as a schema)
	Missing []string        // tokens read as NULL besides the empty string; nil = DefaultMissing
	RunID   int64           // ss_runs.run_id stored with ss_sources and ss_rejects rows
	TempDir string          // where stdin and Reader inputs are spooled; "" = os.TempDir()
	// CheckName refuses reserved table and column names (the CLI passes store.CheckUserName);
	// nil uses the ss_/sqlite_ prefix rule alone.
	CheckName   func(kind, name string) error
	Progress    func(done, total int64) // bytes read over both passes; may be nil
	BatchRows   int                     // rows per INSERT statement; 0 = automatic (about 150)
	MaxProblems int                     // row problems kept in Result.Problems; 0 = 20
}

// Column is one user column as loaded.
type Column struct {
	Name    string
	Type    Type
	SQLType string
	Reason  string
	Missing int64
}

// SourceResult is one input as loaded (a row of ss_sources).
type SourceResult struct {
	Name     string
	Format   string
	Gzip     bool
	Size     int64
	SHA256   string
	Rows     int64
	Skipped  int64
	Rejected int64
}

// Result describes a finished load.
type Result struct {
	Table    string
	Mode     string // create, replace or append
	FirstRow int64  // ss_row of the first row loaded by this call
	Rows     int64  // rows loaded by this call
	Skipped  int64
	Rejected int64
	Sources  []SourceResult
	Columns  []Column
	Problems []Problem // the first MaxProblems bad rows (skip and quarantine)
	// Passes is 1 when the types fixed by the first rows held to the end (one read of each
	// input), 2 when a later value changed one and the load ran again in two passes.
	Passes int
	// DigestCheckSQL lists rows whose values no longer match their ss_digest (empty = intact).
	DigestCheckSQL string
	// NormDigestCheckSQL lists rows whose normalised values no longer match their
	// ss_norm_digest (empty = intact); "" when the appended table has no ss_norm_digest
	// (made by an older version).
	NormDigestCheckSQL string
}

// Problem is a bad input row or value, located. It is the error Load returns for bad data.
type Problem struct {
	Source string
	Line   int64
	Column string // "" when the whole row is bad
	Value  string
	Reason string
	Raw    string
}

func (p *Problem) Error() string {
	var b strings.Builder
	b.WriteString(p.Source)
	if p.Line > 0 {
		b.WriteString(":" + strconv.FormatInt(p.Line, 10))
	}
	b.WriteString(": ")
	if p.Column != "" {
		b.WriteString("column " + strconv.Quote(p.Column) + ": ")
	}
	b.WriteString(p.Reason)
	return b.String()
}

type loader struct {
	opts     Options
	srcs     []*source
	cols     []string
	stats    []colStat
	types    []Type
	missing  [][]byte
	missLen  [16]bool // missLen[n]: some missing token has length n
	missLong bool     // some token is 16 bytes or longer
	lenient  []bool
	problems []Problem
	total    int64
	done     int64
	mode     string
	table    string
	firstRow int64
	existing []Column
	// inferring: pass 2 of a one-pass load also infers, and stops with errRestart when a
	// value changes a column's type decision.
	inferring bool
	replaced  bool // the old table of a --replace is gone
	// normDigest: the table has ss_norm_digest (every table but one appended to that an
	// older version made).
	normDigest bool
}

// Load reads the inputs and loads them into one table on conn, inside the caller's
// transaction. Bad data returns a *Problem (nothing should then be committed); mistakes in
// the call return a *UsageError.
func Load(ctx context.Context, conn *sql.Conn, inputs []Input, opts Options) (*Result, error) {
	l := &loader{opts: opts}
	defer func() {
		for _, s := range l.srcs {
			s.cleanup()
		}
	}()
	if err := l.check(inputs); err != nil {
		return nil, err
	}
	if err := l.target(ctx, conn); err != nil {
		return nil, err
	}
	for _, s := range l.srcs {
		if err := s.prepare(opts.TempDir); err != nil {
			return nil, err
		}
		if s.spool {
			l.total += s.size
		} else {
			l.total += s.statSize
		}
	}
	res, err := l.optimistic(ctx, conn)
	if err == errRestart {
		if err := l.restart(ctx, conn); err != nil {
			return nil, err
		}
		if err := l.pass1(ctx); err != nil {
			return nil, err
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err := l.create(ctx, conn); err != nil {
			return nil, err
		}
		res, err = l.pass2(ctx, conn)
		if res != nil {
			res.Passes = 2
		}
	} else if res != nil {
		res.Passes = 1
	}
	if err != nil {
		return nil, err
	}
	if err := l.record(ctx, conn, res); err != nil {
		return nil, err
	}
	return res, nil
}

// prefixRecords is how many records of the first input fix the provisional types of the
// one-pass load (tests lower it to force restarts).
var prefixRecords = 10000

// errRestart says a value contradicted a provisional type: the one-pass load is undone and
// the load runs in two passes.
var errRestart = errors.New("ingest: provisional type contradicted")

// optimistic loads in one pass. The first prefixRecords records of the first input fix
// provisional types; the table is created with them and every input is then read once,
// inferring as it inserts. A value that changes any column's type decision returns
// errRestart, and Load then drops what was inserted and runs pass 1 and pass 2. Files whose
// types are settled by their first rows (the usual case) are thus read once and a half-chunk.
func (l *loader) optimistic(ctx context.Context, conn *sql.Conn) (*Result, error) {
	conv := &converter{}
	s := l.srcs[0]
	rr, done, err := s.open(false, nil)
	if err != nil {
		return nil, err
	}
	err = l.scan(ctx, 0, s, rr, conv, prefixRecords)
	done()
	if err != nil {
		return nil, err
	}
	for i := range l.cols {
		l.types = append(l.types, l.stats[i].typ())
	}
	l.problems = nil
	if err := l.setupTypes(); err != nil { // fresh statistics: pass 2 observes every row
		return nil, err
	}
	if err := l.create(ctx, conn); err != nil {
		return nil, err
	}
	l.inferring = true
	res, err := l.pass2(ctx, conn)
	l.inferring = false
	if err != nil {
		return nil, err
	}
	for i := range l.cols {
		if l.stats[i].typ() != l.types[i] {
			return nil, errRestart // cannot happen (every change is caught as it happens); kept as a guard
		}
	}
	return res, nil
}

// restart undoes a one-pass attempt: the table (or the rows appended to it) and the rejects
// it stored go, and every count starts again.
func (l *loader) restart(ctx context.Context, conn *sql.Conn) error {
	if l.mode == "append" {
		if _, err := conn.ExecContext(ctx, `DELETE FROM `+quoteIdent(l.table)+` WHERE ss_row >= ?`, l.firstRow); err != nil {
			return fmt.Errorf("restart load of %s: %w", l.table, err)
		}
	} else if _, err := conn.ExecContext(ctx, `DROP TABLE `+quoteIdent(l.table)); err != nil {
		return fmt.Errorf("restart load of %s: %w", l.table, err)
	}
	if _, err := conn.ExecContext(ctx, `DELETE FROM ss_rejects WHERE run_id = ? AND table_name = ?`, l.opts.RunID, l.table); err != nil {
		return fmt.Errorf("restart load of %s: %w", l.table, err)
	}
	for _, s := range l.srcs {
		s.rows, s.skipped, s.rejected = 0, 0, 0
	}
	l.types, l.problems, l.done, l.stats = nil, nil, 0, nil
	l.total *= 2
	return nil
}

func (l *loader) check(inputs []Input) error {
	o := &l.opts
	if len(inputs) == 0 {
		return usagef("no inputs")
	}
	switch o.OnError {
	case "":
		o.OnError = "fail"
	case "fail", "skip", "quarantine":
	default:
		return usagef("on-error %q is not one of fail, skip, quarantine", o.OnError)
	}
	if o.Replace && o.Append {
		return usagef("--replace and --append exclude each other")
	}
	if o.Missing == nil {
		o.Missing = DefaultMissing
	}
	for _, m := range o.Missing {
		l.missing = append(l.missing, []byte(m))
		if len(m) < len(l.missLen) {
			l.missLen[len(m)] = true
		} else {
			l.missLong = true
		}
	}
	if o.BatchRows <= 0 {
		o.BatchRows = 150
	}
	if o.MaxProblems <= 0 {
		o.MaxProblems = 20
	}
	if o.CheckName == nil {
		o.CheckName = defaultCheckName
	}
	seen := map[string]bool{}
	for _, in := range inputs {
		if in.Name == "" {
			in.Name = in.Path
		}
		if seen[in.Name] {
			return usagef("input %s is given twice", in.Name)
		}
		seen[in.Name] = true
		f, err := formatOf(in, o.Format)
		if err != nil {
			return err
		}
		l.srcs = append(l.srcs, &source{in: in, name: in.Name, format: f})
	}
	l.table = o.Table
	if l.table == "" {
		if inputs[0].Name == "-" || inputs[0].Reader != nil && inputs[0].Name == "" {
			return usagef("--table is required when reading standard input")
		}
		base := filepath.Base(strings.TrimSuffix(inputs[0].Name, ".gz"))
		base = strings.TrimSuffix(base, filepath.Ext(base))
		l.table = base
	}
	if err := o.CheckName("table", l.table); err != nil {
		return usagef("%v", err)
	}
	return nil
}

func defaultCheckName(kind, name string) error {
	n := strings.ToLower(name)
	if name == "" {
		return fmt.Errorf("%s name is empty", kind)
	}
	if strings.HasPrefix(n, "ss_") || strings.HasPrefix(n, "sqlite_") {
		return fmt.Errorf("%s name %q is reserved", kind, name)
	}
	return nil
}

// target checks what exists under the table name and decides the mode.
func (l *loader) target(ctx context.Context, conn *sql.Conn) error {
	var typ, name string
	err := conn.QueryRowContext(ctx, `SELECT type, name FROM sqlite_schema WHERE lower(name) = lower(?)`, l.table).Scan(&typ, &name)
	if err != nil && !errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("check table %s: %w", l.table, err)
	}
	var owner string
	if e := conn.QueryRowContext(ctx, `SELECT owner FROM ss_objects WHERE lower(name) = lower(?)`, l.table).Scan(&owner); e == nil {
		return usagef("table name %q is taken by a view splitsmith made for %s", l.table, owner)
	}
	switch {
	case errors.Is(err, sql.ErrNoRows):
		if l.opts.Append {
			return usagef("--append: table %q does not exist", l.table)
		}
		l.mode = "create"
		l.firstRow = 1
		l.normDigest = true
		return nil
	case typ != "table":
		return usagef("%q is a %s, not a table", name, typ)
	}
	l.table = name
	var n int64
	if err := conn.QueryRowContext(ctx, `SELECT count(*), coalesce(max(ss_row), 0) FROM `+quoteIdent(name)).Scan(&n, &l.firstRow); err != nil {
		if !l.opts.Replace {
			return usagef("table %q exists and was not made by splitsmith ingest; choose another --table", name)
		}
	}
	l.firstRow++
	switch {
	case l.opts.Replace:
		l.mode, l.firstRow = "replace", 1
		l.normDigest = true
		if splits := dependentSplits(ctx, conn, name); len(splits) > 0 {
			return usagef("--replace: table %q has splits (%s) that refer to its rows; replacing it would leave them describing rows that no longer exist: load into another --table or a new --db", name, strings.Join(splits, ", "))
		}
	case l.opts.Append:
		l.mode = "append"
		rows, err := conn.QueryContext(ctx, `SELECT name, logical_type, sql_type, reason, missing FROM ss_columns WHERE table_name = ? ORDER BY position`, name)
		if err != nil {
			return fmt.Errorf("read ss_columns: %w", err)
		}
		defer rows.Close()
		for rows.Next() {
			var c Column
			var lt string
			if err := rows.Scan(&c.Name, &lt, &c.SQLType, &c.Reason, &c.Missing); err != nil {
				return err
			}
			if c.Type, err = ParseType(lt); err != nil {
				return err
			}
			l.existing = append(l.existing, c)
		}
		if err := rows.Err(); err != nil {
			return err
		}
		if len(l.existing) == 0 {
			return usagef("--append: table %q was not made by splitsmith ingest (no ss_columns rows)", name)
		}
		// A table made before ss_norm_digest existed is appended to without it.
		var has int
		if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM pragma_table_info(?) WHERE name = 'ss_norm_digest'`, name).Scan(&has); err != nil {
			return fmt.Errorf("read columns of %s: %w", name, err)
		}
		l.normDigest = has > 0
	default:
		return usagef("table %q already exists (%d rows): give --replace to overwrite it or --append to add rows", name, n)
	}
	return nil
}

// dependentSplits lists the splits made of a table (none when the splits table is absent).
func dependentSplits(ctx context.Context, conn *sql.Conn, table string) []string {
	rows, err := conn.QueryContext(ctx, `SELECT split_name FROM ss_splits WHERE lower(table_name) = lower(?) ORDER BY split_name`, table)
	if err != nil {
		return nil
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var n string
		if rows.Scan(&n) == nil {
			out = append(out, n)
		}
	}
	return out
}

func quoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

func quoteString(s string) string { return `'` + strings.ReplaceAll(s, `'`, `''`) + `'` }

func (l *loader) progress(n int64) {
	l.done += n
	if l.opts.Progress != nil {
		l.opts.Progress(l.done, l.total)
	}
}

func (l *loader) isMissing(b []byte) bool {
	if len(b) == 0 {
		return true
	}
	if len(b) < len(l.missLen) && !l.missLen[len(b)] || len(b) >= len(l.missLen) && !l.missLong {
		return false // no token has this length
	}
	for _, m := range l.missing {
		if len(m) == len(b) && string(m) == string(b) {
			return true
		}
	}
	return false
}

// checkHeader validates one input's header and matches it against the columns so far.
func (l *loader) checkHeader(s *source, hdr []string, line int64) error {
	bad := func(format string, a ...any) error {
		return &Problem{Source: s.name, Line: line, Reason: fmt.Sprintf(format, a...)}
	}
	seen := map[string]int{}
	for i, h := range hdr {
		if strings.TrimSpace(h) == "" {
			return bad("column %d has an empty name", i+1)
		}
		if err := l.opts.CheckName("column", h); err != nil {
			return bad("column %d: %v", i+1, err)
		}
		k := strings.ToLower(h)
		if j, ok := seen[k]; ok {
			return bad("duplicate column name %q (columns %d and %d; names are compared ignoring case)", h, j+1, i+1)
		}
		seen[k] = i
	}
	want, from := l.cols, ""
	if want == nil && l.existing != nil {
		for _, c := range l.existing {
			want = append(want, c.Name)
		}
		from = "table " + strconv.Quote(l.table)
	} else if want != nil {
		from = l.srcs[0].name
	}
	if want == nil {
		l.cols = hdr
		return nil
	}
	for i := 0; i < len(want) || i < len(hdr); i++ {
		switch {
		case i >= len(hdr):
			return bad("columns differ from %s: it has %d columns, this input %d (column %d %q is missing)", from, len(want), len(hdr), i+1, want[i])
		case i >= len(want):
			return bad("columns differ from %s: it has %d columns, this input %d (extra column %d %q)", from, len(want), len(hdr), i+1, hdr[i])
		case hdr[i] != want[i]:
			return bad("columns differ from %s: column %d is %q here, %q there", from, i+1, hdr[i], want[i])
		}
	}
	if l.cols == nil {
		l.cols = hdr
	}
	return nil
}

// setupTypes fixes which columns have a given type (--schema or the appended table).
func (l *loader) setupTypes() error {
	l.stats = make([]colStat, len(l.cols))
	l.lenient = make([]bool, len(l.cols))
	for i := range l.stats {
		l.stats[i].mask = mAll
	}
	index := map[string]int{}
	for i, c := range l.cols {
		index[strings.ToLower(c)] = i
	}
	var names []string
	for n := range l.opts.Schema {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		i, ok := index[strings.ToLower(n)]
		if !ok {
			return usagef("--schema: unknown column %q (columns: %s)", n, strings.Join(l.cols, ", "))
		}
		t := l.opts.Schema[n]
		if l.existing != nil && l.existing[i].Type != t {
			return usagef("--schema: column %q is %s in table %q; an append keeps the table's types", n, l.existing[i].Type, l.table)
		}
		l.stats[i].schema, l.stats[i].schemaType, l.lenient[i] = true, t, true
	}
	for i, c := range l.existing {
		l.stats[i].schema, l.stats[i].schemaType, l.lenient[i] = true, c.Type, true
	}
	return nil
}

// rowProblem checks a record as a whole (reader problems, ragged rows, values that break a
// given type) and returns nil for a good row.
func (l *loader) rowProblem(s *source, r *record, conv *converter) *Problem {
	p := func(col int, value, reason string) *Problem {
		pr := &Problem{Source: s.name, Line: r.line, Value: value, Reason: reason, Raw: clipRaw(r.raw)}
		if col > 0 && col <= len(l.cols) {
			pr.Column = l.cols[col-1]
		}
		return pr
	}
	if r.problem != "" {
		return p(r.column, r.value, r.problem)
	}
	if len(r.fields) != len(l.cols) {
		return p(0, "", fmt.Sprintf("ragged row: %d fields, the header has %d", len(r.fields), len(l.cols)))
	}
	for i, b := range r.fields {
		if !l.lenient[i] || l.isMissing(b) {
			continue
		}
		if !conv.ok(l.stats[i].schemaType, true, b) {
			return p(i+1, string(b), fmt.Sprintf("cannot parse %q as %s", clip(string(b)), l.stats[i].schemaType))
		}
	}
	return nil
}

func clipRaw(b []byte) string {
	if len(b) > 4096 {
		return string(b[:4096]) + "…"
	}
	return string(b)
}

func (l *loader) keep(p *Problem) {
	if len(l.problems) < l.opts.MaxProblems {
		l.problems = append(l.problems, *p)
	}
}

// pass1 reads every input once: headers, problems, type inference, size and SHA-256.
func (l *loader) pass1(ctx context.Context) error {
	conv := &converter{}
	for si, s := range l.srcs {
		rr, done, err := s.open(true, l.progress)
		if err != nil {
			return err
		}
		err = l.scan(ctx, si, s, rr, conv, 0)
		done()
		if err != nil {
			return err
		}
	}
	for i := range l.cols {
		t, _ := l.stats[i].decide()
		l.types = append(l.types, t)
	}
	return nil
}

// scan reads one input for pass 1: header checks, row problems, inference. With limit > 0 it
// stops after that many records (the one-pass load's prefix).
func (l *loader) scan(ctx context.Context, si int, s *source, rr recordReader, conv *converter, limit int) error {
	line, err := l.readHeader(si, s, rr)
	if err != nil {
		return err
	}
	records := 0
	for n := 0; ; n++ {
		if n&1023 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		ok, err := rr.next()
		if err != nil {
			return fmt.Errorf("read %s: %w", s.name, err)
		}
		if !ok {
			break
		}
		records++
		if limit > 0 && records > limit {
			break
		}
		r := rr.rec()
		if p := l.rowProblem(s, r, conv); p != nil {
			if l.opts.OnError == "fail" {
				return p
			}
			l.keep(p)
			continue
		}
		for i, b := range r.fields {
			if l.isMissing(b) {
				l.stats[i].missing++
			} else {
				l.stats[i].observe(b, s.name, r.line)
			}
		}
	}
	if records == 0 {
		return &Problem{Source: s.name, Line: line, Reason: "header only: no data rows"}
	}
	return nil
}

// readHeader reads and checks an input's header; for the first input it also sets up the
// column statistics. It returns the header's line.
func (l *loader) readHeader(si int, s *source, rr recordReader) (int64, error) {
	hdr, line, err := rr.header()
	if err != nil {
		if errors.Is(err, errEmpty) {
			if s.format == "jsonl" {
				return 0, &Problem{Source: s.name, Reason: "empty input: no JSON object"}
			}
			return 0, &Problem{Source: s.name, Reason: "empty input: no header line"}
		}
		if line > 0 {
			return 0, &Problem{Source: s.name, Line: line, Reason: err.Error()}
		}
		return 0, fmt.Errorf("read %s: %w", s.name, err)
	}
	if err := l.checkHeader(s, hdr, line); err != nil {
		return 0, err
	}
	if si == 0 && l.stats == nil {
		if err := l.setupTypes(); err != nil {
			return 0, err
		}
	}
	return line, nil
}

// create makes (or replaces) the table.
func (l *loader) create(ctx context.Context, conn *sql.Conn) error {
	if l.mode == "append" {
		return nil
	}
	if l.mode == "replace" && !l.replaced {
		l.replaced = true
		for _, q := range []string{
			`DROP TABLE ` + quoteIdent(l.table),
			`DELETE FROM ss_columns WHERE table_name = ?`,
			`DELETE FROM ss_sources WHERE table_name = ?`,
			`DELETE FROM ss_rejects WHERE table_name = ?`,
		} {
			var err error
			if strings.Contains(q, "?") {
				_, err = conn.ExecContext(ctx, q, l.table)
			} else {
				_, err = conn.ExecContext(ctx, q)
			}
			if err != nil {
				return fmt.Errorf("replace %s: %w", l.table, err)
			}
		}
	}
	var b strings.Builder
	b.WriteString("CREATE TABLE " + quoteIdent(l.table) + " (\n  ss_row INTEGER PRIMARY KEY,\n  ss_source TEXT NOT NULL,\n  ss_line INTEGER NOT NULL,\n  ss_digest INTEGER NOT NULL,\n  ss_norm_digest INTEGER NOT NULL")
	for i, c := range l.cols {
		b.WriteString(",\n  " + quoteIdent(c) + " " + l.types[i].SQLType())
	}
	b.WriteString("\n)")
	if _, err := conn.ExecContext(ctx, b.String()); err != nil {
		return fmt.Errorf("create table %s: %w", l.table, err)
	}
	return nil
}

// record writes ss_sources and ss_columns and fills the result's descriptions.
func (l *loader) record(ctx context.Context, conn *sql.Conn, res *Result) error {
	schema := map[string]string{}
	for n, t := range l.opts.Schema {
		schema[n] = t.String()
	}
	for _, s := range l.srcs {
		opt, _ := json.Marshal(map[string]any{
			"format": s.format, "gzip": s.gz, "on_error": l.opts.OnError, "missing": l.opts.Missing,
			"schema": schema, "mode": l.mode,
		})
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_sources(run_id, table_name, path, size, sha256, format, rows_loaded, rows_skipped, rows_rejected, options_json) VALUES(?,?,?,?,?,?,?,?,?,?)`,
			l.opts.RunID, l.table, s.name, s.size, s.sha256, s.format, s.rows, s.skipped, s.rejected, string(opt)); err != nil {
			return fmt.Errorf("record source %s: %w", s.name, err)
		}
		res.Sources = append(res.Sources, SourceResult{Name: s.name, Format: s.format, Gzip: s.gz, Size: s.size, SHA256: s.sha256, Rows: s.rows, Skipped: s.skipped, Rejected: s.rejected})
	}
	for i, c := range l.cols {
		t, reason := l.stats[i].decide()
		miss := l.stats[i].missing
		if l.existing != nil {
			reason = l.existing[i].Reason
			if _, err := conn.ExecContext(ctx, `UPDATE ss_columns SET missing = missing + ? WHERE table_name = ? AND position = ?`, miss, l.table, i+1); err != nil {
				return fmt.Errorf("record columns: %w", err)
			}
			miss += l.existing[i].Missing
		} else if _, err := conn.ExecContext(ctx, `INSERT INTO ss_columns(table_name, position, name, logical_type, sql_type, reason, missing) VALUES(?,?,?,?,?,?,?)`,
			l.table, i+1, c, t.String(), t.SQLType(), reason, miss); err != nil {
			return fmt.Errorf("record columns: %w", err)
		}
		res.Columns = append(res.Columns, Column{Name: c, Type: t, SQLType: t.SQLType(), Reason: reason, Missing: miss})
	}
	var q strings.Builder
	q.WriteString("SELECT ss_row FROM " + quoteIdent(l.table) + " WHERE ss_digest IS NOT ingest_digest(")
	for i, c := range l.cols {
		if i > 0 {
			q.WriteString(", ")
		}
		q.WriteString(quoteIdent(c))
	}
	q.WriteString(") ORDER BY ss_row")
	res.DigestCheckSQL = q.String()
	if l.normDigest {
		res.NormDigestCheckSQL = l.normDigestCheckSQL()
	}
	res.Problems = l.problems
	return nil
}

// normDigestCheckSQL is the stock-SQL recomputation of ss_norm_digest: SQLite normalises
// every value (NormExprSQL: the text normalisation, decimal integers, printf('%.8e') for
// REAL) and ingest_norm_digest sums their terms.
func (l *loader) normDigestCheckSQL() string {
	var q strings.Builder
	q.WriteString("SELECT ss_row FROM " + quoteIdent(l.table) + " WHERE ss_norm_digest IS NOT ingest_norm_digest(")
	for i, c := range l.cols {
		if i > 0 {
			q.WriteString(", ")
		}
		q.WriteString(NormExprSQL(l.types[i].SQLType(), quoteIdent(c)))
	}
	q.WriteString(") ORDER BY ss_row")
	return q.String()
}

// converter turns field bytes into stored values.
type converter struct {
	ts []byte
}

func (c *converter) ok(t Type, lenient bool, b []byte) bool {
	_, ok := c.value(t, lenient, b)
	return ok
}

// value converts a non-missing field to its stored value: int64, float64 or string.
func (c *converter) value(t Type, lenient bool, b []byte) (driver.Value, bool) {
	switch t {
	case TypeInteger:
		if v, ok := parseIntStrict(b); ok {
			return v, true
		}
		if lenient {
			if v, err := strconv.ParseInt(string(b), 10, 64); err == nil {
				return v, true
			}
		}
		return nil, false
	case TypeReal:
		// Inference already checked an inferred column's grammar (and a changed file is caught
		// by its size and time), so only the parse is left.
		v, ok := parseFloatFast(b)
		if !ok {
			var err error
			v, err = strconv.ParseFloat(unsafe.String(unsafe.SliceData(b), len(b)), 64) // b is not kept
			if err != nil || v-v != 0 {
				return nil, false
			}
		}
		if v == 0 {
			v = 0 // -0 → 0: SQLite stores no negative zero, and the digest must match what it keeps
		}
		return v, true
	case TypeBoolean:
		if v, ok := parseBoolStrict(b); ok {
			return b2i(v), true
		}
		if lenient {
			switch strings.ToLower(string(b)) {
			case "yes", "y", "t", "1":
				return int64(1), true
			case "no", "n", "f", "0":
				return int64(0), true
			}
		}
		return nil, false
	case TypeDate:
		if isDate(b) {
			return string(b), true
		}
		return nil, false
	case TypeTimestamp:
		var ok bool
		c.ts, ok, _ = canonTimestamp(b, c.ts[:0])
		if ok {
			return string(c.ts), true
		}
		return nil, false
	}
	return string(b), true
}

func b2i(v bool) int64 {
	if v {
		return 1
	}
	return 0
}
