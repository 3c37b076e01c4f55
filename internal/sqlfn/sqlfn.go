// Package sqlfn declares splitsmith's SQL functions as plain values and registers them on a
// private modernc.org/sqlite driver.
//
// Each domain package exports SQL() Set; cmd/splitsmith assembles the sets in one literal list
// and the store registers them before its first connection opens. Nothing registers itself
// from init(): modernc's package-level registry is process-global and errors on duplicates.
package sqlfn

import (
	"database/sql/driver"
	"errors"
	"fmt"
	"regexp"
	"sort"
	"strings"

	"modernc.org/sqlite"
)

// Example is one documented use of a function; tests run every example and compare the
// result, rendered with Render, to Want.
type Example struct {
	SQL  string // a complete SELECT returning one row and one column
	Want string // the expected value as Render prints it ("NULL" for NULL)
}

// Agg is one evaluation of an aggregate function.
type Agg interface {
	Step(args []driver.Value) error
	Value() (driver.Value, error)
}

// Func describes one SQL function. Exactly one of Scalar and NewAgg is set.
type Func struct {
	Name          string // ^(ingest|split|leak|est|tool)_[a-z0-9_]+$
	NArgs         int    // -1 for variadic
	Deterministic bool   // pure: same arguments, same result; no time, env or globals
	Args          string // argument list as documented, e.g. "key, seed, n"
	Doc           string // one lowercase line: what it returns
	Examples      []Example
	Scalar        func(args []driver.Value) (driver.Value, error)
	NewAgg        func() Agg
}

// Kind is "scalar" or "aggregate".
func (f Func) Kind() string {
	if f.NewAgg != nil {
		return "aggregate"
	}
	return "scalar"
}

// Set is the functions one package declares.
type Set struct {
	Package string
	Funcs   []Func
}

var nameRE = regexp.MustCompile(`^(ingest|split|leak|est|tool)_[a-z0-9_]+$`)

// builtins that a tool function must never shadow (the prefix rule already excludes all of
// SQLite's own names; this list guards the rule itself).
var builtins = map[string]bool{"abs": true, "sum": true, "count": true, "total": true, "avg": true}

// Validate checks names, uniqueness, docs and examples across all sets.
func Validate(sets ...Set) error {
	seen := map[string]string{}
	var errs []error
	for _, s := range sets {
		for _, f := range s.Funcs {
			switch {
			case !nameRE.MatchString(f.Name):
				errs = append(errs, fmt.Errorf("sqlfn: %s: name %q must match %s", s.Package, f.Name, nameRE))
			case builtins[f.Name]:
				errs = append(errs, fmt.Errorf("sqlfn: %s: %q shadows a builtin", s.Package, f.Name))
			case seen[f.Name] != "":
				errs = append(errs, fmt.Errorf("sqlfn: %q declared by both %s and %s", f.Name, seen[f.Name], s.Package))
			}
			seen[f.Name] = s.Package
			if strings.TrimSpace(f.Doc) == "" || strings.Contains(f.Doc, "\n") {
				errs = append(errs, fmt.Errorf("sqlfn: %s: doc must be one non-empty line", f.Name))
			}
			if len(f.Examples) == 0 {
				errs = append(errs, fmt.Errorf("sqlfn: %s: at least one example is required", f.Name))
			}
			if (f.Scalar == nil) == (f.NewAgg == nil) {
				errs = append(errs, fmt.Errorf("sqlfn: %s: exactly one of Scalar and NewAgg must be set", f.Name))
			}
		}
	}
	return errors.Join(errs...)
}

// All returns every function of the sets sorted by name.
func All(sets ...Set) []Func {
	var out []Func
	for _, s := range sets {
		out = append(out, s.Funcs...)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out
}

// Register validates the sets and registers every function on d. It must run before d opens
// its first connection.
func Register(d *sqlite.Driver, sets ...Set) error {
	if err := Validate(sets...); err != nil {
		return err
	}
	for _, f := range All(sets...) {
		f := f
		impl := &sqlite.FunctionImpl{NArgs: int32(f.NArgs), Deterministic: f.Deterministic}
		if f.Scalar != nil {
			impl.Scalar = func(_ *sqlite.FunctionContext, args []driver.Value) (driver.Value, error) {
				v, err := f.Scalar(args)
				if err != nil {
					return nil, fmt.Errorf("%s: %w", f.Name, err)
				}
				return v, nil
			}
		} else {
			impl.MakeAggregate = func(sqlite.FunctionContext) (sqlite.AggregateFunction, error) {
				return &aggAdapter{name: f.Name, a: f.NewAgg()}, nil
			}
		}
		if err := d.RegisterFunction(f.Name, impl); err != nil {
			return fmt.Errorf("sqlfn: register %s: %w", f.Name, err)
		}
	}
	return nil
}

type aggAdapter struct {
	name string
	a    Agg
	err  error
}

func (g *aggAdapter) Step(_ *sqlite.FunctionContext, args []driver.Value) error {
	if err := g.a.Step(args); err != nil {
		return fmt.Errorf("%s: %w", g.name, err)
	}
	return nil
}
func (g *aggAdapter) WindowInverse(*sqlite.FunctionContext, []driver.Value) error {
	return fmt.Errorf("%s: not usable as a sliding window function", g.name)
}
func (g *aggAdapter) WindowValue(*sqlite.FunctionContext) (driver.Value, error) {
	v, err := g.a.Value()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", g.name, err)
	}
	return v, nil
}
func (g *aggAdapter) Final(*sqlite.FunctionContext) {}
