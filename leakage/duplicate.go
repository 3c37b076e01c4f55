package leakage

import (
	"fmt"
	"math"
	"strings"
)

// baseCTE is the stock-SQL row source of stored queries: every row on a side of the split,
// with its side, role and the given expressions over the table row t.
func (a *audit) baseCTE(exprs ...string) string {
	var b strings.Builder
	b.WriteString("k AS (SELECT r.row_id, r.side, s.role")
	for _, e := range exprs {
		b.WriteString(", " + e)
	}
	fmt.Fprintf(&b, " FROM ss_split_rows r JOIN %s t ON t.ss_row = r.row_id JOIN ss_split_sides s ON s.split_name = r.split_name AND s.side = r.side WHERE r.split_name = %s AND r.side <> '')",
		quoteIdent(a.table), quoteString(a.split))
	return b.String()
}

// replaySQL compares recomputed (row_id, side, anchor) triples, anchor being the smallest row
// of each group, with the stored findings of this check and subject: no rows = agreement.
func (a *audit) replaySQL(ctes []string, recomputed, subject string) string {
	stored := fmt.Sprintf(`SELECT fr.row_id, fr.side, min(fr.row_id) OVER (PARTITION BY fr.seq) FROM ss_finding_rows fr JOIN ss_findings f ON f.audit_id = fr.audit_id AND f.seq = fr.seq WHERE f.audit_id = %d AND f.check_name = %s AND f.subject = %s`,
		a.auditID, quoteString(a.check.Name), quoteString(subject))
	all := append(append([]string{}, ctes...), "recomputed(row_id, side, anchor) AS ("+recomputed+")", "stored(row_id, side, anchor) AS ("+stored+")")
	return "WITH " + strings.Join(all, ",\n") + "\n" +
		"SELECT 'recomputed, not stored' AS problem, row_id, side, anchor FROM (SELECT * FROM recomputed EXCEPT SELECT * FROM stored)\n" +
		"UNION ALL SELECT 'stored, not recomputed', row_id, side, anchor FROM (SELECT * FROM stored EXCEPT SELECT * FROM recomputed)\n" +
		"ORDER BY 3, 2"
}

func (a *audit) queryName(suffix string) string { return a.check.Name + "." + suffix }

func (a *audit) featureKey() keySpec {
	digits := exactDigits
	if v, ok := a.opts.Params["exact_duplicate.digits"]; ok {
		digits = int(v)
	}
	if v, ok := a.opts.Params["exact_duplicate.normalize"]; ok && v == 0 {
		if len(a.feature) == len(a.cols) {
			return keySpec{cols: a.feature, digest: true}
		}
		return keySpec{cols: a.feature, realDig: 17}
	}
	return keySpec{cols: a.feature, normalize: true, realDig: digits}
}

func sideSummary(s []SideRows) string {
	var parts []string
	for _, x := range s {
		parts = append(parts, fmt.Sprintf("%d on %s", len(x.Rows), x.Side))
	}
	return strings.Join(parts, ", ")
}

func (a *audit) distinctSides(g []int32) int {
	if len(g) == 0 {
		return 0
	}
	first, n := a.side[g[0]], 1
	var seen map[int]bool
	for _, i := range g[1:] {
		if s := a.side[i]; s != first {
			if seen == nil {
				seen = map[int]bool{first: true}
			}
			if !seen[s] {
				seen[s] = true
				n++
			}
		}
	}
	return n
}

func runExactDuplicate(a *audit) error {
	key := a.featureKey()
	keys := a.keys(key)
	groups := groupsOf(keys)
	var within, other []Finding
	for _, g := range groups {
		if a.distinctSides(g) > 1 {
			s := a.groupSides(g)
			a.add(Finding{Severity: Error, Subject: "across sides", Sides: s, Score: 1, Query: a.queryName("across"),
				Message:  fmt.Sprintf("%d rows with identical features: %s", len(g), sideSummary(s)),
				Evidence: map[string]any{"columns": len(key.cols)}})
		}
		per := map[int][]int32{}
		for _, i := range g {
			per[a.side[i]] = append(per[a.side[i]], i)
		}
		for si := range a.sides {
			if h := per[si]; len(h) > 1 && a.sides[si].Role != "holdout" {
				s := a.groupSides(h)
				other = append(other, Finding{Severity: Info, Subject: "within other sides", Sides: s, Score: 1, Query: a.queryName("within_other"),
					Message: fmt.Sprintf("%d identical rows on side %s (repeated records, e.g. imported twice)", len(h), a.sides[si].Name)})
			}
			if h := per[si]; len(h) > 1 && a.sides[si].Role == "holdout" {
				s := a.groupSides(h)
				within = append(within, Finding{Severity: Warn, Subject: "within holdout", Sides: s, Score: 1, Query: a.queryName("within_holdout"),
					Message: fmt.Sprintf("%d identical rows on holdout side %s count %d times in its metric", len(h), a.sides[si].Name, len(h))})
			}
		}
	}
	for _, f := range append(within, other...) {
		a.add(f)
	}
	ks := a.keySQL(key, "t")
	cte := a.baseCTE(ks + " AS key")
	a.addQuery(Query{Name: a.queryName("across"), Kind: "check",
		Description: "rows with identical normalised features on more than one side; no rows = the stored exact_duplicate findings (across sides) hold",
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY key) FROM k WHERE key IN (SELECT key FROM k GROUP BY key HAVING count(DISTINCT side) > 1)`, "across sides")})
	a.addQuery(Query{Name: a.queryName("within_holdout"), Kind: "check",
		Description: "identical rows repeated within a holdout side; no rows = the stored exact_duplicate findings (within holdout) hold",
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY side, key) FROM k WHERE role = 'holdout' AND (side, key) IN (SELECT side, key FROM k WHERE role = 'holdout' GROUP BY side, key HAVING count(*) > 1)`, "within holdout")})
	a.addQuery(Query{Name: a.queryName("within_other"), Kind: "check",
		Description: "identical rows repeated within a train or other side; no rows = the stored exact_duplicate findings (within other sides) hold",
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY side, key) FROM k WHERE role <> 'holdout' AND (side, key) IN (SELECT side, key FROM k WHERE role <> 'holdout' GROUP BY side, key HAVING count(*) > 1)`, "within other sides")})
	return nil
}

func runNearDuplicateNumeric(a *audit) error {
	if tol := a.p("tol"); tol != 0 {
		return runNearNumericTol(a, tol)
	}
	exact := a.featureKey()
	digits := int(a.p("digits"))
	near := keySpec{cols: a.feature, normalize: true, realDig: digits, intDig: digits}
	k1 := a.keys(exact)
	k2 := a.keys(near)
	for _, g := range groupsOf(k2) {
		if a.distinctSides(g) < 2 {
			continue
		}
		distinct := map[uint64]bool{}
		for _, i := range g {
			distinct[k1[i]] = true
		}
		if len(distinct) < 2 {
			continue // all exact duplicates: reported by exact_duplicate
		}
		s := a.groupSides(g)
		a.add(Finding{Severity: Warn, Subject: "across sides", Sides: s, Score: float64(digits), Query: a.queryName("across"),
			Message:  fmt.Sprintf("%d rows equal once numbers are rounded to %d significant digits (%d distinct exact rows): %s", len(g), digits, len(distinct), sideSummary(s)),
			Evidence: map[string]any{"digits": digits, "distinct_exact": len(distinct)}})
	}
	cte := a.baseCTE(a.keySQL(exact, "t")+" AS key1", a.keySQL(near, "t")+" AS key2")
	a.addQuery(Query{Name: a.queryName("across"), Kind: "check",
		Description: fmt.Sprintf("rows on more than one side equal after rounding numbers to %d significant digits but not exactly equal; no rows = the stored findings hold", digits),
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY key2) FROM k WHERE key2 IN (SELECT key2 FROM k GROUP BY key2 HAVING count(DISTINCT side) > 1 AND count(DISTINCT key1) > 1)`, "across sides")})
	return nil
}

func runLabelConflict(a *audit) error {
	key := a.featureKey()
	keys := a.keys(key)
	lab := a.data[a.label]
	// Rows with a NULL label take no part.
	masked := make([]uint64, len(keys))
	copy(masked, keys)
	var across, within []Finding
	for _, g0 := range groupsOf(masked) {
		var g []int32
		for _, i := range g0 {
			if !lab.null[i] {
				g = append(g, i)
			}
		}
		labels := map[string]bool{}
		for _, i := range g {
			labels[lab.repr(int(i))] = true
		}
		if len(labels) < 2 {
			continue
		}
		s := a.groupSides(g)
		counts := map[string]int{}
		for _, i := range g {
			counts[labelText(lab, int(i))]++
		}
		ev := map[string]any{"labels": counts}
		if a.distinctSides(g) > 1 {
			across = append(across, Finding{Severity: Error, Subject: "across sides", Sides: s, Score: float64(len(labels)), Query: a.queryName("across"), Evidence: ev,
				Message: fmt.Sprintf("%d rows with identical features carry %d different labels (%s): %s", len(g), len(labels), labelList(counts), sideSummary(s))})
		} else {
			within = append(within, Finding{Severity: Warn, Subject: "within side", Sides: s, Score: float64(len(labels)), Query: a.queryName("within"), Evidence: ev,
				Message: fmt.Sprintf("%d rows with identical features on %s carry %d different labels (%s)", len(g), s[0].Side, len(labels), labelList(counts))})
		}
	}
	for _, f := range append(across, within...) {
		a.add(f)
	}
	l := "t." + quoteIdent(a.label)
	cte := a.baseCTE(a.keySQL(key, "t")+" AS key", l+" AS label")
	a.addQuery(Query{Name: a.queryName("across"), Kind: "check",
		Description: "groups of identical normalised features with more than one label, spanning sides; no rows = the stored findings hold",
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY key) FROM k WHERE label IS NOT NULL AND key IN (SELECT key FROM k WHERE label IS NOT NULL GROUP BY key HAVING count(DISTINCT label) > 1 AND count(DISTINCT side) > 1)`, "across sides")})
	a.addQuery(Query{Name: a.queryName("within"), Kind: "check",
		Description: "groups of identical normalised features with more than one label, on one side; no rows = the stored findings hold",
		SQL:         a.replaySQL([]string{cte}, `SELECT row_id, side, min(row_id) OVER (PARTITION BY key) FROM k WHERE label IS NOT NULL AND key IN (SELECT key FROM k WHERE label IS NOT NULL GROUP BY key HAVING count(DISTINCT label) > 1 AND count(DISTINCT side) = 1)`, "within side")})
	return nil
}

func labelText(c *column, i int) string {
	switch c.SQLType {
	case "TEXT":
		return c.str[i]
	case "INTEGER":
		return fmt.Sprint(c.ints[i])
	}
	if math.IsNaN(c.num[i]) {
		return "NULL"
	}
	return fmt.Sprint(c.num[i])
}

func labelList(m map[string]int) string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	sortStrings(ks)
	var parts []string
	for _, k := range ks {
		parts = append(parts, fmt.Sprintf("%s×%d", k, m[k]))
	}
	return strings.Join(parts, ", ")
}
