package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// Run describes the writing command being recorded in ss_runs.
type Run struct {
	Command string   // e.g. "ingest"
	Args    []string // argv after the program name
}

// Tx is one writing command's transaction. Conn is inside BEGIN IMMEDIATE: use it for every
// statement, never COMMIT or ROLLBACK it. Conn.Raw reaches the driver's own statement
// interface for bulk loads.
type Tx struct {
	Conn    *sql.Conn
	RunID   int64
	NewFile bool // the database is being built beside its target (no journal)
	inputs  []Input
	detail  map[string]any
	outcome string
}

// Input is one input file of a run.
type Input struct {
	Path   string `json:"path"`
	Size   int64  `json:"size"`
	SHA256 string `json:"sha256"`
}

// AddInput records an input file's size and SHA-256 in the run.
func (t *Tx) AddInput(in Input) { t.inputs = append(t.inputs, in) }

// SetDetail records a command-specific value (resolved spec, seed, counts) in the run.
func (t *Tx) SetDetail(key string, v any) { t.detail[key] = v }

// SetOutcome sets the outcome stored for a run that commits: "ok" (default) or "findings".
func (t *Tx) SetOutcome(o string) { t.outcome = o }

// Now is the time recorded in ss_runs: SOURCE_DATE_EPOCH when set, so builds of the same
// inputs can be byte-identical; the clock otherwise. It never enters results.
func Now() time.Time {
	if s := os.Getenv("SOURCE_DATE_EPOCH"); s != "" {
		if n, err := strconv.ParseInt(s, 10, 64); err == nil {
			return time.Unix(n, 0).UTC()
		}
	}
	return time.Now().UTC()
}

// ToolVersion is the module version from the build info, or "devel".
func ToolVersion() string {
	if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" && bi.Main.Version != "(devel)" {
		return bi.Main.Version
	}
	return "devel"
}

// Update runs fn as one writing command on the database at path. With create set, a missing
// file is built beside the target (path.tmp-PID) and renamed into place only after fn
// succeeds; otherwise a missing file is an error. An existing file is changed in one
// BEGIN IMMEDIATE transaction with the rollback journal on, so an interrupted command (Ctrl-C,
// kill -9, power loss) leaves it exactly as it was. When fn returns an error nothing is
// written at all.
func Update(ctx context.Context, path string, opts Options, create bool, run Run, fn func(ctx context.Context, tx *Tx) error) (err error) {
	opts.ReadOnly = false
	_, statErr := os.Stat(path)
	exists := statErr == nil
	if statErr != nil && !errors.Is(statErr, fs.ErrNotExist) {
		return statErr
	}
	if !exists && !create {
		return fmt.Errorf("%s: %w (create it with: splitsmith ingest --db %s FILE)", path, ErrNotExist, path)
	}
	target := path
	if !exists {
		dir := filepath.Dir(path)
		if st, err := os.Stat(dir); err != nil || !st.IsDir() {
			return fmt.Errorf("%s: directory %s does not exist", path, dir)
		}
		removeStaleBuilds(dir, filepath.Base(path))
		path = filepath.Join(dir, "."+filepath.Base(path)+".tmp-"+strconv.Itoa(os.Getpid()))
		os.Remove(path)
		defer func() {
			if err != nil {
				os.Remove(path)
			}
		}()
	}
	db, err := openRaw(path, opts, !exists)
	if err != nil {
		return err
	}
	closed := false
	defer func() {
		if !closed {
			db.Close()
		}
	}()
	if exists {
		if err := checkVersion(ctx, db); err != nil {
			return err
		}
	}
	conn, err := db.Conn(ctx)
	if err != nil {
		return fmt.Errorf("%s: %w", target, err)
	}
	defer conn.Close()
	if _, err := conn.ExecContext(ctx, `BEGIN IMMEDIATE`); err != nil {
		return fmt.Errorf("%s: begin: %w", target, err)
	}
	committed := false
	defer func() {
		if !committed {
			conn.ExecContext(context.Background(), `ROLLBACK`)
		}
	}()
	if err := migrate(ctx, conn); err != nil {
		return fmt.Errorf("%s: %w", target, err)
	}
	tx := &Tx{Conn: conn, NewFile: !exists, detail: map[string]any{}, outcome: "ok"}
	args, _ := json.Marshal(orEmpty(run.Args))
	var sqliteVersion string
	if err := conn.QueryRowContext(ctx, `SELECT sqlite_version()`).Scan(&sqliteVersion); err != nil {
		return err
	}
	res, err := conn.ExecContext(ctx, `INSERT INTO ss_runs(command, args_json, tool_version, sqlite_version, started_at) VALUES(?,?,?,?,?)`,
		run.Command, string(args), ToolVersion(), sqliteVersion, Now().Format(time.RFC3339))
	if err != nil {
		return err
	}
	if tx.RunID, err = res.LastInsertId(); err != nil {
		return err
	}
	if err := fn(ctx, tx); err != nil {
		return err
	}
	inputs, _ := json.Marshal(orEmptyInputs(tx.inputs))
	detail, _ := json.Marshal(tx.detail)
	if _, err := conn.ExecContext(ctx, `UPDATE ss_runs SET inputs_json=?, detail_json=?, ended_at=?, outcome=? WHERE run_id=?`,
		string(inputs), string(detail), Now().Format(time.RFC3339), tx.outcome, tx.RunID); err != nil {
		return err
	}
	if _, err := conn.ExecContext(ctx, `COMMIT`); err != nil {
		return fmt.Errorf("%s: commit: %w", target, err)
	}
	committed = true
	conn.Close()
	closed = true
	if err := db.Close(); err != nil {
		return err
	}
	if !exists {
		if err := syncFile(path); err != nil {
			return err
		}
		if err := os.Rename(path, target); err != nil {
			return err
		}
		if err := syncFile(filepath.Dir(target)); err != nil {
			return err
		}
	}
	return nil
}

func orEmpty(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func orEmptyInputs(s []Input) []Input {
	if s == nil {
		return []Input{}
	}
	return s
}

func syncFile(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	return f.Sync()
}

// HashFile returns the size and SHA-256 of a file, for AddInput.
func HashFile(path string) (Input, error) {
	f, err := os.Open(path)
	if err != nil {
		return Input{}, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return Input{}, err
	}
	return Input{Path: path, Size: n, SHA256: hex.EncodeToString(h.Sum(nil))}, nil
}

// AddAuditQuery stores SQL that recomputes a result (see ss_audit_queries). A query of the
// same subject and name is replaced.
func (t *Tx) AddAuditQuery(ctx context.Context, subject, name, kind, description, query string, needsTool bool) error {
	nt := 0
	if needsTool {
		nt = 1
	}
	_, err := t.Conn.ExecContext(ctx, `INSERT INTO ss_audit_queries(run_id, subject, name, kind, description, sql, needs_tool) VALUES(?,?,?,?,?,?,?)
		ON CONFLICT(subject, name) DO UPDATE SET run_id=excluded.run_id, kind=excluded.kind, description=excluded.description, sql=excluded.sql, needs_tool=excluded.needs_tool`,
		t.RunID, subject, name, kind, description, query, nt)
	return err
}

// removeStaleBuilds deletes half-built files (.NAME.tmp-PID) left beside a target by a
// process that was killed: their PID no longer runs. A build in progress is left alone.
func removeStaleBuilds(dir, base string) {
	matches, _ := filepath.Glob(filepath.Join(dir, "."+base+".tmp-*"))
	for _, m := range matches {
		pid, err := strconv.Atoi(m[strings.LastIndex(m, "-")+1:])
		if err != nil || pid <= 0 || pid == os.Getpid() {
			continue
		}
		if err := syscall.Kill(pid, 0); errors.Is(err, syscall.ESRCH) {
			os.Remove(m)
		}
	}
}
