package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/internal/store"
	"splitsmith/splits"
)

const splitHint = "splitsmith split --db pipes.db --table pipes --name sound --group segment_id --time inspection_date --gap 30d"

type splitOptions struct {
	db       string
	spec     *splits.Spec
	specFile string
	replace  bool
	format   string
}

// specFlags are the flags that define a split spec (refused together with --spec).
var specFlags = []string{"table", "name", "sides", "seed", "key", "stratify", "stratify-mode", "group", "group-nulls", "time",
	"cutoff", "until", "gap", "gap-rows", "label-end", "span", "time-invalid", "folds", "test-size", "from-column", "map", "fold-column", "train-side", "holdout-side"}

func newSplitCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "split",
		Usage: "make a reproducible, sealed train/holdout split (or k folds) of an ingested table",
		Description: `Assigns every row of --table to a side and stores the split as plain rows
(ss_splits, ss_split_sides, ss_split_rows, ss_split_folds), one plain-SQL view per side
(<split>_<side>), a seal digest per side, and audit queries that recompute it.
The side of a row is a pure function of its key (or entity), the seed and the fractions
(the hash specification is in the README), so re-running the same spec gives byte-identical
tables, and appending rows leaves existing rows where they were (random, grouped, hash
stratified, and time splits with --cutoff).

STRATEGIES
   random       default: hash of --key columns (default: the row's content digest, so exact
                duplicate rows land on the same side)
   --stratify   per-stratum proportions within one row of target (--stratify-mode exact,
                hash order; not append-stable) or pure hash (--stratify-mode hash)
   --group      every row of an entity on one side; several columns join rows sharing a
                value in any of them (connected components); --group-nulls own|refuse
   --time       the latest period is held out (by --cutoff, or the fractions in time order);
                --until TIME first drops rows later than TIME (implausible future dates);
                --gap DURATION (30d, 12h) or --gap-rows N drops earlier rows just before it;
                --label-end COL purges rows whose label reaches into the later period;
                with --group, --span drop|earlier|entity handles an entity across the cutoff
   --folds K    k folds within the train side (hash; stratified round-robin; grouped
                balanced); with --time, rolling-origin folds (expanding window, --test-size)
   --from-column COL   adopt an existing assignment (a column, or ss_source for the input
                file: train.csv → train); --map VALUE=SIDE,...; --fold-column adopts folds

ROLES: the side named train is train, holdout (or test) is holdout, others are other;
--train-side/--holdout-side choose. Fold k: test rows are fold = k; train rows are the side's
other folds (rolling: train_from <= k).

Examples:
   splitsmith split --db pipes.db --table pipes --name naive
   splitsmith split --db pipes.db --table pipes --name sound --group segment_id \
       --time inspection_date --gap 90d --span entity
   splitsmith split --db pipes.db --table pipes --name cv --group segment_id --folds 5
   splitsmith split --db pipes.db --spec split.yaml`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "spec", Usage: "read the split from a spec `FILE` (YAML or JSON; TOML when it ends in .toml; version 1)"},
			&cli.StringFlag{Name: "table", Usage: "ingested table `NAME`"},
			&cli.StringFlag{Name: "name", Usage: "split `NAME` (letters, digits, _)"},
			&cli.StringFlag{Name: "sides", Usage: "`SIDE=FRACTION,...` summing to 1 (default train=0.8,holdout=0.2; train=1 with --folds)"},
			seedFlag(),
			&cli.StringFlag{Name: "key", Usage: "`COL,...` hashed for random/stratified splits (default: the row's content digest)"},
			&cli.StringFlag{Name: "stratify", Usage: "stratify by `COL`"},
			&cli.StringFlag{Name: "stratify-mode", Usage: "`MODE`: exact (default) or hash"},
			&cli.StringFlag{Name: "group", Usage: "group `COL,...`: each entity wholly on one side"},
			&cli.StringFlag{Name: "group-nulls", Usage: "`POLICY` for rows whose group values are all NULL: own (default, own entity) or refuse"},
			&cli.StringFlag{Name: "time", Usage: "time `COL` (DATE, TIMESTAMP or number): hold out the latest period"},
			&cli.StringFlag{Name: "cutoff", Usage: "`TIME` at which the later side starts (default: by the fractions)"},
			&cli.StringFlag{Name: "until", Usage: "latest plausible `TIME`: rows whose time is later are dropped (reason after_until) before cutoffs and fractions"},
			&cli.StringFlag{Name: "gap", Usage: "`DURATION` before each cutoff whose rows are dropped (30d, 12h, 1w; a number for a numeric time)"},
			&cli.IntFlag{Name: "gap-rows", Usage: "drop the last `N` rows before each cutoff (or test block) instead"},
			&cli.StringFlag{Name: "label-end", Usage: "`COL` holding when each row's label became known (purge)"},
			&cli.StringFlag{Name: "time-invalid", Usage: "`POLICY` for rows whose time is NULL or unparseable: refuse (default) or drop"},
			&cli.StringFlag{Name: "span", Usage: "`POLICY` for an entity across the cutoff: drop (default), earlier or entity"},
			&cli.IntFlag{Name: "folds", Usage: "make `K` folds"},
			&cli.IntFlag{Name: "test-size", Usage: "rolling folds: `N` rows per test block (default rows/(K+1))"},
			&cli.StringFlag{Name: "from-column", Usage: "adopt sides from `COL` (ss_source: the input file)"},
			&cli.StringFlag{Name: "map", Usage: "`VALUE=SIDE,...` for --from-column"},
			&cli.StringFlag{Name: "fold-column", Usage: "adopt integer folds from `COL`"},
			&cli.StringFlag{Name: "train-side", Usage: "`SIDE` with the train role"},
			&cli.StringFlag{Name: "holdout-side", Usage: "`SIDE` with the holdout role"},
			&cli.BoolFlag{Name: "replace", Usage: "replace an existing split of that name"},
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(splitHint, "unexpected argument %q", cc.Args().First())
			}
			o := splitOptions{db: cc.String("db"), replace: cc.Bool("replace")}
			var err error
			if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
				return err
			}
			if f := cc.String("spec"); f != "" {
				for _, fl := range specFlags {
					if cc.IsSet(fl) {
						return usagef(splitHint, "--%s cannot be combined with --spec: the spec file defines the whole split", fl)
					}
				}
				b, err := os.ReadFile(f)
				if err != nil {
					return usagef(splitHint, "--spec: %v", err)
				}
				o.specFile = f
				if o.spec, err = splits.ParseSpec(b, f); err != nil {
					return asUsage(err, splitHint)
				}
			} else {
				if o.spec, err = specFromFlags(cc); err != nil {
					return err
				}
			}
			return runSplit(cc.Context, cc, o, s)
		},
	}
}

func columnList(cc *cli.Context, flag string) ([]string, error) {
	if !cc.IsSet(flag) {
		return nil, nil
	}
	var out []string
	for _, c := range strings.Split(cc.String(flag), ",") {
		c = strings.TrimSpace(c)
		if c == "" {
			return nil, usagef(splitHint, "--%s: %q has an empty column name", flag, cc.String(flag))
		}
		out = append(out, c)
	}
	return out, nil
}

func specFromFlags(cc *cli.Context) (*splits.Spec, error) {
	sp := &splits.Spec{Version: splits.SpecVersion, Table: cc.String("table"), Name: cc.String("name"), Seed: cc.Uint64("seed"),
		Stratify: cc.String("stratify"), StratifyMode: cc.String("stratify-mode"), GroupNulls: cc.String("group-nulls"),
		Time: cc.String("time"), Cutoff: cc.String("cutoff"), Until: cc.String("until"), Gap: cc.String("gap"), GapRows: cc.Int("gap-rows"),
		LabelEnd: cc.String("label-end"), Span: cc.String("span"), TimeInvalid: cc.String("time-invalid"), Folds: cc.Int("folds"), TestSize: cc.Int("test-size"),
		FromColumn: cc.String("from-column"), FoldColumn: cc.String("fold-column"),
		TrainSide: cc.String("train-side"), HoldoutSide: cc.String("holdout-side")}
	if sp.Table == "" {
		return nil, usagef(splitHint, "--table is required (or give --spec FILE)")
	}
	if sp.Name == "" {
		return nil, usagef(splitHint, "--name is required (or give --spec FILE)")
	}
	var err error
	if cc.IsSet("sides") {
		if sp.Sides, err = splits.ParseSides(cc.String("sides")); err != nil {
			return nil, usagef(splitHint, "--sides: %v", err)
		}
	}
	if cc.IsSet("map") {
		if sp.Map, err = splits.ParseMap(cc.String("map")); err != nil {
			return nil, usagef(splitHint, "--map: %v", err)
		}
	}
	if sp.Key, err = columnList(cc, "key"); err != nil {
		return nil, err
	}
	if sp.Group, err = columnList(cc, "group"); err != nil {
		return nil, err
	}
	return sp, nil
}

// splitErr maps the splits package's errors onto exit codes: spec mistakes are usage errors.
// file names the spec file the spec came from, if any, so the error locates the field in it.
func splitErr(err error, hint string, file ...string) error {
	var fe *splits.FieldError
	if errors.As(err, &fe) {
		if fe.File == "" && len(file) > 0 && file[0] != "" {
			fe.File = file[0]
		}
		return asUsage(err, hint)
	}
	return err
}

func runSplit(ctx context.Context, cc *cli.Context, o splitOptions, s stdio) error {
	prog := newProgress(s.err, "split")
	var res *splits.Result
	err := update(ctx, cc, o.db, false, func(ctx context.Context, tx *store.Tx) error {
		if o.specFile != "" {
			in, err := store.HashFile(o.specFile)
			if err != nil {
				return err
			}
			tx.AddInput(in)
		}
		r, err := splits.Split(ctx, tx.Conn, o.spec, splits.Options{RunID: tx.RunID, Replace: o.replace, Progress: prog.Report})
		prog.Done()
		if err != nil {
			return splitErr(err, splitHint, o.specFile)
		}
		res = r
		subject := "split:" + o.spec.Name
		for _, q := range r.AuditQueries {
			if err := tx.AddAuditQuery(ctx, subject, q.Name, q.Kind, q.Description, q.SQL, q.NeedsTool); err != nil {
				return err
			}
		}
		tx.SetDetail("split", o.spec.Name)
		tx.SetDetail("spec", r.SpecJSON)
		tx.SetDetail("assigned_rows", r.Assigned)
		tx.SetDetail("dropped_rows", r.TableRows-r.Assigned)
		return nil
	})
	if err != nil {
		return err
	}
	if o.format == "json" {
		return writeJSON(s.out, splitJSON(res))
	}
	printSplit(s.out, res)
	return nil
}

func splitJSON(r *splits.Result) map[string]any {
	return map[string]any{"split": r.Spec.Name, "table": r.Spec.Table, "strategy": r.Strategy, "spec": r.Spec,
		"table_rows": r.TableRows, "assigned_rows": r.Assigned, "dropped": r.Dropped, "sides": r.Sides,
		"fold_scheme": r.FoldScheme, "folds": r.Folds, "notes": r.Notes, "table_seal": r.TableSeal}
}

func optF(p *float64) any {
	if p == nil {
		return ""
	}
	return *p
}

func optI(p *int) any {
	if p == nil {
		return ""
	}
	return *p
}

func roundF(p *float64) any {
	if p == nil {
		return ""
	}
	return fmt.Sprintf("%.4f", *p)
}

// printSplit renders a split's summary (split and splits --show share it).
func printSplit(w io.Writer, r *splits.Result) {
	folds := ""
	if r.FoldScheme != "" {
		folds = fmt.Sprintf(", %d folds (%s)", len(r.Folds), r.FoldScheme)
	}
	fmt.Fprintf(w, "split %s: %s split of table %s, seed %d%s\n", r.Spec.Name, r.Strategy, r.Spec.Table, r.Spec.Seed, folds)
	fmt.Fprintf(w, "rows: %d in the table, %d on a side, %d dropped", r.TableRows, r.Assigned, r.TableRows-r.Assigned)
	if len(r.Dropped) > 0 {
		var parts []string
		for _, k := range sortedKeys(r.Dropped) {
			parts = append(parts, fmt.Sprintf("%s %d", k, r.Dropped[k]))
		}
		fmt.Fprintf(w, " (%s)", strings.Join(parts, ", "))
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w)
	grouped := false
	timed := false
	for _, sd := range r.Sides {
		grouped = grouped || sd.Groups != nil
		timed = timed || sd.TimeMin != nil
	}
	hdr := []string{"side", "role", "target", "rows", "row_fraction"}
	if grouped {
		hdr = append(hdr, "groups", "group_fraction")
	}
	if timed {
		hdr = append(hdr, "time_min", "time_max")
	}
	hdr = append(hdr, "seal", "view")
	t := &table{Header: hdr}
	for _, sd := range r.Sides {
		row := []any{sd.Side, sd.Role, optF(sd.TargetFraction), sd.Rows, fmt.Sprintf("%.4f", sd.RowFraction)}
		if grouped {
			row = append(row, optI(sd.Groups), roundF(sd.GroupFraction))
		}
		if timed {
			tmin, tmax := "", ""
			if sd.TimeMin != nil {
				tmin, tmax = *sd.TimeMin, *sd.TimeMax
			}
			row = append(row, tmin, tmax)
		}
		row = append(row, sd.Digest[:16]+"…", sd.View)
		t.add(row...)
	}
	t.write(w, "table")
	if len(r.Folds) > 0 {
		fmt.Fprintln(w)
		ft := &table{Header: []string{"fold", "train_rows", "test_rows", "train_groups", "test_groups", "excluded_rows"}}
		for _, f := range r.Folds {
			ft.add(f.Fold, f.TrainRows, f.TestRows, optI(f.TrainGroups), optI(f.TestGroups), f.Excluded)
		}
		ft.write(w, "table")
	}
	if len(r.Notes) > 0 {
		fmt.Fprintln(w)
		keys := make([]string, 0, len(r.Notes))
		for k := range r.Notes {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			fmt.Fprintf(w, "%s: %v\n", k, r.Notes[k])
		}
	}
	for _, line := range fractionWarnings(r) {
		fmt.Fprintln(w, line)
	}
}

// fractionWarnings flags a side that received less than half its target share of the
// assigned rows (with at least 100 rows assigned; smaller splits are coarse by nature), and
// names the span policy when dropping spanning entities is the likely cause.
func fractionWarnings(r *splits.Result) []string {
	if r.Assigned < 100 {
		return nil
	}
	var out []string
	for _, sd := range r.Sides {
		if sd.TargetFraction == nil || *sd.TargetFraction <= 0 || sd.RowFraction >= *sd.TargetFraction/2 {
			continue
		}
		line := fmt.Sprintf("\nwarning: side %s holds %.1f%% of the assigned rows against a target of %.0f%%", sd.Side, 100*sd.RowFraction, 100**sd.TargetFraction)
		if n := r.Dropped["span"]; n > 0 && (r.Spec.Span == "" || r.Spec.Span == "drop") {
			line += fmt.Sprintf(": %d rows of entities that span the cutoff were dropped (--span drop); --span entity keeps each entity on its hashed side and drops only its rows across the cutoff, --span earlier keeps it wholly on the earlier side", n)
		}
		out = append(out, line)
	}
	return out
}

func sortedKeys(m map[string]int) []string {
	k := make([]string, 0, len(m))
	for x := range m {
		k = append(k, x)
	}
	sort.Strings(k)
	return k
}

// demoSplitStep is the demo's split step: on table pipes, a naive random split (which the
// audit shows to leak: the same pipe segment on both sides, later inspections in training)
// and a sound one (grouped by pipe segment, time-ordered with a 90-day gap: each segment is on
// one side, and no training inspection is within 90 days of the holdout period), then verify.
// Full outputs go to DIR/split_naive.txt, split_sound.txt and verify_sound.txt.
func demoSplitStep(ctx context.Context, w io.Writer, db, dir string) error {
	s := stdio{in: strings.NewReader(""), out: io.Discard, err: io.Discard}
	sound := []string{"--sides", "train=0.7,holdout=0.3", "--group", "segment_id", "--time", "inspection_date",
		"--until", "2026-12-31", "--gap", "90d", "--span", "entity", "--time-invalid", "drop"}
	steps := []struct {
		name string
		args []string
	}{
		{"split_naive", []string{"split", "--db", db, "--table", "pipes", "--name", "naive", "--seed", "1", "--replace"}},
		{"split_sound", append([]string{"split", "--db", db, "--table", "pipes", "--name", "sound", "--seed", "1", "--replace"}, sound...)},
		{"verify_sound", []string{"verify", "--db", db, "--split", "sound"}},
	}
	for _, st := range steps {
		if err := demoStep(ctx, s, dir, st.name, st.args...); err != nil {
			return err
		}
	}
	d, err := openRead(ctx, db, true)
	if err != nil {
		return err
	}
	defer d.Close()
	conn, err := d.Conn(ctx)
	if err != nil {
		return err
	}
	defer conn.Close()
	for _, name := range []string{"naive", "sound"} {
		r, err := splits.Read(ctx, conn, name)
		if err != nil {
			return err
		}
		how := "random by row content"
		if name == "sound" {
			how = "grouped by segment_id, time-ordered by inspection_date until 2026-12-31, 90-day gap"
		}
		fmt.Fprintf(w, "split    %s (%s; details: %s):", name, how, filepath.Join(dir, "split_"+name+".txt"))
		for _, sd := range r.Sides {
			fmt.Fprintf(w, " %s %d rows (%.3f)", sd.Side, sd.Rows, sd.RowFraction)
			if sd.Groups != nil {
				fmt.Fprintf(w, " %d segments", *sd.Groups)
			}
			if sd.TimeMin != nil {
				fmt.Fprintf(w, " %s..%s", *sd.TimeMin, *sd.TimeMax)
			}
			fmt.Fprint(w, ";")
		}
		fmt.Fprintf(w, " %d dropped", r.TableRows-r.Assigned)
		if len(r.Dropped) > 0 {
			var parts []string
			for _, k := range sortedKeys(r.Dropped) {
				parts = append(parts, fmt.Sprintf("%s %d", k, r.Dropped[k]))
			}
			fmt.Fprintf(w, " (%s)", strings.Join(parts, ", "))
		}
		fmt.Fprintln(w)
	}
	rep, err := splits.Verify(ctx, conn, "sound")
	if err != nil {
		return err
	}
	state := "intact (assignment recomputed, digests and seals match)"
	if !rep.Intact {
		state = "NOT intact: " + countsText(rep.Counts)
	}
	fmt.Fprintf(w, "verify   sound: %s (details: %s)\n", state, filepath.Join(dir, "verify_sound.txt"))
	return nil
}
