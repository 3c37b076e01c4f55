package main

import (
	"errors"
	"fmt"
)

// Exit status, documented in every command's help and in README.md.
const (
	exitOK       = 0 // success
	exitError    = 1 // the command failed (bad data, I/O); nothing was written
	exitUsage    = 2 // bad flags or arguments; nothing was written
	exitFindings = 3 // findings at or above --fail-on (profile, audit, verify)
)

const exitStatusHelp = `EXIT STATUS
   0  success
   1  error (bad data, unreadable file); the database is unchanged
   2  usage error (bad flag, unknown column, bad argument); the database is unchanged
   3  findings at or above --fail-on (profile, audit), or a split that no longer verifies`

// usageError marks a mistake in how the command was called.
type usageError struct {
	err  error
	hint string
}

func (e *usageError) Error() string { return e.err.Error() }
func (e *usageError) Unwrap() error { return e.err }

func usagef(hint, format string, a ...any) error {
	return &usageError{err: fmt.Errorf(format, a...), hint: hint}
}

// asUsage marks err as a usage error (keeping nil as nil).
func asUsage(err error, hint string) error {
	if err == nil {
		return nil
	}
	var u *usageError
	if errors.As(err, &u) {
		return err
	}
	return &usageError{err: err, hint: hint}
}

// findingsError reports that the command succeeded, wrote its results, and found something
// at or above the requested severity.
type findingsError struct{ msg string }

func (e *findingsError) Error() string { return e.msg }

func exitCode(err error) int {
	var u *usageError
	var f *findingsError
	switch {
	case err == nil:
		return exitOK
	case errors.As(err, &f):
		return exitFindings
	case errors.As(err, &u):
		return exitUsage
	}
	return exitError
}
