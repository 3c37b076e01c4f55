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

type ingestOptions struct {
	db      string
	inputs  []string
	opts    ingest.Options
	args    []string
	command string
}

const ingestHint = "splitsmith ingest --help"

func newIngestCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:      "ingest",
		Usage:     "load CSV, TSV or JSON Lines files into a typed table",
		ArgsUsage: "INPUT...",
		Description: `Loads every INPUT into one table of the database (created if missing), inferring
each column's type from a full scan: INTEGER, REAL, BOOLEAN (true/false), DATE (YYYY-MM-DD),
TIMESTAMP (ISO 8601 / RFC 3339, with or without a zone) or TEXT. A column is typed only when
every non-missing value parses; codes with leading zeros ("00123") stay TEXT.
Each row keeps its input (ss_source), line (ss_line) and a content digest (ss_digest).
Inputs with the same columns share one table. ".gz" inputs are read transparently; "-"
reads standard input (give --format and --table). Format comes from the extension
(.csv, .tsv, .jsonl) unless --format says otherwise.

Bad rows (ragged, bad quoting, invalid UTF-8, a value breaking --schema) stop the load with
FILE:LINE and change nothing (--on-error fail); --on-error skip loads the rest;
--on-error quarantine also stores each bad row in ss_rejects.

Examples:
   splitsmith ingest --db pipes.db inspections.csv
   splitsmith ingest --db pipes.db --table pipes train.csv test.csv
   splitsmith ingest --db pipes.db --table pipes --append more.csv.gz
   splitsmith ingest --db pipes.db --schema segment_id=text,install_year=integer log.csv
   zcat log.jsonl.gz | splitsmith ingest --db pipes.db --table pipes --format jsonl -`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "table", Usage: "target `NAME` (default: the first input's name without extensions)"},
			&cli.StringFlag{Name: "format", Usage: "input `FORMAT` for every input: csv, tsv or jsonl (default: from the extension)"},
			&cli.StringSliceFlag{Name: "schema", Usage: "`COL=TYPE,...` overriding inference (types: integer, real, boolean, date, timestamp, text)"},
			&cli.StringFlag{Name: "on-error", Value: "fail", Usage: "what to do with bad rows: `MODE` fail, skip or quarantine (into ss_rejects)"},
			&cli.BoolFlag{Name: "replace", Usage: "replace an existing table of that name"},
			&cli.BoolFlag{Name: "append", Usage: "add rows to an existing ingested table (same columns; values must fit its types)"},
			&cli.StringFlag{Name: "missing", Value: strings.Join(ingest.DefaultMissing, ","), Usage: "comma-separated `TOKENS` read as NULL besides the empty string"},
		},
		Action: func(cc *cli.Context) error {
			o := ingestOptions{db: cc.String("db"), inputs: cc.Args().Slice(), command: cc.Command.FullName()}
			if len(o.inputs) == 0 {
				return usagef(ingestHint, "no INPUT given")
			}
			onErr, err := checkChoice(cc, "on-error", "fail", "skip", "quarantine")
			if err != nil {
				return err
			}
			if f := cc.String("format"); f != "" {
				if _, err := checkChoice(cc, "format", ingest.Formats...); err != nil {
					return err
				}
			}
			if cc.Bool("replace") && cc.Bool("append") {
				return usagef(ingestHint, "--replace and --append exclude each other")
			}
			o.opts = ingest.Options{
				Table: cc.String("table"), Format: cc.String("format"), OnError: onErr,
				Replace: cc.Bool("replace"), Append: cc.Bool("append"), CheckName: store.CheckUserName,
			}
			o.opts.Missing = []string{}
			for _, m := range strings.Split(cc.String("missing"), ",") {
				if m != "" {
					o.opts.Missing = append(o.opts.Missing, m)
				}
			}
			for _, item := range cc.StringSlice("schema") {
				col, typ, ok := strings.Cut(item, "=")
				col = strings.TrimSpace(col)
				if !ok || col == "" {
					return usagef(ingestHint, "--schema: %q is not COL=TYPE", item)
				}
				t, err := ingest.ParseType(strings.TrimSpace(typ))
				if err != nil {
					return usagef(ingestHint, "--schema: column %q: %v", col, err)
				}
				if o.opts.Schema == nil {
					o.opts.Schema = map[string]ingest.Type{}
				}
				if _, dup := o.opts.Schema[col]; dup {
					return usagef(ingestHint, "--schema: column %q is given twice", col)
				}
				o.opts.Schema[col] = t
			}
			return runIngest(cc.Context, cc, o, s)
		},
	}
}

func runIngest(ctx context.Context, cc *cli.Context, o ingestOptions, s stdio) error {
	var inputs []ingest.Input
	for _, in := range o.inputs {
		i := ingest.Input{Name: in}
		if in == "-" {
			i.Reader = s.in
		}
		inputs = append(inputs, i)
	}
	prog := newProgress(s.err, "ingest")
	o.opts.Progress = prog.Report
	var res *ingest.Result
	err := update(ctx, cc, o.db, true, func(ctx context.Context, tx *store.Tx) error {
		opts := o.opts
		opts.RunID = tx.RunID
		r, err := ingest.Load(ctx, tx.Conn, inputs, opts)
		prog.Done()
		if err != nil {
			var u *ingest.UsageError
			if errors.As(err, &u) {
				return asUsage(err, ingestHint)
			}
			return err
		}
		res = r
		for _, src := range r.Sources {
			tx.AddInput(store.Input{Path: src.Name, Size: src.Size, SHA256: src.SHA256})
		}
		cols := make([]map[string]any, 0, len(r.Columns))
		for _, c := range r.Columns {
			cols = append(cols, map[string]any{"name": c.Name, "type": c.Type.String(), "reason": c.Reason})
		}
		tx.SetDetail("table", r.Table)
		tx.SetDetail("mode", r.Mode)
		tx.SetDetail("rows_loaded", r.Rows)
		tx.SetDetail("rows_skipped", r.Skipped)
		tx.SetDetail("rows_rejected", r.Rejected)
		tx.SetDetail("passes", r.Passes)
		tx.SetDetail("on_error", opts.OnError)
		tx.SetDetail("missing", opts.Missing)
		tx.SetDetail("columns", cols)
		if err := tx.AddAuditQuery(ctx, "ingest:"+r.Table, "digest", "check",
			"rows whose user values no longer match their ss_digest (empty = unchanged since load)", r.DigestCheckSQL, true); err != nil {
			return err
		}
		if r.NormDigestCheckSQL == "" { // appended to a table made before ss_norm_digest existed
			return nil
		}
		return tx.AddAuditQuery(ctx, "ingest:"+r.Table, "norm_digest", "check",
			"rows whose normalised values no longer match their ss_norm_digest (empty = unchanged since load)", r.NormDigestCheckSQL, true)
	})
	if err != nil {
		return err
	}
	printIngest(s.out, s.err, res)
	return nil
}

func printIngest(w, ew io.Writer, r *ingest.Result) {
	verb := map[string]string{"create": "created", "replace": "replaced", "append": "appended to"}[r.Mode]
	fmt.Fprintf(w, "%s table %s: %s loaded", verb, r.Table, ingestPlural(r.Rows, "row"))
	if r.Rows > 0 {
		fmt.Fprintf(w, " (ss_row %d..%d)", r.FirstRow, r.FirstRow+r.Rows-1)
	}
	if r.Skipped > 0 {
		fmt.Fprintf(w, ", %s skipped", ingestPlural(r.Skipped, "bad row"))
	}
	if r.Rejected > 0 {
		fmt.Fprintf(w, ", %s quarantined in ss_rejects", ingestPlural(r.Rejected, "bad row"))
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w)
	st := &table{Header: []string{"input", "format", "bytes", "sha256", "rows", "skipped", "rejected"}}
	for _, s := range r.Sources {
		f := s.Format
		if s.Gzip {
			f += "+gzip"
		}
		st.add(s.Name, f, s.Size, s.SHA256[:16]+"…", s.Rows, s.Skipped, s.Rejected)
	}
	st.write(w, "table")
	fmt.Fprintln(w)
	ct := &table{Header: []string{"column", "type", "stored", "missing", "why"}}
	for _, c := range r.Columns {
		ct.add(c.Name, c.Type.String(), c.SQLType, c.Missing, c.Reason)
	}
	ct.write(w, "table")
	what := "skipped"
	if r.Rejected > 0 {
		what = "quarantined"
	}
	for _, p := range r.Problems {
		fmt.Fprintf(ew, "%s: %s\n", what, p.Error())
	}
	if n := r.Skipped + r.Rejected - int64(len(r.Problems)); n > 0 {
		fmt.Fprintf(ew, "%s: ... and %s more\n", what, ingestPlural(n, "bad row"))
	}
}

func ingestPlural(n int64, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.FormatInt(n, 10) + " " + noun + "s"
}
