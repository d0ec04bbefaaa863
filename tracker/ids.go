package tracker

import (
	"cmp"
	"slices"
)

// Stable community ids (doc.go, Stable ids, gives the rule in short):
//
//  1. Ids are uint64, handed out in increasing order, never reused.
//  2. After a change, each new community N may inherit the id of an old
//     community O; the weight of the pair is the summed degree of the nodes
//     that were in O and are now in N (node count breaks ties, for nodes of
//     degree zero).
//  3. Pairs are taken greedily, heaviest first; ties go to the older
//     (smaller) id, then to the community with the lower index. A pair is
//     taken only while neither side has been matched, and only if it holds
//     at least half of the weight of N or of O: the community continues.
//     So when communities merge, the result keeps the id of the one that
//     brings the most weight (ties: the older); when one splits, the part
//     with most of its weight keeps the id.
//  4. Every community left without an id gets a fresh one, in order of
//     decreasing size, ties by lowest member node.

// idPair is one (new community, old id) overlap.
type idPair struct {
	c   uint32
	old uint64
	w   float64
	n   int
}

// assignIDs returns the stable id of each community of comm (dense 0..c-1
// over the nodes listed in nodes, or over all nodes when nodes is nil),
// inheriting from prev (node -> previous id, NoCommunity if none) by the
// rule above. next is the next fresh id; it is advanced.
func assignIDs(comm []uint32, c int, nodes []uint32, prev []uint64, k []float64, next *uint64) []uint64 {
	each := func(fn func(i uint32)) {
		if nodes == nil {
			for i := range comm {
				fn(uint32(i))
			}
			return
		}
		for _, i := range nodes {
			fn(i)
		}
	}
	ids := make([]uint64, c)
	for i := range ids {
		ids[i] = NoCommunity
	}
	size := make([]int, c)
	first := make([]uint32, c)
	wNew := make([]float64, c)
	for i := range first {
		first[i] = ^uint32(0)
	}
	var pairs []idPair
	each(func(i uint32) {
		ci := comm[i]
		size[ci]++
		if first[ci] > i {
			first[ci] = i
		}
		wNew[ci] += k[i]
		if prev != nil && prev[i] != NoCommunity {
			pairs = append(pairs, idPair{c: ci, old: prev[i], w: k[i], n: 1})
		}
	})
	if len(pairs) > 0 {
		slices.SortFunc(pairs, func(a, b idPair) int {
			if r := cmp.Compare(a.c, b.c); r != 0 {
				return r
			}
			return cmp.Compare(a.old, b.old)
		})
		// Sum pairs in place; the sort above fixes the summation order.
		out := 0
		for _, p := range pairs {
			if out > 0 && pairs[out-1].c == p.c && pairs[out-1].old == p.old {
				pairs[out-1].w += p.w
				pairs[out-1].n += p.n
				continue
			}
			pairs[out] = p
			out++
		}
		pairs = pairs[:out]
		type oldTotal struct {
			w float64
			n int
		}
		olds := make(map[uint64]oldTotal, len(pairs))
		for _, p := range pairs {
			t := olds[p.old]
			t.w += p.w
			t.n += p.n
			olds[p.old] = t
		}
		slices.SortFunc(pairs, func(a, b idPair) int {
			if r := cmp.Compare(b.w, a.w); r != 0 {
				return r
			}
			if r := cmp.Compare(b.n, a.n); r != 0 {
				return r
			}
			if r := cmp.Compare(a.old, b.old); r != 0 {
				return r
			}
			return cmp.Compare(a.c, b.c)
		})
		used := make(map[uint64]bool, len(olds))
		for _, p := range pairs {
			if ids[p.c] != NoCommunity || used[p.old] {
				continue
			}
			ot := olds[p.old]
			if !majority(p.w, p.n, wNew[p.c], size[p.c]) && !majority(p.w, p.n, ot.w, ot.n) {
				continue
			}
			ids[p.c] = p.old
			used[p.old] = true
		}
	}
	var fresh []uint32
	for ci := range ids {
		if ids[ci] == NoCommunity && size[ci] > 0 {
			fresh = append(fresh, uint32(ci))
		}
	}
	slices.SortFunc(fresh, func(a, b uint32) int {
		if r := cmp.Compare(size[b], size[a]); r != 0 {
			return r
		}
		return cmp.Compare(first[a], first[b])
	})
	for _, ci := range fresh {
		ids[ci] = *next
		*next++
	}
	return ids
}

// majority reports whether (w, n) is at least half of (tw, tn), by weight,
// or by count when the total weight is zero.
func majority(w float64, n int, tw float64, tn int) bool {
	if tw > 0 {
		return 2*w >= tw
	}
	return 2*n >= tn
}
