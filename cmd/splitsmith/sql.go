package main

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"io"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

// toolSQL is the tool's own small set: facts about the running binary.
func toolSQL() sqlfn.Set {
	return sqlfn.Set{Package: "tool", Funcs: []sqlfn.Func{{
		Name: "tool_schema_version", NArgs: 0, Deterministic: true, Args: "",
		Doc:      "the schema version (PRAGMA user_version) this splitsmith writes",
		Examples: []sqlfn.Example{{SQL: "SELECT tool_schema_version() > 0", Want: "1"}},
		Scalar: func([]driver.Value) (driver.Value, error) {
			return int64(store.SchemaVersion()), nil
		},
	}}}
}

type sqlOptions struct {
	db        string
	readOnly  bool
	format    string
	query     string
	functions bool
}

func newSQLCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:      "sql",
		Usage:     "run SQL on a splitsmith database with splitsmith's SQL functions registered",
		ArgsUsage: "[QUERY]",
		Description: `Runs QUERY (or standard input) on the database. Statements are separated by
semicolons; the rows of each statement that returns rows are printed.
--readonly opens the file read-only and denies every write with an authorizer.
Without it, statements may change the file (they are the user's own; they are not recorded
in ss_runs). --functions lists every SQL function with its one-line doc and an example.

Examples:
   splitsmith sql --db pipes.db --readonly "SELECT * FROM ss_runs"
   splitsmith sql --db pipes.db --readonly "SELECT name, sql FROM ss_audit_queries"
   splitsmith sql --functions`,
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "db", Usage: "splitsmith database `FILE`", EnvVars: []string{"SPLITSMITH_DB"}},
			&cli.BoolFlag{Name: "readonly", Usage: "open read-only and deny every write"},
			formatFlag("table", "table", "csv", "json"),
			&cli.BoolFlag{Name: "functions", Usage: "list splitsmith's SQL functions and exit"},
		},
		Action: func(cc *cli.Context) error {
			format, err := checkChoice(cc, "format", "table", "csv", "json")
			if err != nil {
				return err
			}
			opts := sqlOptions{db: cc.String("db"), readOnly: cc.Bool("readonly"), format: format, functions: cc.Bool("functions")}
			if opts.functions {
				return listFunctions(cc.App.Writer, format)
			}
			if opts.db == "" {
				return usagef("splitsmith sql --db pipes.db \"SELECT ...\"", "--db is required")
			}
			switch cc.NArg() {
			case 0:
				b, err := io.ReadAll(cc.App.Reader)
				if err != nil {
					return err
				}
				opts.query = string(b)
			case 1:
				opts.query = cc.Args().First()
			default:
				return usagef("splitsmith sql --db pipes.db \"SELECT ...\"", "give one QUERY argument (quote it), not %d", cc.NArg())
			}
			if strings.TrimSpace(opts.query) == "" {
				return usagef("splitsmith sql --db pipes.db \"SELECT ...\"", "no SQL given")
			}
			return runSQL(cc.Context, opts, cc.App.Writer)
		},
	}
}

func listFunctions(w io.Writer, format string) error {
	t := &table{Header: []string{"name", "kind", "args", "doc", "example", "result"}}
	for _, f := range sqlfn.All(sqlSets()...) {
		ex := f.Examples[0]
		t.add(f.Name, f.Kind(), f.Args, f.Doc, ex.SQL, ex.Want)
	}
	return t.write(w, format)
}

func runSQL(ctx context.Context, opts sqlOptions, w io.Writer) error {
	db, err := openRead(ctx, opts.db, opts.readOnly)
	if err != nil {
		return err
	}
	defer db.Close()
	conn, err := db.Conn(ctx)
	if err != nil {
		return err
	}
	defer conn.Close()
	stmts := splitStatements(opts.query)
	for i, q := range stmts {
		if err := runStatement(ctx, conn, q, w, opts.format); err != nil {
			if len(stmts) > 1 {
				return fmt.Errorf("statement %d: %w", i+1, err)
			}
			return err
		}
	}
	return nil
}

func runStatement(ctx context.Context, conn *sql.Conn, q string, w io.Writer, format string) error {
	rows, err := conn.QueryContext(ctx, q)
	if err != nil {
		return err
	}
	defer rows.Close()
	cols, err := rows.Columns()
	if err != nil {
		return err
	}
	if len(cols) == 0 {
		return rows.Err()
	}
	t := &table{Header: cols}
	vals := make([]any, len(cols))
	ptrs := make([]any, len(cols))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return err
		}
		t.add(vals...)
	}
	if err := rows.Err(); err != nil {
		return err
	}
	return t.write(w, format)
}

// splitStatements splits SQL on semicolons outside quotes and comments.
func splitStatements(q string) []string {
	var out []string
	start := 0
	for i := 0; i < len(q); i++ {
		switch c := q[i]; {
		case c == '\'' || c == '"' || c == '`':
			j := strings.IndexByte(q[i+1:], c)
			if j < 0 {
				i = len(q)
			} else {
				i += j + 1
			}
		case c == '[':
			if j := strings.IndexByte(q[i+1:], ']'); j >= 0 {
				i += j + 1
			}
		case c == '-' && i+1 < len(q) && q[i+1] == '-':
			if j := strings.IndexByte(q[i:], '\n'); j >= 0 {
				i += j
			} else {
				i = len(q)
			}
		case c == '/' && i+1 < len(q) && q[i+1] == '*':
			if j := strings.Index(q[i+2:], "*/"); j >= 0 {
				i += j + 3
			} else {
				i = len(q)
			}
		case c == ';':
			if s := strings.TrimSpace(q[start:i]); s != "" {
				out = append(out, s)
			}
			start = i + 1
		}
	}
	if s := strings.TrimSpace(q[start:]); s != "" && !onlyComments(s) {
		out = append(out, s)
	}
	return out
}

func onlyComments(s string) bool {
	for _, line := range strings.Split(s, "\n") {
		l := strings.TrimSpace(line)
		if l != "" && !strings.HasPrefix(l, "--") {
			return false
		}
	}
	return true
}
