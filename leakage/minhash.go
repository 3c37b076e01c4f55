package leakage

import (
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"unicode"
	"unicode/utf8"
)

// NormalizeShingleText prepares text for shingling: lower case (Unicode), every rune that
// is not a letter or digit becomes a space, runs of spaces collapse to one, and the ends are
// trimmed. So case, punctuation and whitespace edits do not change the shingle set.
func NormalizeShingleText(s string) string {
	var b strings.Builder
	b.Grow(len(s))
	space := true // drop leading spaces
	for _, r := range s {
		if unicode.IsLetter(r) || unicode.IsDigit(r) {
			b.WriteRune(unicode.ToLower(r))
			space = false
		} else if !space {
			b.WriteByte(' ')
			space = true
		}
	}
	out := b.String()
	return strings.TrimSuffix(out, " ")
}

// Shingling says how a text becomes a set: character k-shingles (every run of K consecutive
// characters of the normalised text) or, with Words, word k-shingles (every run of K
// consecutive words). A text shorter than K units is one shingle, itself.
type Shingling struct {
	K     int
	Words bool
}

// DefaultShingling is character 5-shingles, the size Mining of Massive Datasets §3.2.2
// suggests for short documents such as e-mails.
var DefaultShingling = Shingling{K: 5}

// Unit names the shingle unit: "char" or "word".
func (s Shingling) Unit() string {
	if s.Words {
		return "word"
	}
	return "char"
}

const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
)

func fnv(b string) uint32 {
	h := uint64(fnvOffset)
	for i := 0; i < len(b); i++ {
		h ^= uint64(b[i])
		h *= fnvPrime
	}
	return uint32(h ^ h>>32)
}

// ShingleSet returns the sorted, distinct 32-bit hashes (FNV-1a 64, folded) of the text's
// shingles after NormalizeShingleText. An empty text has no shingles.
func (s Shingling) ShingleSet(text string, dst []uint32) []uint32 {
	var sc shingleScratch
	return s.shingleSet(text, dst, &sc)
}

// shingleScratch holds buffers reused across texts by one goroutine.
type shingleScratch struct {
	norm []byte
	offs []int
}

func (s Shingling) shingleSet(text string, dst []uint32, sc *shingleScratch) []uint32 {
	dst = dst[:0]
	sc.norm = appendNormalized(sc.norm[:0], text)
	t := sc.norm
	if len(t) == 0 {
		return dst
	}
	k := s.K
	if k < 1 {
		k = 1
	}
	// offs holds the byte offset of every unit (rune or word) plus the end.
	offs := sc.offs[:0]
	if s.Words {
		offs = append(offs, 0)
		for i, c := range t {
			if c == ' ' {
				offs = append(offs, i+1)
			}
		}
		offs = append(offs, len(t)+1) // a window ends before the separating space
	} else {
		for i := 0; i < len(t); {
			offs = append(offs, i)
			_, size := utf8.DecodeRune(t[i:])
			i += size
		}
		offs = append(offs, len(t))
	}
	sc.offs = offs
	units := len(offs) - 1
	if units <= k {
		return append(dst, fnvBytes(t))
	}
	for i := 0; i+k <= units; i++ {
		end := offs[i+k]
		if s.Words {
			end-- // without the trailing space
		}
		dst = append(dst, fnvBytes(t[offs[i]:end]))
	}
	slices.Sort(dst)
	return slices.Compact(dst)
}

func fnvBytes(b []byte) uint32 {
	h := uint64(fnvOffset)
	for _, c := range b {
		h ^= uint64(c)
		h *= fnvPrime
	}
	return uint32(h ^ h>>32)
}

// appendNormalized appends NormalizeShingleText(s) to dst.
func appendNormalized(dst []byte, s string) []byte {
	space := true
	for _, r := range s {
		if unicode.IsLetter(r) || unicode.IsDigit(r) {
			dst = utf8.AppendRune(dst, unicode.ToLower(r))
			space = false
		} else if !space {
			dst = append(dst, ' ')
			space = true
		}
	}
	if n := len(dst); n > 0 && dst[n-1] == ' ' {
		dst = dst[:n-1]
	}
	return dst
}

// Jaccard is |A∩B| / |A∪B| for sorted distinct sets; two empty sets give NaN.
func Jaccard(a, b []uint32) float64 {
	if len(a) == 0 && len(b) == 0 {
		return math.NaN()
	}
	i, j, inter := 0, 0, 0
	for i < len(a) && j < len(b) {
		switch {
		case a[i] < b[j]:
			i++
		case a[i] > b[j]:
			j++
		default:
			inter++
			i++
			j++
		}
	}
	return float64(inter) / float64(len(a)+len(b)-inter)
}

// TextJaccard is the exact Jaccard similarity of two texts' shingle sets.
func (s Shingling) TextJaccard(a, b string) float64 {
	return Jaccard(s.ShingleSet(a, nil), s.ShingleSet(b, nil))
}

// MinHasher computes MinHash signatures (Broder 1997): for each of N hash functions
// h_i(x) = ⌊(a_i·m(x) + b_i) mod 2^64 / 2^32⌋ (multiply-add-shift, Dietzfelbinger 1996) with
// odd a_i and m the splitmix64 finaliser, the signature holds min h_i over the shingle set. P(sig_i(A) = sig_i(B)) is
// approximately Jaccard(A, B).
type MinHasher struct {
	a, b []uint64
}

// NewMinHasher returns n hash functions drawn from seed.
func NewMinHasher(n int, seed uint64) *MinHasher {
	if n < 1 {
		panic("leakage: minhash needs at least one hash function")
	}
	r := rand.New(rand.NewPCG(seed, 0x6d696e68617368)) // stream "minhash"
	m := &MinHasher{a: make([]uint64, n), b: make([]uint64, n)}
	for i := range m.a {
		m.a[i] = r.Uint64() | 1
		m.b[i] = r.Uint64()
	}
	return m
}

// N is the signature length.
func (m *MinHasher) N() int { return len(m.a) }

// Signature writes the MinHash signature of the shingle set into dst (length N). An empty
// set gives all 0xFFFFFFFF.
func (m *MinHasher) Signature(set []uint32, dst []uint32) []uint32 {
	n := len(m.a)
	if cap(dst) < n {
		dst = make([]uint32, n)
	}
	dst = dst[:n]
	for i := range dst {
		dst[i] = math.MaxUint32
	}
	a, b := m.a[:len(dst)], m.b[:len(dst)]
	for _, x := range set {
		xx := mix64(uint64(x))
		for i := range dst {
			dst[i] = min(dst[i], uint32((a[i]*xx+b[i])>>32))
		}
	}
	return dst
}

// mix64 is the splitmix64 finaliser: it spreads structured inputs before the
// multiply-add-shift hashes, which are only 2-universal.
func mix64(z uint64) uint64 {
	z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
	z = (z ^ z>>27) * 0x94d049bb133111eb
	return z ^ z>>31
}

// SignatureBytes encodes a signature as big-endian 32-bit values (the BLOB leak_minhash
// returns).
func SignatureBytes(sig []uint32) []byte {
	out := make([]byte, 4*len(sig))
	for i, v := range sig {
		binary.BigEndian.PutUint32(out[4*i:], v)
	}
	return out
}

// ErrSignatureLength reports two signatures that cannot be compared.
var ErrSignatureLength = errors.New("signatures differ in length or are not a multiple of 4 bytes")

// SignatureSimilarity is the share of positions where two encoded signatures agree: the
// MinHash estimate of their Jaccard similarity.
func SignatureSimilarity(a, b []byte) (float64, error) {
	if len(a) != len(b) || len(a)%4 != 0 || len(a) == 0 {
		return 0, ErrSignatureLength
	}
	eq := 0
	for i := 0; i < len(a); i += 4 {
		if binary.BigEndian.Uint32(a[i:]) == binary.BigEndian.Uint32(b[i:]) {
			eq++
		}
	}
	return float64(eq) / float64(len(a)/4), nil
}

// LSHProbability is the chance that two sets of Jaccard similarity s share at least one
// band under b bands of r rows: 1 − (1 − s^r)^b (Mining of Massive Datasets §3.4.2).
func LSHProbability(s float64, b, r int) float64 {
	return 1 - math.Pow(1-math.Pow(s, float64(r)), float64(b))
}

// bandKeys hashes each band of r signature values into 32 bits.
func bandKeys(sig []uint32, b, r int, dst []uint32) []uint32 {
	dst = dst[:0]
	for band := 0; band < b; band++ {
		h := uint64(fnvOffset) ^ uint64(band)
		for _, v := range sig[band*r : band*r+r] {
			h ^= uint64(v)
			h *= fnvPrime
			h ^= h >> 29
		}
		dst = append(dst, uint32(h^h>>32))
	}
	return dst
}
