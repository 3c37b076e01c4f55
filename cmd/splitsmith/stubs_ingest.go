package main

import "github.com/urfave/cli/v2"

// Placeholders until the ingest work lands; the owner replaces this file with ingest.go and
// profile.go.
func newIngestCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "ingest", Usage: "(not built yet)"}
}
func newProfileCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "profile", Usage: "(not built yet)"}
}
