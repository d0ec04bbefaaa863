package events

import (
	"cmp"
	"fmt"
	"slices"
	"strconv"

	"shoal/snapshot"
)

// Classify matches the communities of snapshot a (earlier) and b (later) by
// member overlap and returns the lifecycle events between them, following the
// rules in doc.go, ordered by type ([Types]) and then by community id. o may
// be nil (defaults); it is not modified. Both snapshots must be of the same
// graph and consistent (sorted ids, Size equal to the number of members,
// strictly increasing members, no node in two communities). The cost is
// linear in the number of members of both snapshots, plus a sort of the
// members of each merge and split (to list who joined and left).
func Classify(a, b *snapshot.Snapshot, o *Options) ([]Event, error) {
	var opts Options
	if o != nil {
		opts = *o
	}
	opts.EnsureDefaults()
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	if a == nil || b == nil {
		return nil, fmt.Errorf("%w: nil snapshot", ErrInvalid)
	}
	if a.Graph != b.Graph {
		return nil, fmt.Errorf("%w: snapshots of graphs %q and %q", ErrInvalid, a.Graph, b.Graph)
	}
	var m matcher
	m.a, m.b, m.o = a, b, &opts
	var err error
	if _, m.eligA, err = index(a, opts.MinSize, false); err != nil {
		return nil, fmt.Errorf("events: snapshot %d: %w", a.ID, err)
	}
	if m.nodeB, m.eligB, err = index(b, opts.MinSize, true); err != nil {
		return nil, fmt.Errorf("events: snapshot %d: %w", b.ID, err)
	}
	m.countPairs()
	m.plan()
	return m.build(), nil
}

// matcher holds the flat working state of one Classify call. Communities are
// referred to by their index in Snapshot.Communities (i in a, j in b).
type matcher struct {
	a, b         *snapshot.Snapshot
	o            *Options
	nodeB        []int32 // community index in b of each node id, -1 if absent
	eligA, eligB []bool  // Size >= MinSize

	// Overlap pairs with shared > 0 between eligible communities, sorted by
	// (i, j): pi[k], pj[k], ps[k] = i, j, shared.
	pi, pj, ps []int32
	startA     []int32 // pairs of i are [startA[i], startA[i+1])
	startB     []int32 // pairs of j are byB[startB[j]:startB[j+1]], i ascending
	byB        []int32

	sizeA, sizeB   []int32  // community sizes
	leastA, leastB []uint32 // least member of each community (tie-breaker)

	plans []plan  // in output order within each type
	slab  []int32 // community indices and pair indices of the plans
}

// plan is one event before its record is built: slab[before], slab[after]
// hold community indices, slab[pairs] pair indices.
type plan struct {
	kind                 int32 // index in Types
	before, after, pairs span
}

type span struct{ lo, hi int32 }

// index checks a snapshot and marks the eligible communities. With build
// set it also returns the community index of every node id; otherwise it
// checks that no node is in two communities with a bitset (n/8 bytes, which
// stays in cache).
func index(s *snapshot.Snapshot, minSize int, build bool) ([]int32, []bool, error) {
	maxNode := -1
	for ci := range s.Communities {
		c := &s.Communities[ci]
		if ci > 0 && c.ID <= s.Communities[ci-1].ID {
			return nil, nil, fmt.Errorf("%w: community ids not increasing at %d", ErrInvalid, c.ID)
		}
		if c.Size != len(c.Members) || c.Size == 0 {
			return nil, nil, fmt.Errorf("%w: community %d: size %d with %d members", ErrInvalid, c.ID, c.Size, len(c.Members))
		}
		for k := 1; k < len(c.Members); k++ {
			if c.Members[k] <= c.Members[k-1] {
				return nil, nil, fmt.Errorf("%w: community %d: members not increasing", ErrInvalid, c.ID)
			}
		}
		maxNode = max(maxNode, int(c.Members[len(c.Members)-1]))
	}
	elig := make([]bool, len(s.Communities))
	for ci := range s.Communities {
		elig[ci] = s.Communities[ci].Size >= minSize
	}
	dup := func(v uint32, ci int) error {
		return fmt.Errorf("%w: node %d is in community %d and another", ErrInvalid, v, s.Communities[ci].ID)
	}
	if !build {
		seen := make([]uint64, (maxNode+64)/64)
		for ci := range s.Communities {
			for _, v := range s.Communities[ci].Members {
				w, bit := v/64, uint64(1)<<(v%64)
				if seen[w]&bit != 0 {
					return nil, nil, dup(v, ci)
				}
				seen[w] |= bit
			}
		}
		return nil, elig, nil
	}
	node := make([]int32, maxNode+1)
	for v := range node {
		node[v] = -1
	}
	for ci := range s.Communities {
		for _, v := range s.Communities[ci].Members {
			if node[v] >= 0 {
				return nil, nil, dup(v, ci)
			}
			node[v] = int32(ci)
		}
	}
	return node, elig, nil
}

func lookup(node []int32, v uint32) int32 {
	if int(v) < len(node) {
		return node[v]
	}
	return -1
}

// countPairs builds the sparse overlap table: for each eligible i, a counter
// indexed by j plus a touched list (reset after each i). No |A|x|B| matrix.
func (m *matcher) countPairs() {
	nA, nB := len(m.a.Communities), len(m.b.Communities)
	counter := make([]int32, nB)
	var touched, js []int32
	m.startA = make([]int32, nA+1)
	// A guess (two partners per community) to avoid most regrowth.
	m.pi, m.pj, m.ps = make([]int32, 0, 2*nA), make([]int32, 0, 2*nA), make([]int32, 0, 2*nA)
	for i := range m.a.Communities {
		m.startA[i] = int32(len(m.pi))
		if !m.eligA[i] {
			continue
		}
		// Two phases: the lookups first (independent loads, which the CPU
		// overlaps), then the counting (branchy).
		js = js[:0]
		for _, v := range m.a.Communities[i].Members {
			js = append(js, lookup(m.nodeB, v))
		}
		for _, j := range js {
			if j >= 0 && m.eligB[j] {
				if counter[j] == 0 {
					touched = append(touched, j)
				}
				counter[j]++
			}
		}
		slices.Sort(touched)
		for _, j := range touched {
			m.pi = append(m.pi, int32(i))
			m.pj = append(m.pj, j)
			m.ps = append(m.ps, counter[j])
			counter[j] = 0
		}
		touched = touched[:0]
	}
	m.startA[nA] = int32(len(m.pi))
	// Group pair indices by j (counting sort; keeps i ascending).
	m.startB = make([]int32, nB+1)
	for _, j := range m.pj {
		m.startB[j+1]++
	}
	for j := 1; j <= nB; j++ {
		m.startB[j] += m.startB[j-1]
	}
	next := slices.Clone(m.startB[:nB])
	m.byB = make([]int32, len(m.pj))
	for k, j := range m.pj {
		m.byB[next[j]] = int32(k)
		next[j]++
	}
}

// jaccard of pair k: shared / (|P| + |N| - shared).
func (m *matcher) jaccard(k int32) float64 {
	s := m.ps[k]
	return float64(s) / float64(m.sizeA[m.pi[k]]+m.sizeB[m.pj[k]]-s)
}

// eps absorbs rounding in threshold comparisons (1.1*10 is 11.000000000000002).
const eps = 1e-9

// shape returns the sizes and least members of the communities of s, as
// flat arrays (the Community structs are large; the loops below touch only
// these two fields).
func shape(s *snapshot.Snapshot) ([]int32, []uint32) {
	size, least := make([]int32, len(s.Communities)), make([]uint32, len(s.Communities))
	for i := range s.Communities {
		size[i], least[i] = int32(s.Communities[i].Size), s.Communities[i].Members[0]
	}
	return size, least
}

// plan applies the rules of doc.go in order and records one plan per event,
// each type's plans already in output order.
func (m *matcher) plan() {
	nA, nB := len(m.a.Communities), len(m.b.Communities)
	m.sizeA, m.leastA = shape(m.a)
	m.sizeB, m.leastB = shape(m.b)
	inA, inB := make([]bool, nA), make([]bool, nB)
	// Every event holds a community no other event of its type holds, so
	// there are at most nA + nB; the slab holds a few entries per event.
	m.plans = make([]plan, 0, nA+nB)
	m.slab = make([]int32, 0, 4*(nA+nB))

	// Merge: N receives more than half of each of two or more P.
	nMaj := make([]int32, nB)
	for k, i := range m.pi {
		if 2*m.ps[k] > m.sizeA[i] {
			nMaj[m.pj[k]]++
		}
	}
	for j := range nB {
		if nMaj[j] < 2 {
			continue
		}
		lo := int32(len(m.slab))
		for _, k := range m.byB[m.startB[j]:m.startB[j+1]] {
			if 2*m.ps[k] > m.sizeA[m.pi[k]] {
				m.slab = append(m.slab, k)
			}
		}
		pairs := span{lo, int32(len(m.slab))}
		before := m.spanOf(pairs, m.pi)
		for _, i := range m.slab[before.lo:before.hi] {
			inA[i] = true
		}
		inB[j] = true
		m.addPlan(Merge, before, m.push(int32(j)), pairs)
	}
	// Split: P gives more than half of each of two or more N.
	for i := range nA {
		lo := int32(len(m.slab))
		for k := m.startA[i]; k < m.startA[i+1]; k++ {
			if 2*m.ps[k] > m.sizeB[m.pj[k]] {
				m.slab = append(m.slab, k)
			}
		}
		if int32(len(m.slab))-lo < 2 {
			m.slab = m.slab[:lo]
			continue
		}
		pairs := span{lo, int32(len(m.slab))}
		after := m.spanOf(pairs, m.pj)
		for _, j := range m.slab[after.lo:after.hi] {
			inB[j] = true
		}
		inA[i] = true
		m.addPlan(Split, m.push(int32(i)), after, pairs)
	}
	// Continuations: mutual best matches among communities in no merge or
	// split; ties go to the community with the smaller least member, which
	// does not depend on how communities are labelled. One sequential pass
	// over the pairs finds both best matches.
	bestB, bestA := make([]int32, nA), make([]int32, nB) // pair indices, -1: none
	for i := range bestB {
		bestB[i] = -1
	}
	for j := range bestA {
		bestA[j] = -1
	}
	for k, i := range m.pi {
		j, s := m.pj[k], m.ps[k]
		if inA[i] || inB[j] {
			continue
		}
		if b := bestB[i]; b < 0 || s > m.ps[b] || (s == m.ps[b] && m.leastB[j] < m.leastB[m.pj[b]]) {
			bestB[i] = int32(k)
		}
		if b := bestA[j]; b < 0 || s > m.ps[b] || (s == m.ps[b] && m.leastA[i] < m.leastA[m.pi[b]]) {
			bestA[j] = int32(k)
		}
	}
	// In any event so far; inA and inB stay "in a merge or split".
	matchedA, matchedB := slices.Clone(inA), slices.Clone(inB)
	for i := range nA {
		k := bestB[i]
		if k < 0 || bestA[m.pj[k]] != k || m.jaccard(k) < m.o.Theta-eps {
			continue
		}
		j := m.pj[k]
		p, n := float64(m.sizeA[i]), float64(m.sizeB[j])
		typ := Continue
		switch g := m.o.GrowthFraction * p; {
		case n-p >= g-eps:
			typ = Grow
		case p-n >= g-eps:
			typ = Shrink
		}
		m.addPlan(typ, m.push(int32(i)), m.push(j), m.push(k))
		matchedA[i], matchedB[j] = true, true
	}
	// Births and deaths: eligible communities in no event.
	for j := range nB {
		if m.eligB[j] && !matchedB[j] {
			m.addPlan(Birth, span{}, m.push(int32(j)), m.topPairs(m.byB[m.startB[j]:m.startB[j+1]], m.pi, m.leastA))
		}
	}
	var ks []int32
	for i := range nA {
		if m.eligA[i] && !matchedA[i] {
			ks = ks[:0]
			for k := m.startA[i]; k < m.startA[i+1]; k++ {
				ks = append(ks, k)
			}
			m.addPlan(Death, m.push(int32(i)), span{}, m.topPairs(ks, m.pj, m.leastB))
		}
	}
	// Stable counting sort by type: within a type the plans are already in
	// output order.
	var start [len(Types) + 1]int
	for _, p := range m.plans {
		start[p.kind+1]++
	}
	for t := 1; t <= len(Types); t++ {
		start[t] += start[t-1]
	}
	sorted := make([]plan, len(m.plans))
	for _, p := range m.plans {
		sorted[start[p.kind]] = p
		start[p.kind]++
	}
	m.plans = sorted
}

func (m *matcher) addPlan(typ Type, before, after, pairs span) {
	m.plans = append(m.plans, plan{kind: int32(typ.order()), before: before, after: after, pairs: pairs})
}

func (m *matcher) push(x int32) span {
	m.slab = append(m.slab, x)
	return span{int32(len(m.slab) - 1), int32(len(m.slab))}
}

// spanOf appends col[k] for the pair indices k of s.
func (m *matcher) spanOf(s span, col []int32) span {
	lo := int32(len(m.slab))
	for x := s.lo; x < s.hi; x++ {
		m.slab = append(m.slab, col[m.slab[x]])
	}
	return span{lo, int32(len(m.slab))}
}

// topPairs appends the pair indices ks, most shared first, capped at
// MaxListed. Ties go to the other community (other[k]) with the smaller least
// member, so the kept set does not depend on labels.
func (m *matcher) topPairs(ks, other []int32, least []uint32) span {
	lo := int32(len(m.slab))
	if m.o.MaxListed < 0 {
		return span{lo, lo}
	}
	m.slab = append(m.slab, ks...)
	top := m.slab[lo:]
	slices.SortFunc(top, func(x, y int32) int {
		return cmp.Or(cmp.Compare(m.ps[y], m.ps[x]), cmp.Compare(least[other[x]], least[other[y]]))
	})
	n := min(len(top), m.o.MaxListed)
	m.slab = m.slab[:lo+int32(n)]
	return span{lo, int32(len(m.slab))}
}

func (m *matcher) name(v uint32) string {
	if m.o.Name != nil {
		return m.o.Name(v)
	}
	return strconv.FormatUint(uint64(v), 10)
}

func side(s *snapshot.Snapshot, c *snapshot.Community) Side {
	exp, z := s.InternalZ(c)
	return Side{Community: c.ID, Size: c.Size, Stats: Stats{Internal: c.Internal, Degree: c.Degree, Density: c.Density, Conductance: c.Conductance, Expected: exp, Z: z}}
}

func (m *matcher) build() []Event {
	fromTime, toTime := snapshot.RFC3339(m.a.Watermark), snapshot.RFC3339(m.b.Watermark)
	out := make([]Event, len(m.plans))
	nSides, nPairs := 0, 0
	for _, p := range m.plans {
		nSides += int(p.before.hi - p.before.lo + p.after.hi - p.after.lo)
		nPairs += int(p.pairs.hi - p.pairs.lo)
	}
	sides := make([]Side, 0, nSides)
	overlaps := make([]Overlap, 0, nPairs)
	limit := max(m.o.MaxListed, 0)
	var idBuf []byte
	var left, joined, ubuf, vbuf []uint32
	names := make([]string, 0, 4*len(m.plans)) // backing array of Joined and Left; non-nil so empty lists encode as []
	for e, p := range m.plans {
		ev := &out[e]
		ev.Schema, ev.Type, ev.Graph, ev.Note = Schema, Types[p.kind], m.a.Graph, Note
		ev.FromSnapshot, ev.ToSnapshot, ev.FromTime, ev.ToTime = m.a.ID, m.b.ID, fromTime, toTime

		lo := len(sides)
		for _, i := range m.slab[p.before.lo:p.before.hi] {
			sides = append(sides, m.side(m.a, &m.a.Communities[i]))
		}
		ev.Before = sides[lo:len(sides):len(sides)]
		lo = len(sides)
		for _, j := range m.slab[p.after.lo:p.after.hi] {
			sides = append(sides, m.side(m.b, &m.b.Communities[j]))
		}
		ev.After = sides[lo:len(sides):len(sides)]
		lo = len(overlaps)
		for _, k := range m.slab[p.pairs.lo:p.pairs.hi] {
			overlaps = append(overlaps, Overlap{
				From: m.a.Communities[m.pi[k]].ID, To: m.b.Communities[m.pj[k]].ID,
				Shared: int(m.ps[k]), Jaccard: m.jaccard(k),
			})
		}
		ev.Overlaps = overlaps[lo:len(overlaps):len(overlaps)]
		ev.ID, idBuf = eventID(idBuf, ev.Graph, ev.FromSnapshot, ev.ToSnapshot, ev.Type, ev.Before, ev.After)

		// left = before members \ after members, joined = the reverse, by
		// merging sorted member lists (sequential, no per-node lookups).
		var bm, am []uint32
		bm, ubuf = union(m.a, m.slab[p.before.lo:p.before.hi], ubuf)
		am, vbuf = union(m.b, m.slab[p.after.lo:p.after.hi], vbuf)
		left, joined, ev.LeftCount, ev.JoinedCount = diff(left[:0], joined[:0], bm, am, limit)
		lo = len(names)
		for _, v := range left {
			names = append(names, m.name(v))
		}
		ev.Left = names[lo:len(names):len(names)]
		lo = len(names)
		for _, v := range joined {
			names = append(names, m.name(v))
		}
		ev.Joined = names[lo:len(names):len(names)]
	}
	return out
}

// union returns the sorted members of the communities idx of s: the member
// slice itself for one community, else a sorted copy in buf.
func union(s *snapshot.Snapshot, idx []int32, buf []uint32) ([]uint32, []uint32) {
	switch len(idx) {
	case 0:
		return nil, buf
	case 1:
		return s.Communities[idx[0]].Members, buf
	}
	buf = buf[:0]
	for _, i := range idx {
		buf = append(buf, s.Communities[i].Members...)
	}
	slices.Sort(buf)
	return buf, buf
}

// diff merges x and y (both strictly increasing) in one pass and appends
// the first limit elements of x \ y to dx and of y \ x to dy, returning both
// and the full sizes of the two differences.
func diff(dx, dy, x, y []uint32, limit int) ([]uint32, []uint32, int, int) {
	nx, ny := 0, 0
	a, b := 0, 0
	for a < len(x) && b < len(y) {
		switch u, v := x[a], y[b]; {
		case u == v:
			a++
			b++
		case u < v:
			if nx < limit {
				dx = append(dx, u)
			}
			nx++
			a++
		default:
			if ny < limit {
				dy = append(dy, v)
			}
			ny++
			b++
		}
	}
	for ; a < len(x); a++ {
		if nx < limit {
			dx = append(dx, x[a])
		}
		nx++
	}
	for ; b < len(y); b++ {
		if ny < limit {
			dy = append(dy, y[b])
		}
		ny++
	}
	return dx, dy, nx, ny
}

func (m *matcher) side(sn *snapshot.Snapshot, c *snapshot.Community) Side {
	s := side(sn, c)
	for _, h := range c.Hubs {
		s.Hubs = append(s.Hubs, m.name(h))
	}
	if m.o.Members {
		s.Members = make([]string, len(c.Members))
		for k, v := range c.Members {
			s.Members[k] = m.name(v)
		}
	}
	return s
}
