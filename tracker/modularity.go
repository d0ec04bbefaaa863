package tracker

// Modularity returns Q of the partition comm of g with resolution gamma
// (Newman 2006; Reichardt and Bornholdt 2006; see doc.go, Objective):
//
//	Q = sum over c of [ in_c / 2m - gamma (tot_c / 2m)^2 ]
//
// in_c counts each internal edge from both ends and a self-loop of weight w
// as 2w. comm holds any labels; nodes labelled none (tracker.NoCommunity for
// uint64 labels, all ones for uint32) and absent nodes are left out. The
// sums run in node order, so the result is deterministic.
func Modularity[L uint32 | uint64](g *Graph, comm []L, gamma float64) float64 {
	if g.m2 <= 0 {
		return 0
	}
	none := ^L(0)
	dense := make(map[L]int32, 64)
	idx := make([]int32, len(comm))
	for i, c := range comm {
		if c == none || i >= len(g.deg) || !g.alive[i] {
			idx[i] = -1
			continue
		}
		d, ok := dense[c]
		if !ok {
			d = int32(len(dense))
			dense[c] = d
		}
		idx[i] = d
	}
	in := make([]float64, len(dense))
	tot := make([]float64, len(dense))
	for i := range idx {
		c := idx[i]
		if c < 0 {
			continue
		}
		tot[c] += g.k[i]
		in[c] += 2 * g.self[i]
		s, d := g.start[i], g.deg[i]
		for p := s; p < s+d; p++ {
			if j := g.nbr[p]; int(j) < len(idx) && idx[j] == c {
				in[c] += g.wt[p]
			}
		}
	}
	return qFrom(in, tot, g.m2, gamma)
}

// qFrom sums Q from per-community in_c and tot_c.
func qFrom(in, tot []float64, m2, gamma float64) float64 {
	if m2 <= 0 {
		return 0
	}
	var q float64
	for c := range in {
		f := tot[c] / m2
		q += in[c]/m2 - gamma*f*f
	}
	return q
}

// CPM returns the Constant Potts Model quality of the partition comm of g
// with resolution gamma (Traag, Van Dooren and Nesterov 2011; see doc.go,
// Objective):
//
//	H = sum over c of [ e_c - gamma n_c (n_c - 1) / 2 ]
//
// e_c is the weight of the edges inside c, each counted once (a self-loop
// of weight w counts w), and n_c the summed node weight of c (its size when
// every node weighs 1). Labels and absent nodes are treated as in
// Modularity; the sums run in node order.
func CPM[L uint32 | uint64](g *Graph, comm []L, gamma float64) float64 {
	none := ^L(0)
	dense := make(map[L]int32, 64)
	e := []float64{}
	n := []float64{}
	for i, c := range comm {
		if c == none || i >= len(g.deg) || !g.alive[i] {
			continue
		}
		d, ok := dense[c]
		if !ok {
			d = int32(len(e))
			dense[c] = d
			e = append(e, 0)
			n = append(n, 0)
		}
		n[d] += g.NodeWeight(uint32(i))
		e[d] += g.self[i]
		s, dg := g.start[i], g.deg[i]
		for p := s; p < s+dg; p++ {
			if j := g.nbr[p]; j > uint32(i) && int(j) < len(comm) && comm[j] == c {
				e[d] += g.wt[p]
			}
		}
	}
	var h float64
	for c := range e {
		h += e[c] - gamma*n[c]*(n[c]-1)/2
	}
	return h
}

// cpmFrom sums H from per-community in_c (internal weight from both ends)
// and n_c (summed node weight).
func cpmFrom(in, n []float64, gamma float64) float64 {
	var h float64
	for c := range in {
		h += in[c]/2 - gamma*n[c]*(n[c]-1)/2
	}
	return h
}
