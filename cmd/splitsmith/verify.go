package main

import (
	"context"
	"fmt"
	"io"

	"github.com/urfave/cli/v2"

	"splitsmith/splits"
)

const verifyHint = "splitsmith verify --db pipes.db --split sound"

type verifyOptions struct {
	db, split, format string
	limit             int
	progress          io.Writer // where terminal progress goes (stderr); nil for none
}

func newVerifyCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "verify",
		Usage: "check that a sealed split still holds: no row moved, added, removed or changed",
		Description: `Recomputes the split's assignment from its stored spec and the table's current
data, and the content digest of every row from its current values, and reports each row that
moved side (or fold), was added to the table or removed from it since the split was sealed,
or whose values changed, and each side whose seal digest no longer matches. It writes
nothing. The same checks are stored as audit queries (subject split:NAME) that an auditor
can replay with plain SQL: splitsmith sql --db FILE "SELECT name, sql FROM ss_audit_queries".

Exit status 0 when the split is intact, 3 when it is not.

Examples:
   splitsmith verify --db pipes.db --split sound
   splitsmith verify --db pipes.db --split sound --format json`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "split", Usage: "split `NAME`", Required: true},
			&cli.IntFlag{Name: "limit", Value: 50, Usage: "print at most `N` changes (0: all); counts are always complete"},
			formatFlag("table", "table", "json"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(verifyHint, "unexpected argument %q", cc.Args().First())
			}
			o := verifyOptions{db: cc.String("db"), split: cc.String("split"), limit: cc.Int("limit"), progress: s.err}
			var err error
			if o.format, err = checkChoice(cc, "format", "table", "json"); err != nil {
				return err
			}
			if o.limit < 0 {
				return usagef(verifyHint, "--limit must be 0 or more, got %d", o.limit)
			}
			return runVerify(cc.Context, o, s.out)
		},
	}
}

func runVerify(ctx context.Context, o verifyOptions, w io.Writer) error {
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
	var prog *progress
	if o.progress != nil {
		prog = newProgress(o.progress, "verify")
	}
	rep, err := splits.VerifyWith(ctx, conn, o.split, splits.VerifyOptions{Progress: prog.Report})
	prog.Done()
	if err != nil {
		return splitErr(err, verifyHint)
	}
	if o.format == "json" {
		if err := writeJSON(w, rep); err != nil {
			return err
		}
	} else {
		printVerify(w, rep, o.limit)
	}
	if !rep.Intact {
		return &findingsError{msg: fmt.Sprintf("split %s does not verify: %s", rep.Split, countsText(rep.Counts))}
	}
	return nil
}

func countsText(c map[string]int) string {
	s := ""
	for _, k := range []string{"changed", "moved", "added", "removed", "seal", "count"} {
		if c[k] > 0 {
			if s != "" {
				s += ", "
			}
			unit := "row"
			if k == "seal" || k == "count" {
				unit = "side"
			}
			if c[k] != 1 {
				unit += "s"
			}
			s += fmt.Sprintf("%d %s %s", c[k], unit, k)
		}
	}
	return s
}

func printVerify(w io.Writer, r *splits.Report, limit int) {
	if r.Intact {
		fmt.Fprintf(w, "split %s (%s, table %s): intact — %d rows recomputed on the same sides, digests and seals match\n", r.Split, r.Strategy, r.Table, r.Rows)
		return
	}
	fmt.Fprintf(w, "split %s (%s, table %s): NOT intact — %s\n\n", r.Split, r.Strategy, r.Table, countsText(r.Counts))
	t := &table{Header: []string{"change", "row", "source", "side", "detail"}}
	for i, c := range r.Changes {
		if limit > 0 && i == limit {
			break
		}
		row := any("")
		if c.RowID != 0 {
			row = c.RowID
		}
		t.add(c.Kind, row, c.Source, c.Side, c.Detail)
	}
	t.write(w, "table")
	if limit > 0 && len(r.Changes) > limit {
		fmt.Fprintf(w, "... and %d more (--limit 0 prints all)\n", len(r.Changes)-limit)
	}
	for _, n := range r.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
}
