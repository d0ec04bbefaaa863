package timeline

import (
	"slices"
	"testing"
	"time"

	"shoal/events"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
	"shoal/tracker/gen"
	"shoal/tracker/hub"
)

// communityOf returns the id of the community holding v in s, 0 if none.
func communityOf(s *snapshot.Snapshot, v uint32) (uint64, *snapshot.Community) {
	for i := range s.Communities {
		if _, ok := slices.BinarySearch(s.Communities[i].Members, v); ok {
			return s.Communities[i].ID, &s.Communities[i]
		}
	}
	return 0, nil
}

// together reports whether the nodes are all in one community of s.
func together(s *snapshot.Snapshot, nodes ...uint32) bool {
	c, _ := communityOf(s, nodes[0])
	for _, v := range nodes {
		if d, _ := communityOf(s, v); d == 0 || d != c {
			return false
		}
	}
	return true
}

// streamSharedHub streams gen.SharedHub's edges, one add event each at
// time 0 in edge order (the hub's edges come among the others, so the
// hub crosses the threshold mid-stream), through a timeline with Check on
// and the given filter (nil: none; with one, batches applied
// asynchronously), and returns the snapshot at the end.
// The drift guard is on as in replay and the daemon (0.25): A and B come
// first, when the graph is too small for merging them to pay, so only a
// full pass after the graph grew can see that it does.
func streamSharedHub(t *testing.T, f *hub.Filter) (*snapshot.Snapshot, *Timeline) {
	t.Helper()
	sg, err := gen.SharedHub(gen.SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	tr, err := tracker.New(&tracker.Options{Seed: 1, DriftBound: 0.25})
	if err != nil {
		t.Fatal(err)
	}
	var last *snapshot.Snapshot
	// With a filter the batches go to the timeline's goroutine (Async, as
	// in the daemon): the filter stays with the owner.
	tl, err := New(Config{Graph: "hub", ApplyEvery: 7, Check: true, Hubs: f, Async: f != nil}, tr, nil, nil, NewState(),
		SinkFunc(func(s *snapshot.Snapshot, _ []events.Event, _ *events.History) error { last = s; return nil }))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := tl.Close(); err != nil {
			t.Error(err)
		}
	})
	if err := tl.At(0); err != nil {
		t.Fatal(err)
	}
	for _, e := range sg.Edges {
		if err := tl.Add([]tracker.Change{{Op: tracker.OpAdd, U: e.U, V: e.V, W: e.W}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := tl.End(); err != nil {
		t.Fatal(err)
	}
	return last, tl
}

// TestTwoGroupsOneHubStream: through the timeline, as in the static test
// of package hub (whose modularity check, against gonum's community.Q,
// shows that these two cliques sharing a hub merge at resolution 1): the
// tracker fed edge by edge puts A, B and the hub together without a
// policy, and keeps A and B apart with one (degree above 8), each
// community listing the hub; the hub is in no community, the counts say
// one hub and its 10 edges, and the hub's changes after it crossed the
// threshold were dropped. A restart rebuilt on the filter's Tracked graph
// (from the last snapshot and from scratch) leaves the hub out too.
func TestTwoGroupsOneHubStream(t *testing.T) {
	a := []uint32{0, 1, 2, 3, 4}
	b := []uint32{5, 6, 7, 8, 9}
	const h = 10
	s, _ := streamSharedHub(t, nil)
	if !together(s, append(slices.Concat(a, b), h)...) {
		t.Fatalf("without a policy A, B and the hub are not one community")
	}

	f, err := hub.NewFilter(&hub.Policy{Degree: 8}, nil)
	if err != nil {
		t.Fatal(err)
	}
	s, tl := streamSharedHub(t, f)
	if !together(s, a...) || !together(s, b...) || together(s, 0, 5) {
		t.Fatalf("with the policy A and B are not two communities")
	}
	if c, _ := communityOf(s, h); c != 0 {
		t.Fatalf("the hub is in community %d", c)
	}
	for _, v := range []uint32{0, 5} {
		if _, c := communityOf(s, v); !slices.Equal(c.Hubs, []uint32{h}) {
			t.Errorf("the community of %d lists hubs %v, want [%d]", v, c.Hubs, h)
		}
	}
	for i := range s.Communities {
		c := &s.Communities[i]
		if len(c.Hubs) > 0 && !slices.Contains(c.Members, 0) && !slices.Contains(c.Members, 5) {
			t.Errorf("community %d, which has no neighbour of the hub, lists hubs %v", c.ID, c.Hubs)
		}
	}
	// The hub's 10 edges: the 9th made it a hub (dropped, and a removal
	// of the hub emitted instead), the 10th touched a hub (dropped).
	st := tl.Stats()
	if st.Hubs.Hubs != 1 || st.Hubs.Edges != 10 || st.Hubs.Weight != 10 || st.Hubs.Dropped != 2 {
		t.Errorf("counts %+v: want 1 hub, 10 edges of weight 10, 2 changes dropped", st.Hubs)
	}
	if s.Edges != f.Graph().Edges()-10 {
		t.Errorf("snapshot edges %d, want the full graph's %d less the hub's 10", s.Edges, f.Graph().Edges())
	}

	// Restart: a new filter over the full graph (the store's), the tracker
	// rebuilt on its Tracked graph.
	full := tracker.NewGraph(f.Graph().Len(), f.Graph().EdgeList(nil))
	for _, method := range []string{RebuildSnapshot, RebuildStatic} {
		g := tracker.NewGraph(full.Len(), full.EdgeList(nil))
		f2, err := hub.NewFilter(&hub.Policy{Degree: 8}, g)
		if err != nil {
			t.Fatal(err)
		}
		tr, used, err := Rebuild(f2.Tracked(), &tracker.Options{Seed: 1}, s, tl.NextID(), method)
		if err != nil || used != method {
			t.Fatalf("rebuild %s: %q, %v", method, used, err)
		}
		if tr.Graph().Has(h) || tr.Community(h) != tracker.NoCommunity {
			t.Fatalf("rebuild %s: the hub is in the tracker", method)
		}
		if err := f2.Verify(tr.Graph()); err != nil {
			t.Fatalf("rebuild %s: %v", method, err)
		}
		if tr.Community(0) == tr.Community(5) || tr.Community(0) != tr.Community(4) || tr.Community(5) != tr.Community(9) {
			t.Fatalf("rebuild %s: A and B are not two communities", method)
		}
	}
}

// TestHubFallsBackThroughWindow: the hub's edges into B expire (a real
// ingest.Window, driven by the timeline's time boundaries) while those
// into A were renewed: its neighbour count falls from 10 to 5, so it stops
// being a hub at the boundary, its edges come back into the tracker (at
// the weight the window gives them), and the snapshot there lists no hub.
func TestHubFallsBackThroughWindow(t *testing.T) {
	sg, err := gen.SharedHub(gen.SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	const h = 10
	win := ingest.NewWindow(time.Hour)
	f, err := hub.NewFilter(&hub.Policy{Degree: 8}, nil)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := tracker.New(&tracker.Options{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	var snaps []*snapshot.Snapshot
	tl, err := New(Config{Graph: "window", Schedule: Schedule{Every: time.Hour}, Check: true, Hubs: f, Expire: win.AppendExpire}, tr, nil, nil, NewState(),
		SinkFunc(func(s *snapshot.Snapshot, _ []events.Event, _ *events.History) error {
			snaps = append(snaps, s)
			return nil
		}))
	if err != nil {
		t.Fatal(err)
	}
	add := func(ts int64, keep func(e tracker.Edge) bool) {
		if err := tl.At(ts); err != nil {
			t.Fatal(err)
		}
		var chs []tracker.Change
		for _, e := range sg.Edges {
			if keep(e) {
				chs = win.AppendChanges(chs[:0], ingest.OpAdd, ts, e.U, e.V, 1, true)
				if err := tl.Add(chs); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	all := func(tracker.Edge) bool { return true }
	notHubB := func(e tracker.Edge) bool { return !(e.V == h && e.U >= 5) }
	minute := time.Minute.Milliseconds()
	add(0, all)
	add(30*minute, notHubB)
	if _, err := tl.Snapshot(40 * minute); err != nil {
		t.Fatal(err)
	}
	add(70*minute, func(tracker.Edge) bool { return false }) // passes the 1h boundary
	if err := tl.End(); err != nil {
		t.Fatal(err)
	}
	if len(snaps) < 2 {
		t.Fatalf("%d snapshots, want the one asked at 40m and the one at 1h", len(snaps))
	}
	s1, s2 := snaps[0], snaps[1]
	if _, c := communityOf(s1, 0); c == nil || !slices.Equal(c.Hubs, []uint32{h}) {
		t.Fatalf("at 40m the community of node 0 does not list the hub")
	}
	if s2.Time != time.Hour.Milliseconds() {
		t.Fatalf("second snapshot at %d, want the 1h boundary", s2.Time)
	}
	if f.IsHub(h) {
		t.Fatal("the hub is still a hub with 5 neighbours")
	}
	for i := range s2.Communities {
		if s2.Communities[i].Hubs != nil {
			t.Fatalf("at 1h community %d lists hubs %v", s2.Communities[i].ID, s2.Communities[i].Hubs)
		}
	}
	if c, _ := communityOf(s2, h); c == 0 {
		t.Fatal("at 1h the former hub is in no community")
	}
	// Its edges to A came back at the window's weight: the increment of
	// 30m (the one of 0 expired at 1h).
	var w float64
	tl.Read(func(tr *tracker.Tracker) { w = tr.Graph().Weight(0, h) })
	if w != 1 {
		t.Fatalf("edge 0-hub in the tracker: %v, want 1", w)
	}
	if st := tl.Stats(); st.Hubs.Hubs != 0 || st.Hubs.Edges != 0 {
		t.Fatalf("counts at 1h %+v, want no hub", st.Hubs)
	}
}
