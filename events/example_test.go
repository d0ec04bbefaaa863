package events_test

import (
	"fmt"

	"shoal/events"
	"shoal/snapshot"
	"shoal/tracker"
)

// freeze builds a snapshot from community ids per node; statistics other
// than size do not affect matching, so they are left at zero here.
func freeze(id uint64, membership []uint64) *snapshot.Snapshot {
	size := map[uint64]int{}
	for _, c := range membership {
		size[c]++
	}
	var stats []tracker.CommunityStats
	for c, n := range size {
		stats = append(stats, tracker.CommunityStats{ID: c, Size: n})
	}
	s, err := snapshot.Freeze(snapshot.Header{ID: id, Graph: "demo"}, membership, stats)
	if err != nil {
		panic(err)
	}
	return s
}

// Two groups of four merge, and a third group appears. Invented data.
func ExampleClassify() {
	a := freeze(1, []uint64{1, 1, 1, 1, 2, 2, 2, 2})
	b := freeze(2, []uint64{1, 1, 1, 1, 1, 1, 1, 1, 9, 9, 9})
	evs, err := events.Classify(a, b, nil)
	if err != nil {
		panic(err)
	}
	for _, ev := range evs {
		fmt.Printf("%s before=%d after=%d joined=%v\n", ev.Type, len(ev.Before), len(ev.After), ev.Joined)
	}
	// Output:
	// merge before=2 after=1 joined=[]
	// birth before=0 after=1 joined=[8 9 10]
}
