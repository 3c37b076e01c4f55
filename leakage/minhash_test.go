package leakage

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

func TestLSHProbability_MMDS(t *testing.T) {
	// Mining of Massive Datasets (Leskovec, Rajaraman, Ullman), Example 3.11 / Figure 3.8:
	// b = 20 bands of r = 5 rows: s = 0.8 -> 0.99965; s = 0.5 -> 0.470 (as tabulated there).
	tests := []struct{ s, want, tol float64 }{{0.8, 0.99965, 1e-5}, {0.5, 0.470, 5e-4}}
	for _, tt := range tests {
		if got := LSHProbability(tt.s, 20, 5); math.Abs(got-tt.want) > tt.tol {
			t.Errorf("P(%v) = %v, want %v (MMDS Figure 3.8)", tt.s, got, tt.want)
		}
	}
	// The defaults give recall ≥ 0.95 at the 0.8 threshold with margin.
	o := NearDupOptions{}.withDefaults()
	if p := LSHProbability(0.8, o.Bands, o.Rows); p < 0.995 {
		t.Errorf("default banding recall at 0.8 = %v", p)
	}
}

func TestShingleSet_MMDS(t *testing.T) {
	// Mining of Massive Datasets §3.2.1, Example 3.3 (quoted from memory): the document
	// "abcdabd" with k = 2 has the 2-shingles {ab, bc, cd, da, bd} (ab occurs twice, once in
	// the set).
	got := Shingling{K: 2}.ShingleSet("abcdabd", nil)
	var want []uint32
	for _, s := range []string{"ab", "bc", "cd", "da", "bd"} {
		want = append(want, fnv(s))
	}
	slices.Sort(want)
	if !slices.Equal(got, want) {
		t.Errorf("shingles = %v, want %v", got, want)
	}
	// Normalisation: case, punctuation and whitespace do not change the set (constructed).
	a := DefaultShingling.ShingleSet("Pipe cracked near the valve.", nil)
	b := DefaultShingling.ShingleSet("  pipe,   CRACKED near the valve ", nil)
	if !slices.Equal(a, b) {
		t.Error("normalised texts differ")
	}
	// Word shingles (constructed): "a b c d" with k=2 -> {a b, b c, c d}.
	w := Shingling{K: 2, Words: true}.ShingleSet("a b c d", nil)
	want = []uint32{fnv("a b"), fnv("b c"), fnv("c d")}
	slices.Sort(want)
	if !slices.Equal(w, want) {
		t.Errorf("word shingles = %v", w)
	}
	for _, x := range []string{"", "  ", "Ab, cD!", "ÄÖ  ü-ß 12", "...x..."} {
		if a, b := string(appendNormalized(nil, x)), NormalizeShingleText(x); a != b {
			t.Errorf("%q: %q vs %q", x, a, b)
		}
	}
	// Shorter than k: the whole text is one shingle.
	if s := (Shingling{K: 5}).ShingleSet("ab", nil); len(s) != 1 || s[0] != fnv("ab") {
		t.Errorf("short = %v", s)
	}
}

func TestJaccard_MMDS(t *testing.T) {
	// Mining of Massive Datasets §3.1.1, Example 3.1: two sets with 3 elements in common and
	// 8 in their union have similarity 3/8.
	s := []uint32{1, 2, 3, 4, 5}
	u := []uint32{3, 4, 5, 6, 7, 8}
	if got := Jaccard(s, u); got != 3.0/8 {
		t.Errorf("J = %v", got)
	}
	if !math.IsNaN(Jaccard(nil, nil)) {
		t.Error("two empty sets must give NaN")
	}
}

func TestMinHash_EstimatesJaccard(t *testing.T) {
	// Constructed: sets with exact Jaccard 0.5 (100 common, 200 in the union); the MinHash
	// estimate with 1000 functions has standard error sqrt(.25/1000) ≈ 0.016.
	var a, b []uint32
	for i := uint32(0); i < 150; i++ {
		a = append(a, i*7919)
	}
	for i := uint32(50); i < 200; i++ {
		b = append(b, i*7919)
	}
	slices.Sort(a)
	slices.Sort(b)
	if j := Jaccard(a, b); j != 0.5 {
		t.Fatalf("constructed J = %v", j)
	}
	m := NewMinHasher(1000, 7)
	est, err := SignatureSimilarity(SignatureBytes(m.Signature(a, nil)), SignatureBytes(m.Signature(b, nil)))
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(est-0.5) > 4*0.016 {
		t.Errorf("estimate %v, want 0.5 ± 0.064", est)
	}
	if !scalar.EqualWithinAbs(est, est, 0) {
		t.Error("nan")
	}
}

// genTexts builds a vocabulary-based corpus: n base notes on side 0 and side 1 at random,
// plus planted copies of `planted` of them on the other side with one edit each (case,
// punctuation, whitespace, one word swapped, two words swapped). Invented data.
func genTexts(n, planted int, seed uint64) (texts []string, side []int) {
	r := rand.New(rand.NewPCG(seed, 2))
	syl := []string{"ka", "lo", "mi", "ne", "pu", "ra", "si", "to", "vu", "ze", "bo", "di", "fa", "gu", "he", "jo"}
	vocab := make([]string, 3000)
	for i := range vocab {
		var w strings.Builder
		for k := 0; k < 2+r.IntN(3); k++ {
			w.WriteString(syl[r.IntN(len(syl))])
		}
		vocab[i] = w.String() + fmt.Sprint(i%10)
	}
	note := func() []string {
		ws := make([]string, 12+r.IntN(14))
		for i := range ws {
			ws[i] = vocab[r.IntN(len(vocab))]
		}
		return ws
	}
	base := make([][]string, n)
	for i := range base {
		base[i] = note()
		texts = append(texts, strings.Join(base[i], " "))
		side = append(side, r.IntN(2))
	}
	for p := 0; p < planted; p++ {
		i := r.IntN(n)
		ws := slices.Clone(base[i])
		switch p % 5 {
		case 0:
			ws[0] = strings.ToUpper(ws[0])
		case 1:
			ws[len(ws)/2] += ","
		case 2:
			ws[1] = "  " + ws[1] + "\t"
		case 3:
			ws[r.IntN(len(ws))] = vocab[r.IntN(len(vocab))]
		case 4:
			ws[r.IntN(len(ws))] = vocab[r.IntN(len(vocab))]
			ws[r.IntN(len(ws))] = vocab[r.IntN(len(vocab))]
		}
		texts = append(texts, strings.Join(ws, " "))
		side = append(side, 1-side[i])
	}
	return texts, side
}

func TestNearDuplicates_RecallAgainstBruteForce(t *testing.T) {
	texts, side := genTexts(1600, 400, 11)
	sets := make([][]uint32, len(texts))
	for i, s := range texts {
		sets[i] = DefaultShingling.ShingleSet(s, nil)
	}
	truth := map[[2]int]float64{}
	for i := range texts {
		for j := i + 1; j < len(texts); j++ {
			if side[i] == side[j] {
				continue
			}
			if jac := Jaccard(sets[i], sets[j]); jac >= 0.8 {
				truth[[2]int{i, j}] = jac
			}
		}
	}
	res, err := NearDuplicates(texts, side, NearDupOptions{})
	if err != nil {
		t.Fatal(err)
	}
	found := 0
	inCopy := map[[2]int]bool{}
	for _, g := range res.Copies {
		for x := 0; x < len(g); x++ {
			for y := x + 1; y < len(g); y++ {
				if side[g[x]] != side[g[y]] {
					inCopy[[2]int{g[x], g[y]}] = true
				}
			}
		}
	}
	for p := range inCopy {
		if truth[p] != 1 {
			t.Errorf("copy pair %v has J=%v, want 1", p, truth[p])
		}
		found++
	}
	for _, p := range res.Pairs {
		want, ok := truth[[2]int{p.A, p.B}]
		if !ok {
			t.Errorf("pair %d,%d (J=%v) is not a true pair: precision below 1", p.A, p.B, p.Jaccard)
			continue
		}
		if p.Jaccard != want {
			t.Errorf("pair %d,%d J=%v want %v", p.A, p.B, p.Jaccard, want)
		}
		found++
	}
	recall := float64(found) / float64(len(truth))
	t.Logf("true pairs at J ≥ 0.8: %d, found %d (recall %.4f), candidates %d", len(truth), found, recall, res.Candidates)
	if len(truth) < 300 {
		t.Fatalf("only %d true pairs: the generator plants too few", len(truth))
	}
	if recall < 0.95 {
		t.Errorf("recall %.4f < 0.95", recall)
	}
	// Deterministic and independent of the worker count.
	res1, _ := NearDuplicates(texts, side, NearDupOptions{Workers: 1})
	if !slices.Equal(res.Pairs, res1.Pairs) || fmt.Sprint(res.Copies) != fmt.Sprint(res1.Copies) {
		t.Error("results differ with one worker")
	}
}

func benchNearDup(b *testing.B, n int) {
	texts, side := genTexts(n, n/100, 3)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		res, err := NearDuplicates(texts, side, NearDupOptions{})
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(res.Pairs)), "pairs")
		b.ReportMetric(float64(len(res.Copies)), "copy-groups")
	}
}

// BenchmarkNearDuplicates_100k: 100,000 short texts (target < 10 s on 2 cores).
func BenchmarkNearDuplicates_100k(b *testing.B) { benchNearDup(b, 100_000) }

// BenchmarkNearDuplicates_AllPairs5k is the all-pairs baseline on 5,000 texts: exact
// Jaccard of every cross-side pair.
func BenchmarkNearDuplicates_AllPairs5k(b *testing.B) {
	texts, side := genTexts(5000, 50, 3)
	sets := make([][]uint32, len(texts))
	for i, s := range texts {
		sets[i] = DefaultShingling.ShingleSet(s, nil)
	}
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		n := 0
		for i := range sets {
			for j := i + 1; j < len(sets); j++ {
				if side[i] != side[j] && Jaccard(sets[i], sets[j]) >= 0.8 {
					n++
				}
			}
		}
		b.ReportMetric(float64(n), "pairs")
	}
}

// BenchmarkNearDuplicates_LSH5k is the LSH detector on the same 5,000 texts.
func BenchmarkNearDuplicates_LSH5k(b *testing.B) { benchNearDup(b, 5000) }

// BenchmarkMinHashSignature: one 100-function signature of a 100-shingle set.
func BenchmarkMinHashSignature(b *testing.B) {
	m := NewMinHasher(100, 1)
	set := DefaultShingling.ShingleSet(strings.Repeat("pipe cracked near the valve box ", 4), nil)
	sig := make([]uint32, 100)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		sig = m.Signature(set, sig)
	}
}
