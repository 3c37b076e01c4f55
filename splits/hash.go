package splits

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"hash"
	"math"
	"runtime"
	"slices"
	"strconv"
	"sync"
)

// The hash specification (stated in full in the README, section "split"):
//
//	key bytes  the row's content digest ss_digest as 8 bytes, big-endian two's complement
//	           (default); or, with key columns, the concatenation of each value's encoding
//	           in the content-digest form: a tag byte (NULL 0x00, INTEGER 0x01, REAL 0x02,
//	           TEXT 0x03), a 4-byte big-endian length, then the bytes (decimal ASCII for
//	           INTEGER, strconv.FormatFloat(x, 'g', -1, 64) for REAL, UTF-8 for TEXT).
//	h          the first 8 bytes, big-endian unsigned, of SHA-256(seed as 8 bytes
//	           big-endian || key bytes)
//	u          (h >> 11) / 2^53, a float64 in [0, 1), exact
//	side       the first side i (in the spec's order) with u < c_i, where c_i is the running
//	           float64 sum of the fractions f_1 + ... + f_i; the last side takes the rest.

// HashU returns u in [0, 1) for key bytes and a seed (see the hash specification above).
func HashU(key []byte, seed uint64) float64 {
	h := sha256.New()
	var s [8]byte
	binary.BigEndian.PutUint64(s[:], seed)
	h.Write(s[:])
	h.Write(key)
	var sum [32]byte
	return uFromSum(h.Sum(sum[:0]))
}

func uFromSum(sum []byte) float64 {
	return float64(binary.BigEndian.Uint64(sum[:8])>>11) / (1 << 53)
}

// hasher computes HashU for many keys without allocating.
type hasher struct {
	seed [8]byte
	buf  []byte
	sum  [32]byte
}

func newHasher(seed uint64) *hasher {
	h := &hasher{buf: make([]byte, 0, 64)}
	binary.BigEndian.PutUint64(h.seed[:], seed)
	return h
}

func (h *hasher) u(key []byte) float64 {
	h.buf = append(h.buf[:0], h.seed[:]...)
	h.buf = append(h.buf, key...)
	h.sum = sha256.Sum256(h.buf)
	return uFromSum(h.sum[:])
}

func (h *hasher) uDigest(d int64) float64 {
	h.buf = append(h.buf[:0], h.seed[:]...)
	h.buf = binary.BigEndian.AppendUint64(h.buf, uint64(d))
	h.sum = sha256.Sum256(h.buf)
	return uFromSum(h.sum[:])
}

// DigestKey returns the key bytes of a content digest: 8 bytes, big-endian.
func DigestKey(digest int64) []byte {
	return binary.BigEndian.AppendUint64(nil, uint64(digest))
}

// AppendValue appends the content-digest encoding of one value (nil, int64, float64, string,
// []byte, bool) to b.
func AppendValue(b []byte, v any) ([]byte, error) {
	put := func(tag byte, s string) []byte {
		b = append(b, tag)
		b = binary.BigEndian.AppendUint32(b, uint32(len(s)))
		return append(b, s...)
	}
	switch x := v.(type) {
	case nil:
		return put(0x00, ""), nil
	case int64:
		return put(0x01, strconv.FormatInt(x, 10)), nil
	case int:
		return put(0x01, strconv.Itoa(x)), nil
	case bool:
		if x {
			return put(0x01, "1"), nil
		}
		return put(0x01, "0"), nil
	case float64:
		if math.IsNaN(x) {
			return put(0x00, ""), nil
		}
		return put(0x02, strconv.FormatFloat(x, 'g', -1, 64)), nil
	case string:
		return put(0x03, x), nil
	case []byte:
		return put(0x03, string(x)), nil
	}
	return b, fmt.Errorf("splits: key: unsupported value type %T", v)
}

// Key returns the key bytes of values (the content-digest encoding, concatenated).
func Key(values ...any) ([]byte, error) {
	var b []byte
	var err error
	for _, v := range values {
		if b, err = AppendValue(b, v); err != nil {
			return nil, err
		}
	}
	return b, nil
}

// Cumulative returns the running float64 sums of the fractions, in order; the last is
// forced to 1 so that every u in [0, 1) falls on a side.
func Cumulative(fractions []float64) []float64 {
	c := make([]float64, len(fractions))
	s := 0.0
	for i, f := range fractions {
		s += f
		c[i] = s
	}
	if len(c) > 0 {
		c[len(c)-1] = 1
	}
	return c
}

// SideIndex returns the index of the first cumulative fraction greater than u.
func SideIndex(u float64, cum []float64) int {
	for i, c := range cum {
		if u < c {
			return i
		}
	}
	return len(cum) - 1
}

// Bucket returns floor(u * n) for the key and seed: a bucket in 0..n-1.
func Bucket(key []byte, seed uint64, n int) int {
	if n <= 0 {
		panic("splits: bucket count must be positive")
	}
	b := int(HashU(key, seed) * float64(n))
	if b >= n {
		b = n - 1
	}
	return b
}

// Seal returns the order-independent digest of a side: the lowercase hex SHA-256 of the
// side's content digests sorted ascending as signed 64-bit integers (SQL's ORDER BY
// ss_digest), each written as 8 bytes big-endian. Duplicates count. digests is sorted in
// place.
func Seal(digests []int64) string {
	slices.Sort(digests)
	h := sha256.New()
	buf := make([]byte, 0, 8*1024)
	for _, d := range digests {
		buf = binary.BigEndian.AppendUint64(buf, uint64(d))
		if len(buf) == cap(buf) {
			h.Write(buf)
			buf = buf[:0]
		}
	}
	h.Write(buf)
	return hex.EncodeToString(h.Sum(nil))
}

// hashChunk is how many default keys one hashing job takes.
var hashChunk = 1 << 14 // a variable so tests can make many small chunks

// hashJobs hashes content digests (the default key) on worker goroutines while the caller
// goes on reading. Every out[i] depends only on dig[i] and the seed, so results do not depend
// on the number of workers or their scheduling.
type hashJobs struct {
	ch   chan hashJob
	wg   sync.WaitGroup
	once sync.Once
}

type hashJob struct {
	dig []int64
	out []float64
}

func startHashJobs(seed uint64) *hashJobs {
	j := &hashJobs{ch: make(chan hashJob, 64)}
	workers := max(1, min(runtime.GOMAXPROCS(0)-1, 3)) // the reading goroutine keeps a core
	for range workers {
		go func() {
			h := newHasher(seed)
			for job := range j.ch {
				for i, dg := range job.dig {
					job.out[i] = h.uDigest(dg)
				}
				j.wg.Done()
			}
		}()
	}
	return j
}

func (j *hashJobs) add(dig []int64, out []float64) {
	if len(dig) == 0 {
		return
	}
	j.wg.Add(1)
	j.ch <- hashJob{dig, out}
}

func (j *hashJobs) wait() { j.wg.Wait() }

func (j *hashJobs) stop() { j.once.Do(func() { close(j.ch) }) }

// sideSeals returns Seal over every digest (the table seal) and Seal over each side's
// digests (side[i] < 0: on no side), from one radix sort of the digests with their sides
// instead of one comparison sort per side. Neither slice is modified.
func sideSeals(dig []int64, side []int16, nsides int) (string, []string) {
	n := len(dig)
	keys := make([]uint64, n)
	sv := make([]int16, n)
	for i, d := range dig {
		keys[i] = uint64(d) ^ (1 << 63) // signed order as unsigned
		sv[i] = side[i]
	}
	radixSort(keys, sv)
	const flushAt = 8 * 1024
	all := sha256.New()
	allBuf := make([]byte, 0, flushAt)
	hs := make([]hash.Hash, nsides)
	bufs := make([][]byte, nsides)
	for i := range hs {
		hs[i] = sha256.New()
		bufs[i] = make([]byte, 0, flushAt)
	}
	for i, k := range keys {
		v := k ^ (1 << 63)
		allBuf = binary.BigEndian.AppendUint64(allBuf, v)
		if len(allBuf) == flushAt {
			all.Write(allBuf)
			allBuf = allBuf[:0]
		}
		if s := sv[i]; s >= 0 {
			bufs[s] = binary.BigEndian.AppendUint64(bufs[s], v)
			if len(bufs[s]) == flushAt {
				hs[s].Write(bufs[s])
				bufs[s] = bufs[s][:0]
			}
		}
	}
	all.Write(allBuf)
	out := make([]string, nsides)
	for i := range hs {
		hs[i].Write(bufs[i])
		out[i] = hex.EncodeToString(hs[i].Sum(nil))
	}
	return hex.EncodeToString(all.Sum(nil)), out
}

// radixSort sorts keys ascending, moving vals along, stably (equal keys keep their order):
// an LSD radix sort by bytes that skips bytes every key shares.
func radixSort[V any](keys []uint64, vals []V) {
	n := len(keys)
	if n < 2 {
		return
	}
	k2 := make([]uint64, n)
	v2 := make([]V, n)
	src, srcV := keys, vals
	for shift := uint(0); shift < 64; shift += 8 {
		var count [256]int
		for _, k := range src {
			count[(k>>shift)&0xff]++
		}
		if count[(src[0]>>shift)&0xff] == n {
			continue
		}
		pos := 0
		for b := range count {
			c := count[b]
			count[b] = pos
			pos += c
		}
		for i, k := range src {
			b := (k >> shift) & 0xff
			k2[count[b]] = k
			v2[count[b]] = srcV[i]
			count[b]++
		}
		src, k2 = k2, src
		srcV, v2 = v2, srcV
	}
	if &src[0] != &keys[0] {
		copy(keys, src)
		copy(vals, srcV)
	}
}
