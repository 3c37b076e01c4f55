package main

import (
	"context"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

// Every SQL function is valid, documented, and its examples give their stated results.
func TestSQLFunctions_Examples(t *testing.T) {
	if err := sqlfn.Validate(sqlSets()...); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "x.db")
	if err := store.Update(ctx, path, store.Options{SQL: sqlSets()}, true, store.Run{Command: "test"}, func(context.Context, *store.Tx) error { return nil }); err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(ctx, path, store.Options{SQL: sqlSets(), ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	for _, f := range sqlfn.All(sqlSets()...) {
		for _, ex := range f.Examples {
			var got any
			if err := db.QueryRowContext(ctx, ex.SQL).Scan(&got); err != nil {
				t.Errorf("%s: %s: %v", f.Name, ex.SQL, err)
				continue
			}
			if g := sqlfn.Render(got); g != ex.Want {
				t.Errorf("%s: %s = %s, want %s", f.Name, ex.SQL, g, ex.Want)
			}
		}
	}
}

// The dependency direction of DEVELOPERS.md holds: domain packages never import the store,
// the command or urfave/cli, and nothing imports upward.
func TestDependencyDirection(t *testing.T) {
	forbidden := map[string][]string{
		"splitsmith/internal/sqlfn": {"splitsmith/internal/store", "splitsmith/ingest", "splitsmith/splits", "splitsmith/leakage", "splitsmith/estimate", "github.com/urfave/cli/v2"},
		"splitsmith/internal/store": {"splitsmith/ingest", "splitsmith/splits", "splitsmith/leakage", "splitsmith/estimate", "github.com/urfave/cli/v2"},
		"splitsmith/ingest":         {"splitsmith/internal/store", "splitsmith/splits", "splitsmith/leakage", "splitsmith/estimate", "github.com/urfave/cli/v2"},
		"splitsmith/splits":         {"splitsmith/internal/store", "splitsmith/leakage", "splitsmith/estimate", "github.com/urfave/cli/v2"},
		"splitsmith/leakage":        {"splitsmith/internal/store", "splitsmith/estimate", "github.com/urfave/cli/v2"},
		"splitsmith/estimate":       {"splitsmith/internal/store", "splitsmith/leakage", "github.com/urfave/cli/v2"},
	}
	for pkg, bad := range forbidden {
		out, err := exec.Command("go", "list", "-deps", pkg).Output()
		if err != nil {
			t.Fatalf("go list -deps %s: %v", pkg, err)
		}
		deps := map[string]bool{}
		for _, d := range strings.Fields(string(out)) {
			deps[d] = true
		}
		for _, b := range bad {
			if deps[b] {
				t.Errorf("%s must not depend on %s", pkg, b)
			}
		}
	}
}
