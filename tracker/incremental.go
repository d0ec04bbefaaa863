package tracker

// reoptimise runs after the changes of a batch are in: local moving from
// the frontier (the dynamic-frontier rule), the connectivity checks, then a
// community-level pass over the communities the batch touched.
func (t *Tracker) reoptimise() {
	g := t.g
	n := len(t.comm)
	t.s.grow(max(n, len(t.head)) + 1)
	// Seeded order of the marked nodes: the frontier in a random order, so
	// that no id range is favoured; deterministic for a given seed and
	// batch sequence.
	order := t.frontier
	for i := len(order) - 1; i > 0; i-- {
		j := t.s.rng.IntN(i + 1)
		order[i], order[j] = order[j], order[i]
	}
	t.groupPass()
	l := g.view()
	t.s.onMove = t.moved
	t.s.visits = 0
	t.res.Moves += t.s.moveFast(&l, t.comm, t.tot, order)
	t.s.onMove = nil
	t.res.Visited = t.s.visits
	for _, u := range t.frontier {
		t.mark[u] = false
	}
	t.frontier = t.frontier[:0]
	t.runChecks()
	t.mergePass()
	for _, s := range t.hot {
		t.hotMark[s] = false
	}
	t.hot = t.hot[:0]
}

// moved keeps the slot bookkeeping of a node move made by moveFast, whose
// tot update has already happened, and records the connectivity check the
// move calls for: from lost a member, so its neighbours in from are seeds.
func (t *Tracker) moved(i, from, to uint32, wFrom, wTo float64) {
	self := 2 * t.g.self[i]
	t.in[from] -= 2*wFrom + self
	t.in[to] += 2*wTo + self
	t.comm[i] = from // moveFast has already moved it; unlink needs the old slot
	t.unlink(i)
	t.link(i, to)
	t.heat(from)
	t.heat(to)
	if t.size[from] == 0 {
		t.release(from)
		return
	}
	g := t.g
	st, d := g.start[i], g.deg[i]
	for p := st; p < st+d; p++ {
		if j := g.nbr[p]; t.comm[j] == from {
			t.seeds = append(t.seeds, seed{from, j})
		}
	}
}

// mergeCap bounds the adjacency a community may have for the merge pass to
// consider moving it whole; larger communities are left to local moving
// and the full pass.
const mergeCap = 1 << 16

// mergePass is the community-level step of Louvain restricted to the
// communities the batch touched: each such community A, taken whole as one
// node, joins the neighbouring community C of largest gain
// w(A,C) - gamma tot_A tot_C / 2m when that is positive. The merged
// community keeps the id of the side with the larger tot (ties: the older
// id). The target is reconsidered in turn. Both sides are connected and
// joined by an edge, so the union is connected.
func (t *Tracker) mergePass() {
	g := t.g
	if g.m2 <= 0 {
		return
	}
	scale := t.o.Resolution / g.m2
	wsum := t.s.wsum
	touched := t.s.touched[:0]
	queue := append([]uint32(nil), t.hot...)
	for qi := 0; qi < len(queue); qi++ {
		a := queue[qi]
		if t.size[a] == 0 {
			continue
		}
		entries := 0
		for i := t.head[a]; i != noSlot && entries <= mergeCap; i = t.next[i] {
			st, d := g.start[i], g.deg[i]
			entries += int(d)
			for p := st; p < st+d; p++ {
				c := t.comm[g.nbr[p]]
				if c == a {
					continue
				}
				if wsum[c] == 0 {
					touched = append(touched, c)
				}
				wsum[c] += g.wt[p]
			}
		}
		totA := t.tot[a]
		best, bestGain, bestW := noSlot, moveTol*totA, 0.0
		if entries <= mergeCap {
			for _, c := range touched {
				gain := wsum[c] - scale*totA*t.tot[c]
				if gain > bestGain || (gain == bestGain && best != noSlot && t.id[c] < t.id[best]) {
					best, bestGain, bestW = c, gain, wsum[c]
				}
			}
		}
		for _, c := range touched {
			wsum[c] = 0
		}
		touched = touched[:0]
		if best == noSlot {
			continue
		}
		keep := t.id[best]
		if totA > t.tot[best] || (totA == t.tot[best] && t.id[a] < keep) {
			keep = t.id[a]
		}
		for i := t.head[a]; i != noSlot; {
			nx := t.next[i]
			t.link(i, best)
			i = nx
		}
		t.head[a], t.size[a] = noSlot, 0
		t.tot[best] += totA
		t.in[best] += t.in[a] + 2*bestW
		t.id[best] = keep
		t.release(a)
		t.res.Merges++
		if !t.hotMark[best] {
			t.hotMark[best] = true
			t.hot = append(t.hot, best)
		}
		queue = append(queue, best)
	}
	t.s.touched = touched
}

// Optimize runs a full static pass over the whole graph, warm-started from
// the current partition so that communities that continue keep their ids
// (the drift guard; also on request).
func (t *Tracker) Optimize() {
	o := t.o
	o.Seed = t.o.Seed + uint64(t.batches)*0x9e3779b97f4a7c15
	prev := t.Membership(nil)
	p := detectFrom(t.g, &o, prev, t.nextID)
	for _, c := range p.Communities {
		t.nextID = max(t.nextID, c.ID+1)
	}
	t.load(p)
	t.hotMark = make([]bool, len(t.head))
	t.sinceFull, t.drift = 0, 0
}
