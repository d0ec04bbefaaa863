package tracker

import (
	"cmp"
	"slices"
)

// groupPass looks for dense groups that the batch formed across
// communities, which node-by-node local moving cannot find: each member of
// such a group is better off where it is as long as the others are (the
// typical case of a ring of existing accounts that starts to transact). It
// runs the static optimiser on the graph of the edges the batch added or
// made heavier between communities (with their whole weight, and the whole
// graph's degrees and 2m in the null model), and moves each candidate
// group of three or more nodes, spread over more than one community, into
// a community of its own when the exact modularity gain of that move on
// the whole graph is positive. Its cost is proportional to the batch.
func (t *Tracker) groupPass() {
	if len(t.joins) < 3 || t.g.m2 <= 0 {
		return
	}
	g := t.g
	if len(t.local) < len(t.comm) {
		t.local = append(t.local, make([]uint32, len(t.comm)-len(t.local))...)
	}
	gen := t.nextStamp(1)
	var nodes []uint32
	id := func(u uint32) uint32 {
		if t.stamp[u] != gen {
			t.stamp[u] = gen
			t.local[u] = uint32(len(nodes))
			nodes = append(nodes, u)
		}
		return t.local[u]
	}
	edges := make([]Edge, 0, len(t.joins))
	for _, p := range t.joins {
		u, v := p[0], p[1]
		if w := g.Weight(u, v); w > 0 {
			edges = append(edges, Edge{U: id(u), V: id(v), W: w})
		}
	}
	if len(nodes) < 3 {
		return
	}
	// A pair joined twice in the batch appears twice: keep one.
	slices.SortFunc(edges, func(a, b Edge) int {
		a.U, a.V = min(a.U, a.V), max(a.U, a.V)
		b.U, b.V = min(b.U, b.V), max(b.U, b.V)
		if a.U != b.U {
			return cmp.Compare(a.U, b.U)
		}
		return cmp.Compare(a.V, b.V)
	})
	edges = slices.CompactFunc(edges, func(a, b Edge) bool {
		return min(a.U, a.V) == min(b.U, b.V) && max(a.U, a.V) == max(b.U, b.V)
	})
	sub := NewGraph(len(nodes), edges)
	s := newSolver(&t.o, t.o.Seed^uint64(t.batches))
	l := t.subLevel(sub, nodes)
	comm, c := s.run(l, nil, 8)
	groups := make([][]uint32, c)
	for li, ci := range comm {
		groups[ci] = append(groups[ci], nodes[li])
	}
	for _, grp := range groups {
		if len(grp) < 3 {
			continue
		}
		spread := false
		for _, u := range grp[1:] {
			if t.comm[u] != t.comm[grp[0]] {
				spread = true
				break
			}
		}
		if !spread {
			continue
		}
		slices.Sort(grp)
		t.tryGroup(grp)
	}
}

// tryGroup moves the nodes of grp into a new community if that raises the
// objective:
//
//	gain = in_S - lambda A_S^2
//	     + sum over communities C that lose members S_C:
//	         -b_C - lambda ((A_C - a_C)^2 - A_C^2)
//
// with A the penalty total of doc.go, Objective (tot for modularity, with
// lambda = gamma / 2m, so that gain = dQ * 2m; n for CPM, with lambda =
// gamma, so that gain = 2 dH), a_C = A(S_C) and b_C the part of in_C that
// leaves with S_C (its internal weight and twice its edges to C - S_C).
func (t *Tracker) tryGroup(grp []uint32) {
	g := t.g
	gen := t.nextStamp(1)
	for _, u := range grp {
		t.stamp[u] = gen
	}
	type loss struct {
		c       uint32
		a, k, b float64 // penalty mass, degree and internal weight leaving C
	}
	var losses []loss
	at := func(c uint32) *loss {
		for i := range losses {
			if losses[i].c == c {
				return &losses[i]
			}
		}
		losses = append(losses, loss{c: c})
		return &losses[len(losses)-1]
	}
	var inS, totS, penS float64
	for _, u := range grp {
		cu := t.comm[u]
		lc := at(cu)
		mu := t.mass(u)
		lc.a += mu
		lc.k += g.k[u]
		lc.b += 2 * g.self[u]
		totS += g.k[u]
		penS += mu
		inS += 2 * g.self[u]
		st, d := g.start[u], g.deg[u]
		for p := st; p < st+d; p++ {
			v, w := g.nbr[p], g.wt[p]
			inGroup := t.stamp[v] == gen
			if inGroup {
				inS += w
			}
			if t.comm[v] == cu {
				if inGroup {
					lc.b += w
				} else {
					lc.b += 2 * w
				}
			}
		}
	}
	if len(losses) < 2 {
		return // already together
	}
	scale, pen := t.s.scale(g.m2), t.pen()
	gain := inS - scale*penS*penS
	for _, lc := range losses {
		tc := pen[lc.c]
		gain += -lc.b - scale*((tc-lc.a)*(tc-lc.a)-tc*tc)
	}
	if gain <= moveTol*totS {
		return
	}
	// Stable ids (ids.go, rule 3): the group keeps the id of the community
	// that brings it the most weight when that is at least half of the
	// community's own weight (a group that grew around one community is
	// that community, grown); what is left of it takes the fresh id.
	best := 0
	for i := range losses {
		if a, b := losses[i], losses[best]; a.k > b.k || (a.k == b.k && t.id[a.c] < t.id[b.c]) {
			best = i
		}
	}
	bc := losses[best].c
	bID, inherit := t.id[bc], 2*losses[best].k >= t.tot[bc]
	ns := t.newSlot()
	t.heat(ns)
	for _, u := range grp {
		t.moveNode(u, ns)
	}
	t.res.Moves += len(grp)
	switch {
	case !inherit:
	case t.size[bc] == 0:
		t.id[ns] = bID // the slot was released and its id retired with it
	default:
		t.id[ns], t.id[bc] = bID, t.id[ns]
	}
}

// subLevel is the level of sub, the subgraph on nodes (local ids in node
// order), with the whole graph's degrees, penalty masses and 2m in the
// null model, as the group and resplit passes optimise it.
func (t *Tracker) subLevel(sub *Graph, nodes []uint32) level {
	l := sub.view(ObjectiveModularity) // k and a are replaced just below
	l.k = make([]float64, len(nodes))
	l.a = l.k
	if t.o.Objective == ObjectiveCPM {
		l.a = make([]float64, len(nodes))
	}
	for li, u := range nodes {
		l.k[li] = t.g.k[u]
		l.a[li] = t.mass(u)
	}
	l.m2 = t.g.m2
	return l
}

// moveNode moves node u to slot to, keeping every total and recording the
// connectivity check for the slot it leaves. O(degree).
func (t *Tracker) moveNode(u, to uint32) {
	g := t.g
	from := t.comm[u]
	if from == to {
		return
	}
	var wFrom, wTo float64
	st, d := g.start[u], g.deg[u]
	for p := st; p < st+d; p++ {
		switch t.comm[g.nbr[p]] {
		case from:
			wFrom += g.wt[p]
		case to:
			wTo += g.wt[p]
		}
	}
	t.tot[from] -= g.k[u]
	t.tot[to] += g.k[u]
	w := g.NodeWeight(u)
	t.mtot[from] -= w
	t.mtot[to] += w
	t.relink(u, from, to, wFrom, wTo)
}
