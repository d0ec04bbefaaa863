package hub

import (
	"fmt"
	"math"

	"shoal/tracker"
)

// Filter keeps the hubs of a changing graph away from a tracker (doc.go,
// Streams). It owns the full graph. Not safe for concurrent use: the
// owner of the stream (the timeline's owner goroutine) calls every method.
type Filter struct {
	p    Policy
	r    rule
	full *tracker.Graph

	// Per node slot.
	deg    []int32 // distinct neighbours in the full graph
	tcnt   []int32 // of them, non-hubs
	hub    []bool  // hub now (listed nodes are hubs even while absent)
	listed []bool
	inT    []bool          // present in the tracker (mirrors what was passed on)
	known  int             // slots below this were known when the filter was made
	later  map[uint32]bool // listed ids beyond the slots (no slot until met)

	dropped uint64

	// Scratch.
	cand    []uint32
	became  []uint32
	stopped []uint32
	mark    []bool // stopped in this step
}

// NewFilter returns a filter for policy p over full, the graph the stream
// starts from (nil: an empty one), which the filter owns from then on. The
// percentile threshold is that of full. Build the tracker from
// [Filter.Tracked].
func NewFilter(p *Policy, full *tracker.Graph) (*Filter, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if full == nil {
		full = tracker.NewGraph(0, nil)
	}
	f := &Filter{p: *p, full: full, known: full.Len()}
	f.p.Nodes = nil // kept in listed
	n := full.Len()
	f.deg = distinct(full)
	f.listed = listedSet(p.Nodes, n)
	f.tcnt = make([]int32, n)
	f.hub = make([]bool, n)
	f.inT = make([]bool, n)
	f.mark = make([]bool, n)
	for _, u := range p.Nodes {
		if int(u) >= n {
			if f.later == nil {
				f.later = map[uint32]bool{}
			}
			f.later[u] = true
		}
	}
	f.r = rule{degree: p.Degree, thr: threshold(f.deg, p.Percentile)}
	for i := range n {
		f.hub[i] = f.r.hub(f.listed[i], f.deg[i])
	}
	for i := range n {
		if !full.Has(uint32(i)) {
			continue
		}
		full.Neighbours(uint32(i), func(j uint32, _ float64) {
			if !f.hub[j] {
				f.tcnt[i]++
			}
		})
	}
	return f, nil
}

// Graph returns the full graph. Callers must not change it.
func (f *Filter) Graph() *tracker.Graph { return f.full }

// Threshold returns the percentile threshold in force (a node with more
// distinct neighbours is a hub), -1 without one.
func (f *Filter) Threshold() int { return f.r.thr }

// IsHub reports whether u is a hub now.
func (f *Filter) IsHub(u uint32) bool { return int(u) < len(f.hub) && f.hub[u] }

// tracked reports whether u belongs in the tracker: a non-hub with an
// edge that no hub ends.
func (f *Filter) tracked(u uint32) bool {
	return f.full.Has(u) && !f.hub[u] && (f.tcnt[u] > 0 || f.full.SelfLoop(u) > 0)
}

// Tracked returns a new graph for the tracker to start from: the full
// graph's edges with no hub end, on the non-hub nodes that have one (node
// weights copied). The filter assumes the tracker holds exactly this graph
// from then on.
func (f *Filter) Tracked() *tracker.Graph {
	var edges []tracker.Edge
	for _, e := range f.full.EdgeList(nil) {
		if !f.hub[e.U] && !f.hub[e.V] {
			edges = append(edges, e)
		}
	}
	n := f.full.Len()
	g := tracker.NewGraph(n, edges)
	for i := range n {
		u := uint32(i)
		f.inT[i] = f.tracked(u)
		if !f.inT[i] {
			g.RemoveNode(u, nil)
		} else if w := f.full.NodeWeight(u); w != 1 {
			g.SetNodeWeight(u, w)
		}
	}
	return g
}

// grow makes room for node id u in the per-node slices, asking
// Policy.Listed about every new slot.
func (f *Filter) grow(u uint32) {
	for len(f.deg) <= int(u) {
		i := uint32(len(f.deg))
		l := f.later[i] || (f.p.Listed != nil && int(i) >= f.known && f.p.Listed(i))
		f.deg = append(f.deg, 0)
		f.tcnt = append(f.tcnt, 0)
		f.hub = append(f.hub, l)
		f.listed = append(f.listed, l)
		f.inT = append(f.inT, false)
		f.mark = append(f.mark, false)
	}
}

func checkChange(c tracker.Change) error {
	if c.U > tracker.MaxNodes || (c.Op != tracker.OpRemoveNode && c.V > tracker.MaxNodes) {
		return fmt.Errorf("node id over %d", uint32(tracker.MaxNodes))
	}
	switch c.Op {
	case tracker.OpAdd:
		if math.IsNaN(c.W) || math.IsInf(c.W, 0) {
			return fmt.Errorf("weight %v", c.W)
		}
	case tracker.OpSet:
		if math.IsNaN(c.W) || math.IsInf(c.W, 0) || c.W < 0 {
			return fmt.Errorf("weight %v", c.W)
		}
	case tracker.OpDelete, tracker.OpRemoveNode:
	default:
		return fmt.Errorf("unknown op %d", c.Op)
	}
	return nil
}

// Apply applies chs to the full graph and appends to dst what the tracker
// must apply to keep the invariant of doc.go (Streams). A change the
// tracker would refuse (a weight that is not finite, an unknown op, an id
// over tracker.MaxNodes) is an error naming it; nothing of chs is applied
// then.
func (f *Filter) Apply(dst, chs []tracker.Change) ([]tracker.Change, error) {
	for i, c := range chs {
		if err := checkChange(c); err != nil {
			return dst, fmt.Errorf("hub filter: change %d of %d (op %d, %d-%d): %w: %v", i+1, len(chs), c.Op, c.U, c.V, tracker.ErrBadChange, err)
		}
	}
	for _, c := range chs {
		dst = f.apply(dst, c)
	}
	return dst, nil
}

func (f *Filter) apply(dst []tracker.Change, c tracker.Change) []tracker.Change {
	g := f.full
	f.cand = f.cand[:0]
	if c.Op == tracker.OpRemoveNode {
		u := c.U
		f.grow(u)
		if !g.Has(u) {
			if f.hub[u] {
				f.dropped++
				return dst
			}
			return append(dst, c) // nothing to remove: harmless
		}
		wasHub := f.hub[u]
		g.RemoveNode(u, func(j uint32, _ float64) {
			f.deg[j]--
			if !wasHub {
				f.tcnt[j]--
			}
			f.cand = append(f.cand, j)
		})
		f.deg[u], f.tcnt[u] = 0, 0
		if wasHub {
			f.dropped++
		} else {
			dst = append(dst, c)
			f.inT[u] = false
		}
		f.hub[u] = f.r.hub(f.listed[u], 0) // no neighbour is left to update
		return f.settle(dst, f.cand)
	}
	u, v := c.U, c.V
	f.grow(max(u, v))
	if c.Op == tracker.OpDelete && (!g.Has(u) || !g.Has(v)) {
		// Nothing to delete, and the tracker would not create the nodes.
		if f.hub[u] || f.hub[v] {
			f.dropped++
			return dst
		}
		return append(dst, c)
	}
	wasHub := f.hub[u] || f.hub[v]
	before := g.Weight(u, v) > 0
	switch c.Op {
	case tracker.OpAdd:
		g.AddWeight(u, v, c.W)
	case tracker.OpSet:
		g.SetWeight(u, v, c.W)
	case tracker.OpDelete:
		g.SetWeight(u, v, 0)
	}
	after := g.Weight(u, v) > 0
	if u != v && before != after {
		d := int32(1)
		if !after {
			d = -1
		}
		f.deg[u] += d
		f.deg[v] += d
		if !f.hub[v] {
			f.tcnt[u] += d
		}
		if !f.hub[u] {
			f.tcnt[v] += d
		}
	}
	f.cand = append(f.cand, u)
	if v != u {
		f.cand = append(f.cand, v)
	}
	// Status changes are worked out first: a change that touches no hub
	// before or after has no status change at its ends to order against.
	f.flip(f.cand)
	if !wasHub && !f.hub[u] && !f.hub[v] {
		dst = append(dst, c)
		f.inT[u], f.inT[v] = true, true
	} else {
		f.dropped++
	}
	return f.emit(dst)
}

// settle works out the status changes of nodes (whose counts moved) and
// emits what they need.
func (f *Filter) settle(dst []tracker.Change, nodes []uint32) []tracker.Change {
	f.flip(nodes)
	return f.emit(dst)
}

// flip updates the hub status of nodes, keeping the non-hub neighbour
// counts, and records who became and who stopped being a hub.
func (f *Filter) flip(nodes []uint32) {
	f.became, f.stopped = f.became[:0], f.stopped[:0]
	for _, x := range nodes {
		now := f.r.hub(f.listed[x], f.deg[x])
		if now == f.hub[x] {
			continue
		}
		f.hub[x] = now
		d := int32(1)
		if now {
			d = -1
			f.became = append(f.became, x)
		} else {
			f.stopped = append(f.stopped, x)
			f.mark[x] = true
		}
		f.full.Neighbours(x, func(j uint32, _ float64) { f.tcnt[j] += d })
	}
}

// emit appends the changes the last flip calls for: the removal of every
// new hub, the edges of every former hub to non-hubs, then the removal of
// every node (candidate, or neighbour of a new hub) left with no edge in
// the tracker.
func (f *Filter) emit(dst []tracker.Change) []tracker.Change {
	g := f.full
	for _, h := range f.became {
		if f.inT[h] {
			dst = append(dst, tracker.Change{Op: tracker.OpRemoveNode, U: h})
			f.inT[h] = false
		}
	}
	for _, h := range f.stopped {
		if w := g.SelfLoop(h); w > 0 {
			dst = append(dst, tracker.Change{Op: tracker.OpSet, U: h, V: h, W: w})
			f.inT[h] = true
		}
		g.Neighbours(h, func(j uint32, w float64) {
			if f.hub[j] || (f.mark[j] && j < h) { // j < h: given once, from j
				return
			}
			dst = append(dst, tracker.Change{Op: tracker.OpSet, U: h, V: j, W: w})
			f.inT[h], f.inT[j] = true, true
		})
	}
	for _, h := range f.stopped {
		f.mark[h] = false
	}
	isolated := func(x uint32) {
		if f.inT[x] && !f.tracked(x) {
			dst = append(dst, tracker.Change{Op: tracker.OpRemoveNode, U: x})
			f.inT[x] = false
		}
	}
	for _, x := range f.cand {
		isolated(x)
	}
	for _, h := range f.became {
		g.Neighbours(h, func(j uint32, _ float64) { isolated(j) })
	}
	return dst
}

// Boundary re-evaluates the percentile threshold on the full graph as it
// is now (the timeline calls it before every snapshot) and appends the
// changes that moving it calls for. Without a percentile rule it does
// nothing.
func (f *Filter) Boundary(dst []tracker.Change) []tracker.Change {
	if f.p.Percentile <= 0 {
		return dst
	}
	thr := threshold(f.deg, f.p.Percentile)
	if thr == f.r.thr {
		return dst
	}
	f.r.thr = thr
	f.cand = f.cand[:0]
	for i := range f.deg {
		if f.full.Has(uint32(i)) {
			f.cand = append(f.cand, uint32(i))
		}
	}
	// Every present node is a candidate: emit's isolation check covers the
	// neighbours of new hubs, and a candidate that lost nothing keeps its
	// place.
	return f.settle(dst, f.cand)
}

// Hubs appends the hubs present in the full graph to dst, in increasing
// order.
func (f *Filter) Hubs(dst []uint32) []uint32 {
	for i, h := range f.hub {
		if h && f.full.Has(uint32(i)) {
			dst = append(dst, uint32(i))
		}
	}
	return dst
}

// Counts returns what the policy keeps out now. It runs in the number of
// node slots plus the summed degree of the hubs.
func (f *Filter) Counts() Counts {
	c := Counts{Dropped: f.dropped}
	for i, d := range f.deg {
		if d > 0 && f.tcnt[i] == 0 && !f.hub[i] && f.full.Has(uint32(i)) && f.full.SelfLoop(uint32(i)) == 0 {
			c.Stranded++
		}
	}
	for _, h := range f.Hubs(nil) {
		c.Hubs++
		if w := f.full.SelfLoop(h); w > 0 {
			c.Edges++
			c.Weight += w
		}
		f.full.Neighbours(h, func(j uint32, w float64) {
			if !f.hub[j] || j > h {
				c.Edges++
				c.Weight += w
			}
		})
	}
	return c
}

// Touched returns, for each community of membership (the tracker's stable
// id per node slot) that has a member adjacent to a hub in the full graph,
// those hubs in increasing order.
func (f *Filter) Touched(membership []uint64) map[uint64][]uint32 {
	hubs := f.Hubs(nil)
	return touched(hubs, func(i int, fn func(j uint32)) {
		f.full.Neighbours(hubs[i], func(j uint32, _ float64) {
			if !f.hub[j] {
				fn(j)
			}
		})
	}, membership)
}

// Verify compares g, the tracker's graph, with what the invariant of
// doc.go (Streams) says it must be, and reports the first difference
// (tests, and timeline.Config.Check). It runs in the size of both graphs.
func (f *Filter) Verify(g *tracker.Graph) error {
	full := f.full
	n := max(full.Len(), g.Len())
	for i := range n {
		u := uint32(i)
		want := int(u) < full.Len() && f.tracked(u)
		if int(u) < len(f.inT) && f.inT[u] != want {
			return fmt.Errorf("hub filter: node %d: mirror says in the tracker %v, the rule %v", u, f.inT[u], want)
		}
		if g.Has(u) != want {
			return fmt.Errorf("hub filter: node %d: in the tracker %v, want %v (hub %v)", u, g.Has(u), want, f.IsHub(u))
		}
		if int(u) < len(f.deg) && f.hub[u] != f.r.hub(f.listed[u], f.deg[u]) {
			return fmt.Errorf("hub filter: node %d: hub %v, but the rule says %v", u, f.hub[u], !f.hub[u])
		}
		if !want {
			continue
		}
		if int(u) < len(f.deg) {
			var d, t int32
			full.Neighbours(u, func(j uint32, _ float64) {
				d++
				if !f.hub[j] {
					t++
				}
			})
			if d != f.deg[u] || t != f.tcnt[u] {
				return fmt.Errorf("hub filter: node %d: counts %d and %d kept, %d and %d in the graph", u, f.deg[u], f.tcnt[u], d, t)
			}
		}
		if a, b := g.SelfLoop(u), full.SelfLoop(u); a != b {
			return fmt.Errorf("hub filter: self-loop of %d: %v in the tracker, %v in the full graph", u, a, b)
		}
		var err error
		count := 0
		g.Neighbours(u, func(j uint32, w float64) {
			count++
			if err == nil && (f.IsHub(j) || full.Weight(u, j) != w) {
				err = fmt.Errorf("hub filter: edge %d-%d: %v in the tracker, %v in the full graph (hub %v)", u, j, w, full.Weight(u, j), f.IsHub(j))
			}
		})
		if err != nil {
			return err
		}
		if count != int(f.tcnt[u]) {
			return fmt.Errorf("hub filter: node %d: %d edges in the tracker, %d to non-hubs in the full graph", u, count, f.tcnt[u])
		}
	}
	return nil
}
