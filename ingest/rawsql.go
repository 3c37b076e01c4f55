package ingest

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"io"
)

// Bulk reads (a million keys, a million rows to audit) go through the driver's own interface
// inside conn.Raw: database/sql's per-row Scan conversion costs more than SQLite's own work
// there. The values are the ones database/sql would hand over (int64, float64, string,
// []byte, nil). splits and leakage read through QueryRaw; inside fn nothing may use conn
// itself (database/sql holds the connection's lock).

// QueryRaw runs query with args and calls fn with each row's values; vals is reused between
// rows, and []byte values must be copied to be kept.
func QueryRaw(ctx context.Context, conn *sql.Conn, query string, args []any, fn func(vals []driver.Value) error) error {
	return conn.Raw(func(dc any) error {
		qc, ok := dc.(driver.QueryerContext)
		if !ok {
			return errors.New("driver connection cannot query with a context")
		}
		nargs := make([]driver.NamedValue, len(args))
		for i, a := range args {
			nargs[i] = driver.NamedValue{Ordinal: i + 1, Value: a}
		}
		rows, err := qc.QueryContext(ctx, query, nargs)
		if err != nil {
			return err
		}
		closed := false
		defer func() {
			if !closed {
				rows.Close() // modernc must not finalize a statement twice
			}
		}()
		vals := make([]driver.Value, len(rows.Columns()))
		for {
			if err := rows.Next(vals); err != nil {
				if err == io.EOF {
					break
				}
				return err
			}
			if err := fn(vals); err != nil {
				return err
			}
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		closed = true
		return rows.Close()
	})
}

// RawStmt is a statement prepared through the driver's own interface (inside conn.Raw) and
// executed without database/sql: the bulk writers of ingest, splits and leakage use it.
type RawStmt struct {
	st driver.Stmt
	ex driver.StmtExecContext
}

// PrepareRaw prepares query on dc, the driver connection conn.Raw hands over.
func PrepareRaw(ctx context.Context, dc any, query string) (*RawStmt, error) {
	pc, ok := dc.(driver.ConnPrepareContext)
	if !ok {
		return nil, errors.New("driver connection cannot prepare statements")
	}
	st, err := pc.PrepareContext(ctx, query)
	if err != nil {
		return nil, err
	}
	ex, ok := st.(driver.StmtExecContext)
	if !ok {
		st.Close()
		return nil, errors.New("driver statement cannot execute with a context")
	}
	return &RawStmt{st, ex}, nil
}

// Exec executes the statement with args (Ordinal 1..n).
func (s *RawStmt) Exec(ctx context.Context, args []driver.NamedValue) error {
	_, err := s.ex.ExecContext(ctx, args)
	return err
}

// Close finalizes the statement.
func (s *RawStmt) Close() error { return s.st.Close() }
