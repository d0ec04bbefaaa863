package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"time"

	"github.com/schollz/progressbar/v3"

	"shoal/events"
	"shoal/events/timeline"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
	"shoal/tracker/hub"
)

// shoal replay FILE
//
// Semantics, in the order they apply:
//
//  1. Reading. The whole input is decoded first (about 32 bytes per event
//     in memory), so that a bad line stops the command with its file:line
//     and exit code 2 before anything is written. An event without a time
//     takes the watermark at its place in the file (the largest time
//     before it); events before the first timed one take the first time;
//     in a file with no time at all every event is at the Unix epoch
//     (then --every and --window are refused).
//  2. Ordering. Events are applied in event-time order. A file that is
//     not sorted by time is stable-sorted by time in memory (events with
//     equal times keep their file order) and a note says so on stderr; the
//     result is then byte for byte that of the sorted file. The daemon
//     applies events in arrival order, so it matches replay on sorted
//     files (publish the sorted file for the same result).
//  3. Node ids. Dense ids are handed out in order of first mention by an
//     add or a positive set, in the applied order (the rule of ingest.Load);
//     a remove, set 0 or node-remove that names a node never added does
//     nothing (it still counts as an event).
//  4. Changes. Every event goes through an ingest.Window (with --window,
//     expiry driven by the watermark; without, an exact record of the
//     edges), whose AppendChanges turns it into tracker changes: first the
//     increments that expire at the event's time, then the event itself.
//  5. Batches and snapshots come from the timeline (package
//     events/timeline), as in the daemon: the changes of events 1..N,
//     N+1..2N, ... (N = --apply-every, counted from the first event) go to
//     the tracker as one batch each, and a batch also ends at every
//     snapshot, so --apply-every changes the speed, not the snapshots.
//  6. Snapshots. The time boundaries are the multiples of --every since
//     the Unix epoch (UTC). Before the first event at or past a boundary T
//     the pending batch is applied, the window is expired to T, and the
//     snapshot at T is taken: it holds exactly the events with time before
//     T, and its time is T. A gap longer than --every gives one snapshot,
//     at the first boundary, not empty ones. --every-events N takes one
//     once N events came since the last snapshot (any N); and one more is
//     taken at the end of the input if events came after the last one.
//     Snapshot ids run from 1; Seq is the number of events applied;
//     Watermark the largest event time applied (or the boundary); replay
//     has no wall clock: its output depends on the input and the flags.
//  7. The drift guard (--drift-bound, default 0.25) runs a full
//     warm-started pass once the weight changed since the last one exceeds
//     that fraction of the total. Measured every 5000 events against a
//     static run on the same graph (Q static - Q tracker, mean / worst):
//     collegemsg.tsv 0.028 / 0.032 without the guard, 0.005 / 0.015 at
//     0.25, -0.001 / 0.005 at 0.1; with a 720h window 0.036 / 0.092, 0.009
//     / 0.019, 0.002 / 0.007. At 0.1 the full passes take about twice as
//     long as at 0.25 (half the time of a 10^6-event replay), hence the
//     default; pass --drift-bound 0.1 when quality matters more than time.
//  8. Events between consecutive snapshots come from events.Classify and
//     go out as JSON lines (stdout, or --events-out); nothing is compared
//     with the empty graph before snapshot 1, so the first snapshot is the
//     baseline.

// replayEvent is one decoded event, compact.
type replayEvent struct {
	ts   int64
	w    float64
	u, v uint32 // ids in the reading dictionary (file order)
	op   ingest.Op
	hasW bool
}

// snapshotLine is one line of --snapshots-out: the header fields of the
// snapshot JSON-lines export (schema snapshot.JSONSchema) plus what replay
// knows about the interval.
type snapshotLine struct {
	snapshot.HeaderJSON
	// Eligible is the number of communities with at least --min-size
	// members: those that take part in events.
	Eligible int `json:"eligible"`
	// Largest is the size of the largest community.
	Largest int `json:"largest"`
	// Events is the number of lifecycle events from the previous snapshot
	// to this one (0 for the first).
	Events int `json:"events"`
}

// replaySummary is the final summary on stderr (text, or JSON with --json).
type replaySummary struct {
	File          string      `json:"file"`
	Graph         string      `json:"graph"`
	Events        int         `json:"events"`
	Lines         int         `json:"lines"`
	Sorted        bool        `json:"sorted"`
	FirstTime     string      `json:"first_time"`
	LastTime      string      `json:"last_time"`
	Window        string      `json:"window"`
	ApplyEvery    int         `json:"apply_every"`
	Batches       int         `json:"batches"`
	FullPasses    int         `json:"full_passes"`
	Snapshots     int         `json:"snapshots"`
	Objective     string      `json:"objective"`
	QualityMin    float64     `json:"quality_min"`
	QualityMax    float64     `json:"quality_max"`
	ModularityMin float64     `json:"modularity_min"`
	ModularityMax float64     `json:"modularity_max"`
	Lifecycle     int         `json:"lifecycle_events"`
	ByType        eventCounts `json:"by_type"`
	Nodes         int         `json:"nodes"`
	Edges         int         `json:"edges"`
	Communities   int         `json:"communities"`
	// Hubs is what the hub policy kept out of the tracker at the last
	// snapshot (hubs.go); Nodes and Edges are of the graph without.
	Hubs *hubReport `json:"hubs,omitempty"`
}

const noID = ^uint32(0)

func runReplay(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "replay", "FILE [options]")
	trf := addTrackerFlags(fs, true)
	mf := addMatchFlags(fs)
	tf := addTimelineFlags(fs, "", 0)
	eventsOut := fs.String("events-out", "", "write the events to this file instead of stdout")
	snapshotsOut := fs.String("snapshots-out", "", "write one JSON line per snapshot header to this file")
	historyOut := fs.String("history-out", "", "write the lineage (snapshot index, one line per community, one per node) as JSON lines to this file at the end")
	graph := fs.String("graph", "", "graph name in events and snapshots (default: the file name)")
	asJSON := fs.Bool("json", false, "print the final summary on stderr as one JSON object")
	lo := addInputFlags(fs)
	hf := addHubFlags(fs)
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usagef("want exactly one FILE (or - for stdin), got %d arguments", len(pos))
	}
	hp, err := hf.policy()
	if err != nil {
		return err
	}
	topts, err := trf.options()
	if err != nil {
		return err
	}
	sched, err := tf.schedule()
	if err != nil {
		return err
	}
	if sched.Off() {
		return usagef("no snapshot schedule: give --every DURATION (event time, e.g. 24h) and/or --every-events N")
	}
	lopts, err := lo.options(pos[0])
	if err != nil {
		return err
	}
	name := *graph
	if name == "" {
		name = lopts.Name
	}
	// A placeholder that validates the options before the input is read.
	if _, err := mf.options(nil); err != nil {
		return err
	}

	in, err := readReplay(e, pos[0], lopts.ReaderOptions)
	if err != nil {
		return err
	}
	if !in.timed && len(in.evs) > 0 && (*tf.every > 0 || *tf.window > 0) {
		return usagef("%s: no event has a time, so --every and --window cannot work; use --every-events", lopts.Name)
	}
	if !in.sorted {
		fmt.Fprintf(e.stderr, "shoal replay: %s is not in time order: stable-sorted its %d events by time in memory\n", lopts.Name, len(in.evs))
	}

	r := &replayer{e: e, in: in, graph: name, win: ingest.NewWindow(*tf.window), minSize: *mf.minSize, hp: hp}
	eo, _ := mf.options(r.name)
	if r.hubs, err = r.hubFilter(hp); err != nil {
		return err
	}
	tr, err := tracker.New(&topts)
	if err != nil {
		return usageError{err}
	}
	hist, err := events.NewHistory(&events.HistoryOptions{Keep: *tf.history, MinSize: eo.MinSize, NoStore: true})
	if err != nil {
		return usageError{err}
	}
	r.tl, err = timeline.New(timeline.Config{
		Graph: name, Schedule: sched, ApplyEvery: *tf.applyEvery, Match: eo, Expire: r.win.AppendExpire, Hubs: r.hubs,
	}, tr, nil, hist, timeline.NewState(), timeline.SinkFunc(r.snapshot))
	if err != nil {
		return usageError{err}
	}
	r.sum = replaySummary{File: pos[0], Graph: name, Events: len(in.evs), Lines: in.lines, Sorted: in.sorted,
		Window: tf.window.String(), ApplyEvery: *tf.applyEvery, ModularityMin: math.NaN(), ModularityMax: math.NaN(),
		QualityMin: math.NaN(), QualityMax: math.NaN(), Objective: topts.Objective.String()}
	if len(in.evs) > 0 {
		r.sum.FirstTime = snapshot.RFC3339(in.evs[0].ts)
		r.sum.LastTime = snapshot.RFC3339(in.evs[len(in.evs)-1].ts)
	}
	err = withOutput(e, *eventsOut, func(ew io.Writer) error {
		r.ew = ew
		if *snapshotsOut == "" {
			return r.run(ctx)
		}
		return withOutput(e, *snapshotsOut, func(sw io.Writer) error {
			r.sw = json.NewEncoder(sw)
			return r.run(ctx)
		})
	})
	if err != nil {
		return err
	}
	if *historyOut != "" {
		if err := withOutput(e, *historyOut, func(w io.Writer) error { return hist.WriteJSONL(w, r.name) }); err != nil {
			return err
		}
	}
	return r.summarise(*asJSON)
}

// replayInput is a decoded input in applied order.
type replayInput struct {
	evs    []replayEvent
	dict   *ingest.Dict
	lines  int
	sorted bool // the file was already in time order
	timed  bool // at least one event has a time
}

// readReplay decodes the whole input, gives untimed events their time (the
// watermark at their place) and stable-sorts by time if needed.
func readReplay(e *env, path string, o ingest.ReaderOptions) (*replayInput, error) {
	var src io.Reader = e.stdin
	size := int64(-1)
	if path != "-" {
		f, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		if st, err := f.Stat(); err == nil {
			size = st.Size()
		}
		src = f
	}
	rd, err := ingest.NewReader(src, o)
	if err != nil {
		return nil, usageError{err}
	}
	var bar *progressbar.ProgressBar
	if e.interactive {
		bar = progressbar.NewOptions64(size,
			progressbar.OptionSetWriter(e.stderr),
			progressbar.OptionSetDescription("reading "+o.Name),
			progressbar.OptionShowBytes(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
		defer bar.Finish()
	}
	in := &replayInput{dict: ingest.NewDict(), sorted: true}
	var ev ingest.Event
	wm := int64(math.MinInt64)
	untimed := 0 // events before the first timed one
	for n := 0; ; n++ {
		err := rd.Next(&ev)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			var d *ingest.DecodeError
			if errors.As(err, &d) {
				return nil, err
			}
			return nil, fmt.Errorf("read %s: %w", o.Name, err)
		}
		re := replayEvent{op: ev.Op, w: ev.W, hasW: ev.HasW, u: in.dict.ID(ev.Src)}
		if ev.Op != ingest.OpNodeRemove {
			re.v = in.dict.ID(ev.Dst)
		}
		switch {
		case ev.HasTS:
			if in.timed && ev.TS < wm {
				in.sorted = false
			}
			if !in.timed || ev.TS > wm {
				wm = ev.TS
			}
			in.timed = true
			re.ts = ev.TS
		case in.timed:
			re.ts = wm
		default:
			untimed++
		}
		in.evs = append(in.evs, re)
		if bar != nil && n%4096 == 0 {
			_ = bar.Set64(rd.BytesRead())
		}
	}
	in.lines = rd.Line()
	if in.timed {
		first := in.evs[untimed].ts // the first timed event's time
		for i := range in.evs[:untimed] {
			in.evs[i].ts = first
		}
	}
	if !in.sorted {
		slices.SortStableFunc(in.evs, func(a, b replayEvent) int {
			switch {
			case a.ts < b.ts:
				return -1
			case a.ts > b.ts:
				return 1
			}
			return 0
		})
	}
	return in, nil
}

// replayer runs the applied-order events through the window and the
// timeline, and writes what the timeline's snapshots give.
type replayer struct {
	e       *env
	in      *replayInput
	graph   string
	win     *ingest.Window
	tl      *timeline.Timeline
	minSize int
	hp      *hubPolicy
	hubs    *hub.Filter // nil without a hub policy

	ew io.Writer     // events
	sw *json.Encoder // snapshot headers, or nil

	ids   []uint32 // reading id -> dense id, noID if not yet added
	order []uint32 // dense id -> reading id
	names []string // dense id -> external id, filled by name

	sum replaySummary
}

// name returns the external id of dense id v. Events name the same nodes
// snapshot after snapshot, so each name is made once and kept.
func (r *replayer) name(v uint32) string {
	for int(v) >= len(r.names) {
		r.names = append(r.names, "")
	}
	if r.names[v] == "" {
		r.names[v] = r.in.dict.Name(r.order[v])
	}
	return r.names[v]
}

func (r *replayer) dense(f uint32) uint32 {
	if r.ids[f] == noID {
		r.ids[f] = uint32(len(r.order))
		r.order = append(r.order, f)
	}
	return r.ids[f]
}

func (r *replayer) run(ctx context.Context) error {
	evs := r.in.evs
	r.ids = make([]uint32, r.in.dict.Len())
	for i := range r.ids {
		r.ids[i] = noID
	}
	var bar *progressbar.ProgressBar
	if r.e.interactive {
		bar = progressbar.NewOptions(len(evs),
			progressbar.OptionSetWriter(r.e.stderr),
			progressbar.OptionSetDescription("replaying"),
			progressbar.OptionShowCount(),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
		defer bar.Finish()
	}
	var chs []tracker.Change
	for i := range evs {
		ev := &evs[i]
		if err := r.tl.At(ev.ts); err != nil {
			return err
		}
		var u, v uint32
		known := true
		switch {
		case ev.op == ingest.OpAdd || (ev.op == ingest.OpSet && ev.w > 0):
			u, v = r.dense(ev.u), r.dense(ev.v)
		case ev.op == ingest.OpNodeRemove:
			u = r.ids[ev.u]
			known = u != noID
		default:
			u, v = r.ids[ev.u], r.ids[ev.v]
			known = u != noID && v != noID
		}
		if known {
			chs = r.win.AppendChanges(chs[:0], ev.op, ev.ts, u, v, ev.w, ev.hasW)
		} else {
			chs = r.win.AppendExpire(chs[:0], ev.ts) // the event still moves the watermark
		}
		if err := r.tl.Add(chs); err != nil {
			return fmt.Errorf("event %d: %w", i+1, err)
		}
		if i%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
			if bar != nil {
				_ = bar.Set(i)
			}
		}
	}
	if err := r.tl.End(); err != nil {
		return err
	}
	st := r.tl.Stats()
	r.sum.Batches, r.sum.FullPasses = st.Batches, st.FullPasses
	if r.hubs != nil {
		r.sum.Hubs = newHubReport(r.hp, st.Hubs, r.hubs.Threshold())
	}
	return nil
}

// snapshot is the timeline's sink: it writes the events and the header
// line, and keeps the summary.
func (r *replayer) snapshot(s *snapshot.Snapshot, evs []events.Event, _ *events.History) error {
	for i := range evs {
		if err := events.Encode(r.ew, &evs[i]); err != nil {
			return err
		}
		r.sum.ByType.add(evs[i].Type)
	}
	r.sum.Lifecycle += len(evs)
	if r.sw != nil {
		line := snapshotLine{HeaderJSON: s.HeaderJSON(), Eligible: eligible(s, r.minSize), Events: len(evs)}
		for i := range s.Communities {
			line.Largest = max(line.Largest, s.Communities[i].Size)
		}
		if err := r.sw.Encode(line); err != nil {
			return err
		}
	}
	q, h := s.Modularity, s.Quality
	if r.sum.Snapshots == 0 {
		r.sum.ModularityMin, r.sum.ModularityMax = q, q
		r.sum.QualityMin, r.sum.QualityMax = h, h
	}
	r.sum.ModularityMin, r.sum.ModularityMax = min(r.sum.ModularityMin, q), max(r.sum.ModularityMax, q)
	r.sum.QualityMin, r.sum.QualityMax = min(r.sum.QualityMin, h), max(r.sum.QualityMax, h)
	r.sum.Snapshots++
	r.sum.Nodes, r.sum.Edges, r.sum.Communities = s.Nodes, s.Edges, len(s.Communities)
	return nil
}

func (r *replayer) summarise(asJSON bool) error {
	s := &r.sum
	if asJSON {
		if s.Snapshots == 0 {
			s.ModularityMin, s.ModularityMax = 0, 0 // JSON has no NaN
			s.QualityMin, s.QualityMax = 0, 0
		}
		return json.NewEncoder(r.e.stderr).Encode(s)
	}
	w := r.e.stderr
	if s.Events == 0 {
		fmt.Fprintf(w, "%s has no events: no snapshots\n", s.File)
		return nil
	}
	order := "in time order"
	if !s.Sorted {
		order = "sorted by time"
	}
	fmt.Fprintf(w, "replayed %d events of %s (%s), %s .. %s, in %d batches of up to %d (%d full passes)", s.Events, s.File, order, s.FirstTime, s.LastTime, s.Batches, s.ApplyEvery, s.FullPasses)
	if r.win.Span() > 0 {
		fmt.Fprintf(w, ", window %s", s.Window)
	}
	fmt.Fprintln(w)
	if s.Objective == tracker.ObjectiveCPM.String() {
		fmt.Fprintf(w, "%d snapshots, CPM value %.6g .. %.6g (modularity %.6f .. %.6f, for comparison); last: %d nodes, %d edges, %d communities\n",
			s.Snapshots, s.QualityMin, s.QualityMax, s.ModularityMin, s.ModularityMax, s.Nodes, s.Edges, s.Communities)
	} else {
		fmt.Fprintf(w, "%d snapshots, modularity %.6f .. %.6f; last: %d nodes, %d edges, %d communities\n",
			s.Snapshots, s.ModularityMin, s.ModularityMax, s.Nodes, s.Edges, s.Communities)
	}
	fmt.Fprintf(w, "%d events: %s\n", s.Lifecycle, s.ByType.String())
	printHubs(w, s.Hubs)
	return nil
}
