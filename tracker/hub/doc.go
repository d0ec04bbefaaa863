// Package hub keeps hubs out of the optimisation. A hub is a node so widely
// connected that it joins groups that have nothing else in common: a large
// merchant every customer pays, a logging service every host talks to.
// Modularity has no way to leave such a node out: it puts the hub in one
// community and, once the graph is large enough for the resolution limit
// to bite (Fortunato and Barthelemy 2007), merges small groups that share
// it. The policy here takes the hubs and every edge they end out of what
// the optimiser sees, and keeps them everywhere else: the store, the full
// graph, and the answers, where each community lists the hubs adjacent to
// its members. A hub is structure too: being one says nothing about the
// node.
//
// The package is pure: no I/O, no clock, no goroutines; the same input and
// policy give the same result.
//
// # Policy
//
// A [Policy] names hubs by three rules, any of which makes a node a hub:
//
//   - Degree N: more than N distinct neighbours (a self-loop is not a
//     neighbour; parallel edges are one).
//   - Percentile P, in (0, 100): more distinct neighbours than the P-th
//     percentile of the distinct-neighbour counts of the nodes that have at
//     least one neighbour, by the nearest-rank definition (the count at
//     rank ceil(P n / 100) of the n counts in increasing order). A graph in
//     which every node has the same count has no hub at any P.
//   - Nodes: a list, whatever their degree (and, for names not known yet,
//     a [Policy.Listed] predicate asked once per new node).
//
// The zero Policy has no rule and no hub, and that is the default of every
// command: a threshold that is right for one graph is wrong for another
// (in Zachary's karate club the instructor and the president, with 16 and
// 17 of the 78 edges, are the centres of the two factions the graph is
// known for; any low threshold would take them out), so hubs are asked for,
// never assumed.
//
// # Static graphs
//
// [Exclude] removes the hubs of a graph in place, recording each hub's
// neighbours first so that [Excluded.Touched] can say which communities of
// the remaining graph each hub is adjacent to; [Split] does the same for an
// edge list and returns the edges left.
//
// # Streams
//
// A [Filter] sits between a stream of tracker changes and the tracker. It
// keeps the full graph (every change applied) and the distinct-neighbour
// count of every node, and holds this invariant after every call: the
// tracker's edges are exactly the full graph's edges with no hub end, with
// the same weights, and the tracker's nodes exactly the non-hub nodes with
// at least one such edge. To keep it, [Filter.Apply]:
//
//   - passes on a change that touches no hub before or after it;
//   - drops a change that touches a hub (counted);
//   - when a node becomes a hub (its count passes the degree threshold, or
//     it is listed), emits an OpRemoveNode for it;
//   - when a node stops being one (its count fell back: a window expired
//     its edges), emits an OpSet for each of its edges to non-hubs, at the
//     full graph's weight;
//   - removes from the tracker a node whose last edge to a non-hub went
//     (its other neighbours having become hubs, say), as the sliding
//     window does for a node with no edge left.
//
// The degree rule applies at every change. The percentile threshold moves
// only at [Filter.Boundary] (the timeline calls it before every snapshot)
// and when the filter is made: between two snapshots a node passing the
// last threshold becomes a hub at once, but the threshold itself is that of
// the graph at the last boundary, so it does not shift with every change.
// After a restart it is that of the stored graph, which may hold events
// after the last snapshot; from the next boundary on it is the same as
// without the restart.
//
// The filter keeps its own full graph, so a stream with a policy holds two
// graphs: the full one here and the one without hubs in the tracker (about
// twice the memory of a stream without; nothing changes without a policy).
//
// Everything is deterministic: the changes emitted depend only on the
// changes given, in their order, and the policy.
//
// # Counts
//
// [Counts] says what the policy excluded: the hubs present, the edges of
// the full graph with a hub end and their weight, the nodes stranded (all
// their neighbours hubs, so in no community either), and (streams) the
// changes dropped.
//
// # Caution
//
// Node ids can be personal data; a hub list names nodes. A community that
// lists a hub is structure, not evidence about the hub or the members.
package hub
