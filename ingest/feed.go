package ingest

import (
	"math"
	"time"

	"shoal/tracker"
)

// NoArrival is passed to [Feed.Append] for an event without a time when no
// arrival time is known (a file): the event takes the watermark.
const NoArrival = math.MinInt64

// Feed turns decoded events into tracker changes: it interns the external
// ids in a [Dict] and folds the events through a [Window] (span 0: no
// window, the window is then an exact record of the current edges). The
// daemon and shoal replay both use it, so the same events give the same
// changes, in the same order, in both.
//
// Id rules, as in [Load]: add and set with a positive weight add unknown
// ids to the dictionary; remove, set 0 and node-remove only look them up,
// and an event that names an unknown id changes nothing but still moves the
// watermark (and so may expire increments).
//
// A Feed is not safe for concurrent use.
type Feed struct {
	dict *Dict
	win  *Window
}

// NewFeed returns an empty feed with the given window span (0: none).
func NewFeed(window time.Duration) *Feed {
	return &Feed{dict: NewDict(), win: NewWindow(window)}
}

// RestoreFeed returns a feed over a restored dictionary and window (see
// [Store.Restore]).
func RestoreFeed(dict *Dict, win *Window) *Feed { return &Feed{dict: dict, win: win} }

// Dict returns the feed's dictionary.
func (f *Feed) Dict() *Dict { return f.dict }

// Window returns the feed's window.
func (f *Feed) Window() *Window { return f.win }

// Watermark returns the largest event time seen, math.MinInt64 if none.
func (f *Feed) Watermark() int64 { return f.win.Watermark() }

// EventTime returns the time an event counts at: its own, or arrival, or
// the watermark when arrival is NoArrival.
func (f *Feed) EventTime(ev *Event, arrival int64) int64 {
	switch {
	case ev.HasTS:
		return ev.TS
	case arrival != NoArrival:
		return arrival
	}
	return f.win.Watermark()
}

// Append applies ev and appends its tracker changes to dst (see
// [Window.AppendChanges] for the changes and their order; an event that
// names an unknown id gets [Window.AppendExpire]). The event counts at
// EventTime(ev, arrival). ev must be valid (decoded events are).
func (f *Feed) Append(dst []tracker.Change, ev *Event, arrival int64) []tracker.Change {
	ts := f.EventTime(ev, arrival)
	var u, v uint32
	known := true
	switch {
	case ev.Op == OpAdd || (ev.Op == OpSet && ev.W > 0):
		u, v = f.dict.ID(ev.Src), f.dict.ID(ev.Dst)
	case ev.Op == OpNodeRemove:
		u, known = f.dict.Lookup(ev.Src)
	default:
		var ok1, ok2 bool
		u, ok1 = f.dict.Lookup(ev.Src)
		v, ok2 = f.dict.Lookup(ev.Dst)
		known = ok1 && ok2
	}
	if !known {
		return f.win.AppendExpire(dst, ts)
	}
	return f.win.AppendChanges(dst, ev.Op, ts, u, v, ev.W, ev.HasW)
}
