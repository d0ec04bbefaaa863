package tracker

import (
	"cmp"
	"slices"
)

// Connectivity after removals (doc.go, Incremental, step 5): a community
// that may have fallen apart is split into its connected parts. A
// community can only fall apart where it lost something: an internal edge
// (seeds: both endpoints), or a member that moved out or was removed
// (seeds: that member's neighbours still inside). Each such event
// puts a seed on every side it may have cut off, and a seed that later
// leaves puts seeds on its own neighbours, so at check time every
// component of the community holds a seed.
//
// The check grows one search per seed, one node at a time in turn; two
// searches that meet are joined (union-find). It stops as soon as all are
// joined, so a community that is still connected costs about as much as
// the smaller side of the cut. A search that runs out of nodes before
// meeting the others has found a whole component: it becomes a community
// of its own with a fresh id. The part left when only one search remains
// keeps the slot; if a split-off part carries more weight (tot) than that
// remainder, the two swap ids, so the heaviest part always keeps the id.

// runChecks checks every slot that has pending seeds and splits it into
// its connected parts.
func (t *Tracker) runChecks() {
	if len(t.seeds) == 0 {
		return
	}
	slices.SortFunc(t.seeds, func(a, b seed) int {
		if r := cmp.Compare(a.c, b.c); r != 0 {
			return r
		}
		return cmp.Compare(a.u, b.u)
	})
	seeds := t.seeds
	var group []uint32
	for i := 0; i < len(seeds); {
		j := i
		c := seeds[i].c
		group = group[:0]
		for ; j < len(seeds) && seeds[j].c == c; j++ {
			u := seeds[j].u
			if t.comm[u] != c || (len(group) > 0 && group[len(group)-1] == u) {
				continue
			}
			group = append(group, u)
		}
		if t.size[c] > 0 && len(group) > 1 {
			t.checkSlot(c, group)
		}
		i = j
	}
	t.seeds = t.seeds[:0]
}

// search is the state of one seed's search in checkSlot.
type search struct {
	nodes  []uint32 // visited, in order; nodes[read:] is the queue
	read   int
	parent int // union-find
	active int // at a root: searches of the set with a non-empty queue
	round  int // at a root: the last round the set expanded a node
	done   bool
	tot    float64
	mtot   float64
	in     float64
}

func find(ss []search, a int) int {
	for ss[a].parent != a {
		ss[a].parent = ss[ss[a].parent].parent
		a = ss[a].parent
	}
	return a
}

// checkSlot runs the joined searches of slot c from seeds (distinct members
// of c) and splits off every component found whole.
func (t *Tracker) checkSlot(c uint32, seeds []uint32) {
	g := t.g
	k := uint32(len(seeds))
	base := t.nextStamp(len(seeds))
	// Reuse the search states and their node lists across checks.
	for len(t.ssBuf) < len(seeds) {
		t.ssBuf = append(t.ssBuf, search{})
	}
	ss := t.ssBuf[:len(seeds)]
	live := t.liveBuf[:0] // searches with a non-empty queue
	for a, u := range seeds {
		ss[a] = search{nodes: append(ss[a].nodes[:0], u), parent: a, active: 1}
		t.stamp[u] = base + uint32(a)
		live = append(live, a)
	}
	defer func() { t.liveBuf = live[:0] }()
	open := len(seeds) // sets neither joined away nor complete
	// Each round expands one node per set, not per search: once most seeds
	// have met, the joined set must not outpace the ones still apart.
	for round := 1; open > 1 && len(live) > 0; round++ {
		out := live[:0]
		for _, a := range live {
			s := &ss[a]
			if r := find(ss, a); open > 1 && ss[r].round != round {
				ss[r].round = round
				x := s.nodes[s.read]
				s.read++
				ss[r].tot += g.k[x]
				ss[r].mtot += g.NodeWeight(x)
				ss[r].in += 2 * g.self[x]
				st, d := g.start[x], g.deg[x]
				for p := st; p < st+d; p++ {
					y := g.nbr[p]
					if t.comm[y] != c {
						continue
					}
					ss[r].in += g.wt[p]
					if sy := t.stamp[y]; sy >= base && sy < base+k {
						if b := find(ss, int(sy-base)); b != r {
							ss[b].parent = r
							ss[r].tot += ss[b].tot
							ss[r].mtot += ss[b].mtot
							ss[r].in += ss[b].in
							ss[r].active += ss[b].active
							open--
						}
						continue
					}
					t.stamp[y] = base + uint32(a)
					s.nodes = append(s.nodes, y)
				}
			}
			if s.read < len(s.nodes) {
				out = append(out, a)
				continue
			}
			// This search ran dry; its set is complete once all of its
			// searches have.
			r := find(ss, a)
			ss[r].active--
			if ss[r].active == 0 {
				ss[r].done = true
				open--
			}
		}
		live = out
	}
	// Split off the complete components; when every set is complete, the
	// first stays in c.
	var parts []int
	remainder := false
	for a := range ss {
		if find(ss, a) != a {
			continue
		}
		if ss[a].done {
			parts = append(parts, a)
		} else {
			remainder = true
		}
	}
	if !remainder && len(parts) > 0 {
		parts = parts[1:]
	}
	for _, r := range parts {
		ns := t.newSlot()
		for a := range ss {
			if find(ss, a) != r {
				continue
			}
			for _, x := range ss[a].nodes {
				t.unlink(x)
				t.link(x, ns)
			}
		}
		t.tot[ns], t.in[ns], t.mtot[ns] = ss[r].tot, ss[r].in, ss[r].mtot
		t.tot[c] -= ss[r].tot
		t.mtot[c] -= ss[r].mtot
		t.in[c] -= ss[r].in
		if t.tot[ns] > t.tot[c] {
			t.id[c], t.id[ns] = t.id[ns], t.id[c]
		}
		t.heat(ns)
		t.res.Splits++
	}
	if len(parts) > 0 {
		t.heat(c)
	}
}

// nextStamp reserves k fresh search labels.
func (t *Tracker) nextStamp(k int) uint32 {
	if uint64(t.stampGen)+uint64(k)+1 >= 1<<32-1 {
		for i := range t.stamp {
			t.stamp[i] = 0
		}
		t.stampGen = 0
	}
	base := t.stampGen + 1
	t.stampGen += uint32(k)
	return base
}

// splitAll splits every disconnected community into its connected parts,
// by full component labelling; the part with the lowest node stays, and
// the heaviest part keeps the id.
func (t *Tracker) splitAll() {
	g := t.g
	var stack []uint32
	var splits [][]uint32 // slots of each split community, origin first
	for c := 0; c < len(t.head); c++ {
		if t.size[c] < 2 {
			continue
		}
		var members []uint32
		for i := t.head[c]; i != noSlot; i = t.next[i] {
			members = append(members, i)
		}
		slices.Sort(members)
		mark := t.nextStamp(1)
		var comps [][]uint32
		for _, s := range members {
			if t.stamp[s] == mark {
				continue
			}
			t.stamp[s] = mark
			comp := []uint32{s}
			stack = append(stack[:0], s)
			for len(stack) > 0 {
				x := stack[len(stack)-1]
				stack = stack[:len(stack)-1]
				st, d := g.start[x], g.deg[x]
				for p := st; p < st+d; p++ {
					if y := g.nbr[p]; t.comm[y] == uint32(c) && t.stamp[y] != mark {
						t.stamp[y] = mark
						comp = append(comp, y)
						stack = append(stack, y)
					}
				}
			}
			comps = append(comps, comp)
		}
		if len(comps) == 1 {
			continue
		}
		slots := []uint32{uint32(c)}
		for _, comp := range comps[1:] {
			ns := t.newSlot()
			for _, x := range comp {
				t.unlink(x)
				t.link(x, ns)
			}
			slots = append(slots, ns)
		}
		splits = append(splits, slots)
	}
	if len(splits) == 0 {
		return
	}
	t.recount()
	for _, slots := range splits {
		h := slots[0]
		for _, s := range slots[1:] {
			if t.tot[s] > t.tot[h] {
				h = s
			}
		}
		t.id[slots[0]], t.id[h] = t.id[h], t.id[slots[0]]
	}
}
