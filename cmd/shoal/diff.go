package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"shoal/events"
	"shoal/events/timeline"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
)

// shoal diff OLD NEW
//
// The communities of OLD come from a static run (seeded), settled:
// warm-started passes are repeated until it stops changing (at most 10).
// The timeline (package events/timeline) then takes that partition as
// snapshot 1, applies the changes that turn OLD into NEW (a set for every
// pair whose weight differs, a delete for every pair NEW lacks, a removal
// for every node NEW does not name) as one batch, with the drift guard
// (--drift-bound) running a full warm-started pass when much of the weight
// changed, and takes snapshot 2: the events are those the daemon would
// report for that change, in one node-id space (OLD's ids, then the ids
// only NEW has). A file diffed against itself gives only continue events.
// Snapshot times are --old-time and --new-time (the Unix epoch when not
// given: a file has no time of its own, and the file's modification time
// would make the output depend on where the file was copied).

// parseTimeFlag reads an RFC 3339 time or Unix milliseconds; "" is 0.
func parseTimeFlag(flagName, s string) (int64, error) {
	if s == "" {
		return 0, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t.UnixMilli(), nil
	}
	var ms int64
	if _, err := fmt.Sscanf(s, "%d", &ms); err == nil && fmt.Sprint(ms) == s {
		return ms, nil
	}
	return 0, usagef("--%s %q: want an RFC 3339 time or Unix milliseconds", flagName, s)
}

// eventCounts counts events by type, in events.Types order.
type eventCounts [len(events.Types)]int

func (c *eventCounts) add(t events.Type) {
	for i, x := range events.Types {
		if x == t {
			c[i]++
		}
	}
}

func (c *eventCounts) total() int {
	n := 0
	for _, x := range c {
		n += x
	}
	return n
}

func (c *eventCounts) String() string {
	var b strings.Builder
	for i, t := range events.Types {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%s %d", t, c[i])
	}
	return b.String()
}

// MarshalJSON writes {"merge": n, ...} in events.Types order.
func (c eventCounts) MarshalJSON() ([]byte, error) {
	b := []byte{'{'}
	for i, t := range events.Types {
		if i > 0 {
			b = append(b, ',')
		}
		b = fmt.Appendf(b, "%q:%d", t, c[i])
	}
	return append(b, '}'), nil
}

// UnmarshalJSON reads what MarshalJSON writes.
func (c *eventCounts) UnmarshalJSON(b []byte) error {
	var m map[string]int
	if err := json.Unmarshal(b, &m); err != nil {
		return err
	}
	for i, t := range events.Types {
		c[i] = m[string(t)]
	}
	return nil
}

// graphSide summarises one input of diff.
type graphSide struct {
	File        string  `json:"file"`
	Nodes       int     `json:"nodes"`
	Edges       int     `json:"edges"`
	TotalWeight float64 `json:"total_weight"`
	Quality     float64 `json:"quality"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	Eligible    int     `json:"eligible"`
}

// diffSummary is the summary of shoal diff (text, or JSON with --json).
type diffSummary struct {
	Graph        string      `json:"graph"`
	Objective    string      `json:"objective"`
	Resolution   float64     `json:"resolution"`
	Seed         uint64      `json:"seed"`
	MinSize      int         `json:"min_size"`
	Old          graphSide   `json:"old"`
	New          graphSide   `json:"new"`
	NodesKept    int         `json:"nodes_kept"`
	NodesAdded   int         `json:"nodes_added"`
	NodesRemoved int         `json:"nodes_removed"`
	Events       int         `json:"events"`
	ByType       eventCounts `json:"by_type"`
	// Hubs is what the hub policy kept out of the tracker, in NEW
	// (hubs.go); the sides' figures are of the graphs without.
	Hubs *hubReport `json:"hubs,omitempty"`
}

func runDiff(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "diff", "OLD NEW [options]")
	trf := addTrackerFlags(fs, true)
	mf := addMatchFlags(fs)
	graph := fs.String("graph", "", "graph name in the events (default: NEW's file name)")
	eventsOut := fs.String("events-out", "", "write the events to this file instead of stdout")
	oldTime := fs.String("old-time", "", "time of OLD in the events (RFC 3339 or Unix ms; default the Unix epoch)")
	newTime := fs.String("new-time", "", "time of NEW in the events (RFC 3339 or Unix ms; default the Unix epoch)")
	asJSON := fs.Bool("json", false, "print the summary on stderr as one JSON object")
	lo := addInputFlags(fs)
	hf := addHubFlags(fs)
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 2 {
		return usagef("want two files OLD and NEW, got %d arguments", len(pos))
	}
	hp, err := hf.policy()
	if err != nil {
		return err
	}
	if pos[0] == "-" && pos[1] == "-" {
		return usagef("only one of OLD and NEW can be - (stdin)")
	}
	topts, err := trf.options()
	if err != nil {
		return err
	}
	tOld, err := parseTimeFlag("old-time", *oldTime)
	if err != nil {
		return err
	}
	tNew, err := parseTimeFlag("new-time", *newTime)
	if err != nil {
		return err
	}
	var loaded [2]*ingest.Loaded
	for i, p := range pos {
		o, err := lo.options(p)
		if err != nil {
			return err
		}
		if loaded[i], err = loadWithProgress(e, p, o); err != nil {
			return err
		}
	}
	name := *graph
	if name == "" {
		name = filepath.Base(pos[1])
		if pos[1] == "-" {
			name = "stdin"
		}
	}
	old, cur := loaded[0], loaded[1]
	stop := spinner(e, "optimising")
	// One node-id space: OLD's ids, then the ids only NEW has.
	nOld := old.Dict.Len()
	uid := make([]uint32, cur.Dict.Len())
	var only []uint32 // NEW ids without an OLD id, in NEW id order
	kept := 0
	for i := range uid {
		if oid, ok := old.Dict.Lookup(cur.Dict.Name(uint32(i))); ok {
			uid[i] = oid
			kept++
			continue
		}
		uid[i] = uint32(nOld + len(only))
		only = append(only, uint32(i))
	}
	nameOf := func(v uint32) string {
		if int(v) < nOld {
			return old.Dict.Name(v)
		}
		return cur.Dict.Name(only[int(v)-nOld])
	}
	eo, err := mf.options(nameOf)
	if err != nil {
		stop()
		return err
	}
	gOld := tracker.NewGraph(nOld, old.Edges)
	// With a hub policy the tracker starts from OLD without its hubs; the
	// filter keeps gOld, the full graph, and passes on the changes.
	hubs, gT, err := hubGraph(hp, gOld, func(name string) (uint32, bool) {
		if id, ok := old.Dict.Lookup(name); ok {
			return id, true
		}
		id, ok := cur.Dict.Lookup(name)
		if !ok {
			return 0, false
		}
		return uid[id], true
	})
	if err != nil {
		stop()
		return err
	}
	pOld := settle(gT, &topts, tracker.Detect(gT, &topts))
	trOld, err := tracker.NewWithPartition(gT, &topts, pOld.Membership, 1)
	if err != nil {
		stop()
		return err
	}
	// The timeline takes OLD's partition as snapshot 1, the changes that
	// turn OLD into NEW as one event, and snapshot 2 after it: the events
	// are those the daemon would report for that change.
	var snaps []*snapshot.Snapshot
	var evs []events.Event
	tl, err := timeline.New(timeline.Config{Graph: name, Match: eo, Hubs: hubs}, trOld, nil, nil, timeline.NewState(),
		timeline.SinkFunc(func(s *snapshot.Snapshot, e []events.Event, _ *events.History) error {
			snaps = append(snaps, s)
			evs = e
			return nil
		}))
	if err != nil {
		stop()
		return usageError{err}
	}
	if err := tl.At(tOld); err != nil {
		stop()
		return err
	}
	if _, err := tl.Snapshot(tOld); err != nil {
		stop()
		return err
	}
	if err := tl.At(tNew); err != nil {
		stop()
		return err
	}
	if err := tl.Add(diffChanges(gOld, cur.Edges, uid, nOld, kept)); err != nil {
		stop()
		return err
	}
	if _, err := tl.Snapshot(tNew); err != nil {
		stop()
		return err
	}
	stop()
	if err := ctx.Err(); err != nil {
		return err
	}
	sA, sB := snaps[0], snaps[1]
	sum := diffSummary{
		Graph: name, Objective: topts.Objective.String(), Resolution: topts.Resolution, Seed: topts.Seed, MinSize: eo.MinSize,
		Old:       side(pos[0], sA, eo.MinSize),
		New:       side(pos[1], sB, eo.MinSize),
		NodesKept: kept, NodesAdded: len(only), NodesRemoved: nOld - kept, Events: len(evs),
	}
	for i := range evs {
		sum.ByType.add(evs[i].Type)
	}
	if hubs != nil {
		sum.Hubs = newHubReport(hp, tl.Stats().Hubs, hubs.Threshold())
	}
	if err := writeEvents(e, *eventsOut, evs); err != nil {
		return err
	}
	if *asJSON {
		return json.NewEncoder(e.stderr).Encode(sum)
	}
	for _, gs := range []graphSide{sum.Old, sum.New} {
		fmt.Fprintf(e.stderr, "%s: %d nodes, %d edges, %d communities (%d of at least %d), %s\n",
			gs.File, gs.Nodes, gs.Edges, gs.Communities, gs.Eligible, eo.MinSize, qualityText(sum.Objective, gs.Quality, gs.Modularity))
	}
	fmt.Fprintf(e.stderr, "nodes: %d in both, %d only in NEW, %d only in OLD\n", kept, len(only), nOld-kept)
	fmt.Fprintf(e.stderr, "%d events: %s\n", sum.Events, sum.ByType.String())
	printHubs(e.stderr, sum.Hubs)
	return nil
}

// diffChanges returns the tracker changes that turn gOld into NEW's edges
// (in NEW's ids, uid maps them to the common space): a set for every pair
// whose weight differs, a delete for every pair NEW lacks, and a node
// removal for every OLD node that NEW does not name. Deterministic: NEW's
// edges in their order, then OLD's in node order.
func diffChanges(gOld *tracker.Graph, newEdges []tracker.Edge, uid []uint32, nOld, kept int) []tracker.Change {
	var chs []tracker.Change
	inNew := make(map[[2]uint32]bool, len(newEdges))
	for _, e := range newEdges {
		u, v := uid[e.U], uid[e.V]
		if u > v {
			u, v = v, u
		}
		inNew[[2]uint32{u, v}] = true
		if int(v) >= nOld || gOld.Weight(u, v) != e.W {
			chs = append(chs, tracker.Change{Op: tracker.OpSet, U: u, V: v, W: e.W})
		}
	}
	named := make([]bool, nOld)
	for _, u := range uid {
		if int(u) < nOld {
			named[u] = true
		}
	}
	for u := range uint32(nOld) {
		if gOld.SelfLoop(u) > 0 && !inNew[[2]uint32{u, u}] {
			chs = append(chs, tracker.Change{Op: tracker.OpDelete, U: u, V: u})
		}
		gOld.Neighbours(u, func(v uint32, _ float64) {
			if u < v && !inNew[[2]uint32{u, v}] {
				chs = append(chs, tracker.Change{Op: tracker.OpDelete, U: u, V: v})
			}
		})
	}
	if kept < nOld {
		for u := range nOld {
			if !named[u] && gOld.Has(uint32(u)) {
				chs = append(chs, tracker.Change{Op: tracker.OpRemoveNode, U: uint32(u)})
			}
		}
	}
	return chs
}

// settleRuns bounds the warm-started passes of settle.
const settleRuns = 10

// settle runs warm-started passes from p until the partition (ids
// included) stops changing, at most settleRuns times. A static run is not
// a fixed point of a warm start (another pass from it can still improve
// Q), and a diff of a graph against itself must show no change, so both
// partitions of a diff are settled the same way.
func settle(g *tracker.Graph, o *tracker.Options, p *tracker.Partition) *tracker.Partition {
	for range settleRuns {
		q := tracker.DetectFrom(g, o, p.Membership)
		if slices.Equal(q.Membership, p.Membership) {
			return p
		}
		p = q
	}
	return p
}

func side(file string, s *snapshot.Snapshot, minSize int) graphSide {
	gs := graphSide{File: file, Nodes: s.Nodes, Edges: s.Edges, TotalWeight: s.TotalWeight,
		Quality: s.Quality, Modularity: s.Modularity, Communities: len(s.Communities)}
	gs.Eligible = eligible(s, minSize)
	return gs
}

// eligible counts the communities of s that take part in events.
func eligible(s *snapshot.Snapshot, minSize int) int {
	n := 0
	for i := range s.Communities {
		if s.Communities[i].Size >= minSize {
			n++
		}
	}
	return n
}

// writeEvents writes evs as JSON lines to path (atomically), or to stdout
// when path is "".
func writeEvents(e *env, path string, evs []events.Event) error {
	return withOutput(e, path, func(w io.Writer) error {
		for i := range evs {
			if err := events.Encode(w, &evs[i]); err != nil {
				return err
			}
		}
		return nil
	})
}

// withOutput runs write on a buffered stdout when path is "", else on a
// file written atomically (writeFileAtomic: no partial file on failure).
func withOutput(e *env, path string, write func(w io.Writer) error) error {
	if path == "" {
		bw := bufio.NewWriterSize(e.stdout, 1<<16)
		if err := write(bw); err != nil {
			return err
		}
		return bw.Flush()
	}
	if err := writeFileAtomic(path, write); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// qualityText says what a partition's quality is: its modularity, or for
// cpm its CPM value with its modularity for comparison.
func qualityText(objective string, quality, modularity float64) string {
	if objective == tracker.ObjectiveCPM.String() {
		return fmt.Sprintf("CPM value %.6g (modularity %.6f, for comparison)", quality, modularity)
	}
	return fmt.Sprintf("modularity %.6f", modularity)
}
