package main

import (
	"context"
	"database/sql"
	"fmt"
	"os"
	"sort"
	"strings"
	"testing"

	"github.com/rogpeppe/go-internal/testscript"

	"splitsmith/internal/store"
)

// TestMain lets the test binary act as the splitsmith command inside scripts.
func TestMain(m *testing.M) {
	testscript.Main(m, map[string]func(){
		"splitsmith": func() { os.Exit(run(os.Args, os.Stdin, os.Stdout, os.Stderr)) },
	})
}

// TestScripts runs testdata/script/*.txtar: each names the command and behaviour it covers
// (<command>_<behaviour>.txtar). Besides testscript's own commands, scripts have
//
//	dbdump FILE    print the database's schema and every row of every table, sorted, so that
//	               "cp/dbdump before; ! exec ...; dbdump after; cmp" proves nothing changed
//	               (ss_runs times are masked).
func TestScripts(t *testing.T) {
	testscript.Run(t, testscript.Params{
		Dir:                 "../../testdata/script",
		RequireExplicitExec: true,
		RequireUniqueNames:  true,
		UpdateScripts:       os.Getenv("UPDATE_GOLDEN") != "",
		Setup: func(env *testscript.Env) error {
			env.Setenv("SOURCE_DATE_EPOCH", "1767225600") // 2026-01-01T00:00:00Z
			return nil
		},
		Cmds: map[string]func(ts *testscript.TestScript, neg bool, args []string){
			"dbdump": func(ts *testscript.TestScript, neg bool, args []string) {
				if len(args) != 1 {
					ts.Fatalf("usage: dbdump FILE")
				}
				out, err := dumpDB(ts.MkAbs(args[0]))
				if neg {
					if err == nil {
						ts.Fatalf("dbdump succeeded unexpectedly")
					}
					return
				}
				ts.Check(err)
				fmt.Fprint(ts.Stdout(), out)
			},
		},
	})
}

// dumpDB renders a database's full content deterministically.
func dumpDB(path string) (string, error) {
	ctx := context.Background()
	db, err := store.Open(ctx, path, store.Options{ReadOnly: true})
	if err != nil {
		return "", err
	}
	defer db.Close()
	var b strings.Builder
	rows, err := db.Query(`SELECT type, name, coalesce(sql,'') FROM sqlite_schema ORDER BY type, name`)
	if err != nil {
		return "", err
	}
	var tables []string
	for rows.Next() {
		var typ, name, q string
		rows.Scan(&typ, &name, &q)
		fmt.Fprintf(&b, "%s %s: %s\n", typ, name, q)
		if typ == "table" {
			tables = append(tables, name)
		}
	}
	rows.Close()
	for _, tname := range tables {
		lines, err := dumpTable(db.DB, tname)
		if err != nil {
			return "", err
		}
		fmt.Fprintf(&b, "-- %s (%d rows)\n%s", tname, len(lines), strings.Join(lines, ""))
	}
	return b.String(), nil
}

func dumpTable(db *sql.DB, name string) ([]string, error) {
	rows, err := db.Query(`SELECT * FROM ` + store.QuoteIdent(name))
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	cols, _ := rows.Columns()
	vals := make([]any, len(cols))
	ptrs := make([]any, len(cols))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	var lines []string
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return nil, err
		}
		var parts []string
		for i, v := range vals {
			c := cell(v)
			if name == "ss_runs" && (cols[i] == "started_at" || cols[i] == "ended_at") {
				c = "<time>"
			}
			parts = append(parts, cols[i]+"="+c)
		}
		lines = append(lines, strings.Join(parts, " ")+"\n")
	}
	sort.Strings(lines)
	return lines, rows.Err()
}
