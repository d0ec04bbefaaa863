package timeline

import (
	"errors"
	"fmt"
	"math"
	"sync"
	"sync/atomic"
	"time"

	"shoal/events"
	"shoal/snapshot"
	"shoal/tracker"
	"shoal/tracker/hub"
)

// ErrInvalid is returned (wrapped) for a configuration that cannot work.
var ErrInvalid = errors.New("timeline: invalid configuration")

// Schedule says when snapshots are due. The zero value takes none (only
// [Timeline.Snapshot] on request and [Timeline.End]).
type Schedule struct {
	// Every is the event-time interval between snapshots: the boundaries
	// are the multiples of Every since the Unix epoch (UTC). 0: no time
	// rule; otherwise at least a millisecond.
	Every time.Duration
	// EveryEvents takes a snapshot once this many events were added since
	// the last snapshot. 0: no count rule.
	EveryEvents int
}

// Validate reports what is wrong with s.
func (s Schedule) Validate() error {
	switch {
	case s.Every < 0 || (s.Every > 0 && s.Every < time.Millisecond):
		return fmt.Errorf("%w: snapshot interval %v: must be 0 or at least 1ms", ErrInvalid, s.Every)
	case s.EveryEvents < 0:
		return fmt.Errorf("%w: snapshot event count %d: must not be negative", ErrInvalid, s.EveryEvents)
	}
	return nil
}

// Off reports whether no rule is set.
func (s Schedule) Off() bool { return s.Every == 0 && s.EveryEvents == 0 }

// String is the schedule as flags would give it.
func (s Schedule) String() string {
	switch {
	case s.Off():
		return "off"
	case s.EveryEvents == 0:
		return "every " + s.Every.String()
	case s.Every == 0:
		return fmt.Sprintf("every %d events", s.EveryEvents)
	}
	return fmt.Sprintf("every %v or %d events", s.Every, s.EveryEvents)
}

// boundary returns the last multiple of every at or before ts (ts itself
// when every is 0), rounding towards minus infinity for negative times.
func boundary(ts int64, every time.Duration) int64 {
	e := every.Milliseconds()
	if e <= 0 || ts == math.MinInt64 {
		return ts
	}
	b := ts / e * e
	if b > ts {
		b -= e
	}
	return b
}

// Config configures a [Timeline]. Zero fields take the defaults given.
type Config struct {
	// Graph is the graph name in snapshots and events.
	Graph string
	// Schedule says when snapshots are due.
	Schedule Schedule
	// ApplyEvery ends a batch after every ApplyEvery-th event, counted from
	// the first event the timeline ever saw (State.Events), so a resumed
	// timeline cuts where an uninterrupted one would. Default 1000. A batch
	// also ends at every snapshot, so this is a speed knob only.
	ApplyEvery int
	// Match are the event-matching options (MinSize, Theta, ...; Name gives
	// external ids in the records).
	Match events.Options
	// Expire, if set, is called at a time boundary T before the snapshot
	// at T, and returns dst with the changes of every windowed increment
	// that expires at or before T (ingest.Window.AppendExpire): the
	// snapshot then holds the graph exactly as it was at T.
	Expire func(dst []tracker.Change, t int64) []tracker.Change
	// Async applies the batches in a goroutine of the timeline's own, so
	// that the caller decodes and stores the next events meanwhile (the
	// daemon). A snapshot waits for it. [Timeline.Close] stops it.
	Async bool
	// Check runs tracker.Check after every batch and fails the batch on an
	// inconsistency (tests).
	Check bool
	// Seq, if set, gives the Seq of a snapshot's header (the daemon: the
	// stream sequence of the last event in it). Default: the number of
	// events added (State.Events).
	Seq func() uint64
	// Hubs, if set, keeps hubs out of the tracker (package tracker/hub):
	// every change, the window's expiries included, goes through it before
	// it joins a batch; its percentile threshold is re-evaluated before
	// every snapshot; and every snapshot's communities list the hubs
	// adjacent to their members (snapshot.Community.Hubs). The tracker must
	// hold the filter's Tracked graph when the timeline is made (an empty
	// tracker for an empty filter; Rebuild on Tracked after a restart). The
	// timeline's owner goroutine is the only one to use it from then on.
	// With Check, hub.Filter.Verify runs before every snapshot.
	Hubs *hub.Filter
}

// Sink receives every snapshot with the events from the previous one
// (none for the first) and the history after it, in snapshot order, in
// the goroutine that called the method that took the snapshot.
type Sink interface {
	Snapshot(s *snapshot.Snapshot, evs []events.Event, h *events.History) error
}

// SinkFunc adapts a function to [Sink].
type SinkFunc func(s *snapshot.Snapshot, evs []events.Event, h *events.History) error

// Snapshot calls f.
func (f SinkFunc) Snapshot(s *snapshot.Snapshot, evs []events.Event, h *events.History) error {
	return f(s, evs, h)
}

// State is what a timeline needs to resume where it stopped: store it with
// the changes it accounts for.
type State struct {
	// Events counts the events added since the timeline was first created.
	Events uint64
	// Watermark is the largest event time seen (or boundary passed),
	// math.MinInt64 before the first event.
	Watermark int64
	// Mark is the time boundary of the last snapshot (the time rule counts
	// from it; math.MinInt64 before the first event), MarkEvents the event
	// count at the last snapshot.
	Mark       int64
	MarkEvents uint64
	// LastSnapshot is the id of the last snapshot taken (0: none).
	LastSnapshot uint64
}

// NewState is the state of a timeline that has seen nothing.
func NewState() State { return State{Watermark: math.MinInt64, Mark: math.MinInt64} }

// Stats count what a timeline did since it was made.
type Stats struct {
	Batches, FullPasses, Snapshots int
	// Pending is the number of changes waiting for the next batch.
	Pending int
	// Hubs is what Config.Hubs kept out of the tracker, as of the last
	// snapshot (zero without a hub filter).
	Hubs hub.Counts
}

// Timeline owns the cycle events -> tracker batches -> snapshot at each
// boundary -> lifecycle events -> sink. It holds no clock and does no I/O:
// its output depends on the events, their times and the configuration
// only, so shoal replay and the daemon give the same snapshots and events
// for the same ordered input.
//
// The caller drives it event by event: [Timeline.At] with the event's time
// before its changes exist (the snapshots due before it are taken there),
// then [Timeline.Add] with its changes. [Timeline.Flush] applies the
// pending batch early (an idle stream), [Timeline.End] applies it and
// takes a last snapshot if events came since the previous one.
//
// At, Add, Flush, Snapshot, End, SetSchedule and Close are called from one
// goroutine (the owner); Read, NextID and Stats from any.
type Timeline struct {
	cfg   Config
	sink  Sink
	hist  *events.History
	st    State
	prev  *snapshot.Snapshot
	batch []tracker.Change
	mem   []uint64

	mu struct {
		sync.RWMutex
		tr *tracker.Tracker
	}
	nextID  atomic.Uint64
	batches atomic.Int64 // batches applied (by the queue's goroutine too)
	full    atomic.Int64 // of them, full passes of the drift guard
	snaps   atomic.Int64 // snapshots taken
	pend    atomic.Int64 // changes in the batch being built
	q       *queue       // nil unless Async
	exp     []tracker.Change
	hubs    atomic.Pointer[hub.Counts] // as of the last snapshot
}

// New returns a timeline over tr (a new tracker, or one rebuilt by
// [Rebuild]), resuming at st after the snapshot prev (nil if none was
// taken) with the history hist (nil: a new one with default options).
func New(cfg Config, tr *tracker.Tracker, prev *snapshot.Snapshot, hist *events.History, st State, sink Sink) (*Timeline, error) {
	if cfg.ApplyEvery == 0 {
		cfg.ApplyEvery = 1000
	}
	if cfg.ApplyEvery < 0 {
		return nil, fmt.Errorf("%w: apply every %d events: must be at least 1", ErrInvalid, cfg.ApplyEvery)
	}
	if err := cfg.Schedule.Validate(); err != nil {
		return nil, err
	}
	cfg.Match.EnsureDefaults()
	if err := cfg.Match.Validate(); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrInvalid, err)
	}
	if tr == nil {
		return nil, fmt.Errorf("%w: no tracker", ErrInvalid)
	}
	if hist == nil {
		var err error
		if hist, err = events.NewHistory(&events.HistoryOptions{MinSize: cfg.Match.MinSize, NoStore: true}); err != nil {
			return nil, err
		}
	}
	if prev != nil && prev.ID > st.LastSnapshot {
		st.LastSnapshot = prev.ID
	}
	t := &Timeline{cfg: cfg, sink: sink, hist: hist, st: st, prev: prev}
	t.realign()
	t.mu.tr = tr
	t.nextID.Store(tr.NextID())
	if cfg.Async {
		t.q = newQueue(4, t.apply)
	}
	return t, nil
}

// At tells the timeline that the next event is at time ts (Unix ms): if a
// time boundary lies at or before ts, the pending batch is applied, the
// window is expired to the first such boundary T (Config.Expire) and the
// snapshot at T is taken, holding exactly the events before T. Boundaries
// with no event between them give one snapshot, at the first, not empty
// ones: the graph at the later ones is the same.
func (t *Timeline) At(ts int64) error {
	if t.st.Mark == math.MinInt64 {
		// The time rule starts at the boundary before the first event.
		t.st.Mark = boundary(ts, t.cfg.Schedule.Every)
	}
	if every := t.cfg.Schedule.Every; every > 0 && ts > t.st.Mark && ts-t.st.Mark >= every.Milliseconds() {
		T := t.st.Mark + every.Milliseconds()
		if t.cfg.Expire != nil {
			if err := t.expire(T); err != nil {
				return err
			}
		}
		t.st.Watermark = max(t.st.Watermark, T)
		if err := t.take(T); err != nil {
			return err
		}
		t.st.Mark = boundary(ts, every)
	}
	t.st.Watermark = max(t.st.Watermark, ts)
	return nil
}

// Add adds the changes of one event (possibly none: the event still
// counts) and applies the batch when the event count reaches a multiple of
// ApplyEvery, or takes the snapshot EveryEvents asks for.
func (t *Timeline) Add(chs []tracker.Change) error {
	if t.cfg.Hubs == nil {
		t.batch = append(t.batch, chs...)
	} else {
		var err error
		if t.batch, err = t.cfg.Hubs.Apply(t.batch, chs); err != nil {
			return fmt.Errorf("timeline: event %d: %w", t.st.Events+1, err)
		}
	}
	t.pend.Store(int64(len(t.batch)))
	t.st.Events++
	if n := t.cfg.Schedule.EveryEvents; n > 0 && t.st.Events-t.st.MarkEvents >= uint64(n) {
		return t.take(t.st.Watermark)
	}
	if t.st.Events%uint64(t.cfg.ApplyEvery) == 0 {
		return t.flush()
	}
	return nil
}

// expire adds the window's expiries up to T to the batch, through the hub
// filter if there is one.
func (t *Timeline) expire(T int64) error {
	if t.cfg.Hubs == nil {
		t.batch = t.cfg.Expire(t.batch, T)
		return nil
	}
	t.exp = t.cfg.Expire(t.exp[:0], T)
	var err error
	if t.batch, err = t.cfg.Hubs.Apply(t.batch, t.exp); err != nil {
		return fmt.Errorf("timeline: expiry at %d: %w", T, err)
	}
	return nil
}

// Flush applies the pending changes now (the daemon, when the stream is
// idle). It does not wait for an asynchronous batch to finish.
func (t *Timeline) Flush() error { return t.flush() }

// Snapshot applies the pending changes and takes a snapshot at time ts
// (the watermark if ts is math.MinInt64) if events were added since the
// last one; it reports whether it took one.
func (t *Timeline) Snapshot(ts int64) (bool, error) {
	if t.st.Events == t.st.MarkEvents && t.st.LastSnapshot > 0 {
		return false, t.flush()
	}
	if ts == math.MinInt64 {
		ts = t.st.Watermark
	}
	return true, t.take(ts)
}

// End applies what is pending and takes the last snapshot if events came
// since the previous one (the end of a replayed file).
func (t *Timeline) End() error {
	if t.st.Events == t.st.MarkEvents {
		if err := t.flush(); err != nil {
			return err
		}
		return t.wait()
	}
	_, err := t.Snapshot(math.MinInt64)
	return err
}

// SetSchedule changes the schedule from the next boundary on.
func (t *Timeline) SetSchedule(s Schedule) error {
	if err := s.Validate(); err != nil {
		return err
	}
	t.cfg.Schedule = s
	t.realign()
	return nil
}

// realign puts the time mark on a multiple of the interval in force, at or
// after the last one and at the boundary before the watermark: the next
// snapshot is then at the first boundary after every event applied, also
// after the interval changed (a restart with another --snapshot-every).
// With the interval unchanged it does nothing.
func (t *Timeline) realign() {
	if t.st.Mark == math.MinInt64 || t.cfg.Schedule.Every == 0 {
		return
	}
	every := t.cfg.Schedule.Every
	t.st.Mark = boundary(t.st.Mark, every)
	if t.st.Watermark != math.MinInt64 {
		t.st.Mark = max(t.st.Mark, boundary(t.st.Watermark, every))
	}
}

// Schedule returns the schedule in force.
func (t *Timeline) Schedule() Schedule { return t.cfg.Schedule }

// State returns the state to store with the changes added so far.
func (t *Timeline) State() State { return t.st }

// Previous returns the last snapshot taken (or given to New), nil if none.
func (t *Timeline) Previous() *snapshot.Snapshot { return t.prev }

// History returns the lineage kept across snapshots.
func (t *Timeline) History() *events.History { return t.hist }

// NextID returns the tracker's next community id after the last batch
// applied (any goroutine): store it so that ids are not handed out twice
// across a restart.
func (t *Timeline) NextID() uint64 { return t.nextID.Load() }

// Stats returns the counters (any goroutine).
func (t *Timeline) Stats() Stats {
	s := Stats{Batches: int(t.batches.Load()), FullPasses: int(t.full.Load()), Snapshots: int(t.snaps.Load())}
	s.Pending = int(t.pend.Load())
	if c := t.hubs.Load(); c != nil {
		s.Hubs = *c
	}
	if t.q != nil {
		s.Pending += t.q.pending()
	}
	return s
}

// Read calls fn with the tracker under a read lock (any goroutine): the
// tracker is between two batches, never in the middle of one. fn must not
// keep the tracker or call the timeline.
func (t *Timeline) Read(fn func(tr *tracker.Tracker)) {
	t.mu.RLock()
	defer t.mu.RUnlock()
	fn(t.mu.tr)
}

// Close waits for the asynchronous batches and stops their goroutine; it
// returns the first error of a batch. The timeline cannot be used after.
func (t *Timeline) Close() error {
	if t.q == nil {
		return nil
	}
	return t.q.close()
}

// flush hands the pending batch to the tracker (or its goroutine).
func (t *Timeline) flush() error {
	if len(t.batch) == 0 {
		return nil
	}
	var err error
	if t.q != nil {
		err = t.q.push(t.batch) // the queue holds a copy
	} else {
		err = t.apply(t.batch)
	}
	t.batch = t.batch[:0]
	t.pend.Store(0)
	return err
}

func (t *Timeline) wait() error {
	if t.q == nil {
		return nil
	}
	return t.q.wait()
}

// apply runs one batch (the owner goroutine, or the queue's).
func (t *Timeline) apply(chs []tracker.Change) error {
	t.mu.Lock()
	res, err := t.mu.tr.Apply(chs)
	if err == nil && t.cfg.Check {
		if cerr := t.mu.tr.Check(); cerr != nil {
			err = fmt.Errorf("tracker check after a batch of %d changes: %w", len(chs), cerr)
		}
	}
	t.nextID.Store(t.mu.tr.NextID())
	t.mu.Unlock()
	t.batches.Add(1)
	if res.Full {
		t.full.Add(1)
	}
	if err != nil {
		return fmt.Errorf("timeline: apply a batch of %d changes: %w", len(chs), err)
	}
	return nil
}

// settle runs tracker.Settle before a snapshot, so that the snapshot does
// not depend on how the events were batched (no batch is running).
func (t *Timeline) settle() error {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.mu.tr.Settle()
	if t.cfg.Check {
		if err := t.mu.tr.Check(); err != nil {
			return fmt.Errorf("timeline: tracker check after settling: %w", err)
		}
	}
	t.nextID.Store(t.mu.tr.NextID())
	return nil
}

// take applies the pending batch, waits for the tracker and takes the
// snapshot at time ts.
func (t *Timeline) take(ts int64) error {
	if t.cfg.Hubs != nil {
		t.batch = t.cfg.Hubs.Boundary(t.batch)
		t.pend.Store(int64(len(t.batch)))
	}
	if err := t.flush(); err != nil {
		return err
	}
	if err := t.wait(); err != nil {
		return err
	}
	if err := t.settle(); err != nil {
		return err
	}
	id := t.st.LastSnapshot + 1
	wm := t.st.Watermark
	if wm == math.MinInt64 {
		wm = 0
	}
	if ts == math.MinInt64 {
		ts = wm
	}
	var s *snapshot.Snapshot
	var err error
	// The tracker is still here (no batch is running); the read lock keeps
	// the freeze consistent for HTTP readers all the same.
	t.Read(func(tr *tracker.Tracker) {
		seq := t.st.Events
		if t.cfg.Seq != nil {
			seq = t.cfg.Seq()
		}
		if f := t.cfg.Hubs; f != nil && t.cfg.Check {
			if err = f.Verify(tr.Graph()); err != nil {
				return
			}
		}
		s, t.mem, err = Freeze(tr, snapshot.Header{ID: id, Graph: t.cfg.Graph, Seq: seq, Watermark: wm, Time: ts}, t.mem)
	})
	if err != nil {
		return fmt.Errorf("timeline: snapshot %d: %w", id, err)
	}
	if f := t.cfg.Hubs; f != nil {
		touched := f.Touched(t.mem)
		for i := range s.Communities {
			s.Communities[i].Hubs = touched[s.Communities[i].ID]
		}
		c := f.Counts()
		t.hubs.Store(&c)
	}
	var evs []events.Event
	if t.prev != nil {
		if evs, err = events.Classify(t.prev, s, &t.cfg.Match); err != nil {
			return fmt.Errorf("timeline: events between snapshots %d and %d: %w", t.prev.ID, id, err)
		}
	}
	if err := t.hist.Observe(t.prev, s, evs); err != nil {
		return fmt.Errorf("timeline: history of snapshot %d: %w", id, err)
	}
	if t.sink != nil {
		if err := t.sink.Snapshot(s, evs, t.hist); err != nil {
			return fmt.Errorf("timeline: snapshot %d: %w", id, err)
		}
	}
	t.prev = s
	t.st.LastSnapshot = id
	t.st.MarkEvents = t.st.Events
	t.snaps.Add(1)
	return nil
}

// Freeze freezes the partition of tr with header h (the caller sets ID,
// Graph, Seq, Watermark and Time; Modularity, Gamma, TotalWeight and Edges
// come from tr). mem is a reusable buffer; the one to keep is returned.
func Freeze(tr *tracker.Tracker, h snapshot.Header, mem []uint64) (*snapshot.Snapshot, []uint64, error) {
	stats := tr.Communities()
	for i := range stats {
		// Totals kept in place can drift to -1e-17 after removals.
		stats[i].Internal = max(stats[i].Internal, 0)
		stats[i].Degree = max(stats[i].Degree, 0)
	}
	mem = tr.Membership(mem)
	g := tr.Graph()
	h.Modularity = finite(tr.Modularity())
	h.Gamma = tr.Options().Resolution
	h.Objective = tr.Options().Objective
	h.Quality = finite(tr.Quality())
	h.TotalWeight, h.Edges = g.TotalWeight(), g.Edges()
	s, err := snapshot.Freeze(h, mem, stats)
	return s, mem, err
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}
