package tracker_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// ringOfCliques is the graph of Fortunato and Barthelemy 2007 (PNAS 104,
// 36, Fig. 1): k cliques of five nodes, clique i on nodes 5i..5i+4, joined
// in a ring by one edge from node 5i+4 to node 5(i+1) mod k.
func ringOfCliques(k int) []tracker.Edge {
	var es []tracker.Edge
	for c := 0; c < k; c++ {
		b := uint32(5 * c)
		for i := uint32(0); i < 5; i++ {
			for j := i + 1; j < 5; j++ {
				es = append(es, tracker.Edge{U: b + i, V: b + j, W: 1})
			}
		}
		es = append(es, tracker.Edge{U: b + 4, V: uint32(5 * ((c + 1) % k)), W: 1})
	}
	return es
}

// cliquesKept reports whether every clique of the ring (nodes below 5k)
// lies inside one community that holds no node of another clique, and
// how many communities hold two cliques or more.
func cliquesKept(m []uint64, k int) (kept bool, merged int) {
	owner := map[uint64]int{}
	kept = true
	counted := map[uint64]bool{}
	for c := 0; c < k; c++ {
		id := m[5*c]
		for i := 1; i < 5; i++ {
			if m[5*c+i] != id {
				return false, 0 // a clique cut in two
			}
		}
		if o, ok := owner[id]; ok && o != c {
			kept = false
			if !counted[id] {
				counted[id] = true
				merged++
			}
		}
		owner[id] = c
	}
	return kept, merged
}

// TestRingOfCliques: the resolution limit of modularity (Fortunato and
// Barthelemy 2007) and its absence under CPM (Traag, Van Dooren and
// Nesterov 2011). On a ring of 30 five-node cliques, L = 330 edges:
//
//	cliques apart: Q = 30 (10/330 - (22/660)^2) = 0.875758
//	pairs joined:  Q = 15 (21/330 - (44/660)^2) = 0.887879
//
// (the paper's formula Q = sum_s [l_s/L - (d_s/2L)^2], by hand), so
// modularity at gamma 1 joins neighbouring cliques. Under CPM, joining two
// neighbouring cliques changes H by 1 - 25 gamma (one edge gained, 25 pairs
// charged), and any resolution between that link density of 1/25 and the
// clique density 1 keeps every clique apart at the optimum; below 1/25
// pairs join. The
// same must hold with the ring embedded in 10^5 other edges, each clique
// tied to them by one edge.
func TestRingOfCliques(t *testing.T) {
	const k = 30
	ring := ringOfCliques(k)
	g := tracker.NewGraph(5*k, ring)
	apart := make([]uint64, 5*k)
	pairs := make([]uint64, 5*k)
	for i := range apart {
		apart[i] = uint64(i / 5)
		pairs[i] = uint64(i / 10)
	}
	if q := tracker.Modularity(g, apart, 1); math.Abs(q-0.875758) > 1e-6 {
		t.Errorf("Q of the cliques apart %.6f, by hand 0.875758", q)
	}
	if q := tracker.Modularity(g, pairs, 1); math.Abs(q-0.887879) > 1e-6 {
		t.Errorf("Q of the cliques in pairs %.6f, by hand 0.887879", q)
	}
	p := tracker.Detect(g, &tracker.Options{})
	if kept, merged := cliquesKept(p.Membership, k); kept || merged == 0 || p.Modularity <= 0.875758 {
		t.Errorf("modularity: cliques kept apart %v, %d communities of several cliques, Q %.6f (want merged, Q above the 0.875758 of the cliques apart)", kept, merged, p.Modularity)
	}

	// The embedding: 10^5 edges among 20000 other nodes, drawn uniformly,
	// and one edge from node 5c+2 of every clique to one of them.
	rng := rand.New(rand.NewPCG(3, 4))
	big := append([]tracker.Edge(nil), ring...)
	const others = 20000
	for len(big) < len(ring)+100000 {
		u, v := 5*k+rng.IntN(others), 5*k+rng.IntN(others)
		if u != v {
			big = append(big, tracker.Edge{U: uint32(u), V: uint32(v), W: 1})
		}
	}
	for c := 0; c < k; c++ {
		big = append(big, tracker.Edge{U: uint32(5*c + 2), V: uint32(5*k + rng.IntN(others)), W: 1})
	}
	gb := tracker.NewGraph(5*k+others, big)
	pb := tracker.Detect(gb, &tracker.Options{})
	if kept, merged := cliquesKept(pb.Membership, k); kept || merged == 0 {
		t.Errorf("modularity in the big graph: cliques kept apart %v (%d merged communities); the resolution limit should join them", kept, merged)
	}
	// From 0.05: at 0.045 the optimiser once joined two cliques in the
	// embedded graph, a local optimum 0.125 below the clique-apart H.
	for _, gamma := range []float64{0.05, 0.1, 0.3, 0.6, 0.95} {
		for name, gr := range map[string]*tracker.Graph{"ring": g, "embedded": gb} {
			p := tracker.Detect(gr, &tracker.Options{Objective: tracker.ObjectiveCPM, Resolution: gamma})
			if kept, merged := cliquesKept(p.Membership, k); !kept {
				t.Errorf("cpm %g, %s: a clique is cut or joined to another (%d communities of several cliques)", gamma, name, merged)
			}
		}
	}
	p = tracker.Detect(g, &tracker.Options{Objective: tracker.ObjectiveCPM, Resolution: 0.03})
	if kept, _ := cliquesKept(p.Membership, k); kept {
		t.Errorf("cpm 0.03 (below 1/25): cliques kept apart; joining neighbours gains 1 - 25 gamma > 0")
	}
}

// smallGroups is an invented graph of many small planted groups: LFR
// (Lancichinetti, Fortunato and Radicchi 2008) with group sizes 8 to 30,
// mean degree 8, largest degree 20 and a quarter of each node's links
// outside its group; n = 25000 gives about 10^5 edges.
func smallGroups(t testing.TB, n int) *gen.Graph {
	t.Helper()
	g, err := gen.LFR(gen.LFROptions{N: n, AvgDegree: 8, MaxDegree: 20, MinCommunity: 8, MaxCommunity: 30, Mu: 0.25, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// recovered counts the planted groups that one community matches with
// Jaccard similarity >= 0.8 (the recovery rule of the README).
func recovered(m []uint64, g *gen.Graph) int {
	groups := make([][]uint32, g.Communities())
	for i, c := range g.Membership {
		groups[c] = append(groups[c], uint32(i))
	}
	size := map[uint64]int{}
	for _, c := range m {
		size[c]++
	}
	n := 0
	for _, grp := range groups {
		cnt := map[uint64]int{}
		for _, u := range grp {
			cnt[m[u]]++
		}
		for c, x := range cnt {
			if float64(x)/float64(len(grp)+size[c]-x) >= 0.8 {
				n++
				break
			}
		}
	}
	return n
}

// TestSmallGroupsCPM: on invented graphs of many small planted groups at
// about 10^5 and 10^6 edges, static CPM at the default resolution recovers
// at least 99% of the groups, while modularity at resolution 1 recovers
// almost none (the resolution limit); the incremental tracker, fed the same
// graph in 100 batches and then 100 batches of random churn of |E|/1000
// changes each, stays within 1% of a static CPM run on the final graph in
// recovery and within 0.5% of its H.
func TestSmallGroupsCPM(t *testing.T) {
	sizes := []int{25000, 250000}
	if testing.Short() {
		sizes = sizes[:1]
	}
	for _, n := range sizes {
		g := smallGroups(t, n)
		k := g.Communities()
		o := &tracker.Options{Objective: tracker.ObjectiveCPM, DriftBound: 0.25}
		p := tracker.Detect(tracker.NewGraph(g.N, g.Edges), o)
		if r := recovered(p.Membership, g); float64(r) < 0.99*float64(k) {
			t.Errorf("n %d: static CPM recovers %d of %d groups, want >= 99%%", n, r, k)
		}
		pm := tracker.Detect(tracker.NewGraph(g.N, g.Edges), &tracker.Options{})
		if r := recovered(pm.Membership, g); float64(r) > 0.05*float64(k) {
			t.Errorf("n %d: modularity recovers %d of %d groups; the resolution limit should merge them", n, r, k)
		}

		tr, err := tracker.New(o)
		if err != nil {
			t.Fatal(err)
		}
		edges := append([]tracker.Edge(nil), g.Edges...)
		rng := rand.New(rand.NewPCG(5, 6))
		rng.Shuffle(len(edges), func(i, j int) { edges[i], edges[j] = edges[j], edges[i] })
		bs := (len(edges) + 99) / 100
		for b := 0; b < len(edges); b += bs {
			var chs []tracker.Change
			for _, e := range edges[b:min(b+bs, len(edges))] {
				chs = append(chs, tracker.Change{Op: tracker.OpAdd, U: e.U, V: e.V, W: 1})
			}
			if _, err := tr.Apply(chs); err != nil {
				t.Fatal(err)
			}
		}
		churn := gen.NewChurn(g, 7)
		for b := 0; b < 100; b++ {
			if _, err := tr.Apply(churn.Batch(len(g.Edges) / 1000)); err != nil {
				t.Fatal(err)
			}
		}
		if err := tr.Check(); err != nil {
			t.Fatal(err)
		}
		ps := tracker.Detect(tr.Graph(), o)
		ri, rs := recovered(tr.Membership(nil), g), recovered(ps.Membership, g)
		hi, hs := tr.Quality(), ps.Quality
		t.Logf("n %d, %d groups: incremental recovers %d, H %.1f; static %d, H %.1f", n, k, ri, hi, rs, hs)
		if float64(ri) < float64(rs)-0.01*float64(k) {
			t.Errorf("n %d: incremental recovers %d, static %d: more than 1%% of %d groups apart", n, ri, rs, k)
		}
		if hi < hs-0.005*math.Abs(hs) {
			t.Errorf("n %d: incremental H %.1f, static %.1f: more than 0.5%% below", n, hi, hs)
		}
	}
}
