package timeline

import (
	"testing"

	"shoal/snapshot"
	"shoal/tracker"
)

// TestRebuild: a static rebuild finds the two triangles; a rebuild from a
// snapshot that put both triangles in one community (joined by an edge
// removed since) splits it, places the node added since with its
// neighbour, and leaves the absent node out.
func TestRebuild(t *testing.T) {
	edges := []tracker.Edge{{U: 0, V: 1, W: 1}, {U: 1, V: 2, W: 1}, {U: 0, V: 2, W: 1}, {U: 3, V: 4, W: 1}, {U: 4, V: 5, W: 1}, {U: 3, V: 5, W: 1}, {U: 5, V: 6, W: 1}}
	graph := func() *tracker.Graph {
		g := tracker.NewGraph(8, edges)
		g.RemoveNode(7, nil)
		return g
	}
	static, method, err := Rebuild(graph(), &tracker.Options{}, nil, 0, RebuildAuto)
	if err != nil || method != RebuildStatic {
		t.Fatalf("auto without a snapshot: %q, %v", method, err)
	}
	if static.NumCommunities() != 2 || static.Community(0) == static.Community(3) {
		t.Fatalf("static: %d communities", static.NumCommunities())
	}
	prev := &snapshot.Snapshot{Communities: []snapshot.Community{{ID: 7, Size: 6, Members: []uint32{0, 1, 2, 3, 4, 5}}}}
	warm, method, err := Rebuild(graph(), &tracker.Options{}, prev, 20, RebuildAuto)
	if err != nil || method != RebuildSnapshot {
		t.Fatalf("auto with a snapshot: %q, %v", method, err)
	}
	if err := warm.Check(); err != nil {
		t.Fatal(err)
	}
	if warm.Community(0) == warm.Community(3) || warm.Community(0) != warm.Community(1) || warm.Community(3) != warm.Community(4) {
		t.Fatalf("the disconnected community was not split: %d %d %d %d", warm.Community(0), warm.Community(1), warm.Community(3), warm.Community(4))
	}
	// Node 6, added since the snapshot, hangs on node 5 alone: local moving
	// (Revisit) puts it with 5, as modularity wants for a pendant node
	// (joining adds 1/m - k_6 tot_C/2m^2 > 0 here).
	if c := warm.Community(6); c != warm.Community(5) {
		t.Fatalf("new node 6 is in %d, not with its only neighbour 5 (%d)", c, warm.Community(5))
	}
	if warm.Community(7) != tracker.NoCommunity {
		t.Fatal("absent node 7 has a community")
	}
	if _, method, _ := Rebuild(graph(), &tracker.Options{}, prev, 20, RebuildStatic); method != RebuildStatic {
		t.Fatalf("static asked, %q used", method)
	}
	if _, _, err := Rebuild(graph(), &tracker.Options{}, prev, 20, "fast"); err == nil {
		t.Fatal("an unknown method was accepted")
	}
}
