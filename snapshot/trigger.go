package snapshot

import (
	"fmt"
	"time"
)

// Trigger decides when a snapshot is due. It holds no clock: the caller
// passes the event-time watermark and a running count of applied edge events.
// Its zero value is never due (snapshots on request only). Not goroutine-safe.
type Trigger struct {
	// Every is the event-time interval between snapshots; 0 disables the
	// time rule. When non-zero it must be at least a millisecond.
	Every time.Duration
	// EveryEvents is the number of applied events between snapshots; 0
	// disables the count rule.
	EveryEvents int

	started    bool
	lastWM     int64
	lastEvents int
}

// Validate reports every problem with the trigger's settings.
func (t *Trigger) Validate() error {
	var errs []string
	if t.Every < 0 || (t.Every > 0 && t.Every < time.Millisecond) {
		errs = append(errs, fmt.Sprintf("every %v must be 0 or at least 1ms", t.Every))
	}
	if t.EveryEvents < 0 {
		errs = append(errs, fmt.Sprintf("every-events %d must not be negative", t.EveryEvents))
	}
	if len(errs) > 0 {
		return fmt.Errorf("%w: trigger: %v", ErrInvalid, errs)
	}
	return nil
}

// Due reports whether a snapshot is due at this watermark (Unix ms, event
// time) and running event count: the watermark is at least Every past the
// last mark, or events is at least EveryEvents past it. Before the first
// [Trigger.Mark], the first call to Due records its watermark as the start
// of the time rule and the count rule counts from 0.
func (t *Trigger) Due(watermark int64, events int) bool {
	if !t.started {
		t.started, t.lastWM, t.lastEvents = true, watermark, 0
	}
	if t.Every > 0 && watermark-t.lastWM >= t.Every.Milliseconds() {
		return true
	}
	return t.EveryEvents > 0 && events-t.lastEvents >= t.EveryEvents
}

// Mark records that a snapshot was taken at this watermark and event count;
// both rules count from here.
func (t *Trigger) Mark(watermark int64, events int) {
	t.started, t.lastWM, t.lastEvents = true, watermark, events
}
