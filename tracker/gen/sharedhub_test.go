package gen

import (
	"errors"
	"testing"
)

// TestSharedHub: the layout SharedHub documents: two 5-cliques (10 edges
// each), the hub's 10 edges, 20 6-cliques (15 each) and the 20 ring edges
// make m = 350; the hub has 10 neighbours and every other node at most 6;
// the edges are sorted, U < V, without duplicates, as Graph requires; bad
// options are refused.
func TestSharedHub(t *testing.T) {
	g, err := SharedHub(SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if g.N != 131 || len(g.Edges) != 350 || g.Communities() != 23 {
		t.Fatalf("%d nodes, %d edges, %d communities; want 131, 350, 23", g.N, len(g.Edges), g.Communities())
	}
	deg := make([]int, g.N)
	for i, e := range g.Edges {
		if e.U >= e.V || (i > 0 && (g.Edges[i-1].U > e.U || (g.Edges[i-1].U == e.U && g.Edges[i-1].V >= e.V))) {
			t.Fatalf("edge %d (%d-%d) out of order or a duplicate", i, e.U, e.V)
		}
		deg[e.U]++
		deg[e.V]++
	}
	for v, d := range deg {
		if (v == 10 && d != 10) || (v != 10 && d > 6) {
			t.Errorf("node %d has %d neighbours", v, d)
		}
	}
	for _, bad := range []SharedHubOptions{{GroupSize: 1}, {Background: 2}, {BackgroundSize: -1}} {
		if _, err := SharedHub(bad); !errors.Is(err, ErrInvalidOptions) {
			t.Errorf("%+v: %v", bad, err)
		}
	}
}
