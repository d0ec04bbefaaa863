package tracker

import (
	"errors"
	"fmt"
	"math"
	"slices"
)

// Op is the kind of a Change.
type Op uint8

const (
	// OpAdd adds W to the weight of edge (U, V), creating it and its
	// endpoints as needed. A negative W subtracts; an edge whose weight
	// reaches zero (within rounding) or below is deleted.
	OpAdd Op = iota + 1
	// OpSet sets the weight of (U, V) to W; W = 0 deletes the edge.
	OpSet
	// OpDelete deletes edge (U, V).
	OpDelete
	// OpRemoveNode removes node U with all its edges. The id may come back
	// later as a new node.
	OpRemoveNode
)

// Change is one edge or node change of a batch.
type Change struct {
	Op   Op
	U, V uint32
	W    float64
}

// ErrBadChange is returned by Apply for a change it cannot apply; nothing
// of the batch has been applied then.
var ErrBadChange = errors.New("tracker: bad change")

// Result describes what one Apply did.
type Result struct {
	// Changes is the number of changes applied.
	Changes int
	// Frontier is the number of nodes first marked by the changes;
	// Visited the number of node visits of local moving (marked nodes plus
	// the neighbours of moved nodes, each counted per visit).
	Frontier, Visited int
	// Moves counts node moves; Merges communities merged whole into a
	// neighbour; Splits the parts split off disconnected communities.
	Moves, Merges, Splits int
	// Full is true when the drift guard ran a full static pass.
	Full bool
}

const noSlot = ^uint32(0)

// Tracker keeps a partition of a changing graph at high modularity. See
// doc.go for the algorithm, the invariants and the determinism guarantee.
//
// Communities live in dense slots. Each slot keeps its stable id, its size,
// tot_c (summed degree) and in_c (internal weight from both ends, loops
// counted 2w), and a doubly linked list of its members, all updated in
// place on every change and every move.
//
// Tracker is not safe for concurrent use.
type Tracker struct {
	o Options
	g *Graph
	s *solver

	comm       []uint32 // slot of each node; noSlot if absent
	next, prev []uint32 // member lists, by node; noSlot ends a list

	head    []uint32 // first member of each slot
	tot, in []float64
	mtot    []float64 // summed node weight of each slot (n_c of CPM)
	size    []uint32
	id      []uint64
	free    []uint32 // empty slots for reuse

	nextID    uint64
	batches   int
	sinceFull int
	drift     float64 // sum |delta w| since the last full pass

	// per-batch scratch
	mark     []bool
	frontier []uint32
	seeds    []seed      // connectivity checks pending: (slot, node) pairs
	joins    [][2]uint32 // endpoints of edges added or made heavier between communities
	hot      []uint32    // slots touched by the batch
	lost     []float64   // internal weight each slot lost to the batch's changes
	checked  []float64   // each slot's internal weight when the resplit pass last looked at it
	settled  []float64   // each slot's internal weight at the last Settle
	hotMark  []bool
	stamp    []uint32 // search labels by node
	local    []uint32 // node -> index in the frontier subgraph
	ssBuf    []search // checkSlot scratch
	liveBuf  []int
	stampGen uint32
	res      Result
}

// seed asks for a connectivity check of slot c from node u: c lost an
// internal edge at u, or a member next to u. See split.go.
type seed struct{ c, u uint32 }

// New returns a tracker over an empty graph.
func New(o *Options) (*Tracker, error) {
	return NewFrom(NewGraph(0, nil), o)
}

// NewFrom returns a tracker that owns g, starting from a full static run.
func NewFrom(g *Graph, o *Options) (*Tracker, error) {
	opts := *o
	opts.EnsureDefaults()
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	t := &Tracker{o: opts, g: g, s: newSolver(&opts, opts.Seed), nextID: 1}
	t.prepare()
	t.load(detectFrom(g, &t.o, nil, t.nextID))
	g.reserve()
	return t, nil
}

// NewWithPartition returns a tracker that owns g and starts from membership
// (a stable id per node slot, NoCommunity for absent nodes), as a snapshot
// holds it. Communities that are disconnected in g are split by the rule of
// doc.go. Fresh ids start above next and above every id in membership.
func NewWithPartition(g *Graph, o *Options, membership []uint64, next uint64) (*Tracker, error) {
	opts := *o
	opts.EnsureDefaults()
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	if len(membership) != g.Len() {
		return nil, fmt.Errorf("tracker: membership of %d nodes for a graph of %d", len(membership), g.Len())
	}
	t := &Tracker{o: opts, g: g, s: newSolver(&opts, opts.Seed), nextID: max(next, 1)}
	t.prepare()
	dense := map[uint64]uint32{}
	comm := make([]uint32, g.Len())
	var ids []uint64
	for i, c := range membership {
		if !g.alive[i] {
			comm[i] = noSlot
			continue
		}
		if c == NoCommunity {
			return nil, fmt.Errorf("tracker: node %d is present but has no community", i)
		}
		d, ok := dense[c]
		if !ok {
			d = uint32(len(ids))
			dense[c] = d
			ids = append(ids, c)
		}
		comm[i] = d
		t.nextID = max(t.nextID, c+1)
	}
	t.loadDense(comm, ids)
	t.splitAll()
	g.reserve()
	return t, nil
}

// prepare materialises the node weights of a CPM tracker, so that every
// batch reads them from the graph without building a slice of ones.
func (t *Tracker) prepare() {
	if t.o.Objective == ObjectiveCPM && t.g.nw == nil {
		t.g.nw = t.g.nodeWeights()
	}
}

// pen returns the per-slot totals of the objective's penalty (doc.go,
// Objective): tot_c for modularity, n_c for CPM.
func (t *Tracker) pen() []float64 {
	if t.o.Objective == ObjectiveCPM {
		return t.mtot
	}
	return t.tot
}

// mass returns node u's mass in the penalty: k_u or its node weight.
func (t *Tracker) mass(u uint32) float64 {
	if t.o.Objective == ObjectiveCPM {
		return t.g.nw[u]
	}
	return t.g.k[u]
}

// load replaces the partition with p.
func (t *Tracker) load(p *Partition) {
	dense := map[uint64]uint32{}
	comm := make([]uint32, len(p.Membership))
	var ids []uint64
	for i, c := range p.Membership {
		if c == NoCommunity {
			comm[i] = noSlot
			continue
		}
		d, ok := dense[c]
		if !ok {
			d = uint32(len(ids))
			dense[c] = d
			ids = append(ids, c)
		}
		comm[i] = d
		t.nextID = max(t.nextID, c+1)
	}
	t.loadDense(comm, ids)
}

// loadDense rebuilds every slot from comm (slot per node, noSlot if
// absent) and the id of each slot.
func (t *Tracker) loadDense(comm []uint32, ids []uint64) {
	n, c := len(comm), len(ids)
	t.comm = comm
	t.next = make([]uint32, n)
	t.prev = make([]uint32, n)
	t.head = make([]uint32, c)
	t.tot = make([]float64, c)
	t.in = make([]float64, c)
	t.mtot = make([]float64, c)
	t.size = make([]uint32, c)
	t.id = ids
	t.free = t.free[:0]
	t.hotMark = make([]bool, c)
	t.lost = make([]float64, c)
	t.s.grow(max(n, c) + 1)
	defer func() { t.checked, t.settled = slices.Clone(t.in), slices.Clone(t.in) }()
	for len(t.mark) < n {
		t.mark = append(t.mark, false)
		t.stamp = append(t.stamp, 0)
	}
	for s := range t.head {
		t.head[s] = noSlot
	}
	for i := n - 1; i >= 0; i-- {
		if s := comm[i]; s != noSlot {
			t.link(uint32(i), s)
		}
	}
	t.recount()
}

// recount recomputes tot and in of every slot from scratch.
func (t *Tracker) recount() {
	for s := range t.tot {
		t.tot[s], t.in[s], t.mtot[s] = 0, 0, 0
	}
	g := t.g
	for i, s := range t.comm {
		if s == noSlot {
			continue
		}
		t.tot[s] += g.k[i]
		t.mtot[s] += g.NodeWeight(uint32(i))
		t.in[s] += 2 * g.self[i]
		st, d := g.start[i], g.deg[i]
		for p := st; p < st+d; p++ {
			if t.comm[g.nbr[p]] == s {
				t.in[s] += g.wt[p]
			}
		}
	}
}

// link puts node i at the head of slot s's member list.
func (t *Tracker) link(i, s uint32) {
	h := t.head[s]
	t.next[i], t.prev[i] = h, noSlot
	if h != noSlot {
		t.prev[h] = i
	}
	t.head[s] = i
	t.comm[i] = s
	t.size[s]++
}

// unlink takes node i out of its slot's member list.
func (t *Tracker) unlink(i uint32) {
	s := t.comm[i]
	if p := t.prev[i]; p != noSlot {
		t.next[p] = t.next[i]
	} else {
		t.head[s] = t.next[i]
	}
	if n := t.next[i]; n != noSlot {
		t.prev[n] = t.prev[i]
	}
	t.size[s]--
}

// newSlot returns an empty slot with a fresh id.
func (t *Tracker) newSlot() uint32 {
	var s uint32
	if n := len(t.free); n > 0 {
		s = t.free[n-1]
		t.free = t.free[:n-1]
	} else {
		s = uint32(len(t.head))
		t.head = append(t.head, noSlot)
		t.tot = append(t.tot, 0)
		t.in = append(t.in, 0)
		t.mtot = append(t.mtot, 0)
		t.size = append(t.size, 0)
		t.id = append(t.id, 0)
		t.hotMark = append(t.hotMark, false)
		t.lost = append(t.lost, 0)
		t.checked = append(t.checked, 0)
		t.settled = append(t.settled, 0)
	}
	t.head[s], t.tot[s], t.in[s], t.mtot[s], t.size[s], t.lost[s], t.checked[s], t.settled[s] = noSlot, 0, 0, 0, 0, 0, 0, 0
	t.id[s] = t.nextID
	t.nextID++
	return s
}

// reserveSlots makes sure at least k slots are free, growing the slot
// arrays now; free slots carry no id.
func (t *Tracker) reserveSlots(k int) {
	for len(t.free) < k {
		s := uint32(len(t.head))
		t.head = append(t.head, noSlot)
		t.tot = append(t.tot, 0)
		t.in = append(t.in, 0)
		t.mtot = append(t.mtot, 0)
		t.size = append(t.size, 0)
		t.id = append(t.id, NoCommunity)
		t.hotMark = append(t.hotMark, false)
		t.lost = append(t.lost, 0)
		t.checked = append(t.checked, 0)
		t.settled = append(t.settled, 0)
		t.free = append(t.free, s)
	}
	t.s.grow(len(t.head) + 1)
}

// takeSlot hands a free slot with a fresh id to local moving, noSlot if
// none is free.
func (t *Tracker) takeSlot() uint32 {
	n := len(t.free)
	if n == 0 {
		return noSlot
	}
	s := t.free[n-1]
	t.free = t.free[:n-1]
	t.head[s], t.tot[s], t.in[s], t.mtot[s], t.size[s], t.lost[s], t.checked[s], t.settled[s] = noSlot, 0, 0, 0, 0, 0, 0, 0
	t.id[s] = t.nextID
	t.nextID++
	t.heat(s)
	return s
}

// release frees an empty slot; its id is retired for good.
func (t *Tracker) release(s uint32) {
	t.tot[s], t.in[s], t.mtot[s] = 0, 0, 0
	t.id[s] = NoCommunity
	t.free = append(t.free, s)
}

// touch makes node u present, as a singleton with a fresh id if it is new.
func (t *Tracker) touch(u uint32) {
	if int(u) >= len(t.comm) {
		t.g.Grow(int(u) + 1)
		for len(t.comm) <= int(u) {
			t.comm = append(t.comm, noSlot)
			t.next = append(t.next, noSlot)
			t.prev = append(t.prev, noSlot)
			t.mark = append(t.mark, false)
			t.stamp = append(t.stamp, 0)
		}
	}
	t.g.ensure(u)
	if t.comm[u] == noSlot {
		s := t.newSlot()
		t.link(u, s)
		t.mtot[s] = t.g.NodeWeight(u)
		t.heat(s)
	}
}

func (t *Tracker) markNode(u uint32) {
	if !t.mark[u] {
		t.mark[u] = true
		t.frontier = append(t.frontier, u)
	}
}

func (t *Tracker) heat(s uint32) {
	if !t.hotMark[s] {
		t.hotMark[s] = true
		t.hot = append(t.hot, s)
	}
}

// Graph returns the tracker's graph. Callers must not change it.
func (t *Tracker) Graph() *Graph { return t.g }

// Options returns the tracker's options, defaults filled in.
func (t *Tracker) Options() Options { return t.o }

// NextID returns the id the next new community will get.
func (t *Tracker) NextID() uint64 { return t.nextID }

// Community returns the stable id of node u's community, NoCommunity if u
// is absent.
func (t *Tracker) Community(u uint32) uint64 {
	if int(u) >= len(t.comm) || t.comm[u] == noSlot {
		return NoCommunity
	}
	return t.id[t.comm[u]]
}

// Membership appends the stable id of every node slot to dst[:0].
func (t *Tracker) Membership(dst []uint64) []uint64 {
	dst = dst[:0]
	for _, s := range t.comm {
		if s == noSlot {
			dst = append(dst, NoCommunity)
		} else {
			dst = append(dst, t.id[s])
		}
	}
	return dst
}

// Communities returns the statistics of every community, sorted by id.
func (t *Tracker) Communities() []CommunityStats {
	var out []CommunityStats
	for s := range t.head {
		if t.size[s] > 0 {
			// NB: kept sums can round a few ulps below zero.
			out = append(out, CommunityStats{ID: t.id[s], Size: int(t.size[s]), Internal: max(0, t.in[s]/2), Degree: max(0, t.tot[s]), Weight: max(0, t.mtot[s])})
		}
	}
	sortStats(out)
	return out
}

// NumCommunities returns the number of communities.
func (t *Tracker) NumCommunities() int { return len(t.head) - len(t.free) }

// Modularity returns Q of the current partition from the kept totals: at
// the options' resolution for the modularity objective, at resolution 1
// for CPM (for comparison).
func (t *Tracker) Modularity() float64 {
	if t.o.Objective == ObjectiveCPM {
		return qFrom(t.in, t.tot, t.g.m2, 1)
	}
	return qFrom(t.in, t.tot, t.g.m2, t.o.Resolution)
}

// Quality returns the value of the options' objective for the current
// partition from the kept totals: Q for modularity, H for CPM.
func (t *Tracker) Quality() float64 {
	if t.o.Objective == ObjectiveCPM {
		return cpmFrom(t.in, t.mtot, t.o.Resolution)
	}
	return t.Modularity()
}

// Apply applies a batch of changes and re-optimises the touched region (see
// doc.go, "Incremental"). A change naming a node id above MaxNodes or a
// weight that is not finite (or negative for OpSet) fails the whole batch
// with ErrBadChange before anything is applied.
func (t *Tracker) Apply(batch []Change) (Result, error) {
	for i, c := range batch {
		if err := validChange(c); err != nil {
			return Result{}, fmt.Errorf("%w: change %d: %v", ErrBadChange, i, err)
		}
	}
	t.res = Result{Changes: len(batch)}
	for _, c := range batch {
		t.change(c)
	}
	t.res.Frontier = len(t.frontier)
	t.reoptimise()
	t.batches++
	t.sinceFull++
	if (t.o.FullEvery > 0 && t.sinceFull >= t.o.FullEvery) ||
		(t.o.DriftBound > 0 && t.g.m2 > 0 && t.drift/(t.g.m2/2) > t.o.DriftBound) {
		t.Optimize()
		t.res.Full = true
	}
	return t.res, nil
}

// Revisit re-optimises around the given nodes as if a batch had touched
// them (local moving from them, the connectivity checks, the merge pass
// over pairs of their communities joined by an edge), without changing the
// graph. A tracker rebuilt from an old partition on a graph that changed
// since calls it for the nodes of the communities that changed and the
// nodes the partition did not know, which would otherwise stay as they
// were until an edge of theirs changes again. Absent nodes are skipped.
func (t *Tracker) Revisit(nodes []uint32) Result {
	t.res = Result{}
	for _, u := range nodes {
		if int(u) < len(t.comm) && t.g.Has(u) {
			t.markNode(u)
			t.heat(t.comm[u])
		}
	}
	// Pairs of revisited communities joined by an edge go to the merge
	// pass, as the edges a batch adds between communities do: the changes
	// that joined them are not known here, only that both sides changed.
	g := t.g
	seen := map[[2]uint32]bool{}
	for _, u := range t.frontier {
		cu := t.comm[u]
		st, d := g.start[u], g.deg[u]
		for p := st; p < st+d; p++ {
			v := g.nbr[p]
			cv := t.comm[v]
			if !t.mark[v] || cv == cu {
				continue
			}
			k := [2]uint32{min(cu, cv), max(cu, cv)}
			if !seen[k] {
				seen[k] = true
				t.joins = append(t.joins, [2]uint32{u, v})
			}
		}
	}
	t.res.Frontier = len(t.frontier)
	if len(t.frontier) > 0 {
		t.reoptimise()
	}
	return t.res
}

func validChange(c Change) error {
	if c.U > MaxNodes || (c.Op != OpRemoveNode && c.V > MaxNodes) {
		return fmt.Errorf("node id over %d", MaxNodes)
	}
	switch c.Op {
	case OpAdd:
		if math.IsNaN(c.W) || math.IsInf(c.W, 0) {
			return fmt.Errorf("weight %v", c.W)
		}
	case OpSet:
		if math.IsNaN(c.W) || math.IsInf(c.W, 0) || c.W < 0 {
			return fmt.Errorf("weight %v", c.W)
		}
	case OpDelete, OpRemoveNode:
	default:
		return fmt.Errorf("unknown op %d", c.Op)
	}
	return nil
}

// change applies one change to the graph and the slot totals and marks the
// frontier: the endpoints of a weakened edge inside one community and of a
// strengthened edge between two (the dynamic-frontier rule, Sahu 2024; see
// doc.go, Incremental).
func (t *Tracker) change(c Change) {
	if c.Op == OpRemoveNode {
		t.removeNode(c.U)
		return
	}
	u, v := c.U, c.V
	if c.Op == OpDelete && (!t.g.Has(u) || !t.g.Has(v)) {
		return // nothing to delete; do not create the nodes
	}
	t.touch(u)
	t.touch(v)
	var d, now float64
	switch c.Op {
	case OpAdd:
		now, d = t.g.AddWeight(u, v, c.W)
	case OpSet:
		d = t.g.SetWeight(u, v, c.W)
		now = c.W
	case OpDelete:
		d = t.g.SetWeight(u, v, 0)
	}
	if d == 0 {
		return
	}
	t.drift += math.Abs(d)
	cu, cv := t.comm[u], t.comm[v]
	if u == v {
		t.tot[cu] += 2 * d
		t.in[cu] += 2 * d
		t.markNode(u)
		return
	}
	t.tot[cu] += d
	t.tot[cv] += d
	if cu == cv {
		t.in[cu] += 2 * d
		if d < 0 {
			t.lost[cu] -= 2 * d
			t.markNode(u)
			t.markNode(v)
			t.heat(cu)
			if now == 0 {
				t.seeds = append(t.seeds, seed{cu, u}, seed{cu, v})
			}
		}
	} else if d > 0 {
		t.markNode(u)
		t.markNode(v)
		t.heat(cu)
		t.heat(cv)
		t.joins = append(t.joins, [2]uint32{u, v})
	}
}

func (t *Tracker) removeNode(u uint32) {
	if int(u) >= len(t.comm) || t.comm[u] == noSlot {
		return
	}
	c := t.comm[u]
	ku, self := t.g.k[u], t.g.self[u]
	t.drift += ku / 2
	t.g.RemoveNode(u, func(j uint32, w float64) {
		cj := t.comm[j]
		t.tot[cj] -= w
		if cj == c {
			t.in[c] -= 2 * w
			t.lost[c] += 2 * w
		}
		t.markNode(j)
		if cj == c {
			t.seeds = append(t.seeds, seed{c, j})
		}
	})
	t.tot[c] -= ku
	t.mtot[c] -= t.g.NodeWeight(u)
	t.in[c] -= 2 * self
	t.lost[c] += 2 * self
	t.unlink(u)
	t.comm[u] = noSlot
	if t.size[c] == 0 {
		t.release(c)
		return
	}
	t.heat(c)
}
