package leakage

import (
	"fmt"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
)

// NearDupOptions configure NearDuplicates. Zero fields take the stated defaults.
type NearDupOptions struct {
	Shingling Shingling // default DefaultShingling (character 5-shingles)
	Threshold float64   // exact Jaccard at or above which a pair is reported; default 0.8
	Bands     int       // LSH bands b; default 20
	Rows      int       // rows per band r; default 5 (b·r = 100 hash functions)
	Seed      uint64    // seeds the MinHash functions; default 1
	Workers   int       // goroutines; default GOMAXPROCS
	MaxPairs  int       // stop collecting after this many reported pairs; default 1,000,000
	Progress  func(done, total int64)
}

func (o NearDupOptions) withDefaults() NearDupOptions {
	if o.Shingling.K == 0 {
		o.Shingling = DefaultShingling
	}
	if o.Threshold == 0 {
		o.Threshold = 0.8
	}
	if o.Bands == 0 {
		o.Bands = 20
	}
	if o.Rows == 0 {
		o.Rows = 5
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	if o.MaxPairs == 0 {
		o.MaxPairs = 1_000_000
	}
	return o
}

// NearPair is a confirmed near-duplicate: items A < B (indexes into the input) on different
// sides, with their exact shingle Jaccard similarity.
type NearPair struct {
	A, B    int
	Jaccard float64
}

// NearDupResult holds the confirmed pairs and what it took to find them.
type NearDupResult struct {
	// Copies are groups of texts with identical shingle sets on more than one side (indexes
	// ascending, groups ordered by their first index): Jaccard 1 between every two members.
	Copies     [][]int
	Pairs      []NearPair // the other confirmed pairs, sorted by A, then B
	Candidates int        // distinct candidate pairs of distinct shingle sets checked exactly
	Truncated  bool       // MaxPairs was reached
}

// NearDuplicates finds pairs of texts on different sides (side[i] < 0 leaves text i out)
// whose exact shingle Jaccard similarity is at least the threshold (texts with identical
// shingle sets come back as groups, Copies), without comparing all pairs: MinHash signatures, LSH banding (Mining of Massive Datasets §3.4) to pick
// candidates, exact Jaccard to confirm them. Texts with identical shingle sets are grouped
// first, so exact copies cost nothing extra. Work is spread over Workers goroutines; the
// result does not depend on their number.
func NearDuplicates(texts []string, side []int, opts NearDupOptions) (NearDupResult, error) {
	o := opts.withDefaults()
	if len(texts) != len(side) {
		panic("leakage: texts and sides differ in length")
	}
	if len(texts) >= 1<<31 {
		return NearDupResult{}, fmt.Errorf("near duplicates: %d texts is more than 2^31", len(texts))
	}
	n := len(texts)
	b, r := o.Bands, o.Rows
	mh := NewMinHasher(b*r, o.Seed)
	setHash := make([]uint64, n)
	keys := make([]uint32, n*b) // band keys, item-major
	empty := make([]bool, n)
	total := int64(2 * n)
	var done int64
	var mu sync.Mutex
	report := func(k int64) {
		if o.Progress == nil {
			return
		}
		mu.Lock()
		done += k
		d := done
		mu.Unlock()
		o.Progress(d, total)
	}
	parallel(n, o.Workers, func(lo, hi int) {
		var set []uint32
		var sig []uint32
		var bk []uint32
		var sc shingleScratch
		for i := lo; i < hi; i++ {
			if side[i] < 0 {
				empty[i] = true
				continue
			}
			set = o.Shingling.shingleSet(texts[i], set, &sc)
			if len(set) == 0 {
				empty[i] = true
				continue
			}
			h := uint64(fnvOffset)
			for _, v := range set {
				h ^= uint64(v)
				h *= fnvPrime
			}
			setHash[i] = h ^ uint64(len(set))<<56
			sig = mh.Signature(set, sig)
			bk = bandKeys(sig, b, r, bk)
			copy(keys[i*b:], bk)
			if (i-lo)%4096 == 4095 {
				report(4096)
			}
		}
	})
	// Group identical shingle sets (sorted by hash, then index, for determinism).
	order := make([]int32, 0, n)
	for i := 0; i < n; i++ {
		if !empty[i] {
			order = append(order, int32(i))
		}
	}
	slices.SortFunc(order, func(x, y int32) int {
		if c := cmpU64(setHash[x], setHash[y]); c != 0 {
			return c
		}
		return int(x - y)
	})
	rep := make([]int32, n) // representative (smallest index) of each item's group
	var groups [][]int32    // members of groups with more than one item, by representative
	groupOf := map[int32]int{}
	var reps []int32
	for i := 0; i < len(order); {
		j := i + 1
		for j < len(order) && setHash[order[j]] == setHash[order[i]] {
			j++
		}
		g := order[i]
		for _, m := range order[i:j] {
			rep[m] = g
		}
		reps = append(reps, g)
		if j-i > 1 {
			groupOf[g] = len(groups)
			groups = append(groups, append([]int32(nil), order[i:j]...))
		}
		i = j
	}
	slices.Sort(reps)
	// Candidates: representatives sharing a band key.
	bandPairs := make([][]uint64, b)
	var wg sync.WaitGroup
	sem := make(chan struct{}, o.Workers)
	for band := 0; band < b; band++ {
		wg.Add(1)
		sem <- struct{}{}
		go func(band int) {
			defer wg.Done()
			defer func() { <-sem }()
			arr := make([]uint64, len(reps))
			for k, g := range reps {
				arr[k] = uint64(keys[int(g)*b+band])<<32 | uint64(uint32(g))
			}
			slices.Sort(arr)
			var out []uint64
			for i := 0; i < len(arr); {
				j := i + 1
				for j < len(arr) && arr[j]>>32 == arr[i]>>32 {
					j++
				}
				for x := i; x < j; x++ {
					for y := x + 1; y < j; y++ {
						out = append(out, arr[x]<<32|arr[y]&0xffffffff)
					}
				}
				i = j
			}
			bandPairs[band] = out
		}(band)
	}
	wg.Wait()
	var cand []uint64
	for _, p := range bandPairs {
		cand = append(cand, p...)
	}
	bandPairs = nil
	slices.Sort(cand)
	cand = slices.Compact(cand)
	// Members by side, to know whether a group pair has a cross-side pair at all.
	members := func(g int32) []int32 {
		if k, ok := groupOf[g]; ok {
			return groups[k]
		}
		return []int32{g}
	}
	crosses := func(g, h int32) bool {
		for _, x := range members(g) {
			for _, y := range members(h) {
				if side[x] != side[y] {
					return true
				}
			}
		}
		return false
	}
	// Confirm candidates exactly.
	conf := make([]float64, len(cand))
	parallel(len(cand), o.Workers, func(lo, hi int) {
		var sa, sb []uint32
		var sc shingleScratch
		for k := lo; k < hi; k++ {
			g, h := int32(cand[k]>>32), int32(uint32(cand[k]))
			conf[k] = -1
			if !crosses(g, h) {
				continue
			}
			sa = o.Shingling.shingleSet(texts[g], sa, &sc)
			sb = o.Shingling.shingleSet(texts[h], sb, &sc)
			conf[k] = Jaccard(sa, sb)
		}
	})
	report(int64(n))
	res := NearDupResult{Candidates: len(cand)}
	emit := func(x, y int32, j float64) bool {
		if side[x] == side[y] {
			return true
		}
		if x > y {
			x, y = y, x
		}
		if len(res.Pairs) >= o.MaxPairs {
			res.Truncated = true
			return false
		}
		res.Pairs = append(res.Pairs, NearPair{A: int(x), B: int(y), Jaccard: j})
		return true
	}
	// Exact copies: one group each.
	for _, g := range groups {
		sides := map[int]bool{}
		for _, m := range g {
			sides[side[m]] = true
		}
		if len(sides) > 1 {
			c := make([]int, len(g))
			for i, m := range g {
				c[i] = int(m)
			}
			slices.Sort(c)
			res.Copies = append(res.Copies, c)
		}
	}
	slices.SortFunc(res.Copies, func(x, y []int) int { return x[0] - y[0] })
	for k, c := range cand {
		if conf[k] < o.Threshold {
			continue
		}
		g, h := int32(c>>32), int32(uint32(c))
		for _, x := range members(g) {
			for _, y := range members(h) {
				if !emit(x, y, conf[k]) {
					goto sorted
				}
			}
		}
	}
sorted:
	slices.SortFunc(res.Pairs, func(p, q NearPair) int {
		if p.A != q.A {
			return p.A - q.A
		}
		return p.B - q.B
	})
	return res, nil
}

func cmpU64(a, b uint64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// eachParallel calls fn(0..n-1) on up to workers goroutines, handing out one index at a time:
// for a few heavy items (columns to score), where parallel's even chunks of cheap ones (rows)
// would leave a core idle.
func eachParallel(n, workers int, fn func(i int)) {
	if workers < 2 || n < 2 {
		for i := 0; i < n; i++ {
			fn(i)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(workers, n) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1)) - 1
				if i >= n {
					return
				}
				fn(i)
			}
		}()
	}
	wg.Wait()
}

// parallel runs fn over [0, n) in contiguous chunks on up to workers goroutines.
func parallel(n, workers int, fn func(lo, hi int)) {
	if workers < 1 {
		workers = 1
	}
	if n < 1024 || workers == 1 {
		fn(0, n)
		return
	}
	var wg sync.WaitGroup
	chunk := (n + workers - 1) / workers
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		wg.Add(1)
		go func(lo, hi int) {
			defer wg.Done()
			fn(lo, hi)
		}(lo, hi)
	}
	wg.Wait()
}
