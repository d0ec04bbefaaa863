package tracker

import (
	"testing"
)

// clique appends the edges of a clique on nodes, with weight w.
func clique(e []Edge, nodes []uint32, w float64) []Edge {
	for i, u := range nodes {
		for _, v := range nodes[i+1:] {
			e = append(e, Edge{U: u, V: v, W: w})
		}
	}
	return e
}

func seq(from, n int) []uint32 {
	out := make([]uint32, n)
	for i := range out {
		out[i] = uint32(from + i)
	}
	return out
}

// background is 40 disjoint 5-cliques on nodes 100..299, so that m is
// large enough for two small groups to be worth merging.
func background(e []Edge) []Edge {
	for c := 0; c < 40; c++ {
		e = clique(e, seq(100+5*c, 5), 1)
	}
	return e
}

// TestMergeKeepsHeavierID is a worked example of the merge rule (doc.go,
// "Stable ids"): A = K5 of weight 3 (nodes 0..4), B = K5 of weight 1
// (5..9), in a background that makes 2m = 886. One edge (0, 5) of weight
// 3: by hand, node 5 would gain 3 - 7*63/886 = 2.50 in A but has
// 4 - 7*16/886 = 3.87 in B, node 0 likewise stays, but the two together
// gain w(A,B) - tot_A tot_B / 2m = 3 - 63*23/886 = 1.36 > 0. The merged
// community keeps A's id, A bringing the most weight.
func TestMergeKeepsHeavierID(t *testing.T) {
	e := clique(nil, seq(0, 5), 3)
	e = clique(e, seq(5, 5), 1)
	e = background(e)
	tr, err := NewFrom(NewGraph(300, e), &Options{})
	if err != nil {
		t.Fatal(err)
	}
	idA, idB := tr.Community(0), tr.Community(5)
	if idA == idB {
		t.Fatal("A and B start together")
	}
	r, err := tr.Apply([]Change{{Op: OpAdd, U: 0, V: 5, W: 3}})
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	for u := uint32(0); u < 10; u++ {
		if tr.Community(u) != idA {
			t.Fatalf("node %d in %d after the merge, want A's id %d (B was %d); %+v", u, tr.Community(u), idA, idB, r)
		}
	}
	if r.Merges != 1 || r.Moves != 0 {
		t.Fatalf("want exactly one merge and no move: %+v", r)
	}
}

// TestSplitKeepsHeavierID: one community made of a K6 (nodes 0..5) and a
// K3 (6..8) joined by the bridge (5, 6), given as a partition. Deleting
// the bridge disconnects it: the K6 part, heavier, keeps the id; the K3
// gets a fresh one, never used before.
func TestSplitKeepsHeavierID(t *testing.T) {
	e := clique(nil, seq(0, 6), 1)
	e = clique(e, seq(6, 3), 1)
	e = append(e, Edge{U: 5, V: 6, W: 1})
	e = background(e)
	g := NewGraph(300, e)
	m := make([]uint64, 300)
	for i := range m {
		m[i] = uint64(1000 + i) // singletons, ids above the test's
	}
	for u := 0; u < 9; u++ {
		m[u] = 7
	}
	tr, err := NewWithPartition(g, &Options{}, m, 2000)
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	r, err := tr.Apply([]Change{{Op: OpDelete, U: 5, V: 6}})
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	if r.Splits != 1 {
		t.Fatalf("want one split: %+v", r)
	}
	for u := uint32(0); u < 6; u++ {
		if tr.Community(u) != 7 {
			t.Fatalf("K6 node %d has id %d, want 7", u, tr.Community(u))
		}
	}
	k3 := tr.Community(6)
	if k3 < 2000 || tr.Community(7) != k3 || tr.Community(8) != k3 {
		t.Fatalf("K3 ids %d %d %d, want one fresh id >= 2000", k3, tr.Community(7), tr.Community(8))
	}
}

// TestNewWithPartitionSplits: a given partition with a disconnected
// community is split on load, the heavier part keeping the id.
func TestNewWithPartitionSplits(t *testing.T) {
	e := clique(nil, seq(0, 4), 1)
	e = clique(e, seq(4, 3), 1)
	m := []uint64{3, 3, 3, 3, 3, 3, 3}
	tr, err := NewWithPartition(NewGraph(7, e), &Options{}, m, 10)
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	if tr.Community(0) != 3 || tr.Community(4) == 3 || tr.Community(4) < 10 {
		t.Fatalf("ids %v", tr.Membership(nil))
	}
}

// TestDriftGuard: FullEvery runs the full pass on schedule, DriftBound when
// the changed weight passes the bound; a full pass keeps the ids of
// communities that continue.
func TestDriftGuard(t *testing.T) {
	e := background(nil)
	tr, err := NewFrom(NewGraph(300, e), &Options{FullEvery: 3})
	if err != nil {
		t.Fatal(err)
	}
	before := tr.Membership(nil)
	for b := 1; b <= 6; b++ {
		r, err := tr.Apply([]Change{{Op: OpAdd, U: 100, V: 101, W: 0.01}})
		if err != nil {
			t.Fatal(err)
		}
		if r.Full != (b%3 == 0) {
			t.Fatalf("batch %d: full pass %v", b, r.Full)
		}
	}
	after := tr.Membership(nil)
	for i := 100; i < 300; i++ {
		if before[i] != after[i] {
			t.Fatalf("node %d changed id %d -> %d across full passes", i, before[i], after[i])
		}
	}
	tr2, _ := NewFrom(NewGraph(300, e), &Options{DriftBound: 0.05})
	// m = 400; 0.05 m = 20: a change of 8 stays under, the next 16 goes over.
	if r, _ := tr2.Apply([]Change{{Op: OpAdd, U: 100, V: 101, W: 8}}); r.Full {
		t.Fatal("full pass under the bound")
	}
	if r, _ := tr2.Apply([]Change{{Op: OpAdd, U: 102, V: 103, W: 16}}); !r.Full {
		t.Fatal("no full pass over the bound")
	}
}

// TestResplitAfterLoss: a community that loses most of its internal weight
// can stay a local optimum for single-node moves although it is no longer a
// good community (each member is still better inside than alone). Worked
// example: two 6-cliques A (0..5) and B (6..11) fully joined form one
// community K12; deleting all but one of the 36 edges between them leaves
// two cliques and a bridge. By hand, with 2m = 2 (15+15+1) + 400*2 = 862
// (the background adds 400 edges), splitting gains
// [30 - 31^2/862] + [30 - 31^2/862] - [62 - 62^2/862] = 2.23 > 0 (times
// 1/2m), which the resplit pass finds; the heavier side keeps the id.
func TestResplitAfterLoss(t *testing.T) {
	a, b := seq(0, 6), seq(6, 6)
	e := clique(nil, a, 1)
	e = clique(e, b, 1)
	for _, u := range a {
		for _, v := range b {
			e = append(e, Edge{U: u, V: v, W: 1})
		}
	}
	e = background(e)
	tr, err := NewFrom(NewGraph(300, e), &Options{})
	if err != nil {
		t.Fatal(err)
	}
	id := tr.Community(0)
	if tr.Community(6) != id {
		t.Fatal("K12 does not start as one community")
	}
	var batch []Change
	for _, u := range a {
		for _, v := range b {
			if u != 0 || v != 6 {
				batch = append(batch, Change{Op: OpDelete, U: u, V: v})
			}
		}
	}
	r, err := tr.Apply(batch)
	if err != nil {
		t.Fatal(err)
	}
	if err := tr.Check(); err != nil {
		t.Fatal(err)
	}
	if tr.Community(0) == tr.Community(6) {
		t.Fatalf("A and B still together after losing 35 of 36 joining edges: %+v", r)
	}
	if tr.Community(0) != id && tr.Community(6) != id {
		t.Fatal("neither part kept the id")
	}
	static := Detect(tr.Graph(), &Options{})
	if tr.Modularity() < static.Modularity-1e-9 {
		t.Fatalf("Q %.6f below a static run's %.6f", tr.Modularity(), static.Modularity)
	}
}
