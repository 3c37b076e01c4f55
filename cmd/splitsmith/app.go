package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"reflect"
	"strings"
	"syscall"

	"github.com/urfave/cli/v2"

	"splitsmith/estimate"
	"splitsmith/ingest"
	"splitsmith/internal/sqlfn"
	"splitsmith/leakage"
	"splitsmith/splits"
)

// sqlSets is THE list of SQL function sets: every database splitsmith opens carries them.
func sqlSets() []sqlfn.Set {
	return []sqlfn.Set{toolSQL(), ingest.SQL(), splits.SQL(), leakage.SQL(), estimate.SQL()}
}

// stdio carries the streams a command uses; tests pass buffers.
type stdio struct {
	in       io.Reader
	out, err io.Writer
}

func newApp(s stdio) *cli.App {
	app := &cli.App{
		Name:      "splitsmith",
		Usage:     "leak-free train/holdout splits in SQLite, leakage audits, and sample-size estimates",
		Version:   toolVersion(),
		Reader:    s.in,
		Writer:    s.out,
		ErrWriter: s.err,
		// The default handler calls os.Exit inside Run; run() maps errors to exit codes.
		ExitErrHandler:  func(*cli.Context, error) {},
		HideHelpCommand: true,
		Description:     exitStatusHelp,
		OnUsageError:    onUsageError,
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef("splitsmith --help", "unknown command %q", cc.Args().First())
			}
			return cli.ShowAppHelp(cc)
		},
		Commands: []*cli.Command{
			newDemoCommand(s),
			newIngestCommand(s),
			newProfileCommand(s),
			newSplitCommand(s),
			newVerifyCommand(s),
			newSplitsCommand(s),
			newExportCommand(s),
			newAuditCommand(s),
			newEstimateCommand(s),
			newSQLCommand(s),
		},
	}
	for _, c := range app.Commands {
		prepare(c)
	}
	return app
}

// prepare gives every command (and subcommand) the usage-error handler, the exit status in
// its help, and the positional-argument guard.
func prepare(c *cli.Command) {
	c.OnUsageError = onUsageError
	if !strings.Contains(c.Description, "EXIT STATUS") {
		if c.Description != "" {
			c.Description += "\n\n"
		}
		c.Description += exitStatusHelp
	}
	required := takeRequired(c.Flags)
	if c.Action != nil {
		act := c.Action
		c.Action = func(cc *cli.Context) error {
			if err := flagsAfterArgs(cc); err != nil {
				return err
			}
			for _, name := range required {
				if !cc.IsSet(name) {
					return usagef("splitsmith "+cc.Command.FullName()+" --help", "--%s is required", name)
				}
			}
			return act(cc)
		}
	}
	for _, sc := range c.Subcommands {
		prepare(sc)
	}
}

// takeRequired clears the Required mark of each flag and returns their names: urfave/cli v2
// answers a missing required flag by printing the whole help to stdout and exiting 1, where
// splitsmith wants one line on stderr and exit 2 (checked in prepare's Action wrapper).
func takeRequired(flags []cli.Flag) []string {
	var names []string
	for _, f := range flags {
		rf, ok := f.(cli.RequiredFlag)
		if !ok || !rf.IsRequired() {
			continue
		}
		v := reflect.ValueOf(f)
		if v.Kind() != reflect.Pointer || v.Elem().Kind() != reflect.Struct {
			continue
		}
		if fld := v.Elem().FieldByName("Required"); fld.IsValid() && fld.CanSet() && fld.Kind() == reflect.Bool {
			fld.SetBool(false)
			names = append(names, f.Names()[0])
		}
	}
	return names
}

func onUsageError(cc *cli.Context, err error, _ bool) error {
	hint := ""
	if cc != nil && cc.Command != nil && cc.Command.Name != "" {
		hint = "splitsmith " + cc.Command.FullName() + " --help"
	}
	return &usageError{err: err, hint: hint}
}

// flagsAfterArgs rejects flags that follow positional arguments: urfave/cli v2 would silently
// take them as arguments.
func flagsAfterArgs(cc *cli.Context) error {
	for _, a := range cc.Args().Slice() {
		if strings.HasPrefix(a, "-") && a != "-" {
			return usagef("splitsmith "+cc.Command.FullName()+" --help", "flag %s must come before positional arguments", a)
		}
	}
	return nil
}

func run(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	app := newApp(stdio{in: stdin, out: stdout, err: stderr})
	err := app.RunContext(ctx, args)
	if err != nil {
		fmt.Fprintf(stderr, "splitsmith: %s\n", err)
		var u *usageError
		if asU := asUsageErr(err, &u); asU && u.hint != "" {
			fmt.Fprintf(stderr, "hint: %s\n", u.hint)
		}
	}
	return exitCode(err)
}

func asUsageErr(err error, u **usageError) bool {
	for e := err; e != nil; {
		if x, ok := e.(*usageError); ok {
			*u = x
			return true
		}
		un, ok := e.(interface{ Unwrap() error })
		if !ok {
			return false
		}
		e = un.Unwrap()
	}
	return false
}
