package timeline

import (
	"errors"
	"testing"

	"shoal/tracker"
)

// Testqueue: chunks are applied in push order, from copies (the
// caller reuses its slice at once); Wait catches up; after a failure
// nothing more is applied and the error comes back from Push, Wait and
// Close.
func TestQueue(t *testing.T) {
	var got []uint32
	fail := errors.New("boom")
	q := newQueue(2, func(chs []tracker.Change) error {
		for _, c := range chs {
			if c.U == 9999 {
				return fail
			}
			got = append(got, c.U)
		}
		return nil
	})
	buf := make([]tracker.Change, 0, 4)
	for i := range 50 {
		buf = append(buf[:0], tracker.Change{Op: tracker.OpAdd, U: uint32(2 * i), V: 1, W: 1}, tracker.Change{Op: tracker.OpAdd, U: uint32(2*i + 1), V: 1, W: 1})
		if err := q.push(buf); err != nil {
			t.Fatal(err)
		}
		buf[0].U, buf[1].U = 1000, 1000 // reused: the queue holds a copy
	}
	if err := q.wait(); err != nil || q.pending() != 0 {
		t.Fatalf("wait: %v, pending %d", err, q.pending())
	}
	for i, u := range got {
		if u != uint32(i) {
			t.Fatalf("change %d applied as %d: order or copy lost", i, u)
		}
	}
	if len(got) != 100 {
		t.Fatalf("%d changes applied, want 100", len(got))
	}
	q.push([]tracker.Change{{Op: tracker.OpAdd, U: 9999, V: 1, W: 1}})
	q.push([]tracker.Change{{Op: tracker.OpAdd, U: 200, V: 1, W: 1}})
	if err := q.wait(); !errors.Is(err, fail) {
		t.Fatalf("wait after a failure: %v", err)
	}
	if err := q.push(nil); !errors.Is(err, fail) {
		t.Fatalf("push after a failure: %v", err)
	}
	if len(got) != 100 {
		t.Fatalf("a chunk after the failure was applied (%d)", len(got))
	}
	if err := q.close(); !errors.Is(err, fail) {
		t.Fatalf("close: %v", err)
	}
	if err := q.close(); !errors.Is(err, errQueueClosed) {
		t.Fatalf("second close: %v", err)
	}
}
