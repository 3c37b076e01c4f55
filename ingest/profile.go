package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"
)

// ErrProfileUsage marks a profile request that names an unknown table or column: a mistake in
// how the command was called, not in the data.
var ErrProfileUsage = errors.New("profile")

// ProfileOptions say what to profile.
type ProfileOptions struct {
	Table    string
	Key      []string                // columns that should identify a row (duplicate_key check)
	Progress func(done, total int64) // columns done of total; may be nil
}

// Severities, in increasing order.
const (
	SeverityInfo  = "info"
	SeverityWarn  = "warn"
	SeverityError = "error"
)

// Profile thresholds. They are common practice, no source, except Tukey's fences.
const (
	// ConformityShare: a column whose values are at least this share numbers (or dates) is
	// treated as a number (date) column, and its other values are reported.
	ConformityShare = 0.90
	// NearConstantShare: one value covering at least this share of the non-missing values
	// makes a column near-constant.
	NearConstantShare = 0.95
	// MostlyMissingShare: more missing than this is a warning rather than information.
	MostlyMissingShare = 0.50
	maxExamples        = 10 // example values (or groups) kept per finding
	maxExampleLines    = 5  // lines kept per example value
)

// ProfileChecks documents every check: its name, severity rule and what it means. The
// README's table is this list.
var ProfileChecks = []struct{ Name, Severity, Rule string }{
	{"duplicate_key", "error", "--key columns do not identify rows: two or more rows share a key, or a key column is NULL"},
	{"duplicate_rows", "warn", "rows identical in every user column (same ss_digest) as an earlier row"},
	{"rejected_rows", "warn", "rows of this table refused at ingest (ss_rejects, --on-error quarantine)"},
	{"type_conformity", "warn", "at least 90% of a column's values are numbers (or dates) and the rest are not, whatever type the column was stored as"},
	{"case_variants", "warn", "text values that differ only in ASCII letter case or surrounding whitespace"},
	{"constant", "warn", "a column with exactly one distinct non-missing value"},
	{"all_missing", "warn", "a column whose every value is missing"},
	{"missing", "info / warn", "missing values; warn when more than half are missing"},
	{"outliers", "info / warn", "numbers or dates outside Tukey's inner fences Q1 − 1.5·IQR, Q3 + 1.5·IQR (IQR > 0 only); warn when any lie outside the outer fences (3·IQR)"},
	{"near_constant", "info", "one value covers at least 95% of a column's non-missing values"},
	{"id_like", "info", "an INTEGER or TEXT column with a different value on every row: an identifier, not a feature"},
}

// ValueCount is a value with its number of rows.
type ValueCount struct {
	Value any   `json:"value"`
	Count int64 `json:"count"`
}

// Example illustrates a finding: a value (or a duplicate group) with the lines and rows
// where it occurs.
type Example struct {
	Value any     `json:"value,omitempty"`
	Count int64   `json:"count,omitempty"`
	Lines []int64 `json:"lines,omitempty"` // ss_line
	Rows  []int64 `json:"rows,omitempty"`  // ss_row
	Note  string  `json:"note,omitempty"`
}

// ProfileFinding is one data-quality finding.
type ProfileFinding struct {
	Check    string    `json:"check"`
	Severity string    `json:"severity"`
	Column   string    `json:"column,omitempty"` // empty for table-level findings
	Count    int64     `json:"count"`
	Message  string    `json:"message"`
	Examples []Example `json:"examples"`
}

// ColumnProfile is the profile of one user column.
type ColumnProfile struct {
	Position      int          `json:"position"`
	Name          string       `json:"name"`
	LogicalType   string       `json:"logical_type"`
	SQLType       string       `json:"sql_type"`
	Kind          string       `json:"kind"` // number | date | timestamp | boolean | text | empty
	Rows          int64        `json:"rows"`
	Missing       int64        `json:"missing"`
	Distinct      int64        `json:"distinct"`
	Conforming    int64        `json:"conforming"`
	Nonconforming int64        `json:"nonconforming"`
	Min           any          `json:"min"`
	Max           any          `json:"max"`
	Mean          *float64     `json:"mean"`
	SD            *float64     `json:"sd"`
	P05           any          `json:"p05"`
	Q1            any          `json:"q1"`
	Median        any          `json:"median"`
	Q3            any          `json:"q3"`
	P95           any          `json:"p95"`
	FenceLow      any          `json:"fence_low"`
	FenceHigh     any          `json:"fence_high"`
	Outliers      *int64       `json:"outliers"`
	FarOutliers   *int64       `json:"far_outliers"`
	Top           []ValueCount `json:"top_values"`
}

// ProfileResult is a whole table's profile.
type ProfileResult struct {
	Table           string           `json:"table"`
	Rows            int64            `json:"rows"`
	Key             []string         `json:"key"`
	DuplicateRows   int64            `json:"duplicate_rows"`
	DuplicateGroups int64            `json:"duplicate_groups"`
	DuplicateKeys   *int64           `json:"duplicate_keys"`
	RejectedRows    int64            `json:"rejected_rows"`
	Columns         []ColumnProfile  `json:"columns"`
	Findings        []ProfileFinding `json:"findings"`
}

// Counts returns the number of findings of each severity.
func (r *ProfileResult) Counts() (errs, warns, infos int) {
	for _, f := range r.Findings {
		switch f.Severity {
		case SeverityError:
			errs++
		case SeverityWarn:
			warns++
		default:
			infos++
		}
	}
	return
}

// Worst returns the highest severity among the findings ("" when there are none).
func (r *ProfileResult) Worst() string {
	e, w, i := r.Counts()
	switch {
	case e > 0:
		return SeverityError
	case w > 0:
		return SeverityWarn
	case i > 0:
		return SeverityInfo
	}
	return ""
}

type profColumn struct {
	pos                    int
	name, logical, sqlType string
}

func profQuote(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// Profile computes the profile of an ingested table (one listed in ss_columns) on conn,
// reading only. An unknown table or --key column gives an error wrapping ErrProfileUsage.
func Profile(ctx context.Context, conn *sql.Conn, opts ProfileOptions) (*ProfileResult, error) {
	cols, err := profColumns(ctx, conn, opts.Table)
	if err != nil {
		return nil, err
	}
	byName := map[string]bool{}
	for _, c := range cols {
		byName[c.name] = true
	}
	seenKey := map[string]bool{}
	for _, k := range opts.Key {
		if !byName[k] {
			return nil, fmt.Errorf("%w: --key: table %q has no column %q", ErrProfileUsage, opts.Table, k)
		}
		if seenKey[k] {
			return nil, fmt.Errorf("%w: --key: column %q given twice", ErrProfileUsage, k)
		}
		seenKey[k] = true
	}
	t := profQuote(opts.Table)
	res := &ProfileResult{Table: opts.Table, Key: append([]string{}, opts.Key...)}
	if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM `+t).Scan(&res.Rows); err != nil {
		return nil, fmt.Errorf("profile %s: %w", opts.Table, err)
	}
	total := int64(len(cols) + 1)
	for i, c := range cols {
		cp, fs, err := profileColumn(ctx, conn, t, res.Rows, c)
		if err != nil {
			return nil, fmt.Errorf("profile %s.%s: %w", opts.Table, c.name, err)
		}
		res.Columns = append(res.Columns, cp)
		res.Findings = append(res.Findings, fs...)
		if opts.Progress != nil {
			opts.Progress(int64(i+1), total)
		}
	}
	fs, err := profileTable(ctx, conn, t, res)
	if err != nil {
		return nil, fmt.Errorf("profile %s: %w", opts.Table, err)
	}
	res.Findings = append(fs, res.Findings...)
	sortFindings(res.Findings)
	if opts.Progress != nil {
		opts.Progress(total, total)
	}
	return res, nil
}

// sortFindings orders findings by severity (error first), then table-level before column
// findings, column position as found, then check name: a stable, deterministic order.
func sortFindings(fs []ProfileFinding) {
	rank := map[string]int{SeverityError: 0, SeverityWarn: 1, SeverityInfo: 2}
	sort.SliceStable(fs, func(i, j int) bool {
		if rank[fs[i].Severity] != rank[fs[j].Severity] {
			return rank[fs[i].Severity] < rank[fs[j].Severity]
		}
		return (fs[i].Column == "") && (fs[j].Column != "")
	})
}

func profColumns(ctx context.Context, conn *sql.Conn, table string) ([]profColumn, error) {
	rows, err := conn.QueryContext(ctx, `SELECT position, name, logical_type, sql_type FROM ss_columns WHERE table_name = ? ORDER BY position`, table)
	if err != nil {
		return nil, fmt.Errorf("profile %s: %w", table, err)
	}
	defer rows.Close()
	var cols []profColumn
	for rows.Next() {
		var c profColumn
		if err := rows.Scan(&c.pos, &c.name, &c.logical, &c.sqlType); err != nil {
			return nil, err
		}
		cols = append(cols, c)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	if len(cols) > 0 {
		return cols, nil
	}
	var names []string
	trows, err := conn.QueryContext(ctx, `SELECT DISTINCT table_name FROM ss_columns ORDER BY 1`)
	if err != nil {
		return nil, err
	}
	defer trows.Close()
	for trows.Next() {
		var n string
		trows.Scan(&n)
		names = append(names, n)
	}
	have := "no table has been ingested yet"
	if len(names) > 0 {
		have = "ingested tables: " + strings.Join(names, ", ")
	}
	var exists int
	conn.QueryRowContext(ctx, `SELECT count(*) FROM sqlite_schema WHERE type IN ('table','view') AND name = ?`, table).Scan(&exists)
	if exists > 0 {
		return nil, fmt.Errorf("%w: --table: %q was not loaded by splitsmith ingest (%s)", ErrProfileUsage, table, have)
	}
	return nil, fmt.Errorf("%w: --table: unknown table %q (%s)", ErrProfileUsage, table, have)
}

// Value kinds of one value, as the conformity check classifies it.
const (
	kindNumber    = "number"
	kindDate      = "date"
	kindTimestamp = "timestamp"
	kindBoolean   = "boolean"
	kindText      = "text"
	kindEmpty     = "empty"
)

// profNumber parses a plain decimal number as typed data would hold it ("12", "-0.5",
// "1e3"); it refuses NaN, Inf, hex, "7,4" and surrounding spaces.
func profNumber(s string) (float64, bool) {
	if s == "" || len(s) > 40 {
		return 0, false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= '0' && c <= '9' || c == '.' || c == '-' || c == '+' || c == 'e' || c == 'E') {
			return 0, false
		}
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, false
	}
	return v, true
}

// profDate parses YYYY-MM-DD (a real calendar day) and returns days since 1970-01-01.
func profDate(s string) (float64, bool) {
	if len(s) != 10 || s[4] != '-' || s[7] != '-' {
		return 0, false
	}
	t, err := time.Parse("2006-01-02", s)
	if err != nil {
		return 0, false
	}
	return float64(t.Unix() / 86400), true
}

// profTimestamp parses an RFC 3339 timestamp with or without zone and returns Unix seconds.
func profTimestamp(s string) (float64, bool) {
	if len(s) < 19 || s[10] != 'T' && s[10] != ' ' {
		return 0, false
	}
	for _, layout := range []string{time.RFC3339Nano, "2006-01-02T15:04:05.999999999", "2006-01-02 15:04:05.999999999", "2006-01-02 15:04:05Z07:00"} {
		if t, err := time.Parse(layout, s); err == nil {
			return float64(t.UnixNano()) / 1e9, true
		}
	}
	return 0, false
}

func kindOfLogical(logical string) string {
	switch logical {
	case "INTEGER", "REAL":
		return kindNumber
	case "BOOLEAN":
		return kindBoolean
	case "DATE":
		return kindDate
	case "TIMESTAMP":
		return kindTimestamp
	}
	return kindText
}

// profScalar converts a value of the given kind to a number for ordering statistics.
func profScalar(kind string, v any) (float64, bool) {
	switch x := v.(type) {
	case int64:
		if kind == kindNumber || kind == kindBoolean {
			return float64(x), true
		}
	case float64:
		if kind == kindNumber && !math.IsInf(x, 0) && !math.IsNaN(x) {
			return x, true
		}
	case string:
		switch kind {
		case kindNumber:
			return profNumber(x)
		case kindDate:
			return profDate(x)
		case kindTimestamp:
			return profTimestamp(x)
		}
	case []byte:
		return profScalar(kind, string(x))
	}
	return 0, false
}

// profRender turns an ordering statistic back into a value of its kind.
func profRender(kind string, f float64) any {
	switch kind {
	case kindDate:
		return time.Unix(int64(math.Round(f))*86400, 0).UTC().Format("2006-01-02")
	case kindTimestamp:
		sec, frac := math.Modf(f)
		return time.Unix(int64(sec), int64(frac*1e9)).UTC().Format(time.RFC3339)
	}
	return f
}

// profVal is one conforming value as an ordering statistic, with its input line.
type profVal struct {
	x    float64
	line int64
}

type profBad struct {
	n     int64
	lines []int64
}

// typedPass streams a column once and returns its conforming values (as numbers) with their
// lines, and its nonconforming values with counts and first lines.
func typedPass(ctx context.Context, conn *sql.Conn, t, q, kind string) (vals []profVal, bads map[string]*profBad, nonMissing int64, err error) {
	bads = map[string]*profBad{}
	err = rawQuery(ctx, conn, `SELECT ss_line, `+q+` FROM `+t+` WHERE `+q+` IS NOT NULL ORDER BY ss_row`, 2, func(row []driver.Value) (bool, error) {
		line, _ := row[0].(int64)
		v := row[1]
		nonMissing++
		if f, ok := profScalar(kind, v); ok {
			vals = append(vals, profVal{f, line})
			return true, nil
		}
		key := cellText(v)
		b := bads[key]
		if b == nil {
			if len(bads) >= 10000 { // bound memory on pathological columns
				key = "(other values)"
			}
			if b = bads[key]; b == nil {
				b = &profBad{}
				bads[key] = b
			}
		}
		b.n++
		if len(b.lines) < maxExampleLines {
			b.lines = append(b.lines, line)
		}
		return true, nil
	})
	return vals, bads, nonMissing, err
}

// profileColumn profiles one column with one streaming pass for typed columns and two or
// three for TEXT columns (hashes, then the strings shown, then numbers if it holds numbers).
func profileColumn(ctx context.Context, conn *sql.Conn, t string, nrows int64, c profColumn) (ColumnProfile, []ProfileFinding, error) {
	q := profQuote(c.name)
	cp := ColumnProfile{Position: c.pos, Name: c.name, LogicalType: c.logical, SQLType: c.sqlType, Rows: nrows, Top: []ValueCount{}}
	var fs []ProfileFinding
	add := func(f ProfileFinding) {
		f.Column = c.name
		if f.Examples == nil {
			f.Examples = []Example{}
		}
		fs = append(fs, f)
	}
	cp.Kind = kindOfLogical(c.logical)
	var (
		nonMissing int64
		vals       []profVal
		bads       map[string]*profBad
		ps         *profScan
		fetchedV   map[uint64]fetched
		err        error
	)
	if cp.Kind == kindText {
		// TEXT: hash pass (distinct, top values, case variants, what the values parse as).
		if ps, err = scanColumn(ctx, conn, t, q, true); err != nil {
			return cp, nil, err
		}
		nonMissing = ps.nonMissing
		cp.Distinct = ps.distinct
		switch share := float64(nonMissing) * ConformityShare; {
		case nonMissing == 0:
		case float64(ps.nNum) >= share:
			cp.Kind = kindNumber
		case float64(ps.nDate) >= share:
			cp.Kind = kindDate
		case float64(ps.nTS) >= share:
			cp.Kind = kindTimestamp
		}
		want := map[uint64]bool{}
		for _, tc := range ps.top {
			want[tc.h] = true
		}
		for _, cs := range ps.caseExamples {
			for _, m := range cs.members {
				want[m.h] = true
			}
		}
		if fetchedV, err = fetchValues(ctx, conn, t, q, want); err != nil {
			return cp, nil, err
		}
		for _, tc := range ps.top {
			cp.Top = append(cp.Top, ValueCount{Value: fetchedV[tc.h].value, Count: tc.n})
		}
		if cp.Kind != kindText {
			if vals, bads, _, err = typedPass(ctx, conn, t, q, cp.Kind); err != nil {
				return cp, nil, err
			}
		}
	} else {
		if vals, bads, nonMissing, err = typedPass(ctx, conn, t, q, cp.Kind); err != nil {
			return cp, nil, err
		}
	}
	if nonMissing == 0 {
		cp.Kind = kindEmpty
	}
	cp.Missing = nrows - nonMissing
	slices.SortFunc(vals, func(a, b profVal) int {
		if a.x != b.x {
			if a.x < b.x {
				return -1
			}
			return 1
		}
		return int(a.line - b.line)
	})
	if ps == nil {
		// Typed column: distinct and top values from the sorted values (and the odd ones).
		var top []ValueCount
		for i := 0; i < len(vals); {
			j := i + 1
			for j < len(vals) && vals[j].x == vals[i].x {
				j++
			}
			cp.Distinct++
			top = append(top, ValueCount{Value: profTopValue(c.logical, cp.Kind, vals[i].x), Count: int64(j - i)})
			if len(top) > 64 {
				sortValueCounts(top)
				top = top[:5]
			}
			i = j
		}
		for k, b := range bads {
			cp.Distinct++
			top = append(top, ValueCount{Value: k, Count: b.n})
		}
		sortValueCounts(top)
		if len(top) > 5 {
			top = top[:5]
		}
		cp.Top = append(cp.Top, top...)
	}
	sortValueCounts(cp.Top)
	if cp.Kind != kindText && cp.Kind != kindEmpty {
		cp.Conforming = int64(len(vals))
		cp.Nonconforming = nonMissing - cp.Conforming
	} else {
		cp.Conforming = nonMissing
	}

	// Type conformity: the values that are not of the column's kind, with their lines.
	if cp.Nonconforming > 0 {
		keys := make([]string, 0, len(bads))
		for k := range bads {
			keys = append(keys, k)
		}
		sort.Slice(keys, func(i, j int) bool {
			if bads[keys[i]].n != bads[keys[j]].n {
				return bads[keys[i]].n > bads[keys[j]].n
			}
			return keys[i] < keys[j]
		})
		var ex []Example
		var parts []string
		for i, k := range keys {
			if i == maxExamples {
				parts = append(parts, fmt.Sprintf("and %d more", len(keys)-i))
				break
			}
			b := bads[k]
			ex = append(ex, Example{Value: k, Count: b.n, Lines: b.lines})
			parts = append(parts, fmt.Sprintf("%q (%s)", k, linesText(b.lines, b.n)))
		}
		add(ProfileFinding{Check: "type_conformity", Severity: SeverityWarn, Count: cp.Nonconforming, Examples: ex,
			Message: fmt.Sprintf("%d of %d values (%.1f%%) are %ss, stored as %s; %d are not: %s",
				cp.Conforming, nonMissing, 100*float64(cp.Conforming)/float64(nonMissing), cp.Kind, c.logical, cp.Nonconforming, strings.Join(parts, ", "))})
	}

	// Missing values.
	switch {
	case nonMissing == 0 && nrows > 0:
		add(ProfileFinding{Check: "all_missing", Severity: SeverityWarn, Count: nrows, Message: fmt.Sprintf("all %d values are missing", nrows)})
	case cp.Missing > 0:
		sev := SeverityInfo
		if float64(cp.Missing) > MostlyMissingShare*float64(nrows) {
			sev = SeverityWarn
		}
		ex, err := profLinesWhere(ctx, conn, t, q+` IS NULL`)
		if err != nil {
			return cp, nil, err
		}
		add(ProfileFinding{Check: "missing", Severity: sev, Count: cp.Missing, Examples: []Example{ex},
			Message: fmt.Sprintf("%d of %d values (%.1f%%) are missing (%s)", cp.Missing, nrows, 100*float64(cp.Missing)/float64(nrows), linesText(ex.Lines, cp.Missing))})
	}

	// Constant, near-constant, identifier-like.
	if nonMissing > 0 && len(cp.Top) > 0 {
		if cp.Distinct == 1 {
			add(ProfileFinding{Check: "constant", Severity: SeverityWarn, Count: nonMissing, Examples: []Example{{Value: cp.Top[0].Value, Count: nonMissing}},
				Message: fmt.Sprintf("every non-missing value is %s", cellText(cp.Top[0].Value))})
		} else if top := cp.Top[0]; float64(top.Count) >= NearConstantShare*float64(nonMissing) {
			add(ProfileFinding{Check: "near_constant", Severity: SeverityInfo, Count: top.Count, Examples: []Example{{Value: top.Value, Count: top.Count}},
				Message: fmt.Sprintf("%s covers %d of %d non-missing values (%.1f%%)", cellText(top.Value), top.Count, nonMissing, 100*float64(top.Count)/float64(nonMissing))})
		}
		if cp.Distinct == nrows && nrows > 1 && (c.logical == "INTEGER" || c.logical == "TEXT") && cp.Kind != kindDate && cp.Kind != kindTimestamp {
			add(ProfileFinding{Check: "id_like", Severity: SeverityInfo, Count: nrows,
				Message: fmt.Sprintf("every one of the %d rows has a different value: an identifier, not a feature", nrows)})
		}
	}

	// Ordering statistics of the conforming values.
	if len(vals) > 0 {
		xs := make([]float64, len(vals))
		for i, v := range vals {
			xs[i] = v.x
		}
		cp.Min, cp.Max = profRender(cp.Kind, xs[0]), profRender(cp.Kind, xs[len(xs)-1])
		if cp.Kind == kindNumber || cp.Kind == kindBoolean {
			m, s := MeanSD(xs)
			cp.Mean = &m
			if !math.IsNaN(s) {
				cp.SD = &s
			}
		}
		cp.P05 = profRender(cp.Kind, Quantile(xs, 0.05))
		q1, q3 := Quantile(xs, 0.25), Quantile(xs, 0.75)
		cp.Q1, cp.Median, cp.Q3 = profRender(cp.Kind, q1), profRender(cp.Kind, Quantile(xs, 0.5)), profRender(cp.Kind, q3)
		cp.P95 = profRender(cp.Kind, Quantile(xs, 0.95))
		if cp.Kind != kindBoolean && q3 > q1 {
			inner, outer := TukeyFences(q1, q3, 1.5), TukeyFences(q1, q3, 3)
			cp.FenceLow, cp.FenceHigh = profRender(cp.Kind, inner.Low), profRender(cp.Kind, inner.High)
			var nOut, nFar int64
			for _, x := range xs {
				if inner.Outside(x) {
					nOut++
					if outer.Outside(x) {
						nFar++
					}
				}
			}
			cp.Outliers, cp.FarOutliers = &nOut, &nFar
			if nOut > 0 {
				add(profOutlierFinding(cp, inner, nOut, nFar, vals, Quantile(xs, 0.5)))
			}
		}
	}

	// Values differing only in ASCII case or surrounding whitespace.
	if ps != nil && ps.caseSets > 0 {
		add(caseFinding(ps, fetchedV))
	}
	return cp, fs, nil
}

// profTopValue renders a typed column's value for its top-values list.
func profTopValue(logical, kind string, x float64) any {
	if logical == "INTEGER" || logical == "BOOLEAN" {
		return int64(x)
	}
	return profRender(kind, x)
}

// profOutlierFinding lists the most extreme outliers (farthest from the median first),
// taken from both ends of the sorted values.
func profOutlierFinding(cp ColumnProfile, inner Fences, nOut, nFar int64, sorted []profVal, med float64) ProfileFinding {
	var ex []Example
	var parts []string
	i, j := 0, len(sorted)-1
	for len(ex) < maxExamples && i <= j {
		var v profVal
		lo, hi := sorted[i], sorted[j]
		loOut, hiOut := inner.Outside(lo.x), inner.Outside(hi.x)
		switch {
		case loOut && (!hiOut || med-lo.x >= hi.x-med):
			v = lo
			i++
		case hiOut:
			v = hi
			j--
		default:
			i = j + 1
			continue
		}
		shown := profTopValue(cp.LogicalType, cp.Kind, v.x)
		ex = append(ex, Example{Value: shown, Lines: []int64{v.line}})
		parts = append(parts, fmt.Sprintf("%s (line %d)", cellText(shown), v.line))
	}
	sev := SeverityInfo
	far := ""
	if nFar > 0 {
		sev = SeverityWarn
		far = fmt.Sprintf(", %d beyond the outer fences (3 IQR)", nFar)
	}
	return ProfileFinding{Check: "outliers", Severity: sev, Count: nOut, Examples: ex,
		Message: fmt.Sprintf("%d values outside Tukey's fences %s .. %s (1.5 IQR)%s; most extreme: %s",
			nOut, statText(profRender(cp.Kind, inner.Low)), statText(profRender(cp.Kind, inner.High)), far, strings.Join(parts, ", "))}
}

// caseFinding reports sets of values equal after ASCII lower-casing and trimming
// surrounding whitespace.
func caseFinding(ps *profScan, vals map[uint64]fetched) ProfileFinding {
	var ex []Example
	var parts []string
	sets := slices.Clone(ps.caseExamples)
	normOf := func(cs caseSet) string { return profNorm(cellText(vals[cs.members[0].h].value)) }
	slices.SortStableFunc(sets, func(a, b caseSet) int {
		if a.rows != b.rows {
			if a.rows > b.rows {
				return -1
			}
			return 1
		}
		return strings.Compare(normOf(a), normOf(b))
	})
	for _, cs := range sets {
		vcs := make([]ValueCount, 0, len(cs.members))
		first := map[any]int64{}
		for _, m := range cs.members {
			f := vals[m.h]
			vcs = append(vcs, ValueCount{Value: f.value, Count: m.n})
			first[f.value] = f.line
		}
		sortValueCounts(vcs)
		var spell []string
		for _, vc := range vcs {
			spell = append(spell, fmt.Sprintf("%q ×%d", cellText(vc.Value), vc.Count))
			ex = append(ex, Example{Value: vc.Value, Count: vc.Count, Lines: []int64{first[vc.Value]}, Note: "set " + strconv.Quote(profNorm(cellText(vc.Value)))})
		}
		parts = append(parts, strings.Join(spell, " / "))
	}
	more := ""
	if n := ps.caseSets - int64(len(ps.caseExamples)); n > 0 {
		more = fmt.Sprintf("; and %d more sets", n)
	}
	return ProfileFinding{Check: "case_variants", Severity: SeverityWarn, Count: ps.caseRows, Examples: ex,
		Message: fmt.Sprintf("%d rows spell a value differently from its most common form, by case or surrounding whitespace only (%d sets): %s%s", ps.caseRows, ps.caseSets, strings.Join(parts, "; "), more)}
}

// sortValueCounts orders by count descending, then value (numbers numerically, before text).
func sortValueCounts(v []ValueCount) {
	sort.SliceStable(v, func(i, j int) bool {
		if v[i].Count != v[j].Count {
			return v[i].Count > v[j].Count
		}
		a, aok := profScalar(kindNumber, v[i].Value)
		b, bok := profScalar(kindNumber, v[j].Value)
		_, ai := v[i].Value.(string)
		_, bi := v[j].Value.(string)
		if aok && bok && !ai && !bi {
			return a < b
		}
		if ai != bi {
			return !ai
		}
		return cellText(v[i].Value) < cellText(v[j].Value)
	})
}

// profLinesWhere returns up to maxExampleLines lines of rows matching cond.
func profLinesWhere(ctx context.Context, conn *sql.Conn, t, cond string) (Example, error) {
	rows, err := conn.QueryContext(ctx, `SELECT ss_line FROM `+t+` WHERE `+cond+` ORDER BY ss_row LIMIT `+strconv.Itoa(maxExampleLines))
	if err != nil {
		return Example{}, err
	}
	defer rows.Close()
	var ex Example
	for rows.Next() {
		var l int64
		if err := rows.Scan(&l); err != nil {
			return ex, err
		}
		ex.Lines = append(ex.Lines, l)
	}
	return ex, rows.Err()
}

func linesText(lines []int64, n int64) string {
	var b strings.Builder
	if len(lines) == 1 {
		b.WriteString("line ")
	} else {
		b.WriteString("lines ")
	}
	for i, l := range lines {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.FormatInt(l, 10))
	}
	if n > int64(len(lines)) {
		b.WriteString(", …")
	}
	return b.String()
}

// statText renders a computed statistic with 6 significant digits (stored values keep all).
func statText(v any) string {
	if f, ok := v.(float64); ok {
		return strconv.FormatFloat(f, 'g', 6, 64)
	}
	return cellText(v)
}

// cellText renders a stored value for a message.
func cellText(v any) string {
	switch x := v.(type) {
	case nil:
		return "NULL"
	case string:
		return x
	case []byte:
		return string(x)
	case int64:
		return strconv.FormatInt(x, 10)
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	}
	return fmt.Sprint(v)
}

// profileTable runs the table-level checks: exact duplicates, duplicate keys, rejects.
func profileTable(ctx context.Context, conn *sql.Conn, t string, res *ProfileResult) ([]ProfileFinding, error) {
	var fs []ProfileFinding

	// Exact duplicates by content digest: every group, in order of its first row.
	rows, err := conn.QueryContext(ctx, `SELECT ss_digest, ss_row, ss_line FROM `+t+` WHERE ss_digest IN
		(SELECT ss_digest FROM `+t+` GROUP BY ss_digest HAVING count(*) > 1) ORDER BY ss_digest, ss_row`)
	if err != nil {
		return nil, err
	}
	type group struct {
		first       int64
		rows, lines []int64
		n           int64
	}
	var groups []*group
	var cur *group
	var curDigest int64
	for rows.Next() {
		var d, r, l int64
		if err := rows.Scan(&d, &r, &l); err != nil {
			rows.Close()
			return nil, err
		}
		if cur == nil || d != curDigest {
			cur = &group{first: r}
			curDigest = d
			groups = append(groups, cur)
		}
		cur.n++
		if len(cur.rows) < maxExamples {
			cur.rows = append(cur.rows, r)
			cur.lines = append(cur.lines, l)
		}
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	sort.Slice(groups, func(i, j int) bool { return groups[i].first < groups[j].first })
	for _, g := range groups {
		res.DuplicateRows += g.n - 1
	}
	res.DuplicateGroups = int64(len(groups))
	if len(groups) > 0 {
		var ex []Example
		var parts []string
		for i, g := range groups {
			if i == maxExamples {
				break
			}
			ex = append(ex, Example{Count: g.n, Rows: g.rows, Lines: g.lines})
			parts = append(parts, "lines "+joinInts(g.lines))
		}
		fs = append(fs, ProfileFinding{Check: "duplicate_rows", Severity: SeverityWarn, Count: res.DuplicateRows, Examples: ex,
			Message: fmt.Sprintf("%d rows repeat an earlier row exactly (same ss_digest; %d sets of copies); first: %s", res.DuplicateRows, len(groups), strings.Join(parts, "; "))})
	}

	// Duplicate and missing keys.
	if len(res.Key) > 0 {
		var qs, nulls []string
		for _, k := range res.Key {
			qs = append(qs, profQuote(k))
			nulls = append(nulls, profQuote(k)+` IS NULL`)
		}
		list := strings.Join(qs, ", ")
		var dupRows, dupGroups int64
		if err := conn.QueryRowContext(ctx, `SELECT count(*), coalesce(sum(n), 0) FROM (SELECT count(*) AS n FROM `+t+` WHERE NOT (`+strings.Join(nulls, " OR ")+`) GROUP BY `+list+` HAVING count(*) > 1)`).Scan(&dupGroups, &dupRows); err != nil {
			return nil, err
		}
		res.DuplicateKeys = &dupRows
		keyName := strings.Join(res.Key, ", ")
		if dupGroups > 0 {
			krows, err := conn.QueryContext(ctx, `SELECT `+list+`, count(*), json_group_array(ss_line), json_group_array(ss_row) FROM (SELECT * FROM `+t+` ORDER BY ss_row) WHERE NOT (`+strings.Join(nulls, " OR ")+`)
				GROUP BY `+list+` HAVING count(*) > 1 ORDER BY min(ss_row) LIMIT `+strconv.Itoa(maxExamples))
			if err != nil {
				return nil, err
			}
			var ex []Example
			var parts []string
			for krows.Next() {
				vals := make([]any, len(res.Key))
				ptrs := make([]any, 0, len(res.Key)+3)
				for i := range vals {
					ptrs = append(ptrs, &vals[i])
				}
				var n int64
				var lj, rj string
				ptrs = append(ptrs, &n, &lj, &rj)
				if err := krows.Scan(ptrs...); err != nil {
					krows.Close()
					return nil, err
				}
				var lines, rws []int64
				json.Unmarshal([]byte(lj), &lines)
				json.Unmarshal([]byte(rj), &rws)
				if len(lines) > maxExampleLines {
					lines, rws = lines[:maxExampleLines], rws[:maxExampleLines]
				}
				var vs []string
				for _, v := range vals {
					vs = append(vs, cellText(v))
				}
				var kv any = strings.Join(vs, ", ")
				if len(vals) == 1 {
					kv = vals[0]
					if b, ok := kv.([]byte); ok {
						kv = string(b)
					}
				}
				ex = append(ex, Example{Value: kv, Count: n, Lines: lines, Rows: rws})
				parts = append(parts, fmt.Sprintf("(%s) ×%d (%s)", strings.Join(vs, ", "), n, linesText(lines, n)))
			}
			krows.Close()
			if err := krows.Err(); err != nil {
				return nil, err
			}
			fs = append(fs, ProfileFinding{Check: "duplicate_key", Severity: SeverityError, Count: dupRows, Examples: ex,
				Message: fmt.Sprintf("key (%s) is not unique: %d values occur more than once, on %d rows; first: %s", keyName, dupGroups, dupRows, strings.Join(parts, "; "))})
		}
		var nullKeys int64
		if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM `+t+` WHERE `+strings.Join(nulls, " OR ")).Scan(&nullKeys); err != nil {
			return nil, err
		}
		if nullKeys > 0 {
			ex, err := profLinesWhere(ctx, conn, t, strings.Join(nulls, " OR "))
			if err != nil {
				return nil, err
			}
			fs = append(fs, ProfileFinding{Check: "duplicate_key", Severity: SeverityError, Count: nullKeys, Examples: []Example{ex},
				Message: fmt.Sprintf("key (%s) is missing on %d rows (%s)", keyName, nullKeys, linesText(ex.Lines, nullKeys))})
		}
	}

	// Rows refused at ingest.
	if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM ss_rejects WHERE table_name = ?`, res.Table).Scan(&res.RejectedRows); err != nil {
		return nil, err
	}
	if res.RejectedRows > 0 {
		rrows, err := conn.QueryContext(ctx, `SELECT source, line, coalesce(column_name, ''), coalesce(value, ''), reason FROM ss_rejects WHERE table_name = ? ORDER BY reject_id LIMIT `+strconv.Itoa(maxExamples), res.Table)
		if err != nil {
			return nil, err
		}
		var ex []Example
		var parts []string
		for rrows.Next() {
			var src, col, val, reason string
			var line int64
			if err := rrows.Scan(&src, &line, &col, &val, &reason); err != nil {
				rrows.Close()
				return nil, err
			}
			ex = append(ex, Example{Value: val, Lines: []int64{line}, Note: fmt.Sprintf("%s:%d: %s", src, line, reason)})
			if len(parts) < 3 {
				parts = append(parts, fmt.Sprintf("%s:%d: %s", src, line, reason))
			}
		}
		rrows.Close()
		if err := rrows.Err(); err != nil {
			return nil, err
		}
		fs = append(fs, ProfileFinding{Check: "rejected_rows", Severity: SeverityWarn, Count: res.RejectedRows, Examples: ex,
			Message: fmt.Sprintf("%d rows were refused at ingest (see ss_rejects): %s", res.RejectedRows, strings.Join(parts, "; "))})
	}
	for i := range fs {
		if fs[i].Examples == nil {
			fs[i].Examples = []Example{}
		}
	}
	return fs, nil
}

func joinInts(xs []int64) string {
	s := make([]string, len(xs))
	for i, x := range xs {
		s[i] = strconv.FormatInt(x, 10)
	}
	return strings.Join(s, ", ")
}

// StoreProfile replaces the stored profile of res.Table with res (ss_profiles,
// ss_profile_columns, ss_profile_findings), on conn inside the caller's transaction.
func StoreProfile(ctx context.Context, conn *sql.Conn, runID int64, res *ProfileResult) error {
	for _, tbl := range []string{"ss_profile_findings", "ss_profile_columns", "ss_profiles"} {
		if _, err := conn.ExecContext(ctx, `DELETE FROM `+tbl+` WHERE table_name = ?`, res.Table); err != nil {
			return fmt.Errorf("store profile %s: %w", res.Table, err)
		}
	}
	e, w, i := res.Counts()
	key, _ := json.Marshal(res.Key)
	var dk any
	if res.DuplicateKeys != nil {
		dk = *res.DuplicateKeys
	}
	if _, err := conn.ExecContext(ctx, `INSERT INTO ss_profiles(table_name, run_id, rows, key_columns, duplicate_rows, duplicate_groups, duplicate_keys, rejected_rows, findings_error, findings_warn, findings_info)
		VALUES(?,?,?,?,?,?,?,?,?,?,?)`, res.Table, runID, res.Rows, string(key), res.DuplicateRows, res.DuplicateGroups, dk, res.RejectedRows, e, w, i); err != nil {
		return fmt.Errorf("store profile %s: %w", res.Table, err)
	}
	for _, c := range res.Columns {
		top, _ := json.Marshal(c.Top)
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_profile_columns(table_name, position, name, logical_type, sql_type, kind, rows, missing, distinct_values,
			conforming, nonconforming, min_value, max_value, mean, sd, p05, q1, median, q3, p95, fence_low, fence_high, outliers, far_outliers, top_values_json)
			VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)`,
			res.Table, c.Position, c.Name, c.LogicalType, c.SQLType, c.Kind, c.Rows, c.Missing, c.Distinct, c.Conforming, c.Nonconforming,
			c.Min, c.Max, fptr(c.Mean), fptr(c.SD), c.P05, c.Q1, c.Median, c.Q3, c.P95, c.FenceLow, c.FenceHigh, iptr(c.Outliers), iptr(c.FarOutliers), string(top)); err != nil {
			return fmt.Errorf("store profile %s.%s: %w", res.Table, c.Name, err)
		}
	}
	for _, f := range res.Findings {
		ex, _ := json.Marshal(f.Examples)
		var col any
		if f.Column != "" {
			col = f.Column
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_profile_findings(run_id, table_name, column_name, check_name, severity, count, message, examples_json) VALUES(?,?,?,?,?,?,?,?)`,
			runID, res.Table, col, f.Check, f.Severity, f.Count, f.Message, string(ex)); err != nil {
			return fmt.Errorf("store profile %s: %w", res.Table, err)
		}
	}
	return nil
}

func fptr(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}

func iptr(p *int64) any {
	if p == nil {
		return nil
	}
	return *p
}
