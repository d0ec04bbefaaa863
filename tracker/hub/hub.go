package hub

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"shoal/tracker"
)

// ErrInvalid is returned (wrapped) for a policy or an input that cannot
// work.
var ErrInvalid = errors.New("hub: invalid")

// Policy says which nodes are hubs (doc.go, Policy). The zero value has no
// hub.
type Policy struct {
	// Degree makes a node with more than Degree distinct neighbours a hub;
	// 0: no degree rule.
	Degree int
	// Percentile, in (0, 100), makes a node with more distinct neighbours
	// than that percentile of the counts (nearest rank, over the nodes with
	// a neighbour) a hub; 0: no percentile rule.
	Percentile float64
	// Nodes are hubs whatever their degree (dense node ids).
	Nodes []uint32
	// Listed, if set, is asked once for every node id a [Filter] meets
	// that its full graph did not have a slot for when it was made, and
	// makes the node a hub if it says so (the daemon: a name in the hub list
	// that was not in the dictionary yet). Called from the goroutine that
	// calls [Filter.Apply].
	Listed func(u uint32) bool
}

// Validate reports what is wrong with p.
func (p *Policy) Validate() error {
	switch {
	case p.Degree < 0:
		return fmt.Errorf("%w: hub degree %d: must be 0 (no degree rule) or more", ErrInvalid, p.Degree)
	case math.IsNaN(p.Percentile) || p.Percentile < 0 || p.Percentile >= 100:
		return fmt.Errorf("%w: hub percentile %v: must be 0 (no percentile rule) or in (0, 100)", ErrInvalid, p.Percentile)
	}
	for i, u := range p.Nodes {
		if u > tracker.MaxNodes {
			return fmt.Errorf("%w: hub node %d (list entry %d): over the largest id %d", ErrInvalid, u, i, uint32(tracker.MaxNodes))
		}
	}
	return nil
}

// Off reports whether p names no hub at all.
func (p *Policy) Off() bool {
	return p == nil || (p.Degree == 0 && p.Percentile == 0 && len(p.Nodes) == 0 && p.Listed == nil)
}

// Counts say what a policy keeps out of the optimisation.
type Counts struct {
	// Hubs is the number of hubs present in the graph.
	Hubs int
	// Edges is the number of edges of the full graph with a hub end
	// (self-loops of hubs included), Weight their total weight.
	Edges  int
	Weight float64
	// Stranded is the number of other nodes all of whose neighbours are
	// hubs (a self-loop aside): with no edge left to optimise they are in
	// no community either.
	Stranded int
	// Dropped counts the changes a [Filter] did not pass on because they
	// touch a hub (0 for a static graph).
	Dropped uint64
}

// rule decides hub status from a distinct-neighbour count. thr is the
// percentile threshold, -1 for none.
type rule struct {
	degree int
	thr    int
}

func (r rule) hub(listed bool, deg int32) bool {
	return listed || (r.degree > 0 && int(deg) > r.degree) || (r.thr >= 0 && int(deg) > r.thr)
}

// threshold is the nearest-rank p-th percentile of the positive counts in
// deg (doc.go, Policy), -1 if p is 0 or no count is positive. It runs in
// O(len(deg) + max count) with a histogram.
func threshold(deg []int32, p float64) int {
	if p <= 0 {
		return -1
	}
	n, top := 0, int32(0)
	for _, d := range deg {
		if d > 0 {
			n++
			top = max(top, d)
		}
	}
	if n == 0 {
		return -1
	}
	hist := make([]int, top+1)
	for _, d := range deg {
		if d > 0 {
			hist[d]++
		}
	}
	rank := int(math.Ceil(p * float64(n) / 100))
	rank = min(max(rank, 1), n)
	seen := 0
	for d := 1; d <= int(top); d++ {
		seen += hist[d]
		if seen >= rank {
			return d
		}
	}
	return int(top)
}

// distinct returns the distinct-neighbour count of every node slot of g.
func distinct(g *tracker.Graph) []int32 {
	deg := make([]int32, g.Len())
	for i := range deg {
		if g.Has(uint32(i)) {
			g.Neighbours(uint32(i), func(uint32, float64) { deg[i]++ })
		}
	}
	return deg
}

func hasNeighbour(g *tracker.Graph, u uint32) bool {
	n := false
	g.Neighbours(u, func(uint32, float64) { n = true })
	return n
}

// listedSet marks the ids of nodes (ignoring those beyond n slots) in a
// slice of n flags.
func listedSet(nodes []uint32, n int) []bool {
	l := make([]bool, n)
	for _, u := range nodes {
		if int(u) < n {
			l[u] = true
		}
	}
	return l
}

// Excluded is what [Exclude] took out of a graph.
type Excluded struct {
	// Hubs are the hubs removed, in increasing id order.
	Hubs []uint32
	// Threshold is the percentile threshold used (a node with more
	// neighbours is a hub), -1 without a percentile rule.
	Threshold int
	// Counts are the hubs, the edges with a hub end and their weight.
	Counts Counts
	// links[i] are the non-hub neighbours of Hubs[i], increasing.
	links [][]uint32
}

// Exclude finds the hubs of g under p and removes them with their edges
// from g, which is left for the optimiser, and then the nodes left without
// an edge (Counts.Stranded). The hubs' neighbours are recorded first, for
// [Excluded.Touched]. Listed nodes absent from g are
// not counted; p.Listed is not used (a static graph has every node).
func Exclude(g *tracker.Graph, p *Policy) (*Excluded, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	deg := distinct(g)
	r := rule{degree: p.Degree, thr: threshold(deg, p.Percentile)}
	listed := listedSet(p.Nodes, g.Len())
	x := &Excluded{Threshold: r.thr}
	isHub := make([]bool, g.Len())
	for i := range isHub {
		if g.Has(uint32(i)) && r.hub(listed[i], deg[i]) {
			isHub[i] = true
			x.Hubs = append(x.Hubs, uint32(i))
		}
	}
	for _, h := range x.Hubs {
		var l []uint32
		if w := g.SelfLoop(h); w > 0 {
			x.Counts.Edges++
			x.Counts.Weight += w
		}
		g.Neighbours(h, func(j uint32, w float64) {
			if !isHub[j] {
				l = append(l, j)
			}
			if !isHub[j] || j > h { // an edge between two hubs counts once
				x.Counts.Edges++
				x.Counts.Weight += w
			}
		})
		slices.Sort(l)
		x.links = append(x.links, l)
	}
	for _, h := range x.Hubs {
		g.RemoveNode(h, nil)
	}
	// Nodes whose neighbours were all hubs go too (the invariant of a
	// Filter: the optimiser sees only nodes with an edge).
	for _, l := range x.links {
		for _, j := range l {
			if g.Has(j) && g.SelfLoop(j) == 0 && !hasNeighbour(g, j) {
				g.RemoveNode(j, nil)
				x.Counts.Stranded++
			}
		}
	}
	x.Counts.Hubs = len(x.Hubs)
	return x, nil
}

// Split is [Exclude] on the graph of n nodes with the given edges
// (parallel edges summed): it returns the edges left, U <= V in node order,
// and what was excluded. An endpoint at or above n or a weight that is not
// finite and positive is an error naming the edge.
func Split(n int, edges []tracker.Edge, p *Policy) ([]tracker.Edge, *Excluded, error) {
	if n < 0 || n > tracker.MaxNodes {
		return nil, nil, fmt.Errorf("%w: %d nodes", ErrInvalid, n)
	}
	for i, e := range edges {
		if int64(e.U) >= int64(n) || int64(e.V) >= int64(n) {
			return nil, nil, fmt.Errorf("%w: edge %d (%d-%d): endpoint not below %d nodes", ErrInvalid, i, e.U, e.V, n)
		}
		if !(e.W > 0) || math.IsInf(e.W, 0) {
			return nil, nil, fmt.Errorf("%w: edge %d (%d-%d): weight %v, want finite and > 0", ErrInvalid, i, e.U, e.V, e.W)
		}
	}
	g := tracker.NewGraph(n, edges)
	x, err := Exclude(g, p)
	if err != nil {
		return nil, nil, err
	}
	return g.EdgeList(nil), x, nil
}

// Touched returns, for each community of membership (a stable id per node
// slot of the graph left by [Exclude], tracker.NoCommunity for none) that
// has a member adjacent to a hub, those hubs in increasing order.
func (x *Excluded) Touched(membership []uint64) map[uint64][]uint32 {
	return touched(x.Hubs, func(i int, fn func(j uint32)) {
		for _, j := range x.links[i] {
			fn(j)
		}
	}, membership)
}

// touched is the common part of the Touched methods: hubs in increasing
// order, each(i, fn) calls fn for every non-hub neighbour of hubs[i].
func touched(hubs []uint32, each func(i int, fn func(j uint32)), membership []uint64) map[uint64][]uint32 {
	out := map[uint64][]uint32{}
	for i, h := range hubs {
		each(i, func(j uint32) {
			if int(j) >= len(membership) {
				return
			}
			c := membership[j]
			if c == tracker.NoCommunity {
				return
			}
			l := out[c]
			if len(l) == 0 || l[len(l)-1] != h {
				out[c] = append(l, h)
			}
		})
	}
	return out
}
