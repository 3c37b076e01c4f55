package main

import (
	"context"
	"io"

	"github.com/urfave/cli/v2"
)

// Placeholders until the splits work lands; the owner replaces this file.
func newSplitCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "split", Usage: "(not built yet)"}
}
func newVerifyCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "verify", Usage: "(not built yet)"}
}
func newSplitsCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "splits", Usage: "(not built yet)"}
}
func newExportCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "export", Usage: "(not built yet)"}
}

// demoSplitStep is the demo's split step (see stubs_demo.go); a no-op until built.
func demoSplitStep(ctx context.Context, w io.Writer, db, dir string) error { return nil }
