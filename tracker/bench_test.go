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
			benchBatches(b, g, &tracker.Options{Seed: 1}, size)
		})
	}
}

// BenchmarkCPM: the CPM objective on the invented small-groups graph of
// resolution_test.go (LFR, groups of 8 to 30) at about 10^6 edges: a whole
// static run, and one incremental batch of 10^-3 |E| random changes
// (gen.Churn), side by side in one run (the aim: the batch at least
// 50 times faster than the static run).
func BenchmarkCPM(b *testing.B) {
	g := smallGroups(b, 250000)
	o := &tracker.Options{Objective: tracker.ObjectiveCPM, Seed: 1}
	b.Run("static", func(b *testing.B) {
		tg := tracker.NewGraph(g.N, g.Edges)
		b.ReportAllocs()
		for b.Loop() {
			tracker.Detect(tg, o)
		}
	})
	b.Run("batch=1000", func(b *testing.B) { benchBatches(b, g, o, len(g.Edges)/1000) })
}

// benchBatches times Apply of batches of size random changes (gen.Churn) on
// a tracker over g started from a static run.
func benchBatches(b *testing.B, g *gen.Graph, o *tracker.Options, size int) {
	tr, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), o)
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
}
