package main

import (
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"runtime"
	"slices"
	"time"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/community"
	"gonum.org/v1/gonum/graph/simple"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// staticRow is one line of `shoal-bench static`.
type staticRow struct {
	Graph           string  `json:"graph"`
	Nodes           int     `json:"nodes"`
	Edges           int     `json:"edges"`
	OursS           float64 `json:"ours_s"`
	BuildS          float64 `json:"build_s"`
	RefS            float64 `json:"ref_s"`
	Ratio           float64 `json:"ratio"`
	QOurs           float64 `json:"q_ours"`
	QRef            float64 `json:"q_ref"`
	CommunitiesOurs int     `json:"communities_ours"`
	CommunitiesRef  int     `json:"communities_ref"`
	BytesPerEdge    float64 `json:"bytes_per_edge"`
	EdgesPerS       float64 `json:"edges_per_s"`
	NMIOurs         float64 `json:"nmi_ours"`
	NMIRef          float64 `json:"nmi_ref"`
}

// benchGraph generates one of the benchmark graphs: LFR (Lancichinetti,
// Fortunato and Radicchi 2008; the standard S set: <k> = 20, k_max = 50,
// sizes 10-50) or a planted partition with groups of 50, both at mixing 0.3,
// with about `edges` edges (N = edges / 10).
func benchGraph(kind string, edges int, seed uint64) (*gen.Graph, error) {
	n := edges / 10
	switch kind {
	case "lfr":
		return gen.LFR(gen.LFROptions{N: n, AvgDegree: 20, MaxDegree: 50, MinCommunity: 10, MaxCommunity: 50, Mu: 0.3, Seed: seed})
	case "planted":
		return gen.Planted(gen.PlantedOptions{N: n, Groups: max(1, n/50), AvgDegree: 20, Mu: 0.3, Seed: seed})
	}
	return nil, fmt.Errorf("unknown graph kind %q", kind)
}

func sizes(maxEdges int) []int {
	var out []int
	for e := 10_000; e <= maxEdges; e *= 10 {
		out = append(out, e)
	}
	if len(out) == 0 {
		out = []int{maxEdges}
	}
	return out
}

func runStatic(ctx context.Context, args []string, w io.Writer) error {
	fs, maxEdges, asJSON := commonFlags("static")
	repeat := fs.Int("repeat", 3, "runs of our engine per graph; the median is reported")
	if err := fs.Parse(args); err != nil {
		return err
	}
	em := &emitter{w: w, json: *asJSON}
	for _, kind := range []string{"lfr", "planted"} {
		for _, e := range sizes(*maxEdges) {
			if err := ctx.Err(); err != nil {
				return err
			}
			row, err := staticOne(kind, e, *repeat)
			if err != nil {
				return err
			}
			em.row(row, fmt.Sprintf("%-8s %9s %9s %9s %9s %8s %8s %8s %7s %7s %9s %12s",
				"graph", "nodes", "edges", "ours_s", "gonum_s", "ratio", "q_ours", "q_gonum", "c_ours", "c_gonum", "bytes/edge", "edges/s"),
				func() string {
					return fmt.Sprintf("%-8s %9d %9d %9.3f %9.3f %8.0f %8.4f %8.4f %7d %7d %9.1f %12.0f",
						row.Graph, row.Nodes, row.Edges, row.OursS, row.RefS, row.Ratio, row.QOurs, row.QRef,
						row.CommunitiesOurs, row.CommunitiesRef, row.BytesPerEdge, row.EdgesPerS)
				})
		}
	}
	return nil
}

func heap() uint64 {
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return ms.HeapAlloc
}

func staticOne(kind string, edges, repeat int) (*staticRow, error) {
	gg, err := benchGraph(kind, edges, 1)
	if err != nil {
		return nil, err
	}
	row := &staticRow{Graph: kind, Nodes: gg.N, Edges: len(gg.Edges)}
	// Ours: the whole static run from singletons to the final partition
	// with its statistics and exact Q, median of repeat runs; building the
	// graph from the edge list is timed apart (build_s), as gonum's graph
	// construction is not in ref_s either.
	var times, builds []float64
	var p *tracker.Partition
	var g *tracker.Graph
	for r := 0; r < max(1, repeat); r++ {
		g, p = nil, nil
		before := heap()
		t0 := time.Now()
		g = tracker.NewGraph(gg.N, gg.Edges)
		t1 := time.Now()
		p = tracker.Detect(g, &tracker.Options{Seed: 1})
		times = append(times, time.Since(t1).Seconds())
		builds = append(builds, t1.Sub(t0).Seconds())
		if r == 0 {
			row.BytesPerEdge = float64(heap()-before) / float64(len(gg.Edges))
		}
	}
	slices.Sort(times)
	slices.Sort(builds)
	row.OursS = times[len(times)/2]
	row.BuildS = builds[len(builds)/2]
	row.QOurs = p.Modularity
	row.CommunitiesOurs = len(p.Communities)
	row.EdgesPerS = float64(len(gg.Edges)) / row.OursS
	row.NMIOurs = tracker.NMI(p.Membership, gg.Membership)
	runtime.KeepAlive(g)

	// Reference: gonum's Louvain on the same edges.
	ug := simple.NewUndirectedGraph()
	for i := 0; i < gg.N; i++ {
		ug.AddNode(simple.Node(i))
	}
	for _, e := range gg.Edges {
		ug.SetEdge(simple.Edge{F: simple.Node(e.U), T: simple.Node(e.V)})
	}
	t0 := time.Now()
	red := community.Modularize(ug, 1, rand.NewPCG(1, 1))
	row.RefS = time.Since(t0).Seconds()
	comms := red.Communities()
	row.QRef = community.Q(ug, comms, 1)
	row.CommunitiesRef = len(comms)
	row.Ratio = row.RefS / row.OursS
	ref := make([]uint32, gg.N)
	for ci, c := range comms {
		for _, nd := range c {
			ref[nd.ID()] = uint32(ci)
		}
	}
	row.NMIRef = tracker.NMI(ref, gg.Membership)
	_ = graph.Node(nil)
	return row, nil
}
