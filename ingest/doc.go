// Package ingest turns edge events from files, standard input and NATS
// messages into validated [Event] values, interns node ids ([Dict]), and
// folds whole files into a static graph for the one-shot commands ([Load]).
// It does no community detection.
//
// # Event model
//
// An [Event] has an [Op], two external node ids (Src, Dst), an optional
// weight W and an optional time TS in Unix milliseconds:
//
//   - add (the default) adds W, or 1 when W is not given, to the weight of
//     the undirected edge Src-Dst; repeated adds accumulate, as parallel
//     edges do in a multigraph;
//   - remove deletes the edge, or with W subtracts W from its weight;
//   - set sets the weight to W, which it requires (0 deletes the edge);
//   - node-remove deletes the node Src and all its edges; it has no Dst and
//     no W.
//
// Ids are opaque strings of 1..[MaxIDBytes] bytes of valid UTF-8 with no
// control characters (U+0000..U+001F, U+007F: they would break every
// line-oriented output and only ever come from binary garbage). A given
// weight is finite and > 0 (>= 0 for set). A missing time is reported as
// HasTS false: the caller decides (the daemon uses the arrival time). The
// graph is undirected; the order of Src and Dst is kept in the event but
// not used.
//
// # Formats
//
// JSON lines ([JSONLines], [DecodeJSON]): one flat object per line with the
// fields op, src, dst, w and ts, in any order:
//
//	{"op":"add","src":"acct-1093","dst":"acct-2210","w":125.0,"ts":"2026-11-30T08:15:02Z"}
//	{"op":"remove","src":"acct-1093","dst":"acct-2210"}
//	{"op":"set","src":"svc-cart","dst":"svc-price","w":42}
//	{"op":"node-remove","src":"acct-1093"}
//
// The decoder is strict, so that a typo never silently turns into a
// default: an unknown field ("weight" for "w"), a duplicate field, a value
// of the wrong type (src must be a string, w a number), anything after the
// closing brace, an unknown op, a missing src or dst, an empty or over-long
// id, a weight that is not a finite positive number (zero only for set) or
// is given on node-remove, and a time that is neither an RFC 3339 string
// nor an integer number of milliseconds are all errors. Strings take the
// JSON escapes, including \uXXXX and surrogate pairs; a lone surrogate is
// an encoding error. Keys are compared after unescaping and case-sensitively.
//
// Edge lists ([EdgeList], [DecodeEdgeList]): "src dst [w [ts]]" per line,
// separated by spaces, tabs or one comma (with optional blanks around it).
// Every line is an add. Numeric times are Unix milliseconds, or seconds
// with [Seconds] (the SNAP files); RFC 3339 times are accepted too. With
// [ColumnsTime] the layout is "src dst [ts]" (the SNAP temporal files,
// whose third column is a time, not a weight). Ids cannot contain blanks,
// commas or double quotes: quoted CSV fields are not supported and fail
// loudly, as does a JSON line met in an edge list.
//
// In both formats, and in the [Reader] and [DecodeMessage], blank lines
// and lines whose first non-blank byte is '#' are skipped, CRLF line
// endings and a UTF-8 byte order mark at the start are accepted, and
// invalid UTF-8 or control bytes (binary data) are encoding errors. [Auto]
// picks JSON lines when the first line that is neither blank nor a comment
// starts with '{', an edge list otherwise.
//
// # Errors
//
// A bad line yields a [*DecodeError] naming the file, the line, the field
// and what is wrong, with a copy of the line's bytes, for example
//
//	karate.tsv:12: weight: not a number "abc"
//	events.jsonl:3: unknown field "weight"
//
// It unwraps to one sentinel ([ErrSyntax], [ErrUnknownOp],
// [ErrUnknownField], [ErrMissingField], [ErrEmptyID], [ErrIDTooLong],
// [ErrBadWeight], [ErrBadTime], [ErrBadEncoding], [ErrLineTooLong]) for
// errors.Is ([ErrDictFull], from Load alone, is not a line fault). The
// contract by entry point:
//
//   - [Reader.Next] returns the error and goes on with the next line when
//     called again; errors from the underlying reader are sticky.
//   - [DecodeMessage] returns every good event and one error per bad line:
//     a bad line never hides the others and is never dropped silently.
//   - [Load] stops at the first bad line and returns its error and no
//     partial result.
//
// Field names in errors are the JSON keys (op, src, dst, w, ts) for JSON
// lines and the column names (src, dst, weight, time) for edge lists.
//
// # Loading files
//
// [Load] and [LoadFile] read a whole file for the one-shot commands and
// fold its events, in file order, into one weight per unordered pair
// ([Loaded].Edges, U <= V, self-loops kept) plus the node [Dict]. A
// node-remove drops the node's edges but leaves the node in the Dict, so
// Dict.Len() counts it; nodes named only by remove, set 0 or node-remove
// are not added. The rules are in Load's doc comment.
//
// # Sliding window
//
// With a window of span d (the daemon's and shoal replay's --window; 0
// means none) an add at event time ts counts only from ts until ts+d. The
// [Feed] folds events through a [Window], which keeps each add as an
// increment with its expiry, so that the weight of an edge is exactly the
// sum of its increments that have not expired. Expiry is driven by the
// event-time watermark, the largest event time seen, never by the clock,
// so replaying a file gives the same weights as the live stream. An event
// without a time counts at its arrival time when one is known (the daemon
// passes the JetStream message time), else at the watermark
// ([Feed.EventTime]). A remove with W consumes increments, oldest expiry
// first; set replaces them with one. [Window] has the exact rules; the
// increments are persisted in family 'x' (below).
//
// # Store key space
//
// The daemon's [Store] is one Pebble database (format version
// [StoreFormat]). Keys start with a family byte; integers in keys are
// big-endian and fixed-width, so byte order is numeric order and a prefix
// scan comes out sorted. Weights are the IEEE 754 bits of the float64,
// big-endian, with trailing zero bytes dropped (1.0 takes 2 bytes).
//
//	'm' name                      metadata: "format" (1 byte, the version),
//	                              "graph" (the name), "window" (span in ms,
//	                              8 bytes), "pseudonym" (key id, 8 bytes, or
//	                              empty), "state" ([State]: version byte,
//	                              uvarints; the watermark a zig-zag varint),
//	                              "set/<name>" (settings the daemon keeps:
//	                              "set/snapshot-every" ms, "set/snapshot-
//	                              every-events", 8 bytes each)
//	'i' id (4)                    flags (1 byte: 1 = node absent) | external id
//	'e' u (4) v (4), u <= v       weight of the undirected edge
//	'x' expiry (8) u (4) v (4) seq (8)
//	                              weight of one window increment (window
//	                              mode only); the expiry is Unix ms with the
//	                              sign bit flipped, so the family is in
//	                              expiry order
//	'r' seq (8) line (4)          a rejected line waiting to be published:
//	                              version | code | field | reason | raw bytes
//	                              (each uvarint-length-prefixed) | time
//	's', 'v'                      snapshots and the event outbox (packages
//	                              snapshot and events)
//
// Two choices keep an edge under 32 bytes on disk: an edge is stored once
// (u <= v), not in both directions, since the daemon holds the adjacency in
// memory; and there is no name-to-id family, since the dictionary is
// rebuilt in memory from 'i' at start. Without a window the edges are the
// increments (one per edge, never expiring), so family 'x' stays empty.
//
// # Exactly once
//
// [Consumer.Run] keeps this protocol; the numbers are referred to in
// consumer.go.
//
//  1. At start the store says where ingest stands: the durable consumer
//     (ack policy "all") is reset to the stored sequence + 1 (created if
//     absent), whatever its own ack floor says.
//  2. Messages come in batches of at most MaxBatch messages and about
//     MaxBatchEvents events. Each delivery must carry the next consumer
//     (delivery) sequence; a gap (deliveries lost in a broker outage, a
//     consumer reset by someone else, a client that dropped messages) ends
//     the batch before the gap, and once what came before is committed the
//     consumer goes back to step 1.
//  3. A message at or below the sequence applied so far (a redelivery) is
//     acked with the batch and not applied.
//  4. Every other message is decoded ([DecodeMessage]; in the delivery
//     goroutine, ahead of the fold) and its good events go through the
//     [Feed] (dictionary, window) into tracker changes; each bad line, and a
//     message with no event at all, becomes a [Reject] in the outbox and is
//     counted. Each good event's time goes to [Sink].Before before it is
//     folded and its changes to [Sink].Changes after; the sink (the
//     daemon's timeline) may add a snapshot, its events and its history to
//     the same batch.
//  5. The new dictionary entries, presence changes, edge weights (in key
//     order), increments, rejects, and the state (last sequence,
//     watermark, counters) go into one Pebble batch, which the committer
//     goroutine commits synced while the consumer builds the next batch.
//  6. Only after the commit is the last message of the batch acked (one
//     ack covers the batch), and then OnCommit called. A crash between 5
//     and 6 means a redelivery, which step 3 skips; a crash before 5 loses
//     only what was never acked. A failed commit stops the consumer: what
//     is on disk is the truth for the next start.
//  7. When the server reports nothing pending, or nothing came for
//     IdleApply, the remainder is handed to Apply and committed.
//  8. Rejects are published from the outbox to the rejects subject with
//     the message id graph.seq.line and deleted once acknowledged
//     ([RejectPublisher]); with pseudonymisation the outbox holds no raw
//     bytes or reasons, which are read back from the ingest stream.
package ingest
