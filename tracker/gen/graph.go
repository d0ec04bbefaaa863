package gen

import (
	"errors"

	"shoal/tracker"
)

// ErrInvalidOptions is returned (wrapped) by the Validate methods, and so by
// the generators, when options are out of range. The message lists every
// problem found.
var ErrInvalidOptions = errors.New("gen: invalid options")

// ErrInfeasible is returned (wrapped) when valid options still admit no
// graph for the drawn degrees and community sizes, for instance when too
// many nodes have an internal degree that only the largest communities can
// hold. Another seed or looser options may succeed.
var ErrInfeasible = errors.New("gen: infeasible")

// Graph is a generated simple undirected graph with its planted partition.
type Graph struct {
	// N is the number of nodes; ids are 0..N-1. Every node has a community,
	// including any node left without edges.
	N int
	// Edges holds each undirected edge once with U < V, weight 1, sorted by
	// (U, V): no self-loops, no duplicates.
	Edges []tracker.Edge
	// Membership[i] is the planted community of node i, in 0..K-1 where K
	// is the number of communities; every id in that range is used.
	Membership []uint32
}

// Communities returns the number of planted communities K.
func (g *Graph) Communities() int {
	k := 0
	for _, c := range g.Membership {
		k = max(k, int(c)+1)
	}
	return k
}

// Mixing returns the realised mixing parameter: the fraction of a node's
// edges that leave its community, averaged over the nodes that have at
// least one edge. This is the per-node mu of LFR 2008 (section II), which is
// the quantity the LFR and planted generators aim at.
func (g *Graph) Mixing() float64 {
	deg := make([]int32, g.N)
	out := make([]int32, g.N)
	for _, e := range g.Edges {
		deg[e.U]++
		deg[e.V]++
		if g.Membership[e.U] != g.Membership[e.V] {
			out[e.U]++
			out[e.V]++
		}
	}
	sum, n := 0.0, 0
	for i, d := range deg {
		if d > 0 {
			sum += float64(out[i]) / float64(d)
			n++
		}
	}
	if n == 0 {
		return 0
	}
	return sum / float64(n)
}

// edgesFromKeys sorts packed keys (see edgeKey) of a graph on n nodes and
// expands them into weight-1 edges. keys must hold no duplicates; it is
// reordered.
func edgesFromKeys(keys []uint64, n int) []tracker.Edge {
	sortKeys(keys, n)
	edges := make([]tracker.Edge, len(keys))
	for i, k := range keys {
		edges[i] = tracker.Edge{U: uint32(k >> 32), V: uint32(k), W: 1}
	}
	return edges
}
