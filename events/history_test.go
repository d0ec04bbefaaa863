package events

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/cockroachdb/pebble/v2"

	"shoal/snapshot"
)

const hour = int64(time.Hour / time.Millisecond)

// hsnap is snap with every part a clique (so Internal = size*(size-1)/2
// and Degree = 2*Internal) and the wall-clock time equal to the
// watermark, id hours.
func hsnap(t testing.TB, id uint64, parts map[uint64][]int) *snapshot.Snapshot {
	t.Helper()
	var edges [][2]int
	for _, c := range slices.Sorted(func(yield func(uint64) bool) {
		for c := range parts {
			if !yield(c) {
				return
			}
		}
	}) {
		edges = append(edges, clique(parts[c]...)...)
	}
	s := snap(t, id, edges, parts)
	s.Time = s.Watermark
	return s
}

// scenario: communities 1 (nodes 0-4), 2 (5-9), 3 (10-19) and 4 (20-24) at
// snapshot 1; 5 (30-34) is born at 2; 1 and 2 merge into 1 at 3; 3 splits
// into 3 (10-14) and 6 (15-19) at 4; 4 dies at 5 (its nodes leave); 6
// merges into 5 at 6.
func scenario(t testing.TB) []*snapshot.Snapshot {
	p1 := map[uint64][]int{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 19), 4: span_(20, 24)}
	p2 := map[uint64][]int{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 19), 4: span_(20, 24), 5: span_(30, 34)}
	p3 := map[uint64][]int{1: span_(0, 9), 3: span_(10, 19), 4: span_(20, 24), 5: span_(30, 34)}
	p4 := map[uint64][]int{1: span_(0, 9), 3: span_(10, 14), 6: span_(15, 19), 4: span_(20, 24), 5: span_(30, 34)}
	p5 := map[uint64][]int{1: span_(0, 9), 3: span_(10, 14), 6: span_(15, 19), 5: span_(30, 34)}
	p6 := map[uint64][]int{1: span_(0, 9), 3: span_(10, 14), 5: append(span_(15, 19), span_(30, 34)...)}
	var out []*snapshot.Snapshot
	for i, p := range []map[uint64][]int{p1, p2, p3, p4, p5, p6} {
		out = append(out, hsnap(t, uint64(i+1), p))
	}
	return out
}

// run observes snaps in order as the daemon does: with db, each snapshot,
// its events and the history changes commit in one batch, and only the
// last two snapshots are retained.
func run(t *testing.T, db *pebble.DB, o *HistoryOptions, snaps []*snapshot.Snapshot) (*History, [][]Event) {
	t.Helper()
	h, err := NewHistory(o)
	if err != nil {
		t.Fatal(err)
	}
	var all [][]Event
	var prev *snapshot.Snapshot
	for _, s := range snaps {
		var evs []Event
		if prev != nil {
			evs = classify(t, prev, s, nil)
		}
		all = append(all, evs)
		if err := h.Observe(prev, s, evs); err != nil {
			t.Fatal(err)
		}
		if db != nil {
			b := db.NewBatch()
			if err := snapshot.Write(b, s); err != nil {
				t.Fatal(err)
			}
			if err := PutAll(b, s.ID, evs); err != nil {
				t.Fatal(err)
			}
			if err := h.Put(b); err != nil {
				t.Fatal(err)
			}
			// Retain counts the committed snapshots: keep the previous one,
			// and s joins it.
			if _, err := snapshot.Retain(b, db, 1); err != nil {
				t.Fatal(err)
			}
			mustCommit(t, b)
		}
		prev = s
	}
	return h, all
}

func pt(snap uint64, size int) Point {
	in := float64(size*(size-1)) / 2
	return Point{Snapshot: snap, Time: int64(snap) * hour, Size: size, Internal: in, Degree: 2 * in}
}

// TestHistoryScenario checks the planted facts of scenario.
func TestHistoryScenario(t *testing.T) {
	db := openDB(t)
	h, evs := run(t, db, &HistoryOptions{InMemory: true}, scenario(t))

	// The scenario is what it says (the facts below depend on it).
	types := func(evs []Event) string {
		var xs []string
		for i := range evs {
			xs = append(xs, string(evs[i].Type))
		}
		return strings.Join(xs, " ")
	}
	for i, want := range []string{"", "continue continue continue continue birth", "merge continue continue continue", "split continue continue continue", "continue continue continue continue death", "merge continue continue"} {
		if got := types(evs[i]); got != want {
			t.Fatalf("events into snapshot %d: %q, want %q", i+1, got, want)
		}
	}

	type fact struct {
		born, died  uint64
		from, to    []uint64
		anc, desc   []uint64
		events      []string // type@snapshot
		points      []Point
		description string
	}
	facts := map[uint64]fact{
		1: {1, 0, []uint64{2}, []uint64{}, []uint64{2}, []uint64{}, []string{"merge@3"}, []Point{pt(1, 5), pt(3, 10)}, "absorbed 2"},
		2: {1, 3, []uint64{}, []uint64{1}, []uint64{}, []uint64{1}, []string{"merge@3"}, []Point{pt(1, 5), {Snapshot: 3, Time: 3 * hour}}, "merged into 1"},
		3: {1, 0, []uint64{}, []uint64{6}, []uint64{}, []uint64{5, 6}, []string{"split@4"}, []Point{pt(1, 10), pt(4, 5)}, "split off 6, which went into 5"},
		4: {1, 5, []uint64{}, []uint64{}, []uint64{}, []uint64{}, []string{"death@5"}, []Point{pt(1, 5), {Snapshot: 5, Time: 5 * hour}}, "died"},
		5: {2, 0, []uint64{6}, []uint64{}, []uint64{3, 6}, []uint64{}, []string{"birth@2", "merge@6"}, []Point{pt(2, 5), pt(6, 10)}, "born at 2, absorbed 6"},
		6: {4, 6, []uint64{3}, []uint64{5}, []uint64{3}, []uint64{5}, []string{"split@4", "merge@6"}, []Point{pt(4, 5), {Snapshot: 6, Time: 6 * hour}}, "split from 3, merged into 5"},
	}
	for id, f := range facts {
		rec, ok := h.Community(id)
		if !ok {
			t.Errorf("community %d (%s): no record", id, f.description)
			continue
		}
		var refs []string
		for _, r := range rec.Events {
			refs = append(refs, fmt.Sprintf("%s@%d", r.Type, r.Snapshot))
			if len(r.EventID) != 32 || r.Time != int64(r.Snapshot)*hour {
				t.Errorf("community %d: reference %+v", id, r)
			}
		}
		diedTime := int64(f.died) * hour
		if rec.Born != f.born || rec.BornTime != int64(f.born)*hour || rec.Died != f.died || rec.DiedTime != diedTime ||
			!reflect.DeepEqual(rec.From, f.from) || !reflect.DeepEqual(rec.To, f.to) ||
			!reflect.DeepEqual(refs, f.events) || rec.EventCount != len(f.events) {
			t.Errorf("community %d (%s): %+v (refs %v), want born %d died %d from %v to %v events %v",
				id, f.description, rec, refs, f.born, f.died, f.from, f.to, f.events)
		}
		anc, desc := h.Lineage(id)
		if !reflect.DeepEqual(anc, f.anc) || !reflect.DeepEqual(desc, f.desc) {
			t.Errorf("lineage of %d (%s): %v, %v; want %v, %v", id, f.description, anc, desc, f.anc, f.desc)
		}
		for _, r := range []pebble.Reader{nil, db} {
			pts, err := h.Points(r, id)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(pts, f.points) {
				t.Errorf("points of %d (reader %v): %+v, want %+v", id, r != nil, pts, f.points)
			}
		}
	}
	if _, ok := h.Community(7); ok {
		t.Error("community 7 never existed but has a record")
	}

	nodes := []struct {
		v     uint32
		comm  uint64
		since uint64
		why   string
	}{
		{0, 1, 1, "in 1 from the start"},
		{7, 1, 3, "joined 1 when 2 merged into it"},
		{12, 3, 1, "stayed in 3 through its split"},
		{17, 5, 6, "3 -> 6 at 4 -> 5 at 6"},
		{22, 0, 5, "left the graph with 4"},
		{32, 5, 2, "in 5 since its birth"},
	}
	for _, n := range nodes {
		got, ok := h.Node(n.v)
		if want := (NodeRecord{Community: n.comm, Since: n.since, SinceTime: int64(n.since) * hour}); !ok || got != want {
			t.Errorf("node %d (%s): %+v %v, want %+v", n.v, n.why, got, ok, want)
		}
	}
	if _, ok := h.Node(27); ok {
		t.Error("node 27 was never in a community but has a record")
	}
	if _, ok := h.Node(1 << 20); ok {
		t.Error("node beyond the graph has a record")
	}

	st := h.Stats()
	if st.Alive != 3 || st.Dead != 3 || st.Points != 12 || st.Snapshots != 6 || st.CommunitySnapshots != 4+5+4+5+4+3 {
		t.Errorf("stats %+v: want 3 alive (1 3 5), 3 dead (2 4 6), 12 points, 6 snapshots, 25 community-snapshots", st)
	}
	if ids := snapIDs(h.Snapshots()); !reflect.DeepEqual(ids, []uint64{1, 2, 3, 4, 5, 6}) {
		t.Errorf("index %v: all six snapshots are within Keep", ids)
	}
}

func snapIDs(rs []SnapshotRecord) []uint64 {
	ids := []uint64{}
	for _, r := range rs {
		ids = append(ids, r.ID)
	}
	return ids
}

// TestHistoryCompact: a snapshot in which nothing changed costs only its
// index entry; one in which one community grew costs one point and the
// node records of the joiners.
func TestHistoryCompact(t *testing.T) {
	parts := map[uint64][]int{1: span_(0, 9), 2: span_(10, 29)}
	db := openDB(t)
	h, err := NewHistory(nil)
	if err != nil {
		t.Fatal(err)
	}
	var prev *snapshot.Snapshot
	var before HistoryStats
	for id := uint64(1); id <= 12; id++ {
		if id == 12 {
			parts[1] = span_(0, 11)
			parts[2] = span_(12, 29)
		}
		s := hsnap(t, id, parts)
		var evs []Event
		if prev != nil {
			evs = classify(t, prev, s, nil)
		}
		before = h.Stats()
		if err := h.Observe(prev, s, evs); err != nil {
			t.Fatal(err)
		}
		after := h.Stats()
		switch {
		case id == 1:
			if after.Points != 2 || after.NodeChanges != 30 {
				t.Fatalf("first snapshot: %+v", after)
			}
		case id < 12:
			rec := appendSnapshotRecord(nil, &SnapshotRecord{ID: s.ID, Time: s.Time, Watermark: s.Watermark, Nodes: s.Nodes, Edges: s.Edges, Communities: 2, Modularity: s.Modularity})
			if d := after.Bytes - before.Bytes; d != int64(hSnapshotKeyLen+len(rec)) || after.Points != before.Points || after.NodeChanges != before.NodeChanges {
				t.Fatalf("snapshot %d changed nothing but cost %d bytes (index entry %d), %+v", id, d, hSnapshotKeyLen+len(rec), after)
			}
		default:
			if after.Points-before.Points != 2 || after.NodeChanges-before.NodeChanges != 2 {
				t.Fatalf("two nodes moved from 2 to 1: %d points, %d node changes", after.Points-before.Points, after.NodeChanges-before.NodeChanges)
			}
		}
		b := db.NewBatch()
		if err := h.Put(b); err != nil {
			t.Fatal(err)
		}
		mustCommit(t, b)
		prev = s
	}
	st := h.Stats()
	t.Logf("%d bytes for %d community-snapshots: %.1f per community per snapshot", st.Bytes, st.CommunitySnapshots, float64(st.Bytes)/float64(st.CommunitySnapshots))
}

// TestHistoryRoundTrip: after the old snapshots are gone, LoadHistory from
// the same store answers as the History that wrote it, with points in
// memory or read from the store, and goes on the same way.
func TestHistoryRoundTrip(t *testing.T) {
	db := openDB(t)
	snaps := scenario(t)
	h1, _ := run(t, db, &HistoryOptions{InMemory: true}, snaps)
	if hs, err := snapshot.List(db); err != nil || len(hs) != 2 || hs[0].ID != 5 {
		t.Fatalf("stored snapshots %+v, %v: want only 5 and 6", hs, err)
	}
	h2, err := LoadHistory(db, &HistoryOptions{InMemory: true})
	if err != nil {
		t.Fatal(err)
	}
	h3, err := LoadHistory(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	same := func(what string, a, b any) {
		t.Helper()
		if !reflect.DeepEqual(a, b) {
			t.Errorf("%s: %+v after loading, %+v before", what, b, a)
		}
	}
	for _, h := range []*History{h2, h3} {
		same("index", h1.Snapshots(), h.Snapshots())
		same("stats counts", [2]int{h1.Stats().Alive, h1.Stats().Dead}, [2]int{h.Stats().Alive, h.Stats().Dead})
		same("last snapshot", h1.LastSnapshot(), h.LastSnapshot())
		for id := uint64(0); id <= 8; id++ {
			r1, ok1 := h1.Community(id)
			r, ok := h.Community(id)
			same(fmt.Sprintf("community %d", id), fmt.Sprint(r1, ok1), fmt.Sprint(r, ok))
			a1, d1 := h1.Lineage(id)
			a, d := h.Lineage(id)
			same(fmt.Sprintf("lineage of %d", id), [2][]uint64{a1, d1}, [2][]uint64{a, d})
			p1, err := h1.Points(nil, id)
			if err != nil {
				t.Fatal(err)
			}
			p, err := h.Points(db, id)
			if err != nil {
				t.Fatal(err)
			}
			same(fmt.Sprintf("points of %d", id), p1, p)
		}
		for v := uint32(0); v < 40; v++ {
			n1, ok1 := h1.Node(v)
			n, ok := h.Node(v)
			same(fmt.Sprintf("node %d", v), fmt.Sprint(n1, ok1), fmt.Sprint(n, ok))
		}
	}
	if _, err := h3.Points(nil, 1); !errorsIsInvalid(err) {
		t.Errorf("points without a reader or InMemory: %v", err)
	}
	j1, j2, j3 := jsonl(t, h1, nil), jsonl(t, h2, nil), jsonl(t, h3, db)
	if !bytes.Equal(j1, j2) || !bytes.Equal(j1, j3) {
		t.Errorf("WriteJSONL differs after loading:\n%s\n--\n%s\n--\n%s", j1, j2, j3)
	}

	// Both go on alike: 5 grows, 1 loses node 9 to the graph.
	s7 := hsnap(t, 7, map[uint64][]int{1: span_(0, 8), 3: span_(10, 14), 5: slices.Concat(span_(15, 19), span_(30, 34), span_(40, 44))})
	evs := classify(t, snaps[5], s7, nil)
	before1, before3 := h1.Stats(), h3.Stats()
	for _, h := range []*History{h1, h3} {
		if err := h.Observe(snaps[5], s7, evs); err != nil {
			t.Fatal(err)
		}
	}
	if d1, d3 := h1.Stats().Points-before1.Points, h3.Stats().Points-before3.Points; d1 != 2 || d3 != 2 {
		t.Errorf("points written at snapshot 7: %d and %d after loading, want 2 (1 and 5 changed)", d1, d3)
	}
	if d1, d3 := h1.Stats().Bytes-before1.Bytes, h3.Stats().Bytes-before3.Bytes; d1 != d3 {
		t.Errorf("bytes written at snapshot 7: %d, and %d after loading", d1, d3)
	}
	b := db.NewBatch()
	if err := h3.Put(b); err != nil {
		t.Fatal(err)
	}
	mustCommit(t, b)
	if j1, j3 := jsonl(t, h1, nil), jsonl(t, h3, db); !bytes.Equal(j1, j3) {
		t.Errorf("after snapshot 7, WriteJSONL differs:\n%s\n--\n%s", j1, j3)
	}
}

func errorsIsInvalid(err error) bool { return errors.Is(err, ErrInvalid) }

func jsonl(t *testing.T, h *History, r pebble.Reader) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := h.WriteJSONLFrom(&buf, r, func(v uint32) string { return fmt.Sprintf("n%d", v) }); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// hKeys returns the keys of family 'h' of the given sub-family and
// community (all communities if id is 0).
func hKeys(t *testing.T, r pebble.Reader, sub byte, id uint64) [][]byte {
	t.Helper()
	lower, upper := []byte{HistoryPrefix, sub}, []byte{HistoryPrefix, sub + 1}
	if id != 0 {
		lower, upper = appendHKey(nil, sub, id), appendHKeyEnd(nil, sub, id)
	}
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: lower, UpperBound: upper})
	if err != nil {
		t.Fatal(err)
	}
	var keys [][]byte
	for valid := it.First(); valid; valid = it.Next() {
		keys = append(keys, slices.Clone(it.Key()))
	}
	if err := it.Close(); err != nil {
		t.Fatal(err)
	}
	return keys
}

// TestHistoryRetention: with Keep = 2 hours and a snapshot an hour, a
// community that died long ago is gone from memory and store, a living old
// one keeps its birth and its latest point, old points go from the store.
func TestHistoryRetention(t *testing.T) {
	db := openDB(t)
	var snaps []*snapshot.Snapshot
	for id, p := range []map[uint64][]int{
		{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 14)},
		{1: span_(0, 4), 3: span_(10, 14)}, // 2 dies at 2
		{1: span_(0, 4), 3: span_(10, 15)}, // 3 changes at 3
		{1: span_(0, 4), 3: span_(10, 15)},
		{1: span_(0, 4), 3: span_(10, 16)}, // and at 5
		{1: span_(0, 4), 3: span_(10, 16)},
	} {
		snaps = append(snaps, hsnap(t, uint64(id+1), p))
	}
	h, _ := run(t, db, &HistoryOptions{Keep: 2 * time.Hour, InMemory: true}, snaps)
	// Newest time 6h, Keep 2h: the index keeps 4 (4h), 5 and 6.
	if ids := snapIDs(h.Snapshots()); !reflect.DeepEqual(ids, []uint64{4, 5, 6}) {
		t.Errorf("index %v, want [4 5 6]", ids)
	}
	loaded, err := LoadHistory(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	for name, x := range map[string]*History{"memory": h, "loaded": loaded} {
		if _, ok := x.Community(2); ok {
			t.Errorf("%s: community 2 died at 2h, before the 4h cut, but has a record", name)
		}
		if rec, ok := x.Community(1); !ok || rec.Born != 1 || rec.BornTime != hour || rec.Died != 0 {
			t.Errorf("%s: community 1, alive since 1h: %+v %v", name, rec, ok)
		}
		if st := x.Stats(); st.Alive != 2 || st.Dead != 0 {
			t.Errorf("%s: %+v: want 2 alive, 0 dead", name, st)
		}
		for _, r := range []pebble.Reader{nil, db} {
			if r == nil && name == "loaded" {
				continue
			}
			p1, err1 := x.Points(r, 1)
			p3, err3 := x.Points(r, 3)
			if err1 != nil || err3 != nil {
				t.Fatal(err1, err3)
			}
			if !reflect.DeepEqual(p1, []Point{pt(1, 5)}) {
				t.Errorf("%s: points of 1 %+v: the birth point is the latest and stays", name, p1)
			}
			if !reflect.DeepEqual(p3, []Point{pt(5, 7)}) {
				t.Errorf("%s: points of 3 %+v: only the one at 5 is after the cut", name, p3)
			}
		}
	}
	for _, sub := range []byte{hCommunity, hPoint, hRef} {
		if keys := hKeys(t, db, sub, 2); len(keys) != 0 {
			t.Errorf("store still holds %q keys of community 2: %x", sub, keys)
		}
	}
	if keys := hKeys(t, db, hPoint, 3); len(keys) != 1 {
		t.Errorf("store holds %d points of community 3, want 1 (those at 1 and 3 trimmed)", len(keys))
	}
	if keys := hKeys(t, db, hSnapshot, 0); len(keys) != 3 {
		t.Errorf("store holds %d index entries, want 3", len(keys))
	}
	if n, ok := h.Node(7); !ok || n != (NodeRecord{Since: 2, SinceTime: 2 * hour}) {
		t.Errorf("node 7 left with 2 at 2: %+v %v", n, ok)
	}
}

// TestHistoryMaxDead: beyond MaxDead the oldest deaths go first (ties by
// id); a community eligible again is alive again with its first birth.
func TestHistoryMaxDead(t *testing.T) {
	var snaps []*snapshot.Snapshot
	for id, p := range []map[uint64][]int{
		{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 14)},
		{1: span_(0, 4)},                   // 2 and 3 die; only 3 is kept
		{1: span_(0, 4), 3: span_(10, 14)}, // 3 is back
		{3: span_(10, 14), 1: span_(0, 1)}, // 1 dies (too small)
	} {
		snaps = append(snaps, hsnap(t, uint64(id+1), p))
	}
	db := openDB(t)
	h, _ := run(t, db, &HistoryOptions{MaxDead: 1}, snaps[:2])
	if _, ok := h.Community(2); ok {
		t.Error("community 2 is beyond MaxDead 1 but kept")
	}
	if rec, ok := h.Community(3); !ok || rec.Died != 2 {
		t.Errorf("community 3: %+v %v, want dead at 2", rec, ok)
	}
	for _, s := range [][2]int{{1, 2}, {2, 3}} {
		prev, cur := snaps[s[0]], snaps[s[1]]
		if err := h.Observe(prev, cur, classify(t, prev, cur, nil)); err != nil {
			t.Fatal(err)
		}
		b := db.NewBatch()
		if err := h.Put(b); err != nil {
			t.Fatal(err)
		}
		mustCommit(t, b)
	}
	loaded, err := LoadHistory(db, &HistoryOptions{MaxDead: 1})
	if err != nil {
		t.Fatal(err)
	}
	for name, x := range map[string]*History{"memory": h, "loaded": loaded} {
		rec, ok := x.Community(3)
		var refs []string
		for _, r := range rec.Events {
			refs = append(refs, fmt.Sprintf("%s@%d", r.Type, r.Snapshot))
		}
		if !ok || rec.Born != 1 || rec.Died != 0 || !reflect.DeepEqual(refs, []string{"death@2", "birth@3"}) {
			t.Errorf("%s: community 3 reborn at 3: %+v %v", name, rec, ok)
		}
		if rec, ok := x.Community(1); !ok || rec.Died != 4 {
			t.Errorf("%s: community 1 below MinSize at 4: %+v %v", name, rec, ok)
		}
		pts, err := x.Points(db, 1)
		if err != nil || !reflect.DeepEqual(pts, []Point{pt(1, 5), pt(4, 2)}) {
			t.Errorf("%s: points of 1 %+v, %v: the death point holds its figures below MinSize", name, pts, err)
		}
		if n, ok := x.Node(0); !ok || n != (NodeRecord{Since: 4, SinceTime: 4 * hour}) {
			t.Errorf("%s: node 0, in no recorded community since 4: %+v %v", name, n, ok)
		}
	}
}

// TestHistoryCorrupt: damaged values and keys give IsCorrupt errors that
// name the key, and never a panic.
func TestHistoryCorrupt(t *testing.T) {
	db := openDB(t)
	run(t, db, nil, scenario(t))
	if _, err := LoadHistory(db, &HistoryOptions{InMemory: true}); err != nil {
		t.Fatalf("intact store: %v", err)
	}
	set := func(key, val []byte) {
		b := db.NewBatch()
		if val == nil {
			b.Delete(key, nil)
		} else {
			b.Set(key, val, nil)
		}
		mustCommit(t, b)
	}
	expectCorrupt := func(what string, key []byte) {
		t.Helper()
		_, err := LoadHistory(db, &HistoryOptions{InMemory: true})
		if !IsCorrupt(err) || !strings.Contains(err.Error(), fmt.Sprintf("%x", key)) {
			t.Errorf("%s at %x: %v, want a corruption error naming the key", what, key, err)
		}
	}
	for _, sub := range []byte{hCommunity, hNode, hPoint, hRef, hSnapshot} {
		key := hKeys(t, db, sub, 0)[0]
		val, closer, err := db.Get(key)
		if err != nil {
			t.Fatal(err)
		}
		orig := slices.Clone(val)
		closer.Close()
		for n := range len(orig) {
			set(key, orig[:n])
			expectCorrupt(fmt.Sprintf("%q value truncated to %d bytes", sub, n), key)
		}
		set(key, append(slices.Clone(orig), 0))
		expectCorrupt(fmt.Sprintf("%q value with a trailing byte", sub), key)
		bad := slices.Clone(orig)
		bad[0] = FormatVersion + 1
		set(key, bad)
		expectCorrupt(fmt.Sprintf("%q value of another version", sub), key)
		set(key, orig)
	}
	// A damaged point is also reported by Points.
	h, err := LoadHistory(db, nil)
	if err != nil {
		t.Fatalf("restored store: %v", err)
	}
	key := appendPointKey(nil, 3, 1)
	set(key, []byte{FormatVersion, 2, 20, 0x99})
	if _, err := h.Points(db, 3); !IsCorrupt(err) || !strings.Contains(err.Error(), fmt.Sprintf("%x", key)) {
		t.Errorf("Points over a damaged point: %v", err)
	}
	// Time 1h (zig-zag 7200000), size 10, internal 45 in 4 bytes where 3
	// do: one value must have one encoding.
	set(key, []byte{FormatVersion, 0x80, 0xba, 0xb7, 0x03, 0x0a, 0x43, 0x40, 0x46, 0x80, 0x00, 0x40, 0x56, 0x80})
	if _, err := h.Points(db, 3); !IsCorrupt(err) || !strings.Contains(err.Error(), "overlong internal") {
		t.Errorf("Points over an overlong float: %v", err)
	}
	good := appendPoint(nil, &Point{Time: hour, Size: 10, Internal: 45, Degree: 90})
	if want := []byte{FormatVersion, 0x80, 0xba, 0xb7, 0x03, 0x0a, 0x33, 0x40, 0x46, 0x80, 0x40, 0x56, 0x80}; !bytes.Equal(good, want) {
		t.Errorf("point encoding %x, want %x", good, want)
	}
	set(key, good)

	// Keys of the wrong length, and records that disagree.
	short := []byte{HistoryPrefix, hCommunity, 1, 2}
	set(short, []byte{FormatVersion})
	expectCorrupt("short community key", short)
	set(short, nil)
	node := []byte{HistoryPrefix, hNode, 0, 0, 0, 0}
	orig, closer, err := db.Get(node)
	if err != nil {
		t.Fatal(err)
	}
	orig = slices.Clone(orig)
	closer.Close()
	set(node, []byte{FormatVersion, 2, 1, 2}) // node 0 in 2, which is dead
	expectCorrupt("node in a dead community", node)
	set(node, orig)
	orphan := appendRefKey(nil, 99, 3, 0)
	set(orphan, []byte{FormatVersion, 2, 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16})
	expectCorrupt("reference of a community without a record", orphan)
	set(orphan, nil)
	if _, err := LoadHistory(db, &HistoryOptions{InMemory: true}); err != nil {
		t.Fatalf("restored store: %v", err)
	}
}

// TestHistoryDeterministic: two runs over the same snapshots (whose
// statistics are built in map order) give the same JSON lines and the same
// stored keys and values.
func TestHistoryDeterministic(t *testing.T) {
	dump := func(db *pebble.DB) []byte {
		var out []byte
		for _, sub := range []byte{hCommunity, hNode, hPoint, hRef, hSnapshot} {
			for _, k := range hKeys(t, db, sub, 0) {
				v, closer, err := db.Get(k)
				if err != nil {
					t.Fatal(err)
				}
				out = binary.AppendUvarint(append(binary.AppendUvarint(out, uint64(len(k))), k...), uint64(len(v)))
				out = append(out, v...)
				closer.Close()
			}
		}
		return out
	}
	var js, stores [2][]byte
	for i := range 2 {
		db := openDB(t)
		h, _ := run(t, db, &HistoryOptions{InMemory: true}, scenario(t))
		js[i], stores[i] = jsonl(t, h, nil), dump(db)
	}
	if !bytes.HasPrefix(js[0], []byte(`{"schema":"shoal.history/1","kind":"index"`)) || bytes.Count(js[0], []byte("\n")) != 1+6+30 {
		t.Fatalf("WriteJSONL: want the index line, 6 communities and 30 nodes:\n%s", js[0])
	}
	if !bytes.Equal(js[0], js[1]) {
		t.Errorf("WriteJSONL differs between runs:\n%s\n--\n%s", js[0], js[1])
	}
	if len(stores[0]) == 0 || !bytes.Equal(stores[0], stores[1]) {
		t.Errorf("stored history differs between runs (%d and %d bytes)", len(stores[0]), len(stores[1]))
	}
}

// TestHistoryObserveErrors: misuse is refused and changes nothing.
func TestHistoryObserveErrors(t *testing.T) {
	snaps := scenario(t)
	h, _ := run(t, nil, &HistoryOptions{NoStore: true}, snaps[:3])
	want := jsonl(t, h, nil)
	evs := classify(t, snaps[2], snaps[3], nil)
	for name, call := range map[string]func() error{
		"old snapshot":     func() error { return h.Observe(snaps[0], snaps[1], classify(t, snaps[0], snaps[1], nil)) },
		"gap":              func() error { return h.Observe(snaps[1], snaps[3], classify(t, snaps[1], snaps[3], nil)) },
		"events, no prev":  func() error { return h.Observe(nil, snaps[3], evs) },
		"events elsewhere": func() error { return h.Observe(snaps[2], snaps[4], evs) },
		"bad event id": func() error {
			bad := slices.Clone(evs)
			bad[0].ID = "xyz"
			return h.Observe(snaps[2], snaps[3], bad)
		},
		"put with NoStore": func() error { return h.Put(openDB(t).NewBatch()) },
	} {
		if err := call(); !errorsIsInvalid(err) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if got := jsonl(t, h, nil); !bytes.Equal(got, want) {
		t.Errorf("refused calls changed the history")
	}
	if err := h.Observe(snaps[2], snaps[3], evs); err != nil {
		t.Fatalf("the right call after the refused ones: %v", err)
	}
	if _, err := NewHistory(&HistoryOptions{Keep: time.Microsecond}); !errorsIsInvalid(err) {
		t.Errorf("keep below 1ms: %v", err)
	}
}

// BenchmarkHistory: Observe over a run of snapshots in which 1% of the
// nodes move at each step (about 20 nodes a community); reports the bytes
// per community per snapshot and per node change.
func BenchmarkHistory(b *testing.B) {
	for _, n := range []int{1e4, 1e5} {
		const steps = 20
		m, _ := benchMemberships(n)
		r := rand.New(rand.NewPCG(2, uint64(n)))
		var snaps []*snapshot.Snapshot
		var evs [][]Event
		for id := uint64(1); id <= steps; id++ {
			if id > 1 {
				m = slices.Clone(m)
				for range n / 100 {
					m[r.IntN(n)] = 1000 + r.Uint64N(uint64(n/20))
				}
			}
			s, err := snapshot.Freeze(snapshot.Header{ID: id, Graph: "bench", Time: int64(id) * hour, Watermark: int64(id) * hour}, m, benchStats(m))
			if err != nil {
				b.Fatal(err)
			}
			var e []Event
			if id > 1 {
				if e, err = Classify(snaps[len(snaps)-1], s, nil); err != nil {
					b.Fatal(err)
				}
			}
			snaps, evs = append(snaps, s), append(evs, e)
		}
		b.Run(fmt.Sprintf("n=%.0e", float64(n)), func(b *testing.B) {
			b.ReportAllocs()
			var st HistoryStats
			for b.Loop() {
				h, err := NewHistory(&HistoryOptions{NoStore: true})
				if err != nil {
					b.Fatal(err)
				}
				for i, s := range snaps {
					var prev *snapshot.Snapshot
					if i > 0 {
						prev = snaps[i-1]
					}
					if err := h.Observe(prev, s, evs[i]); err != nil {
						b.Fatal(err)
					}
				}
				st = h.Stats()
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*steps), "ns/snapshot")
			b.ReportMetric(float64(st.Bytes-st.NodeBytes)/float64(st.CommunitySnapshots), "B/community-snapshot")
			b.ReportMetric(float64(st.NodeBytes)/float64(st.NodeChanges), "B/node-change")
		})
	}
}
