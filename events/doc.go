// Package events matches the communities of two snapshots by member overlap,
// classifies what happened to them (merge, split, grow, shrink, continue,
// birth, death), and writes the event records: JSON lines ([Encode],
// [JSONLWriter]) and the store's outbox ([Put], [Pending], [MarkPublished]).
//
// # Matching
//
// A is the earlier snapshot, B the later one; P ranges over the communities of
// A, N over those of B, |X| is a community's size and shared(P, N) = |P ∩ N|,
// counted over the nodes present in both snapshots. Jaccard(P, N) =
// shared / (|P| + |N| - shared): members that left the graph or joined it
// count in the union. The overlap table is sparse: one pass over the members
// of each P with a counter indexed by N and a list of the counters touched,
// so the cost is proportional to the number of nodes, never |A| x |B|.
//
// # Rules, applied in this order
//
//  1. Eligibility. Only communities with |X| >= MinSize take part (default 3,
//     a chosen default; below that a "community" is an edge or a
//     node). Smaller communities produce no events and count in no overlap.
//  2. Merge. If two or more P each give N more than half of their own
//     members, shared(P, N) > |P|/2, that is one merge event: before = those P
//     (by id), after = N. This is the majority condition of Asur,
//     Parthasarathy and Ucar 2009 (κ-merge), without their κ threshold on
//     the union: the majority condition alone already makes the parents'
//     bulk the new community's.
//  3. Split. If P gives two or more N more than half of their own members,
//     shared(P, N) > |N|/2, that is one split event: before = P, after = those
//     N (by id). The reverse condition (Asur et al. 2009, κ-split), again
//     without κ.
//     A P gives a majority of itself to at most one N, and an N takes a
//     majority of itself from at most one P, so each community is in at most
//     one merge and at most one split; it can be in one of each (many-to-many
//     change in one step, as Greene, Doyle and Cunningham 2010 allow).
//  4. Continuation. Among the P and N in no merge or split, P and N continue
//     when each is the other's best match (largest shared; ties go to the
//     community whose smallest member node id is lower, a sharpening of "the
//     lower id" that does not depend on how ids were assigned) and
//     Jaccard(P, N) >= Theta (default 0.3, the working value of Greene, Doyle
//     and Cunningham 2010). The continuation is a grow when
//     |N| - |P| >= GrowthFraction*|P|, a shrink when
//     |P| - |N| >= GrowthFraction*|P|, and a continue otherwise
//     (GrowthFraction default 0.1, chosen default: Greene et al. and Palla,
//     Barabási and Vicsek 2007 name expansion and contraction without a
//     threshold). Comparisons allow 1e-9 for rounding.
//  5. Birth: an eligible N in no event above. Death: an eligible P in no
//     event above. Death is immediate: unlike Greene et al. there is no
//     grace period of d steps, since only two snapshots are compared.
//
// # Event record (schema "shoal.event/1")
//
// One JSON object per event, one per line in JSON-lines sinks:
//
//	schema         "shoal.event/1"
//	id             hex, first 16 bytes of SHA-256 over the schema, graph,
//	               both snapshot ids, type and the community ids before and
//	               after: deterministic, a de-duplication key for publishing
//	type           merge | split | grow | shrink | continue | birth | death
//	graph          graph name
//	from_snapshot  id of A;  to_snapshot: id of B
//	from_time      RFC 3339 (UTC) of A's watermark;  to_time: of B's
//	before, after  [{community, size, stats{internal, degree, density,
//	               conductance}, members (only with Options.Members)}]
//	overlaps       [{from, to, shared, jaccard}]: for merge, split and
//	               continuations the pairs between the before and after
//	               communities of the rules above; for birth and death the
//	               overlaps with eligible communities of the other snapshot,
//	               largest first, at most MaxListed (why nothing matched)
//	joined         members of the after communities that were in none of
//	               the before communities (for a birth: all members), node
//	               order, at most MaxListed; joined_count: how many in all
//	left           members of the before communities that are in none of
//	               the after communities (for a death: all members); left_count
//	note           a community is structure, not evidence of wrongdoing
//
// Member ids are external ids from Options.Name (decimal internal ids if nil).
// Events are ordered by type (merge, split, grow, shrink, continue, birth,
// death), then by the after community id for merge and birth and the before
// community id for the others.
//
// # Store (key family 'v')
//
//	'v' | snapshot id (8, big-endian) | index (4, big-endian)   event
//	'v'                                                         published cursor
//
// An event value is the format-version byte (1) and the JSON record. The
// snapshot id is that of B, so the daemon commits a snapshot (package
// snapshot, family 's') and the events that lead to it in one batch. The
// cursor value is the version byte and the 12 key bytes of the last event
// published; [Pending] lists what lies after it, [MarkPublished] moves it.
// Publish in key order with the event id as the message id, so a re-publish
// after a crash is de-duplicated downstream.
package events
