package tracker_test

import (
	"fmt"
	"testing"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// BenchmarkDetect: a whole static run on LFR graphs (S set, mu = 0.3).
// cmd/shoal-bench static compares it with gonum's Louvain.
func BenchmarkDetect(b *testing.B) {
	for _, edges := range []int{10_000, 100_000, 1_000_000} {
		b.Run(fmt.Sprintf("edges=%d", edges), func(b *testing.B) {
			g := lfr(b, edges/10, 0.3, 1)
			tg := tracker.NewGraph(g.N, g.Edges)
			b.ReportAllocs()
			for b.Loop() {
				tracker.Detect(tg, &tracker.Options{Seed: 1})
			}
			b.ReportMetric(float64(len(g.Edges))*float64(b.N)/b.Elapsed().Seconds(), "edges/s")
		})
	}
}

// BenchmarkApply: one batch of random churn (gen.Churn) on a tracker over
// LFR with 10^6 edges, by batch size. cmd/shoal-bench incremental compares
// it with a static run on the same graph.
func BenchmarkApply(b *testing.B) {
	g := lfr(b, 100_000, 0.3, 1)
	for _, size := range []int{10, 100, 1000, 10000} {
		b.Run(fmt.Sprintf("batch=%d", size), func(b *testing.B) {
			tr, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), &tracker.Options{Seed: 1})
			if err != nil {
				b.Fatal(err)
			}
			churn := gen.NewChurn(g, 3)
			batches := make([][]tracker.Change, 64)
			for i := range batches {
				batches[i] = churn.Batch(size)
			}
			i := 0
			b.ReportAllocs()
			for b.Loop() {
				if _, err := tr.Apply(batches[i%len(batches)]); err != nil {
					b.Fatal(err)
				}
				i++
			}
		})
	}
}
