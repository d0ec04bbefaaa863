package tracker

import (
	"fmt"
	"math"
	"sort"
)

// Graph is a weighted undirected graph on dense uint32 node ids. Each node's
// adjacency is a run of (neighbour, weight) pairs in one shared slab, with
// room to grow in place; when a run is full it moves to the end of the slab
// and the slab is compacted once the garbage outweighs the live entries.
// Self-loops are kept apart from the runs: a loop of weight w is stored as
// self[i] = w and adds 2w to the degree (Newman's convention: A_ii = 2w;
// see doc.go, Objective).
//
// Parallel edges accumulate weight. Every mutation keeps the weighted degrees
// k and the total 2m up to date in place.
//
// Graph is not safe for concurrent use.
type Graph struct {
	start []uint32  // start of node i's run in nbr/wt
	deg   []uint32  // number of live entries in node i's run
	capa  []uint32  // capacity of node i's run
	nbr   []uint32  // neighbour ids, slab
	wt    []float64 // weights, parallel to nbr
	self  []float64 // self-loop weight as given (A_ii = 2*self)
	k     []float64 // weighted degree
	alive []bool    // node present
	nw    []float64 // node weights of the CPM objective; nil means all 1
	m2    float64   // sum of k = 2m
	edges int       // undirected edges, loops included
	live  int       // live slab entries
	nodes int       // live nodes
}

// MaxNodes is the largest number of nodes a Graph holds.
const MaxNodes = math.MaxUint32 - 1

// NewGraph returns a graph with n nodes (all present) and the given edges.
// Parallel edges are summed. It runs in O(n + len(edges)) and leaves every
// adjacency run sorted by neighbour id. It panics on an endpoint >= n or a
// weight that is not finite and positive: callers validate input first.
func NewGraph(n int, edges []Edge) *Graph {
	if n < 0 || n > MaxNodes {
		panic(fmt.Sprintf("tracker: bad node count %d", n))
	}
	g := &Graph{
		start: make([]uint32, n),
		deg:   make([]uint32, n),
		capa:  make([]uint32, n),
		self:  make([]float64, n),
		k:     make([]float64, n),
		alive: make([]bool, n),
		nodes: n,
	}
	for i := range g.alive {
		g.alive[i] = true
	}
	// Pass 1: count the directed entries of each node.
	cnt := make([]uint32, n+1)
	for _, e := range edges {
		if int(e.U) >= n || int(e.V) >= n {
			panic(fmt.Sprintf("tracker: edge (%d,%d) outside %d nodes", e.U, e.V, n))
		}
		if !(e.W > 0) || math.IsInf(e.W, 0) {
			panic(fmt.Sprintf("tracker: edge (%d,%d) has weight %v", e.U, e.V, e.W))
		}
		if e.U == e.V {
			continue
		}
		cnt[e.U+1]++
		cnt[e.V+1]++
	}
	// Pass 2: place every directed entry straight into its final run (the
	// runs are tight: a static run reads the slab fastest without gaps;
	// the Tracker adds headroom, see Graph.reserve), then sort each run by
	// neighbour. One slab instead of a scratch copy and a second scatter:
	// 24 bytes per edge less at the peak of building the graph.
	fin := make([]uint32, n+1)
	for i := 0; i < n; i++ {
		fin[i+1] = fin[i] + cnt[i+1]
	}
	g.nbr = make([]uint32, fin[n])
	g.wt = make([]float64, fin[n])
	pos := make([]uint32, n)
	copy(pos, fin[:n])
	for _, e := range edges {
		if e.U == e.V {
			g.self[e.U] += e.W
			continue
		}
		p := pos[e.U]
		g.nbr[p], g.wt[p] = e.V, e.W
		pos[e.U]++
		p = pos[e.V]
		g.nbr[p], g.wt[p] = e.U, e.W
		pos[e.V]++
	}
	for i := 0; i < n; i++ {
		sortRun(g.nbr[fin[i]:fin[i+1]], g.wt[fin[i]:fin[i+1]])
	}
	// Pass 3: merge parallel entries in place.
	for i := 0; i < n; i++ {
		lo, hi := fin[i], fin[i+1]
		out := lo
		for p := lo; p < hi; p++ {
			if out > lo && g.nbr[out-1] == g.nbr[p] {
				g.wt[out-1] += g.wt[p]
				continue
			}
			g.nbr[out], g.wt[out] = g.nbr[p], g.wt[p]
			out++
		}
		g.start[i], g.deg[i], g.capa[i] = lo, out-lo, fin[i+1]-lo
		g.live += int(out - lo)
		kk := 2 * g.self[i]
		for p := lo; p < out; p++ {
			kk += g.wt[p]
		}
		g.k[i] = kk
		g.m2 += kk
		if g.self[i] > 0 {
			g.edges++
		}
	}
	g.edges += g.live / 2
	return g
}

// Len returns the number of node slots (present or not).
func (g *Graph) Len() int { return len(g.deg) }

// Nodes returns the number of present nodes.
func (g *Graph) Nodes() int { return g.nodes }

// Edges returns the number of undirected edges, self-loops included.
func (g *Graph) Edges() int { return g.edges }

// TotalWeight returns m, the total edge weight (a self-loop counts its weight once).
func (g *Graph) TotalWeight() float64 { return g.m2 / 2 }

// Degree returns the weighted degree k_i (a loop of weight w counts 2w).
func (g *Graph) Degree(i uint32) float64 { return g.k[i] }

// Has reports whether node i is present.
func (g *Graph) Has(i uint32) bool { return int(i) < len(g.alive) && g.alive[i] }

// SelfLoop returns the weight of i's self-loop as given (0 if none).
func (g *Graph) SelfLoop(i uint32) float64 { return g.self[i] }

// Neighbours calls fn for each neighbour of i (self-loop excluded) with the
// edge weight, in storage order.
func (g *Graph) Neighbours(i uint32, fn func(j uint32, w float64)) {
	s, d := g.start[i], g.deg[i]
	for p := s; p < s+d; p++ {
		fn(g.nbr[p], g.wt[p])
	}
}

// Weight returns the weight of edge (u, v), 0 if absent.
func (g *Graph) Weight(u, v uint32) float64 {
	if int(u) >= len(g.deg) || int(v) >= len(g.deg) {
		return 0
	}
	if u == v {
		return g.self[u]
	}
	if p, ok := g.find(u, v); ok {
		return g.wt[p]
	}
	return 0
}

// EdgeList appends every edge once (U <= V) to dst, in node order.
func (g *Graph) EdgeList(dst []Edge) []Edge {
	for i := range g.deg {
		u := uint32(i)
		if g.self[i] > 0 {
			dst = append(dst, Edge{U: u, V: u, W: g.self[i]})
		}
		s, d := g.start[i], g.deg[i]
		for p := s; p < s+d; p++ {
			if v := g.nbr[p]; v > u {
				dst = append(dst, Edge{U: u, V: v, W: g.wt[p]})
			}
		}
	}
	return dst
}

// Grow makes room for node ids below n. New slots are absent until an edge
// names them.
func (g *Graph) Grow(n int) {
	if n > MaxNodes {
		panic(fmt.Sprintf("tracker: node count %d over %d", n, MaxNodes))
	}
	for len(g.deg) < n {
		g.start = append(g.start, uint32(len(g.nbr)))
		g.deg = append(g.deg, 0)
		g.capa = append(g.capa, 0)
		g.self = append(g.self, 0)
		g.k = append(g.k, 0)
		g.alive = append(g.alive, false)
		if g.nw != nil {
			g.nw = append(g.nw, 1)
		}
	}
}

// NodeWeight returns the weight of node i in the CPM objective (1 unless
// set): a community of node weights n_1..n_s counts n(n-1)/2 pairs, n
// their sum (doc.go, Objective).
func (g *Graph) NodeWeight(i uint32) float64 {
	if g.nw == nil {
		return 1
	}
	return g.nw[i]
}

// SetNodeWeight sets the CPM weight of node i (a node that stands for an
// aggregate of w accounts, say). It panics on a weight that is not finite
// and positive: callers validate input first. A Tracker reads node weights
// when it is built; set them before.
func (g *Graph) SetNodeWeight(i uint32, w float64) {
	if !(w > 0) || math.IsInf(w, 0) {
		panic(fmt.Sprintf("tracker: node %d weight %v", i, w))
	}
	if g.nw == nil {
		if w == 1 {
			return
		}
		g.nw = make([]float64, len(g.deg))
		for j := range g.nw {
			g.nw[j] = 1
		}
	}
	g.nw[i] = w
}

// nodeWeights returns the node weight of every slot (a fresh slice of ones
// when none was set).
func (g *Graph) nodeWeights() []float64 {
	if g.nw != nil {
		return g.nw
	}
	w := make([]float64, len(g.deg))
	for i := range w {
		w[i] = 1
	}
	return w
}

// ensure makes node i present, growing the graph if needed.
func (g *Graph) ensure(i uint32) {
	if int(i) >= len(g.deg) {
		g.Grow(int(i) + 1)
	}
	if !g.alive[i] {
		g.alive[i] = true
		g.nodes++
	}
}

// find returns the slab position of v in u's run.
func (g *Graph) find(u, v uint32) (uint32, bool) {
	s, d := g.start[u], g.deg[u]
	nb := g.nbr[s : s+d]
	for p, x := range nb {
		if x == v {
			return s + uint32(p), true
		}
	}
	return 0, false
}

// push appends (v, w) to u's run, moving the run to the end of the slab when
// it is full.
func (g *Graph) push(u, v uint32, w float64) {
	if g.deg[u] == g.capa[u] {
		c := g.capa[u] * 2
		if c < 4 {
			c = 4
		}
		s, d := g.start[u], g.deg[u]
		ns := uint32(len(g.nbr))
		if uint64(ns)+uint64(c) > math.MaxUint32 {
			g.compact()
			s = g.start[u]
			ns = uint32(len(g.nbr))
		}
		g.nbr = append(g.nbr, g.nbr[s:s+d]...)
		g.wt = append(g.wt, g.wt[s:s+d]...)
		for x := d; x < c; x++ {
			g.nbr = append(g.nbr, 0)
			g.wt = append(g.wt, 0)
		}
		g.start[u], g.capa[u] = ns, c
	}
	p := g.start[u] + g.deg[u]
	g.nbr[p], g.wt[p] = v, w
	g.deg[u]++
	g.live++
}

// drop swap-deletes the entry at slab position p from u's run.
func (g *Graph) drop(u, p uint32) {
	last := g.start[u] + g.deg[u] - 1
	g.nbr[p], g.wt[p] = g.nbr[last], g.wt[last]
	g.deg[u]--
	g.live--
}

// maybeCompact compacts the slab when less than half of it is live.
func (g *Graph) maybeCompact() {
	if len(g.nbr) > 1<<16 && g.live*2 < len(g.nbr) {
		g.compact()
	}
}

// reserve gives every run headroom for d/8 + 2 more entries, so that the
// first changes to a node do not move its run (and, through the slab's
// growth, copy the whole slab). The Tracker calls it once at start.
func (g *Graph) reserve() { g.layout(func(d uint32) uint32 { return d + d/8 + 2 }) }

// compact rewrites the slab with every run at its live length plus a
// little headroom.
func (g *Graph) compact() { g.layout(func(d uint32) uint32 { return d + d/4 }) }

// layout rewrites the slab with each run given capacity room(deg).
func (g *Graph) layout(room func(d uint32) uint32) {
	total := 0
	for i := range g.deg {
		total += int(room(g.deg[i]))
	}
	nbr := make([]uint32, total)
	wt := make([]float64, total)
	var pos uint32
	for i := range g.deg {
		s, d := g.start[i], g.deg[i]
		copy(nbr[pos:], g.nbr[s:s+d])
		copy(wt[pos:], g.wt[s:s+d])
		c := room(d)
		g.start[i], g.capa[i] = pos, c
		pos += c
	}
	g.nbr, g.wt = nbr, wt
}

// AddWeight adds w (which may be negative) to edge (u, v), creating it and
// its endpoints if needed. An edge whose weight falls to within a rounding
// error of zero or below is deleted. It returns the new weight and the
// change actually applied to the edge.
func (g *Graph) AddWeight(u, v uint32, w float64) (now, delta float64) {
	g.ensure(u)
	g.ensure(v)
	if u == v {
		old := g.self[u]
		now = old + w
		if now <= 1e-12*math.Max(old, math.Abs(w)) {
			now = 0
		}
		if old == 0 && now > 0 {
			g.edges++
		} else if old > 0 && now == 0 {
			g.edges--
		}
		g.self[u] = now
		delta = now - old
		g.k[u] += 2 * delta
		g.m2 += 2 * delta
		return now, delta
	}
	p, ok := g.find(u, v)
	if !ok {
		if w <= 0 {
			return 0, 0
		}
		g.push(u, v, w)
		g.push(v, u, w)
		g.edges++
		g.k[u] += w
		g.k[v] += w
		g.m2 += 2 * w
		return w, w
	}
	old := g.wt[p]
	now = old + w
	if now <= 1e-12*math.Max(old, math.Abs(w)) {
		now = 0
	}
	delta = now - old
	if now == 0 {
		g.drop(u, p)
		q, _ := g.find(v, u)
		g.drop(v, q)
		g.edges--
		g.maybeCompact()
	} else {
		g.wt[p] = now
		q, _ := g.find(v, u)
		g.wt[q] = now
	}
	g.k[u] += delta
	g.k[v] += delta
	g.m2 += 2 * delta
	return now, delta
}

// SetWeight sets the weight of (u, v); 0 deletes the edge. It creates the
// endpoints if needed and returns the change applied.
func (g *Graph) SetWeight(u, v uint32, w float64) float64 {
	g.ensure(u)
	g.ensure(v)
	if u == v {
		old := g.self[u]
		if old == 0 && w > 0 {
			g.edges++
		} else if old > 0 && w == 0 {
			g.edges--
		}
		g.self[u] = w
		g.k[u] += 2 * (w - old)
		g.m2 += 2 * (w - old)
		return w - old
	}
	p, ok := g.find(u, v)
	if !ok {
		if w > 0 {
			g.AddWeight(u, v, w)
		}
		return w
	}
	old := g.wt[p]
	if w == 0 {
		g.AddWeight(u, v, -old)
		return -old
	}
	q, _ := g.find(v, u)
	g.wt[p], g.wt[q] = w, w
	g.k[u] += w - old
	g.k[v] += w - old
	g.m2 += 2 * (w - old)
	return w - old
}

// RemoveNode deletes node i and all its edges. It calls fn (if not nil) for
// each neighbour j that lost an edge, with the weight removed.
func (g *Graph) RemoveNode(i uint32, fn func(j uint32, w float64)) {
	if int(i) >= len(g.deg) || !g.alive[i] {
		return
	}
	s, d := g.start[i], g.deg[i]
	for p := s; p < s+d; p++ {
		j, w := g.nbr[p], g.wt[p]
		q, _ := g.find(j, i)
		g.drop(j, q)
		g.k[j] -= w
		g.m2 -= 2 * w
		g.edges--
		if fn != nil {
			fn(j, w)
		}
	}
	g.live -= int(d)
	g.deg[i] = 0
	if g.self[i] > 0 {
		g.m2 -= 2 * g.self[i]
		g.self[i] = 0
		g.edges--
	}
	g.k[i] = 0
	g.alive[i] = false
	g.nodes--
	g.maybeCompact()
}

// sortRun sorts one adjacency run by neighbour, stably (parallel entries
// keep the input order, so their weights are summed in it), keeping each
// weight with its neighbour: insertion sort for the short runs most nodes
// have, sort.Stable beyond; neither allocates a copy of the run.
func sortRun(nb []uint32, w []float64) {
	if len(nb) <= 24 {
		for i := 1; i < len(nb); i++ {
			v, x := nb[i], w[i]
			j := i
			for ; j > 0 && nb[j-1] > v; j-- {
				nb[j], w[j] = nb[j-1], w[j-1]
			}
			nb[j], w[j] = v, x
		}
		return
	}
	sort.Stable(runSorter{nb, w})
}

type runSorter struct {
	nb []uint32
	w  []float64
}

func (r runSorter) Len() int           { return len(r.nb) }
func (r runSorter) Less(i, j int) bool { return r.nb[i] < r.nb[j] }
func (r runSorter) Swap(i, j int) {
	r.nb[i], r.nb[j] = r.nb[j], r.nb[i]
	r.w[i], r.w[j] = r.w[j], r.w[i]
}

// recompute returns k and 2m summed from scratch, for the invariant checker.
func (g *Graph) recompute() (k []float64, m2 float64) {
	k = make([]float64, len(g.deg))
	for i := range g.deg {
		kk := 2 * g.self[i]
		s, d := g.start[i], g.deg[i]
		for p := s; p < s+d; p++ {
			kk += g.wt[p]
		}
		k[i] = kk
		m2 += kk
	}
	return k, m2
}

// view returns the level-0 adjacency for the optimiser of objective obj:
// the node masses are the degrees for modularity, the node weights for CPM.
func (g *Graph) view(obj Objective) level {
	l := level{start: g.start, deg: g.deg, nbr: g.nbr, wt: g.wt, self: g.self, k: g.k, m2: g.m2}
	l.a = l.k
	if obj == ObjectiveCPM {
		l.a = g.nodeWeights()
	}
	return l
}

// level is the adjacency the optimiser works on: the base graph, or an
// aggregate in CSR form (start[i] + deg[i] == start[i+1]).
type level struct {
	start, deg []uint32
	nbr        []uint32
	wt         []float64
	self       []float64 // A_ii = 2*self[i]
	k          []float64
	a          []float64 // node mass of the penalty: k for modularity, node weight for CPM
	m2         float64
}

func (l *level) n() int { return len(l.deg) }
