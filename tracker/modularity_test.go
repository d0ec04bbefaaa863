package tracker

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/community"
	"gonum.org/v1/gonum/graph/simple"
)

// loopGraph is a gonum weighted undirected graph that also carries
// self-loops: gonum's simple graphs refuse self edges, and community.Q
// reads the diagonal through Weight(x, x). The loop weight is handed over
// doubled (A_ii = 2w), Newman's convention, which doc.go (Objective) fixes.
type loopGraph struct {
	*simple.WeightedUndirectedGraph
	self map[int64]float64
}

func (g loopGraph) Weight(x, y int64) (float64, bool) {
	if x == y {
		return 2 * g.self[x], true
	}
	return g.WeightedUndirectedGraph.Weight(x, y)
}

// gonumQ scores membership on g with gonum's community.Q, the external
// reference for modularity (gonum.org/v1/gonum v0.17.0).
func gonumQ(g *Graph, membership []uint64, gamma float64) float64 {
	sg := simple.NewWeightedUndirectedGraph(0, 0)
	lg := loopGraph{WeightedUndirectedGraph: sg, self: map[int64]float64{}}
	for i := 0; i < g.Len(); i++ {
		if g.Has(uint32(i)) {
			sg.AddNode(simple.Node(i))
		}
	}
	for _, e := range g.EdgeList(nil) {
		if e.U == e.V {
			lg.self[int64(e.U)] = e.W
			continue
		}
		sg.SetWeightedEdge(sg.NewWeightedEdge(simple.Node(e.U), simple.Node(e.V), e.W))
	}
	groups := map[uint64][]graph.Node{}
	var order []uint64
	for i, c := range membership {
		if !g.Has(uint32(i)) || c == NoCommunity {
			continue
		}
		if _, ok := groups[c]; !ok {
			order = append(order, c)
		}
		groups[c] = append(groups[c], simple.Node(i))
	}
	comms := make([][]graph.Node, 0, len(order))
	for _, c := range order {
		comms = append(comms, groups[c])
	}
	return community.Q(lg, comms, gamma)
}

func randomPartition(rng *rand.Rand, n, k int) []uint64 {
	p := make([]uint64, n)
	for i := range p {
		p[i] = uint64(rng.IntN(k))
	}
	return p
}

// TestModularityMatchesGonum checks Modularity against gonum's community.Q
// (the outside reference for modularity) within 1e-9 on the open
// datasets of testdata/SOURCES.md, for gamma in {0.5, 1, 2}, on the label
// partitions, random partitions and our own result.
func TestModularityMatchesGonum(t *testing.T) {
	sets := []struct {
		file, labels string
		weighted     bool
	}{
		{"karate.tsv", "karate_labels.tsv", false},
		{"karate_weighted.tsv", "karate_labels.tsv", true},
		{"karate.tsv", "karate_optimal_partition.tsv", false},
		{"football.tsv", "football_labels.tsv", false},
		{"lesmis.tsv", "", false},
		{"lesmis.tsv", "", true},
		{"celegans_metabolic.tsv", "", false}, // 15 self-loops (SOURCES.md)
		{"blondel2008_fig1.tsv", "", false},
		{"gn_benchmark_mu030_edges.tsv", "gn_benchmark_mu030_communities.tsv", false},
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for _, s := range sets {
		n, e := readTSV(t, s.file, s.weighted)
		g := NewGraph(n, e)
		parts := [][]uint64{randomPartition(rng, n, 2), randomPartition(rng, n, 7), Detect(g, &Options{}).Membership}
		if s.labels != "" {
			parts = append(parts, readLabels(t, s.labels, n))
		}
		for _, gamma := range []float64{0.5, 1, 2} {
			for pi, p := range parts {
				got, want := Modularity(g, p, gamma), gonumQ(g, p, gamma)
				if math.Abs(got-want) > 1e-9 {
					t.Errorf("%s weighted=%v gamma=%v partition %d: Q=%.12f, gonum %.12f", s.file, s.weighted, gamma, pi, got, want)
				}
			}
		}
	}
}

// TestModularityPublishedValues checks the "computed here" values of
// testdata/SOURCES.md (sections 1 and 2), which were computed over the same
// files outside this project.
func TestModularityPublishedValues(t *testing.T) {
	cases := []struct {
		file, labels string
		weighted     bool
		want         float64
	}{
		{"karate.tsv", "karate_labels.tsv", false, 0.358235},
		{"karate_weighted.tsv", "karate_labels.tsv", true, 0.391438},
		{"karate.tsv", "karate_optimal_partition.tsv", false, 0.419790},
		{"karate_weighted.tsv", "karate_optimal_partition.tsv", true, 0.444904},
		{"football.tsv", "football_labels.tsv", false, 0.553973},
		{"gn_benchmark_mu010_edges.tsv", "gn_benchmark_mu010_communities.tsv", false, 0.6523},
		{"gn_benchmark_mu050_edges.tsv", "gn_benchmark_mu050_communities.tsv", false, 0.2500},
	}
	for _, c := range cases {
		n, e := readTSV(t, c.file, c.weighted)
		g := NewGraph(n, e)
		got := Modularity(g, readLabels(t, c.labels, n), 1)
		if math.Abs(got-c.want) > 5e-5 {
			t.Errorf("%s with %s: Q=%.6f, SOURCES.md gives %.6f", c.file, c.labels, got, c.want)
		}
	}
}

// randomGraph returns a random weighted multigraph with self-loops.
func randomGraph(rng *rand.Rand, n, m int, loops bool) *Graph {
	var e []Edge
	for len(e) < m {
		u, v := uint32(rng.IntN(n)), uint32(rng.IntN(n))
		if u == v && !loops {
			continue
		}
		e = append(e, Edge{U: u, V: v, W: 0.1 + 10*rng.Float64()})
	}
	return NewGraph(n, e)
}

// TestModularityRandomGraphs compares with gonum's community.Q on 150
// random weighted graphs, with parallel edges and self-loops, for several
// partitions and gamma in {0.5, 1, 2}.
func TestModularityRandomGraphs(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for trial := 0; trial < 150; trial++ {
		n := 2 + rng.IntN(60)
		g := randomGraph(rng, n, 1+rng.IntN(4*n), trial%2 == 0)
		parts := [][]uint64{randomPartition(rng, n, 1), randomPartition(rng, n, 1+rng.IntN(n)), Detect(g, &Options{Seed: uint64(trial)}).Membership}
		for _, gamma := range []float64{0.5, 1, 2} {
			for pi, p := range parts {
				got, want := Modularity(g, p, gamma), gonumQ(g, p, gamma)
				if math.Abs(got-want) > 1e-9 {
					t.Fatalf("trial %d gamma %v partition %d: Q=%.12f, gonum %.12f", trial, gamma, pi, got, want)
				}
			}
			// The optimiser's own bookkeeping gives the same Q.
			p := DetectFrom(g, &Options{Resolution: gamma, Seed: 3}, nil)
			if want := gonumQ(g, p.Membership, gamma); math.Abs(p.Modularity-want) > 1e-9 {
				t.Fatalf("trial %d gamma %v: partition reports Q=%.12f, gonum %.12f", trial, gamma, p.Modularity, want)
			}
		}
	}
}

// TestSelfLoopDegree pins the self-loop convention: a loop of weight w adds
// 2w to the degree (Newman 2010, Networks, section 6.2; doc.go, Objective).
func TestSelfLoopDegree(t *testing.T) {
	g := NewGraph(2, []Edge{{0, 0, 3}, {0, 1, 1}})
	if k := g.Degree(0); k != 7 {
		t.Fatalf("degree of node with a loop of 3 and an edge of 1: %v, want 7", k)
	}
	if m := g.TotalWeight(); m != 4 {
		t.Fatalf("total weight %v, want 4", m)
	}
	// One community: Q = in/2m - (tot/2m)^2 = 8/8 - 1 = 0 (hand calculation).
	if q := Modularity(g, []uint64{1, 1}, 1); math.Abs(q) > 1e-15 {
		t.Fatalf("Q of the whole graph %v, want 0", q)
	}
	// Singletons: in = {6, 0}, tot = {7, 1}: Q = 6/8 - (49+1)/64 = -0.03125.
	if q := Modularity(g, []uint64{1, 2}, 1); math.Abs(q-(-0.03125)) > 1e-15 {
		t.Fatalf("Q of singletons %v, want -0.03125", q)
	}
}
