package main

import "context"

// runCLI runs one splitsmith command in-process (the demo chains commands this way, so it
// exercises exactly what a user runs). It returns the command's error, not an exit code.
func runCLI(ctx context.Context, s stdio, args ...string) error {
	return newApp(s).RunContext(ctx, append([]string{"splitsmith"}, args...))
}
