package tracker

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// contingency returns the sizes of the non-empty cells of the contingency
// table of a and b and the marginals, from a sort of the label pairs
// (sparse: O(n log n), never a dense table).
func contingency[A, B cmp.Ordered](a []A, b []B) (cells, ra, rb []int) {
	if len(a) != len(b) {
		panic(fmt.Sprintf("tracker: partitions of %d and %d nodes", len(a), len(b)))
	}
	type pair struct {
		x A
		y B
	}
	ps := make([]pair, len(a))
	for i := range a {
		ps[i] = pair{a[i], b[i]}
	}
	slices.SortFunc(ps, func(p, q pair) int {
		if r := cmp.Compare(p.x, q.x); r != 0 {
			return r
		}
		return cmp.Compare(p.y, q.y)
	})
	for i := 0; i < len(ps); {
		j := i
		for j < len(ps) && ps[j] == ps[i] {
			j++
		}
		cells = append(cells, j-i)
		i = j
	}
	ra = runs(a)
	rb = runs(b)
	return cells, ra, rb
}

// runs returns the sizes of the label classes of x.
func runs[L cmp.Ordered](x []L) []int {
	s := slices.Clone(x)
	slices.Sort(s)
	var out []int
	for i := 0; i < len(s); {
		j := i
		for j < len(s) && s[j] == s[i] {
			j++
		}
		out = append(out, j-i)
		i = j
	}
	return out
}

func entropy(sizes []int, n float64) float64 {
	var h float64
	for _, s := range sizes {
		p := float64(s) / n
		h -= p * math.Log(p)
	}
	return h
}

// NMI returns the normalised mutual information 2 I(a;b) / (H(a) + H(b))
// of two partitions given as a label per node (Danon, Diaz-Guilera, Duch and
// Arenas 2005). It is 1 for identical partitions up to relabelling, and 1
// when both are a single group. Every node counts, whatever its label.
func NMI[A, B cmp.Ordered](a []A, b []B) float64 {
	n := float64(len(a))
	if n == 0 {
		return 1
	}
	cells, ra, rb := contingency(a, b)
	ha, hb := entropy(ra, n), entropy(rb, n)
	if ha+hb == 0 {
		return 1
	}
	hab := entropy(cells, n)
	mi := ha + hb - hab
	v := 2 * mi / (ha + hb)
	return math.Max(0, math.Min(1, v))
}

// ARI returns the adjusted Rand index of two partitions (Hubert and Arabie
// 1985): 1 for identical partitions, about 0 for independent ones.
func ARI[A, B cmp.Ordered](a []A, b []B) float64 {
	n := len(a)
	if n < 2 {
		return 1
	}
	cells, ra, rb := contingency(a, b)
	c2 := func(x int) float64 { return float64(x) * float64(x-1) / 2 }
	var sc, sa, sb float64
	for _, x := range cells {
		sc += c2(x)
	}
	for _, x := range ra {
		sa += c2(x)
	}
	for _, x := range rb {
		sb += c2(x)
	}
	exp := sa * sb / c2(n)
	max := (sa + sb) / 2
	if max == exp {
		return 1
	}
	return (sc - exp) / (max - exp)
}

// GroupRecovery measures how well a partition holds a known group of nodes
// (a planted ring, a watch list): recall is the largest share of the group
// found in one community, precision the share of that community made of
// the group. Ties go to the smaller community id.
func GroupRecovery(membership []uint64, group []uint32) (recall, precision float64) {
	if len(group) == 0 {
		return 0, 0
	}
	count := map[uint64]int{}
	for _, u := range group {
		count[membership[u]]++
	}
	best, bestN := NoCommunity, 0
	for c, k := range count {
		if k > bestN || (k == bestN && c < best) {
			best, bestN = c, k
		}
	}
	size := 0
	for _, c := range membership {
		if c == best {
			size++
		}
	}
	return float64(bestN) / float64(len(group)), float64(bestN) / float64(size)
}
