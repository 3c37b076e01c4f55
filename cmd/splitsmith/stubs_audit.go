package main

import (
	"context"
	"io"

	"github.com/urfave/cli/v2"
)

// Placeholder until the leakage work lands; the owner replaces this file with audit.go.
func newAuditCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "audit", Usage: "(not built yet)"}
}

// demoAuditStep is the demo's audit step (see stubs_demo.go); a no-op until built.
func demoAuditStep(ctx context.Context, w io.Writer, db, dir string) error { return nil }
