package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/urfave/cli/v2"

	"splitsmith/splits"
)

const exportHint = "splitsmith export --db pipes.db --split sound --side train --out train.csv"

type exportOptions struct {
	db, out string
	o       splits.ExportOptions
}

func newExportCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "export",
		Usage: "stream one side of a split (or one fold of it) as CSV or JSON Lines",
		Description: `Writes the rows of one side of a split, in ss_row order, to standard output or
--out FILE (written beside its target and renamed into place when complete). With --fold K,
only fold K's test rows (--part test, default) or its training rows (--part train).
CSV has a header and writes NULL as an empty field; JSON Lines writes one object per row.
User columns only, unless --system adds ss_row, ss_source, ss_line, ss_digest and
ss_norm_digest.

Examples:
   splitsmith export --db pipes.db --split sound --side train --out train.csv
   splitsmith export --db pipes.db --split cv --side train --fold 2 --part train --format jsonl`,
		Flags: []cli.Flag{
			dbFlag(),
			&cli.StringFlag{Name: "split", Usage: "split `NAME`", Required: true},
			&cli.StringFlag{Name: "side", Usage: "`SIDE` to export", Required: true},
			&cli.IntFlag{Name: "fold", Usage: "only fold `K`"},
			&cli.StringFlag{Name: "part", Usage: "with --fold: `PART` test (default) or train"},
			&cli.StringFlag{Name: "out", Usage: "write to `FILE` instead of standard output"},
			&cli.BoolFlag{Name: "system", Usage: "include the ss_ system columns"},
			formatFlag("csv", "csv", "jsonl"),
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef(exportHint, "unexpected argument %q", cc.Args().First())
			}
			format, err := checkChoice(cc, "format", "csv", "jsonl")
			if err != nil {
				return err
			}
			o := exportOptions{db: cc.String("db"), out: cc.String("out"), o: splits.ExportOptions{
				Split: cc.String("split"), Side: cc.String("side"), Fold: cc.Int("fold"), Part: cc.String("part"), Format: format, System: cc.Bool("system")}}
			if o.o.Fold < 0 {
				return usagef(exportHint, "--fold must be 1 or more, got %d", o.o.Fold)
			}
			if o.o.Part != "" {
				if _, err := checkChoice(cc, "part", "test", "train"); err != nil {
					return err
				}
			}
			return runExport(cc.Context, o, s)
		},
	}
}

func runExport(ctx context.Context, o exportOptions, s stdio) (err error) {
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
	w := s.out
	var tmp *os.File
	if o.out != "" && o.out != "-" {
		tmp, err = os.CreateTemp(filepath.Dir(o.out), "."+filepath.Base(o.out)+".tmp-*")
		if err != nil {
			return fmt.Errorf("export %s: %w", o.out, err)
		}
		defer func() {
			if err != nil {
				tmp.Close()
				os.Remove(tmp.Name())
			}
		}()
		w = tmp
	}
	bw := bufio.NewWriter(w)
	n, err := splits.Export(ctx, conn, o.o, bw)
	if err != nil {
		return splitErr(err, exportHint)
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	if tmp != nil {
		if err := tmp.Sync(); err != nil {
			return err
		}
		if err := tmp.Close(); err != nil {
			return err
		}
		if err := os.Rename(tmp.Name(), o.out); err != nil {
			return err
		}
		fmt.Fprintf(s.err, "exported %d rows of %s/%s to %s\n", n, o.o.Split, o.o.Side, o.out)
	}
	return nil
}

var _ io.Writer
