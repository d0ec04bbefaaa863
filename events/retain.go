package events

import (
	"encoding/binary"
	"errors"
	"fmt"

	"github.com/cockroachdb/pebble/v2"
)

// Trim adds to b one range delete of the stored events of the snapshots
// below before that are published (at or before the published cursor in
// r), and returns the id up to which it deletes (exclusive; 0 if nothing).
// Unpublished events are never deleted. The daemon trims below its oldest
// retained snapshot, so the outbox does not grow without end.
func Trim(b *pebble.Batch, r pebble.Reader, before uint64) (uint64, error) {
	val, closer, err := r.Get(cursorKey)
	if errors.Is(err, pebble.ErrNotFound) {
		return 0, nil
	}
	if err != nil {
		return 0, fmt.Errorf("events: trim: %w", err)
	}
	if len(val) != eventKeyLen || val[0] != FormatVersion {
		closer.Close()
		return 0, corruptf("events: trim: published cursor of %d bytes", len(val))
	}
	cursorSnap := binary.BigEndian.Uint64(val[1:9])
	closer.Close()
	// Every event of a snapshot below the cursor's is published; the
	// cursor's own snapshot may not be wholly.
	upto := min(before, cursorSnap)
	if upto == 0 {
		return 0, nil
	}
	if err := b.DeleteRange(eventKey(0, 0), eventKey(upto, 0), nil); err != nil {
		return 0, fmt.Errorf("events: trim: %w", err)
	}
	return upto, nil
}
