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
	// Free slots, ready before local moving so that the slot arrays do not
	// grow under it: a node better off alone takes one, with a fresh id.
	t.reserveSlots(min(len(order), 256))
	l := g.view(t.o.Objective)
	t.s.onMove = t.moved
	t.s.empty = t.takeSlot
	t.s.visits = 0
	t.res.Moves += t.s.moveFast(&l, t.comm, t.pen(), order)
	t.s.onMove, t.s.empty = nil, nil
	t.res.Visited = t.s.visits
	for _, u := range t.frontier {
		t.mark[u] = false
	}
	t.frontier = t.frontier[:0]
	t.runChecks()
	t.resplitPass()
	t.runChecks()
	t.mergePass()
	for _, s := range t.hot {
		t.hotMark[s] = false
		t.lost[s] = 0
	}
	t.hot = t.hot[:0]
}

// moved keeps the slot bookkeeping of a node move made by moveFast, whose
// update of the penalty totals (pen) has already happened.
func (t *Tracker) moved(i, from, to uint32, wFrom, wTo float64) {
	if t.o.Objective == ObjectiveCPM {
		k := t.g.k[i]
		t.tot[from] -= k
		t.tot[to] += k
	} else {
		w := t.g.NodeWeight(i)
		t.mtot[from] -= w
		t.mtot[to] += w
	}
	t.relink(i, from, to, wFrom, wTo)
}

// relink moves node i from slot from to slot to once tot and mtot are
// updated, and records the connectivity check the move calls for: from
// lost a member, so its neighbours in from are seeds.
func (t *Tracker) relink(i, from, to uint32, wFrom, wTo float64) {
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

// mergeCap bounds the size (in nodes) of the smaller side of a pair the
// merge pass evaluates. The pass exists for small groups that join or
// meet (two rings that start to transact, a new group next to an old
// one); merges of two large communities are left to local moving and to
// the full pass. Scanning the smaller side of every pair an edge joins
// was a third of the batch time at 10^6 edges with a cap of 4096.
const mergeCap = 64

// mergePass is the community-level step of Louvain restricted to what the
// batch touched: for every pair of communities that an added or heavier
// edge joins (after local moving), the smaller one, taken whole as one
// node, joins the other when w(A,B) - lambda A_A A_B is positive (doc.go,
// Objective: for modularity gamma tot_A tot_B / 2m, for CPM gamma n_A n_B).
// Its cost is the volume of the smaller sides, not of the graph. The
// merged community keeps the id of the side with the larger tot (ties: the
// older id). Both sides are connected and joined by an edge, so the union
// is connected.
func (t *Tracker) mergePass() {
	g := t.g
	pairs := t.joins
	t.joins = t.joins[:0]
	if g.m2 <= 0 || len(pairs) == 0 {
		return
	}
	scale := t.s.scale(g.m2)
	pen := t.pen()
	for _, p := range pairs {
		a, b := t.comm[p[0]], t.comm[p[1]]
		if a == noSlot || b == noSlot || a == b {
			continue
		}
		if t.size[a] > t.size[b] || (t.size[a] == t.size[b] && a > b) {
			a, b = b, a
		}
		if t.size[a] > mergeCap {
			continue
		}
		var w float64
		for i := t.head[a]; i != noSlot; i = t.next[i] {
			st, d := g.start[i], g.deg[i]
			for q := st; q < st+d; q++ {
				if t.comm[g.nbr[q]] == b {
					w += g.wt[q]
				}
			}
		}
		totA := t.tot[a]
		if w-scale*pen[a]*pen[b] <= moveTol*totA {
			continue
		}
		keep := t.id[b]
		if totA > t.tot[b] || (totA == t.tot[b] && t.id[a] < keep) {
			keep = t.id[a]
		}
		for i := t.head[a]; i != noSlot; {
			nx := t.next[i]
			t.link(i, b)
			i = nx
		}
		t.head[a], t.size[a] = noSlot, 0
		t.tot[b] += totA
		t.mtot[b] += t.mtot[a]
		t.in[b] += t.in[a] + 2*w
		t.id[b] = keep
		t.release(a)
		t.heat(b)
		t.res.Merges++
	}
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
