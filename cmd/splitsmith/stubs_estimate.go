package main

import "github.com/urfave/cli/v2"

// Placeholder until the estimate work lands; its owner replaces this file with estimate.go,
// whose subcommands are points, formula and curve (newEstimateCurveCommand).
func newEstimateCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "estimate", Usage: "(not built yet)", Subcommands: []*cli.Command{newEstimateCurveCommand(s)}}
}
