package tracker

import (
	"fmt"
	"math"
)

// Check recomputes everything the tracker keeps in place and compares
// (doc.go, "Invariants"): weighted degrees and 2m, each community's size,
// tot_c and in_c within 1e-9 relative, the member lists, unique ids below
// NextID, and that every community is connected. It costs O(n + m); tests
// call it after every batch.
func (t *Tracker) Check() error {
	g := t.g
	k, m2 := g.recompute()
	if !near(m2, g.m2) {
		return fmt.Errorf("tracker: 2m is %v, recomputed %v", g.m2, m2)
	}
	for i := range k {
		if !near(k[i], g.k[i]) {
			return fmt.Errorf("tracker: degree of %d is %v, recomputed %v", i, g.k[i], k[i])
		}
	}
	ns := len(t.head)
	tot := make([]float64, ns)
	in := make([]float64, ns)
	mtot := make([]float64, ns)
	size := make([]uint32, ns)
	for i, s := range t.comm {
		present := g.Has(uint32(i))
		if (s == noSlot) == present {
			return fmt.Errorf("tracker: node %d present=%v but slot %d", i, present, s)
		}
		if s == noSlot {
			continue
		}
		size[s]++
		tot[s] += k[i]
		mtot[s] += g.NodeWeight(uint32(i))
		in[s] += 2 * g.self[i]
		g.Neighbours(uint32(i), func(j uint32, w float64) {
			if t.comm[j] == s {
				in[s] += w
			}
		})
	}
	ids := map[uint64]bool{}
	for s := 0; s < ns; s++ {
		if size[s] != t.size[s] {
			return fmt.Errorf("tracker: slot %d has size %d, recomputed %d", s, t.size[s], size[s])
		}
		if size[s] == 0 {
			continue
		}
		if !near(tot[s], t.tot[s]) || !near(in[s], t.in[s]) {
			return fmt.Errorf("tracker: slot %d (id %d) tot %v in %v, recomputed %v and %v", s, t.id[s], t.tot[s], t.in[s], tot[s], in[s])
		}
		if !near(mtot[s], t.mtot[s]) {
			return fmt.Errorf("tracker: slot %d (id %d) node weight %v, recomputed %v", s, t.id[s], t.mtot[s], mtot[s])
		}
		if ids[t.id[s]] || t.id[s] >= t.nextID {
			return fmt.Errorf("tracker: id %d of slot %d reused or not below %d", t.id[s], s, t.nextID)
		}
		ids[t.id[s]] = true
		n := uint32(0)
		for i := t.head[s]; i != noSlot; i = t.next[i] {
			if t.comm[i] != uint32(s) {
				return fmt.Errorf("tracker: node %d on the list of slot %d is in slot %d", i, s, t.comm[i])
			}
			n++
			if n > size[s] {
				return fmt.Errorf("tracker: member list of slot %d is longer than its size", s)
			}
		}
		if n != size[s] {
			return fmt.Errorf("tracker: member list of slot %d has %d nodes, size %d", s, n, size[s])
		}
	}
	// Connectivity, by a search per community.
	seen := make([]bool, len(t.comm))
	var stack []uint32
	for s := 0; s < ns; s++ {
		if size[s] == 0 {
			continue
		}
		h := t.head[s]
		seen[h] = true
		stack = append(stack[:0], h)
		reached := uint32(1)
		for len(stack) > 0 {
			x := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			g.Neighbours(x, func(y uint32, _ float64) {
				if !seen[y] && t.comm[y] == uint32(s) {
					seen[y] = true
					reached++
					stack = append(stack, y)
				}
			})
		}
		if reached != size[s] {
			return fmt.Errorf("tracker: community %d is disconnected (%d of %d nodes reachable)", t.id[s], reached, size[s])
		}
	}
	return nil
}

// near compares within 1e-9 relative (absolute near zero).
func near(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}
