package gen

import (
	"fmt"
	"slices"

	"shoal/tracker"
)

// SharedHubOptions configure [SharedHub]. Zero fields take the defaults.
type SharedHubOptions struct {
	// GroupSize is the size of each of the two cliques that share the hub.
	// Default 5.
	GroupSize int
	// Background is the number of other cliques, joined in a ring by one
	// edge between neighbours; BackgroundSize their size. Defaults 20 and 6.
	Background, BackgroundSize int
}

// EnsureDefaults fills the zero fields.
func (o *SharedHubOptions) EnsureDefaults() {
	if o.GroupSize == 0 {
		o.GroupSize = 5
	}
	if o.Background == 0 {
		o.Background = 20
	}
	if o.BackgroundSize == 0 {
		o.BackgroundSize = 6
	}
}

// Validate reports every out-of-range option, wrapped in
// [ErrInvalidOptions].
func (o *SharedHubOptions) Validate() error {
	if o.GroupSize < 2 || o.Background < 3 || o.BackgroundSize < 3 || 2*o.GroupSize+1+o.Background*o.BackgroundSize > 1<<20 {
		return fmt.Errorf("%w: shared hub: group size %d (>= 2), %d background cliques (>= 3) of %d (>= 3), at most 2^20 nodes",
			ErrInvalidOptions, o.GroupSize, o.Background, o.BackgroundSize)
	}
	return nil
}

// SharedHub is two cliques A and B with no edge between them, and one hub
// joined to every member of both, in a graph of other cliques joined in a
// ring: a shop, say, that two unrelated circles of customers pay. Node
// ids: A is 0..s-1, B is s..2s-1, the hub 2s, then the background cliques
// one after the other. Membership: A 0, B 1, the hub 2, background clique
// i is 3+i. No randomness.
//
// With the defaults (m = 350), modularity at resolution 1 puts A, B and
// the hub in one community: the resolution limit (Fortunato and Barthelemy
// 2007) merges two communities joined by l edges once l > d_1 d_2 / 2m,
// and the hub's 5 edges into B beat 35 * 25 / 700 = 1.25, while
// neighbouring background cliques (one edge, 32 * 32 / 700 = 1.46) stay
// apart.
func SharedHub(o SharedHubOptions) (*Graph, error) {
	o.EnsureDefaults()
	if err := o.Validate(); err != nil {
		return nil, err
	}
	s, k, b := o.GroupSize, o.Background, o.BackgroundSize
	n := 2*s + 1 + k*b
	g := &Graph{N: n, Membership: make([]uint32, n)}
	clique := func(lo, size int, c uint32) {
		for i := lo; i < lo+size; i++ {
			g.Membership[i] = c
			for j := i + 1; j < lo+size; j++ {
				g.Edges = append(g.Edges, tracker.Edge{U: uint32(i), V: uint32(j), W: 1})
			}
		}
	}
	clique(0, s, 0)
	clique(s, s, 1)
	hub := uint32(2 * s)
	g.Membership[hub] = 2
	for i := range 2 * s {
		g.Edges = append(g.Edges, tracker.Edge{U: uint32(i), V: hub, W: 1})
	}
	base := 2*s + 1
	for c := range k {
		clique(base+c*b, b, uint32(3+c))
	}
	for c := range k {
		// The last node of clique c to the first of clique c+1 (ring).
		u, v := uint32(base+c*b+b-1), uint32(base+((c+1)%k)*b)
		g.Edges = append(g.Edges, tracker.Edge{U: min(u, v), V: max(u, v), W: 1})
	}
	slices.SortFunc(g.Edges, func(x, y tracker.Edge) int {
		if x.U != y.U {
			return int(x.U) - int(y.U)
		}
		return int(x.V) - int(y.V)
	})
	return g, nil
}
