package estimate

import (
	"context"
	"errors"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"splitsmith/internal/store"
)

// withSplitFixture builds, by plain SQL per DEVELOPERS.md's table contracts, an ingested table
// "pipes" and a split "s" (sides train/holdout), and runs fn inside the same transaction. The
// one place that knows the fixture's schema.
func withSplitFixture(t *testing.T, fn func(ctx context.Context, tx *store.Tx) error) error {
	t.Helper()
	path := filepath.Join(t.TempDir(), "f.db")
	return store.Update(context.Background(), path, store.Options{}, true, store.Run{Command: "test"}, func(ctx context.Context, tx *store.Tx) error {
		stmts := []string{
			`CREATE TABLE pipes (ss_row INTEGER PRIMARY KEY, ss_source TEXT NOT NULL, ss_line INTEGER NOT NULL, ss_digest INTEGER NOT NULL,
				age REAL, material TEXT, laid DATE, wall REAL, note TEXT)`,
			`INSERT INTO ss_columns (table_name, position, name, logical_type, sql_type, reason, missing) VALUES
				('pipes', 1, 'age', 'REAL', 'REAL', 'test', 1), ('pipes', 2, 'material', 'TEXT', 'TEXT', 'test', 1),
				('pipes', 3, 'laid', 'DATE', 'TEXT', 'test', 0), ('pipes', 4, 'wall', 'REAL', 'REAL', 'test', 1),
				('pipes', 5, 'note', 'TEXT', 'TEXT', 'test', 0)`,
			// rows 1-6 train, 7-9 holdout; row 5 has no label; row 4 no age; row 6 no material;
			// row 9's material "steel" never occurs in training.
			`INSERT INTO pipes VALUES
				(1, 'p.csv', 2, 0, 10, 'pvc', '2001-01-01', 1.5, 'a'),
				(2, 'p.csv', 3, 0, 20, 'iron', '2001-01-01', 2.5, 'b'),
				(3, 'p.csv', 4, 0, 30, 'iron', '2001-01-01', 3.5, 'c'),
				(4, 'p.csv', 5, 0, NULL, 'pvc', '2001-01-01', 4.5, 'd'),
				(5, 'p.csv', 6, 0, 50, 'iron', '2001-01-01', NULL, 'e'),
				(6, 'p.csv', 7, 0, 60, NULL, '2001-01-01', 6.5, 'f'),
				(7, 'p.csv', 8, 0, 70, 'pvc', '2001-01-01', 7.5, 'g'),
				(8, 'p.csv', 9, 0, NULL, 'iron', '2001-01-01', 8.5, 'h'),
				(9, 'p.csv', 10, 0, 90, 'steel', '2001-01-01', 9.5, 'i')`,
			`INSERT INTO ss_splits (split_name, table_name, strategy, spec_json, seed, run_id, table_rows, assigned_rows, dropped_rows, table_seal, summary_json)
				VALUES ('s', 'pipes', 'random', '{}', 1, ` + strconv.FormatInt(tx.RunID, 10) + `, 9, 9, 0, '', '{}')`,
			`INSERT INTO ss_split_sides (split_name, side, position, role, rows, row_fraction, digest, view_name) VALUES
				('s', 'train', 1, 'train', 6, 0.67, '', 's_train'), ('s', 'holdout', 2, 'holdout', 3, 0.33, '', 's_holdout')`,
			`INSERT INTO ss_split_rows (split_name, row_id, side) VALUES ('s', 1, 'train'), ('s', 2, 'train'), ('s', 3, 'train'),
				('s', 4, 'train'), ('s', 5, 'train'), ('s', 6, 'train'), ('s', 7, 'holdout'), ('s', 8, 'holdout'), ('s', 9, 'holdout')`,
		}
		for _, q := range stmts {
			if _, err := tx.Conn.ExecContext(ctx, q); err != nil {
				t.Fatalf("fixture: %v\n%s", err, q)
			}
		}
		return fn(ctx, tx)
	})
}

func TestLoadSplit_Encoding(t *testing.T) {
	err := withSplitFixture(t, func(ctx context.Context, tx *store.Tx) error {
		ld, err := LoadSplit(ctx, tx.Conn, LoadSpec{Split: "s", Label: "wall", Features: []string{"age", "material"}})
		if err != nil {
			t.Fatal(err)
		}
		// Training levels of material: iron 2 (rows 2, 3), pvc 2 (1, 4), (missing) 1 (row 6);
		// row 5 is skipped (no label). Reference: the most frequent, ties by name → iron; the
		// other levels follow by frequency.
		wantCols := []string{"age", "age:missing", "material=pvc", "material=(missing)"}
		if !reflect.DeepEqual(ld.Columns, wantCols) {
			t.Errorf("columns %v, want %v", ld.Columns, wantCols)
		}
		// Training mean of age over rows 1, 2, 3, 6 (4 is missing, 5 has no label): 30.
		wantTrain := []float64{
			10, 0, 1, 0,
			20, 0, 0, 0,
			30, 0, 0, 0,
			30, 1, 1, 0,
			60, 0, 0, 1,
		}
		if !reflect.DeepEqual(ld.Train.X, wantTrain) || !reflect.DeepEqual(ld.Train.Y, []float64{1.5, 2.5, 3.5, 4.5, 6.5}) {
			t.Errorf("train X %v Y %v", ld.Train.X, ld.Train.Y)
		}
		wantHold := []float64{70, 0, 1, 0, 30, 1, 0, 0, 90, 0, 0, 0}
		if !reflect.DeepEqual(ld.Holdout.X, wantHold) || !reflect.DeepEqual(ld.Holdout.Rows, []int64{7, 8, 9}) {
			t.Errorf("holdout X %v rows %v", ld.Holdout.X, ld.Holdout.Rows)
		}
		if ld.DroppedLabel != 1 || ld.UnseenLevels != 1 {
			t.Errorf("dropped %d, unseen %d; want 1, 1", ld.DroppedLabel, ld.UnseenLevels)
		}
		if !reflect.DeepEqual(ld.Train.Groups, []int{-1, LinearOnly, 0, 0}) {
			t.Errorf("groups %v", ld.Train.Groups)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

func TestLoadSplit_BadInput(t *testing.T) {
	tests := []struct {
		spec LoadSpec
		want string
	}{
		{LoadSpec{Split: "x", Label: "wall", Features: []string{"age"}}, `split "x": no such split`},
		{LoadSpec{Split: "s", Label: "wall", Features: []string{"agee"}}, `--features "agee": no such column in table pipes (columns: age, material, laid, wall, note)`},
		{LoadSpec{Split: "s", Label: "note", Features: []string{"age"}}, `--label note: column is TEXT`},
		{LoadSpec{Split: "s", Label: "wall", Features: []string{"laid"}}, `--features laid: column is DATE`},
		{LoadSpec{Split: "s", Label: "wall", Features: []string{"wall"}}, `the label cannot also be a feature`},
		{LoadSpec{Split: "s", Label: "wall", Features: []string{"age"}, HoldoutSide: "test"}, `split s: no side "test" (sides: train, holdout)`},
		{LoadSpec{Split: "s", Label: "wall", Features: []string{"age"}, TrainSide: "holdout"}, `cannot be both the training and the holdout side`},
	}
	for _, tt := range tests {
		err := withSplitFixture(t, func(ctx context.Context, tx *store.Tx) error {
			_, err := LoadSplit(ctx, tx.Conn, tt.spec)
			return err
		})
		if err == nil || !strings.Contains(err.Error(), tt.want) || !errors.Is(err, ErrInput) {
			t.Errorf("%+v: err %v, want %q (ErrInput)", tt.spec, err, tt.want)
		}
	}
}
