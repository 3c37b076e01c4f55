package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/internal/store"
	"splitsmith/splits"
)

const splitsHint = "splitsmith splits --db pipes.db [--show NAME | --drop NAME]"

type splitsOptions struct {
	db, show, drop, format string
}

func newSplitsCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "splits",
		Usage: "list the stored splits, show one, or drop one",
		Description: `Lists every split with its strategy, table, seed and per-side row counts.
--show NAME prints one split's summary and its canonical spec; --drop NAME removes a split
(its rows, sides, folds, views and audit queries) and nothing else.

Examples:
   splitsmith splits --db pipes.db
   splitsmith splits --db pipes.db --show sound
   splitsmith splits --db pipes.db --drop naive`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "show", Usage: "print split `NAME`'s summary and spec"},
			&cli.StringFlag{Name: "drop", Usage: "drop split `NAME`"},
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(splitsHint, "unexpected argument %q", cc.Args().First())
			}
			o := splitsOptions{db: cc.String("db"), show: cc.String("show"), drop: cc.String("drop")}
			var err error
			if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
				return err
			}
			if o.show != "" && o.drop != "" {
				return usagef(splitsHint, "--show and --drop exclude each other")
			}
			if o.drop != "" {
				return runDropSplit(cc.Context, cc, o, s.out)
			}
			return runSplits(cc.Context, o, s.out)
		},
	}
}

func runDropSplit(ctx context.Context, cc *cli.Context, o splitsOptions, w io.Writer) error {
	var r *splits.Result
	err := update(ctx, cc, o.db, false, func(ctx context.Context, tx *store.Tx) error {
		var err error
		if r, err = splits.Read(ctx, tx.Conn, o.drop); err != nil {
			return asUsage(err, splitsHint)
		}
		tx.SetDetail("dropped_split", o.drop)
		tx.SetDetail("spec", r.SpecJSON)
		return splits.Drop(ctx, tx.Conn, o.drop)
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "dropped split %s (%s split of table %s, %d rows)\n", o.drop, r.Strategy, r.Spec.Table, r.TableRows)
	return nil
}

func runSplits(ctx context.Context, o splitsOptions, w io.Writer) error {
	db, err := openRead(ctx, o.db, true)
	if err != nil {
		return err
	}
	defer db.Close()
	conn, err := db.Conn(ctx)
	if err != nil {
		return err
	}
	defer conn.Close()
	if o.show != "" {
		r, err := splits.Read(ctx, conn, o.show)
		if err != nil {
			return asUsage(err, splitsHint)
		}
		if o.format == "json" {
			return writeJSON(w, splitJSON(r))
		}
		printSplit(w, r)
		fmt.Fprintf(w, "\nspec: %s\n", r.SpecJSON)
		return nil
	}
	names, err := splits.Names(ctx, conn)
	if err != nil {
		return err
	}
	var all []*splits.Result
	for _, n := range names {
		r, err := splits.Read(ctx, conn, n)
		if err != nil {
			return err
		}
		all = append(all, r)
	}
	if o.format == "json" {
		out := make([]map[string]any, 0, len(all))
		for _, r := range all {
			out = append(out, splitJSON(r))
		}
		return writeJSON(w, out)
	}
	if len(all) == 0 {
		fmt.Fprintln(w, "no splits (make one with: splitsmith split --db FILE --table T --name NAME)")
		return nil
	}
	t := &table{Header: []string{"split", "table", "strategy", "seed", "folds", "rows", "dropped", "sides", "spec"}}
	for _, r := range all {
		var parts []string
		for _, s := range r.Sides {
			parts = append(parts, fmt.Sprintf("%s=%d", s.Side, s.Rows))
		}
		folds := ""
		if r.FoldScheme != "" {
			folds = fmt.Sprintf("%d %s", len(r.Folds), r.FoldScheme)
		}
		t.add(r.Spec.Name, r.Spec.Table, r.Strategy, r.Spec.Seed, folds, r.TableRows, r.TableRows-r.Assigned, strings.Join(parts, " "), specSummary(r.Spec))
	}
	return t.write(w, "table")
}

// specSummary renders the spec's non-default choices in flag form, for the listing.
func specSummary(sp *splits.Spec) string {
	var p []string
	add := func(flag, v string) {
		if v != "" {
			p = append(p, "--"+flag+" "+v)
		}
	}
	if sp.Strategy() != "adopted" {
		add("sides", sp.Sides.String())
	}
	add("key", strings.Join(sp.Key, ","))
	add("stratify", sp.Stratify)
	if sp.Stratify != "" && sp.StratifyMode != "exact" {
		add("stratify-mode", sp.StratifyMode)
	}
	add("group", strings.Join(sp.Group, ","))
	if sp.GroupNulls != "own" {
		add("group-nulls", sp.GroupNulls)
	}
	add("time", sp.Time)
	add("cutoff", sp.Cutoff)
	add("until", sp.Until)
	add("gap", sp.Gap)
	if sp.GapRows > 0 {
		add("gap-rows", fmt.Sprint(sp.GapRows))
	}
	add("label-end", sp.LabelEnd)
	if sp.Time != "" && sp.TimeInvalid != "refuse" {
		add("time-invalid", sp.TimeInvalid)
	}
	if sp.TestSize > 0 {
		add("test-size", fmt.Sprint(sp.TestSize))
	}
	if len(sp.Group) > 0 && sp.Time != "" {
		add("span", sp.Span)
	}
	add("from-column", sp.FromColumn)
	add("fold-column", sp.FoldColumn)
	return strings.Join(p, " ")
}
