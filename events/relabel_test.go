package events

import (
	"fmt"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"

	"shoal/snapshot"
	"shoal/tracker"
)

// fromMembership freezes a membership with sizes only (the statistics do not
// affect matching).
func fromMembership(t testing.TB, id uint64, membership []uint64) *snapshot.Snapshot {
	t.Helper()
	size := map[uint64]int{}
	for _, c := range membership {
		if c != tracker.NoCommunity {
			size[c]++
		}
	}
	var stats []tracker.CommunityStats
	for c, n := range size {
		stats = append(stats, tracker.CommunityStats{ID: c, Size: n, Degree: float64(n)})
	}
	s, err := snapshot.Freeze(snapshot.Header{ID: id, Graph: "g"}, membership, stats)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// evolve draws a random partition A of n nodes (sizes 1..16, ids 0..k-1) and
// a B made from it by merging pairs, splitting communities, moving nodes,
// removing nodes and adding new ones.
func evolve(r *rand.Rand, n int) (a, b []uint64) {
	a = make([]uint64, n)
	k := uint64(0)
	for v := 0; v < n; {
		sz := 1 + r.IntN(16)
		for s := 0; s < sz && v < n; s++ {
			a[v] = k
			v++
		}
		k++
	}
	// Shuffle node order so that communities are not runs of ids.
	r.Shuffle(n, func(i, j int) { a[i], a[j] = a[j], a[i] })
	b = slices.Clone(a)
	next := k
	for c := uint64(0); c < k; c++ {
		switch r.IntN(6) {
		case 0: // merge c into a random other community
			o := r.Uint64N(k)
			for v := range b {
				if b[v] == c {
					b[v] = o
				}
			}
		case 1: // split c in two
			for v := range b {
				if b[v] == c && r.IntN(2) == 0 {
					b[v] = next
				}
			}
			next++
		}
	}
	for v := range b {
		switch x := r.IntN(100); {
		case x < 8:
			b[v] = r.Uint64N(next)
		case x < 12:
			b[v] = tracker.NoCommunity
		}
	}
	for range n / 10 {
		b = append(b, r.Uint64N(next+2))
	}
	return a, b
}

// relabel gives every community a new random id (so both the ids and their
// order change).
func relabel(r *rand.Rand, m []uint64) []uint64 {
	ids := map[uint64]uint64{}
	used := map[uint64]bool{}
	out := make([]uint64, len(m))
	for v, c := range m {
		if c == tracker.NoCommunity {
			out[v] = c
			continue
		}
		if _, ok := ids[c]; !ok {
			x := r.Uint64N(1 << 40)
			for used[x] {
				x = r.Uint64N(1 << 40)
			}
			used[x] = true
			ids[c] = x
		}
		out[v] = ids[c]
	}
	return out
}

// canonical describes events without community ids: each community by its
// member list, overlaps by the least members of their two sides.
func canonical(s *[2]*snapshot.Snapshot, evs []Event) []string {
	members := [2]map[uint64]string{{}, {}}
	least := [2]map[uint64]uint32{{}, {}}
	for x := range 2 {
		for _, c := range s[x].Communities {
			members[x][c.ID] = fmt.Sprint(c.Members)
			least[x][c.ID] = c.Members[0]
		}
	}
	var out []string
	for _, ev := range evs {
		var bs, as, ov []string
		for _, sd := range ev.Before {
			bs = append(bs, members[0][sd.Community])
		}
		for _, sd := range ev.After {
			as = append(as, members[1][sd.Community])
		}
		for _, o := range ev.Overlaps {
			ov = append(ov, fmt.Sprintf("%d>%d:%d:%.6f", least[0][o.From], least[1][o.To], o.Shared, o.Jaccard))
		}
		slices.Sort(bs)
		slices.Sort(as)
		slices.Sort(ov)
		out = append(out, fmt.Sprintf("%s before=%s after=%s ov=%s joined=%v/%d left=%v/%d",
			ev.Type, strings.Join(bs, ","), strings.Join(as, ","), strings.Join(ov, " "), ev.Joined, ev.JoinedCount, ev.Left, ev.LeftCount))
	}
	slices.Sort(out)
	return out
}

// TestRelabelInvariance (property test): giving all communities of one
// snapshot new random ids changes no event type, community, overlap or
// member list. The random evolutions are checked to produce every event type,
// so the property is exercised on all of them.
func TestRelabelInvariance(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	seen := map[Type]int{}
	for trial := range 120 {
		ma, mb := evolve(r, 100+r.IntN(300))
		a, b := fromMembership(t, 1, ma), fromMembership(t, 2, mb)
		o := &Options{MinSize: 1 + r.IntN(4), Theta: 0.1 + 0.4*r.Float64(), MaxListed: 1 + r.IntN(20)}
		evs := classify(t, a, b, o)
		want := canonical(&[2]*snapshot.Snapshot{a, b}, evs)
		for _, ev := range evs {
			seen[ev.Type]++
		}
		for side := range 2 {
			a2, b2 := a, b
			if side == 0 {
				a2 = fromMembership(t, 1, relabel(r, ma))
			} else {
				b2 = fromMembership(t, 2, relabel(r, mb))
			}
			got := canonical(&[2]*snapshot.Snapshot{a2, b2}, classify(t, a2, b2, o))
			if !reflect.DeepEqual(got, want) {
				t.Fatalf("trial %d, relabelled side %d: events differ\n got %q\nwant %q", trial, side, got, want)
			}
		}
	}
	for _, typ := range Types {
		if seen[typ] == 0 {
			t.Errorf("no %s event in any trial (seen %v): the generator does not exercise it", typ, seen)
		}
	}
	t.Logf("event types over all trials: %v", seen)
}

// TestDeterministic: the same inputs give the same events, bit for bit.
func TestDeterministic(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	ma, mb := evolve(r, 2000)
	a, b := fromMembership(t, 1, ma), fromMembership(t, 2, mb)
	first := classify(t, a, b, nil)
	for range 5 {
		if again := classify(t, a, b, nil); !reflect.DeepEqual(again, first) {
			t.Fatal("events differ between runs")
		}
	}
	for i := 1; i < len(first); i++ {
		p, q := &first[i-1], &first[i]
		if p.Type.order() > q.Type.order() || (p.Type == q.Type && primary(p) >= primary(q)) {
			t.Fatalf("events %d and %d out of order: %s %d, %s %d", i-1, i, p.Type, primary(p), q.Type, primary(q))
		}
	}
}

// primary is the community id that orders events of one type (doc.go): the after
// community of a merge or birth, the before community otherwise (each is in
// at most one event of its type).
func primary(ev *Event) uint64 {
	if ev.Type == Merge || ev.Type == Birth {
		return ev.After[0].Community
	}
	return ev.Before[0].Community
}
