package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/ingest"
	"splitsmith/internal/store"
)

const profileHint = "splitsmith profile --db pipes.db --table pipes"

type profileOptions struct {
	db, table string
	key       []string
	failOn    string
	format    string
}

func newProfileCommand(s stdio) *cli.Command {
	var checks strings.Builder
	for _, c := range ingest.ProfileChecks {
		fmt.Fprintf(&checks, "   %-16s %-12s %s\n", c.Name, c.Severity, c.Rule)
	}
	return &cli.Command{
		Name:  "profile",
		Usage: "data-quality profile of an ingested table: per-column statistics and findings",
		Description: `Profiles every user column of an ingested table: type, count, missing, distinct,
type conformity (a column that is mostly numbers or dates but holds a few other values is
reported with those values and their input lines, whatever type it was stored as), min/max,
mean and sample SD (numerically stable), quantiles (Hyndman-Fan type 7, R's default),
outliers by Tukey's fences (1.5 IQR), top values, values differing only in case or
surrounding whitespace, constant and near-constant columns, identifier-like columns. Per
table: exact duplicate rows (same ss_digest), duplicate or missing --key values, rows
rejected at ingest. The results replace any earlier profile of the table in
ss_profiles, ss_profile_columns and ss_profile_findings.

CHECKS (severity: rule)
` + checks.String() + `
Examples:
   splitsmith profile --db pipes.db --table pipes
   splitsmith profile --db pipes.db --table pipes --key inspection_id --fail-on error
   splitsmith profile --db pipes.db --table pipes --format json`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "table", Usage: "ingested table `NAME` (required)"},
			&cli.StringFlag{Name: "key", Usage: "`COL,...` that should identify each row (checked for duplicates and NULLs)"},
			failOnFlag(),
			formatFlag("table", "table", "json", "markdown"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(profileHint, "unexpected argument %q", cc.Args().First())
			}
			o := profileOptions{db: cc.String("db"), table: cc.String("table")}
			if o.table == "" {
				return usagef(profileHint, "--table is required")
			}
			var err error
			if o.failOn, err = checkFailOn(cc); err != nil {
				return err
			}
			if o.format, err = checkChoice(cc, "format", "table", "json", "markdown"); err != nil {
				return err
			}
			if k := cc.String("key"); cc.IsSet("key") {
				for _, c := range strings.Split(k, ",") {
					c = strings.TrimSpace(c)
					if c == "" {
						return usagef(profileHint, "--key: %q has an empty column name", k)
					}
					o.key = append(o.key, c)
				}
			}
			return runProfile(cc.Context, cc, o, s)
		},
	}
}

func runProfile(ctx context.Context, cc *cli.Context, o profileOptions, s stdio) error {
	prog := newProgress(s.err, "profile "+o.table)
	var res *ingest.ProfileResult
	err := update(ctx, cc, o.db, false, func(ctx context.Context, tx *store.Tx) error {
		r, err := ingest.Profile(ctx, tx.Conn, ingest.ProfileOptions{Table: o.table, Key: o.key, Progress: prog.Report})
		prog.Done()
		if err != nil {
			if errors.Is(err, ingest.ErrProfileUsage) {
				return asUsage(err, profileHint)
			}
			return err
		}
		if err := ingest.StoreProfile(ctx, tx.Conn, tx.RunID, r); err != nil {
			return err
		}
		res = r
		e, w, i := r.Counts()
		tx.SetDetail("table", o.table)
		tx.SetDetail("key", r.Key)
		tx.SetDetail("fail_on", o.failOn)
		tx.SetDetail("findings", map[string]int{"error": e, "warn": w, "info": i})
		if o.failOn != "" && severityRank(r.Worst()) >= severityRank(o.failOn) {
			tx.SetOutcome("findings")
		}
		return tx.AddAuditQuery(ctx, "profile:"+o.table, "duplicate_rows", "check",
			"rows that repeat an earlier row's ss_digest, recomputed; empty when ss_profiles.duplicate_rows still holds",
			fmt.Sprintf(`SELECT p.duplicate_rows, d.n FROM ss_profiles p, (SELECT count(*) - count(DISTINCT ss_digest) AS n FROM %s) d WHERE p.table_name = %s AND p.duplicate_rows <> d.n`,
				store.QuoteIdent(o.table), store.QuoteString(o.table)), false)
	})
	if err != nil {
		return err
	}
	if err := printProfile(s.out, res, o.format); err != nil {
		return err
	}
	if o.failOn != "" {
		n := 0
		for _, f := range res.Findings {
			if severityRank(f.Severity) >= severityRank(o.failOn) {
				n++
			}
		}
		if n > 0 {
			return &findingsError{msg: fmt.Sprintf("profile %s: %d findings at or above --fail-on %s (stored in ss_profile_findings)", o.table, n, o.failOn)}
		}
	}
	return nil
}

// num renders a statistic compactly for the terminal (stored values keep full precision).
func num(v any) string {
	switch x := v.(type) {
	case nil:
		return ""
	case float64:
		return strconv.FormatFloat(x, 'g', 6, 64)
	case *float64:
		if x == nil {
			return ""
		}
		return strconv.FormatFloat(*x, 'g', 6, 64)
	case *int64:
		if x == nil {
			return ""
		}
		return strconv.FormatInt(*x, 10)
	}
	return cell(v)
}

func printProfile(w io.Writer, r *ingest.ProfileResult, format string) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	tf := format // "table" or "markdown"
	e, wn, in := r.Counts()
	head := func(s string) {
		if tf == "markdown" {
			fmt.Fprintf(w, "## %s\n\n", s)
		} else {
			fmt.Fprintf(w, "%s\n", s)
		}
	}
	if tf == "markdown" {
		fmt.Fprintf(w, "# Profile of `%s`\n\n", r.Table)
	}
	fmt.Fprintf(w, "table %s: %d rows, %d columns; %d exact duplicate rows in %d groups", r.Table, r.Rows, len(r.Columns), r.DuplicateRows, r.DuplicateGroups)
	if r.DuplicateKeys != nil {
		fmt.Fprintf(w, "; %d rows with a duplicated key (%s)", *r.DuplicateKeys, strings.Join(r.Key, ", "))
	}
	fmt.Fprintf(w, "; %d rows rejected at ingest\n\n", r.RejectedRows)

	head("columns")
	ct := &table{Header: []string{"column", "type", "kind", "missing", "distinct", "nonconf", "min", "q1", "median", "q3", "max", "mean", "sd", "outliers"}}
	for _, c := range r.Columns {
		ct.add(c.Name, c.LogicalType, c.Kind, c.Missing, c.Distinct, c.Nonconforming, num(c.Min), num(c.Q1), num(c.Median), num(c.Q3), num(c.Max), num(c.Mean), num(c.SD), num(c.Outliers))
	}
	if err := ct.write(w, tf); err != nil {
		return err
	}
	fmt.Fprintln(w)
	tt := &table{Header: []string{"column", "top values (count)"}}
	for _, c := range r.Columns {
		if c.Kind != "text" && c.Kind != "boolean" {
			continue
		}
		var parts []string
		for _, v := range c.Top {
			if str, ok := v.Value.(string); ok {
				parts = append(parts, fmt.Sprintf("%q (%d)", str, v.Count))
			} else {
				parts = append(parts, fmt.Sprintf("%s (%d)", cell(v.Value), v.Count))
			}
		}
		tt.add(c.Name, strings.Join(parts, ", "))
	}
	if len(tt.Rows) > 0 {
		head("top values")
		if err := tt.write(w, tf); err != nil {
			return err
		}
		fmt.Fprintln(w)
	}
	head(fmt.Sprintf("findings: %d error, %d warn, %d info", e, wn, in))
	if len(r.Findings) == 0 {
		fmt.Fprintln(w, "none")
		return nil
	}
	ft := &table{Header: []string{"severity", "check", "column", "count", "detail"}}
	for _, f := range r.Findings {
		col := f.Column
		if col == "" {
			col = "-"
		}
		ft.add(f.Severity, f.Check, col, f.Count, f.Message)
	}
	return ft.write(w, tf)
}
