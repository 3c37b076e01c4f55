package splits

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"

	"splitsmith/ingest"
)

// Change is one difference verify found.
type Change struct {
	Kind   string `json:"kind"` // moved | added | removed | changed | seal | count
	RowID  int64  `json:"row_id,omitempty"`
	Source string `json:"source,omitempty"` // input file:line of the row, when it still exists
	Side   string `json:"side,omitempty"`   // stored side ('' = dropped)
	Now    string `json:"now,omitempty"`    // recomputed side (moved) or recomputed value (seal)
	Detail string `json:"detail"`
}

// Report is the outcome of Verify.
type Report struct {
	Split    string         `json:"split"`
	Table    string         `json:"table"`
	Strategy string         `json:"strategy"`
	Rows     int            `json:"rows_sealed"`
	Intact   bool           `json:"intact"`
	Counts   map[string]int `json:"counts"`
	Changes  []Change       `json:"changes"`
	Notes    []string       `json:"notes"`
}

// Verify recomputes a stored split from its spec and the table's current data, and reports
// every row that moved side (or fold), was added to or removed from the table since the
// split was sealed, or whose values no longer match its content digest, and every side whose
// seal digest no longer matches. It writes nothing.
func Verify(ctx context.Context, conn *sql.Conn, name string) (*Report, error) {
	return VerifyWith(ctx, conn, name, VerifyOptions{})
}

// VerifyOptions are the settings of VerifyWith.
type VerifyOptions struct {
	Progress func(done, total int64) // rows of the table read so far, of all
}

// VerifyWith is Verify with options.
func VerifyWith(ctx context.Context, conn *sql.Conn, name string, opts VerifyOptions) (*Report, error) {
	var table, specJSON, strategy string
	err := conn.QueryRowContext(ctx, `SELECT table_name, spec_json, strategy FROM ss_splits WHERE split_name = ?`, name).Scan(&table, &specJSON, &strategy)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fieldErr("split", "no split %q (list them with: splitsmith splits)", name)
	}
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	spec, err := SpecFromJSON(specJSON)
	if err != nil {
		return nil, err
	}
	if err := spec.Resolve(); err != nil {
		return nil, fmt.Errorf("verify %s: stored spec: %w", name, err)
	}
	rep := &Report{Split: name, Table: table, Strategy: strategy, Counts: map[string]int{}, Changes: []Change{}, Notes: []string{}}
	t, err := ReadTable(ctx, conn, table)
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	// Stored rows, in row_id order.
	ids, sts, err := readStored(ctx, conn, name)
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	rep.Rows = len(ids)
	storedAt := func(id int64) (stored, bool) {
		k, found := slices.BinarySearch(ids, id)
		if !found {
			return stored{}, false
		}
		return sts[k], true
	}
	// Recompute over the rows the split sealed that still exist; the others are added rows.
	// The same pass checks every row's content digest.
	filter := &rowFilter{ids: ids}
	tap, err := newDigestTap(ctx, conn, t, opts.Progress)
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	defer tap.stop()
	d, err := loadWhere(ctx, conn, t, spec, nil, filter, tap)
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	changed, err := tap.finish()
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	cur := tap.all
	var a *assignment
	if d.n > 0 {
		if a, err = compute(d, spec); err != nil {
			return nil, fmt.Errorf("verify %s: recompute: %w", name, err)
		}
	}
	src := map[int64]string{}
	// Both lists are in ascending row order: merge them.
	k := 0
	for i := 0; i < d.n; i++ {
		id := d.rowID[i]
		for k < len(ids) && ids[k] < id {
			rep.Changes = append(rep.Changes, Change{Kind: "removed", RowID: ids[k], Side: sts[k].side, Detail: "row sealed in the split is no longer in the table"})
			k++
		}
		s := sts[k] // present: loadWhere only returns stored rows
		k++
		now := ""
		if a.side[i] >= 0 {
			now = a.sides[a.side[i]]
		}
		var nf, ntf int64
		if a.fold != nil {
			nf = int64(a.fold[i])
		}
		if a.trainFrom != nil {
			ntf = int64(a.trainFrom[i])
		}
		switch {
		case now != s.side:
			rep.Changes = append(rep.Changes, Change{Kind: "moved", RowID: id, Side: s.side, Now: now, Detail: fmt.Sprintf("stored on side %s, recomputed on side %s", sideLabel(s.side), sideLabel(now))})
		case nf != s.fold || ntf != s.tf:
			rep.Changes = append(rep.Changes, Change{Kind: "moved", RowID: id, Side: s.side, Now: now, Detail: fmt.Sprintf("stored in fold %s, recomputed in fold %s", foldText(s.fold), foldText(nf))})
		}
	}
	for ; k < len(ids); k++ {
		rep.Changes = append(rep.Changes, Change{Kind: "removed", RowID: ids[k], Side: sts[k].side, Detail: "row sealed in the split is no longer in the table"})
	}
	// Added rows.
	for _, id := range filter.added {
		rep.Changes = append(rep.Changes, Change{Kind: "added", RowID: id, Detail: "row is in the table but not in the split (added after sealing)"})
	}
	// Content digests of current values.
	for _, c := range changed {
		if x, ok := storedAt(c.RowID); ok {
			c.Side = x.side
		}
		rep.Changes = append(rep.Changes, c)
	}
	// Seals over the current ss_digest of each stored side's rows.
	srows, err := conn.QueryContext(ctx, `SELECT side, rows, digest FROM ss_split_sides WHERE split_name = ? ORDER BY position`, name)
	if err != nil {
		return nil, fmt.Errorf("verify %s: %w", name, err)
	}
	type sideRow struct {
		side, digest string
		rows         int
	}
	var sides []sideRow
	for srows.Next() {
		var s sideRow
		srows.Scan(&s.side, &s.rows, &s.digest)
		sides = append(sides, s)
	}
	srows.Close()
	// Each stored row's current ss_digest (both lists are in row order).
	perSide := map[string][]int64{}
	count := map[string]int{}
	for _, x := range sts {
		count[x.side]++
	}
	j := 0
	for k, id := range ids {
		for j < len(cur) && cur[j].id < id {
			j++
		}
		if j < len(cur) && cur[j].id == id {
			perSide[sts[k].side] = append(perSide[sts[k].side], cur[j].digest)
		}
	}
	for _, s := range sides {
		if n := count[s.side]; n != s.rows {
			rep.Changes = append(rep.Changes, Change{Kind: "count", Side: s.side, Now: fmt.Sprint(n), Detail: fmt.Sprintf("side %s was sealed with %d rows; ss_split_rows now has %d", s.side, s.rows, n)})
		}
		if got := Seal(perSide[s.side]); got != s.digest {
			rep.Changes = append(rep.Changes, Change{Kind: "seal", Side: s.side, Now: got, Detail: fmt.Sprintf("side %s digest %s… no longer matches the sealed %s…", s.side, got[:12], s.digest[:12])})
		}
	}
	// Locate rows.
	locate := func(id int64) string {
		if s, ok := src[id]; ok {
			return s
		}
		var file string
		var line int64
		if err := conn.QueryRowContext(ctx, `SELECT ss_source, ss_line FROM `+quoteIdent(table)+` WHERE ss_row = ?`, id).Scan(&file, &line); err != nil {
			return ""
		}
		src[id] = fmt.Sprintf("%s:%d", file, line)
		return src[id]
	}
	if len(rep.Changes) > 200 {
		r, err := conn.QueryContext(ctx, `SELECT ss_row, ss_source, ss_line FROM `+quoteIdent(table))
		if err != nil {
			return nil, fmt.Errorf("verify %s: %w", name, err)
		}
		for r.Next() {
			var id, line int64
			var file string
			r.Scan(&id, &file, &line)
			src[id] = fmt.Sprintf("%s:%d", file, line)
		}
		r.Close()
	}
	order := map[string]int{"changed": 0, "moved": 1, "added": 2, "removed": 3, "seal": 4, "count": 5}
	sort.SliceStable(rep.Changes, func(i, j int) bool {
		a, b := rep.Changes[i], rep.Changes[j]
		if order[a.Kind] != order[b.Kind] {
			return order[a.Kind] < order[b.Kind]
		}
		if a.RowID != b.RowID {
			return a.RowID < b.RowID
		}
		return a.Side < b.Side
	})
	for i := range rep.Changes {
		if rep.Changes[i].RowID != 0 && rep.Changes[i].Kind != "removed" {
			rep.Changes[i].Source = locate(rep.Changes[i].RowID)
		}
		rep.Counts[rep.Changes[i].Kind]++
	}
	rep.Intact = len(rep.Changes) == 0
	if rep.Counts["moved"] > 0 && (rep.Counts["removed"] > 0 || rep.Counts["changed"] > 0) && !appendStable(spec) {
		rep.Notes = append(rep.Notes, fmt.Sprintf("strategy %s is not append-stable (quotas, fraction cut points or balanced folds depend on the whole row set), so rows reported moved may follow from the rows removed or changed", strategyLabel(spec)))
	}
	return rep, nil
}

func sideLabel(s string) string {
	if s == "" {
		return "'' (dropped)"
	}
	return s
}

func foldText(f int64) string {
	if f == 0 {
		return "NULL"
	}
	return fmt.Sprint(f)
}

func strategyLabel(s *Spec) string {
	if s.FoldScheme() != "" {
		return s.Strategy() + " with " + s.FoldScheme() + " folds"
	}
	return s.Strategy()
}

// appendStable reports whether every row's side is a function of that row's own key (or
// entity) alone, so that appending rows moves no existing row.
func appendStable(s *Spec) bool {
	switch s.Strategy() {
	case "random", "adopted":
	case "grouped":
	case "stratified":
		if s.StratifyMode != "hash" {
			return false
		}
	case "time":
		if s.Cutoff == "" || len(s.Group) > 0 {
			return false
		}
	default:
		return false
	}
	switch s.FoldScheme() {
	case "", "adopted":
		return true
	case "kfold":
		return len(s.Group) == 0 && (s.Stratify == "" || s.StratifyMode == "hash")
	}
	return false
}

// stored is one row of ss_split_rows as verify compares it (fold and train_from 0 = NULL).
type stored struct {
	side     string
	fold, tf int64
}

// readStored reads a split's ss_split_rows in row_id order. Well-formed rows (a side of
// ss_split_sides or ”, integer fold and train_from in 1..65535 or NULL) come packed into one
// integer by SQL, which halves the driver's per-column work; any other row is read again as
// stored, by itself, and when there are many such rows the whole table is read plainly.
func readStored(ctx context.Context, conn *sql.Conn, name string) ([]int64, []stored, error) {
	var names []string
	r, err := conn.QueryContext(ctx, `SELECT side FROM ss_split_sides WHERE split_name = ? ORDER BY position`, name)
	if err != nil {
		return nil, nil, err
	}
	for r.Next() {
		var s string
		if err := r.Scan(&s); err != nil {
			r.Close()
			return nil, nil, err
		}
		names = append(names, s)
	}
	r.Close()
	if len(names) > 254 {
		return readStoredPlain(ctx, conn, name)
	}
	var b strings.Builder
	// A fold or train_from outside 1..65535, text or a blob fails BETWEEN; a fractional REAL
	// makes the sum a REAL, which the reader treats as not packed.
	b.WriteString(`SELECT row_id, CASE WHEN (fold IS NULL OR fold BETWEEN 1 AND 65535) AND (train_from IS NULL OR train_from BETWEEN 1 AND 65535) THEN (CASE side WHEN '' THEN 0`)
	for i, n := range names {
		fmt.Fprintf(&b, " WHEN %s THEN %d", quoteString(n), i+1)
	}
	b.WriteString(` END) + 256 * (coalesce(fold, 0) + 65536 * coalesce(train_from, 0)) END FROM ss_split_rows WHERE split_name = ? ORDER BY row_id`)
	sideOf := append([]string{""}, names...)
	var ids []int64
	var sts []stored
	var odd []int // positions of rows to read as stored
	const maxOdd = 1000
	err = rawQuery(ctx, conn, b.String(), []any{name}, func(vals []driver.Value) error {
		id, err := asInt64(vals[0], "row_id")
		if err != nil {
			return err
		}
		p, ok := vals[1].(int64)
		if !ok {
			if len(odd) == maxOdd {
				return errManyOdd
			}
			odd = append(odd, len(ids))
		}
		ids = append(ids, id)
		sts = append(sts, stored{side: sideOf[p&255], fold: (p >> 8) & 0xffff, tf: p >> 24})
		return nil
	})
	if errors.Is(err, errManyOdd) {
		return readStoredPlain(ctx, conn, name)
	}
	if err != nil {
		return nil, nil, err
	}
	for _, k := range odd {
		var side any
		var fold, tf int64
		if err := conn.QueryRowContext(ctx, `SELECT side, coalesce(fold, 0), coalesce(train_from, 0) FROM ss_split_rows WHERE split_name = ? AND row_id = ?`, name, ids[k]).Scan(&side, &fold, &tf); err != nil {
			return nil, nil, err
		}
		sts[k] = stored{side: sideText(side), fold: fold, tf: tf}
	}
	return ids, sts, nil
}

var errManyOdd = errors.New("many rows not in the packed form")

func sideText(v any) string {
	switch x := v.(type) {
	case string:
		return x
	case []byte:
		return string(x)
	case nil:
		return ""
	}
	return label(v)
}

// readStoredPlain reads ss_split_rows column by column (side names interned).
func readStoredPlain(ctx context.Context, conn *sql.Conn, name string) ([]int64, []stored, error) {
	var ids []int64
	var sts []stored
	intern := map[string]string{}
	rows, err := conn.QueryContext(ctx, `SELECT row_id, side, coalesce(fold, 0), coalesce(train_from, 0) FROM ss_split_rows WHERE split_name = ? ORDER BY row_id`, name)
	if err != nil {
		return nil, nil, err
	}
	defer rows.Close()
	var sideBuf []byte
	for rows.Next() {
		var id int64
		var s stored
		if err := rows.Scan(&id, &sideBuf, &s.fold, &s.tf); err != nil {
			return nil, nil, err
		}
		sd, ok := intern[string(sideBuf)]
		if !ok {
			sd = string(sideBuf)
			intern[sd] = sd
		}
		s.side = sd
		sts = append(sts, s)
		ids = append(ids, id)
	}
	return ids, sts, rows.Err()
}

// digestTap checks the content digest of every row of the table while loadWhere reads it
// (one pass for both): the reading goroutine hands chunks of rows to digest workers, and the
// changes are put back in row order, so the result does not depend on the number of workers.
// The row's user columns are the last len(t.Columns) values of the query.
type digestTap struct {
	cols  []string // ss_norm_digest (when the table has it) and the quoted user columns, appended to the query
	width int
	// norm: the table has ss_norm_digest, which is checked too (the audit reads it in place of
	// the feature values): types are the user columns' SQL types, for ingest.NormValue.
	norm     bool
	types    []string
	ctx      context.Context
	conn     *sql.Conn
	progress progressFn
	total, n int64
	all      []rowDigest // every row's stored digest, in ss_row order

	work, results chan *digestChunk
	done          []*digestChunk
	collected     chan struct{}
	cur           *digestChunk
	seq           int
	closed        bool
}

type digestChunk struct {
	seq    int
	ids    []int64
	stored []int64
	vals   []driver.Value
	out    []Change
	err    error
	// The normalised digest: stored, recomputed (fixes still to add), which rows already
	// failed the content digest, and the values only SQLite can normalise for sure.
	normStored []int64
	normSum    []uint64
	bad        []bool
	fixes      []normFix
}

// normFix is a value whose normalised text SQLite decides (a REAL near a rounding boundary).
type normFix struct {
	row, pos int
	typ      string
	v        driver.Value
}

func newDigestTap(ctx context.Context, conn *sql.Conn, t *Table, progress progressFn) (*digestTap, error) {
	d := &digestTap{width: len(t.Columns), progress: progress, cur: &digestChunk{}, ctx: ctx, conn: conn,
		work: make(chan *digestChunk, 8), results: make(chan *digestChunk, 8), collected: make(chan struct{})}
	if d.norm = slices.Contains(t.system, "ss_norm_digest"); d.norm {
		d.cols = append(d.cols, "ss_norm_digest")
	}
	for _, c := range t.Columns {
		d.cols = append(d.cols, quoteIdent(c.Name))
		d.types = append(d.types, sqlTypeOf(c.Logical))
	}
	if progress != nil {
		if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM `+quoteIdent(t.Name)).Scan(&d.total); err != nil {
			return nil, err
		}
	}
	workers := max(1, min(runtime.GOMAXPROCS(0)-1, 3))
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			dg := ingest.NewDigester()
			var scratch []byte // ValueTerm's
			w := d.width
			for c := range d.work {
				for r, id := range c.ids {
					dg.Reset()
					for _, v := range c.vals[r*w : (r+1)*w] {
						if err := dg.Value(v); err != nil && c.err == nil {
							c.err = err
						}
					}
					got := dg.Sum()
					if got != c.stored[r] {
						c.out = append(c.out, Change{Kind: "changed", RowID: id, Now: strconv.FormatInt(got, 10), Detail: fmt.Sprintf("values no longer match the row's content digest (ss_digest %d, values digest to %d)", c.stored[r], got)})
					}
					if d.norm {
						c.bad = append(c.bad, got != c.stored[r])
						var sum uint64
						for j, v := range c.vals[r*w : (r+1)*w] {
							term, sc, ok := ingest.ValueTerm(j+1, d.types[j], v, scratch)
							scratch = sc
							if !ok {
								c.fixes = append(c.fixes, normFix{r, j + 1, d.types[j], v})
								continue
							}
							sum += term
						}
						c.normSum = append(c.normSum, sum)
					}
				}
				c.vals, c.stored = nil, nil
				d.results <- c
			}
		}()
	}
	go func() {
		wg.Wait()
		close(d.results)
	}()
	go func() {
		defer close(d.collected)
		for c := range d.results {
			d.done = append(d.done, c)
		}
	}()
	return d, nil
}

// row takes one row: its ss_row, its ss_digest value as stored and its user values.
func (d *digestTap) row(id int64, digest driver.Value, vals []driver.Value) {
	stored, _ := digest.(int64) // ss_digest may have been tampered to anything
	d.all = append(d.all, rowDigest{id, stored})
	c := d.cur
	c.ids = append(c.ids, id)
	c.stored = append(c.stored, stored)
	if d.norm {
		nd, _ := vals[0].(int64)
		c.normStored = append(c.normStored, nd)
		vals = vals[1:]
	}
	for _, v := range vals {
		if b, ok := v.([]byte); ok {
			v = append([]byte(nil), b...)
		}
		c.vals = append(c.vals, v)
	}
	if len(c.ids) == verifyChunkRows {
		d.send()
	}
	d.n++
	if d.progress != nil && d.n%65536 == 0 {
		d.progress(d.n, d.total)
	}
}

func (d *digestTap) send() {
	d.work <- d.cur
	d.seq++
	d.cur = &digestChunk{seq: d.seq}
}

// finish waits for the workers and returns the changed rows in row order.
func (d *digestTap) finish() ([]Change, error) {
	if d.closed {
		return nil, errors.New("digest tap finished twice")
	}
	if len(d.cur.ids) > 0 {
		d.send()
	}
	d.closed = true
	close(d.work)
	<-d.collected
	slices.SortFunc(d.done, func(a, b *digestChunk) int { return a.seq - b.seq })
	fixStmts := map[string]*sql.Stmt{} // per SQL type, prepared once for every chunk
	defer func() {
		for _, st := range fixStmts {
			st.Close()
		}
	}()
	var out []Change
	for _, c := range d.done {
		if c.err != nil {
			return nil, c.err
		}
		if !d.norm {
			out = append(out, c.out...)
			continue
		}
		if err := d.applyFixes(c, fixStmts); err != nil {
			return nil, err
		}
		// In row order: a content-digest change, else a normalised-digest mismatch.
		k := 0
		for r, id := range c.ids {
			if c.bad[r] {
				out = append(out, c.out[k])
				k++
				continue
			}
			if got := int64(c.normSum[r]); got != c.normStored[r] {
				out = append(out, Change{Kind: "changed", RowID: id, Now: strconv.FormatInt(got, 10), Detail: fmt.Sprintf("the row's normalised digest no longer matches its values (ss_norm_digest %d, values give %d)", c.normStored[r], got)})
			}
		}
	}
	return out, nil
}

// applyFixes adds the terms of the values only SQLite normalises for sure (after the read,
// when the connection is free): printf('%.8e', x) for a REAL, NormExprSQL in general.
func (d *digestTap) applyFixes(c *digestChunk, stmts map[string]*sql.Stmt) error {
	for _, f := range c.fixes {
		st, ok := stmts[f.typ]
		if !ok {
			var err error
			if st, err = d.conn.PrepareContext(d.ctx, "SELECT "+ingest.NormExprSQL(f.typ, "?1")); err != nil {
				return err
			}
			stmts[f.typ] = st
		}
		var text sql.NullString
		if err := st.QueryRowContext(d.ctx, f.v).Scan(&text); err != nil {
			return fmt.Errorf("normalise %v: %w", f.v, err)
		}
		c.normSum[f.row] += ingest.NormTerm(f.pos, text.String, !text.Valid)
	}
	return nil
}

// sqlTypeOf is the storage type ingest gives a logical type (its ss_columns.sql_type).
func sqlTypeOf(logical string) string {
	switch logical {
	case "INTEGER", "BOOLEAN":
		return "INTEGER"
	case "REAL":
		return "REAL"
	}
	return "TEXT"
}

// stop ends the workers when finish was not reached (an error on the way).
func (d *digestTap) stop() {
	if !d.closed {
		d.closed = true
		close(d.work)
		<-d.collected
	}
}

type rowDigest struct{ id, digest int64 }

var verifyChunkRows = 2048 // rows per digest job (a variable so tests can make small ones)

// auditQueries are the SQL an auditor replays to check the split by hand (subject
// "split:NAME"). Each "check" returns no rows while the split holds.
func auditQueries(spec *Spec, t *Table, res *Result) []AuditQuery {
	n := quoteString(spec.Name)
	T := quoteIdent(t.Name)
	var qs []AuditQuery
	qs = append(qs, AuditQuery{Name: "rows_added_or_removed", Kind: "check",
		Description: "rows of the table that are not in the split (added since sealing) and rows of the split no longer in the table",
		SQL:         fmt.Sprintf(`SELECT 'added' AS change, t.ss_row AS row_id FROM %[1]s AS t WHERE t.ss_row NOT IN (SELECT row_id FROM ss_split_rows WHERE split_name = %[2]s) UNION ALL SELECT 'removed', r.row_id FROM ss_split_rows AS r WHERE r.split_name = %[2]s AND r.row_id NOT IN (SELECT ss_row FROM %[1]s) ORDER BY 2`, T, n)})
	qs = append(qs, AuditQuery{Name: "side_counts", Kind: "check",
		Description: "sides whose stored row count differs from the rows assigned to them",
		SQL:         fmt.Sprintf(`SELECT s.side, s.rows, (SELECT count(*) FROM ss_split_rows AS r WHERE r.split_name = s.split_name AND r.side = s.side) AS now FROM ss_split_sides AS s WHERE s.split_name = %[1]s AND s.rows <> (SELECT count(*) FROM ss_split_rows AS r WHERE r.split_name = s.split_name AND r.side = s.side) ORDER BY s.position`, n)})
	qs = append(qs, AuditQuery{Name: "side_seals", Kind: "check", NeedsTool: true,
		Description: "sides whose seal (split_seal over the rows' ss_digest) differs from the stored digest; without splitsmith: SHA-256 of the side's ss_digest values sorted ascending, each as 8 bytes big-endian",
		SQL:         fmt.Sprintf(`SELECT s.side, s.digest, (SELECT split_seal(t.ss_digest) FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = s.split_name AND r.side = s.side) AS now FROM ss_split_sides AS s WHERE s.split_name = %[2]s AND s.digest IS NOT (SELECT split_seal(t.ss_digest) FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = s.split_name AND r.side = s.side) ORDER BY s.position`, T, n)})
	var cols []string
	for _, c := range t.Columns {
		cols = append(cols, quoteIdent(c.Name))
	}
	qs = append(qs, AuditQuery{Name: "row_digests", Kind: "check", NeedsTool: true,
		Description: "rows whose values no longer match their content digest (changed since loading)",
		SQL:         fmt.Sprintf(`SELECT ss_row, ss_source, ss_line FROM %s WHERE ss_digest <> ingest_digest(%s) ORDER BY ss_row`, T, strings.Join(cols, ", "))})
	if slices.Contains(t.system, "ss_norm_digest") {
		var norms []string
		for _, c := range t.Columns {
			norms = append(norms, ingest.NormExprSQL(sqlTypeOf(c.Logical), quoteIdent(c.Name)))
		}
		qs = append(qs, AuditQuery{Name: "row_norm_digests", Kind: "check", NeedsTool: true,
			Description: "rows whose values no longer match their normalised digest (ss_norm_digest, which the audit reads in place of the feature values)",
			SQL:         fmt.Sprintf(`SELECT ss_row, ss_source, ss_line FROM %s WHERE ss_norm_digest IS NOT ingest_norm_digest(%s) ORDER BY ss_row`, T, strings.Join(norms, ", "))})
	}
	// The assignment itself, where plain SQL (plus split_side) recomputes it.
	sides := quoteString(spec.Sides.String())
	seed := fmt.Sprint(int64(spec.Seed))
	keyExpr := "t.ss_digest"
	if len(spec.Key) > 0 {
		var k []string
		for _, c := range spec.Key {
			k = append(k, "t."+quoteIdent(c))
		}
		keyExpr = "split_key(" + strings.Join(k, ", ") + ")"
	}
	switch {
	case spec.Strategy() == "random" || (spec.Strategy() == "stratified" && spec.StratifyMode == "hash"):
		qs = append(qs, AuditQuery{Name: "assignment", Kind: "check", NeedsTool: true,
			Description: "rows whose stored side differs from split_side(key, seed, sides) (the hash specification)",
			SQL:         fmt.Sprintf(`SELECT r.row_id, r.side, split_side(%[3]s, %[4]s, %[5]s) AS recomputed FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND r.side <> split_side(%[3]s, %[4]s, %[5]s) ORDER BY r.row_id`, T, n, keyExpr, seed, sides)})
	case spec.Strategy() == "grouped" && len(spec.Group) == 1:
		g := "t." + quoteIdent(spec.Group[0])
		key := fmt.Sprintf("CASE WHEN %[1]s IS NULL THEN t.ss_digest ELSE split_key(%[1]s) END", g)
		qs = append(qs, AuditQuery{Name: "assignment", Kind: "check", NeedsTool: true,
			Description: "rows whose stored side differs from split_side(entity key, seed, sides); the entity key is split_key(group value), or ss_digest for a NULL group value",
			SQL:         fmt.Sprintf(`SELECT r.row_id, r.side, split_side(%[3]s, %[4]s, %[5]s) AS recomputed FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND r.side <> split_side(%[3]s, %[4]s, %[5]s) ORDER BY r.row_id`, T, n, key, seed, sides)})
	case spec.Strategy() == "stratified":
		s := "t." + quoteIdent(spec.Stratify)
		qs = append(qs, AuditQuery{Name: "stratum_hash_order", Kind: "check", NeedsTool: true,
			Description: "strata in which a side's rows are not a contiguous run in hash order (each stratum is cut in split_hash_u order)",
			SQL:         fmt.Sprintf(`WITH x AS (SELECT %[3]s AS stratum, r.side, split_hash_u(%[4]s, %[5]s) AS u FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s), g AS (SELECT x.stratum, x.side, p.position, min(x.u) AS lo, max(x.u) AS hi FROM x JOIN ss_split_sides AS p ON p.split_name = %[2]s AND p.side = x.side GROUP BY x.stratum, x.side) SELECT a.stratum, a.side, b.side FROM g AS a JOIN g AS b ON a.stratum IS b.stratum AND a.position < b.position AND a.hi > b.lo ORDER BY 1, 2, 3`, T, n, s, keyExpr, seed)})
	}
	for i, g := range spec.Group {
		qs = append(qs, AuditQuery{Name: fmt.Sprintf("group_one_side_%d", i+1), Kind: "check",
			Description: fmt.Sprintf("values of group column %s found on more than one side (every entity must be on one side)", g),
			SQL:         fmt.Sprintf(`SELECT t.%[3]s AS value, group_concat(DISTINCT r.side) AS sides FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND r.side <> '' AND t.%[3]s IS NOT NULL GROUP BY t.%[3]s HAVING count(DISTINCT r.side) > 1 ORDER BY 1`, T, n, quoteIdent(g))})
		if spec.FoldScheme() == "rolling" {
			qs = append(qs, AuditQuery{Name: fmt.Sprintf("group_rolling_fold_%d", i+1), Kind: "check",
				Description: fmt.Sprintf("rows trained on in a rolling fold that tests a row with the same %s (an entity must not train and be tested in one fold)", g),
				SQL:         fmt.Sprintf(`SELECT r.row_id, q.fold, t.%[3]s AS value FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id JOIN ss_split_rows AS q ON q.split_name = r.split_name AND q.fold IS NOT NULL JOIN %[1]s AS u ON u.ss_row = q.row_id AND u.%[3]s = t.%[3]s WHERE r.split_name = %[2]s AND r.train_from IS NOT NULL AND r.train_from <= q.fold ORDER BY 1, 2`, T, n, quoteIdent(g))})
		}
		if spec.FoldScheme() == "kfold" {
			qs = append(qs, AuditQuery{Name: fmt.Sprintf("group_one_fold_%d", i+1), Kind: "check",
				Description: fmt.Sprintf("values of group column %s found in more than one fold", g),
				SQL:         fmt.Sprintf(`SELECT t.%[3]s AS value, group_concat(DISTINCT r.fold) AS folds FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND r.fold IS NOT NULL AND t.%[3]s IS NOT NULL GROUP BY t.%[3]s HAVING count(DISTINCT r.fold) > 1 ORDER BY 1`, T, n, quoteIdent(g))})
		}
	}
	if spec.Time != "" {
		tc := "t." + quoteIdent(spec.Time)
		qs = append(qs, AuditQuery{Name: "time_order", Kind: "check",
			Description: "pairs of sides where an earlier side has a row at or after the first time of a later side (time values compare as stored: ISO text or numbers)",
			SQL:         fmt.Sprintf(`WITH x AS (SELECT r.side, p.position, min(%[3]s) AS lo, max(%[3]s) AS hi FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id JOIN ss_split_sides AS p ON p.split_name = r.split_name AND p.side = r.side WHERE r.split_name = %[2]s GROUP BY r.side) SELECT a.side, a.hi, b.side, b.lo FROM x AS a JOIN x AS b ON a.position < b.position AND a.hi >= b.lo ORDER BY 1, 3`, T, n, tc)})
		if spec.Until != "" {
			// Plain SQL: julianday reads the same ISO dates and timestamps (zones included).
			later := fmt.Sprintf("julianday(%s) > julianday(%s)", tc, quoteString(spec.Until))
			for _, c := range t.Columns {
				if strings.EqualFold(c.Name, spec.Time) && (c.Logical == "INTEGER" || c.Logical == "REAL") {
					u, _, _ := timeValue(spec.Until, true)
					later = fmt.Sprintf("%s > %s", tc, strconv.FormatFloat(u, 'g', -1, 64))
				}
			}
			qs = append(qs, AuditQuery{Name: "until", Kind: "check",
				Description: fmt.Sprintf("rows on a side whose time is after --until %s, and rows dropped as after_until whose time is not after it", spec.Until),
				SQL:         fmt.Sprintf(`SELECT r.row_id, r.side, r.reason, %[3]s AS time FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND ((r.side <> '' AND %[4]s) OR (r.reason = 'after_until' AND (%[4]s) IS NOT 1)) ORDER BY r.row_id`, T, n, tc, later)})
		}
		if spec.FoldScheme() == "rolling" {
			qs = append(qs, AuditQuery{Name: "rolling_folds", Kind: "check",
				Description: "rows trained on in the fold that tests them, or trained on at or after a test row of that fold in time",
				SQL:         fmt.Sprintf(`SELECT r.row_id, r.fold, r.train_from FROM ss_split_rows AS r JOIN %[1]s AS t ON t.ss_row = r.row_id WHERE r.split_name = %[2]s AND r.train_from IS NOT NULL AND (r.train_from <= r.fold OR %[3]s >= (SELECT min(%[4]s) FROM ss_split_rows AS q JOIN %[1]s AS u ON u.ss_row = q.row_id WHERE q.split_name = r.split_name AND q.fold = r.train_from)) ORDER BY r.row_id`, T, n, tc, "u."+quoteIdent(spec.Time))})
		}
	}
	qs = append(qs, AuditQuery{Name: "dropped_rows", Kind: "report",
		Description: "rows kept off every side, by reason (gap, purge, span, time, after_until)",
		SQL:         fmt.Sprintf(`SELECT reason, count(*) AS rows FROM ss_split_rows WHERE split_name = %s AND side = '' GROUP BY reason ORDER BY reason`, n)})
	return qs
}
