// Package snapshot freezes a partition of the tracked graph, stores it in
// Pebble, lists, loads and retains stored snapshots, exports them (TSV and
// JSON lines), and decides when the next one is due ([Trigger]).
//
// # Freezing
//
// [Freeze] takes the stable community id of every dense node id (or
// tracker.NoCommunity) and the tracker's per-community statistics and builds a
// [Snapshot] in O(n) with no maps: communities sorted by id, members sorted by
// internal node id, plus two derived statistics:
//
//   - Density, the weighted density: Internal / (Size*(Size-1)/2), 0 for a
//     single node. For an unweighted graph it is the fraction of member pairs
//     that are linked.
//   - Conductance: cut / min(vol, 2m - vol) with cut = Degree - 2*Internal and
//     vol = Degree, 0 when the denominator is 0 (a community holding all the
//     weight, or none).
//
// # Key layout
//
// One key family, prefix byte 's', integers big-endian and fixed width so that
// byte order is numeric order:
//
//	's' | snapshot id (8) | 0x00                      header record
//	's' | snapshot id (8) | 0x01 | community id (8)   one record per community
//
// All records of a snapshot lie in ['s'|id, 's'|id+1), so [Retain] deletes all
// old snapshots with one range delete, and [List] reads one header and then
// seeks to the next id.
//
// # Value encodings (format version 1)
//
// Every value starts with the format-version byte (1) and ends with a
// CRC-32C (Castagnoli) of everything before it, 4 bytes big-endian.
// Integers are uvarints unless marked; floats are IEEE 754 bits, 8 bytes
// big-endian.
//
//	header:    version | id | len(graph) graph | seq | watermark (varint) |
//	           time (varint) | modularity | gamma | total weight |
//	           nodes | edges | communities | crc
//	community: version | id | size | internal | degree | density |
//	           conductance | first member | size-1 gaps to the previous
//	           member (each > 0) | [hubs] | crc
//	hubs:      count (> 0) | first hub | count-1 gaps (each > 0)
//
// The hubs (the nodes a hub policy keeps out of the optimisation that are
// adjacent to a member; package tracker/hub) were added later: a community
// without hubs has none of those bytes, so records written before decode
// as communities without hubs, and every community has one encoding.
// [Load] checks the version, checksum and every length, that the ids in keys
// and values agree and that the community and node counts match the header;
// any failure gives an error for which [IsCorrupt] holds. A missing snapshot
// gives [ErrNotFound].
//
// # Atomicity
//
// [Write] and [Retain] add to a caller's *pebble.Batch, so the daemon commits
// a snapshot, its events (package events, family 'v') and the retention
// delete together.
//
// # Caution
//
// A community is structure found in the graph, not evidence of wrongdoing;
// exports carry a note saying so. Member names can be personal data.
package snapshot
