package main

import (
	"context"
	"io"

	"github.com/urfave/cli/v2"
)

// Placeholder until the learning-curve work lands; its owner replaces this file with
// estimate_curve.go. newEstimateCommand (estimate.go) lists this as its "curve" subcommand.
func newEstimateCurveCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "curve", Usage: "(not built yet)"}
}

// demoEstimateStep is the demo's estimate step (see stubs_demo.go); a no-op until built.
func demoEstimateStep(ctx context.Context, w io.Writer, db, dir string) error { return nil }
