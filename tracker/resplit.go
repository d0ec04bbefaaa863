package tracker

import (
	"cmp"
	"slices"
)

// resplitLoss is the share of its internal weight a community must lose in
// one batch (removed or weakened edges, removed members) before the
// resplit pass looks at it again. Chosen default: removals are what local
// moving cannot repair (see resplitPass).
const resplitLoss = 0.2

// resplitGrowth is the factor by which a community's internal weight must
// grow, since the pass last looked at it, before the pass looks again.
// Chosen default: a ring that forms edge by edge next to a group, a few
// edges a batch, is glued to the group by local moving (each of its nodes
// is better off with the others than alone, and the others already sit in
// the group), and only a look at the whole community pulls it apart. At 2
// a community is looked at O(log) times as it grows, each look costing its
// volume: measured with shoal-bench replay (10^6 events, daily snapshots),
// 1.25 cost 20% of the replay time, 2 about 5%.
const resplitGrowth = 2

// resplitPass re-optimises, from singletons, every community that lost a
// large share of its internal weight in the batch, or that grew by a large
// factor since the pass last looked at it (resplitGrowth). Local moving cannot
// split a community that is no longer a good one as long as each member is
// still better inside it than alone: when a sliding window expires most of
// a graph, the nodes left behind can all sit in one community of Q = 0, a
// local optimum for single moves. The pass runs the static optimiser on the
// community's induced subgraph (with the whole graph's degrees and 2m in
// the null model) and splits the community into the parts found when the
// exact modularity gain is positive; the heaviest part keeps the id. Its
// cost is the volume of the communities concerned.
func (t *Tracker) resplitPass() {
	g := t.g
	if g.m2 <= 0 {
		return
	}
	for _, c := range t.hot {
		lost := t.lost[c]
		t.lost[c] = 0
		if t.size[c] < 4 {
			continue
		}
		grew := t.in[c] > resplitGrowth*t.checked[c]
		if lost < resplitLoss*(t.in[c]+lost) && !grew {
			continue
		}
		t.resplit(c)
		t.checked[c] = t.in[c]
	}
}

// settleGrowth is the growth of a community's internal weight since the
// last Settle from which Settle looks at it again. Chosen default: an
// invented ring of 16 accounts that formed a few payments a batch next to
// a group of 40 was glued to it at batches of 1 to 10 events (the group
// grew to 55 and its internal weight by 21% in a day), while the per-batch
// pass waits for a doubling since it last looked.
const settleGrowth = 1.1

// Settle re-optimises, from singletons, every community of four or more
// members whose internal weight grew by a tenth since the last Settle
// (new communities included), and
// splits it where that raises the objective (see resplitPass); then the
// connectivity checks. The timeline calls it before each snapshot, so
// that what a snapshot holds does not depend on how the events were
// batched; its cost is the volume of the communities that grew, once a
// snapshot instead of once a batch.
func (t *Tracker) Settle() Result {
	t.res = Result{}
	if t.g.m2 <= 0 {
		return t.res
	}
	t.s.grow(max(len(t.comm), len(t.head)) + 1)
	n := len(t.head)
	for c := 0; c < n; c++ {
		s := uint32(c)
		if t.size[s] < 4 || !(t.in[s] > settleGrowth*t.settled[s]) {
			continue
		}
		t.resplit(s)
		t.checked[s] = t.in[s]
	}
	t.runChecks()
	for s := range t.head {
		t.settled[s] = t.in[s]
	}
	for _, s := range t.hot {
		t.hotMark[s] = false
		t.lost[s] = 0
	}
	t.hot = t.hot[:0]
	t.joins = t.joins[:0]
	return t.res
}

func (t *Tracker) resplit(c uint32) {
	g := t.g
	var nodes []uint32
	for i := t.head[c]; i != noSlot; i = t.next[i] {
		nodes = append(nodes, i)
	}
	slices.Sort(nodes)
	if len(t.local) < len(t.comm) {
		t.local = append(t.local, make([]uint32, len(t.comm)-len(t.local))...)
	}
	for li, u := range nodes {
		t.local[u] = uint32(li)
	}
	var edges []Edge
	for _, u := range nodes {
		if s := g.self[u]; s > 0 {
			edges = append(edges, Edge{U: t.local[u], V: t.local[u], W: s})
		}
		st, d := g.start[u], g.deg[u]
		for p := st; p < st+d; p++ {
			if v := g.nbr[p]; v > u && t.comm[v] == c {
				edges = append(edges, Edge{U: t.local[u], V: t.local[v], W: g.wt[p]})
			}
		}
	}
	sub := NewGraph(len(nodes), edges)
	s := newSolver(&t.o, t.o.Seed^uint64(t.batches)^uint64(c))
	l := t.subLevel(sub, nodes)
	comm, k := s.run(l, nil, 16)
	if k < 2 {
		return
	}
	if s.split {
		k = splitDisconnected(&l, comm, k)
	}
	// Exact gain of the split on the whole graph's objective (in units of
	// in_c - lambda A_c^2, as tryGroup).
	in := make([]float64, k)
	tot := make([]float64, k)
	pen := make([]float64, k)
	for li, u := range nodes {
		gi := comm[li]
		tot[gi] += g.k[u]
		pen[gi] += l.a[li]
		in[gi] += 2 * g.self[u]
		st, d := sub.start[li], sub.deg[li]
		for p := st; p < st+d; p++ {
			if comm[sub.nbr[p]] == gi {
				in[gi] += sub.wt[p]
			}
		}
	}
	scale, pc := s.scale(g.m2), t.pen()[c]
	gain := -(t.in[c] - scale*pc*pc)
	for gi := range in {
		gain += in[gi] - scale*pen[gi]*pen[gi]
	}
	if gain <= moveTol*t.tot[c] {
		return
	}
	// The heaviest part stays (and keeps the id); the others move out.
	order := make([]int, k)
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(tot[b], tot[a]) })
	slot := make([]uint32, k)
	slot[order[0]] = c
	for _, gi := range order[1:] {
		slot[gi] = t.newSlot()
		t.heat(slot[gi])
	}
	for li, u := range nodes {
		if to := slot[comm[li]]; to != c {
			t.moveNode(u, to)
		}
	}
	for _, s := range slot {
		t.checked[s] = t.in[s]
	}
	t.res.Splits += k - 1
}
