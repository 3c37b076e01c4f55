// Package store is the only way splitsmith opens a database file.
//
// It registers splitsmith's SQL functions on a private driver, versions the schema with
// PRAGMA user_version and embedded migrations, runs every writing command in one transaction
// and records it in ss_runs, and builds a new file beside its target and renames it into
// place, so an interrupted command leaves the file exactly as it was (or absent).
//
// Naming rule: every table splitsmith owns starts with "ss_"; user tables and columns may not.
package store

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"net/url"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"

	"modernc.org/sqlite"

	"splitsmith/internal/sqlfn"
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// Options say how to open a database.
type Options struct {
	SQL      []sqlfn.Set // functions to register on the private driver
	ReadOnly bool        // open mode=ro and deny every write with an authorizer
}

// DB is an open splitsmith database.
type DB struct {
	*sql.DB
	Path     string
	ReadOnly bool
}

// ErrNotExist is returned by Open for a missing file.
var ErrNotExist = errors.New("database does not exist")

// SchemaVersion is the number of embedded migrations: the user_version this binary writes.
func SchemaVersion() int { return len(migrations()) }

func migrations() []string {
	names, _ := fs.Glob(migrationFS, "migrations/*.sql")
	sort.Strings(names)
	return names
}

// drivers caches one private driver per distinct set list, since a driver cannot take new
// functions after its first Open. In the program there is one; tests may build several.
var (
	driversMu sync.Mutex
	drivers   = map[string]*sqlite.Driver{}
)

func driverFor(sets []sqlfn.Set) (*sqlite.Driver, error) {
	var key strings.Builder
	for _, s := range sets {
		key.WriteString(s.Package)
		for _, f := range s.Funcs {
			key.WriteString("," + f.Name)
		}
		key.WriteString(";")
	}
	driversMu.Lock()
	defer driversMu.Unlock()
	if d, ok := drivers[key.String()]; ok {
		return d, nil
	}
	d := &sqlite.Driver{}
	if err := sqlfn.Register(d, sets...); err != nil {
		return nil, err
	}
	drivers[key.String()] = d
	return d, nil
}

type connector struct {
	d        *sqlite.Driver
	dsn      string
	sets     []sqlfn.Set
	readOnly bool
}

func (c *connector) Driver() driver.Driver { return c.d }

func (c *connector) Connect(ctx context.Context) (driver.Conn, error) {
	conn, err := c.d.Open(c.dsn)
	if err != nil {
		return nil, err
	}
	if err := installCatalog(ctx, conn, c.sets); err != nil {
		conn.Close()
		return nil, err
	}
	if c.readOnly {
		ar, ok := conn.(sqlite.AuthorizerRegisterer)
		if !ok {
			conn.Close()
			return nil, errors.New("store: driver has no authorizer")
		}
		if err := ar.RegisterAuthorizer(readOnlyAuthorizer); err != nil {
			conn.Close()
			return nil, err
		}
	}
	return conn, nil
}

// installCatalog creates temp.tool_functions on each connection: the function catalog as a
// table, visible to every pooled connection and never written to the file.
func installCatalog(ctx context.Context, conn driver.Conn, sets []sqlfn.Set) error {
	ex, ok := conn.(driver.ExecerContext)
	if !ok {
		return errors.New("store: connection cannot exec")
	}
	if _, err := ex.ExecContext(ctx, `CREATE TEMP TABLE tool_functions(name TEXT PRIMARY KEY, package TEXT, kind TEXT, nargs INTEGER, args TEXT, deterministic INTEGER, doc TEXT, example TEXT, example_result TEXT)`, nil); err != nil {
		return fmt.Errorf("store: catalog: %w", err)
	}
	for _, s := range sets {
		for _, f := range s.Funcs {
			var ex0, want string
			if len(f.Examples) > 0 {
				ex0, want = f.Examples[0].SQL, f.Examples[0].Want
			}
			det := int64(0)
			if f.Deterministic {
				det = 1
			}
			args := []driver.NamedValue{{Ordinal: 1, Value: f.Name}, {Ordinal: 2, Value: s.Package}, {Ordinal: 3, Value: f.Kind()},
				{Ordinal: 4, Value: int64(f.NArgs)}, {Ordinal: 5, Value: f.Args}, {Ordinal: 6, Value: det}, {Ordinal: 7, Value: f.Doc},
				{Ordinal: 8, Value: ex0}, {Ordinal: 9, Value: want}}
			if _, err := ex.ExecContext(ctx, `INSERT INTO temp.tool_functions VALUES(?,?,?,?,?,?,?,?,?)`, args); err != nil {
				return fmt.Errorf("store: catalog: %w", err)
			}
		}
	}
	return nil
}

// readOnlyAuthorizer allows reading and nothing else. mode=ro already refuses writes to the
// file; the authorizer also refuses temp tables, ATTACH (which could open another file for
// writing) and pragmas that set a value.
func readOnlyAuthorizer(action sqlite.AuthorizerActionCode, arg1, arg2, dbName, _ string) sqlite.AuthorizerReturnCode {
	switch action {
	case sqlite.AuthSelect, sqlite.AuthRead, sqlite.AuthFunction, sqlite.AuthRecursive, sqlite.AuthTransaction, sqlite.AuthSavepoint:
		return sqlite.AuthorizerOK
	case sqlite.AuthPragma:
		name := strings.ToLower(arg1)
		if readingPragma[name] || (arg2 == "" && !writingPragma[name]) {
			return sqlite.AuthorizerOK
		}
	}
	return sqlite.AuthorizerDeny
}

// readingPragma are pragmas whose argument names what to read (pragma_table_info('t')), never a
// value to set.
var readingPragma = map[string]bool{"table_info": true, "table_xinfo": true, "table_list": true, "index_list": true,
	"index_info": true, "index_xinfo": true, "foreign_key_list": true, "foreign_key_check": true, "integrity_check": true,
	"quick_check": true, "database_list": true, "function_list": true, "collation_list": true, "module_list": true,
	"pragma_list": true, "compile_options": true}

var writingPragma = map[string]bool{"optimize": true, "incremental_vacuum": true, "wal_checkpoint": true, "shrink_memory": true}

func dsn(path string, readOnly, build bool) string {
	q := url.Values{}
	q.Add("_pragma", "busy_timeout(5000)")
	q.Add("_pragma", "foreign_keys(1)")
	q.Set("_dqs", "0")
	if readOnly {
		q.Set("mode", "ro")
	} else if build {
		// A file being built beside its target: atomicity comes from the final rename, so
		// the rollback journal and syncs are not needed until then.
		q.Add("_pragma", "journal_mode(OFF)")
		q.Add("_pragma", "synchronous(OFF)")
	} else {
		q.Add("_pragma", "journal_mode(DELETE)")
		q.Add("_pragma", "synchronous(FULL)")
	}
	return "file:" + (&url.URL{Path: path}).EscapedPath() + "?" + q.Encode()
}

func openRaw(path string, opts Options, build bool) (*DB, error) {
	d, err := driverFor(opts.SQL)
	if err != nil {
		return nil, err
	}
	db := sql.OpenDB(&connector{d: d, dsn: dsn(path, opts.ReadOnly, build), sets: opts.SQL, readOnly: opts.ReadOnly})
	if !opts.ReadOnly {
		db.SetMaxOpenConns(1)
	}
	return &DB{DB: db, Path: path, ReadOnly: opts.ReadOnly}, nil
}

// Open opens an existing splitsmith database, checking its schema version. A file written by
// a newer splitsmith is refused; an older one is migrated (unless read-only, where it must be
// current).
func Open(ctx context.Context, path string, opts Options) (*DB, error) {
	if _, err := os.Stat(path); err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: %w (create it with: splitsmith ingest --db %s FILE)", path, ErrNotExist, path)
		}
		return nil, err
	}
	db, err := openRaw(path, opts, false)
	if err != nil {
		return nil, err
	}
	if err := checkVersion(ctx, db); err != nil {
		db.Close()
		return nil, err
	}
	return db, nil
}

func checkVersion(ctx context.Context, db *DB) error {
	var v int
	if err := db.QueryRowContext(ctx, `PRAGMA user_version`).Scan(&v); err != nil {
		return fmt.Errorf("%s: not a readable SQLite database: %w", db.Path, err)
	}
	var n int
	if err := db.QueryRowContext(ctx, `SELECT count(*) FROM sqlite_schema WHERE name='ss_runs'`).Scan(&n); err != nil {
		return fmt.Errorf("%s: %w", db.Path, err)
	}
	if n == 0 {
		return fmt.Errorf("%s: not a splitsmith database (no ss_runs table)", db.Path)
	}
	if v > SchemaVersion() {
		return fmt.Errorf("%s: schema version %d was written by a newer splitsmith (this one knows up to %d); upgrade splitsmith to open it", db.Path, v, SchemaVersion())
	}
	if v < SchemaVersion() && db.ReadOnly {
		return fmt.Errorf("%s: schema version %d is older than this splitsmith's %d; run any writing command once to migrate it", db.Path, v, SchemaVersion())
	}
	return nil
}

// migrate applies the migrations after user_version, inside the caller's transaction.
func migrate(ctx context.Context, c *sql.Conn) error {
	var v int
	if err := c.QueryRowContext(ctx, `PRAGMA user_version`).Scan(&v); err != nil {
		return err
	}
	ms := migrations()
	if v > len(ms) {
		return fmt.Errorf("schema version %d was written by a newer splitsmith (this one knows up to %d)", v, len(ms))
	}
	for i := v; i < len(ms); i++ {
		b, err := migrationFS.ReadFile(ms[i])
		if err != nil {
			return err
		}
		if _, err := c.ExecContext(ctx, string(b)); err != nil {
			return fmt.Errorf("migration %s: %w", filepath.Base(ms[i]), err)
		}
	}
	if v != len(ms) {
		if _, err := c.ExecContext(ctx, fmt.Sprintf(`PRAGMA user_version = %d`, len(ms))); err != nil {
			return err
		}
	}
	return nil
}

// CheckUserName refuses a user table or column name that splitsmith reserves.
func CheckUserName(kind, name string) error {
	l := strings.ToLower(name)
	switch {
	case name == "":
		return fmt.Errorf("%s name is empty", kind)
	case strings.HasPrefix(l, "ss_"):
		return fmt.Errorf("%s name %q is reserved: names starting with ss_ belong to splitsmith", kind, name)
	case strings.HasPrefix(l, "sqlite_"):
		return fmt.Errorf("%s name %q is reserved by SQLite", kind, name)
	case l == "tool_functions":
		return fmt.Errorf("%s name %q is reserved: splitsmith's function catalog uses it", kind, name)
	}
	return nil
}

// QuoteIdent quotes an SQL identifier.
func QuoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// QuoteString quotes an SQL string literal.
func QuoteString(s string) string { return `'` + strings.ReplaceAll(s, `'`, `''`) + `'` }
