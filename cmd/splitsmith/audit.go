package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"

	"github.com/urfave/cli/v2"

	"splitsmith/internal/store"
	"splitsmith/leakage"
)

const auditHint = "splitsmith audit --db FILE --split NAME [--label COL] [--text COL]"

type auditOptions struct {
	db       string
	format   string
	failOn   string
	perCheck int
	opts     leakage.Options
}

func newAuditCommand(s stdio) *cli.Command {
	return &cli.Command{
		Name:  "audit",
		Usage: "report every leak between the sides of a split",
		Description: `Runs the leakage checks (splitsmith audit --list-checks shows each, with its
thresholds and sources) on split NAME and stores the findings in ss_findings (one ss_audits
row per audit), the rows each involves in ss_finding_rows (for shared entities and
interleaved entity histories, each entity and its rows per side in ss_finding_items), and
SQL that recomputes them in
ss_audit_queries (subject 'audit:NAME'); a stored 'check' query returns no rows while its
findings still hold. Findings and their order are deterministic.

Feature columns are every user column except the label, the entity columns, the split's key
columns and --ignore. Entity columns default to the split's group columns, the time column
to the split's. Checks whose inputs are missing (no --label, --text or --time) are skipped
unless --checks names them. Thresholds: --param CHECK.NAME=VALUE.

Examples:
   splitsmith audit --db pipes.db --split naive --label failed --text notes
   splitsmith audit --db pipes.db --split sound --label failed --fail-on error
   splitsmith audit --db pipes.db --split naive --checks exact_duplicate,shared_entity --format json
   splitsmith audit --list-checks`,
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "db", Usage: "splitsmith database `FILE`", EnvVars: []string{"SPLITSMITH_DB"}},
			&cli.StringFlag{Name: "split", Usage: "the split `NAME` to audit"},
			&cli.StringSliceFlag{Name: "checks", Usage: "comma-separated check `NAMES` (default: every check whose inputs are given)"},
			&cli.StringFlag{Name: "label", Usage: "label `COL`"},
			&cli.StringSliceFlag{Name: "text", Usage: "free-text `COL,...` for near-duplicate detection"},
			&cli.StringFlag{Name: "time", Usage: "time `COL` (default: the split's time column)"},
			&cli.StringSliceFlag{Name: "entity", Usage: "entity `COL,...` (default: the split's group columns; '' for none)"},
			&cli.StringSliceFlag{Name: "ignore", Usage: "`COL,...` left out of the feature columns"},
			&cli.StringSliceFlag{Name: "param", Usage: "threshold `CHECK.NAME=VALUE` (repeatable)"},
			failOnFlag(),
			formatFlag("table", "table", "json", "markdown"),
			&cli.IntFlag{Name: "show", Value: 10, Usage: "findings printed per check in table and markdown output (`N`; all are stored)"},
			&cli.BoolFlag{Name: "list-checks", Usage: "print the check catalog and exit"},
		},
		Action: func(cc *cli.Context) error {
			format, err := checkChoice(cc, "format", "table", "json", "markdown")
			if err != nil {
				return err
			}
			if cc.Bool("list-checks") {
				return listChecks(s.out, format)
			}
			o := auditOptions{db: cc.String("db"), format: format, perCheck: cc.Int("show")}
			if o.db == "" {
				return usagef(auditHint, "--db is required")
			}
			if cc.String("split") == "" {
				return usagef(auditHint, "--split is required")
			}
			if o.failOn, err = checkFailOn(cc); err != nil {
				return err
			}
			params, err := leakage.ParseParams(cc.StringSlice("param"))
			if err != nil {
				return asUsage(err, auditHint)
			}
			checks := cc.StringSlice("checks")
			if _, err := leakage.ParseChecks(checks); err != nil {
				return asUsage(err, auditHint)
			}
			var entity []string
			if cc.IsSet("entity") {
				entity = []string{} // --entity '' turns entity checks off
				for _, e := range cc.StringSlice("entity") {
					if strings.TrimSpace(e) != "" {
						entity = append(entity, strings.TrimSpace(e))
					}
				}
			}
			o.opts = leakage.Options{Split: cc.String("split"), Checks: checks, Label: cc.String("label"), Text: cc.StringSlice("text"),
				Time: cc.String("time"), Entity: entity, Ignore: cc.StringSlice("ignore"), Params: params}
			return runAudit(cc.Context, o, s, func(ctx context.Context, fn func(context.Context, *store.Tx) error) error {
				return update(ctx, cc, o.db, false, fn)
			})
		},
	}
}

// runAudit audits in one transaction, prints the report, and returns a findingsError (exit 3)
// after committing when a finding reaches --fail-on.
func runAudit(ctx context.Context, o auditOptions, s stdio, upd func(context.Context, func(context.Context, *store.Tx) error) error) error {
	var rep *leakage.Report
	var progs []*progress
	o.opts.Progress = func(label string) (func(int64, int64), func()) {
		p := newProgress(s.err, label)
		progs = append(progs, p)
		return p.Report, p.Done
	}
	err := upd(ctx, func(ctx context.Context, tx *store.Tx) error {
		r, err := leakage.Run(ctx, tx.Conn, tx.RunID, tx, o.opts)
		if err != nil {
			var ie *leakage.InputError
			if errors.As(err, &ie) {
				return asUsage(err, auditHint)
			}
			return err
		}
		rep = r
		tx.SetDetail("audit_id", r.AuditID)
		tx.SetDetail("split", r.Split)
		tx.SetDetail("options", r.Resolved)
		tx.SetDetail("findings", map[string]int{"error": r.Count(leakage.Error), "warn": r.Count(leakage.Warn), "info": r.Count(leakage.Info)})
		if o.failOn != "" && r.Worst().Rank() >= leakage.Severity(o.failOn).Rank() {
			tx.SetOutcome("findings")
		}
		return nil
	})
	if err != nil {
		return err
	}
	if err := writeAuditReport(s.out, rep, o); err != nil {
		return err
	}
	if o.failOn != "" && rep.Worst().Rank() >= leakage.Severity(o.failOn).Rank() {
		n := 0
		for _, f := range rep.Findings {
			if f.Severity.Rank() >= leakage.Severity(o.failOn).Rank() {
				n++
			}
		}
		return &findingsError{msg: fmt.Sprintf("audit of split %s: %d finding(s) at or above %s (stored as audit %d)", rep.Split, n, o.failOn, rep.AuditID)}
	}
	return nil
}

func scoreCell(x float64) any {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return ""
	}
	return strings.TrimRight(strings.TrimRight(fmt.Sprintf("%.4f", x), "0"), ".")
}

type checkCount struct {
	ran              bool
	reason           string
	err, warn, info_ int
}

func countByCheck(rep *leakage.Report) map[string]*checkCount {
	m := map[string]*checkCount{}
	for _, c := range leakage.All() {
		m[c.Name] = &checkCount{}
	}
	for _, n := range rep.Ran {
		m[n].ran = true
	}
	for _, s := range rep.Skipped {
		m[s.Check].reason = s.Reason
	}
	for _, f := range rep.Findings {
		switch f.Severity {
		case leakage.Error:
			m[f.Check].err++
		case leakage.Warn:
			m[f.Check].warn++
		default:
			m[f.Check].info_++
		}
	}
	return m
}

func writeAuditReport(w io.Writer, rep *leakage.Report, o auditOptions) error {
	counts := countByCheck(rep)
	if o.format == "json" {
		type side struct {
			Side string  `json:"side"`
			Rows []int64 `json:"rows"`
		}
		type itemSide struct {
			Side string `json:"side"`
			Rows int    `json:"rows"`
		}
		type item struct {
			Item     string     `json:"item"`
			FirstRow int64      `json:"first_row"`
			Sides    []itemSide `json:"sides"`
		}
		type finding struct {
			Seq      int            `json:"seq"`
			Check    string         `json:"check"`
			Severity string         `json:"severity"`
			Subject  string         `json:"subject"`
			Item     *string        `json:"item"`
			Sides    []side         `json:"sides"`
			Items    []item         `json:"items,omitempty"`
			Score    *float64       `json:"score"`
			Message  string         `json:"message"`
			Evidence map[string]any `json:"evidence"`
			Query    string         `json:"query,omitempty"`
		}
		type check struct {
			Name    string `json:"name"`
			Ran     bool   `json:"ran"`
			Skipped string `json:"skipped,omitempty"`
			Error   int    `json:"error"`
			Warn    int    `json:"warn"`
			Info    int    `json:"info"`
		}
		out := struct {
			AuditID  int64              `json:"audit_id"`
			Split    string             `json:"split"`
			Table    string             `json:"table"`
			Rows     int                `json:"rows"`
			Sides    []leakage.SideInfo `json:"sides"`
			Checks   []check            `json:"checks"`
			Findings []finding          `json:"findings"`
		}{AuditID: rep.AuditID, Split: rep.Split, Table: rep.Table, Rows: rep.Rows, Sides: rep.Sides, Findings: []finding{}}
		for _, c := range leakage.All() {
			k := counts[c.Name]
			out.Checks = append(out.Checks, check{c.Name, k.ran, k.reason, k.err, k.warn, k.info_})
		}
		for i, f := range rep.Findings {
			x := finding{Seq: i + 1, Check: f.Check, Severity: string(f.Severity), Subject: f.Subject, Message: f.Message, Evidence: f.Evidence, Query: f.Query, Sides: []side{}}
			if f.HasItem {
				it := f.Item
				x.Item = &it
			}
			if !math.IsNaN(f.Score) && !math.IsInf(f.Score, 0) {
				sc := f.Score
				x.Score = &sc
			}
			for _, s := range f.Sides {
				x.Sides = append(x.Sides, side{s.Side, s.Rows})
			}
			for _, it := range f.Items {
				y := item{Item: it.Name, FirstRow: it.FirstRow}
				for _, s := range it.Sides {
					y.Sides = append(y.Sides, itemSide{s.Side, s.N})
				}
				x.Items = append(x.Items, y)
			}
			out.Findings = append(out.Findings, x)
		}
		return writeJSON(w, out)
	}
	var sides []string
	for _, s := range rep.Sides {
		sides = append(sides, fmt.Sprintf("%s %d (%s)", s.Name, s.Rows, s.Role))
	}
	md := o.format == "markdown"
	tf := "table"
	if md {
		tf = "markdown"
		fmt.Fprintf(w, "### Audit %d of split `%s`\n\n", rep.AuditID, rep.Split)
	} else {
		fmt.Fprintf(w, "audit %d of split %s\n", rep.AuditID, rep.Split)
	}
	fmt.Fprintf(w, "table %s, %d rows: %s\n\n", rep.Table, rep.Rows, strings.Join(sides, ", "))
	sum := &table{Header: []string{"check", "error", "warn", "info", "status"}}
	for _, c := range leakage.All() {
		k := counts[c.Name]
		status := "ran"
		if !k.ran {
			status = "skipped: " + k.reason
			if k.reason == "" {
				status = "not selected"
			}
		}
		sum.add(c.Name, k.err, k.warn, k.info_, status)
	}
	if err := sum.write(w, tf); err != nil {
		return err
	}
	fmt.Fprintln(w)
	ft := &table{Header: []string{"seq", "check", "severity", "subject", "side_a", "rows_a", "side_b", "rows_b", "score", "message"}}
	shown := map[string]int{}
	hidden := 0
	for i, f := range rep.Findings {
		if shown[f.Check] >= o.perCheck {
			hidden++
			continue
		}
		shown[f.Check]++
		var sa, sb string
		var na, nb int
		if len(f.Sides) > 0 {
			sa, na = f.Sides[0].Side, len(f.Sides[0].Rows)
		} else {
			sa, na = f.SideA, f.NA
		}
		if len(f.Sides) > 1 {
			sb, nb = f.Sides[1].Side, len(f.Sides[1].Rows)
		} else if len(f.Sides) == 0 {
			sb, nb = f.SideB, f.NB
		}
		subj := f.Subject
		if f.HasItem {
			subj += " " + f.Item
		}
		ft.add(i+1, f.Check, string(f.Severity), subj, sa, na, sb, nb, scoreCell(f.Score), f.Message)
	}
	if len(rep.Findings) == 0 {
		fmt.Fprintln(w, "no findings")
	} else if err := ft.write(w, tf); err != nil {
		return err
	}
	if hidden > 0 {
		fmt.Fprintf(w, "\n%d more finding(s) not shown (--show %d); all are in ss_findings (audit_id %d)\n", hidden, o.perCheck, rep.AuditID)
	}
	fmt.Fprintf(w, "\nstored queries: SELECT name, kind, description FROM ss_audit_queries WHERE subject = 'audit:%s'\n", rep.Split)
	return nil
}

func listChecks(w io.Writer, format string) error {
	t := &table{Header: []string{"check", "needs", "stored_sql", "parameters", "what it detects"}}
	for _, c := range leakage.All() {
		var ps []string
		for _, p := range c.Params {
			ps = append(ps, fmt.Sprintf("%s=%g", p.Name, p.Default))
		}
		t.add(c.Name, strings.Join(c.Requires, ","), c.SQL, strings.Join(ps, " "), c.Title)
	}
	if format == "json" {
		type param struct {
			Name    string  `json:"name"`
			Default float64 `json:"default"`
			Doc     string  `json:"doc"`
		}
		type check struct {
			Name     string   `json:"name"`
			Title    string   `json:"title"`
			Doc      string   `json:"doc"`
			Requires []string `json:"requires"`
			SQL      string   `json:"stored_sql"`
			Params   []param  `json:"params"`
		}
		var out []check
		for _, c := range leakage.All() {
			x := check{Name: c.Name, Title: c.Title, Doc: c.Doc, Requires: orEmptyS(c.Requires), SQL: c.SQL, Params: []param{}}
			for _, p := range c.Params {
				x.Params = append(x.Params, param{p.Name, p.Default, p.Doc})
			}
			out = append(out, x)
		}
		return writeJSON(w, out)
	}
	if format == "markdown" {
		return t.write(w, "markdown")
	}
	if err := t.write(w, "table"); err != nil {
		return err
	}
	fmt.Fprintln(w)
	for _, c := range leakage.All() {
		fmt.Fprintf(w, "%s\n   %s\n", c.Name, wrap(c.Doc, 90, "   "))
		for _, p := range c.Params {
			fmt.Fprintf(w, "   --param %s.%s (default %g): %s\n", c.Name, p.Name, p.Default, p.Doc)
		}
	}
	return nil
}

func orEmptyS(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func wrap(s string, width int, indent string) string {
	var b strings.Builder
	n := 0
	for i, word := range strings.Fields(s) {
		if i > 0 {
			if n+1+len(word) > width {
				b.WriteString("\n" + indent)
				n = 0
			} else {
				b.WriteByte(' ')
				n++
			}
		}
		b.WriteString(word)
		n += len(word)
	}
	return b.String()
}

// demoAuditStep audits the demo's naive and sound splits and prints their summaries side by
// side.
func demoAuditStep(ctx context.Context, w io.Writer, db, dir string) error {
	s := stdio{in: strings.NewReader(""), out: w, err: w}
	for _, split := range []string{"naive", "sound"} {
		args := []string{"audit", "--db", db, "--split", split, "--label", demoLabel, "--text", demoText, "--entity", demoEntity, "--time", demoTime}
		fmt.Fprintf(w, "$ splitsmith %s   (report in %s)\n", strings.Join(append([]string{"audit", "--db", filepath.Base(db)}, args[3:]...), " "), filepath.Join(dir, "audit_"+split+".txt"))
		if err := demoStep(ctx, s, dir, "audit_"+split, args...); err != nil {
			return err
		}
	}
	fmt.Fprintln(w)
	d, err := openRead(ctx, db, true)
	if err != nil {
		return err
	}
	defer d.Close()
	count := func(split string) (map[string][3]int, int64, error) {
		var id int64
		if err := d.QueryRowContext(ctx, `SELECT max(audit_id) FROM ss_audits WHERE split_name = ?`, split).Scan(&id); err != nil {
			return nil, 0, err
		}
		rows, err := d.QueryContext(ctx, `SELECT check_name, severity, count(*) FROM ss_findings WHERE audit_id = ? GROUP BY 1, 2`, id)
		if err != nil {
			return nil, 0, err
		}
		defer rows.Close()
		m := map[string][3]int{}
		for rows.Next() {
			var c, s string
			var n int
			if err := rows.Scan(&c, &s, &n); err != nil {
				return nil, 0, err
			}
			v := m[c]
			v[map[string]int{"error": 0, "warn": 1, "info": 2}[s]] = n
			m[c] = v
		}
		return m, id, rows.Err()
	}
	naive, idN, err := count("naive")
	if err != nil {
		return err
	}
	sound, idS, err := count("sound")
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "audit findings (error/warn/info): naive split (audit %d) beside sound split (audit %d)\n", idN, idS)
	t := &table{Header: []string{"check", "naive", "sound"}}
	cell := func(v [3]int) string { return fmt.Sprintf("%d/%d/%d", v[0], v[1], v[2]) }
	for _, c := range leakage.All() {
		t.add(c.Name, cell(naive[c.Name]), cell(sound[c.Name]))
	}
	if err := t.write(w, "table"); err != nil {
		return err
	}
	var msgs []string
	rows, err := d.QueryContext(ctx, `SELECT check_name, message FROM ss_findings WHERE audit_id = ? AND severity = 'error' GROUP BY check_name, subject HAVING seq = min(seq) ORDER BY min(seq)`, idN)
	if err != nil {
		return err
	}
	for rows.Next() {
		var c, m string
		rows.Scan(&c, &m)
		msgs = append(msgs, fmt.Sprintf("  %s: %s", c, m))
	}
	rows.Close()
	if len(msgs) > 0 {
		fmt.Fprintf(w, "naive split, first error of each kind:\n%s\n", strings.Join(msgs, "\n"))
	}
	fmt.Fprintln(w, "sound split: what remains is in the data itself (the work_order leak, shift over time); the holdout size is a planning figure, not a guarantee")
	return nil
}

// The demo table's label and free-text columns (ingest's demo generator).
const (
	demoLabel  = "repaired_365d"
	demoText   = "note"
	demoEntity = "segment_id"
	demoTime   = "inspection_date"
)
