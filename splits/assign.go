package splits

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"math"
	"path"
	"sort"
	"strconv"
	"strings"
	"sync"
)

// Reasons a row is dropped (side ”).
const (
	reasonNone uint8 = iota
	reasonGap
	reasonPurge
	reasonSpan
	reasonTime
	reasonAfterUntil
)

var reasonNames = [...]string{"", "gap", "purge", "span", "time", "after_until"}

// DataError is bad data in the table (an unparseable time value, NULLs where refused),
// located by rows.
type DataError struct{ Msg string }

func (e *DataError) Error() string { return e.Msg }

// data is the columns a spec needs, one entry per row in ss_row order.
type data struct {
	n        int
	rowID    []int64
	digest   []int64
	u        []float64 // hash of the row key (digest or key columns)
	stratum  []int32   // index into strata
	strata   []string  // stratum labels
	entity   []int32   // entity index (grouped)
	entKey   [][]byte  // entity key bytes
	entU     []float64 // entity hash
	nullEnts int       // rows that were their own entity for NULL group values
	t        []float64 // time (Unix seconds, or the numeric value)
	numeric  bool      // time column is numeric
	tBad     []bool    // time or label end missing or unparseable (with time_invalid drop)
	badTimes int
	labelEnd []float64
	adopt    []string
	foldCol  []int64
}

// assignment is the computed split.
type assignment struct {
	sides     []string
	side      []int16 // -1 dropped
	reason    []uint8
	fold      []int32 // 0 = NULL
	trainFrom []int32 // 0 = NULL
	notes     map[string]any
	folds     []foldStat
}

type foldStat struct {
	fold                    int
	trainRows, testRows     int
	trainGroups, testGroups int
	excluded                int
	hasGroups               bool
}

// progressFn reports done of total rows.
type progressFn func(done, total int64)

// load reads what spec needs from the table.
func load(ctx context.Context, conn *sql.Conn, t *Table, spec *Spec, progress progressFn) (*data, error) {
	return loadWhere(ctx, conn, t, spec, progress, nil, nil)
}

// rowFilter keeps the rows whose ss_row is in ids (ascending) and lists the others in added.
type rowFilter struct {
	ids   []int64
	k     int
	added []int64
}

func (f *rowFilter) keep(id int64) bool {
	for f.k < len(f.ids) && f.ids[f.k] < id {
		f.k++
	}
	if f.k < len(f.ids) && f.ids[f.k] == id {
		return true
	}
	f.added = append(f.added, id)
	return false
}

// loadWhere is load restricted to the rows filter keeps (all rows when filter is nil). The
// table is read in ss_row order either way; tap, when given, also gets every row (kept or
// not) with all its user values.
func loadWhere(ctx context.Context, conn *sql.Conn, t *Table, spec *Spec, progress progressFn, filter *rowFilter, tap *digestTap) (*data, error) {
	where := "1"
	var wargs []any
	var total int64
	if filter != nil {
		total = int64(len(filter.ids)) // at most that many rows are kept
	} else if err := conn.QueryRowContext(ctx, `SELECT count(*) FROM `+quoteIdent(t.Name)).Scan(&total); err != nil {
		return nil, fmt.Errorf("read %s: %w", t.Name, err)
	}
	cols := []string{"ss_row", "ss_digest"}
	add := func(field, name string, allowSource bool) (int, Column, error) {
		c, err := t.column(field, name, allowSource)
		if err != nil {
			return 0, c, err
		}
		cols = append(cols, quoteIdent(name))
		return len(cols) - 1, c, nil
	}
	var keyIdx []int
	for i, k := range spec.Key {
		j, _, err := add(fmt.Sprintf("key[%d]", i+1), k, false)
		if err != nil {
			return nil, err
		}
		keyIdx = append(keyIdx, j)
	}
	stratIdx, groupIdx, timeIdx, leIdx, adoptIdx, foldIdx := -1, []int(nil), -1, -1, -1, -1
	var err error
	if spec.Stratify != "" {
		if stratIdx, _, err = add("stratify", spec.Stratify, false); err != nil {
			return nil, err
		}
	}
	for i, g := range spec.Group {
		j, _, err := add(fmt.Sprintf("group[%d]", i+1), g, false)
		if err != nil {
			return nil, err
		}
		groupIdx = append(groupIdx, j)
	}
	var timeCol Column
	if spec.Time != "" {
		if timeIdx, timeCol, err = add("time", spec.Time, false); err != nil {
			return nil, err
		}
	}
	if spec.LabelEnd != "" {
		if leIdx, _, err = add("label_end", spec.LabelEnd, false); err != nil {
			return nil, err
		}
	}
	if spec.FromColumn != "" {
		if adoptIdx, _, err = add("from_column", spec.FromColumn, true); err != nil {
			return nil, err
		}
	}
	if spec.FoldColumn != "" {
		if foldIdx, _, err = add("fold_column", spec.FoldColumn, false); err != nil {
			return nil, err
		}
	}
	d := &data{}
	d.numeric = timeCol.Logical == "INTEGER" || timeCol.Logical == "REAL"
	h := newHasher(spec.Seed)
	var keyBuf []byte
	strataIdx := map[string]int32{}
	uf := newUnionFind(len(groupIdx))
	var badTime, badLE, nullGroup []int64
	gv := make([]any, len(groupIdx))
	// The default key (the content digest) is hashed on another goroutine while rows are
	// still being read: chunks of digests go to hashDigests as they fill. Each u[i] is a
	// pure function of digest[i], so the result does not depend on scheduling.
	// The time strategy never reads u (its sides, rolling folds, gap and purge come from the
	// times), so it is not computed there.
	needU := spec.Strategy() != "time"
	hashDefault := len(keyIdx) == 0 && needU
	var hj *hashJobs
	d.rowID = make([]int64, 0, total)
	d.digest = make([]int64, 0, total)
	if hashDefault {
		d.u = make([]float64, total)
		hj = startHashJobs(spec.Seed)
		defer hj.stop()
	}
	// Without a label end, the time values are parsed on another goroutine in chunks while
	// rows are still being read: the reading goroutine only keeps each row's value (driver
	// strings are Go-owned copies; []byte is copied). Each t[i] is a pure function of value i.
	offTime := timeIdx >= 0 && leIdx < 0
	var tj *timeJobs
	var tbuf []driver.Value
	tsent := 0
	if offTime {
		d.t = make([]float64, total)
		d.tBad = make([]bool, total)
		tj = startTimeJobs(d.numeric)
		defer tj.stop()
		tbuf = tj.buf()
	}
	var gf *groupFeed
	if len(groupIdx) > 0 {
		gf = newGroupFeed(uf)
		defer gf.stop()
	}
	sent := 0
	tapAt := len(cols)
	if tap != nil {
		cols = append(cols, tap.cols...)
	}
	query := `SELECT ` + strings.Join(cols, ", ") + ` FROM ` + quoteIdent(t.Name) + ` WHERE ` + where + ` ORDER BY ss_row`
	err = rawQuery(ctx, conn, query, wargs, func(vals []driver.Value) error {
		id, err := asInt64(vals[0], "ss_row")
		if err != nil {
			return err
		}
		if tap != nil {
			tap.row(id, vals[1], vals[tapAt:])
		}
		if filter != nil && !filter.keep(id) {
			return nil
		}
		dg, err := asInt64(vals[1], "ss_digest")
		if err != nil {
			return err
		}
		d.rowID = append(d.rowID, id)
		d.digest = append(d.digest, dg)
		if !hashDefault && needU {
			keyBuf = keyBuf[:0]
			for _, j := range keyIdx {
				keyBuf, _ = AppendValue(keyBuf, normalize(vals[j]))
			}
			d.u = append(d.u, h.u(keyBuf))
		}
		if stratIdx >= 0 {
			lbl := label(vals[stratIdx])
			si, ok := strataIdx[lbl]
			if !ok {
				si = int32(len(d.strata))
				strataIdx[lbl] = si
				d.strata = append(d.strata, lbl)
			}
			d.stratum = append(d.stratum, si)
		}
		if len(groupIdx) > 0 {
			anyNull := false
			for k, j := range groupIdx {
				gv[k] = normalize(vals[j])
				if gv[k] == nil {
					anyNull = true
				}
			}
			if anyNull {
				nullGroup = append(nullGroup, id)
			}
			gf.add(gv, dg)
		}
		if offTime {
			v := vals[timeIdx]
			if b, ok := v.([]byte); ok {
				v = string(b)
			}
			tbuf = append(tbuf, v)
		} else if timeIdx >= 0 {
			tv, ok := timeValueFast(vals[timeIdx], d.numeric)
			bad := !ok
			if !ok {
				badTime = append(badTime, id)
			}
			if leIdx >= 0 {
				lv, ok := timeValueFast(vals[leIdx], d.numeric)
				if !ok {
					badLE = append(badLE, id)
					bad = true
				}
				d.labelEnd = append(d.labelEnd, lv)
			}
			d.t = append(d.t, tv)
			d.tBad = append(d.tBad, bad)
			if bad {
				d.badTimes++
			}
		}
		if adoptIdx >= 0 {
			v := normalize(vals[adoptIdx])
			if v == nil {
				d.adopt = append(d.adopt, "\x00")
			} else {
				d.adopt = append(d.adopt, label(v))
			}
		}
		if foldIdx >= 0 {
			switch v := normalize(vals[foldIdx]).(type) {
			case int64:
				d.foldCol = append(d.foldCol, v)
			case float64:
				if v == math.Trunc(v) {
					d.foldCol = append(d.foldCol, int64(v))
				} else {
					d.foldCol = append(d.foldCol, math.MinInt64)
				}
			default:
				d.foldCol = append(d.foldCol, math.MinInt64)
			}
		}
		d.n++
		if hashDefault && d.n-sent >= hashChunk && d.n <= len(d.u) {
			hj.add(d.digest[sent:d.n], d.u[sent:d.n])
			sent = d.n
		}
		if offTime && len(tbuf) >= hashChunk && d.n <= len(d.t) {
			tj.add(tbuf, d.t[tsent:d.n], d.tBad[tsent:d.n])
			tbuf = tj.buf()
			tsent = d.n
		}
		if progress != nil && d.n%65536 == 0 {
			progress(int64(d.n), total)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("read %s: %w", t.Name, err)
	}
	if gf != nil {
		gf.finish()
	}
	if hashDefault {
		if d.n > len(d.u) { // more rows than counted: wait for the chunks in flight, then grow
			hj.wait()
			d.u = append(d.u, make([]float64, d.n-len(d.u))...)
		}
		d.u = d.u[:d.n]
		hj.add(d.digest[sent:d.n], d.u[sent:d.n])
		hj.wait()
	}
	if offTime {
		if d.n > len(d.t) { // more rows than counted: wait for the chunks in flight, then grow
			tj.wait()
			d.t = append(d.t, make([]float64, d.n-len(d.t))...)
			d.tBad = append(d.tBad, make([]bool, d.n-len(d.tBad))...)
		}
		d.t, d.tBad = d.t[:d.n], d.tBad[:d.n]
		tj.add(tbuf, d.t[tsent:d.n], d.tBad[tsent:d.n])
		tj.wait()
		for i, bad := range d.tBad {
			if bad {
				badTime = append(badTime, d.rowID[i])
				d.badTimes++
			}
		}
	}
	if spec.TimeInvalid == "drop" {
		badTime, badLE = nil, nil
	}
	if len(badTime) > 0 {
		return nil, &DataError{Msg: fmt.Sprintf("column %q (--time): %d value(s) are missing or not a %s (--time-invalid drop drops such rows): %s", spec.Time, len(badTime), timeKind(d.numeric), describeRows(ctx, conn, t, spec.Time, badTime))}
	}
	if len(badLE) > 0 {
		return nil, &DataError{Msg: fmt.Sprintf("column %q (--label-end): %d value(s) are missing or not a %s: %s", spec.LabelEnd, len(badLE), timeKind(d.numeric), describeRows(ctx, conn, t, spec.LabelEnd, badLE))}
	}
	if len(groupIdx) > 0 {
		if len(nullGroup) > 0 && spec.GroupNulls == "refuse" {
			return nil, &DataError{Msg: fmt.Sprintf("group column(s) %s: %d row(s) have NULL and --group-nulls is refuse: %s", strings.Join(spec.Group, ", "), len(nullGroup), describeRows(ctx, conn, t, spec.Group[0], nullGroup))}
		}
		d.entity, d.entKey, d.nullEnts = uf.entities()
		d.entU = make([]float64, len(d.entKey))
		for i, k := range d.entKey {
			d.entU[i] = h.u(k)
		}
	}
	return d, nil
}

func timeKind(numeric bool) string {
	if numeric {
		return "number"
	}
	return "date or timestamp (YYYY-MM-DD or RFC 3339)"
}

// describeRows names up to 5 rows as "source:line (ss_row N, value "v")".
func describeRows(ctx context.Context, conn *sql.Conn, t *Table, col string, ids []int64) string {
	var parts []string
	for i, id := range ids {
		if i == 5 {
			parts = append(parts, fmt.Sprintf("and %d more", len(ids)-5))
			break
		}
		var src string
		var line int64
		var v any
		err := conn.QueryRowContext(ctx, `SELECT ss_source, ss_line, `+quoteIdent(col)+` FROM `+quoteIdent(t.Name)+` WHERE ss_row = ?`, id).Scan(&src, &line, &v)
		if err != nil {
			parts = append(parts, fmt.Sprintf("ss_row %d", id))
			continue
		}
		vs := "NULL"
		if v != nil {
			vs = strconv.Quote(label(normalize(v)))
		}
		parts = append(parts, fmt.Sprintf("%s:%d (ss_row %d, value %s)", src, line, id, vs))
	}
	return strings.Join(parts, "; ")
}

// normalize turns driver values into nil, int64, float64 or string.
func normalize(v any) any {
	switch x := v.(type) {
	case []byte:
		return string(x)
	case bool:
		if x {
			return int64(1)
		}
		return int64(0)
	case float64:
		if math.IsNaN(x) {
			return nil
		}
	}
	return v
}

// label renders a value as text (NULL as "NULL").
func label(v any) string {
	switch x := normalize(v).(type) {
	case nil:
		return "NULL"
	case int64:
		return strconv.FormatInt(x, 10)
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	case string:
		return x
	}
	return fmt.Sprint(v)
}

// timeValueFast is timeValue without the text form.
func timeValueFast(v any, numeric bool) (float64, bool) {
	switch x := v.(type) {
	case int64:
		if numeric {
			return float64(x), true
		}
		return 0, false
	case float64:
		if numeric && !math.IsNaN(x) {
			return x, true
		}
		return 0, false
	case string:
		if numeric {
			f, err := strconv.ParseFloat(x, 64)
			return f, err == nil
		}
		return ParseTimeText(x)
	}
	t, _, ok := timeValue(v, numeric)
	return t, ok
}

func timeValue(v any, numeric bool) (float64, string, bool) {
	switch x := normalize(v).(type) {
	case int64:
		if numeric {
			return float64(x), strconv.FormatInt(x, 10), true
		}
	case float64:
		if numeric {
			return x, strconv.FormatFloat(x, 'g', -1, 64), true
		}
	case string:
		if numeric {
			f, err := strconv.ParseFloat(x, 64)
			return f, x, err == nil
		}
		t, ok := ParseTimeText(x)
		return t, x, ok
	}
	return 0, "", false
}

// compute assigns every row. It is a pure function of (data, spec).
func compute(d *data, spec *Spec) (*assignment, error) {
	a := &assignment{side: make([]int16, d.n), reason: make([]uint8, d.n), notes: map[string]any{}}
	for _, s := range spec.Sides {
		a.sides = append(a.sides, s.Name)
	}
	fr := make([]float64, len(spec.Sides))
	for i, s := range spec.Sides {
		fr[i] = s.Fraction
	}
	cum := Cumulative(fr)
	var err error
	switch spec.Strategy() {
	case "random":
		for i := 0; i < d.n; i++ {
			a.side[i] = int16(SideIndex(d.u[i], cum))
		}
	case "stratified":
		err = assignStratified(d, spec, fr, cum, a)
	case "grouped":
		for i := 0; i < d.n; i++ {
			a.side[i] = int16(SideIndex(d.entU[d.entity[i]], cum))
		}
	case "stratified-grouped":
		assignStratifiedGrouped(d, fr, a)
	case "time":
		err = assignTime(d, spec, fr, a)
	case "adopted":
		err = assignAdopted(d, spec, a)
	}
	if err != nil {
		return nil, err
	}
	if len(spec.Group) > 0 {
		a.notes["entities"] = len(d.entKey)
		a.notes["null_group_rows"] = d.nullEnts
		a.notes["group_nulls"] = spec.GroupNulls
	}
	switch spec.FoldScheme() {
	case "kfold":
		err = assignFolds(d, spec, a)
	case "rolling":
		err = assignRolling(d, spec, a)
	}
	return a, err
}

// trainIndex is the index of the train-role side, or -1.
func trainIndex(spec *Spec, sides []string) int {
	for i, s := range sides {
		if s == spec.TrainSide {
			return i
		}
	}
	return -1
}

// assignAdopted takes each row's side from a column (or its input file) and folds from a
// fold column.
func assignAdopted(d *data, spec *Spec, a *assignment) error {
	if spec.FromColumn == "" {
		a.sides = []string{"train"}
		if err := resolveRoles(spec, a.sides); err != nil {
			return err
		}
		for i := range a.side {
			a.side[i] = 0
		}
	} else {
		mapped := func(v string) (string, bool) {
			if len(spec.Map) > 0 {
				s, ok := spec.Map[v]
				return s, ok
			}
			if spec.FromColumn == "ss_source" {
				// The file's base name without its data extensions: train.csv.gz → train.
				b := path.Base(strings.ReplaceAll(v, `\`, "/"))
				for {
					ext := strings.ToLower(path.Ext(b))
					if ext != ".gz" && ext != ".csv" && ext != ".tsv" && ext != ".jsonl" && ext != ".json" && ext != ".txt" || ext == strings.ToLower(b) {
						break
					}
					b = b[:len(b)-len(ext)]
				}
				return b, true
			}
			return v, true
		}
		sideOf := map[string]string{}
		var unmapped []string
		for _, v := range d.adopt {
			if _, done := sideOf[v]; done {
				continue
			}
			if v == "\x00" {
				return &DataError{Msg: fmt.Sprintf("column %q (--from-column) has NULL values: every row needs a side", spec.FromColumn)}
			}
			s, ok := mapped(v)
			if !ok {
				unmapped = append(unmapped, v)
				sideOf[v] = ""
				continue
			}
			sideOf[v] = s
		}
		if len(unmapped) > 0 {
			sort.Strings(unmapped)
			return fieldErr("map", "value(s) of %q have no side in --map: %s", spec.FromColumn, strings.Join(quoteAll(unmapped), ", "))
		}
		set := map[string]bool{}
		for _, s := range sideOf {
			if !set[s] {
				if err := checkName("map", "side", s); err != nil {
					return fieldErr("from_column", "value mapped to side %q: not a usable side name (use --map VALUE=SIDE)", s)
				}
			}
			set[s] = true
		}
		var names []string
		for s := range set {
			names = append(names, s)
		}
		rank := func(s string) int {
			switch s {
			case "train":
				return 0
			case "valid", "validation":
				return 1
			case "holdout", "test":
				return 2
			}
			return 3
		}
		sort.Slice(names, func(i, j int) bool {
			if rank(names[i]) != rank(names[j]) {
				return rank(names[i]) < rank(names[j])
			}
			return names[i] < names[j]
		})
		a.sides = names
		if err := resolveRoles(spec, names); err != nil {
			return err
		}
		idx := map[string]int16{}
		for i, s := range names {
			idx[s] = int16(i)
		}
		for i, v := range d.adopt {
			a.side[i] = idx[sideOf[v]]
		}
	}
	if spec.FoldColumn != "" {
		a.fold = make([]int32, d.n)
		k := int64(0)
		for i, f := range d.foldCol {
			if f < 1 || f > 1000 {
				return &DataError{Msg: fmt.Sprintf("column %q (--fold-column): row ss_row %d has fold %s; folds must be integers 1..1000", spec.FoldColumn, d.rowID[i], foldLabel(f))}
			}
			a.fold[i] = int32(f)
			k = max(k, f)
		}
		a.folds = kfoldStats(d, a, int(k), len(spec.Group) > 0)
	}
	return nil
}

func foldLabel(f int64) string {
	if f == math.MinInt64 {
		return "NULL or not an integer"
	}
	return strconv.FormatInt(f, 10)
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, x := range s {
		out[i] = strconv.Quote(x)
	}
	return out
}

// timeJobs parses time values on a worker goroutine while the caller goes on reading. Every
// t[i] depends only on vals[i], so results do not depend on scheduling.
type timeJobs struct {
	numeric bool
	ch      chan timeJob
	free    chan []driver.Value
	wg      sync.WaitGroup
	once    sync.Once
}

type timeJob struct {
	vals []driver.Value
	t    []float64
	bad  []bool
}

func startTimeJobs(numeric bool) *timeJobs {
	j := &timeJobs{numeric: numeric, ch: make(chan timeJob, 8), free: make(chan []driver.Value, 8)}
	go func() {
		for job := range j.ch {
			for i, v := range job.vals {
				tv, ok := timeValueFast(v, j.numeric)
				job.t[i], job.bad[i] = tv, !ok
				job.vals[i] = nil
			}
			select {
			case j.free <- job.vals[:0]:
			default:
			}
			j.wg.Done()
		}
	}()
	return j
}

// buf is an empty chunk for the reader (a recycled one when available).
func (j *timeJobs) buf() []driver.Value {
	select {
	case b := <-j.free:
		return b
	default:
		return make([]driver.Value, 0, hashChunk)
	}
}

func (j *timeJobs) add(vals []driver.Value, t []float64, bad []bool) {
	if len(vals) == 0 {
		return
	}
	j.wg.Add(1)
	j.ch <- timeJob{vals, t, bad}
}

func (j *timeJobs) wait() { j.wg.Wait() }

func (j *timeJobs) stop() { j.once.Do(func() { close(j.ch) }) }
