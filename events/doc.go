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
//	               conductance, expected, z}, members (only with
//	               Options.Members), hubs (only with a hub policy)}]
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
//
// # History (key family 'h')
//
// [History] keeps the lineage of every community id over all observed
// snapshots, so a birth is not lost when package snapshot drops the
// snapshot it happened in. Observe folds in one snapshot and the events
// that lead to it; Put adds the changes to the caller's batch, which also
// holds the snapshot and its events; LoadHistory rebuilds it at start.
// Integers in keys are big-endian and fixed width, so byte order is
// numeric order:
//
//	'h' 'c' | community (8)                       community record
//	'h' 'n' | node (4)                            node record
//	'h' 'p' | community (8) | snapshot (8)        point
//	'h' 'r' | community (8) | snapshot (8) | k (1) event reference
//	'h' 's' | snapshot (8)                        snapshot index entry
//
// A community's points are one prefix scan, and so are its references (k
// numbers the events that touched it in one step, at most four: one merge
// and one split on each side). Every value starts with the format-version
// byte (1); integers are uvarints, times (Unix ms, of the snapshot's
// Header.Time) zig-zag varints; a varint must be in its shortest form and
// a value must end with its last field, so truncated, padded or overlong
// bytes are reported, not misread. There is no checksum (Pebble checksums
// its blocks):
//
//	community: version | born | born time | died (0: alive) | died time |
//	           event count | len(from) from... | len(to) to...
//	node:      version | community (0: none) | since | since time
//	point:     version | time | size | lengths | internal | degree
//	           (lengths: high nibble the bytes of internal, low nibble of
//	           degree; each float is its IEEE 754 bits, big-endian, with
//	           trailing zero bytes dropped, so an integral weight below
//	           2^16 takes at most 3 bytes and 0 takes none)
//	reference: version | time | type (index in Types) | event id (16 bytes)
//	index:     version | time | watermark | seq | nodes | edges |
//	           communities | modularity (8 bytes, IEEE 754, big-endian)
//
// Only communities with at least MinSize members are recorded. A record
// is born the first time its id is eligible and dies when it is not; an id
// that is eligible again is alive again and keeps its first Born. From and
// To come from the events: every (before, after) pair of a merge, a split
// or a continuation whose ids differ (the tracker keeps the id of the
// heavier part, so a merge adds the absorbed ids to the survivor's From).
// References are the non-continue events. A point is written only at
// birth, at death and when size, internal or degree changed (the figures
// hold from one point to the next); a node key only when the node's
// community changed (0 when it is in no recorded community). A record is
// rewritten only when it changed.
//
// In memory: the records (their last MaxRefs references and MaxLinks
// links each), the index, and per dense node id one fixed 24-byte record
// in a flat slice. Points stay in the store; HistoryOptions.InMemory keeps
// them in memory too (replay, which has no store), trimmed like the store.
//
// Retention, at every Observe: index entries with a time older than Keep
// before the newest snapshot's are dropped (never the newest); the oldest
// retained entry is the cut. Dead records that died before the cut go
// with all their points and references (one delete and two range deletes),
// and beyond MaxDead the oldest deaths go first. A living community keeps
// its record and its latest point however old; its other points before
// the cut go, in the store by one range delete per community once the
// oldest that may be left is Keep/8 older than the cut (a delete per
// community per snapshot would pile up tombstones). [History.Points]
// returns the points at or after the cut and the latest, whether or not
// the delete has run.
//
// Bytes written (keys and values, the worst case in parentheses): a point
// 18 + 16 typical (51); a community record 10 + 15 typical (1343, with 64
// links each way); a reference 19 + 24 typical (47), and the delete of the
// one it pushes out, 19; a node change 6 + 12 typical (37); an index entry
// 10 + 34 typical (69), deleted later (10). So a community costs nothing in
// a snapshot where its figures held and no event touched it, one point
// (at most 51 bytes) when they changed, and in the worst case, with four
// events in one step, 51 + 1343 + 4*(47+19) = 1658 bytes. [History.Stats]
// counts the bytes actually written, for Bytes/CommunitySnapshots.
//
// [History.WriteJSONL] writes JSON lines: first {"schema":
// "shoal.history/1", "kind": "index", keep_ms, max_dead, min_size,
// snapshots: [{id, time_ms, watermark_ms, seq, nodes, edges, communities,
// modularity}]}, then per community record in id order {"kind":
// "community", community, born, born_ms, died, died_ms, from, to, events:
// [{snapshot, time_ms, type, event}], event_count, points: [{snapshot,
// time_ms, size, internal, degree}]}, then per node ever recorded, in id
// order, {"kind": "node", node (the external id), community, since,
// since_ms}. The same snapshots give the same bytes, here and in the
// store.
package events
