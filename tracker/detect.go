package tracker

import "math"

// Partition is the result of a static run.
type Partition struct {
	// Membership is the stable community id of each node slot of the graph;
	// NoCommunity for absent nodes.
	Membership []uint64
	// Communities holds the statistics of each community, sorted by ID.
	Communities []CommunityStats
	// Quality is the value of the options' objective: Q at the options'
	// resolution for modularity, H for CPM (doc.go, Objective).
	Quality float64
	// Modularity is Q at the options' resolution for the modularity
	// objective; for CPM, Q at resolution 1, for comparison.
	Modularity float64
	// Levels and Moves describe the run: levels of aggregation, node moves.
	Levels, Moves int
}

// Detect runs static Louvain with the Leiden refinement on g from singletons
// and returns a partition whose communities are all connected. Ids are
// handed out from 1 in order of decreasing community size. It panics if o
// does not validate; callers validate options first.
func Detect(g *Graph, o *Options) *Partition {
	return DetectFrom(g, o, nil)
}

// DetectFrom is Detect warm-started from prev (a stable id per node slot, as
// in Partition.Membership; NoCommunity or a missing entry means a singleton):
// the run starts from that partition and the communities that continue keep
// their ids by the rule in doc.go. Fresh ids start above the largest id in
// prev.
func DetectFrom(g *Graph, o *Options, prev []uint64) *Partition {
	return detectFrom(g, o, prev, 0)
}

// detectFrom is DetectFrom with fresh ids starting at next, or above the
// largest id in prev if that is larger.
func detectFrom(g *Graph, o *Options, prev []uint64, next uint64) *Partition {
	opts := *o
	opts.EnsureDefaults()
	if err := opts.Validate(); err != nil {
		panic(err)
	}
	n := g.Len()
	var init []uint32
	next = max(next, 1)
	if prev != nil {
		init = make([]uint32, n)
		dense := make(map[uint64]uint32)
		for i := 0; i < n; i++ {
			id := NoCommunity
			if i < len(prev) {
				id = prev[i]
			}
			if id != NoCommunity && id >= next {
				next = id + 1
			}
			if id == NoCommunity || !g.alive[i] {
				init[i] = uint32(i)
				continue
			}
			d, ok := dense[id]
			if !ok {
				// Labels of warm-start groups are node ids of their first
				// member, so they never collide with a singleton's label.
				d = uint32(i)
				dense[id] = d
			}
			init[i] = d
		}
	}
	s := newSolver(&opts, opts.Seed)
	l := g.view(opts.Objective)
	comm, c := s.run(l, init, opts.MaxLevels)
	if s.split {
		c = splitDisconnected(&l, comm, c)
	}
	in, tot, mass := s.in, s.tot, s.mass
	levels, moves := s.levels, s.moves
	// Further passes (Traag, Waltman and van Eck 2019 iterate the
	// algorithm): each restarts from the last partition and is kept only
	// when it raises the quality.
	passes := opts.Passes
	if passes == 0 {
		passes = maxPasses
	}
	q := s.quality(g, comm, c, &opts)
	for pass := 1; pass < passes; pass++ {
		next, nc := s.run(l, comm, opts.MaxLevels)
		if s.split {
			nc = splitDisconnected(&l, next, nc)
		}
		moves += s.moves
		nq := s.quality(g, next, nc, &opts)
		if !(nq > q+1e-10*max(1, math.Abs(q))) {
			break
		}
		gain := nq - q
		comm, c, q = next, nc, nq
		in, tot, mass = s.in, s.tot, s.mass
		levels = s.levels
		if gain < passGain*math.Abs(q) {
			break
		}
	}
	var prevIDs []uint64
	if prev != nil {
		prevIDs = make([]uint64, n)
		for i := range prevIDs {
			prevIDs[i] = NoCommunity
			if i < len(prev) && g.alive[i] {
				prevIDs[i] = prev[i]
			}
		}
	}
	p := finish(g, comm, c, prevIDs, &next, &opts, in, tot, mass)
	p.Levels, p.Moves = levels, moves
	return p
}

// maxPasses caps the passes of a static run when Options.Passes is zero,
// and passGain is the relative gain below which a pass is the last one.
// Chosen defaults: on an invented planted partition of 9 x 10^5 edges the
// passes gained 1%, 0.4% and 0.05% and reached the planted Q; on LFR they
// went on gaining 0.01% each for a dozen passes, at 0.15 s a pass. At 0.1%
// (shoal-bench refs) the planted and the LFR graph kept the same Q to 10^-4
// as at 0.01%, a fifth to a quarter faster.
const (
	maxPasses = 16
	passGain  = 1e-3
)

// quality is the objective's value of the dense partition comm of g that
// the solver's last run returned: from the run's own totals when it has
// them (O(communities)), else recounted.
func (s *solver) quality(g *Graph, comm []uint32, c int, o *Options) float64 {
	if s.in == nil || len(s.in) != c {
		return denseQuality(g, comm, c, o)
	}
	if o.Objective == ObjectiveCPM {
		return cpmFrom(s.in, s.mass, o.Resolution)
	}
	return qFrom(s.in, s.tot, g.m2, o.Resolution)
}

// denseQuality is the objective's value of a dense partition of g.
func denseQuality(g *Graph, comm []uint32, c int, o *Options) float64 {
	in, tot := communityTotals(g, comm, c)
	if o.Objective != ObjectiveCPM {
		return qFrom(in, tot, g.m2, o.Resolution)
	}
	return cpmFrom(in, communityWeights(g, comm, c), o.Resolution)
}

// communityWeights returns the summed node weight of each community of a
// dense partition.
func communityWeights(g *Graph, comm []uint32, c int) []float64 {
	w := make([]float64, c)
	for i, ci := range comm {
		if g.alive[i] {
			w[ci] += g.NodeWeight(uint32(i))
		}
	}
	return w
}

// finish turns a dense partition into a Partition: stable ids, statistics
// and exact modularity.
// in, tot and mass, when not nil, are the totals the optimiser already
// has (mass: the summed node weights for CPM, degrees for modularity).
func finish(g *Graph, comm []uint32, c int, prev []uint64, next *uint64, o *Options, in, tot, mass []float64) *Partition {
	ids := assignIDs(comm, c, nil, prev, g.k, next)
	if in == nil {
		in, tot = communityTotals(g, comm, c)
		mass = nil
	}
	// For CPM the optimiser's masses are the node weights; for modularity
	// they are the degrees, and the weights are summed here.
	weight := mass
	if o.Objective != ObjectiveCPM || weight == nil {
		weight = communityWeights(g, comm, c)
	}
	size := make([]int, c)
	for i := range comm {
		if g.alive[i] {
			size[comm[i]]++
		}
	}
	p := &Partition{Membership: make([]uint64, len(comm))}
	for i, ci := range comm {
		if g.alive[i] {
			p.Membership[i] = ids[ci]
		} else {
			p.Membership[i] = NoCommunity
		}
	}
	for ci := 0; ci < c; ci++ {
		if size[ci] == 0 {
			continue
		}
		p.Communities = append(p.Communities, CommunityStats{ID: ids[ci], Size: size[ci], Internal: in[ci] / 2, Degree: tot[ci], Weight: weight[ci]})
	}
	sortStats(p.Communities)
	if o.Objective == ObjectiveCPM {
		p.Modularity = qFrom(in, tot, g.m2, 1)
		p.Quality = cpmFrom(in, weight, o.Resolution)
	} else {
		p.Modularity = qFrom(in, tot, g.m2, o.Resolution)
		p.Quality = p.Modularity
	}
	return p
}

// communityTotals returns in_c (internal weight from both ends, loops 2w)
// and tot_c for a dense partition, summed in node order.
func communityTotals(g *Graph, comm []uint32, c int) (in, tot []float64) {
	in = make([]float64, c)
	tot = make([]float64, c)
	for i, ci := range comm {
		if !g.alive[i] {
			continue
		}
		tot[ci] += g.k[i]
		in[ci] += 2 * g.self[i]
		s, d := g.start[i], g.deg[i]
		for p := s; p < s+d; p++ {
			if comm[g.nbr[p]] == ci {
				in[ci] += g.wt[p]
			}
		}
	}
	return in, tot
}
