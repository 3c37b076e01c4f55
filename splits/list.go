package splits

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
)

// Read returns a stored split's summary (as Split returned it, without audit queries).
func Read(ctx context.Context, conn *sql.Conn, name string) (*Result, error) {
	var specJSON, strategy, seal, notes string
	var scheme sql.NullString
	var rows, assigned int
	err := conn.QueryRowContext(ctx, `SELECT spec_json, strategy, table_rows, assigned_rows, fold_scheme, table_seal, summary_json FROM ss_splits WHERE split_name = ?`, name).
		Scan(&specJSON, &strategy, &rows, &assigned, &scheme, &seal, &notes)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fieldErr("split", "no split %q (list them with: splitsmith splits)", name)
	}
	if err != nil {
		return nil, fmt.Errorf("read split %s: %w", name, err)
	}
	spec, err := SpecFromJSON(specJSON)
	if err != nil {
		return nil, err
	}
	r := &Result{Spec: spec, SpecJSON: specJSON, Strategy: strategy, TableRows: rows, Assigned: assigned, FoldScheme: scheme.String, TableSeal: seal, Dropped: map[string]int{}, Notes: map[string]any{}}
	json.Unmarshal([]byte(notes), &r.Notes)
	q, err := conn.QueryContext(ctx, `SELECT reason, count(*) FROM ss_split_rows WHERE split_name = ? AND side = '' GROUP BY reason ORDER BY reason`, name)
	if err != nil {
		return nil, err
	}
	for q.Next() {
		var k string
		var n int
		q.Scan(&k, &n)
		r.Dropped[k] = n
	}
	q.Close()
	q, err = conn.QueryContext(ctx, `SELECT side, position, role, target_fraction, rows, groups, row_fraction, group_fraction, digest, view_name, time_min, time_max FROM ss_split_sides WHERE split_name = ? ORDER BY position`, name)
	if err != nil {
		return nil, err
	}
	for q.Next() {
		var s SideSummary
		var tf, gf sql.NullFloat64
		var g sql.NullInt64
		var lo, hi sql.NullString
		if err := q.Scan(&s.Side, &s.Position, &s.Role, &tf, &s.Rows, &g, &s.RowFraction, &gf, &s.Digest, &s.View, &lo, &hi); err != nil {
			q.Close()
			return nil, err
		}
		if tf.Valid {
			s.TargetFraction = &tf.Float64
		}
		if gf.Valid {
			s.GroupFraction = &gf.Float64
		}
		if g.Valid {
			x := int(g.Int64)
			s.Groups = &x
		}
		if lo.Valid {
			s.TimeMin, s.TimeMax = &lo.String, &hi.String
		}
		r.Sides = append(r.Sides, s)
	}
	q.Close()
	q, err = conn.QueryContext(ctx, `SELECT fold, train_rows, test_rows, train_groups, test_groups, excluded_rows FROM ss_split_folds WHERE split_name = ? ORDER BY fold`, name)
	if err != nil {
		return nil, err
	}
	for q.Next() {
		var f FoldSummary
		var tg, sg sql.NullInt64
		q.Scan(&f.Fold, &f.TrainRows, &f.TestRows, &tg, &sg, &f.Excluded)
		if tg.Valid {
			a, b := int(tg.Int64), int(sg.Int64)
			f.TrainGroups, f.TestGroups = &a, &b
		}
		r.Folds = append(r.Folds, f)
	}
	q.Close()
	return r, nil
}

// Names lists the stored splits by name.
func Names(ctx context.Context, conn *sql.Conn) ([]string, error) {
	q, err := conn.QueryContext(ctx, `SELECT split_name FROM ss_splits ORDER BY split_name`)
	if err != nil {
		return nil, err
	}
	defer q.Close()
	var out []string
	for q.Next() {
		var n string
		q.Scan(&n)
		out = append(out, n)
	}
	return out, q.Err()
}
