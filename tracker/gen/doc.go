// Package gen makes synthetic graphs with planted communities, for tests
// and benchmarks of the tracker. Each generator returns a [Graph]: a simple
// undirected graph (weight-1 edges, each once with U < V, sorted, no
// self-loops, no duplicates) and the community of every node.
//
// # Generators
//
// [Planted] is the planted-partition model (a stochastic block model; Condon
// & Karp 2001): N nodes in near-equal groups, pairs inside a group joined
// with one probability and pairs across groups with another, chosen so that
// every node has expected degree AvgDegree and expected mixing Mu. Pairs are
// drawn by geometric skipping (Batagelj & Brandes 2005, PRE 71, 036113) in
// O(N + E) time.
//
// [LFR] is the benchmark of Lancichinetti, Fortunato & Radicchi 2008 ("Benchmark
// graphs for testing community detection algorithms", PRE 78, 046110):
// power-law degrees (exponent Tau1) and power-law community sizes (exponent
// Tau2, summing exactly to N), internal degree round((1-Mu) k) per node,
// nodes placed in communities big enough for their internal degree by the
// paper's homeless-node procedure, then a configuration model inside each
// community and another across communities, with self-loops, multi-edges and
// misplaced external edges removed by degree-preserving swaps. Tau2 = 1, as
// in the standard sets of Lancichinetti & Fortunato 2009 (PRE 80, 056117),
// works; the defaults are their "S" set. [LFR] documents the steps and the
// few places where this implementation makes a choice the paper leaves open.
//
// [Graph.Mixing] measures the realised mixing (the mean over nodes of the
// fraction of their edges that leave their community), the quantity Mu
// stands for in both generators. [WriteEdgeList] and [WriteMembership] write
// a graph as tab-separated text for the command-line benchmarks.
//
// # Options
//
// Each generator takes an options struct whose zero value is valid after
// EnsureDefaults; Validate reports every problem at once, wrapped in
// [ErrInvalidOptions]. Valid options that still admit no graph for the drawn
// degrees and sizes (for example internal degrees too large for the drawn
// communities) give an error wrapping [ErrInfeasible]; another seed or looser
// options may succeed.
//
// # Determinism
//
// The same options and seed give a bit-identical Graph on every machine and
// every run: all randomness comes from one math/rand/v2 PCG stream seeded
// from Options.Seed, of which only the raw 64-bit output (which the standard
// library specifies exactly) is used; bounded integers, floats and shuffles
// are derived here. No output depends on map order (no Go maps are used) or
// on timing (no goroutines). Floating-point steps that could differ between
// machines are avoided: the logarithms and powers come from this package's
// own code built on the basic operations alone, and products feeding sums
// are explicitly rounded so that no compiler may fuse them into FMA
// instructions. A digest test pins the output of a few fixed seeds.
//
// Different seeds give unrelated graphs. Changing an algorithm here changes
// the graph a seed stands for; the digest test then says so and has to be
// updated on purpose.
package gen
