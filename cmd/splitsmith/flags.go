package main

import (
	"context"
	"os"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/internal/store"
)

// Shared flags. Each command lists the ones it takes.
func dbFlag() *cli.StringFlag {
	return &cli.StringFlag{Name: "db", Usage: "splitsmith database `FILE` (required; or $SPLITSMITH_DB)", EnvVars: []string{"SPLITSMITH_DB"}, Required: true}
}

func formatFlag(def string, allowed ...string) *cli.StringFlag {
	return &cli.StringFlag{Name: "format", Value: def, Usage: "output format: " + strings.Join(allowed, ", ")}
}

func seedFlag() *cli.Uint64Flag {
	return &cli.Uint64Flag{Name: "seed", Value: 1, Usage: "`SEED` for every random choice (results are a pure function of data, options and seed)"}
}

func failOnFlag() *cli.StringFlag {
	return &cli.StringFlag{Name: "fail-on", Usage: "exit 3 when a finding has this `SEVERITY` or worse: warn or error"}
}

// checkChoice validates an enumerated flag value.
func checkChoice(cc *cli.Context, flag string, allowed ...string) (string, error) {
	v := cc.String(flag)
	for _, a := range allowed {
		if v == a {
			return v, nil
		}
	}
	return "", usagef("splitsmith "+cc.Command.FullName()+" --help", "--%s: %q is not one of %s", flag, v, strings.Join(allowed, ", "))
}

// severityRank orders severities: info < warn < error.
func severityRank(s string) int {
	switch s {
	case "info":
		return 1
	case "warn":
		return 2
	case "error":
		return 3
	}
	return 0
}

func checkFailOn(cc *cli.Context) (string, error) {
	v := cc.String("fail-on")
	if v == "" || v == "warn" || v == "error" {
		return v, nil
	}
	return "", usagef("splitsmith "+cc.Command.FullName()+" --help", "--fail-on: %q is not one of warn, error", v)
}

// openRead opens an existing database for reading (functions registered).
func openRead(ctx context.Context, path string, readOnly bool) (*store.DB, error) {
	return store.Open(ctx, path, store.Options{SQL: sqlSets(), ReadOnly: readOnly})
}

// update runs fn as one writing command recorded in ss_runs.
func update(ctx context.Context, cc *cli.Context, path string, create bool, fn func(context.Context, *store.Tx) error) error {
	return store.Update(ctx, path, store.Options{SQL: sqlSets()}, create, store.Run{Command: cc.Command.FullName(), Args: runArgs(cc)}, fn)
}

// runArgs is the command line after the program name as this app parsed it: the root
// context's arguments, so a command the demo runs in-process records its own arguments
// rather than the demo's (os.Args).
func runArgs(cc *cli.Context) []string {
	l := cc.Lineage()
	for i := len(l) - 1; i >= 0; i-- { // the outermost context holding arguments is the app's
		if l[i] != nil && l[i].Args().Present() {
			return l[i].Args().Slice()
		}
	}
	return os.Args[1:]
}

func toolVersion() string { return store.ToolVersion() }

// isTerminal reports whether f is a terminal, for progress output.
func isTerminal(f any) bool {
	file, ok := f.(*os.File)
	if !ok {
		return false
	}
	st, err := file.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}
