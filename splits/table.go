package splits

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"
)

// Column is a user column of an ingested table.
type Column struct {
	Name    string
	Logical string // INTEGER, REAL, BOOLEAN, DATE, TIMESTAMP, TEXT (from ss_columns; else the declared type)
}

// Table is an ingested table's shape.
type Table struct {
	Name    string
	Columns []Column // user columns in table order
	system  []string // the system columns it has, in table order
}

// systemColumns are the system columns every ingested table has; optionalSystem those a table
// made by an older version may lack (ss_norm_digest, the normalised digest).
var (
	systemColumns  = []string{"ss_row", "ss_source", "ss_line", "ss_digest"}
	optionalSystem = []string{"ss_norm_digest"}
)

func quoteIdent(s string) string  { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }
func quoteString(s string) string { return `'` + strings.ReplaceAll(s, `'`, `''`) + `'` }

// ReadTable reads an ingested table's user columns and their logical types.
func ReadTable(ctx context.Context, conn *sql.Conn, name string) (*Table, error) {
	var typ string
	err := conn.QueryRowContext(ctx, `SELECT type FROM sqlite_schema WHERE name = ? COLLATE NOCASE AND type IN ('table','view')`, name).Scan(&typ)
	if errors.Is(err, sql.ErrNoRows) {
		var names []string
		rows, err := conn.QueryContext(ctx, `SELECT DISTINCT table_name FROM ss_sources ORDER BY table_name`)
		if err == nil {
			for rows.Next() {
				var n string
				rows.Scan(&n)
				names = append(names, n)
			}
			rows.Close()
		}
		hint := ""
		if len(names) > 0 {
			hint = " (ingested tables: " + strings.Join(names, ", ") + ")"
		}
		return nil, fieldErr("table", "no table %q in the database%s", name, hint)
	}
	if err != nil {
		return nil, fmt.Errorf("read table %s: %w", name, err)
	}
	if typ != "table" {
		return nil, fieldErr("table", "%q is a view; split an ingested table", name)
	}
	// Column names and declared types from the statement itself (read-only connections deny
	// the table_info pragma with an argument).
	rows, err := conn.QueryContext(ctx, `SELECT * FROM `+quoteIdent(name)+` LIMIT 0`)
	if err != nil {
		return nil, fmt.Errorf("read table %s: %w", name, err)
	}
	cts, err := rows.ColumnTypes()
	rows.Close()
	if err != nil {
		return nil, fmt.Errorf("read table %s: %w", name, err)
	}
	t := &Table{Name: name}
	sys := map[string]bool{}
	for _, ct := range cts {
		c := ct.Name()
		if isSystem(c) {
			sys[c] = true
			t.system = append(t.system, c)
			continue
		}
		t.Columns = append(t.Columns, Column{Name: c, Logical: strings.ToUpper(ct.DatabaseTypeName())})
	}
	for _, s := range systemColumns {
		if !sys[s] {
			return nil, fieldErr("table", "table %q has no %s column: split tables loaded by splitsmith ingest", name, s)
		}
	}
	lt := map[string]string{}
	rows, err = conn.QueryContext(ctx, `SELECT name, logical_type FROM ss_columns WHERE table_name = ?`, name)
	if err != nil {
		return nil, fmt.Errorf("read table %s: %w", name, err)
	}
	for rows.Next() {
		var c, l string
		rows.Scan(&c, &l)
		lt[c] = l
	}
	rows.Close()
	for i := range t.Columns {
		if l, ok := lt[t.Columns[i].Name]; ok {
			t.Columns[i].Logical = l
		}
	}
	return t, nil
}

func isSystem(c string) bool {
	for _, s := range systemColumns {
		if s == c {
			return true
		}
	}
	for _, s := range optionalSystem {
		if s == c {
			return true
		}
	}
	return false
}

// column finds a user column (or ss_source when allowSource) by exact name.
func (t *Table) column(field, name string, allowSource bool) (Column, error) {
	if allowSource && name == "ss_source" {
		return Column{Name: name, Logical: "TEXT"}, nil
	}
	for _, c := range t.Columns {
		if c.Name == name {
			return c, nil
		}
	}
	names := make([]string, len(t.Columns))
	for i, c := range t.Columns {
		names[i] = c.Name
	}
	return Column{}, fieldErr(field, "unknown column %q in table %s (columns: %s)", name, t.Name, strings.Join(names, ", "))
}
