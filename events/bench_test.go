package events

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"shoal/snapshot"
	"shoal/tracker"
)

// benchMemberships: n nodes in n/20 random communities (about 20 nodes
// each), then B with 5% of the nodes moved to a random community.
func benchMemberships(n int) (a, b []uint64) {
	r := rand.New(rand.NewPCG(1, uint64(n)))
	k := uint64(n / 20)
	a = make([]uint64, n)
	for v := range a {
		a[v] = 1000 + r.Uint64N(k)
	}
	b = slices.Clone(a)
	for range n / 20 {
		b[r.IntN(n)] = 1000 + r.Uint64N(k)
	}
	return a, b
}

func benchStats(m []uint64) []tracker.CommunityStats {
	size := map[uint64]int{}
	for _, c := range m {
		size[c]++
	}
	var stats []tracker.CommunityStats
	for c, n := range size {
		stats = append(stats, tracker.CommunityStats{ID: c, Size: n, Internal: float64(2 * n), Degree: float64(5 * n)})
	}
	slices.SortFunc(stats, func(x, y tracker.CommunityStats) int { return int(x.ID) - int(y.ID) })
	return stats
}

// BenchmarkFreezeClassify: freeze the new snapshot and classify it against
// the previous one, the work done per snapshot.
func BenchmarkFreezeClassify(b *testing.B) {
	for _, n := range []int{1e4, 1e5, 1e6} {
		ma, mb := benchMemberships(n)
		sa, sb := benchStats(ma), benchStats(mb)
		a, err := snapshot.Freeze(snapshot.Header{ID: 1}, ma, sa)
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("n=%.0e/freeze+classify", float64(n)), func(b *testing.B) {
			b.ReportAllocs()
			var evs []Event
			for b.Loop() {
				s, err := snapshot.Freeze(snapshot.Header{ID: 2}, mb, sb)
				if err != nil {
					b.Fatal(err)
				}
				if evs, err = Classify(a, s, nil); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(evs)), "events")
		})
		bs, _ := snapshot.Freeze(snapshot.Header{ID: 2}, mb, sb)
		b.Run(fmt.Sprintf("n=%.0e/freeze", float64(n)), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := snapshot.Freeze(snapshot.Header{ID: 2}, mb, sb); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("n=%.0e/classify", float64(n)), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Classify(a, bs, nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
