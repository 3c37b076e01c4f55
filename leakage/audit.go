package leakage

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"splitsmith/ingest"
)

// sqlBuiltKeys has SQLite build the duplicate keys while it reads, when no check needs the
// feature values. Off: measured about 3× slower than reading the values and building the keys
// in Go (BenchmarkAudit_ExactDuplicateSQLKeys1M); tests use it to cross-check the two.
var sqlBuiltKeys = false

// traceHook, when set (by benchmarks), receives how long each step of Run took. Timings
// never enter results.
var traceHook func(step string, d time.Duration)

func trace(step string, since time.Time) {
	if traceHook != nil {
		traceHook(step, time.Since(since))
	}
}

// Options are one audit's settings, as the command resolved them.
type Options struct {
	Split   string
	Checks  []string           // check names; empty = every check whose inputs are available
	Label   string             // label column, or ""
	Text    []string           // text columns for near_duplicate_text
	Time    string             // time column; "" = the split's time column
	Entity  []string           // entity columns; nil = the split's group columns
	Ignore  []string           // columns left out of the feature set
	Params  map[string]float64 // "check.param" -> value (ParseParams)
	Workers int                // goroutines for the parallel checks; 0 = GOMAXPROCS
	// Progress, when set, returns a callback for a long step and a function that ends it.
	Progress func(label string) (report func(done, total int64), end func())
}

// QueryAdder stores SQL that recomputes a result (store.Tx implements it).
type QueryAdder interface {
	AddAuditQuery(ctx context.Context, subject, name, kind, description, query string, needsTool bool) error
}

// Query is stored SQL that recomputes findings. A "check" query returns no rows when the
// stored findings and the recomputation agree; a "report" query returns rows to read.
type Query struct {
	Name, Kind, Description, SQL string
	NeedsTool                    bool
}

// SideInfo is one side of the audited split.
type SideInfo struct {
	Name, Role string
	Rows       int
}

// Report is an audit's result.
type Report struct {
	AuditID  int64
	Split    string
	Table    string
	Rows     int
	Sides    []SideInfo
	Ran      []string
	Skipped  []Skip
	Findings []Finding
	Queries  []Query
	Resolved map[string]any // what options_json stores
}

// Skip is a check that did not run, and why.
type Skip struct{ Check, Reason string }

// Count returns the number of findings of a severity.
func (r *Report) Count(s Severity) int {
	n := 0
	for _, f := range r.Findings {
		if f.Severity == s {
			n++
		}
	}
	return n
}

// Worst is the highest severity among the findings ("" when none).
func (r *Report) Worst() Severity {
	var w Severity
	for _, f := range r.Findings {
		if f.Severity.Rank() > w.Rank() {
			w = f.Severity
		}
	}
	return w
}

type colInfo struct {
	Name, Logical, SQLType string
	Pos                    int // 1-based position in ss_columns
}

type column struct {
	colInfo
	num  []float64 // numeric storage (INTEGER, REAL, BOOLEAN)
	ints []int64   // INTEGER storage, exact
	str  []string  // TEXT storage
	null []bool
	// rounded[d] holds SQLite's own printf('%.{d-1}e', x) of each value (numeric columns), so
	// that stored stock-SQL queries group exactly as the audit did.
	rounded map[int][]string
	// roundOnly > 0: only rounded[roundOnly] was read (num holds NaN).
	roundOnly int
	goRound   bool     // roundOnly computed in Go by roundSignificant
	ro        []string // rounded[roundOnly] while rows are read (no map update per row)
}

func (c *column) numeric() bool { return c.SQLType == "INTEGER" || c.SQLType == "REAL" }
func (c *column) text() bool    { return c.SQLType == "TEXT" }

type audit struct {
	ctx       context.Context
	conn      *sql.Conn
	opts      Options
	check     *Check
	table     string
	split     string
	groupBy   []string
	timeCol   string
	gap       string
	splitKeys []string
	cols      []colInfo
	sides     []SideInfo
	rowID     []int64
	side      []int // index into sides
	data      map[string]*column
	feature   []string
	entity    []string
	label     string
	text      []string
	found     []Finding
	queries   []Query
	auditID   int64
	skipped   []Skip
	workers   int
	// significant digits to load rounded forms for: REAL columns, and all numeric columns
	roundReal, roundAll []int
	needed              map[string]bool // columns the selected checks read
	rawNeeded           map[string]bool // columns read as values, not only in rounded form
	useDigest           bool            // load ss_digest
	hasNormDigest       bool            // the table has ss_norm_digest
	useNormDigest       bool            // load ss_norm_digest (normkey.go)
	normDigest          []int64
	countEntity         bool // count entity values per side while reading (shared_entity)
	counted             map[string]*entityCounter
	sqlKeys             map[string][]string // key SQL -> each row's key, built by SQLite
	stream              []keySpec           // keys hashed while the rows are read
	streamed            map[string][]uint64 // key SQL -> each row's key hash (stream)
	digest              []int64
}

func (a *audit) p(name string) float64 {
	if v, ok := a.opts.Params[a.check.Name+"."+name]; ok {
		return v
	}
	return a.check.param(name).Default
}

func (a *audit) progress(label string) (func(done, total int64), func()) {
	if a.opts.Progress == nil {
		return nil, func() {}
	}
	return a.opts.Progress(label)
}

// Run audits a split inside the caller's transaction: it loads the split's rows, runs the
// selected checks, and writes ss_audits, ss_findings, ss_finding_rows and the audit queries
// (subject "audit:<split>"). Bad options give an *InputError before anything is written.
func Run(ctx context.Context, conn *sql.Conn, runID int64, qa QueryAdder, opts Options) (*Report, error) {
	a := &audit{ctx: ctx, conn: conn, opts: opts, split: opts.Split, workers: opts.Workers}
	if a.workers <= 0 {
		a.workers = runtime.GOMAXPROCS(0)
	}
	checks, err := ParseChecks(opts.Checks)
	if err != nil {
		return nil, err
	}
	for k := range opts.Params {
		if _, err := ParseParams([]string{k + "=0"}); err != nil {
			return nil, err
		}
	}
	if err := a.loadSplit(); err != nil {
		return nil, err
	}
	if err := a.resolveColumns(); err != nil {
		return nil, err
	}
	explicit := len(opts.Checks) > 0
	var run []*Check
	for _, c := range checks {
		if reason := a.missing(c); reason != "" {
			if explicit {
				return nil, inputf("check %s: %s", c.Name, reason)
			}
			a.skipped = append(a.skipped, Skip{c.Name, reason})
			continue
		}
		run = append(run, c)
	}
	a.needed = map[string]bool{}
	need := func(cols ...string) {
		for _, c := range cols {
			a.needed[c] = true
		}
	}
	a.rawNeeded = map[string]bool{}
	raw := func(cols ...string) {
		need(cols...)
		for _, c := range cols {
			a.rawNeeded[c] = true
		}
	}
	if a.label != "" {
		raw(a.label)
	}
	raw(a.text...)
	// With sqlBuiltKeys, SQLite builds the duplicate keys while it reads (one value per row).
	keysInSQL := sqlBuiltKeys
	for _, c := range run {
		if c == LeakingFeature || c == DistributionShift {
			keysInSQL = false
		}
		if c == NearDuplicateNumeric {
			a.check = c
			if tol := a.p("tol"); tol != 0 {
				if !(tol > 0 && tol < 1) {
					return nil, inputf("--param near_duplicate_numeric.tol=%g: a relative tolerance must be above 0 and below 1 (0 turns it off)", tol)
				}
				keysInSQL = false
			}
		}
	}
	a.sqlKeys = map[string][]string{}
	for _, c := range run {
		switch c {
		case ExactDuplicate, LabelConflict, NearDuplicateNumeric:
			a.check = ExactDuplicate
			k := a.featureKey()
			switch {
			case k.digest:
				a.useDigest = true
			case a.normDigestServes(k) && !keysInSQL:
				a.useNormDigest = true
				for _, x := range a.excluded() {
					need(x.Name)
					if x.SQLType == "REAL" {
						a.roundReal = append(a.roundReal, ingest.NormDigits)
					}
				}
				if c == NearDuplicateNumeric {
					need(a.feature...) // its near key is read and rounded
				}
			case keysInSQL:
				a.sqlKeys[a.keySQL(k, "t")] = nil
				if c == NearDuplicateNumeric {
					a.check = c
					d := int(a.p("digits"))
					a.sqlKeys[a.keySQL(keySpec{cols: a.feature, normalize: true, realDig: d, intDig: d}, "t")] = nil
				}
			default:
				need(a.feature...)
				a.roundReal = append(a.roundReal, k.realDig)
				if c == ExactDuplicate || c == LabelConflict {
					a.addStream(k)
				}
			}
		case LeakingFeature, DistributionShift:
			raw(a.feature...)
		case SharedEntity:
			raw(a.entity...)
			a.countEntity = !a.entityComponents()
		case TimeOverlap:
			raw(a.timeCol)
			raw(a.entity...)
		}
		if c == NearDuplicateNumeric && !keysInSQL {
			a.check = c
			if a.p("tol") != 0 {
				raw(a.feature...) // compared as values
			} else {
				a.roundAll = append(a.roundAll, int(a.p("digits")))
			}
		}
	}
	t0 := time.Now()
	if err := a.loadRows(); err != nil {
		return nil, err
	}
	trace("load", t0)
	if err := a.validateData(run); err != nil {
		return nil, err
	}
	// The audit row first: stored queries name its id.
	res, err := conn.ExecContext(ctx, `INSERT INTO ss_audits(run_id, split_name, table_name, options_json, rows, errors, warnings, infos) VALUES(?,?,?,'{}',?,0,0,0)`,
		runID, a.split, a.table, len(a.rowID))
	if err != nil {
		return nil, fmt.Errorf("audit %s: %w", a.split, err)
	}
	if a.auditID, err = res.LastInsertId(); err != nil {
		return nil, err
	}
	rep := &Report{AuditID: a.auditID, Split: a.split, Table: a.table, Rows: len(a.rowID), Sides: a.sides, Skipped: a.skipped}
	for _, c := range run {
		a.check = c
		start := len(a.found)
		t1 := time.Now()
		err := c.run(a)
		trace(c.Name, t1)
		if err != nil {
			return nil, fmt.Errorf("audit %s: check %s: %w", a.split, c.Name, err)
		}
		for i := start; i < len(a.found); i++ {
			a.found[i].Check = c.Name
		}
		rep.Ran = append(rep.Ran, c.Name)
	}
	rep.Findings = a.found
	rep.Queries = a.queries
	rep.Resolved = a.resolved(rep)
	t2 := time.Now()
	defer trace("write", t2)
	if err := a.write(qa, rep); err != nil {
		return nil, fmt.Errorf("audit %s: %w", a.split, err)
	}
	return rep, nil
}

func (a *audit) addStream(k keySpec) {
	for _, x := range a.stream {
		if a.keySQL(x, "t") == a.keySQL(k, "t") {
			return
		}
	}
	a.stream = append(a.stream, k)
}

func (a *audit) resolved(rep *Report) map[string]any {
	params := map[string]map[string]float64{}
	for _, name := range rep.Ran {
		c := Lookup(name)
		a.check = c
		if len(c.Params) == 0 {
			continue
		}
		m := map[string]float64{}
		for _, p := range c.Params {
			m[p.Name] = a.p(p.Name)
		}
		params[name] = m
	}
	skipped := map[string]string{}
	for _, s := range rep.Skipped {
		skipped[s.Check] = s.Reason
	}
	out := map[string]any{
		"checks": rep.Ran, "skipped": skipped, "label": a.label, "text": orEmpty(a.text), "time": a.timeCol,
		"entity": orEmpty(a.entity), "features": orEmpty(a.feature), "params": params,
	}
	if k := a.exactKeySource(rep.Ran); k != "" {
		out["exact_key"] = k
	}
	return out
}

// exactKeySource says where the exact-duplicate key of the checks that ran came from: the
// stored digests, or the values read; "" when none of them used it.
func (a *audit) exactKeySource(ran []string) string {
	switch {
	case a.useDigest:
		return "ss_digest"
	case a.useNormDigest:
		return "ss_norm_digest"
	}
	for _, name := range ran {
		if c := Lookup(name); c == ExactDuplicate || c == LabelConflict || c == NearDuplicateNumeric {
			return "values"
		}
	}
	return ""
}

func orEmpty(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func (a *audit) missing(c *Check) string {
	for _, r := range c.Requires {
		switch {
		case r == "label" && a.label == "":
			return "needs --label"
		case r == "time" && a.timeCol == "":
			return "needs --time (the split has no time column)"
		case r == "text" && len(a.text) == 0:
			return "needs --text"
		case r == "entity" && len(a.entity) == 0:
			return "needs --entity (the split has no group columns)"
		}
	}
	if c == NearDuplicateNumeric {
		for _, f := range a.feature {
			if a.colType(f).SQLType != "TEXT" {
				return ""
			}
		}
		return "no numeric feature column"
	}
	return ""
}

func (a *audit) colType(name string) colInfo {
	for _, c := range a.cols {
		if c.Name == name {
			return c
		}
	}
	return colInfo{}
}

func (a *audit) loadSplit() error {
	var groups string
	var timeCol sql.NullString
	var spec string
	err := a.conn.QueryRowContext(a.ctx, `SELECT table_name, group_columns, time_column, spec_json FROM ss_splits WHERE split_name = ?`, a.split).
		Scan(&a.table, &groups, &timeCol, &spec)
	if err == sql.ErrNoRows {
		var names []string
		rows, err := a.conn.QueryContext(a.ctx, `SELECT split_name FROM ss_splits ORDER BY split_name`)
		if err == nil {
			for rows.Next() {
				var n string
				rows.Scan(&n)
				names = append(names, n)
			}
			rows.Close()
		}
		if len(names) == 0 {
			return inputf("--split: no split %q: the database has no splits (make one with splitsmith split)", a.split)
		}
		return inputf("--split: no split %q (splits: %s)", a.split, strings.Join(names, ", "))
	}
	if err != nil {
		return fmt.Errorf("read split %s: %w", a.split, err)
	}
	if err := json.Unmarshal([]byte(groups), &a.groupBy); err != nil {
		return fmt.Errorf("split %s: group_columns: %w", a.split, err)
	}
	a.timeCol = timeCol.String
	var sp struct {
		Gap string   `json:"gap"`
		Key []string `json:"key"`
	}
	if json.Unmarshal([]byte(spec), &sp) == nil {
		a.gap, a.splitKeys = sp.Gap, sp.Key
	}
	rows, err := a.conn.QueryContext(a.ctx, `SELECT side, role, rows FROM ss_split_sides WHERE split_name = ? ORDER BY position`, a.split)
	if err != nil {
		return fmt.Errorf("read split %s sides: %w", a.split, err)
	}
	defer rows.Close()
	for rows.Next() {
		var s SideInfo
		if err := rows.Scan(&s.Name, &s.Role, &s.Rows); err != nil {
			return err
		}
		a.sides = append(a.sides, s)
	}
	if err := rows.Err(); err != nil {
		return err
	}
	crows, err := a.conn.QueryContext(a.ctx, `SELECT name, logical_type, sql_type, position FROM ss_columns WHERE table_name = ? ORDER BY position`, a.table)
	if err != nil {
		return fmt.Errorf("read columns of %s: %w", a.table, err)
	}
	defer crows.Close()
	for crows.Next() {
		var c colInfo
		if err := crows.Scan(&c.Name, &c.Logical, &c.SQLType, &c.Pos); err != nil {
			return err
		}
		a.cols = append(a.cols, c)
	}
	if err := crows.Err(); err != nil {
		return err
	}
	// Tables ingested before the normalised digest existed have none.
	var n int
	if err := a.conn.QueryRowContext(a.ctx, `SELECT count(*) FROM pragma_table_info(?) WHERE name = 'ss_norm_digest'`, a.table).Scan(&n); err != nil {
		return fmt.Errorf("read columns of %s: %w", a.table, err)
	}
	a.hasNormDigest = n == 1
	return nil
}

func (a *audit) resolveColumns() error {
	has := map[string]bool{}
	var names []string
	for _, c := range a.cols {
		has[c.Name] = true
		names = append(names, c.Name)
	}
	check := func(flag, name string) error {
		if !has[name] {
			return inputf("--%s: table %s has no column %q (columns: %s)", flag, a.table, name, strings.Join(names, ", "))
		}
		return nil
	}
	o := a.opts
	if o.Label != "" {
		if err := check("label", o.Label); err != nil {
			return err
		}
		a.label = o.Label
	}
	for _, t := range o.Text {
		if err := check("text", t); err != nil {
			return err
		}
		if a.colType(t).SQLType != "TEXT" {
			return inputf("--text: column %q holds %s values, not text", t, a.colType(t).Logical)
		}
	}
	a.text = o.Text
	if o.Time != "" {
		if err := check("time", o.Time); err != nil {
			return err
		}
		a.timeCol = o.Time
	} else if a.timeCol != "" && !has[a.timeCol] {
		a.timeCol = ""
	}
	if o.Entity != nil {
		for _, e := range o.Entity {
			if err := check("entity", e); err != nil {
				return err
			}
		}
		a.entity = o.Entity
	} else {
		for _, g := range a.groupBy {
			if has[g] {
				a.entity = append(a.entity, g)
			}
		}
	}
	for _, i := range o.Ignore {
		if err := check("ignore", i); err != nil {
			return err
		}
	}
	out := map[string]bool{a.label: true}
	for _, e := range a.entity {
		out[e] = true
	}
	for _, k := range a.splitKeys {
		out[k] = true
	}
	for _, i := range o.Ignore {
		out[i] = true
	}
	for _, c := range a.cols {
		if !out[c.Name] {
			a.feature = append(a.feature, c.Name)
		}
	}
	if len(a.sides) < 2 {
		return inputf("--split: split %q has %d side(s); an audit compares at least two", a.split, len(a.sides))
	}
	return nil
}

// loadRows reads every row on a side, in row order, into typed columns.
func (a *audit) loadRows() error {
	var total int64
	for _, s := range a.sides {
		total += int64(s.Rows)
	}
	var sel strings.Builder
	// The row and its side as one integer, row_id·64 + the side's index in ss_split_sides
	// (63 for a side not listed there): one value fewer per row to take from the driver.
	sel.WriteString(`SELECT r.row_id * 64 + CASE r.side`)
	for i, sd := range a.sides {
		fmt.Fprintf(&sel, " WHEN %s THEN %d", quoteString(sd.Name), i)
	}
	sel.WriteString(" ELSE 63 END")
	if len(a.sides) >= 63 {
		return inputf("--split: split %q has %d sides; an audit compares at most 62", a.split, len(a.sides))
	}
	first := 1 // first user column in the result
	digestAt := first
	if a.useDigest {
		sel.WriteString(", t.ss_digest")
		first++
	}
	normAt := first
	if a.useNormDigest {
		sel.WriteString(", t.ss_norm_digest")
		first++
	}
	a.data = map[string]*column{}
	var cols []*column
	for _, c := range a.cols {
		if !a.needed[c.Name] {
			continue
		}
		col := &column{colInfo: c}
		ds := distinctInts(append(append([]int{}, a.roundReal...), a.roundAll...))
		if c.SQLType == "REAL" && !a.rawNeeded[c.Name] && len(ds) == 1 && ds[0] >= 1 && ds[0] <= maxGoRoundDigits {
			// Only the rounded form is used: read the value, round it in Go (SQLite's printf
			// for the few values roundSignificant leaves to it).
			col.roundOnly = ds[0]
			col.goRound = true
			fmt.Fprintf(&sel, ", t.%s", quoteIdent(c.Name))
		} else if c.SQLType == "REAL" && !a.rawNeeded[c.Name] && len(ds) == 1 && ds[0] >= 1 && ds[0] <= 30 {
			// Only the rounded form is used: read it alone (NULL stays NULL).
			col.roundOnly = ds[0]
			x := "t." + quoteIdent(c.Name)
			fmt.Fprintf(&sel, ", CASE WHEN %s IS NULL THEN NULL ELSE %s END", x, RoundSignificantSQL(x, ds[0]))
		} else {
			fmt.Fprintf(&sel, ", t.%s", quoteIdent(c.Name))
		}
		cols = append(cols, col)
		a.data[c.Name] = col
	}
	type rnd struct {
		col *column
		d   int
	}
	var rounds, goRounds []rnd
	for _, c := range cols {
		if c.roundOnly > 0 {
			c.rounded = map[int][]string{c.roundOnly: nil}
			continue
		}
		var ds []int
		switch c.SQLType {
		case "REAL":
			ds = append(append(ds, a.roundReal...), a.roundAll...)
		case "INTEGER":
			ds = append(ds, a.roundAll...)
		}
		for _, d := range ds {
			if d < 1 || d > 30 {
				return inputf("--param digits=%d: significant digits must be 1..30", d)
			}
			if c.rounded == nil {
				c.rounded = map[int][]string{}
			}
			if _, ok := c.rounded[d]; ok {
				continue
			}
			c.rounded[d] = nil
			if c.SQLType == "REAL" && d <= maxGoRoundDigits {
				goRounds = append(goRounds, rnd{c, d}) // from the value read, after the read
				continue
			}
			rounds = append(rounds, rnd{c, d})
			fmt.Fprintf(&sel, ", %s", RoundSignificantSQL("t."+quoteIdent(c.Name), d))
		}
	}
	var keyExprs []string
	for e := range a.sqlKeys {
		keyExprs = append(keyExprs, e)
	}
	sort.Strings(keyExprs)
	for _, e := range keyExprs {
		fmt.Fprintf(&sel, ", %s", e)
	}
	fmt.Fprintf(&sel, ` FROM ss_split_rows r JOIN %s t ON t.ss_row = r.row_id WHERE r.split_name = ? AND r.side <> '' ORDER BY r.row_id`, quoteIdent(a.table))
	report, end := a.progress("audit: reading rows")
	defer end()
	var fb []fallback // values roundSignificant leaves to SQLite
	var buf []byte
	a.rowID = make([]int64, 0, total)
	a.side = make([]int, 0, total)
	if a.useDigest {
		a.digest = make([]int64, 0, total)
	}
	if a.useNormDigest {
		a.normDigest = make([]int64, 0, total)
	}
	for _, c := range cols {
		c.reserve(int(total))
	}
	for _, r := range rounds {
		r.col.rounded[r.d] = make([]string, 0, total)
	}
	for _, e := range keyExprs {
		a.sqlKeys[e] = make([]string, 0, total)
	}
	// Keys whose every part is known once a row is read are hashed as it is read (on the
	// processing goroutine, while the next rows are read); not REAL values rounded after the
	// read (their raw values are needed too).
	later := map[*column]map[int]bool{}
	for _, r := range goRounds {
		if later[r.col] == nil {
			later[r.col] = map[int]bool{}
		}
		later[r.col][r.d] = true
	}
	type stream struct {
		spec keySpec
		name string
		cols []*column
		out  []uint64
	}
	var streams []*stream
	a.streamed = map[string][]uint64{}
	for _, k := range a.stream {
		ok := true
		for _, n := range k.cols {
			c := a.data[n]
			switch {
			case c == nil:
				ok = false
			case c.SQLType == "REAL" && (later[c][k.realDig] || c.rounded == nil):
				ok = false
			case c.SQLType == "INTEGER" && k.intDig > 0:
				ok = false
			}
		}
		if ok {
			name := a.keySQL(k, "t")
			streams = append(streams, &stream{k, name, a.keyCols(k), make([]uint64, 0, total)})
		}
	}
	a.counted = map[string]*entityCounter{}
	var counters []*entityCounter
	if a.countEntity {
		for _, e := range a.entity {
			ec := newEntityCounter(a.data[e], len(a.sides), int(total))
			a.counted[e] = ec
			counters = append(counters, ec)
		}
	}
	var kbuf []byte
	var unlisted int64 // a row on a side ss_split_sides does not list
	process := func(vals []driver.Value) error {
		packed, isInt := vals[0].(int64)
		if !isInt || packed < 0 {
			return fmt.Errorf("split %s: row id %v out of range", a.split, vals[0])
		}
		id, si := packed>>6, int(packed&63)
		if si >= len(a.sides) {
			unlisted = id
			return errUnlistedSide
		}
		a.rowID = append(a.rowID, id)
		a.side = append(a.side, si)
		if a.useDigest {
			d, _ := vals[digestAt].(int64)
			a.digest = append(a.digest, d)
		}
		if a.useNormDigest {
			d, _ := vals[normAt].(int64)
			a.normDigest = append(a.normDigest, d)
		}
		for i, c := range cols {
			if c.roundOnly > 0 {
				v := vals[first+i]
				if b, isB := v.([]byte); isB {
					v = string(b)
				}
				c.null = append(c.null, v == nil)
				c.num = append(c.num, math.NaN())
				c.ints = append(c.ints, 0)
				r := ""
				if c.goRound && v != nil {
					f, isF := v.(float64)
					var done bool
					if isF {
						r, buf, done = roundSignificant(buf, f, c.roundOnly)
					}
					if !done {
						fb = append(fb, fallback{c, c.roundOnly, len(c.null) - 1, v})
					}
				} else {
					r = asString(v)
				}
				c.ro = append(c.ro, r)
				continue
			}
			c.add(vals[first+i])
		}
		for k, r := range rounds {
			r.col.rounded[r.d] = append(r.col.rounded[r.d], asString(vals[first+len(cols)+k]))
		}
		for k, e := range keyExprs {
			a.sqlKeys[e] = append(a.sqlKeys[e], asString(vals[first+len(cols)+len(rounds)+k]))
		}
		for _, st := range streams {
			var h uint64
			h, kbuf = rowKey(st.cols, st.spec, len(a.rowID)-1, kbuf)
			st.out = append(st.out, h)
		}
		for _, ec := range counters {
			ec.add(len(a.rowID)-1, id, si)
		}
		if n := len(a.rowID); report != nil && n%65536 == 0 {
			report(int64(n), total)
		}
		return nil
	}
	err := a.readPipelined(sel.String(), process)
	if err == errUnlistedSide {
		var side string
		a.conn.QueryRowContext(a.ctx, `SELECT side FROM ss_split_rows WHERE split_name = ? AND row_id = ?`, a.split, unlisted).Scan(&side)
		return fmt.Errorf("split %s: row %d is on side %q, which ss_split_sides does not list", a.split, unlisted, side)
	}
	if err != nil {
		return fmt.Errorf("read rows of split %s: %w", a.split, err)
	}
	for _, c := range cols {
		if c.roundOnly > 0 {
			c.rounded[c.roundOnly] = c.ro
		}
	}
	for _, st := range streams {
		a.streamed[st.name] = st.out
	}
	for _, r := range goRounds {
		c := r.col
		out := make([]string, len(c.num))
		for i, f := range c.num {
			if c.null[i] {
				continue
			}
			var done bool
			if out[i], buf, done = roundSignificant(buf, f, r.d); !done {
				fb = append(fb, fallback{c, r.d, i, f})
			}
		}
		c.rounded[r.d] = out
	}
	if err := a.roundInSQL(fb); err != nil {
		return err
	}
	// Rows with a value SQLite rounded: hash them again, now that it is known.
	for _, f := range fb {
		for _, st := range streams {
			a.streamed[st.name][f.row], kbuf = rowKey(st.cols, st.spec, f.row, kbuf)
		}
	}
	return nil
}

// readPipelined runs the row query and calls process with each row, in order. With two or
// more workers one goroutine reads through the driver while another processes batches of
// rows (the two steps cost about the same); with one, rows are processed as they are read.
func (a *audit) readPipelined(query string, process func([]driver.Value) error) error {
	args := []any{a.split}
	if a.workers < 2 {
		return rawQuery(a.ctx, a.conn, query, args, process)
	}
	const per = 4096
	type batch struct {
		vals  []driver.Value
		width int
	}
	full := make(chan *batch, 4)
	free := make(chan *batch, 6)
	var perr error
	var stop atomic.Bool
	done := make(chan struct{})
	go func() {
		defer close(done)
		for b := range full {
			if perr == nil {
				for i := 0; i+b.width <= len(b.vals); i += b.width {
					if perr = process(b.vals[i : i+b.width]); perr != nil {
						stop.Store(true)
						break
					}
				}
			}
			clear(b.vals)
			b.vals = b.vals[:0]
			free <- b
		}
	}()
	var cur *batch
	err := rawQuery(a.ctx, a.conn, query, args, func(vals []driver.Value) error {
		if cur == nil {
			select {
			case cur = <-free:
			default:
				cur = &batch{vals: make([]driver.Value, 0, per*len(vals)), width: len(vals)}
			}
		}
		for _, v := range vals {
			if b, ok := v.([]byte); ok {
				v = string(b) // the driver may reuse the bytes
			}
			cur.vals = append(cur.vals, v)
		}
		if len(cur.vals) == cap(cur.vals) {
			if stop.Load() {
				return errPipeline
			}
			full <- cur
			cur = nil
		}
		return nil
	})
	if cur != nil && len(cur.vals) > 0 {
		full <- cur
	}
	close(full)
	<-done
	if perr != nil {
		return perr
	}
	return err
}

var errPipeline = errors.New("row processing stopped")

var errUnlistedSide = errors.New("row on an unlisted side")

// fallback is a value whose rounded form SQLite's printf computes.
type fallback struct {
	col *column
	d   int
	row int
	v   any
}

// roundInSQL has SQLite round the values roundSignificant could not be sure of.
func (a *audit) roundInSQL(fb []fallback) error {
	stmts := map[int]*sql.Stmt{}
	defer func() {
		for _, st := range stmts {
			st.Close()
		}
	}()
	for _, f := range fb {
		st, ok := stmts[f.d]
		if !ok {
			var err error
			if st, err = a.conn.PrepareContext(a.ctx, "SELECT "+RoundSignificantSQL("?", f.d)); err != nil {
				return err
			}
			stmts[f.d] = st
		}
		var s string
		if err := st.QueryRowContext(a.ctx, f.v).Scan(&s); err != nil {
			return fmt.Errorf("round %v to %d significant digits: %w", f.v, f.d, err)
		}
		f.col.rounded[f.d][f.row] = s
	}
	return nil
}

func asString(v any) string {
	switch x := v.(type) {
	case string:
		return x
	case []byte:
		return string(x)
	case nil:
		return ""
	}
	return fmt.Sprint(v)
}

// reserve makes room for n rows in the storage the column's type uses.
func (c *column) reserve(n int) {
	c.null = make([]bool, 0, n)
	switch {
	case c.roundOnly > 0:
		c.num = make([]float64, 0, n)
		c.ints = make([]int64, 0, n)
		c.ro = make([]string, 0, n)
	case c.SQLType == "TEXT":
		c.str = make([]string, 0, n)
	default:
		c.num = make([]float64, 0, n)
		c.ints = make([]int64, 0, n)
	}
}

func (c *column) add(v any) {
	c.null = append(c.null, v == nil)
	switch c.SQLType {
	case "TEXT":
		s := ""
		switch x := v.(type) {
		case string:
			s = x
		case []byte:
			s = string(x)
		case int64:
			s = strconv.FormatInt(x, 10)
		case float64:
			s = strconv.FormatFloat(x, 'g', -1, 64)
		}
		c.str = append(c.str, s)
	default:
		f, i := math.NaN(), int64(0)
		switch x := v.(type) {
		case int64:
			f, i = float64(x), x
		case float64:
			f, i = x, int64(x)
		case bool:
			if x {
				f, i = 1, 1
			} else {
				f, i = 0, 0
			}
		case string:
			if p, err := strconv.ParseFloat(x, 64); err == nil {
				f, i = p, int64(p)
			}
		}
		c.num = append(c.num, f)
		c.ints = append(c.ints, i)
	}
}

// validateData refuses a label with fewer than two classes and an all-empty text column.
func (a *audit) validateData(run []*Check) error {
	if a.label != "" {
		c := a.data[a.label]
		distinct := map[string]bool{}
		for i := range a.rowID {
			if !c.null[i] {
				distinct[c.repr(i)] = true
				if len(distinct) > 1 {
					break
				}
			}
		}
		if len(distinct) < 2 {
			return inputf("--label: column %q has %d distinct value(s) on the split's rows; a label needs at least two classes", a.label, len(distinct))
		}
	}
	for _, t := range a.text {
		c := a.data[t]
		empty := true
		for i := range a.rowID {
			if !c.null[i] && NormalizeShingleText(c.str[i]) != "" {
				empty = false
				break
			}
		}
		if empty {
			return inputf("--text: column %q is empty (NULL, blank or punctuation only) on every row of the split", t)
		}
	}
	return nil
}

// repr renders a value for grouping on raw values: type-tagged.
func (c *column) repr(i int) string {
	if c.null[i] {
		return "\x00"
	}
	if c.SQLType == "TEXT" {
		return "t" + c.str[i]
	}
	if c.SQLType == "INTEGER" {
		return "i" + strconv.FormatInt(c.ints[i], 10)
	}
	return "r" + strconv.FormatFloat(c.num[i], 'g', -1, 64)
}

func quoteIdent(s string) string  { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }
func quoteString(s string) string { return `'` + strings.ReplaceAll(s, `'`, `''`) + `'` }

// add records a finding of the current check, ordering its rows per side.
func (a *audit) add(f Finding) {
	if !slices.IsSortedFunc(f.Sides, func(x, y SideRows) int { return a.sidePos(x.Side) - a.sidePos(y.Side) }) {
		sort.Slice(f.Sides, func(i, j int) bool { return a.sidePos(f.Sides[i].Side) < a.sidePos(f.Sides[j].Side) })
	}
	f.anchor = math.MaxInt64
	for k := range f.Sides {
		if !slices.IsSorted(f.Sides[k].Rows) {
			slices.Sort(f.Sides[k].Rows)
		}
		if len(f.Sides[k].Rows) > 0 && f.Sides[k].Rows[0] < f.anchor {
			f.anchor = f.Sides[k].Rows[0]
		}
	}
	if len(f.Items) > 0 && f.Items[0].FirstRow < f.anchor {
		f.anchor = f.Items[0].FirstRow
	}
	if f.Evidence == nil {
		f.Evidence = map[string]any{}
	}
	f.Check = a.check.Name
	a.found = append(a.found, f)
}

func (a *audit) sidePos(name string) int {
	for i, s := range a.sides {
		if s.Name == name {
			return i
		}
	}
	return len(a.sides)
}

// groupSides turns row indexes into per-side row ids (sides in split order, rows in the
// order of idx).
func (a *audit) groupSides(idx []int32) []SideRows {
	var one [8]int
	count := one[:0]
	if len(a.sides) > len(one) {
		count = make([]int, len(a.sides))
	} else {
		count = one[:len(a.sides)]
	}
	for _, i := range idx {
		count[a.side[i]]++
	}
	pos := make([]int, len(a.sides)) // index into out, per side
	var out []SideRows
	for s, n := range count {
		if n > 0 {
			pos[s] = len(out)
			out = append(out, SideRows{Side: a.sides[s].Name, Rows: make([]int64, 0, n)})
		}
	}
	for _, i := range idx {
		k := pos[a.side[i]]
		out[k].Rows = append(out[k].Rows, a.rowID[i])
	}
	return out
}

func (a *audit) addQuery(q Query) {
	a.queries = append(a.queries, q)
}

func (a *audit) write(qa QueryAdder, rep *Report) error {
	// Order within a check: as the check emitted (each check sorts its own findings). Findings
	// and their rows go through the driver's statements (a million finding rows is common).
	// A page cache big enough for them keeps SQLite from spilling dirty pages, and syncing its
	// journal, in the middle of the transaction; the connection's setting is restored after.
	var cache int64
	if err := a.conn.QueryRowContext(a.ctx, `PRAGMA cache_size`).Scan(&cache); err != nil {
		return err
	}
	if _, err := a.conn.ExecContext(a.ctx, `PRAGMA cache_size = -262144`); err != nil {
		return err
	}
	defer a.conn.ExecContext(a.ctx, fmt.Sprintf(`PRAGMA cache_size = %d`, cache))
	err := a.conn.Raw(func(dc any) error {
		fb := newRawInserter(a.ctx, dc, `INSERT INTO ss_findings(audit_id, seq, check_name, severity, subject, item, side_a, rows_a, side_b, rows_b, score, message, evidence_json, query_name) VALUES`, 14, 64)
		rb := newRawInserter(a.ctx, dc, `INSERT INTO ss_finding_rows(audit_id, seq, side, row_id) VALUES`, 4, 200)

		for i, f := range rep.Findings {
			seq := int64(i + 1)
			var sideA, sideB driver.Value
			var nA, nB int64
			if f.SideA != "" {
				sideA, nA = f.SideA, int64(f.NA)
			}
			if f.SideB != "" {
				sideB, nB = f.SideB, int64(f.NB)
			}
			if len(f.Sides) > 0 {
				sideA, nA = f.Sides[0].Side, int64(len(f.Sides[0].Rows))
			}
			if len(f.Sides) > 1 {
				sideB, nB = f.Sides[1].Side, int64(len(f.Sides[1].Rows))
			}
			var score driver.Value
			if !math.IsNaN(f.Score) && !math.IsInf(f.Score, 0) {
				score = f.Score
			}
			var item, query driver.Value
			if f.HasItem {
				item = f.Item
			}
			if f.Query != "" {
				query = f.Query
			}
			ev, err := json.Marshal(f.Evidence)
			if err != nil {
				return err
			}
			if err := fb.add(a.auditID, seq, f.Check, string(f.Severity), f.Subject, item, sideA, nA, sideB, nB, score, f.Message, string(ev), query); err != nil {
				return err
			}
			for _, s := range f.Sides {
				for _, r := range s.Rows {
					if err := rb.add(a.auditID, seq, s.Side, r); err != nil {
						return err
					}
				}
			}
			if len(f.Items) > 0 {
				// The finding's items, audit_id and seq as literals (a million items is common).
				ib := newRawInserter(a.ctx, dc, `INSERT INTO ss_finding_items(audit_id, seq, first_row, side, item, rows) VALUES`, 4, 200)
				ib.prefix = fmt.Sprintf("%d,%d", a.auditID, seq)
				for _, it := range f.Items {
					for _, s := range it.Sides {
						if err := ib.add(it.FirstRow, s.Side, it.Name, int64(s.N)); err != nil {
							return err
						}
					}
				}
				if err := ib.flush(); err != nil {
					return err
				}
			}
		}
		if err := fb.flush(); err != nil {
			return err
		}
		return rb.flush()
	})
	if err != nil {
		return err
	}
	opts, _ := json.Marshal(rep.Resolved)
	if _, err := a.conn.ExecContext(a.ctx, `UPDATE ss_audits SET options_json=?, errors=?, warnings=?, infos=? WHERE audit_id=?`,
		string(opts), rep.Count(Error), rep.Count(Warn), rep.Count(Info), a.auditID); err != nil {
		return err
	}
	// The latest audit of a split owns its queries: earlier ones' are replaced.
	if _, err := a.conn.ExecContext(a.ctx, `DELETE FROM ss_audit_queries WHERE subject = ?`, "audit:"+a.split); err != nil {
		return err
	}
	for _, q := range rep.Queries {
		if err := qa.AddAuditQuery(a.ctx, "audit:"+a.split, q.Name, q.Kind, q.Description, q.SQL, q.NeedsTool); err != nil {
			return fmt.Errorf("store query %s: %w", q.Name, err)
		}
	}
	return nil
}

func distinctInts(x []int) []int {
	var out []int
	seen := map[int]bool{}
	for _, v := range x {
		if !seen[v] {
			seen[v] = true
			out = append(out, v)
		}
	}
	return out
}
