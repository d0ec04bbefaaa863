package gen

import (
	"fmt"
	"math"
	"strings"
)

// PlantedOptions configure [Planted]. The zero value is valid after
// EnsureDefaults (Mu = 0 then gives Groups disconnected groups).
type PlantedOptions struct {
	// N is the number of nodes. Default 1000.
	N int
	// Groups is the number of planted groups; sizes differ by at most one
	// (the first N mod Groups groups have one node more). Default 10.
	Groups int
	// AvgDegree is the expected degree of every node. Default 20.
	AvgDegree float64
	// Mu is the expected fraction of a node's edges that leave its group,
	// in [0, 1]. No default: zero means no edges between groups.
	Mu float64
	// Seed selects the random stream. Zero is a seed like any other.
	Seed uint64
}

// EnsureDefaults fills the zero fields that have a default.
func (o *PlantedOptions) EnsureDefaults() {
	if o.N == 0 {
		o.N = 1000
	}
	if o.Groups == 0 {
		o.Groups = 10
	}
	if o.AvgDegree == 0 {
		o.AvgDegree = 20
	}
}

// Validate reports every out-of-range option at once, wrapped in
// [ErrInvalidOptions].
func (o *PlantedOptions) Validate() error {
	var bad []string
	add := func(format string, args ...any) { bad = append(bad, fmt.Sprintf(format, args...)) }
	if o.N < 2 || o.N > maxNodes {
		add("N = %d, must be in [2, %d]", o.N, maxNodes)
	}
	if o.Groups < 1 || o.Groups > max(o.N, 1) {
		add("Groups = %d, must be in [1, N = %d]", o.Groups, o.N)
	}
	if !(o.AvgDegree > 0) || math.IsInf(o.AvgDegree, 0) || o.AvgDegree > float64(max(o.N-1, 0)) {
		add("AvgDegree = %g, must be in (0, N-1 = %d]", o.AvgDegree, o.N-1)
	}
	if !(o.Mu >= 0 && o.Mu <= 1) {
		add("Mu = %g, must be in [0, 1]", o.Mu)
	}
	if len(bad) == 0 {
		minS, maxS := o.N/o.Groups, (o.N+o.Groups-1)/o.Groups
		if kin := (1 - o.Mu) * o.AvgDegree; kin > float64(minS-1) {
			add("expected internal degree (1-Mu)*AvgDegree = %g exceeds smallest group size - 1 = %d", kin, minS-1)
		}
		if kout := o.Mu * o.AvgDegree; kout > float64(o.N-maxS) {
			add("expected external degree Mu*AvgDegree = %g exceeds the %d nodes outside the largest group", kout, o.N-maxS)
		}
	}
	if len(bad) > 0 {
		return fmt.Errorf("%w: planted: %s", ErrInvalidOptions, strings.Join(bad, "; "))
	}
	return nil
}

// maxNodes bounds N so that ids fit in uint32 with room to spare.
const maxNodes = 1 << 30

// Planted returns a planted-partition graph (a stochastic block model;
// Condon & Karp 2001, Random Struct. Algorithms 18(2)): N nodes in Groups
// near-equal groups, each pair inside group g joined with probability
// p_in(g) = (1-Mu)*AvgDegree/(s_g-1), each pair across groups with
// p_out = Mu*AvgDegree/(N - N/Groups). Every node then has expected degree
// AvgDegree (exactly inside; across, up to the one-node size difference of
// groups) and expected mixing Mu.
//
// Pairs are drawn by geometric skipping (Batagelj & Brandes 2005, "Efficient
// generation of large random networks", PRE 71, 036113), so the cost is
// O(N + E), not O(N^2). Node ids are finally relabelled by a random
// permutation, so groups are not contiguous id ranges.
func Planted(o PlantedOptions) (*Graph, error) {
	o.EnsureDefaults()
	if err := o.Validate(); err != nil {
		return nil, err
	}
	r := newRNG(o.Seed)
	n, groups := o.N, o.Groups
	base, extra := n/groups, n%groups
	sizeOf := func(g int) int {
		if g < extra {
			return base + 1
		}
		return base
	}
	pOut := 0.0
	if o.Mu > 0 {
		pOut = o.Mu * o.AvgDegree / (float64(n) - float64(n)/float64(groups))
	}
	outSkip := newSkipper(pOut)

	keys := make([]uint64, 0, int(float64(n)*o.AvgDegree/2*1.05)+16)
	relabel := r.perm(n)
	membership := make([]uint32, n)
	start := 0
	for g := range groups {
		s := sizeOf(g)
		end := start + s
		inSkip := newSkipper(0)
		if s > 1 {
			inSkip = newSkipper((1 - o.Mu) * o.AvgDegree / float64(s-1))
		}
		for u := start; u < end; u++ {
			membership[relabel[u]] = uint32(g)
			keys = inSkip.row(r, keys, relabel, u, u+1, end)
			keys = outSkip.row(r, keys, relabel, u, end, n)
		}
		start = end
	}
	return &Graph{N: n, Edges: edgesFromKeys(keys, n), Membership: membership}, nil
}

// skipper draws a Bernoulli(p) subset of a run of candidate pairs by
// jumping from one success to the next: the gap is geometric,
// floor(ln(1-U) / ln(1-p)) (Batagelj & Brandes 2005, algorithm G(n,p)).
type skipper struct {
	p    float64
	logQ float64 // ln(1-p), < 0 for 0 < p < 1
}

func newSkipper(p float64) skipper {
	s := skipper{p: p}
	if p > 0 && p < 1 {
		s.logQ = detLog(1 - p)
	}
	return s
}

// row appends the keys of the chosen pairs (u, v), v in [from, to), with
// node ids mapped through relabel.
func (s skipper) row(r *rng, keys []uint64, relabel []uint32, u, from, to int) []uint64 {
	if s.p <= 0 || from >= to {
		return keys
	}
	ru := relabel[u]
	if s.p >= 1 {
		for v := from; v < to; v++ {
			keys = append(keys, edgeKey(ru, relabel[v]))
		}
		return keys
	}
	v := from - 1
	for {
		gap := detLog(1-r.float64()) / s.logQ
		if gap >= float64(to-1-v) {
			return keys
		}
		v += 1 + int(gap)
		keys = append(keys, edgeKey(ru, relabel[v]))
	}
}
