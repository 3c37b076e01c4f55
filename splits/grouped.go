package splits

import (
	"bytes"
	"sort"
)

// unionFind builds entities over group columns: rows that share a value in any group column
// (the same value in the same column) are one entity (connected components). An entity's key
// is the content-digest encoding of its smallest member value, comparing (column position,
// encoded bytes), so it does not depend on row order; a row whose group values are all NULL
// is its own entity keyed by its content digest (8 bytes), so exact duplicates stay together.
type unionFind struct {
	ncol    int
	nodeIdx []map[string]int32 // per column: encoded value -> node
	nodeCol []int32
	nodeKey []string
	parent  []int32
	rowNode []int32 // node of each row, or -1 - own-entity index
	own     [][]byte
	buf     []byte
}

func newUnionFind(ncol int) *unionFind {
	u := &unionFind{ncol: ncol}
	for i := 0; i < ncol; i++ {
		u.nodeIdx = append(u.nodeIdx, map[string]int32{})
	}
	return u
}

func (u *unionFind) node(col int, v any) int32 {
	u.buf, _ = AppendValue(u.buf[:0], v)
	return u.nodeEnc(col, u.buf)
}

// nodeEnc is node for a value already in its content-digest encoding.
func (u *unionFind) nodeEnc(col int, enc []byte) int32 {
	if n, ok := u.nodeIdx[col][string(enc)]; ok {
		return n
	}
	n := int32(len(u.parent))
	k := string(enc)
	u.nodeIdx[col][k] = n
	u.nodeCol = append(u.nodeCol, int32(col))
	u.nodeKey = append(u.nodeKey, k)
	u.parent = append(u.parent, n)
	return n
}

func (u *unionFind) find(x int32) int32 {
	for u.parent[x] != x {
		u.parent[x] = u.parent[u.parent[x]]
		x = u.parent[x]
	}
	return x
}

func (u *unionFind) union(a, b int32) {
	ra, rb := u.find(a), u.find(b)
	if ra != rb {
		if ra < rb {
			u.parent[rb] = ra
		} else {
			u.parent[ra] = rb
		}
	}
}

// addRow adds one row's group values (nil = NULL) and its content digest.
func (u *unionFind) addRow(vals []any, digest int64) {
	first := int32(-1)
	for c, v := range vals {
		if v == nil {
			continue
		}
		n := u.node(c, v)
		if first < 0 {
			first = n
		} else {
			u.union(first, n)
		}
	}
	u.endRow(first, digest)
}

func (u *unionFind) endRow(first int32, digest int64) {
	if first < 0 {
		u.own = append(u.own, DigestKey(digest))
		first = -int32(len(u.own))
	}
	u.rowNode = append(u.rowNode, first)
}

// groupChunk is encoded group values of consecutive rows, for a unionFind on another
// goroutine: value k (row k / ncol, column k % ncol) is enc[ends[k-1]:ends[k]], NULL when
// null[k].
type groupChunk struct {
	enc     []byte
	ends    []int32
	null    []bool
	digests []int64
}

// addChunk adds a chunk's rows in order, exactly as addRow would.
func (u *unionFind) addChunk(c *groupChunk) {
	start := int32(0)
	for r, dg := range c.digests {
		first := int32(-1)
		for col := 0; col < u.ncol; col++ {
			k := r*u.ncol + col
			end := c.ends[k]
			if !c.null[k] {
				n := u.nodeEnc(col, c.enc[start:end])
				if first < 0 {
					first = n
				} else {
					u.union(first, n)
				}
			}
			start = end
		}
		u.endRow(first, dg)
	}
}

// groupFeed runs a unionFind on its own goroutine, fed chunk by chunk in row order, so
// that the map work overlaps reading. The result is the same as adding the rows in order.
type groupFeed struct {
	uf         *unionFind
	cur        *groupChunk
	full, free chan *groupChunk
	done       chan struct{}
}

var groupChunkRows = 4096 // a variable so tests can make many small chunks

func newGroupFeed(uf *unionFind) *groupFeed {
	g := &groupFeed{uf: uf, full: make(chan *groupChunk, 8), free: make(chan *groupChunk, 10), done: make(chan struct{})}
	for range 10 {
		g.free <- &groupChunk{}
	}
	g.cur = <-g.free
	go func() {
		defer close(g.done)
		for c := range g.full {
			uf.addChunk(c)
			c.enc, c.ends, c.null, c.digests = c.enc[:0], c.ends[:0], c.null[:0], c.digests[:0]
			g.free <- c
		}
	}()
	return g
}

// add appends one row's group values (nil = NULL).
func (g *groupFeed) add(vals []any, digest int64) {
	c := g.cur
	for _, v := range vals {
		if v == nil {
			c.null = append(c.null, true)
		} else {
			c.enc, _ = AppendValue(c.enc, v)
			c.null = append(c.null, false)
		}
		c.ends = append(c.ends, int32(len(c.enc)))
	}
	c.digests = append(c.digests, digest)
	if len(c.digests) == groupChunkRows {
		g.full <- c
		g.cur = <-g.free
	}
}

// finish sends the last rows and waits until every row is added; stop without finish
// (on an error) only ends the goroutine.
func (g *groupFeed) finish() {
	if len(g.cur.digests) > 0 {
		g.full <- g.cur
	}
	close(g.full)
	<-g.done
}

func (g *groupFeed) stop() {
	select {
	case <-g.done:
	default:
		close(g.full)
		<-g.done
	}
}

func (u *unionFind) less(a, b int32) bool {
	if u.nodeCol[a] != u.nodeCol[b] {
		return u.nodeCol[a] < u.nodeCol[b]
	}
	return u.nodeKey[a] < u.nodeKey[b]
}

// entities returns each row's entity index, the entity keys, and the number of rows that were
// their own entity because every group value was NULL. Entities are numbered in order of their
// key, so the numbering does not depend on row order either.
func (u *unionFind) entities() (rowEnt []int32, keys [][]byte, nullRows int) {
	best := map[int32]int32{} // root -> smallest node
	for n := range u.parent {
		r := u.find(int32(n))
		if b, ok := best[r]; !ok || u.less(int32(n), b) {
			best[r] = int32(n)
		}
	}
	type ent struct {
		key  []byte
		root int32 // >= 0 root node, < 0 own-entity
	}
	var ents []ent
	for r, b := range best {
		ents = append(ents, ent{[]byte(u.nodeKey[b]), r})
	}
	for i, k := range u.own {
		ents = append(ents, ent{k, -int32(i + 1)})
	}
	sort.Slice(ents, func(i, j int) bool {
		if c := bytes.Compare(ents[i].key, ents[j].key); c != 0 {
			return c < 0
		}
		return ents[i].root < ents[j].root
	})
	rootEnt := map[int32]int32{}
	for i, e := range ents {
		keys = append(keys, e.key)
		rootEnt[e.root] = int32(i)
	}
	rowEnt = make([]int32, len(u.rowNode))
	for i, n := range u.rowNode {
		if n < 0 {
			rowEnt[i] = rootEnt[n]
			nullRows++
		} else {
			rowEnt[i] = rootEnt[u.find(n)]
		}
	}
	return rowEnt, keys, nullRows
}

// largestRemainder splits n into len(fr) integer quotas proportional to fr (Hamilton's
// method); ties in the remainder go to the earlier side.
func largestRemainder(n int, fr []float64) []int {
	q := make([]int, len(fr))
	type rem struct {
		i int
		r float64
	}
	rs := make([]rem, len(fr))
	left := n
	for i, f := range fr {
		x := float64(n) * f
		q[i] = int(x)
		left -= q[i]
		rs[i] = rem{i, x - float64(q[i])}
	}
	sort.SliceStable(rs, func(a, b int) bool { return rs[a].r > rs[b].r })
	for k := 0; k < left && k < len(rs); k++ {
		q[rs[k].i]++
	}
	return q
}
