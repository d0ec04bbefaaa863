package tracker

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// TestRewirePreservesDegrees: a double-edge swap keeps every node's number
// of edges (Maslov and Sneppen 2002), creates no self-loop or parallel
// edge, keeps the edge count, and actually changes the edge set.
func TestRewirePreservesDegrees(t *testing.T) {
	n, e := readTSV(t, "football.tsv", false)
	g := NewGraph(n, e)
	r := Rewire(g, 1, 10*g.Edges())
	if r.Edges() != g.Edges() {
		t.Fatalf("%d edges after rewiring, had %d", r.Edges(), g.Edges())
	}
	for i := 0; i < n; i++ {
		if r.deg[i] != g.deg[i] || r.Degree(uint32(i)) != g.Degree(uint32(i)) {
			t.Fatalf("node %d: degree %d -> %d", i, g.deg[i], r.deg[i])
		}
		if r.SelfLoop(uint32(i)) != 0 {
			t.Fatalf("self-loop at %d", i)
		}
	}
	same := 0
	for _, x := range r.EdgeList(nil) {
		if g.Weight(x.U, x.V) > 0 {
			same++
		}
		if x.W != 1 {
			t.Fatalf("weight %v: parallel edges merged", x.W)
		}
	}
	if same > g.Edges()/2 {
		t.Fatalf("%d of %d edges unchanged: barely rewired", same, g.Edges())
	}
	if a, b := Rewire(g, 5, 1000).EdgeList(nil), Rewire(g, 5, 1000).EdgeList(nil); !slices.Equal(a, b) {
		t.Fatal("same seed, different rewiring")
	}
}

// TestNullSignificance: the football graph's partition is far above what
// the optimiser finds on rewired graphs with the same degrees (its
// conferences are real structure: Girvan and Newman 2002), while a random
// graph's partition is not (z small).
func TestNullSignificance(t *testing.T) {
	n, e := readTSV(t, "football.tsv", false)
	g := NewGraph(n, e)
	p := Detect(g, &Options{Seed: 1})
	s := Null(g, &Options{Seed: 1}, p.Modularity, 8)
	t.Logf("football: Q %.4f, null %.4f +- %.4f, z %.1f", p.Modularity, s.NullMean, s.NullStd, s.Z)
	if s.Z < 10 || s.NullMean > p.Modularity-0.2 {
		t.Fatalf("football not significant: %+v", s)
	}
	rng := rand.New(rand.NewPCG(2, 2))
	rg := randomGraph(rng, 300, 1500, false)
	rp := Detect(rg, &Options{Seed: 1})
	rs := Null(rg, &Options{Seed: 1}, rp.Modularity, 8)
	t.Logf("random: Q %.4f, null %.4f +- %.4f, z %.1f", rp.Modularity, rs.NullMean, rs.NullStd, rs.Z)
	if rs.Z > 4 {
		t.Fatalf("random graph looks significant: %+v", rs)
	}
}
