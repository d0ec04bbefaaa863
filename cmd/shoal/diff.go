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
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
)

// shoal diff OLD NEW
//
// The communities of OLD come from a static run (seeded); those of NEW from
// a run warm-started from OLD's partition, node by node through the
// external ids (tracker.DetectFrom), so that regions that did not change
// keep their community ids. Each partition is then settled: warm-started
// passes are repeated until it stops changing (at most 10), so that a file
// diffed against itself gives only continue events. The two partitions are frozen as snapshots 1
// and 2 in one node-id space (OLD's ids, then the ids only NEW has) and
// classified by package events; the events go out as JSON lines. Snapshot
// times are --old-time and --new-time (the Unix epoch when not given: a
// file has no time of its own, and the file's modification time would make
// the output depend on where the file was copied).

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
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	Eligible    int     `json:"eligible"`
}

// diffSummary is the summary of shoal diff (text, or JSON with --json).
type diffSummary struct {
	Graph        string      `json:"graph"`
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
}

func runDiff(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "diff", "OLD NEW [options]")
	trf := addTrackerFlags(fs, false)
	mf := addMatchFlags(fs)
	graph := fs.String("graph", "", "graph name in the events (default: NEW's file name)")
	eventsOut := fs.String("events-out", "", "write the events to this file instead of stdout")
	oldTime := fs.String("old-time", "", "time of OLD in the events (RFC 3339 or Unix ms; default the Unix epoch)")
	newTime := fs.String("new-time", "", "time of NEW in the events (RFC 3339 or Unix ms; default the Unix epoch)")
	asJSON := fs.Bool("json", false, "print the summary on stderr as one JSON object")
	lo := addInputFlags(fs)
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 2 {
		return usagef("want two files OLD and NEW, got %d arguments", len(pos))
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
	gOld := tracker.NewGraph(old.Dict.Len(), old.Edges)
	pOld := settle(gOld, &topts, tracker.Detect(gOld, &topts))
	// NEW's ids in the common id space (OLD's, then NEW's own), and the warm
	// start: each node of NEW starts in its community of OLD.
	nOld := old.Dict.Len()
	uid := make([]uint32, cur.Dict.Len())
	prev := make([]uint64, cur.Dict.Len())
	var only []uint32 // NEW ids without an OLD id, in NEW id order
	kept := 0
	for i := range uid {
		if oid, ok := old.Dict.Lookup(cur.Dict.Name(uint32(i))); ok {
			uid[i], prev[i] = oid, pOld.Membership[oid]
			kept++
			continue
		}
		uid[i], prev[i] = uint32(nOld+len(only)), tracker.NoCommunity
		only = append(only, uint32(i))
	}
	gNew := tracker.NewGraph(cur.Dict.Len(), cur.Edges)
	pNew := settle(gNew, &topts, tracker.DetectFrom(gNew, &topts, prev))
	if err := ctx.Err(); err != nil {
		stop()
		return err
	}
	n := nOld + len(only)
	memOld := make([]uint64, n)
	memNew := make([]uint64, n)
	for i := range memOld {
		memOld[i], memNew[i] = tracker.NoCommunity, tracker.NoCommunity
	}
	copy(memOld, pOld.Membership)
	for i, c := range pNew.Membership {
		memNew[uid[i]] = c
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
	sA, err := snapshot.Freeze(snapshot.Header{
		ID: 1, Graph: name, Watermark: tOld, Time: tOld, Modularity: pOld.Modularity, Gamma: topts.Resolution,
		TotalWeight: gOld.TotalWeight(), Edges: gOld.Edges(),
	}, memOld, pOld.Communities)
	if err != nil {
		stop()
		return fmt.Errorf("freeze %s: %w", pos[0], err)
	}
	sB, err := snapshot.Freeze(snapshot.Header{
		ID: 2, Graph: name, Watermark: tNew, Time: tNew, Modularity: pNew.Modularity, Gamma: topts.Resolution,
		TotalWeight: gNew.TotalWeight(), Edges: gNew.Edges(),
	}, memNew, pNew.Communities)
	if err != nil {
		stop()
		return fmt.Errorf("freeze %s: %w", pos[1], err)
	}
	evs, err := events.Classify(sA, sB, &eo)
	stop()
	if err != nil {
		return err
	}
	sum := diffSummary{
		Graph: name, Resolution: topts.Resolution, Seed: topts.Seed, MinSize: eo.MinSize,
		Old:       side(pos[0], gOld, sA, eo.MinSize),
		New:       side(pos[1], gNew, sB, eo.MinSize),
		NodesKept: kept, NodesAdded: len(only), NodesRemoved: nOld - kept, Events: len(evs),
	}
	for i := range evs {
		sum.ByType.add(evs[i].Type)
	}
	if err := writeEvents(e, *eventsOut, evs); err != nil {
		return err
	}
	if *asJSON {
		return json.NewEncoder(e.stderr).Encode(sum)
	}
	fmt.Fprintf(e.stderr, "%s: %d nodes, %d edges, %d communities (%d of at least %d), modularity %.6f\n",
		sum.Old.File, sum.Old.Nodes, sum.Old.Edges, sum.Old.Communities, sum.Old.Eligible, eo.MinSize, sum.Old.Modularity)
	fmt.Fprintf(e.stderr, "%s: %d nodes, %d edges, %d communities (%d of at least %d), modularity %.6f\n",
		sum.New.File, sum.New.Nodes, sum.New.Edges, sum.New.Communities, sum.New.Eligible, eo.MinSize, sum.New.Modularity)
	fmt.Fprintf(e.stderr, "nodes: %d in both, %d only in NEW, %d only in OLD\n", kept, len(only), nOld-kept)
	fmt.Fprintf(e.stderr, "%d events: %s\n", sum.Events, sum.ByType.String())
	return nil
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

func side(file string, g *tracker.Graph, s *snapshot.Snapshot, minSize int) graphSide {
	gs := graphSide{File: file, Nodes: g.Nodes(), Edges: g.Edges(), TotalWeight: g.TotalWeight(),
		Modularity: s.Modularity, Communities: len(s.Communities)}
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
