package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"unicode/utf8"

	"github.com/urfave/cli/v2"

	"splitsmith/ingest"
)

type demoOptions struct {
	dir  string
	seed uint64
}

func newDemoCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "demo",
		Usage: "run the whole job end to end on generated demo data (an invented pipe-inspection log)",
		Description: `Generates the demo data, an invented city water utility's pipe-inspection log
(DIR/pipes.csv; every name and number comes from --seed, no real utility, place or person),
ingests it into DIR/pipes.db as table "pipes", profiles it, then splits, audits and
estimates, and prints a short summary. Each step's full output is in DIR/<step>.txt.
Running the demo again replaces DIR/pipes.db and the files it wrote.

The data carry planted problems for the tools to find: twice-imported rows, inspector
notes copied between inspections of the same pipe segment, malformed soil-moisture values
("7,4", "n/a?"), impossible inspection dates, material spellings that differ only in case
or whitespace, and a work-order column that leaks the repair label. The demo ingests with
--schema soil_moisture=real,inspection_date=date --on-error quarantine, so the malformed
values and calendar-invalid dates land in ss_rejects (and in the profile's rejected_rows
finding) while the table keeps numeric and date types for the later steps.

Examples:
   splitsmith demo
   splitsmith demo --dir /tmp/demo --seed 7`,
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "dir", Value: "demo", Usage: "`DIR` for the demo's files (created if missing)"},
			seedFlag(),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef("splitsmith demo --help", "unexpected argument %q", cc.Args().First())
			}
			o := demoOptions{dir: cc.String("dir"), seed: cc.Uint64("seed")}
			if o.dir == "" {
				return usagef("splitsmith demo --help", "--dir must not be empty")
			}
			return runDemo(cc.Context, o, s)
		},
	}
}

// demoIngestArgs are the ingest options the demo uses (see the command's description).
var demoIngestArgs = []string{"--table", "pipes", "--schema", "soil_moisture=real,inspection_date=date", "--on-error", "quarantine"}

func runDemo(ctx context.Context, o demoOptions, s stdio) error {
	if err := os.MkdirAll(o.dir, 0o755); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	csvPath := filepath.Join(o.dir, "pipes.csv")
	db := filepath.Join(o.dir, "pipes.db")
	w := s.out

	// 1. Generate.
	f, err := os.Create(csvPath)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	st, err := ingest.WriteDemoCSV(f, ingest.DemoOptions{Seed: o.seed})
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("demo: write %s: %w", csvPath, err)
	}
	fmt.Fprintf(w, "splitsmith demo (seed %d): an invented city water utility's pipe-inspection log\n\n", o.seed)
	fmt.Fprintf(w, "data     %s: %d rows = %d inspections of %d pipe segments + %d twice-imported copies;\n", csvPath, st.Rows, st.Inspections, st.Segments, st.Copies)
	fmt.Fprintf(w, "         planted: %d malformed soil-moisture values, %d impossible dates, a work-order label leak\n", st.Malformed, st.ImpossibleDates)

	// 2. Ingest into a fresh database (re-running replaces it).
	for _, p := range []string{db, db + "-journal"} {
		if err := os.Remove(p); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("demo: %w", err)
		}
	}
	args := append([]string{"ingest", "--db", db}, demoIngestArgs...)
	if err := demoStep(ctx, s, o.dir, "ingest", append(args, csvPath)...); err != nil {
		return err
	}
	rdb, err := openRead(ctx, db, true)
	if err != nil {
		return err
	}
	var loaded, rejected int64
	err = rdb.QueryRowContext(ctx, `SELECT coalesce(sum(rows_loaded), 0), coalesce(sum(rows_rejected), 0) FROM ss_sources WHERE table_name = 'pipes'`).Scan(&loaded, &rejected)
	rdb.Close()
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	fmt.Fprintf(w, "ingest   %s table pipes: %d rows loaded, %d quarantined in ss_rejects (details: %s)\n",
		db, loaded, rejected, filepath.Join(o.dir, "ingest.txt"))

	// 3. Profile (inspection_id should be a key; the twice-imported copies break it).
	if err := demoStep(ctx, s, o.dir, "profile", "profile", "--db", db, "--table", "pipes", "--key", "inspection_id"); err != nil {
		return err
	}
	if err := printDemoProfile(ctx, w, db, filepath.Join(o.dir, "profile.txt")); err != nil {
		return err
	}

	// 4–6. Split, audit, estimate (each prints its own summary).
	for _, step := range []struct {
		name string
		fn   func(context.Context, io.Writer, string, string) error
	}{{"split", demoSplitStep}, {"audit", demoAuditStep}, {"estimate", demoEstimateStep}} {
		if err := step.fn(ctx, w, db, o.dir); err != nil {
			return fmt.Errorf("demo: %s: %w", step.name, err)
		}
	}
	fmt.Fprintf(w, "\ndone. Everything is stored as plain rows in %s; for example:\n", db)
	fmt.Fprintf(w, "   splitsmith sql --db %s \"SELECT severity, check_name, column_name, message FROM ss_profile_findings\"\n", db)
	return nil
}

// demoStep runs one splitsmith command in-process and keeps its full output in DIR/NAME.txt.
func demoStep(ctx context.Context, s stdio, dir, name string, args ...string) error {
	var out bytes.Buffer
	err := runCLI(ctx, stdio{in: strings.NewReader(""), out: &out, err: &out}, args...)
	var f *findingsError
	if errors.As(err, &f) {
		err = nil
	}
	path := filepath.Join(dir, name+".txt")
	if werr := os.WriteFile(path, []byte("$ splitsmith "+strings.Join(args, " ")+"\n"+out.String()), 0o644); werr != nil && err == nil {
		err = werr
	}
	if err != nil {
		return fmt.Errorf("demo: %s: %w (output in %s)", name, err, path)
	}
	return nil
}

// printDemoProfile prints the stored profile's findings, one short line each.
func printDemoProfile(ctx context.Context, w io.Writer, db, details string) error {
	rdb, err := openRead(ctx, db, true)
	if err != nil {
		return err
	}
	defer rdb.Close()
	var e, wn, in int
	if err := rdb.QueryRowContext(ctx, `SELECT findings_error, findings_warn, findings_info FROM ss_profiles WHERE table_name = 'pipes'`).Scan(&e, &wn, &in); err != nil {
		return fmt.Errorf("demo: profile: %w", err)
	}
	fmt.Fprintf(w, "profile  %d error, %d warn, %d info findings (details: %s):\n", e, wn, in, details)
	rows, err := rdb.QueryContext(ctx, `SELECT severity, check_name, coalesce(column_name, '-'), message FROM ss_profile_findings WHERE table_name = 'pipes'
		ORDER BY CASE severity WHEN 'error' THEN 0 WHEN 'warn' THEN 1 ELSE 2 END, finding_id`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var sev, check, col, msg string
		if err := rows.Scan(&sev, &check, &col, &msg); err != nil {
			return err
		}
		if utf8.RuneCountInString(msg) > 90 {
			msg = string([]rune(msg)[:89]) + "…"
		}
		fmt.Fprintf(w, "   %-5s  %-15s  %-15s  %s\n", sev, check, col, msg)
	}
	return rows.Err()
}
