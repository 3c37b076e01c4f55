package main

import "github.com/urfave/cli/v2"

// Placeholder until the ingest work lands; its owner replaces this file with ingest.go.
func newIngestCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "ingest", Usage: "(not built yet)"}
}
