package snapshot

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/cockroachdb/pebble/v2"

	"shoal/tracker"
)

// benchSnapshot: n nodes in n/20 random communities (about 20 members each).
func benchSnapshot(b *testing.B, id uint64, n int) (*Snapshot, []uint64, []tracker.CommunityStats) {
	r := rand.New(rand.NewPCG(1, uint64(n)))
	k := n / 20
	membership := make([]uint64, n)
	sizes := make([]int, k)
	for v := range membership {
		c := r.IntN(k)
		membership[v] = uint64(1000 + c)
		sizes[c]++
	}
	stats := make([]tracker.CommunityStats, 0, k)
	for c, sz := range sizes {
		if sz > 0 {
			stats = append(stats, tracker.CommunityStats{ID: uint64(1000 + c), Size: sz, Internal: float64(2 * sz), Degree: float64(5 * sz)})
		}
	}
	s, err := Freeze(Header{ID: id, Graph: "bench", Edges: 5 * n}, membership, stats)
	if err != nil {
		b.Fatal(err)
	}
	return s, membership, stats
}

var sizes = []int{1e4, 1e5, 1e6}

func BenchmarkFreeze(b *testing.B) {
	for _, n := range sizes {
		_, m, st := benchSnapshot(b, 1, n)
		b.Run(fmt.Sprintf("n=%.0e", float64(n)), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Freeze(Header{ID: 2}, m, st); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkWrite: encode a snapshot into a batch and commit it (with
// pebble.NoSync: the fsync cost is the disk's, not ours), a new id each time.
func BenchmarkWrite(b *testing.B) {
	for _, n := range sizes {
		s, _, _ := benchSnapshot(b, 1, n)
		b.Run(fmt.Sprintf("n=%.0e", float64(n)), func(b *testing.B) {
			db := openDB(b)
			b.ReportAllocs()
			id := uint64(0)
			var bytes int
			for b.Loop() {
				id++
				s.ID = id
				batch := db.NewBatch()
				if err := Write(batch, s); err != nil {
					b.Fatal(err)
				}
				bytes = batch.Len()
				if err := batch.Commit(pebble.NoSync); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(bytes), "batch-bytes")
		})
	}
}

// BenchmarkLoad: read a snapshot back, after a flush (so it comes from
// sstables, not the memtable).
func BenchmarkLoad(b *testing.B) {
	for _, n := range sizes {
		s, _, _ := benchSnapshot(b, 1, n)
		b.Run(fmt.Sprintf("n=%.0e", float64(n)), func(b *testing.B) {
			db := openDB(b)
			batch := db.NewBatch()
			if err := Write(batch, s); err != nil {
				b.Fatal(err)
			}
			if err := batch.Commit(pebble.Sync); err != nil {
				b.Fatal(err)
			}
			if err := db.Flush(); err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Load(db, 1); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
