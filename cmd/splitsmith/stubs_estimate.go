package main

import (
	"context"
	"io"

	"github.com/urfave/cli/v2"
)

// Placeholder until the estimate work lands; the owner replaces this file with estimate.go.
func newEstimateCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "estimate", Usage: "(not built yet)"}
}

// demoEstimateStep is the demo's estimate step (see stubs_demo.go); a no-op until built.
func demoEstimateStep(ctx context.Context, w io.Writer, db, dir string) error { return nil }
