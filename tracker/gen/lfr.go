package gen

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"
)

// LFROptions configure [LFR]. The defaults are the "S" set of Lancichinetti
// & Fortunato 2009 (PRE 80, 056117): N = 1000, <k> = 20, k_max = 50,
// tau1 = 2, tau2 = 1, community sizes 10..50.
type LFROptions struct {
	// N is the number of nodes. Default 1000.
	N int
	// AvgDegree is the mean degree <k>; the lower end of the degree law is
	// fitted so that its mean is exactly this. Default 20.
	AvgDegree float64
	// MaxDegree is the largest degree k_max, at most N-1. Default 50.
	MaxDegree int
	// Tau1 is the exponent of the degree law P(k) ~ k^-Tau1, in (0, 10].
	// Default 2 (zero means the default).
	Tau1 float64
	// Tau2 is the exponent of the community-size law P(s) ~ s^-Tau2, in
	// (0, 10]. Default 1 (zero means the default).
	Tau2 float64
	// MinCommunity and MaxCommunity bound the community sizes. Defaults 10
	// and 50; MaxCommunity defaults higher when a node of degree MaxDegree
	// would not fit (internal degree round((1-Mu)*MaxDegree) + 1, so the
	// zero value with Mu = 0 works).
	MinCommunity, MaxCommunity int
	// Mu is the mixing parameter: the fraction of each node's edges that
	// leave its community, in [0, 1]. No default: zero means none.
	Mu float64
	// Seed selects the random stream. Zero is a seed like any other.
	Seed uint64
}

// EnsureDefaults fills the zero fields that have a default.
func (o *LFROptions) EnsureDefaults() {
	if o.N == 0 {
		o.N = 1000
	}
	if o.AvgDegree == 0 {
		o.AvgDegree = 20
	}
	if o.MaxDegree == 0 {
		o.MaxDegree = 50
	}
	if o.Tau1 == 0 {
		o.Tau1 = 2
	}
	if o.Tau2 == 0 {
		o.Tau2 = 1
	}
	if o.MinCommunity == 0 {
		o.MinCommunity = 10
	}
	if o.MaxCommunity == 0 {
		o.MaxCommunity = 50
		if o.Mu >= 0 && o.Mu <= 1 {
			o.MaxCommunity = max(50, lfrInternal(o.MaxDegree, o.Mu)+1)
		}
	}
}

// Validate reports every out-of-range or contradictory option at once,
// wrapped in [ErrInvalidOptions].
func (o *LFROptions) Validate() error {
	var bad []string
	add := func(format string, args ...any) { bad = append(bad, fmt.Sprintf(format, args...)) }
	okN := o.N >= 2 && o.N <= maxNodes
	if !okN {
		add("N = %d, must be in [2, %d]", o.N, maxNodes)
	}
	okK := o.MaxDegree >= 1 && (!okN || o.MaxDegree <= o.N-1)
	if !okK {
		add("MaxDegree = %d, must be in [1, N-1 = %d]", o.MaxDegree, o.N-1)
	}
	okAvg := o.AvgDegree > 0 && !math.IsInf(o.AvgDegree, 0) && (!okK || o.AvgDegree <= float64(o.MaxDegree))
	if !okAvg {
		add("AvgDegree = %g, must be in (0, MaxDegree = %d]", o.AvgDegree, o.MaxDegree)
	}
	okTau1 := o.Tau1 > 0 && o.Tau1 <= 10
	if !okTau1 {
		add("Tau1 = %g, must be in (0, 10]", o.Tau1)
	}
	if !(o.Tau2 > 0 && o.Tau2 <= 10) {
		add("Tau2 = %g, must be in (0, 10]", o.Tau2)
	}
	okS := o.MinCommunity >= 1 && o.MaxCommunity >= o.MinCommunity && (!okN || o.MaxCommunity <= o.N)
	if !okS {
		add("community sizes [%d, %d], need 1 <= MinCommunity <= MaxCommunity <= N = %d",
			o.MinCommunity, o.MaxCommunity, o.N)
	}
	okMu := o.Mu >= 0 && o.Mu <= 1
	if !okMu {
		add("Mu = %g, must be in [0, 1]", o.Mu)
	}
	if okN && okS {
		// Some count m of communities must have m*min <= N <= m*max.
		if lo, hi := ceilDiv(o.N, o.MaxCommunity), o.N/o.MinCommunity; lo > hi {
			add("no number of communities with sizes in [%d, %d] sums to N = %d", o.MinCommunity, o.MaxCommunity, o.N)
		} else if hi < 2 && o.Mu > 0 {
			add("Mu = %g > 0 needs at least two communities, but N/MinCommunity = %d", o.Mu, hi)
		}
	}
	if okK && okS && okMu {
		// LFR 2008, section II: a node can only join a community larger than
		// its internal degree, so the largest degree must fit the largest
		// community.
		if kin := lfrInternal(o.MaxDegree, o.Mu); kin > o.MaxCommunity-1 {
			add("a node of degree MaxDegree = %d has internal degree round((1-Mu)*%d) = %d, which needs MaxCommunity >= %d (have %d)",
				o.MaxDegree, o.MaxDegree, kin, kin+1, o.MaxCommunity)
		}
	}
	if okK && okAvg && okTau1 {
		if _, _, ok := fitMean(o.MaxDegree, o.Tau1, o.AvgDegree); !ok {
			pl := newPowerLaw(1, o.MaxDegree, o.Tau1, 1)
			add("AvgDegree = %g is below %.3g, the mean of the degree law on [1, MaxDegree = %d] with Tau1 = %g",
				o.AvgDegree, pl.mean(), o.MaxDegree, o.Tau1)
		}
	}
	if len(bad) > 0 {
		return fmt.Errorf("%w: lfr: %s", ErrInvalidOptions, strings.Join(bad, "; "))
	}
	return nil
}

func ceilDiv(a, b int) int { return (a + b - 1) / b }

// lfrInternal is the internal degree of a node of degree k: round((1-mu)k)
// (LFR 2008, section II, step 3). Halves round to even: rounding them all
// up would bias the mixing low at mu = 0.5 (by about E[1/k]/4, 0.016 at
// <k> = 20).
func lfrInternal(k int, mu float64) int {
	return int(math.RoundToEven((1 - mu) * float64(k)))
}

// Tuning constants. They bound work, never change a valid result's shape.
const (
	// sizeAttempts bounds the redraws of the community sizes.
	sizeAttempts = 100
	// randomTries is the number of random partners tried to repair one bad
	// edge before a scan.
	randomTries = 32
	// scanLimit bounds the scan for a partner in the external batch.
	scanLimit = 1 << 16
	// maxDroppedFrac is the largest fraction of edges that may be given up
	// (unrepairable) before LFR reports ErrInfeasible.
	maxDroppedFrac = 0.01
)

// LFR returns a graph of the LFR benchmark (Lancichinetti, Fortunato &
// Radicchi 2008, "Benchmark graphs for testing community detection
// algorithms", PRE 78, 046110), section II:
//
//  1. Degrees follow a power law with exponent Tau1 on [k_min, MaxDegree],
//     k_min fitted so that the mean is AvgDegree (see fitMean: the lowest
//     integer gets a fraction of its weight, a fractional k_min in effect).
//  2. Community sizes follow a power law with exponent Tau2 on
//     [MinCommunity, MaxCommunity] and sum exactly to N.
//  3. Node i gets internal degree round((1-Mu) k_i) (halves to even) and is
//     placed in a community larger than that, by the paper's procedure: a
//     homeless node joins a random community (here: one drawn in proportion
//     to its size among those big enough), and if that community is full a
//     random member is kicked out and becomes homeless. The walk is bounded
//     to 8N steps; the few nodes still homeless then take random free slots
//     or, where none fits, places freed by augmenting paths, which always
//     succeed when the sizes can hold the internal degrees at all (Hall's
//     condition, checked first: ErrInfeasible if it fails). Where the
//     internal degrees of a community sum to an odd number, one member's is
//     moved by one.
//  4. Inside each community the internal stubs are paired by the
//     configuration model, then the external stubs across the whole graph.
//     Self-loops, multi-edges and external edges that land inside their own
//     community are repaired by degree-preserving swaps with a random good
//     edge of the same kind. An internal edge that cannot be repaired turns
//     its two stubs external; an external one that cannot be repaired is
//     dropped (rare; more than 1% of edges dropped is an error).
//
// The realised mixing ([Graph.Mixing]) is therefore Mu up to the rounding
// of internal degrees and those rare repairs. The rounding matters when
// degrees are small: on the LF2009 sets (k_min about 10) the realised
// mixing is within 0.01 of Mu, but with <k> = 20 and k_max = 1000 (k_min =
// 4) Mu = 0.3 gives 0.276, which is what round((1-Mu) k) prescribes for
// those degrees.
func LFR(o LFROptions) (*Graph, error) {
	o.EnsureDefaults()
	if err := o.Validate(); err != nil {
		return nil, err
	}
	r := newRNG(o.Seed)
	n := o.N

	// Step 1: degrees.
	lo, theta, _ := fitMean(o.MaxDegree, o.Tau1, o.AvgDegree) // ok checked by Validate
	degLaw := newPowerLaw(lo, o.MaxDegree, o.Tau1, theta)
	deg := make([]int32, n)
	total := 0
	for i := range deg {
		deg[i] = int32(degLaw.sample(r))
		total += int(deg[i])
	}
	if total%2 == 1 {
		// The stubs must pair up: move one random node by one.
		i := r.intn(n)
		if int(deg[i]) < o.MaxDegree {
			deg[i]++
		} else {
			deg[i]--
		}
	}
	kin := make([]int32, n)
	for i, k := range deg {
		kin[i] = int32(lfrInternal(int(k), o.Mu))
	}

	// Step 2: community sizes.
	minCount := 1
	if o.Mu > 0 {
		minCount = 2 // external edges need another community
	}
	sizes, err := lfrSizes(r, n, o.MinCommunity, o.MaxCommunity, o.Tau2, minCount)
	if err != nil {
		return nil, err
	}

	// Step 3: membership.
	a, err := lfrAssign(r, kin, sizes)
	if err != nil {
		return nil, err
	}
	a.fixParity(r, kin, deg)

	// Step 4: wiring.
	w := newWiring(a.comm, total/2+1)
	var extStubs []uint32
	stubs := make([]uint32, 0, 2*o.MaxDegree)
	for c := range sizes {
		stubs = stubs[:0]
		for _, v := range a.membersOf(c) {
			for range kin[v] {
				stubs = append(stubs, v)
			}
		}
		extStubs = w.wire(r, stubs, false, extStubs)
	}
	stubs = make([]uint32, 0, total-2*len(w.eu)+len(extStubs))
	for v := range n {
		for range deg[v] - kin[v] {
			stubs = append(stubs, uint32(v))
		}
	}
	stubs = append(stubs, extStubs...)
	dropped := w.wire(r, stubs, true, nil)
	if len(dropped) > 0 && float64(len(dropped)/2) > maxDroppedFrac*float64(total/2) {
		return nil, fmt.Errorf("%w: lfr: %d of %d edges could not be placed without self-loops or multi-edges (Mu = %g, %d communities)",
			ErrInfeasible, len(dropped)/2, total/2, o.Mu, len(sizes))
	}

	return &Graph{N: n, Edges: edgesFromKeys(w.keys(), n), Membership: a.comm}, nil
}

// lfrSizes draws community sizes from the power law with exponent tau on
// [smin, smax] until they cover n, then trims the overshoot: one unit at a
// time off random communities still above smin, or, when that is
// impossible, it drops the last community and adds the deficit one unit at a
// time to random communities still below smax. Redraws (bounded) when
// neither fits or there are fewer than minCount communities.
func lfrSizes(r *rng, n, smin, smax int, tau float64, minCount int) ([]int, error) {
	law := newPowerLaw(smin, smax, tau, 1)
	var sizes []int
	for range sizeAttempts {
		sizes = sizes[:0]
		sum := 0
		for sum < n {
			s := law.sample(r)
			sizes = append(sizes, s)
			sum += s
		}
		m := len(sizes)
		switch {
		case sum == n:
		case n >= m*smin:
			for excess := sum - n; excess > 0; {
				if c := r.intn(m); sizes[c] > smin {
					sizes[c]--
					excess--
				}
			}
		case (m-1)*smax >= n && m > 1:
			sum -= sizes[m-1]
			sizes = sizes[:m-1]
			for deficit := n - sum; deficit > 0; {
				if c := r.intn(m - 1); sizes[c] < smax {
					sizes[c]++
					deficit--
				}
			}
		default:
			continue
		}
		if len(sizes) < minCount {
			continue
		}
		return sizes, nil
	}
	return nil, fmt.Errorf("%w: lfr: no %d or more community sizes in [%d, %d] summing to %d after %d draws",
		ErrInfeasible, minCount, smin, smax, n, sizeAttempts)
}

// assignment is a membership: the members of community c are
// members[off[c]:off[c+1]].
type assignment struct {
	comm    []uint32
	members []uint32
	off     []int
}

func (a *assignment) membersOf(c int) []uint32 { return a.members[a.off[c]:a.off[c+1]] }

// lfrAssign places every node i in a community of size > kin[i] (LFR 2008,
// section II, step 3; the procedure is described at [LFR]).
//
// The paper's homeless-node walk runs for at most kickSteps*n steps. Its
// tail is slow (the last homeless nodes wait for a random draw to hit one
// of the few free slots they may take; with tight sizes it wandered for
// over 500 n steps in a trial), so the nodes still homeless after it are
// placed by [placer.complete]: a random free slot where there is one, an
// augmenting path otherwise. That always succeeds when Hall's condition
// holds, and [newPlacer] checks it first.
func lfrAssign(r *rng, kin []int32, sizes []int) (*assignment, error) {
	p, err := newPlacer(kin, sizes)
	if err != nil {
		return nil, err
	}
	homeless := p.walk(r, r.perm(len(kin)), kickSteps*len(kin))
	if err := p.complete(r, homeless); err != nil {
		return nil, err
	}
	return p.result(), nil
}

// placer is the state of lfrAssign. Community c's members so far are
// a.members[a.off[c] : a.off[c]+fill[c]].
type placer struct {
	a         *assignment
	kin       []int32
	sizes     []int
	fill      []int
	order     []int    // communities by increasing size (rank order)
	firstRank []int    // firstRank[t]: the first rank whose size is > t
	firstSlot []int    // firstSlot[t]: the first slot of rank firstRank[t]
	slotComm  []uint32 // the community of each slot, slots in rank order
	minKin    []int32  // least internal degree among the members (complete)
	parent    []int    // BFS tree of augment; -1 is the homeless node
	queue     []int    // scratch for augment
	free      fenwick  // free slots by rank (complete)
}

// newPlacer lays out the communities and checks Hall's condition for these
// nested choices: for every t, the nodes with internal degree >= t must fit
// in the communities of size > t. If it fails no assignment exists and the
// error (ErrInfeasible) says for which t.
func newPlacer(kin []int32, sizes []int) (*placer, error) {
	n, nc := len(kin), len(sizes)
	p := &placer{kin: kin, sizes: sizes}
	// Slots laid out in rank order, so the communities big enough for
	// internal degree t are the ranks firstRank[t].. and own the slots
	// firstSlot[t]..n-1.
	p.order = make([]int, nc)
	for c := range p.order {
		p.order[c] = c
	}
	slices.SortFunc(p.order, func(x, y int) int {
		return cmp.Or(cmp.Compare(sizes[x], sizes[y]), cmp.Compare(x, y))
	})
	p.slotComm = make([]uint32, 0, n)
	for _, c := range p.order {
		for range sizes[c] {
			p.slotComm = append(p.slotComm, uint32(c))
		}
	}
	maxKin := int(slices.Max(kin))
	p.firstSlot = make([]int, maxKin+1)
	p.firstRank = make([]int, maxKin+1)
	rank, slot := 0, 0
	for t := range p.firstSlot {
		for rank < nc && sizes[p.order[rank]] <= t {
			slot += sizes[p.order[rank]]
			rank++
		}
		p.firstSlot[t], p.firstRank[t] = slot, rank
	}
	atLeast := make([]int, maxKin+2)
	for _, k := range kin {
		atLeast[k]++
	}
	for t := maxKin - 1; t >= 0; t-- {
		atLeast[t] += atLeast[t+1]
	}
	for t := maxKin; t >= 0; t-- {
		if room := n - p.firstSlot[t]; atLeast[t] > room {
			return nil, fmt.Errorf("%w: lfr: %d nodes have internal degree >= %d but the communities larger than %d hold only %d nodes (raise MaxCommunity or Mu, or lower MaxDegree)",
				ErrInfeasible, atLeast[t], t, t, room)
		}
	}
	p.a = &assignment{comm: make([]uint32, n), members: make([]uint32, n), off: make([]int, nc+1)}
	for c, s := range sizes {
		p.a.off[c+1] = p.a.off[c] + s
	}
	p.fill = make([]int, nc)
	return p, nil
}

// walk runs the paper's procedure on the homeless nodes in queue for at
// most maxSteps steps and returns those still homeless. Each step takes the
// next homeless node v and a uniformly random slot among the communities
// larger than kin[v]; if that community is full, a random member is kicked
// out and becomes homeless in v's place. queue is used as a FIFO ring
// (a kicked node goes to the back), so consecutive steps are independent
// and the processor can overlap their cache misses. The caller keeps
// len(queue) equal to the number of nodes not yet placed.
func (p *placer) walk(r *rng, queue []uint32, maxSteps int) []uint32 {
	a, n := p.a, len(queue)
	head, count := 0, n
	for steps := 0; count > 0 && steps < maxSteps; steps++ {
		v := queue[head]
		head++
		if head == n {
			head = 0
		}
		count--
		lo := p.firstSlot[p.kin[v]]
		c := p.slotComm[lo+r.intn(len(p.slotComm)-lo)]
		if p.fill[c] < p.sizes[c] {
			a.members[a.off[c]+p.fill[c]] = v
			p.fill[c]++
			continue
		}
		j := a.off[c] + r.intn(p.sizes[c])
		tail := head + count
		if tail >= n {
			tail -= n
		}
		queue[tail] = a.members[j]
		count++
		a.members[j] = v
	}
	homeless := make([]uint32, 0, count)
	for i := range count {
		homeless = append(homeless, queue[(head+i)%n])
	}
	return homeless
}

// result fills in the community of every node once all are placed.
func (p *placer) result() *assignment {
	for c := range p.sizes {
		for _, v := range p.a.membersOf(c) {
			p.a.comm[v] = uint32(c)
		}
	}
	return p.a
}

// kickSteps bounds the paper's placement walk to kickSteps*N steps. At the
// LF2009 "S" set it leaves about 2% of the nodes to [placer.complete] at
// mu = 0.1 and none at mu = 0.3. Fewer steps would be faster at N = 10^6,
// but the completion packs the most constrained nodes into the smallest
// communities that fit them, which makes nearly complete communities,
// more unrepairable internal edges and a realised mixing above mu (0.1026
// instead of 0.0988 at mu = 0.1 with one step per node).
const kickSteps = 8

// complete places the nodes left homeless by the walk, most constrained
// (largest internal degree) first: each takes a uniformly random free slot
// among the communities big enough for it if there is one, else it is
// placed by an augmenting path.
func (p *placer) complete(r *rng, homeless []uint32) error {
	if len(homeless) == 0 {
		return nil
	}
	nc := len(p.order)
	slices.SortStableFunc(homeless, func(x, y uint32) int { return cmp.Compare(p.kin[y], p.kin[x]) })
	p.minKin = make([]int32, nc)
	p.parent = make([]int, nc)
	p.free = newFenwick(nc)
	for rk, c := range p.order {
		p.updateMin(c)
		p.free.add(rk, p.sizes[c]-p.fill[c])
	}
	for _, v := range homeless {
		lo := p.reach(p.kin[v])
		before := p.free.prefix(lo)
		if room := p.free.total - before; room > 0 {
			rk := p.free.find(before + r.intn(room))
			c := p.order[rk]
			p.a.members[p.a.off[c]+p.fill[c]] = v
			p.fill[c]++
			p.free.add(rk, -1)
			p.minKin[c] = min(p.minKin[c], p.kin[v])
			continue
		}
		if !p.augment(v) {
			// Unreachable when Hall's condition holds (see augment).
			return fmt.Errorf("%w: lfr: no room for a node of internal degree %d", ErrInfeasible, p.kin[v])
		}
	}
	return nil
}

// updateMin recomputes the least internal degree among c's members, or
// MaxInt32 for an empty community (which then adds no reach).
func (p *placer) updateMin(c int) {
	m := int32(math.MaxInt32)
	for _, v := range p.a.members[p.a.off[c] : p.a.off[c]+p.fill[c]] {
		m = min(m, p.kin[v])
	}
	p.minKin[c] = m
}

// reach returns the first rank a node of internal degree k may join.
func (p *placer) reach(k int32) int {
	if int(k) >= len(p.firstRank) {
		return len(p.order)
	}
	return p.firstRank[k]
}

// augment places homeless node v along an augmenting path (Hopcroft & Karp
// 1973, here on a bipartite graph of nodes and community slots): v joins a
// community c1 big enough for it, which passes one member on to c2, and so
// on, until a community with a free slot takes the last one. Eligibility is
// nested (a node may join every community larger than its internal
// degree), so the member a community should pass on is one of least
// internal degree: it can go wherever any other member could. The search is
// breadth-first over communities; since what a community reaches is a
// suffix of the rank order, the reached set is always a suffix and each
// community is visited once. If no free slot is reached, the reached
// communities are exactly those larger than some t, all full, and they and
// v hold more nodes of internal degree >= t than they have slots: Hall's
// condition fails.
func (p *placer) augment(v uint32) bool {
	a := p.a
	low := len(p.order) // ranks low.. are reached
	queue := p.queue[:0]
	found, foundRank := -1, -1
	extend := func(newLow, from int) {
		for rk := newLow; rk < low && found < 0; rk++ {
			c := p.order[rk]
			p.parent[c] = from
			if p.fill[c] < p.sizes[c] {
				found, foundRank = c, rk
			}
			queue = append(queue, c)
		}
		low = newLow
	}
	extend(p.reach(p.kin[v]), -1)
	for head := 0; head < len(queue) && found < 0; head++ {
		c := queue[head]
		if nl := p.reach(p.minKin[c]); nl < low {
			extend(nl, c)
		}
	}
	p.queue = queue
	if found < 0 {
		return false
	}
	p.free.add(foundRank, -1)
	// Walk back: found takes the least-kin member of its parent, whose slot
	// takes the least-kin member of its parent, and so on; v fills the last.
	c := found
	for p.parent[c] >= 0 {
		from := p.parent[c]
		ms := a.members[a.off[from] : a.off[from]+p.fill[from]]
		j := 0
		for i, u := range ms {
			if p.kin[u] < p.kin[ms[j]] {
				j = i
			}
		}
		a.members[a.off[c]+p.fill[c]] = ms[j]
		p.fill[c]++
		ms[j] = ms[len(ms)-1]
		p.fill[from]--
		p.updateMin(c)
		p.updateMin(from)
		c = from
	}
	a.members[a.off[c]+p.fill[c]] = v
	p.fill[c]++
	p.updateMin(c)
	return true
}

// fixParity makes the internal degrees of every community sum to an even
// number, so its stubs pair up, by moving one random member's internal
// degree by one within [0, min(deg, size-1)] (an increment or a decrement,
// drawn at random, to keep the mixing unbiased).
func (a *assignment) fixParity(r *rng, kin, deg []int32) {
	for c := range len(a.off) - 1 {
		m := a.membersOf(c)
		sum := 0
		for _, v := range m {
			sum += int(kin[v])
		}
		if sum%2 == 0 {
			continue
		}
		start, up := r.intn(len(m)), r.intn(2) == 1
	search:
		for range 2 {
			for t := range m {
				v := m[(start+t)%len(m)]
				if up && kin[v] < deg[v] && int(kin[v]) < len(m)-1 {
					kin[v]++
					break search
				}
				if !up && kin[v] > 0 {
					kin[v]--
					break search
				}
			}
			up = !up
		}
	}
}

// wiring holds the edges placed so far: edge e joins eu[e] and ev[e]; bad[e]
// marks an edge that is not (yet) in the graph.
//
// Internal and external edges can never coincide (one kind joins two nodes
// of one community, the other of two), so duplicates are only looked for
// within a kind: internal edges in a small scratch set reset for each
// community (it stays in cache), external ones in one set for the graph.
type wiring struct {
	comm   []uint32
	eu, ev []uint32
	bad    []bool
	local  *edgeSet // internal edges of the current community
	global *edgeSet // external edges

	badList []int // scratch for wire
}

func newWiring(comm []uint32, edges int) *wiring {
	return &wiring{
		comm:  comm,
		eu:    make([]uint32, 0, edges),
		ev:    make([]uint32, 0, edges),
		bad:   make([]bool, 0, edges),
		local: newEdgeSet(0),
	}
}

// wire pairs the stubs by the configuration model (a uniform shuffle, then
// consecutive pairs) and repairs the bad pairs by swaps with good edges of
// the same batch. An internal batch (one community) bans self-loops and
// multi-edges; an external batch also bans edges inside a community. The
// stubs of edges that could not be repaired are appended to failed and
// returned.
func (w *wiring) wire(r *rng, stubs []uint32, external bool, failed []uint32) []uint32 {
	set := w.local
	if external {
		w.global = newEdgeSet(len(stubs) / 2)
		set = w.global
	} else {
		set.reset(len(stubs) / 2)
	}
	r.shuffle32(stubs)
	lo := len(w.eu)
	badList := w.badList[:0]
	for j := 0; j+1 < len(stubs); j += 2 {
		u, v := stubs[j], stubs[j+1]
		ok := u != v && !(external && w.comm[u] == w.comm[v]) && set.insert(edgeKey(u, v))
		if !ok {
			badList = append(badList, len(w.eu))
		}
		w.eu = append(w.eu, u)
		w.ev = append(w.ev, v)
		w.bad = append(w.bad, !ok)
	}
	hi := len(w.eu)
	for _, e := range badList {
		if !w.repair(r, set, e, lo, hi, external) {
			failed = append(failed, w.eu[e], w.ev[e])
		}
	}
	w.badList = badList[:0]
	return failed
}

// repair replaces bad edge e = (u, v) and a good edge f = (a, b) of edges
// lo..hi-1 by (u, a) and (v, b) (or (u, b) and (v, a)), which keeps every
// degree, if both new edges are allowed; set holds the good edges of the
// batch. It tries randomTries random partners, then scans the batch from a
// random start (at most scanLimit edges for the external batch; a whole
// community otherwise, so that a swap is found whenever one exists, which
// matters in nearly complete communities).
func (w *wiring) repair(r *rng, set *edgeSet, e, lo, hi int, external bool) bool {
	n := hi - lo
	for range randomTries {
		if w.swap(set, e, lo+r.intn(n), r.src.Uint64()&1 == 1, external) {
			return true
		}
	}
	limit := n
	if external {
		limit = min(n, scanLimit)
	}
	start := r.intn(n)
	for i := range limit {
		f := lo + (start+i)%n
		if w.swap(set, e, f, false, external) || w.swap(set, e, f, true, external) {
			return true
		}
	}
	return false
}

// swap performs the swap of repair with partner f if f is good and both new
// edges are allowed; flip chooses the pairing.
func (w *wiring) swap(set *edgeSet, e, f int, flip, external bool) bool {
	if w.bad[f] {
		return false
	}
	u, v := w.eu[e], w.ev[e]
	a, b := w.eu[f], w.ev[f]
	if flip {
		a, b = b, a
	}
	if u == a || v == b {
		return false
	}
	if external && (w.comm[u] == w.comm[a] || w.comm[v] == w.comm[b]) {
		return false
	}
	k1, k2 := edgeKey(u, a), edgeKey(v, b)
	if k1 == k2 || set.has(k1) || set.has(k2) {
		return false
	}
	set.remove(edgeKey(a, b))
	set.insert(k1)
	set.insert(k2)
	w.eu[f], w.ev[f] = u, a
	w.eu[e], w.ev[e] = v, b
	w.bad[e] = false
	return true
}

// keys returns the keys of the good edges.
func (w *wiring) keys() []uint64 {
	keys := make([]uint64, 0, len(w.eu))
	for e, b := range w.bad {
		if !b {
			keys = append(keys, edgeKey(w.eu[e], w.ev[e]))
		}
	}
	return keys
}
