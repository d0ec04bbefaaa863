package tracker

import (
	"math"
	"math/rand/v2"
)

// Rewire returns a degree-preserving random rewiring of g (the
// configuration-model null; see doc.go, Validation): about swaps double-edge
// swaps (a,b),(c,d) -> (a,d),(c,b), each edge keeping its weight, skipping
// swaps that would make a self-loop or a parallel edge (Maslov and Sneppen
// 2002). Node degrees (edge counts) are preserved exactly; on a weighted
// graph the weighted degrees are preserved only in distribution. Self-loops
// of g are kept as they are. Seeded and deterministic.
func Rewire(g *Graph, seed uint64, swaps int) *Graph {
	edges := g.EdgeList(nil)
	var loops, es []Edge
	for _, e := range edges {
		if e.U == e.V {
			loops = append(loops, e)
		} else {
			es = append(es, e)
		}
	}
	rng := rand.New(rand.NewPCG(seed, 0xc0ffee))
	key := func(u, v uint32) uint64 {
		if u > v {
			u, v = v, u
		}
		return uint64(u)<<32 | uint64(v)
	}
	present := make(map[uint64]bool, len(es))
	for _, e := range es {
		present[key(e.U, e.V)] = true
	}
	if len(es) >= 2 {
		for s := 0; s < swaps; s++ {
			i, j := rng.IntN(len(es)), rng.IntN(len(es))
			if i == j {
				continue
			}
			a, b, c, d := es[i].U, es[i].V, es[j].U, es[j].V
			if rng.IntN(2) == 0 {
				c, d = d, c
			}
			if a == d || c == b || present[key(a, d)] || present[key(c, b)] {
				continue
			}
			delete(present, key(a, b))
			delete(present, key(c, d))
			present[key(a, d)] = true
			present[key(c, b)] = true
			es[i].V, es[j].V = d, b
			es[j].U = c
		}
	}
	out := NewGraph(g.Len(), append(es, loops...))
	if g.nw != nil {
		out.nw = append([]float64(nil), g.nw...)
	}
	for i := range g.alive {
		if !g.alive[i] && out.alive[i] {
			out.alive[i] = false
			out.nodes--
		}
	}
	return out
}

// Significance is the observed quality of a partition against what the
// same optimiser reaches on rewired graphs with the same degrees.
type Significance struct {
	Observed float64
	// NullMean and NullStd summarise the quality on the rewired graphs; Z
	// is (Observed - NullMean) / NullStd (0 when NullStd is 0).
	NullMean, NullStd, Z float64
	Null                 []float64
	// Communities are the communities found on the rewired graphs, with
	// their InternalZ, for [Calibrate].
	Communities []NullCommunity
}

// Null runs the optimiser with o on k rewirings of g ([NullRun] 0..k-1)
// and compares observed with the quality of o's objective they reach (Q,
// or H for CPM; node weights are kept).
func Null(g *Graph, o *Options, observed float64, k int) Significance {
	runs := make([]NullResult, k)
	for r := range runs {
		runs[r] = NullRun(g, o, r)
	}
	return Summarise(observed, runs)
}

// NullResult is one optimised rewiring.
type NullResult struct {
	Quality     float64
	Communities []NullCommunity
}

// NullRun is run r of [Null]: the optimiser with o on the rewiring of g
// with seed o.Seed+r+1 (10 |E| swaps). Runs are independent, so a caller
// may run them in parallel; each is deterministic.
func NullRun(g *Graph, o *Options, r int) NullResult {
	rg := Rewire(g, o.Seed+uint64(r)+1, 10*g.Edges())
	p := Detect(rg, o)
	res := NullResult{Quality: p.Quality}
	m := rg.TotalWeight()
	wbar := 0.0
	if rg.Edges() > 0 {
		wbar = m / float64(rg.Edges())
	}
	for _, c := range p.Communities {
		_, z := InternalZ(c.Internal, c.Degree, m, wbar)
		res.Communities = append(res.Communities, NullCommunity{Size: c.Size, Z: z})
	}
	return res
}

// Summarise is the Significance of observed against the runs of Null.
func Summarise(observed float64, runs []NullResult) Significance {
	s := Significance{Observed: observed}
	k := len(runs)
	for _, r := range runs {
		s.Null = append(s.Null, r.Quality)
		s.NullMean += r.Quality
		s.Communities = append(s.Communities, r.Communities...)
	}
	if k == 0 {
		return s
	}
	s.NullMean /= float64(k)
	for _, q := range s.Null {
		s.NullStd += (q - s.NullMean) * (q - s.NullMean)
	}
	if k > 1 {
		s.NullStd = math.Sqrt(s.NullStd / float64(k-1))
	}
	if s.NullStd > 0 {
		s.Z = (observed - s.NullMean) / s.NullStd
	}
	return s
}

// ExpectedInternal returns the internal weight a community of summed degree
// tot would hold in the configuration model of a graph of total weight m:
// sum over pairs of k_i k_j / 2m, that is tot^2 / 4m (self pairs included).
func ExpectedInternal(tot, m float64) float64 {
	if m <= 0 {
		return 0
	}
	return tot * tot / (4 * m)
}
