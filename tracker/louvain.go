package tracker

import (
	"math/rand/v2"
)

// solver holds the scratch space of one optimisation run. The hot loops
// below work on flat slices only: a dense weight accumulator indexed by
// community plus the list of communities it touched, reset after each node.
type solver struct {
	gamma float64
	cpm   bool // the CPM objective; modularity otherwise
	rng   *rand.Rand

	wsum    []float64 // accumulator indexed by community, all zero between nodes
	touched []uint32  // communities with a non-zero wsum entry
	ring    []uint32  // local-moving queue (ring buffer)
	inq     []bool    // node is in the queue
	moves   int       // node moves in the last run (all levels)
	visits  int       // queue pops of moveFast, summed until reset
	levels  int       // levels of the last run
	split   bool      // the last run may have left a community disconnected

	// in, tot and mass are in_c, tot_c and the summed node mass of the
	// communities of the last run, when it ended with every community a
	// single node (nil otherwise).
	in, tot, mass []float64

	// empty, if set, returns an empty community for moveFast (noSlot if
	// none); the tracker sets it to hand out free slots.
	empty func() uint32
	// allowEmpty lets moveFast move a node to an empty community of its own
	// level. run sets it for warm starts only, where it is what lets a full
	// pass split communities an early, sparse graph merged; from singletons
	// it cost a quarter of the run at 10^6 edges for no gain in Q.
	allowEmpty bool

	// onMove, if set, is called after moveFast moves node i from community
	// from to community to; wFrom and wTo are k_i,from and k_i,to (self-loop
	// excluded). The tracker keeps its per-community bookkeeping with it.
	onMove func(i, from, to uint32, wFrom, wTo float64)
}

func newSolver(o *Options, seed uint64) *solver {
	return &solver{gamma: o.Resolution, cpm: o.Objective == ObjectiveCPM, rng: rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))}
}

// scale is the factor lambda of the penalty of both objectives (doc.go,
// Objective): the gain of putting a lone node i into C is
// k_i,C - lambda a_i A_C, with a the node masses of the level and A their
// sum over C; lambda is gamma / 2m for modularity and gamma for CPM.
func (s *solver) scale(m2 float64) float64 {
	if s.cpm {
		return s.gamma
	}
	return s.gamma / m2
}

// grow sizes the scratch for n nodes and community slots.
func (s *solver) grow(n int) {
	if len(s.wsum) < n {
		s.wsum = make([]float64, n)
		s.ring = make([]uint32, n)
		s.inq = make([]bool, n)
	}
}

// blockMin is the node count from which local moving visits nodes in a
// seeded random order of blocks of 64 consecutive ids (each block in id
// order) instead of a fully random order: the adjacency of a block is one
// sequential read of the slab. Measured at 10^6 edges (LFR, mu = 0.3): the
// level-0 local moving took about 30% less time, with the same modularity.
const blockMin = 1 << 12

// visitOrder fills dst with the seeded visiting order of local moving.
func (s *solver) visitOrder(dst []uint32) {
	n := len(dst)
	if n < blockMin {
		s.perm(dst)
		return
	}
	const b = 64
	blocks := make([]uint32, (n+b-1)/b)
	s.perm(blocks)
	i := 0
	for _, blk := range blocks {
		for v := int(blk) * b; v < min(n, int(blk+1)*b); v++ {
			dst[i] = uint32(v)
			i++
		}
	}
}

// perm fills dst with a seeded random permutation of 0..len(dst)-1.
func (s *solver) perm(dst []uint32) {
	for i := range dst {
		dst[i] = uint32(i)
	}
	for i := len(dst) - 1; i > 0; i-- {
		j := s.rng.IntN(i + 1)
		dst[i], dst[j] = dst[j], dst[i]
	}
}

// moveTol is the smallest gain, relative to the node's degree, worth a move.
// Gains are computed in units of k_i,C - lambda a_i A_C (for modularity dQ
// of doc.go, Static, times m: the common factor 1/m is dropped), so the
// rounding error of a gain is a few ulps of k_i.
const moveTol = 1e-10

// moveFast is local moving with a queue (Traag et al. 2019, the "fast local
// move" of Leiden): nodes are taken from the queue, each moves to the
// neighbouring community of largest gain (ties: the lower community index),
// and when a node moves its neighbours outside the target community are
// queued again. comm and tot (the summed node mass A_C of each community)
// are updated in place. The queue starts with the nodes in start, in that
// order. It returns the number of moves.
//
// comm values must be below len(s.wsum); tot is indexed by community.
func (s *solver) moveFast(l *level, comm []uint32, tot []float64, start []uint32) int {
	n := l.n()
	if l.m2 <= 0 || n == 0 {
		return 0
	}
	scale := s.scale(l.m2)
	ring, inq, wsum := s.ring[:n], s.inq[:n], s.wsum
	touched := s.touched[:0]
	head, size := 0, 0
	for _, i := range start {
		if !inq[i] {
			inq[i] = true
			ring[(head+size)%n] = i
			size++
		}
	}
	moves := 0
	k, a, startOf, degOf, nbr, wt := l.k, l.a, l.start, l.deg, l.nbr, l.wt
	// Empty communities, the target of a node better off alone (Leiden's
	// local moving considers the empty community too). The tracker hands
	// out its free slots through s.empty; here, a stack of the unused ids.
	var members []uint32
	var free []uint32
	if s.empty == nil && s.allowEmpty {
		members = make([]uint32, len(tot))
		for _, c := range comm[:n] {
			members[c]++
		}
		for c := len(tot) - 1; c >= 0; c-- {
			if members[c] == 0 {
				free = append(free, uint32(c))
			}
		}
	}
	for size > 0 {
		i := ring[head]
		head++
		if head == n {
			head = 0
		}
		size--
		inq[i] = false
		s.visits++
		ki, ai := k[i], a[i]
		if ki == 0 {
			continue
		}
		ci := comm[i]
		st, d := startOf[i], degOf[i]
		nb, ws := nbr[st:st+d], wt[st:st+d]
		for p, j := range nb {
			c := comm[j]
			if wsum[c] == 0 {
				touched = append(touched, c)
			}
			wsum[c] += ws[p]
		}
		tot[ci] -= ai
		best := ci
		wFrom := wsum[ci]
		stay := wFrom - scale*ai*tot[ci]
		bestGain, bestW := stay, wFrom
		for _, c := range touched {
			g := wsum[c] - scale*ai*tot[c]
			if g > bestGain || (g == bestGain && c < best) {
				best, bestGain, bestW = c, g, wsum[c]
			}
			wsum[c] = 0
		}
		wsum[ci] = 0
		touched = touched[:0]
		if (s.empty != nil || s.allowEmpty) && bestGain < -moveTol*ki {
			// Alone (gain 0) beats every community it could be in.
			e := noSlot
			if s.empty != nil {
				e = s.empty()
			} else if len(free) > 0 {
				e = free[len(free)-1]
				free = free[:len(free)-1]
			}
			if e != noSlot {
				best, bestGain, bestW = e, 0, 0
			}
		}
		if best == ci || bestGain-stay <= moveTol*ki {
			tot[ci] += ai
			continue
		}
		tot[best] += ai
		comm[i] = best
		moves++
		if members != nil {
			members[best]++
			if members[ci]--; members[ci] == 0 {
				free = append(free, ci)
			}
		}
		if s.onMove != nil {
			s.onMove(i, ci, best, wFrom, bestW)
		}
		for _, j := range nb {
			if !inq[j] && comm[j] != best {
				inq[j] = true
				t := head + size
				if t >= n {
					t -= n
				}
				ring[t] = j
				size++
			}
		}
	}
	s.touched = touched
	return moves
}

// refine is the refinement phase of Leiden (Traag, Waltman and van Eck 2019,
// Algorithm A.2, MergeNodesSubset, with the greedy choice instead of the
// randomised one): inside each community S of comm, start from singletons;
// visit nodes in order; a node v that is still a singleton
// and is well connected to S, w(v, S-v) >= lambda a_v (A_S - a_v), joins
// the well-connected sub-community T of S, w(T, S-T) >= lambda A_T (A_S -
// A_T), of largest positive gain (a the node mass, A its sum, lambda of
// solver.scale: for modularity a = k and lambda = gamma / 2m, the
// conditions of doc.go, Static). tot holds A of each community.
// Every sub-community is connected, since v only joins a T it has an edge
// to. Nodes are visited in node order, not in a random one: reading the
// adjacency in slab order made the whole static run about a third faster
// at 10^6 edges with the same modularity (LFR, mu = 0.3), and the local
// moving that precedes it is already randomised. ref receives the sub-community of each node (dense after renumber);
// it returns their number.
func (s *solver) refine(l *level, comm []uint32, tot []float64, ref []uint32) int {
	n := l.n()
	scale := s.scale(l.m2)
	// The state read per adjacency entry is packed so that one random
	// access brings it in: (community, sub-community) per node, and
	// (w(T, S-T), tot_T, size) per sub-community (indexed by its first
	// node).
	type node struct{ comm, ref uint32 }
	type sub struct {
		ext, tot float64
		size     uint32
	}
	nd := make([]node, n)
	sb := make([]sub, n)
	k, startOf, degOf, nbr, wt := l.a, l.start, l.deg, l.nbr, l.wt
	for i := 0; i < n; i++ {
		nd[i] = node{comm[i], uint32(i)}
	}
	for i := 0; i < n; i++ {
		c := comm[i]
		st, d := startOf[i], degOf[i]
		var e float64
		for p := st; p < st+d; p++ {
			if nd[nbr[p]].comm == c {
				e += wt[p]
			}
		}
		sb[i] = sub{ext: e, tot: k[i], size: 1}
	}
	wsum := s.wsum
	touched := s.touched[:0]
	for v := 0; v < n; v++ {
		own := nd[v].ref
		if sb[own].size != 1 {
			continue
		}
		S := nd[v].comm
		totS, kv := tot[S], k[v]
		if sb[v].ext < scale*kv*(totS-kv) {
			continue
		}
		st, d := startOf[v], degOf[v]
		for p := st; p < st+d; p++ {
			j := nd[nbr[p]]
			if j.comm != S {
				continue
			}
			r := j.ref
			if wsum[r] == 0 {
				touched = append(touched, r)
			}
			wsum[r] += wt[p]
		}
		best, bestGain := own, moveTol*kv
		for _, r := range touched {
			t := &sb[r]
			if t.ext >= scale*t.tot*(totS-t.tot) {
				g := wsum[r] - scale*kv*t.tot
				if g > bestGain || (g == bestGain && r < best) {
					best, bestGain = r, g
				}
			}
		}
		if best != own {
			sb[own].size--
			b := &sb[best]
			b.size++
			b.tot += kv
			b.ext += sb[v].ext - 2*wsum[best]
			nd[v].ref = best
		}
		for _, r := range touched {
			wsum[r] = 0
		}
		touched = touched[:0]
	}
	s.touched = touched
	for i := range nd {
		ref[i] = nd[i].ref
	}
	return renumber(ref, s.ring)
}

// renumber maps the values of x onto 0..c-1 in order of first appearance
// and returns c. scratch must hold max(x)+1 entries.
func renumber(x []uint32, scratch []uint32) int {
	const unset = ^uint32(0)
	for _, v := range x {
		scratch[v] = unset
	}
	c := uint32(0)
	for i, v := range x {
		if scratch[v] == unset {
			scratch[v] = c
			c++
		}
		x[i] = scratch[v]
	}
	return int(c)
}

// aggregate builds the graph of the groups of ref (values 0..nr-1): one node
// per group, edge weights summed, the weight inside a group kept as a
// self-loop so that the degrees and 2m are unchanged (Blondel et al. 2008).
//
// It reads the adjacency in slab order (sequential) and scatters the
// entries into per-group buckets (a counting sort), then sums each bucket
// with the dense accumulator: two sequential passes instead of one pass in
// group order, which jumps around the slab.
func (s *solver) aggregate(l *level, ref []uint32, nr int) level {
	n := l.n()
	cnt := make([]uint32, nr+1)
	a := level{
		start: make([]uint32, nr),
		deg:   make([]uint32, nr),
		self:  make([]float64, nr),
		k:     make([]float64, nr),
		m2:    l.m2,
	}
	if s.cpm {
		a.a = make([]float64, nr)
	} else {
		a.a = a.k
	}
	for i := 0; i < n; i++ {
		r := ref[i]
		a.self[r] += l.self[i]
		a.k[r] += l.k[i]
		if s.cpm {
			a.a[r] += l.a[i]
		}
		cnt[r+1] += l.deg[i]
	}
	for r := 1; r <= nr; r++ {
		cnt[r] += cnt[r-1]
	}
	total := cnt[nr]
	bt := make([]uint32, total)
	bw := make([]float64, total)
	pos := make([]uint32, nr)
	copy(pos, cnt[:nr])
	for i := 0; i < n; i++ {
		r := ref[i]
		st, d := l.start[i], l.deg[i]
		q := pos[r]
		for p := st; p < st+d; p++ {
			bt[q] = ref[l.nbr[p]]
			bw[q] = l.wt[p]
			q++
		}
		pos[r] = q
	}
	// Sum each bucket in place: the output of group r never overtakes its
	// input, so the buckets become the aggregate's adjacency.
	wsum := s.wsum
	touched := s.touched[:0]
	out := uint32(0)
	for r := 0; r < nr; r++ {
		self := 0.0
		for q := cnt[r]; q < cnt[r+1]; q++ {
			t := bt[q]
			if t == uint32(r) {
				self += bw[q] / 2
				continue
			}
			if wsum[t] == 0 {
				touched = append(touched, t)
			}
			wsum[t] += bw[q]
		}
		a.self[r] += self
		a.start[r] = out
		a.deg[r] = uint32(len(touched))
		for _, t := range touched {
			bt[out], bw[out] = t, wsum[t]
			wsum[t] = 0
			out++
		}
		touched = touched[:0]
	}
	s.touched = touched
	a.nbr, a.wt = bt[:out:out], bw[:out:out]
	return a
}

// run optimises the partition of l, starting from init (nil: singletons),
// and returns the community of each node of l, dense in 0..c-1, and c.
// Levels follow Leiden: local moving, refinement, aggregation of the refined
// partition with the unrefined one as its start, until local moving leaves
// every aggregate node in a community of its own. Only then is every
// community guaranteed connected; when maxLevels stops the run earlier, or a
// refinement merged nothing, s.split is set and the caller splits
// disconnected communities.
func (s *solver) run(base level, init []uint32, maxLevels int) ([]uint32, int) {
	n0 := base.n()
	s.grow(n0)
	s.moves, s.levels, s.split = 0, 0, false
	nodeOf := make([]uint32, n0)
	for i := range nodeOf {
		nodeOf[i] = uint32(i)
	}
	comm := make([]uint32, n0)
	if init != nil {
		copy(comm, init)
		renumber(comm, s.ring)
	} else {
		copy(comm, nodeOf)
	}
	l := base
	var nc int
	for lvl := 0; ; lvl++ {
		n := l.n()
		tot := make([]float64, n)
		for i := 0; i < n; i++ {
			tot[comm[i]] += l.a[i]
		}
		order := make([]uint32, n)
		s.visitOrder(order)
		s.allowEmpty = init != nil
		s.moves += s.moveFast(&l, comm, tot, order)
		s.allowEmpty = false
		nc = renumber(comm, s.ring)
		s.levels = lvl + 1
		if nc == n {
			break
		}
		if lvl+1 >= maxLevels {
			s.split = true
			break
		}
		for i := 0; i < nc; i++ {
			tot[i] = 0
		}
		for i := 0; i < n; i++ {
			tot[comm[i]] += l.a[i]
		}
		ref := make([]uint32, n)
		nr := s.refine(&l, comm, tot, ref)
		if nr == n {
			// Nothing merged: aggregate the unrefined communities instead,
			// as Louvain does, and split at the end if need be.
			copy(ref, comm)
			nr = nc
			s.split = true
		}
		agg := s.aggregate(&l, ref, nr)
		next := make([]uint32, nr)
		for i := 0; i < n; i++ {
			next[ref[i]] = comm[i]
		}
		for i := range nodeOf {
			nodeOf[i] = ref[nodeOf[i]]
		}
		l, comm = agg, next
	}
	out := make([]uint32, n0)
	for i := range out {
		out[i] = comm[nodeOf[i]]
	}
	s.in, s.tot, s.mass = nil, nil, nil
	if !s.split {
		// Every community is one node of the last level: its totals are
		// that node's self-loop, degree and mass.
		s.in = make([]float64, nc)
		s.tot = make([]float64, nc)
		s.mass = make([]float64, nc)
		for v := 0; v < l.n(); v++ {
			c := comm[v]
			s.in[c] += 2 * l.self[v]
			s.tot[c] += l.k[v]
			s.mass[c] += l.a[v]
		}
	}
	return out, nc
}

// splitDisconnected relabels comm (dense, c communities) so that every
// community is connected in l: each connected part of a community beyond
// the one holding its lowest node gets a new label c, c+1, ... It returns
// the new count.
func splitDisconnected(l *level, comm []uint32, c int) int {
	n := l.n()
	seen := make([]bool, n)
	first := make([]bool, c) // community already has its first part
	stack := make([]uint32, 0, 64)
	next := uint32(c)
	for s := 0; s < n; s++ {
		if seen[s] {
			continue
		}
		old := comm[s]
		label := old
		if first[old] {
			label = next
			next++
		}
		first[old] = true
		seen[s] = true
		stack = append(stack[:0], uint32(s))
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			comm[i] = label
			st, d := l.start[i], l.deg[i]
			for p := st; p < st+d; p++ {
				j := l.nbr[p]
				if !seen[j] && comm[j] == old {
					seen[j] = true
					stack = append(stack, j)
				}
			}
		}
	}
	return int(next)
}
