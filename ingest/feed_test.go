package ingest

import (
	"testing"
	"time"

	"shoal/tracker"
)

// TestFeedIDRules: as in Load, remove, set 0 and node-remove of unknown ids
// add nothing to the dictionary and change nothing, but still move the
// watermark, which expires the increments that fall out of the window
// (doc.go, Sliding window: expiry is driven by the event-time watermark).
func TestFeedIDRules(t *testing.T) {
	f := NewFeed(time.Hour)
	const h = int64(time.Hour / time.Millisecond)
	var chs []tracker.Change
	chs = f.Append(chs, &Event{Op: OpAdd, Src: "a", Dst: "b", W: 2, HasW: true, TS: 0, HasTS: true}, NoArrival)
	if len(chs) != 1 || chs[0] != (tracker.Change{Op: tracker.OpAdd, U: 0, V: 1, W: 2}) {
		t.Fatalf("add: %v", chs)
	}
	chs = chs[:0]
	for _, ev := range []Event{
		{Op: OpRemove, Src: "a", Dst: "zz", TS: 10, HasTS: true},
		{Op: OpSet, Src: "x", Dst: "y", W: 0, HasW: true, TS: 10, HasTS: true},
		{Op: OpNodeRemove, Src: "q", TS: 10, HasTS: true},
	} {
		chs = f.Append(chs, &ev, NoArrival)
	}
	if len(chs) != 0 || f.Dict().Len() != 2 {
		t.Fatalf("unknown ids: changes %v, %d names", chs, f.Dict().Len())
	}
	// An event without a time takes the arrival time: one hour after the
	// add, the add's increment expires even though the event names
	// unknown nodes, and both ends, left without an edge, leave the graph
	// (window.go, AppendChanges step 3).
	chs = f.Append(chs, &Event{Op: OpRemove, Src: "x", Dst: "y"}, h)
	want := []tracker.Change{{Op: tracker.OpDelete, U: 0, V: 1}, {Op: tracker.OpRemoveNode, U: 0}, {Op: tracker.OpRemoveNode, U: 1}}
	if len(chs) != 3 || chs[0] != want[0] || chs[1] != want[1] || chs[2] != want[2] || f.Watermark() != h {
		t.Fatalf("expiry through an unknown-id event: %v, watermark %d", chs, f.Watermark())
	}
	// Without an arrival time an event takes the watermark.
	chs = f.Append(chs[:0], &Event{Op: OpAdd, Src: "a", Dst: "c"}, NoArrival)
	if len(chs) != 1 || chs[0].W != 1 || f.Window().Weight(0, 2) != 1 {
		t.Fatalf("add at the watermark: %v", chs)
	}
}
