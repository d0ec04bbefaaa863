package timeline

import (
	"fmt"
	"math"

	"shoal/snapshot"
	"shoal/tracker"
)

// Rebuild methods for [Rebuild].
const (
	// RebuildAuto is RebuildSnapshot when there is a snapshot, else
	// RebuildStatic.
	RebuildAuto = "auto"
	// RebuildSnapshot starts from the last snapshot's partition on the
	// stored edges: the ids and the communities of the regions that did not
	// change since survive a restart.
	RebuildSnapshot = "snapshot"
	// RebuildStatic runs a full static pass from scratch.
	RebuildStatic = "static"
)

// Rebuild builds the tracker of a restarted daemon over the stored graph g
// and reports the method it used ("empty" for a graph without edges).
//
// From a snapshot (prev not nil, method auto or snapshot) each node starts
// in its community of prev; nodes present now but in no community there
// (added since the snapshot) start as communities of their own with fresh
// ids from next on, in node order; communities that edges removed since
// have disconnected are split (tracker.NewWithPartition); then the nodes
// whose place the snapshot cannot vouch for (see revisit) are
// re-optimised as a batch would have (tracker.Revisit). next is the
// stored next community id, so that no id is handed out twice. Both paths
// are deterministic.
//
// With a hub policy, g is the hub filter's Tracked graph (hub.NewFilter
// over the stored graph): the hubs and their edges are not in it, so they
// stay out of the rebuilt tracker as they were out of the one that froze
// prev, and Config.Hubs is that filter.
func Rebuild(g *tracker.Graph, o *tracker.Options, prev *snapshot.Snapshot, next uint64, method string) (*tracker.Tracker, string, error) {
	switch method {
	case RebuildAuto:
		method = RebuildStatic
		if prev != nil {
			method = RebuildSnapshot
		}
	case RebuildSnapshot, RebuildStatic:
	default:
		return nil, "", fmt.Errorf("%w: rebuild method %q: want auto, snapshot or static", ErrInvalid, method)
	}
	if g.Edges() == 0 {
		tr, err := tracker.NewFrom(g, o)
		return tr, "empty", err
	}
	if method == RebuildStatic || prev == nil {
		tr, err := tracker.NewFrom(g, o)
		return tr, RebuildStatic, err
	}
	membership := prev.Membership(g.Len())
	mem := make([]uint64, g.Len())
	for i := range mem {
		mem[i] = tracker.NoCommunity
		if i < len(membership) && g.Has(uint32(i)) {
			mem[i] = membership[i]
		}
		if mem[i] != tracker.NoCommunity {
			next = max(next, mem[i]+1)
		}
	}
	next = max(next, 1)
	var added []uint32
	for i := range mem {
		if g.Has(uint32(i)) && mem[i] == tracker.NoCommunity {
			mem[i] = next
			next++
			added = append(added, uint32(i))
		}
	}
	tr, err := tracker.NewWithPartition(g, o, mem, next)
	if err != nil {
		return nil, "", err
	}
	tr.Revisit(revisit(tr, prev, added))
	return tr, RebuildSnapshot, nil
}

// revisit lists the nodes whose place the snapshot cannot vouch for: those
// added since (they would stay communities of their own until one of
// their edges changes) and the members of every community whose internal
// weight or degree is no longer the snapshot's (an edge of theirs changed,
// expired or was removed since, or the community was split). A batch would
// have re-optimised around those changes; the rebuilt tracker does it now.
func revisit(tr *tracker.Tracker, prev *snapshot.Snapshot, added []uint32) []uint32 {
	type figures struct{ internal, degree float64 }
	then := make(map[uint64]figures, len(prev.Communities))
	for _, c := range prev.Communities {
		then[c.ID] = figures{c.Internal, c.Degree}
	}
	changed := map[uint64]bool{}
	for _, c := range tr.Communities() {
		f, ok := then[c.ID]
		if !ok || !near(f.internal, c.Internal) || !near(f.degree, c.Degree) {
			changed[c.ID] = true
		}
	}
	nodes := added
	if len(changed) == 0 {
		return nodes
	}
	g := tr.Graph()
	for u := range g.Len() {
		if g.Has(uint32(u)) && changed[tr.Community(uint32(u))] {
			nodes = append(nodes, uint32(u))
		}
	}
	return nodes
}

// near compares figures kept in place against frozen ones, with room for
// rounding.
func near(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}
