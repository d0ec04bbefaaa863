package events

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"

	"github.com/cockroachdb/pebble/v2"
)

// ErrCorrupt marks errors about stored event bytes that are wrong.
var ErrCorrupt = errors.New("events: corrupt record")

// IsCorrupt reports whether err is about stored bytes that are wrong.
func IsCorrupt(err error) bool { return errors.Is(err, ErrCorrupt) }

const (
	// Prefix is the key-family byte of stored events (the outbox).
	Prefix byte = 'v'
	// FormatVersion is the version byte that starts every stored value.
	FormatVersion byte = 1

	eventKeyLen = 1 + 8 + 4
)

// cursorKey holds the position of the last published event. It is the bare
// prefix, so it sorts before every event key.
var cursorKey = []byte{Prefix}

func eventKey(snapshotID uint64, idx uint32) []byte {
	k := make([]byte, 0, eventKeyLen)
	k = append(k, Prefix)
	k = binary.BigEndian.AppendUint64(k, snapshotID)
	return binary.BigEndian.AppendUint32(k, idx)
}

// Stored is an event read back from the store.
type Stored struct {
	// SnapshotID and Index are the event's key: the id of the later snapshot
	// of the pair and the event's position in Classify's output.
	SnapshotID uint64
	Index      int
	// Raw is the JSON record as stored (publish these bytes as they are).
	Raw []byte
	// Event is Raw decoded.
	Event Event
}

// Put adds ev to the batch under key 'v' | snapshotID | idx, where
// snapshotID is the later snapshot of the pair (commit it in the same batch
// as that snapshot) and idx its index in Classify's output.
func Put(b *pebble.Batch, snapshotID uint64, idx int, ev *Event) error {
	if idx < 0 || idx > math.MaxUint32 {
		return fmt.Errorf("%w: event index %d", ErrInvalid, idx)
	}
	raw, err := Marshal(ev)
	if err != nil {
		return err
	}
	val := append([]byte{FormatVersion}, raw...)
	if err := b.Set(eventKey(snapshotID, uint32(idx)), val, nil); err != nil {
		return fmt.Errorf("events: put %d/%d: %w", snapshotID, idx, err)
	}
	return nil
}

// PutAll adds evs with indices 0, 1, ... under snapshotID.
func PutAll(b *pebble.Batch, snapshotID uint64, evs []Event) error {
	for i := range evs {
		if err := Put(b, snapshotID, i, &evs[i]); err != nil {
			return err
		}
	}
	return nil
}

// MarkPublished records in b that every stored event up to and including
// (snapshotID, idx), in key order, is published. The outbox is drained in
// key order ([Pending] returns it so), so one cursor is enough.
func MarkPublished(b *pebble.Batch, snapshotID uint64, idx int) error {
	if idx < 0 || idx > math.MaxUint32 {
		return fmt.Errorf("%w: event index %d", ErrInvalid, idx)
	}
	val := append([]byte{FormatVersion}, eventKey(snapshotID, uint32(idx))[1:]...)
	if err := b.Set(cursorKey, val, nil); err != nil {
		return fmt.Errorf("events: mark published %d/%d: %w", snapshotID, idx, err)
	}
	return nil
}

// Pending returns up to max (all if max <= 0) stored events after the
// published cursor, in key order: the daemon's outbox.
func Pending(r pebble.Reader, max int) ([]Stored, error) {
	lower := []byte{Prefix, 0} // just above the cursor key
	val, closer, err := r.Get(cursorKey)
	switch {
	case err == nil:
		if len(val) != eventKeyLen || val[0] != FormatVersion {
			closer.Close()
			return nil, corruptf("events: pending: published cursor of %d bytes", len(val))
		}
		// The first key above the cursor's event key: append a zero byte.
		lower = append(append([]byte{Prefix}, val[1:]...), 0)
		closer.Close()
	case !errors.Is(err, pebble.ErrNotFound):
		return nil, fmt.Errorf("events: pending: %w", err)
	}
	return scan(r, lower, []byte{Prefix + 1}, max)
}

// List returns the stored events of snapshotID in index order.
func List(r pebble.Reader, snapshotID uint64) ([]Stored, error) {
	lower := eventKey(snapshotID, 0)
	var upper []byte
	if snapshotID == math.MaxUint64 {
		upper = []byte{Prefix + 1}
	} else {
		upper = eventKey(snapshotID+1, 0)
	}
	return scan(r, lower, upper, 0)
}

// Between returns the stored events whose later snapshot id is in
// [from, to] (to 0: no upper end), in key order: every event kept, also
// those of snapshots that retention has dropped (the daemon keeps events
// for --history, whatever --snapshot-keep).
func Between(r pebble.Reader, from, to uint64) ([]Stored, error) {
	upper := []byte{Prefix + 1}
	if to != 0 && to != math.MaxUint64 {
		upper = eventKey(to+1, 0)
	}
	return scan(r, eventKey(from, 0), upper, 0)
}

func scan(r pebble.Reader, lower, upper []byte, max int) ([]Stored, error) {
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: lower, UpperBound: upper})
	if err != nil {
		return nil, fmt.Errorf("events: scan: %w", err)
	}
	var out []Stored
	for valid := it.First(); valid && (max <= 0 || len(out) < max); valid = it.Next() {
		key := it.Key()
		if len(key) != eventKeyLen {
			it.Close()
			return nil, corruptf("events: scan: key %x of %d bytes", key, len(key))
		}
		st := Stored{SnapshotID: binary.BigEndian.Uint64(key[1:9]), Index: int(binary.BigEndian.Uint32(key[9:]))}
		val, err := it.ValueAndErr()
		if err != nil {
			it.Close()
			return nil, fmt.Errorf("events: scan %d/%d: %w", st.SnapshotID, st.Index, err)
		}
		if len(val) < 1 || val[0] != FormatVersion {
			it.Close()
			return nil, corruptf("events: event %d/%d: bad format version", st.SnapshotID, st.Index)
		}
		st.Raw = append([]byte(nil), val[1:]...)
		if err := json.Unmarshal(st.Raw, &st.Event); err != nil || st.Event.Schema != Schema {
			it.Close()
			return nil, corruptf("events: event %d/%d: undecodable record (schema %q): %v", st.SnapshotID, st.Index, st.Event.Schema, err)
		}
		out = append(out, st)
	}
	if err := it.Close(); err != nil {
		return nil, fmt.Errorf("events: scan: %w", err)
	}
	return out, nil
}

type corruptError struct{ msg string }

func (e *corruptError) Error() string        { return e.msg }
func (e *corruptError) Is(target error) bool { return target == ErrCorrupt }

func corruptf(format string, args ...any) error {
	return &corruptError{msg: fmt.Sprintf(format, args...)}
}
