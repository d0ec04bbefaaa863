// Package tracker keeps a partition of a weighted undirected graph that
// changes all the time, at high modularity or high CPM quality. It is pure: no I/O, no clock, no
// goroutines; the same input, options and seed give the same partition and
// the same community ids, bit for bit, on any machine.
//
// # Objective
//
// Two objectives share one optimiser ([Options.Objective]). Modularity with
// resolution gamma (Newman 2006; Reichardt and Bornholdt 2006):
//
//	Q = sum over communities c of [ in_c / 2m - gamma (tot_c / 2m)^2 ]
//
// m is the total edge weight, in_c the weight inside c counted from both
// ends, tot_c the summed weighted degree of c. A self-loop of weight w adds
// 2w to its node's degree and to in_c (Newman's convention; gonum's
// community.Q agrees when given the loop as 2w). [Modularity] computes Q of
// any labelling; the optimiser and the [Tracker] keep in_c and tot_c up to
// date and report the same value.
//
// Modularity has a resolution limit (Fortunato and Barthelemy 2007): two
// groups joined by even one edge merge once they are small against the
// whole graph (about sqrt(2m) edges), however dense they are, and no fixed
// gamma fixes this for groups of every size. The Constant Potts Model
// (Traag, Van Dooren and Nesterov 2011) compares each community with a
// density instead of with the rest of the graph:
//
//	H = sum over communities c of [ e_c - gamma n_c (n_c - 1) / 2 ]
//
// e_c = in_c / 2 is the weight inside c, each edge once, and n_c the summed
// node weight of c ([Graph.SetNodeWeight]; 1 per node by default, so n_c is
// the size). A community is worth keeping when it holds more than gamma
// times its number of node pairs; two groups stay apart when the density of
// the links between them is below gamma, whatever the size of the graph.
// [CPM] computes H of any labelling.
//
// Both are optimised by one code path. With a_i the node's mass in the
// penalty (k_i for modularity, its node weight for CPM), A_c the sum over
// c, and lambda = gamma / 2m for modularity and gamma for CPM, both
// objectives are, up to a positive factor and a constant, the sum over c of
// in_c - lambda A_c^2, so every gain below reads the same with (a, A,
// lambda) in place of (k, tot, gamma / 2m). [Partition.Quality] and
// [Tracker.Quality] report the objective's value; for CPM, Modularity
// reports Q at resolution 1 beside it, for comparison.
//
// # Static
//
// [Detect] runs Louvain (Blondel et al. 2008) with the refinement of Leiden
// (Traag, Waltman and van Eck 2019): local moving from a queue in a seeded
// random order (blocks of 64 ids on large graphs, for cache locality),
// refinement of each community from singletons, aggregation of the refined
// partition with the unrefined one as its start, until local moving leaves
// every aggregate node alone. Then the whole of it runs again from the
// partition found, as Traag et al. iterate it, while a pass raises the
// quality by 0.1% or more ([Options.Passes]). Every returned community is
// connected. Hot
// loops run on flat slices (a CSR-like slab, a dense accumulator indexed
// by community with a list of touched entries).
//
// With k_i the weighted degree of node i and k_i,C the weight of its edges
// to the members of C other than i, putting a node that stands alone into
// community C gains
//
//	dQ(i -> C) = k_i,C / m - gamma k_i tot_C / 2m^2
//
// Local moving takes i out of its community D and puts it into the
// neighbouring community of largest gain (ties: the lower community index),
// and only when that beats going back to D by more than 1e-10 k_i, the
// gains being compared multiplied by m. For CPM the gain is k_i,C -
// gamma n_i n_C (Objective). The refinement lets a singleton v
// of community S join a sub-community T of S only when both are well
// connected to S,
//
//	w(v, S - v) >= gamma k_v (tot_S - k_v) / 2m
//	w(T, S - T) >= gamma tot_T (tot_S - tot_T) / 2m
//
// and the gain is positive (the greedy form of Traag et al. 2019,
// Algorithm A.2). v only joins a T it has an edge to, so every
// sub-community is connected.
//
// # Incremental
//
// [Tracker.Apply] takes a batch of edge and node changes and:
//
//  1. applies them to the graph, updating weighted degrees, tot_c, in_c
//     and 2m in place;
//  2. marks the frontier (the dynamic-frontier rule, Sahu 2024): both ends
//     of an edge that lost weight inside one community, and of an edge that
//     gained weight between two communities;
//  3. looks for dense groups the batch formed across communities (group
//     pass, see groupPass): a ring of existing nodes can only form as a
//     whole, never node by node;
//  4. runs local moving from the frontier in a seeded order; a node that
//     moves puts its neighbours outside the target on the frontier;
//  5. splits every community that may have fallen apart (see split.go);
//  6. re-optimises from singletons every community that lost a fifth or
//     more of its internal weight, and splits it when that raises Q: such a
//     community can stay a local optimum for single moves after it has
//     stopped being a good one (see resplitPass);
//  7. merges, whole, the small communities an added edge joined when that
//     raises Q (the community-level step of Louvain, restricted to what the
//     batch touched; see mergePass).
//
// [Tracker.Settle], which the timeline calls before each snapshot, runs the
// resplit of step 6 on every community whose internal weight grew by a
// tenth since the last Settle: a group that formed a few edges a batch
// next to a community is otherwise glued to it, and what a snapshot holds
// would depend on how the events were batched.
//
// The work is proportional to the batch and the frontier, not to the graph.
// The frontier rule ignores the small shift of every gain caused by the
// change of m; Delta-screening (Zarayeneh et al. 2021) would examine more
// nodes to catch it. We chose the frontier rule because its cost is bounded
// by the neighbourhood of what changed, and guard the drift with full
// passes instead (below); on LFR graphs the incremental partition stays
// within 0.01 of a static run after 100 batches (see lfr_test.go and the
// README's benchmark).
//
// # Drift guard
//
// [Options.FullEvery] runs [Tracker.Optimize], a full static pass
// warm-started from the current partition, every N batches;
// [Options.DriftBound] runs it once the edge weight changed since the last
// full pass exceeds that fraction of m (a change of weight d moves Q by at
// most about d/m, so this bounds what the frontier rule can have missed).
//
// # Stable ids
//
// Community ids are uint64, handed out in increasing order and never
// reused. A fresh run numbers communities from 1 by decreasing size (ties:
// lowest member). A node that moves takes the id of its target. When two
// communities merge, the result keeps the id of the one that brings the
// most weight (tot; ties: the older id). When a community splits, the part
// with the most weight keeps the id and the others get fresh ones. A full
// or warm-started pass maps old ids onto new communities greedily by the
// summed degree of shared nodes, heaviest pair first, and only where the
// pair holds at least half of either side (ids.go has the exact rule).
//
// # Validation
//
// [NMI] (normalised mutual information, 2 I(a;b) / (H(a) + H(b)); Danon,
// Diaz-Guilera, Duch and Arenas 2005) and [ARI] (the adjusted Rand index;
// Hubert and Arabie 1985) compare two partitions: the results of runs with
// different seeds (stability), or a result and known groups. Significance
// is measured against the configuration model, the random graph with the
// same degrees: [Rewire] draws one by degree-preserving double-edge swaps
// (Maslov and Sneppen 2002), [Null] runs the same optimiser on k such
// graphs and gives the z-score of the observed Q against theirs, and
// [ExpectedInternal] is the internal weight a community would hold there
// (k_i k_j / 2m summed over its pairs of members).
//
// # Invariants
//
// [Tracker.Check] recomputes everything kept in place and compares within
// 1e-9 relative: weighted degrees, 2m, size, tot_c and in_c of every
// community, the member lists, unique ids below [Tracker.NextID], and that
// every community is connected. The tests call it after every batch.
//
// A [Tracker] and a [Graph] are not safe for concurrent use.
package tracker
