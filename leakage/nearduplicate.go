package leakage

import (
	"fmt"
	"math"
	"sort"
)

func runNearDuplicateText(a *audit) error {
	sh := Shingling{K: int(a.p("k")), Words: a.p("words") != 0}
	if sh.K < 1 {
		return inputf("--param near_duplicate_text.k=%g: shingle size must be at least 1", a.p("k"))
	}
	th := a.p("threshold")
	errAt := a.p("error_at")
	for _, col := range a.text {
		c := a.data[col]
		side := make([]int, len(a.rowID))
		for i := range side {
			side[i] = a.side[i]
			if c.null[i] {
				side[i] = -1
			}
		}
		report, end := a.progress("audit: near-duplicate " + col)
		res, err := NearDuplicates(c.str, side, NearDupOptions{Shingling: sh, Threshold: th, Bands: int(a.p("bands")), Rows: int(a.p("rows")), Workers: a.workers, Progress: report})
		end()
		if err != nil {
			return err
		}
		var fs []Finding
		for _, g := range res.Copies {
			idx := make([]int32, len(g))
			for i, m := range g {
				idx[i] = int32(m)
			}
			s := a.groupSides(idx)
			fs = append(fs, Finding{Severity: Error, Subject: col, Sides: s, Score: 1, Query: a.queryName(col),
				Message:  fmt.Sprintf("%d rows carry the same %s (identical shingle sets): %s", len(g), col, sideSummary(s)),
				Evidence: map[string]any{"shingle": sh.Unit(), "k": sh.K, "copies": len(g)}})
		}
		for _, p := range res.Pairs {
			sev := Warn
			if p.Jaccard >= errAt {
				sev = Error
			}
			s := a.groupSides([]int32{int32(p.A), int32(p.B)})
			fs = append(fs, Finding{Severity: sev, Subject: col, Sides: s, Score: p.Jaccard, Query: a.queryName(col),
				Message:  fmt.Sprintf("%s of row %d (%s) and row %d (%s) have shingle Jaccard %.3f", col, a.rowID[p.A], a.sides[a.side[p.A]].Name, a.rowID[p.B], a.sides[a.side[p.B]].Name, p.Jaccard),
				Evidence: map[string]any{"shingle": sh.Unit(), "k": sh.K}})
		}
		sort.SliceStable(fs, func(i, j int) bool { return minRow(fs[i]) < minRow(fs[j]) })
		for _, f := range fs {
			a.add(f)
		}
		if res.Truncated {
			a.add(Finding{Severity: Warn, Subject: col, Score: float64(len(res.Pairs)),
				Message: fmt.Sprintf("stopped after %d near-duplicate pairs of %s; more exist", len(res.Pairs), col)})
		}
		fn := "leak_jaccard"
		if sh.Words {
			fn = "leak_jaccard_words"
		}
		q := fmt.Sprintf(`WITH p AS (SELECT f.seq, f.score, min(CASE WHEN fr.side = f.side_a THEN fr.row_id END) AS ra, min(CASE WHEN fr.side = f.side_b THEN fr.row_id END) AS rb
  FROM ss_findings f JOIN ss_finding_rows fr ON fr.audit_id = f.audit_id AND fr.seq = f.seq
  WHERE f.audit_id = %d AND f.check_name = 'near_duplicate_text' AND f.subject = %s AND f.score IS NOT NULL AND f.side_b IS NOT NULL GROUP BY f.seq),
j AS (SELECT p.seq, p.ra, p.rb, p.score, %s(a.%s, b.%s, %d) AS recomputed FROM p JOIN %s a ON a.ss_row = p.ra JOIN %s b ON b.ss_row = p.rb)
SELECT seq, ra, rb, score, recomputed FROM j WHERE recomputed < %v OR abs(recomputed - score) > 1e-12 ORDER BY seq`,
			a.auditID, quoteString(col), fn, quoteIdent(col), quoteIdent(col), sh.K, quoteIdent(a.table), quoteIdent(a.table), th)
		a.addQuery(Query{Name: a.queryName(col), Kind: "check", NeedsTool: true, SQL: q,
			Description: fmt.Sprintf("recomputes the exact shingle Jaccard of every stored near-duplicate pair of %s; no rows = every pair is confirmed (pairs the detector missed are not checked: that needs all pairs)", col)})
	}
	return nil
}

func minRow(f Finding) int64 {
	m := int64(math.MaxInt64)
	for _, s := range f.Sides {
		for _, r := range s.Rows {
			m = min(m, r)
		}
	}
	return m
}
