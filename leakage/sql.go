package leakage

import (
	"database/sql/driver"
	"fmt"
	"math"

	"splitsmith/internal/sqlfn"
)

// SQL returns the SQL functions this package declares (see DEVELOPERS.md).
func SQL() sqlfn.Set {
	return sqlfn.Set{Package: "leakage", Funcs: []sqlfn.Func{
		{Name: "leak_norm", NArgs: 1, Deterministic: true, Args: "text",
			Doc:      "text as exact_duplicate compares it: whitespace runs collapsed, trimmed, ascii lower-cased",
			Examples: []sqlfn.Example{{SQL: `SELECT leak_norm('  Pipe' || char(9) || 'CRACKED   at joint ')`, Want: "pipe cracked at joint"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if sqlfn.IsNull(args, 0) {
					return nil, nil
				}
				s, err := sqlfn.Text(args, 0, "text")
				if err != nil {
					return nil, err
				}
				return NormalizeValue(s), nil
			}},
		jaccardFunc("leak_jaccard", false, "exact jaccard similarity of two texts' character k-shingle sets (after lower-casing, punctuation to spaces)",
			`SELECT leak_jaccard('abcdabd', 'abcdab', 2)`, "0.8"),
		jaccardFunc("leak_jaccard_words", true, "exact jaccard similarity of two texts' word k-shingle sets",
			`SELECT leak_jaccard_words('Main cracked near valve', 'main cracked, near the valve', 1)`, "0.8"),
		{Name: "leak_minhash", NArgs: 4, Deterministic: true, Args: "text, k, n, seed",
			Doc:      "minhash signature (n big-endian 32-bit values) of the text's character k-shingles, hash functions drawn from seed",
			Examples: []sqlfn.Example{{SQL: `SELECT length(leak_minhash('pipe cracked near the valve', 5, 100, 1))`, Want: "400"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if sqlfn.IsNull(args, 0) {
					return nil, nil
				}
				s, err := sqlfn.Text(args, 0, "text")
				if err != nil {
					return nil, err
				}
				k, err := sqlfn.Int(args, 1, "k")
				if err != nil {
					return nil, err
				}
				n, err := sqlfn.Int(args, 2, "n")
				if err != nil {
					return nil, err
				}
				seed, err := sqlfn.Int(args, 3, "seed")
				if err != nil {
					return nil, err
				}
				if k < 1 || n < 1 || n > 4096 {
					return nil, fmt.Errorf("k must be at least 1 and n 1..4096, got k=%d n=%d", k, n)
				}
				return MinHashBytes(s, int(k), int(n), uint64(seed)), nil
			}},
		{Name: "leak_minhash_jaccard", NArgs: 2, Deterministic: true, Args: "sig_a, sig_b",
			Doc:      "share of equal positions of two leak_minhash signatures: the minhash estimate of their jaccard similarity",
			Examples: []sqlfn.Example{{SQL: `SELECT leak_minhash_jaccard(leak_minhash('pipe cracked', 5, 64, 1), leak_minhash('Pipe, cracked!', 5, 64, 1))`, Want: "1"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if sqlfn.IsNull(args, 0) || sqlfn.IsNull(args, 1) {
					return nil, nil
				}
				a, err := sqlfn.Bytes(args, 0, "sig_a")
				if err != nil {
					return nil, err
				}
				b, err := sqlfn.Bytes(args, 1, "sig_b")
				if err != nil {
					return nil, err
				}
				return SignatureSimilarity(a, b)
			}},
		{Name: "leak_lsh_probability", NArgs: 3, Deterministic: true, Args: "s, bands, rows",
			Doc:      "chance that a pair of jaccard similarity s shares an lsh band: 1-(1-s^rows)^bands",
			Examples: []sqlfn.Example{{SQL: `SELECT round(leak_lsh_probability(0.8, 20, 5), 5)`, Want: "0.99964"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				s, err := sqlfn.Float(args, 0, "s")
				if err != nil {
					return nil, err
				}
				b, err := sqlfn.Int(args, 1, "bands")
				if err != nil {
					return nil, err
				}
				r, err := sqlfn.Int(args, 2, "rows")
				if err != nil {
					return nil, err
				}
				return LSHProbability(s, int(b), int(r)), nil
			}},
		{Name: "leak_auc", NArgs: 2, Deterministic: true, Args: "score, label",
			Doc:      "aggregate: area under the roc curve of score for rows where label is true (mann-whitney u / (n1*n0), ties half); rows with a null skipped",
			Examples: []sqlfn.Example{{SQL: `SELECT leak_auc(s, l) FROM (SELECT 19 AS s, 1 AS l UNION ALL SELECT 22, 1 UNION ALL SELECT 16, 1 UNION ALL SELECT 29, 1 UNION ALL SELECT 24, 1 UNION ALL SELECT 20, 0 UNION ALL SELECT 11, 0 UNION ALL SELECT 17, 0 UNION ALL SELECT 12, 0)`, Want: "0.85"}},
			NewAgg:   func() sqlfn.Agg { return &aucAgg{} }},
		{Name: "leak_psi", NArgs: 2, Deterministic: true, Args: "x, reference",
			Doc:      "aggregate: population stability index of the rows where reference is false against those where it is true (deciles of the reference, or levels for text; null a bin of its own)",
			Examples: []sqlfn.Example{{SQL: `SELECT round(leak_psi(x, r), 6) FROM (SELECT 'a' AS x, 1 AS r UNION ALL SELECT 'b', 1 UNION ALL SELECT 'a', 0 UNION ALL SELECT 'a', 0 UNION ALL SELECT 'a', 0 UNION ALL SELECT 'b', 0)`, Want: "0.274653"}},
			NewAgg:   func() sqlfn.Agg { return &twoSampleAgg{psi: true} }},
		{Name: "leak_ks", NArgs: 2, Deterministic: true, Args: "x, reference",
			Doc:      "aggregate: two-sample kolmogorov-smirnov statistic d between the rows where reference is true and the others (nulls skipped)",
			Examples: []sqlfn.Example{{SQL: `SELECT round(leak_ks(x, r), 6) FROM (SELECT 1.01 AS x, 1 AS r UNION ALL SELECT 2.01, 1 UNION ALL SELECT 1, 0 UNION ALL SELECT 2, 0 UNION ALL SELECT 3, 0)`, Want: "0.333333"}},
			NewAgg:   func() sqlfn.Agg { return &twoSampleAgg{} }},
		{Name: "leak_ks_p", NArgs: 2, Deterministic: true, Args: "x, reference",
			Doc:      "aggregate: two-sided p-value of leak_ks (exact for n1*n2 <= 10000, else asymptotic)",
			Examples: []sqlfn.Example{{SQL: `SELECT round(leak_ks_p(x, r), 12) FROM (SELECT 0.99 AS x, 1 AS r UNION ALL SELECT 1.99, 1 UNION ALL SELECT 1, 0 UNION ALL SELECT 2, 0 UNION ALL SELECT 3, 0)`, Want: "0.6"}},
			NewAgg:   func() sqlfn.Agg { return &twoSampleAgg{p: true} }},
	}}
}

// MinHashBytes is leak_minhash: the encoded MinHash signature of text's character
// k-shingles under n hash functions drawn from seed.
func MinHashBytes(text string, k, n int, seed uint64) []byte {
	set := Shingling{K: k}.ShingleSet(text, nil)
	return SignatureBytes(NewMinHasher(n, seed).Signature(set, nil))
}

func jaccardFunc(name string, words bool, doc, ex, want string) sqlfn.Func {
	return sqlfn.Func{Name: name, NArgs: 3, Deterministic: true, Args: "text_a, text_b, k", Doc: doc,
		Examples: []sqlfn.Example{{SQL: ex, Want: want}},
		Scalar: func(args []driver.Value) (driver.Value, error) {
			if sqlfn.IsNull(args, 0) || sqlfn.IsNull(args, 1) {
				return nil, nil
			}
			a, err := sqlfn.Text(args, 0, "text_a")
			if err != nil {
				return nil, err
			}
			b, err := sqlfn.Text(args, 1, "text_b")
			if err != nil {
				return nil, err
			}
			k, err := sqlfn.Int(args, 2, "k")
			if err != nil {
				return nil, err
			}
			if k < 1 {
				return nil, fmt.Errorf("argument 3 (k) must be at least 1, got %d", k)
			}
			j := Shingling{K: int(k), Words: words}.TextJaccard(a, b)
			if math.IsNaN(j) {
				return nil, nil
			}
			return j, nil
		}}
}

type aucAgg struct {
	s []float64
	l []bool
}

func (g *aucAgg) Step(args []driver.Value) error {
	if sqlfn.IsNull(args, 0) || sqlfn.IsNull(args, 1) {
		return nil
	}
	s, err := sqlfn.Float(args, 0, "score")
	if err != nil {
		return err
	}
	l, err := sqlfn.Int(args, 1, "label")
	if err != nil {
		return err
	}
	g.s = append(g.s, s)
	g.l = append(g.l, l != 0)
	return nil
}

func (g *aucAgg) Value() (driver.Value, error) {
	v := AUC(g.s, g.l)
	if math.IsNaN(v) {
		return nil, nil
	}
	return v, nil
}

// twoSampleAgg collects x split by the reference flag, numeric or text.
type twoSampleAgg struct {
	psi, p       bool
	refN, actN   []float64 // numeric values (NaN for NULL)
	refS, actS   []string
	refSN, actSN []bool
	text         bool
}

func (g *twoSampleAgg) Step(args []driver.Value) error {
	if sqlfn.IsNull(args, 1) {
		return nil
	}
	r, err := sqlfn.Int(args, 1, "reference")
	if err != nil {
		return err
	}
	ref := r != 0
	v := args[0]
	switch x := v.(type) {
	case string, []byte:
		if !g.psi {
			return fmt.Errorf("argument 1 (x) must be REAL, got TEXT")
		}
		g.text = true
		s, _ := sqlfn.Text(args, 0, "x")
		if ref {
			g.refS, g.refSN = append(g.refS, s), append(g.refSN, false)
		} else {
			g.actS, g.actSN = append(g.actS, s), append(g.actSN, false)
		}
		return nil
	case nil:
		if ref {
			g.refN, g.refS, g.refSN = append(g.refN, math.NaN()), append(g.refS, ""), append(g.refSN, true)
		} else {
			g.actN, g.actS, g.actSN = append(g.actN, math.NaN()), append(g.actS, ""), append(g.actSN, true)
		}
		return nil
	default:
		_ = x
	}
	f, err := sqlfn.Float(args, 0, "x")
	if err != nil {
		return err
	}
	if ref {
		g.refN = append(g.refN, f)
	} else {
		g.actN = append(g.actN, f)
	}
	return nil
}

func (g *twoSampleAgg) Value() (driver.Value, error) {
	if g.psi {
		var v float64
		if g.text {
			_, e, o := CategoricalCounts(g.refS, g.actS, g.refSN, g.actSN)
			v = PSI(e, o)
		} else {
			v = PSINumeric(g.refN, g.actN)
		}
		if math.IsNaN(v) {
			return nil, nil
		}
		return v, nil
	}
	var a, b []float64
	for _, x := range g.refN {
		if !math.IsNaN(x) {
			a = append(a, x)
		}
	}
	for _, x := range g.actN {
		if !math.IsNaN(x) {
			b = append(b, x)
		}
	}
	r := KS2(a, b)
	v := r.D
	if g.p {
		v = r.P
	}
	if math.IsNaN(v) {
		return nil, nil
	}
	return v, nil
}
