package main

import (
	"context"
	"fmt"
	"io"
	"slices"
	"time"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// incrementalRow is one line of `shoal-bench incremental`.
type incrementalRow struct {
	Graph         string  `json:"graph"`
	Edges         int     `json:"edges"`
	BatchFraction float64 `json:"batch_fraction"`
	BatchSize     int     `json:"batch_size"`
	AfterBatches  int     `json:"after_batches"`
	IncrementalMs float64 `json:"incremental_ms"`
	P50Ms         float64 `json:"p50_ms"`
	P99Ms         float64 `json:"p99_ms"`
	StaticMs      float64 `json:"static_ms"`
	Ratio         float64 `json:"ratio"`
	QIncremental  float64 `json:"q_incremental"`
	QStatic       float64 `json:"q_static"`
	Frontier      int     `json:"frontier"`
	BytesPerEdge  float64 `json:"bytes_per_edge,omitempty"`
	Recall        float64 `json:"recall,omitempty"`
	Precision     float64 `json:"precision,omitempty"`
}

func runIncremental(ctx context.Context, args []string, w io.Writer) error {
	fs, maxEdges, asJSON := commonFlags("incremental")
	batches := fs.Int("batches", 100, "consecutive batches per configuration")
	if err := fs.Parse(args); err != nil {
		return err
	}
	em := &emitter{w: w, json: *asJSON}
	header := fmt.Sprintf("%-8s %9s %8s %7s %6s %9s %8s %8s %9s %7s %8s %8s %8s",
		"graph", "edges", "fraction", "batch", "after", "incr_ms", "p50_ms", "p99_ms", "static_ms", "ratio", "q_incr", "q_static", "frontier")
	line := func(r *incrementalRow) func() string {
		return func() string {
			s := fmt.Sprintf("%-8s %9d %8.0e %7d %6d %9.3f %8.3f %8.3f %9.1f %7.0f %8.4f %8.4f %8d",
				r.Graph, r.Edges, r.BatchFraction, r.BatchSize, r.AfterBatches, r.IncrementalMs, r.P50Ms, r.P99Ms,
				r.StaticMs, r.Ratio, r.QIncremental, r.QStatic, r.Frontier)
			if r.Recall > 0 {
				s += fmt.Sprintf("  planted group: recall %.2f precision %.2f", r.Recall, r.Precision)
			}
			return s
		}
	}
	for _, e := range sizes(*maxEdges) {
		if e < 100_000 {
			continue
		}
		gg, err := benchGraph("lfr", e, 1)
		if err != nil {
			return err
		}
		for _, frac := range []float64{1e-5, 1e-4, 1e-3, 1e-2} {
			if err := ctx.Err(); err != nil {
				return err
			}
			size := max(1, int(frac*float64(len(gg.Edges))))
			rows, err := incrementalOne(gg, frac, size, *batches)
			if err != nil {
				return err
			}
			for _, r := range rows {
				em.row(r, header, line(r))
			}
		}
		r, err := plantedGroup(gg)
		if err != nil {
			return err
		}
		em.row(r, header, line(r))
	}
	return nil
}

func ms(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1e6 }

func percentile(x []float64, p float64) float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	i := int(p * float64(len(s)-1))
	return s[i]
}

// staticOn times a static run from scratch on a copy of the tracker's
// current graph (copy outside the timing).
func staticOn(tr *tracker.Tracker) (time.Duration, *tracker.Partition) {
	g := tracker.NewGraph(tr.Graph().Len(), tr.Graph().EdgeList(nil))
	t0 := time.Now()
	p := tracker.Detect(g, &tracker.Options{Seed: 1})
	return time.Since(t0), p
}

func incrementalOne(gg *gen.Graph, frac float64, size, batches int) ([]*incrementalRow, error) {
	before := heap()
	tr, err := tracker.NewFrom(tracker.NewGraph(gg.N, gg.Edges), &tracker.Options{Seed: 1})
	if err != nil {
		return nil, err
	}
	bpe := float64(heap()-before) / float64(len(gg.Edges)) // heap() also collects the set-up garbage
	churn := gen.NewChurn(gg, 7)
	var lat []float64
	var visited []float64
	var rows []*incrementalRow
	for b := 1; b <= batches; b++ {
		batch := churn.Batch(size)
		t0 := time.Now()
		res, err := tr.Apply(batch)
		d := time.Since(t0)
		if err != nil {
			return nil, err
		}
		lat = append(lat, ms(d))
		visited = append(visited, float64(res.Visited))
		if b == 1 || b == batches {
			sd, sp := staticOn(tr)
			r := &incrementalRow{
				Graph: "lfr", Edges: len(gg.Edges), BatchFraction: frac, BatchSize: size, AfterBatches: b,
				IncrementalMs: percentile(lat, 0.5), P50Ms: percentile(lat, 0.5), P99Ms: percentile(lat, 0.99),
				StaticMs: ms(sd), QIncremental: tr.Modularity(), QStatic: sp.Modularity,
				Frontier: int(percentile(visited, 0.5)),
			}
			r.Ratio = r.StaticMs / r.IncrementalMs
			if b == 1 {
				r.BytesPerEdge = bpe
			}
			rows = append(rows, r)
		}
	}
	return rows, nil
}

// plantedGroup plants a dense group of 40 new accounts, with a few edges
// to the rest of the graph, in one batch of 10^-4 |E| churn, and reports
// how well the tracker isolates it (recall: share of the group in its
// majority community; precision: share of that community that is group).
func plantedGroup(gg *gen.Graph) (*incrementalRow, error) {
	tr, err := tracker.NewFrom(tracker.NewGraph(gg.N, gg.Edges), &tracker.Options{Seed: 1})
	if err != nil {
		return nil, err
	}
	heap() // collect the set-up garbage outside the timing
	churn := gen.NewChurn(gg, 9)
	var nodes []uint32
	for i := 0; i < 40; i++ {
		nodes = append(nodes, uint32(gg.N+i))
	}
	batch := churn.Batch(max(1, len(gg.Edges)/10000))
	batch = append(batch, churn.Group(nodes, 0.5)...)
	for i, u := range nodes[:10] {
		batch = append(batch, tracker.Change{Op: tracker.OpAdd, U: u, V: uint32(i * 7919 % gg.N), W: 1})
	}
	t0 := time.Now()
	res, err := tr.Apply(batch)
	d := time.Since(t0)
	if err != nil {
		return nil, err
	}
	recall, precision := tracker.GroupRecovery(tr.Membership(nil), nodes)
	sd, sp := staticOn(tr)
	r := &incrementalRow{Graph: "lfr+group", Edges: len(gg.Edges), BatchSize: len(batch), AfterBatches: 1,
		IncrementalMs: ms(d), P50Ms: ms(d), P99Ms: ms(d), StaticMs: ms(sd), QIncremental: tr.Modularity(), QStatic: sp.Modularity,
		Frontier: res.Visited, Recall: recall, Precision: precision}
	r.Ratio = r.StaticMs / r.IncrementalMs
	return r, nil
}
