package main

import "github.com/urfave/cli/v2"

// Placeholder until the profile work lands; its owner replaces this file with profile.go.
func newProfileCommand(s stdio) *cli.Command {
	return &cli.Command{Name: "profile", Usage: "(not built yet)"}
}
