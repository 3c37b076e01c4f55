package main

import "github.com/urfave/cli/v2"

// Placeholder until the demo lands (owner: the profile/demo work, file demo.go).
// The demo calls, in order: demoSplitStep (split.go), demoAuditStep (audit.go),
// demoEstimateStep (estimate_curve.go); db is the demo database with table "pipes" ingested
// and profiled, dir the demo directory.
func newDemoCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "demo", Usage: "(not built yet)"}
}
