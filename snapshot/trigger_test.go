package snapshot

import (
	"errors"
	"testing"
	"time"
)

// TestTrigger walks a trigger through a sequence of (watermark, events)
// observations; want is the expected Due result, mark says whether the caller
// then takes a snapshot.
func TestTrigger(t *testing.T) {
	type step struct {
		wm     int64
		events int
		want   bool
	}
	for _, tc := range []struct {
		name  string
		tr    Trigger
		steps []step
	}{
		{"never", Trigger{}, []step{{0, 0, false}, {1 << 40, 1 << 30, false}}},
		{"every hour of event time", Trigger{Every: time.Hour}, []step{
			{1_000_000, 1, false},             // start
			{1_000_000 + 3_599_999, 2, false}, // 1 ms short
			{1_000_000 + 3_600_000, 3, true},  // due: mark here
			{1_000_000 + 3_600_001, 4, false},
			{1_000_000 + 30*3_600_000, 5, true}, // a long gap: one snapshot, not 29
			{1_000_000 + 30*3_600_000 + 1, 6, false},
		}},
		{"every 3 events", Trigger{EveryEvents: 3}, []step{{5, 1, false}, {5, 2, false}, {5, 3, true}, {5, 5, false}, {9, 6, true}}},
		{"either rule", Trigger{Every: time.Second, EveryEvents: 10}, []step{
			{0, 0, false}, {999, 9, false}, {1000, 9, true}, {1500, 19, true}, {1600, 20, false}, {2500, 21, true},
		}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			tr := tc.tr
			if err := tr.Validate(); err != nil {
				t.Fatal(err)
			}
			for i, s := range tc.steps {
				if got := tr.Due(s.wm, s.events); got != s.want {
					t.Fatalf("step %d %+v: Due = %v", i, s, got)
				}
				if s.want {
					tr.Mark(s.wm, s.events)
				}
			}
		})
	}
	bad := Trigger{Every: time.Microsecond, EveryEvents: -1}
	if err := bad.Validate(); !errors.Is(err, ErrInvalid) {
		t.Errorf("Validate: %v, want ErrInvalid", err)
	}
}
