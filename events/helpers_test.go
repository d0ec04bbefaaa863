package events

import (
	"fmt"
	"slices"
	"strings"
	"testing"

	"shoal/snapshot"
	"shoal/tracker"
)

// clique returns the edges of the complete graph on nodes.
func clique(nodes ...int) [][2]int {
	var es [][2]int
	for a := range nodes {
		for b := a + 1; b < len(nodes); b++ {
			es = append(es, [2]int{nodes[a], nodes[b]})
		}
	}
	return es
}

func span_(lo, hi int) []int { // nodes lo..hi inclusive
	var vs []int
	for v := lo; v <= hi; v++ {
		vs = append(vs, v)
	}
	return vs
}

// snap freezes a snapshot whose statistics are recomputed by brute force from
// the unit-weight edge list and the hand-given partition (community id ->
// members). Nodes in no community are absent from the graph.
func snap(t testing.TB, id uint64, edges [][2]int, parts map[uint64][]int) *snapshot.Snapshot {
	t.Helper()
	n := 0
	for _, vs := range parts {
		for _, v := range vs {
			n = max(n, v+1)
		}
	}
	membership := make([]uint64, n)
	for v := range membership {
		membership[v] = tracker.NoCommunity
	}
	for c, vs := range parts {
		for _, v := range vs {
			if membership[v] != tracker.NoCommunity {
				t.Fatalf("node %d in two parts", v)
			}
			membership[v] = c
		}
	}
	stats := map[uint64]*tracker.CommunityStats{}
	for c, vs := range parts {
		stats[c] = &tracker.CommunityStats{ID: c, Size: len(vs)}
	}
	m := 0.0
	for _, e := range edges {
		cu, cv := membership[e[0]], membership[e[1]]
		if cu == tracker.NoCommunity || cv == tracker.NoCommunity {
			t.Fatalf("edge %v touches an absent node", e)
		}
		stats[cu].Degree++
		stats[cv].Degree++
		if cu == cv {
			stats[cu].Internal++
		}
		m++
	}
	var list []tracker.CommunityStats
	for _, st := range stats {
		list = append(list, *st)
	}
	s, err := snapshot.Freeze(snapshot.Header{ID: id, Graph: "test", Watermark: int64(id) * 3600_000, TotalWeight: m, Edges: len(edges)}, membership, list)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func cat(parts ...[][2]int) [][2]int { return slices.Concat(parts...) }

// brief renders an event compactly for exact comparison:
// "type [before ids]->[after ids] ov from>to:shared:jaccard ... +[joined] -[left]".
func brief(ev *Event) string {
	var b strings.Builder
	ids := func(ss []Side) string {
		var xs []string
		for _, s := range ss {
			xs = append(xs, fmt.Sprint(s.Community))
		}
		return "[" + strings.Join(xs, " ") + "]"
	}
	fmt.Fprintf(&b, "%s %s->%s ov", ev.Type, ids(ev.Before), ids(ev.After))
	for _, o := range ev.Overlaps {
		fmt.Fprintf(&b, " %d>%d:%d:%.3f", o.From, o.To, o.Shared, o.Jaccard)
	}
	fmt.Fprintf(&b, " +%v/%d -%v/%d", ev.Joined, ev.JoinedCount, ev.Left, ev.LeftCount)
	return b.String()
}

func briefs(evs []Event) []string {
	out := []string{}
	for i := range evs {
		out = append(out, brief(&evs[i]))
	}
	return out
}

func classify(t testing.TB, a, b *snapshot.Snapshot, o *Options) []Event {
	t.Helper()
	evs, err := Classify(a, b, o)
	if err != nil {
		t.Fatal(err)
	}
	return evs
}
