package hub

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/community"
	"gonum.org/v1/gonum/graph/simple"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// TestThreshold: the nearest-rank percentile (the value at rank
// ceil(P N / 100) of the N values in increasing order), checked against
// the worked example of Wikipedia's "Percentile" article (nearest-rank
// method: of {15, 20, 35, 40, 50} the 5th, 30th, 40th and 50th percentiles
// are 15, 20, 20 and 35), then by hand on 1..10 with zeros mixed in (nodes
// without a neighbour do not count).
func TestThreshold(t *testing.T) {
	list := []int32{40, 15, 50, 35, 20}
	for _, c := range []struct {
		p    float64
		want int
	}{{5, 15}, {30, 20}, {40, 20}, {50, 35}, {99, 50}} {
		if got := threshold(list, c.p); got != c.want {
			t.Errorf("{15 20 35 40 50}, P %v: %d, want %d", c.p, got, c.want)
		}
	}
	deg := []int32{0, 3, 1, 4, 1, 5, 9, 2, 6, 0, 10, 7, 8}
	// Positive counts sorted: 1 1 2 3 4 5 6 7 8 9 10 (n = 11).
	for _, c := range []struct {
		p    float64
		want int
	}{
		{50, 5},  // rank ceil(5.5) = 6 -> 5
		{90, 9},  // rank ceil(9.9) = 10 -> 9
		{95, 10}, // rank ceil(10.45) = 11 -> 10: no node above it
		{1, 1},   // rank ceil(0.11) = 1 -> 1
		{18, 1},  // rank ceil(1.98) = 2 -> 1 (the second 1)
		{0, -1},  // no rule
		{99.9, 10} /* rank 11 */} {
		if got := threshold(deg, c.p); got != c.want {
			t.Errorf("P %v: threshold %d, want %d", c.p, got, c.want)
		}
	}
	if got := threshold([]int32{0, 0}, 50); got != -1 {
		t.Errorf("no node with a neighbour: threshold %d, want -1 (none)", got)
	}
	// A regular graph (every count the same) has no hub at any P: nothing
	// is above the threshold.
	ring := make([]tracker.Edge, 10)
	for i := range ring {
		ring[i] = tracker.Edge{U: uint32(i), V: uint32((i + 1) % 10), W: 1}
	}
	for _, p := range []float64{1, 50, 99.99} {
		_, x, err := Split(10, ring, &Policy{Percentile: p})
		if err != nil || len(x.Hubs) != 0 {
			t.Errorf("ring, P %v: hubs %v, %v; want none", p, x.Hubs, err)
		}
	}
}

// TestPolicyValidate: bad values are refused with a message naming the
// value; well-formed ones pass.
func TestPolicyValidate(t *testing.T) {
	for _, p := range []Policy{{Degree: -1}, {Percentile: 100}, {Percentile: -0.5}, {Percentile: math.NaN()}, {Nodes: []uint32{math.MaxUint32}}} {
		err := p.Validate()
		if !errors.Is(err, ErrInvalid) {
			t.Errorf("%+v: %v, want ErrInvalid", p, err)
		}
	}
	if err := (&Policy{Degree: -1}).Validate(); err == nil || !strings.Contains(err.Error(), "-1") {
		t.Errorf("the message does not name the value: %v", err)
	}
	for _, p := range []Policy{{}, {Degree: 1}, {Percentile: 99.9}, {Nodes: []uint32{0, 0, 7}}} {
		if err := p.Validate(); err != nil {
			t.Errorf("%+v: %v", p, err)
		}
	}
	if !(&Policy{}).Off() || (&Policy{Degree: 3}).Off() {
		t.Error("Off: the zero policy is off, a degree rule is not")
	}
	if _, err := NewFilter(&Policy{Degree: -2}, nil); err == nil {
		t.Error("NewFilter accepted a bad policy")
	}
	if _, _, err := Split(3, []tracker.Edge{{U: 0, V: 3, W: 1}}, &Policy{}); err == nil || !strings.Contains(err.Error(), "edge 0") {
		t.Errorf("an endpoint beyond the nodes: %v", err)
	}
	if _, _, err := Split(3, []tracker.Edge{{U: 0, V: 1, W: math.Inf(1)}}, &Policy{}); err == nil || !strings.Contains(err.Error(), "weight") {
		t.Errorf("an infinite weight: %v", err)
	}
}

// gonumQ is gonum v0.17.0's community.Q, the outside reference for
// modularity (as in tracker's modularity tests), of the communities given
// as node lists on the graph of edges.
func gonumQ(edges []tracker.Edge, comms [][]uint32) float64 {
	g := simple.NewWeightedUndirectedGraph(0, 0)
	for _, c := range comms {
		for _, v := range c {
			g.AddNode(simple.Node(v))
		}
	}
	for _, e := range edges {
		g.SetWeightedEdge(g.NewWeightedEdge(simple.Node(e.U), simple.Node(e.V), e.W))
	}
	var cs [][]graph.Node
	for _, c := range comms {
		var ns []graph.Node
		for _, v := range c {
			ns = append(ns, simple.Node(v))
		}
		cs = append(cs, ns)
	}
	return community.Q(g, cs, 1)
}

// groupsOf lists the nodes of each community of membership.
func groupsOf(membership []uint64) [][]uint32 {
	by := map[uint64][]uint32{}
	var order []uint64
	for v, c := range membership {
		if c == tracker.NoCommunity {
			continue
		}
		if _, ok := by[c]; !ok {
			order = append(order, c)
		}
		by[c] = append(by[c], uint32(v))
	}
	var out [][]uint32
	for _, c := range order {
		out = append(out, by[c])
	}
	return out
}

func span(lo, hi int) []uint32 {
	var s []uint32
	for i := lo; i < hi; i++ {
		s = append(s, uint32(i))
	}
	return s
}

// sameCommunity reports whether all nodes share one community.
func sameCommunity(membership []uint64, nodes []uint32) bool {
	for _, v := range nodes {
		if membership[v] != membership[nodes[0]] || membership[v] == tracker.NoCommunity {
			return false
		}
	}
	return true
}

// TestTwoGroupsOneHubStatic: two cliques that share only a hub merge
// under modularity at resolution 1 and stay apart once the hub is out of
// the optimisation. The merge is checked, not assumed: gonum's
// community.Q of the partition with A, B and the hub together is above
// that of the best split keeping A and B apart (the hub with A, as the
// resolution limit of Fortunato and Barthelemy 2007 predicts for these
// sizes: see gen.SharedHub), and Detect's partition has them together.
// With the policy (degree above 8; the hub has 10 neighbours, every other
// node at most 6), Detect puts A and B in two communities, each A or B
// whole, and each lists the hub.
func TestTwoGroupsOneHubStatic(t *testing.T) {
	sg, err := gen.SharedHub(gen.SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	a, b, h := span(0, 5), span(5, 10), uint32(10)
	ab := slices.Concat(a, b)
	opts := &tracker.Options{Seed: 1}

	// Without the policy.
	g := tracker.NewGraph(sg.N, sg.Edges)
	p := tracker.Detect(g, opts)
	if !sameCommunity(p.Membership, append(slices.Clone(ab), h)) {
		t.Fatalf("without the policy A, B and the hub are not one community: %v", p.Membership[:11])
	}
	// gonum's Q: merged against apart (the hub with A; with B is the same
	// by symmetry), the rest as Detect found it.
	rest := [][]uint32{}
	for _, c := range groupsOf(p.Membership) {
		if !slices.Contains(c, h) {
			rest = append(rest, c)
		}
	}
	merged := gonumQ(sg.Edges, append([][]uint32{append(slices.Clone(ab), h)}, rest...))
	apart := gonumQ(sg.Edges, append([][]uint32{append(slices.Clone(a), h), b}, rest...))
	if !(merged > apart) {
		t.Fatalf("gonum Q merged %.6f, apart %.6f: the graph does not make modularity merge the groups", merged, apart)
	}
	if math.Abs(merged-p.Modularity) > 1e-9 {
		t.Errorf("Detect's Q %.9f, gonum's for the same partition %.9f", p.Modularity, merged)
	}

	// With the policy, on the graph (Exclude) and on the edge list (Split).
	for _, how := range []string{"exclude", "split"} {
		var x *Excluded
		g := tracker.NewGraph(sg.N, sg.Edges)
		if how == "exclude" {
			x, err = Exclude(g, &Policy{Degree: 8})
		} else {
			var kept []tracker.Edge
			kept, x, err = Split(sg.N, sg.Edges, &Policy{Degree: 8})
			g = tracker.NewGraph(sg.N, kept)
			g.RemoveNode(h, nil)
		}
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(x.Hubs, []uint32{h}) {
			t.Fatalf("%s: hubs %v, want [%d]", how, x.Hubs, h)
		}
		if x.Counts != (Counts{Hubs: 1, Edges: 10, Weight: 10}) {
			t.Errorf("%s: counts %+v, want 1 hub with its 10 edges of weight 1", how, x.Counts)
		}
		if g.Has(h) || g.Edges() != len(sg.Edges)-10 {
			t.Fatalf("%s: the hub is still there (%v) or %d edges left, want %d", how, g.Has(h), g.Edges(), len(sg.Edges)-10)
		}
		q := tracker.Detect(g, opts)
		if !sameCommunity(q.Membership, a) || !sameCommunity(q.Membership, b) || q.Membership[0] == q.Membership[5] {
			t.Fatalf("%s: with the policy A and B are not two whole communities: %v", how, q.Membership[:11])
		}
		if q.Membership[h] != tracker.NoCommunity {
			t.Errorf("%s: the hub has community %d", how, q.Membership[h])
		}
		touched := x.Touched(q.Membership)
		for _, v := range []uint32{0, 5} {
			if got := touched[q.Membership[v]]; !slices.Equal(got, []uint32{h}) {
				t.Errorf("%s: the community of node %d touches hubs %v, want [%d]", how, v, got, h)
			}
		}
		if len(touched) != 2 {
			t.Errorf("%s: %d communities touch a hub, want 2: %v", how, len(touched), touched)
		}
	}

	// The percentile rule finds the same hub: at P = 99 the threshold is
	// the count at rank ceil(0.99 * 131) = 130, which is 6.
	var x *Excluded
	x, err = Exclude(tracker.NewGraph(sg.N, sg.Edges), &Policy{Percentile: 99})
	if err != nil || x.Threshold != 6 || !slices.Equal(x.Hubs, []uint32{h}) {
		t.Fatalf("P 99: threshold %d, hubs %v, %v; want 6 and [%d]", x.Threshold, x.Hubs, err, h)
	}
	// A star's leaves have no neighbour but the hub: they leave the graph
	// with it (counted), so no community of one is made of them.
	star := tracker.NewGraph(5, []tracker.Edge{{U: 0, V: 1, W: 1}, {U: 0, V: 2, W: 1}, {U: 0, V: 3, W: 1}, {U: 3, V: 4, W: 1}})
	x, err = Exclude(star, &Policy{Degree: 2})
	if err != nil || x.Counts.Stranded != 2 || star.Has(1) || star.Has(2) || !star.Has(3) || !star.Has(4) {
		t.Fatalf("star: %+v, %v; want leaves 1 and 2 stranded and removed, 3-4 kept", x.Counts, err)
	}
	// A listed node is a hub whatever its degree; an edge between two hubs
	// counts once.
	x, err = Exclude(tracker.NewGraph(sg.N, sg.Edges), &Policy{Degree: 8, Nodes: []uint32{0}})
	if err != nil || !slices.Equal(x.Hubs, []uint32{0, h}) || x.Counts.Edges != 4+10 {
		t.Fatalf("listed 0: hubs %v, counts %+v, %v; want [0 %d] and 14 edges (4 of 0's clique, 10 of the hub's, 0-hub once)", x.Hubs, x.Counts, err, h)
	}
}
