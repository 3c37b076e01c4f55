package splits

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// Options are the settings of one Split call that are not part of the spec.
type Options struct {
	RunID    int64 // the ss_runs row of the writing command
	Replace  bool  // replace an existing split of the same name
	Progress func(done, total int64)
}

// SideSummary is one side as stored in ss_split_sides.
type SideSummary struct {
	Side           string   `json:"side"`
	Position       int      `json:"position"`
	Role           string   `json:"role"`
	TargetFraction *float64 `json:"target_fraction"`
	Rows           int      `json:"rows"`
	Groups         *int     `json:"groups"`
	RowFraction    float64  `json:"row_fraction"`
	GroupFraction  *float64 `json:"group_fraction"`
	Digest         string   `json:"digest"`
	View           string   `json:"view"`
	TimeMin        *string  `json:"time_min"`
	TimeMax        *string  `json:"time_max"`
}

// FoldSummary is one fold as stored in ss_split_folds.
type FoldSummary struct {
	Fold        int  `json:"fold"`
	TrainRows   int  `json:"train_rows"`
	TestRows    int  `json:"test_rows"`
	TrainGroups *int `json:"train_groups"`
	TestGroups  *int `json:"test_groups"`
	Excluded    int  `json:"excluded_rows"`
}

// AuditQuery is SQL an auditor runs to recompute part of a split; a "check" query returns no
// rows while the split holds.
type AuditQuery struct {
	Name, Kind, Description, SQL string
	NeedsTool                    bool
}

// Result is what Split made.
type Result struct {
	Spec         *Spec
	SpecJSON     string
	Strategy     string
	TableRows    int
	Assigned     int
	Dropped      map[string]int // reason -> rows
	Sides        []SideSummary
	Folds        []FoldSummary
	FoldScheme   string
	Notes        map[string]any
	TableSeal    string
	AuditQueries []AuditQuery
}

// Split computes and stores a split of spec.Table inside the caller's transaction: rows of
// ss_splits, ss_split_sides, ss_split_rows and ss_split_folds, one view per side (listed in
// ss_objects), and returns the summary with the audit queries for the caller to store. On
// error nothing has been written that the caller's rollback does not undo.
func Split(ctx context.Context, conn *sql.Conn, spec *Spec, opts Options) (*Result, error) {
	if err := spec.Resolve(); err != nil {
		return nil, err
	}
	var exists int
	if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM ss_splits WHERE split_name = ?`, spec.Name).Scan(&exists); err != nil {
		return nil, fmt.Errorf("split %s: %w", spec.Name, err)
	}
	if exists > 0 && !opts.Replace {
		return nil, fieldErr("name", "split %q exists; give --replace to replace it (or choose another name)", spec.Name)
	}
	t, err := ReadTable(ctx, conn, spec.Table)
	if err != nil {
		return nil, err
	}
	d, err := load(ctx, conn, t, spec, opts.Progress)
	if err != nil {
		return nil, err
	}
	if d.n == 0 {
		return nil, fieldErr("table", "table %q has no rows to split", spec.Table)
	}
	a, err := compute(d, spec)
	if err != nil {
		return nil, err
	}
	if exists > 0 {
		if err := Drop(ctx, conn, spec.Name); err != nil {
			return nil, err
		}
	}
	views := make([]string, len(a.sides))
	for i, s := range a.sides {
		views[i] = spec.Name + "_" + s
		if err := checkViewName(ctx, conn, views[i]); err != nil {
			return nil, err
		}
	}
	res := &Result{Spec: spec, SpecJSON: spec.CanonicalJSON(), Strategy: spec.Strategy(), TableRows: d.n, Dropped: map[string]int{}, Notes: a.notes, FoldScheme: spec.FoldScheme()}
	// Counts (seals below, from one radix sort of every digest with its side).
	ns := len(a.sides)
	sideRows := make([]int, ns)
	var entSeen [][]bool // per side: entities with a row on it
	entCount := make([]int, ns)
	if d.entity != nil {
		entSeen = make([][]bool, ns)
		for i := range entSeen {
			entSeen[i] = make([]bool, len(d.entKey))
		}
	}
	tmin := make([]int, ns)
	tmax := make([]int, ns)
	for i := range a.sides {
		tmin[i], tmax[i] = -1, -1
	}
	for i := 0; i < d.n; i++ {
		s := a.side[i]
		if s < 0 {
			res.Dropped[reasonNames[a.reason[i]]]++
			continue
		}
		res.Assigned++
		sideRows[s]++
		if d.entity != nil {
			if e := d.entity[i]; !entSeen[s][e] {
				entSeen[s][e] = true
				entCount[s]++
			}
		}
		if d.t != nil {
			if tmin[s] < 0 || d.t[i] < d.t[tmin[s]] {
				tmin[s] = i
			}
			if tmax[s] < 0 || d.t[i] > d.t[tmax[s]] {
				tmax[s] = i
			}
		}
	}
	entSeen = nil
	for i, sd := range a.sides {
		if sideRows[i] == 0 {
			why := ""
			if spec.Time != "" {
				why = " (rows with equal times stay together, and gap, purge and span drop rows)"
			}
			return nil, fieldErr("sides", "side %q would get no rows of the %d in table %s%s; change the fractions, cutoff or policies", sd, d.n, spec.Table, why)
		}
	}
	// Seals are computed on another goroutine while the rows are written (both only read
	// d.digest and a.side); write waits for them before storing them.
	var tableSeal string
	var sideSeal []string
	sealed := make(chan struct{})
	go func() {
		defer close(sealed)
		tableSeal, sideSeal = sideSeals(d.digest, a.side, ns)
	}()
	waitSeals := func() {
		<-sealed
		res.TableSeal = tableSeal
		for i := range res.Sides {
			res.Sides[i].Digest = sideSeal[i]
		}
	}
	totalEnts := 0
	for _, c := range entCount {
		totalEnts += c
	}
	for i, s := range a.sides {
		ss := SideSummary{Side: s, Position: i + 1, Role: spec.Role(s), Rows: sideRows[i], View: views[i]}
		if i < len(spec.Sides) && spec.Strategy() != "adopted" {
			f := spec.Sides[i].Fraction
			ss.TargetFraction = &f
		}
		if res.Assigned > 0 {
			ss.RowFraction = float64(ss.Rows) / float64(res.Assigned)
		}
		if d.entity != nil {
			g := entCount[i]
			ss.Groups = &g
			gf := 0.0
			if totalEnts > 0 {
				gf = float64(g) / float64(totalEnts)
			}
			ss.GroupFraction = &gf
		}
		if tmin[i] >= 0 {
			lo, err := rawTime(ctx, conn, t, spec.Time, d.rowID[tmin[i]])
			if err != nil {
				return nil, err
			}
			hi, err := rawTime(ctx, conn, t, spec.Time, d.rowID[tmax[i]])
			if err != nil {
				return nil, err
			}
			ss.TimeMin, ss.TimeMax = &lo, &hi
		}
		res.Sides = append(res.Sides, ss)
	}
	for _, f := range a.folds {
		fs := FoldSummary{Fold: f.fold, TrainRows: f.trainRows, TestRows: f.testRows, Excluded: f.excluded}
		if f.hasGroups {
			tg, sg := f.trainGroups, f.testGroups
			fs.TrainGroups, fs.TestGroups = &tg, &sg
		}
		res.Folds = append(res.Folds, fs)
	}
	if err := write(ctx, conn, spec, t, d, a, res, opts, waitSeals); err != nil {
		return nil, err
	}
	res.AuditQueries = auditQueries(spec, t, res)
	return res, nil
}

// rawTime reads a row's time value as stored, for the side's time_min and time_max.
func rawTime(ctx context.Context, conn *sql.Conn, t *Table, col string, id int64) (string, error) {
	var v any
	if err := conn.QueryRowContext(ctx, `SELECT `+quoteIdent(col)+` FROM `+quoteIdent(t.Name)+` WHERE ss_row = ?`, id).Scan(&v); err != nil {
		return "", fmt.Errorf("split: time of row %d: %w", id, err)
	}
	return label(v), nil
}

// checkViewName refuses a view name that a user table or view already has.
func checkViewName(ctx context.Context, conn *sql.Conn, name string) error {
	var typ string
	err := conn.QueryRowContext(ctx, `SELECT type FROM sqlite_schema WHERE name = ? COLLATE NOCASE`, name).Scan(&typ)
	if errors.Is(err, sql.ErrNoRows) {
		return nil
	}
	if err != nil {
		return err
	}
	var owner string
	if err := conn.QueryRowContext(ctx, `SELECT owner FROM ss_objects WHERE name = ? COLLATE NOCASE`, name).Scan(&owner); err == nil {
		return fieldErr("name", "the side view %q would replace the view of %s; choose another split or side name", name, owner)
	}
	return fieldErr("name", "the side view %q would collide with the user %s %q; choose another split or side name", name, typ, name)
}

func nullInt(p *int) any {
	if p == nil {
		return nil
	}
	return int64(*p)
}

// write stores the split: ss_split_rows first (while waitSeals' seals are computed), then
// ss_splits, ss_split_sides with the seals, the views and ss_split_folds.
func write(ctx context.Context, conn *sql.Conn, spec *Spec, t *Table, d *data, a *assignment, res *Result, opts Options, waitSeals func()) error {
	if err := writeRows(ctx, conn, spec.Name, d, a, opts.Progress); err != nil {
		return fmt.Errorf("split %s: %w", spec.Name, err)
	}
	waitSeals()
	groups, _ := json.Marshal(orEmpty(spec.Group))
	notes, _ := json.Marshal(res.Notes)
	var timeCol, scheme, folds any
	if spec.Time != "" {
		timeCol = spec.Time
	}
	if s := spec.FoldScheme(); s != "" {
		scheme = s
		folds = int64(len(a.folds))
	}
	if _, err := conn.ExecContext(ctx, `INSERT INTO ss_splits(split_name, table_name, strategy, spec_json, seed, run_id, table_rows, assigned_rows, dropped_rows, group_columns, time_column, folds, fold_scheme, table_seal, summary_json) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)`,
		spec.Name, t.Name, res.Strategy, res.SpecJSON, int64(spec.Seed), opts.RunID, d.n, res.Assigned, d.n-res.Assigned, string(groups), timeCol, folds, scheme, res.TableSeal, string(notes)); err != nil {
		return fmt.Errorf("split %s: %w", spec.Name, err)
	}
	for _, s := range res.Sides {
		var tf, gf any
		if s.TargetFraction != nil {
			tf = *s.TargetFraction
		}
		if s.GroupFraction != nil {
			gf = *s.GroupFraction
		}
		var lo, hi any
		if s.TimeMin != nil {
			lo, hi = *s.TimeMin, *s.TimeMax
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_split_sides(split_name, side, position, role, target_fraction, rows, groups, row_fraction, group_fraction, digest, view_name, time_min, time_max) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?)`,
			spec.Name, s.Side, s.Position, s.Role, tf, s.Rows, nullInt(s.Groups), s.RowFraction, gf, s.Digest, s.View, lo, hi); err != nil {
			return fmt.Errorf("split %s: %w", spec.Name, err)
		}
		q := fmt.Sprintf(`CREATE VIEW %s AS SELECT t.* FROM %s AS t JOIN ss_split_rows AS r ON r.row_id = t.ss_row WHERE r.split_name = %s AND r.side = %s`,
			quoteIdent(s.View), quoteIdent(t.Name), quoteString(spec.Name), quoteString(s.Side))
		if _, err := conn.ExecContext(ctx, q); err != nil {
			return fmt.Errorf("split %s: view %s: %w", spec.Name, s.View, err)
		}
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_objects(name, type, owner, run_id) VALUES(?, 'view', ?, ?)`, s.View, "split:"+spec.Name, opts.RunID); err != nil {
			return fmt.Errorf("split %s: %w", spec.Name, err)
		}
	}
	for _, f := range res.Folds {
		if _, err := conn.ExecContext(ctx, `INSERT INTO ss_split_folds(split_name, fold, train_rows, test_rows, train_groups, test_groups, excluded_rows) VALUES(?,?,?,?,?,?,?)`,
			spec.Name, f.Fold, f.TrainRows, f.TestRows, nullInt(f.TrainGroups), nullInt(f.TestGroups), f.Excluded); err != nil {
			return fmt.Errorf("split %s: %w", spec.Name, err)
		}
	}
	return nil
}

func orEmpty(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// writeBatch is how many ss_split_rows one multi-row INSERT carries.
const writeBatch = 200

// writeRows inserts ss_split_rows with multi-row INSERTs, prepared once and executed through
// the driver's own statement interface. The split name is a literal of the statement and only
// the columns that vary are parameters (row_id and side, plus fold, train_from and reason when
// the split has them).
func writeRows(ctx context.Context, conn *sql.Conn, name string, d *data, a *assignment, progress func(done, total int64)) error {
	hasFold, hasTF, hasReason := a.fold != nil, a.trainFrom != nil, false
	for _, r := range a.reason {
		if r != reasonNone {
			hasReason = true
			break
		}
	}
	tuple := "(" + quoteString(name) + ",?,?"
	per := 2
	for _, on := range []struct {
		has bool
		def string
	}{{hasFold, "NULL"}, {hasTF, "NULL"}, {hasReason, "''"}} {
		if on.has {
			tuple += ",?"
			per++
		} else {
			tuple += "," + on.def
		}
	}
	tuple += "),"
	stmt := func(n int) string {
		return `INSERT INTO ss_split_rows(split_name, row_id, side, fold, train_from, reason) VALUES` + strings.TrimSuffix(strings.Repeat(tuple, n), ",")
	}
	sides := make([]driver.Value, len(a.sides))
	for i, s := range a.sides {
		sides[i] = s
	}
	reasons := make([]driver.Value, len(reasonNames))
	for i, r := range reasonNames {
		reasons[i] = r
	}
	var empty driver.Value = ""
	// Small integers boxed once: folds and train_from are 1..K.
	small := make([]driver.Value, 1024)
	for i := range small {
		small[i] = int64(i)
	}
	boxInt := func(v int32) driver.Value {
		if v <= 0 {
			return nil
		}
		if int(v) < len(small) {
			return small[v]
		}
		return int64(v)
	}
	if pk := newPacking(name, d, a, hasReason); pk != nil {
		return writeRowsPacked(ctx, conn, pk, d, a, progress)
	}
	return conn.Raw(func(dc any) error {
		full, err := rawPrepare(ctx, dc, stmt(writeBatch))
		if err != nil {
			return err
		}
		defer full.Close()
		args := make([]driver.NamedValue, per*writeBatch)
		for i := range args {
			args[i].Ordinal = i + 1
		}
		k := 0
		for i := 0; i < d.n; i++ {
			side := empty
			if a.side[i] >= 0 {
				side = sides[a.side[i]]
			}
			args[k].Value = d.rowID[i]
			args[k+1].Value = side
			k += 2
			if hasFold {
				args[k].Value = boxInt(a.fold[i])
				k++
			}
			if hasTF {
				args[k].Value = boxInt(a.trainFrom[i])
				k++
			}
			if hasReason {
				args[k].Value = reasons[a.reason[i]]
				k++
			}
			if k == len(args) {
				if err := full.Exec(ctx, args); err != nil {
					return err
				}
				k = 0
				if progress != nil && (i+1)%65536 < writeBatch {
					progress(int64(i+1), int64(d.n))
				}
			}
		}
		if k > 0 {
			st, err := rawPrepare(ctx, dc, stmt(k/per))
			if err != nil {
				return err
			}
			defer st.Close()
			return st.Exec(ctx, args[:k])
		}
		return nil
	})
}

// packing writes each ss_split_rows row through one bound integer: row_id, side, fold,
// train_from and reason packed into bit fields that the INSERT statement unpacks with plain
// SQL (shifts, masks, CASE over the side and reason names) from a VALUES list of anonymous
// parameters (numbered ones cost the driver a linear name lookup each). One integer
// parameter per row instead of two to five, and no text parameters to copy, cuts the
// driver's binding work; the stored values are the same. Used when every row_id fits
// beside the fields.
type packing struct {
	sel                     string // the SELECT list over column1
	shift                   uint   // row_id is v >> shift
	foldAt, tfAt, reasonAt  uint
	hasFold, hasTF, hasReas bool
}

func bitsFor(n int) uint { // bits to hold 0..n-1
	b := uint(0)
	for (1 << b) < n {
		b++
	}
	return max(b, 1)
}

func newPacking(name string, d *data, a *assignment, hasReason bool) *packing {
	pk := &packing{hasFold: a.fold != nil, hasTF: a.trainFrom != nil, hasReas: hasReason}
	bs := bitsFor(len(a.sides) + 1) // 0 = dropped (side '')
	maxF, maxT := int32(0), int32(0)
	for i := 0; i < d.n; i++ {
		if pk.hasFold {
			maxF = max(maxF, a.fold[i])
		}
		if pk.hasTF {
			maxT = max(maxT, a.trainFrom[i])
		}
	}
	if maxF < 0 || maxT < 0 {
		return nil
	}
	at := bs
	var bf, bt, br uint
	if pk.hasFold {
		bf = bitsFor(int(maxF) + 1)
	}
	pk.foldAt = at
	at += bf
	if pk.hasTF {
		bt = bitsFor(int(maxT) + 1)
	}
	pk.tfAt = at
	at += bt
	if hasReason {
		br = bitsFor(len(reasonNames))
	}
	pk.reasonAt = at
	at += br
	pk.shift = at
	if at > 20 {
		return nil
	}
	for i := 0; i < d.n; i++ {
		if id := d.rowID[i]; id < 0 || id >= 1<<(62-at) {
			return nil
		}
	}
	const p = "column1"
	var b strings.Builder
	fmt.Fprintf(&b, "%s,%s>>%d,CASE %s&%d", quoteString(name), p, at, p, (1<<bs)-1)
	for i, sd := range a.sides {
		fmt.Fprintf(&b, " WHEN %d THEN %s", i+1, quoteString(sd))
	}
	b.WriteString(" ELSE '' END,")
	if pk.hasFold {
		fmt.Fprintf(&b, "nullif(%s>>%d&%d,0),", p, pk.foldAt, (1<<bf)-1)
	} else {
		b.WriteString("NULL,")
	}
	if pk.hasTF {
		fmt.Fprintf(&b, "nullif(%s>>%d&%d,0),", p, pk.tfAt, (1<<bt)-1)
	} else {
		b.WriteString("NULL,")
	}
	if hasReason {
		fmt.Fprintf(&b, "CASE %s>>%d&%d", p, pk.reasonAt, (1<<br)-1)
		for i, r := range reasonNames {
			if r != "" {
				fmt.Fprintf(&b, " WHEN %d THEN %s", i, quoteString(r))
			}
		}
		b.WriteString(" ELSE '' END")
	} else {
		b.WriteString("''")
	}
	pk.sel = b.String()
	return pk
}

func (pk *packing) stmt(n int) string {
	return `INSERT INTO ss_split_rows(split_name, row_id, side, fold, train_from, reason) SELECT ` + pk.sel +
		` FROM (VALUES` + strings.TrimSuffix(strings.Repeat("(?),", n), ",") + `)`
}

func (pk *packing) value(d *data, a *assignment, i int) int64 {
	v := uint64(d.rowID[i]) << pk.shift
	v |= uint64(a.side[i] + 1)
	if pk.hasFold && a.fold[i] > 0 {
		v |= uint64(a.fold[i]) << pk.foldAt
	}
	if pk.hasTF && a.trainFrom[i] > 0 {
		v |= uint64(a.trainFrom[i]) << pk.tfAt
	}
	if pk.hasReas {
		v |= uint64(a.reason[i]) << pk.reasonAt
	}
	return int64(v)
}

func writeRowsPacked(ctx context.Context, conn *sql.Conn, pk *packing, d *data, a *assignment, progress func(done, total int64)) error {
	return conn.Raw(func(dc any) error {
		full, err := rawPrepare(ctx, dc, pk.stmt(writeBatch))
		if err != nil {
			return err
		}
		defer full.Close()
		args := make([]driver.NamedValue, writeBatch)
		for i := range args {
			args[i].Ordinal = i + 1
		}
		k := 0
		for i := 0; i < d.n; i++ {
			args[k].Value = pk.value(d, a, i)
			k++
			if k == len(args) {
				if err := full.Exec(ctx, args); err != nil {
					return err
				}
				k = 0
				if progress != nil && (i+1)%65536 < writeBatch {
					progress(int64(i+1), int64(d.n))
				}
			}
		}
		if k > 0 {
			st, err := rawPrepare(ctx, dc, pk.stmt(k))
			if err != nil {
				return err
			}
			defer st.Close()
			return st.Exec(ctx, args[:k])
		}
		return nil
	})
}

// Drop removes a split: its rows, sides, folds, views, ss_objects entries and audit queries.
func Drop(ctx context.Context, conn *sql.Conn, name string) error {
	rows, err := conn.QueryContext(ctx, `SELECT name FROM ss_objects WHERE owner = ? ORDER BY name`, "split:"+name)
	if err != nil {
		return fmt.Errorf("drop split %s: %w", name, err)
	}
	var views []string
	for rows.Next() {
		var v string
		rows.Scan(&v)
		views = append(views, v)
	}
	rows.Close()
	for _, v := range views {
		if _, err := conn.ExecContext(ctx, `DROP VIEW IF EXISTS `+quoteIdent(v)); err != nil {
			return fmt.Errorf("drop split %s: %w", name, err)
		}
	}
	for _, q := range []string{
		`DELETE FROM ss_objects WHERE owner = ?`,
		`DELETE FROM ss_audit_queries WHERE subject = ?`,
	} {
		if _, err := conn.ExecContext(ctx, q, "split:"+name); err != nil {
			return fmt.Errorf("drop split %s: %w", name, err)
		}
	}
	for _, q := range []string{
		`DELETE FROM ss_split_rows WHERE split_name = ?`,
		`DELETE FROM ss_split_folds WHERE split_name = ?`,
		`DELETE FROM ss_split_sides WHERE split_name = ?`,
		`DELETE FROM ss_splits WHERE split_name = ?`,
	} {
		if _, err := conn.ExecContext(ctx, q, name); err != nil {
			return fmt.Errorf("drop split %s: %w", name, err)
		}
	}
	return nil
}

func fmtFloat(f float64) string {
	if math.IsInf(f, 0) {
		return "inf"
	}
	return strconv.FormatFloat(f, 'g', -1, 64)
}

var _ = sort.Strings
