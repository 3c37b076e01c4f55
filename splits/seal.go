package splits

import (
	"context"
	"database/sql"
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
	// Seals and counts.
	perSide := make([][]int64, len(a.sides))
	ents := make([]map[int32]bool, len(a.sides))
	tmin := make([]int, len(a.sides))
	tmax := make([]int, len(a.sides))
	for i := range a.sides {
		ents[i] = map[int32]bool{}
		tmin[i], tmax[i] = -1, -1
	}
	all := make([]int64, 0, d.n)
	for i := 0; i < d.n; i++ {
		all = append(all, d.digest[i])
		s := a.side[i]
		if s < 0 {
			res.Dropped[reasonNames[a.reason[i]]]++
			continue
		}
		res.Assigned++
		perSide[s] = append(perSide[s], d.digest[i])
		if d.entity != nil {
			ents[s][d.entity[i]] = true
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
	for i, sd := range a.sides {
		if len(perSide[i]) == 0 {
			why := ""
			if spec.Time != "" {
				why = " (rows with equal times stay together, and gap, purge and span drop rows)"
			}
			return nil, fieldErr("sides", "side %q would get no rows of the %d in table %s%s; change the fractions, cutoff or policies", sd, d.n, spec.Table, why)
		}
	}
	res.TableSeal = Seal(all)
	totalEnts := 0
	for i := range ents {
		totalEnts += len(ents[i])
	}
	for i, s := range a.sides {
		ss := SideSummary{Side: s, Position: i + 1, Role: spec.Role(s), Rows: len(perSide[i]), Digest: Seal(perSide[i]), View: views[i]}
		if i < len(spec.Sides) && spec.Strategy() != "adopted" {
			f := spec.Sides[i].Fraction
			ss.TargetFraction = &f
		}
		if res.Assigned > 0 {
			ss.RowFraction = float64(ss.Rows) / float64(res.Assigned)
		}
		if d.entity != nil {
			g := len(ents[i])
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
	if err := write(ctx, conn, spec, t, d, a, res, opts); err != nil {
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

func write(ctx context.Context, conn *sql.Conn, spec *Spec, t *Table, d *data, a *assignment, res *Result, opts Options) error {
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
	if err := writeRows(ctx, conn, spec.Name, d, a, opts.Progress); err != nil {
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

// writeRows inserts ss_split_rows in batches of multi-row INSERTs. The split name is a
// literal of the statement and only the columns that vary are parameters (row_id and side,
// plus fold, train_from and reason when the split has them), which halves the binding work.
func writeRows(ctx context.Context, conn *sql.Conn, name string, d *data, a *assignment, progress func(done, total int64)) error {
	const batch = 1000
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
	full, err := conn.PrepareContext(ctx, stmt(batch))
	if err != nil {
		return err
	}
	defer full.Close()
	args := make([]any, 0, per*batch)
	flush := func(st *sql.Stmt) error {
		if st == nil {
			s, err := conn.PrepareContext(ctx, stmt(len(args)/per))
			if err != nil {
				return err
			}
			defer s.Close()
			st = s
		}
		_, err := st.ExecContext(ctx, args...)
		args = args[:0]
		return err
	}
	sides := make([]any, len(a.sides))
	for i, s := range a.sides {
		sides[i] = s
	}
	reasons := make([]any, len(reasonNames))
	for i, r := range reasonNames {
		reasons[i] = r
	}
	var empty any = ""
	for i := 0; i < d.n; i++ {
		side := empty
		if a.side[i] >= 0 {
			side = sides[a.side[i]]
		}
		args = append(args, d.rowID[i], side)
		if hasFold {
			var fold any
			if a.fold[i] > 0 {
				fold = int64(a.fold[i])
			}
			args = append(args, fold)
		}
		if hasTF {
			var tf any
			if a.trainFrom[i] > 0 {
				tf = int64(a.trainFrom[i])
			}
			args = append(args, tf)
		}
		if hasReason {
			args = append(args, reasons[a.reason[i]])
		}
		if len(args) == per*batch {
			if err := flush(full); err != nil {
				return err
			}
			if progress != nil && (i+1)%65536 < batch {
				progress(int64(i+1), int64(d.n))
			}
		}
	}
	if len(args) > 0 {
		return flush(nil)
	}
	return nil
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
