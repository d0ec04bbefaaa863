package hub

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"shoal/tracker"
)

// scratch is the tracker graph filtering from scratch gives for the full
// graph full: the hubs by counting each node's distinct neighbours in the
// edge list (a recount, not the filter's counters), then the edges with no
// hub end, on the nodes that have one. thr is the percentile threshold in
// force (-1: none).
func scratch(full *tracker.Graph, p *Policy, listed map[uint32]bool, thr int) (edges []tracker.Edge, nodes []uint32, hubs []uint32) {
	all := full.EdgeList(nil)
	nb := make([]int, full.Len())
	for _, e := range all {
		if e.U != e.V {
			nb[e.U]++
			nb[e.V]++
		}
	}
	isHub := make([]bool, full.Len())
	for i := range isHub {
		isHub[i] = listed[uint32(i)] || (p.Degree > 0 && nb[i] > p.Degree) || (thr >= 0 && nb[i] > thr)
		if isHub[i] && full.Has(uint32(i)) {
			hubs = append(hubs, uint32(i))
		}
	}
	has := make([]bool, full.Len())
	for _, e := range all {
		if !isHub[e.U] && !isHub[e.V] {
			edges = append(edges, e)
			has[e.U], has[e.V] = true, true
		}
	}
	for i, h := range has {
		if h {
			nodes = append(nodes, uint32(i))
		}
	}
	return edges, nodes, hubs
}

// sortEdges sorts by (U, V): EdgeList gives each node's edges in storage
// order.
func sortEdges(es []tracker.Edge) []tracker.Edge {
	slices.SortFunc(es, func(a, b tracker.Edge) int {
		if a.U != b.U {
			return int(a.U) - int(b.U)
		}
		return int(a.V) - int(b.V)
	})
	return es
}

func presentNodes(g *tracker.Graph) []uint32 {
	var out []uint32
	for i := range g.Len() {
		if g.Has(uint32(i)) {
			out = append(out, uint32(i))
		}
	}
	return out
}

// compare checks the tracker's graph against scratch: the same edges with
// the same weights (exactly: both come from the same additions), the same
// nodes, the same hubs; and that the filter's own Verify agrees.
func compare(t *testing.T, step string, f *Filter, tr *tracker.Tracker, p *Policy, listed map[uint32]bool) {
	t.Helper()
	edges, nodes, hubs := scratch(f.Graph(), p, listed, f.Threshold())
	g := tr.Graph()
	got := sortEdges(g.EdgeList(nil))
	if edges = sortEdges(edges); !slices.Equal(got, edges) {
		t.Fatalf("%s: tracker edges\n%v\nfrom scratch\n%v", step, got, edges)
	}
	if got := presentNodes(g); !slices.Equal(got, nodes) {
		t.Fatalf("%s: tracker nodes %v, from scratch %v", step, got, nodes)
	}
	if got := f.Hubs(nil); !slices.Equal(got, hubs) {
		t.Fatalf("%s: hubs %v, from scratch %v", step, got, hubs)
	}
	if err := f.Verify(g); err != nil {
		t.Fatalf("%s: %v", step, err)
	}
	// The counts, recounted: edges with a hub end are the full graph's
	// less the kept ones; stranded nodes have neighbours but no kept edge
	// (and no self-loop).
	full := f.Graph()
	stranded := 0
	for i := range full.Len() {
		u := uint32(i)
		nb := 0
		full.Neighbours(u, func(uint32, float64) { nb++ })
		if full.Has(u) && !f.IsHub(u) && nb > 0 && full.SelfLoop(u) == 0 && !slices.Contains(nodes, u) {
			stranded++
		}
	}
	if c := f.Counts(); c.Edges != full.Edges()-len(edges) || c.Stranded != stranded || c.Hubs != len(hubs) {
		t.Fatalf("%s: counts %+v; recounted %d edges with a hub end, %d stranded, %d hubs", step, c, full.Edges()-len(edges), stranded, len(hubs))
	}
	if err := tr.Check(); err != nil {
		t.Fatalf("%s: tracker check: %v", step, err)
	}
}

// TestFilterCrossAndFallBack: a node whose neighbour count crosses the
// degree threshold is taken out of the tracker with its edges, and put
// back when the count falls back (its edges deleted, as a window expiring
// them would); at every step the tracker's graph is the one filtering the
// full graph from scratch gives (edge lists compared).
func TestFilterCrossAndFallBack(t *testing.T) {
	p := &Policy{Degree: 3}
	f, err := NewFilter(p, nil)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := tracker.New(&tracker.Options{})
	if err != nil {
		t.Fatal(err)
	}
	step := func(name string, chs ...tracker.Change) []tracker.Change {
		t.Helper()
		out, err := f.Apply(nil, chs)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := tr.Apply(out); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		compare(t, name, f, tr, p, nil)
		return out
	}
	add := func(u, v uint32) tracker.Change { return tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: 1} }
	del := func(u, v uint32) tracker.Change { return tracker.Change{Op: tracker.OpDelete, U: u, V: v} }
	// A triangle 1-2-3 and node 0 linked to 1, 2, 3: 0 has 3 neighbours,
	// not more than 3, so it is not a hub yet.
	step("triangle", add(1, 2), add(2, 3), add(1, 3), add(0, 1), add(0, 2), add(0, 3))
	if f.IsHub(0) {
		t.Fatal("node 0 with 3 neighbours is a hub at degree 3")
	}
	// A fourth neighbour: 0 becomes a hub; the filter emits its removal,
	// and 4, whose only edge is to the hub, never reaches the tracker.
	out := step("cross", add(0, 4))
	if !slices.Contains(out, tracker.Change{Op: tracker.OpRemoveNode, U: 0}) {
		t.Fatalf("crossing emitted %v, no removal of node 0", out)
	}
	if !f.IsHub(0) || tr.Graph().Has(0) || tr.Graph().Has(4) {
		t.Fatal("the hub or its pendant neighbour is in the tracker")
	}
	// Changes touching the hub are dropped (counted).
	before := f.Counts().Dropped
	if out := step("hub weight", tracker.Change{Op: tracker.OpAdd, U: 0, V: 1, W: 2}); len(out) != 0 {
		t.Fatalf("a change on a hub edge passed: %v", out)
	}
	if got := f.Counts().Dropped; got != before+1 {
		t.Fatalf("dropped %d, want %d", got, before+1)
	}
	if c := f.Counts(); c.Hubs != 1 || c.Edges != 4 || c.Weight != 6 || c.Stranded != 1 {
		t.Fatalf("counts %+v: want 1 hub, its 4 edges of weight 3+1+1+1, node 4 stranded", c)
	}
	// Back under the threshold: the hub's edges to non-hubs come back at
	// the full graph's weight (3 for 0-1).
	out = step("fall back", del(0, 4))
	if f.IsHub(0) || tr.Graph().Weight(0, 1) != 3 {
		t.Fatalf("after falling back: hub %v, weight 0-1 %v (emitted %v)", f.IsHub(0), tr.Graph().Weight(0, 1), out)
	}
	// A node whose only edges in the tracker were to a new hub leaves the
	// tracker with it: 5 hangs on 6 alone, 6 gets four more neighbours.
	step("pendant", add(5, 6))
	step("6 crosses", add(6, 1), add(6, 2), add(6, 3))
	if tr.Graph().Has(5) {
		t.Fatal("node 5, linked only to the hub 6, is still in the tracker")
	}
	// Removing a hub node, and a node next to a hub.
	step("remove hub", tracker.Change{Op: tracker.OpRemoveNode, U: 6})
	step("remove 1", tracker.Change{Op: tracker.OpRemoveNode, U: 1})
	step("self-loop", tracker.Change{Op: tracker.OpSet, U: 2, V: 2, W: 4}, add(7, 7))
}

// TestFilterRandom: random streams of adds (some negative), sets,
// deletes, self-loops and node removals over a few nodes, under each kind
// of rule; after every batch the tracker's graph is the one filtering from
// scratch gives, and the percentile threshold moves only at Boundary.
func TestFilterRandom(t *testing.T) {
	n := 24
	if testing.Short() {
		n = 16
	}
	for _, pc := range []struct {
		name   string
		p      Policy
		listed []uint32
	}{
		{"degree", Policy{Degree: 4}, nil},
		{"percentile", Policy{Percentile: 80}, nil},
		{"listed", Policy{Nodes: []uint32{2, 40}}, []uint32{2, 40}},
		{"all", Policy{Degree: 6, Percentile: 90, Nodes: []uint32{5}}, []uint32{5}},
	} {
		t.Run(pc.name, func(t *testing.T) {
			for seed := range uint64(4) {
				rng := rand.New(rand.NewPCG(seed, 9))
				listed := map[uint32]bool{}
				for _, u := range pc.listed {
					listed[u] = true
				}
				// Start from a random graph given to NewFilter (the restart
				// path) half the time.
				var full *tracker.Graph
				if seed%2 == 1 {
					var es []tracker.Edge
					for range 30 {
						es = append(es, tracker.Edge{U: uint32(rng.IntN(n)), V: uint32(rng.IntN(n)), W: float64(1 + rng.IntN(3))})
					}
					full = tracker.NewGraph(n, es)
					for i := range n {
						if full.Degree(uint32(i)) == 0 {
							full.RemoveNode(uint32(i), nil)
						}
					}
				}
				p := pc.p
				f, err := NewFilter(&p, full)
				if err != nil {
					t.Fatal(err)
				}
				tr, err := tracker.NewFrom(f.Tracked(), &tracker.Options{Seed: seed})
				if err != nil {
					t.Fatal(err)
				}
				compare(t, "start", f, tr, &p, listed)
				for b := range 60 {
					var chs []tracker.Change
					for range 1 + rng.IntN(6) {
						u, v := uint32(rng.IntN(n)), uint32(rng.IntN(n))
						var c tracker.Change
						switch r := rng.IntN(20); {
						case r < 10:
							c = tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: float64(1 + rng.IntN(3))}
						case r < 12:
							c = tracker.Change{Op: tracker.OpAdd, U: u, V: v, W: -float64(1 + rng.IntN(2))}
						case r < 14:
							c = tracker.Change{Op: tracker.OpSet, U: u, V: v, W: float64(rng.IntN(3))}
						case r < 18:
							c = tracker.Change{Op: tracker.OpDelete, U: u, V: v}
						default:
							c = tracker.Change{Op: tracker.OpRemoveNode, U: u}
						}
						chs = append(chs, c)
					}
					out, err := f.Apply(nil, chs)
					if err != nil {
						t.Fatal(err)
					}
					thr := f.Threshold()
					if b%10 == 9 {
						out = f.Boundary(out)
						if want := recount(f.Graph(), p.Percentile); f.Threshold() != want {
							t.Fatalf("boundary: threshold %d, recounted %d", f.Threshold(), want)
						}
					} else if f.Threshold() != thr {
						t.Fatal("the threshold moved outside a boundary")
					}
					if _, err := tr.Apply(out); err != nil {
						t.Fatalf("seed %d batch %d: %v (changes %v -> %v)", seed, b, err, chs, out)
					}
					compare(t, fmt.Sprintf("seed %d batch %d (%v)", seed, b, chs), f, tr, &p, listed)
				}
			}
		})
	}
}

// recount is the nearest-rank threshold from a sort of the recounted
// neighbour counts (the definition of doc.go, without the histogram).
func recount(g *tracker.Graph, p float64) int {
	if p <= 0 {
		return -1
	}
	var ds []int
	for i := range g.Len() {
		d := 0
		if g.Has(uint32(i)) {
			g.Neighbours(uint32(i), func(uint32, float64) { d++ })
		}
		if d > 0 {
			ds = append(ds, d)
		}
	}
	if len(ds) == 0 {
		return -1
	}
	slices.Sort(ds)
	r := int(math.Ceil(p * float64(len(ds)) / 100))
	return ds[max(r, 1)-1]
}

// TestFilterListedLater: a node that Policy.Listed names when it first
// appears is a hub from its first change; changes touching it are dropped
// and counted.
func TestFilterListedLater(t *testing.T) {
	p := &Policy{Listed: func(u uint32) bool { return u == 3 }}
	f, err := NewFilter(p, tracker.NewGraph(2, []tracker.Edge{{U: 0, V: 1, W: 1}}))
	if err != nil {
		t.Fatal(err)
	}
	out, err := f.Apply(nil, []tracker.Change{{Op: tracker.OpAdd, U: 3, V: 0, W: 1}, {Op: tracker.OpAdd, U: 2, V: 1, W: 1}, {Op: tracker.OpAdd, U: 3, V: 2, W: 1}})
	if err != nil {
		t.Fatal(err)
	}
	if want := []tracker.Change{{Op: tracker.OpAdd, U: 2, V: 1, W: 1}}; !slices.Equal(out, want) {
		t.Fatalf("passed %v, want %v", out, want)
	}
	if c := f.Counts(); c.Hubs != 1 || c.Dropped != 2 || c.Edges != 2 {
		t.Fatalf("counts %+v: want 1 hub, 2 dropped, 2 edges", c)
	}
}

// TestFilterBadChange: a change the tracker would refuse is an error that
// names it, and nothing of the call reaches the full graph.
func TestFilterBadChange(t *testing.T) {
	f, err := NewFilter(&Policy{Degree: 2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	_, err = f.Apply(nil, []tracker.Change{{Op: tracker.OpAdd, U: 0, V: 1, W: 1}, {Op: tracker.OpAdd, U: 1, V: 2, W: math.NaN()}})
	if !errors.Is(err, tracker.ErrBadChange) || f.Graph().Edges() != 0 {
		t.Fatalf("NaN weight: %v, %d edges applied", err, f.Graph().Edges())
	}
	for _, c := range []tracker.Change{{Op: 9}, {Op: tracker.OpSet, W: -1}, {Op: tracker.OpAdd, U: math.MaxUint32, V: 0, W: 1}} {
		if _, err := f.Apply(nil, []tracker.Change{c}); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
}
