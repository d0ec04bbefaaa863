package tracker

// Edge is one weighted undirected edge between two dense node ids. A
// self-loop (U == V) of weight W adds 2W to the degree of U (Newman's
// convention, see doc.go). W must be finite and positive.
type Edge struct {
	U, V uint32
	W    float64
}

// NoCommunity is the community id of a node that is not in the graph (never
// added, or removed).
const NoCommunity = ^uint64(0)

// CommunityStats are the per-community aggregates the tracker keeps up to
// date on every move.
type CommunityStats struct {
	// ID is the stable community id (see doc.go, "Stable ids").
	ID uint64
	// Size is the number of member nodes.
	Size int
	// Internal is the total weight of the edges with both ends inside the
	// community, each edge counted once (a self-loop of weight w counts w).
	Internal float64
	// Degree is the sum of the weighted degrees of the members (tot_c).
	Degree float64
	// Weight is the sum of the node weights of the members (n_c of the CPM
	// objective; Size when every node weighs 1).
	Weight float64
}
