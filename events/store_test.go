package events

import (
	"bufio"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"github.com/cockroachdb/pebble/v2"

	"shoal/snapshot"
)

type quietLogger struct{}

func (quietLogger) Infof(string, ...any)  {}
func (quietLogger) Errorf(string, ...any) {}
func (quietLogger) Fatalf(format string, args ...any) {
	panic("pebble fatal: " + format)
}

func openDB(t testing.TB) *pebble.DB {
	t.Helper()
	db, err := pebble.Open(t.TempDir(), &pebble.Options{Logger: quietLogger{}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := db.Close(); err != nil {
			t.Error(err)
		}
	})
	return db
}

func mustCommit(t *testing.T, b *pebble.Batch) {
	t.Helper()
	if err := b.Commit(pebble.Sync); err != nil {
		t.Fatal(err)
	}
}

// TestOutbox: the daemon's sequence on a real Pebble. Snapshot 2 and its
// events commit in one batch; Pending lists them in order; after
// MarkPublished of the first two only the rest are pending; snapshot 3's
// events join the queue; the stored bytes are the JSON records.
func TestOutbox(t *testing.T) {
	db := openDB(t)
	a := snap(t, 1, nil, map[uint64][]int{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 20)})
	b := snap(t, 2, nil, map[uint64][]int{1: span_(0, 9), 4: span_(10, 14), 5: span_(15, 20)})
	c := snap(t, 3, nil, map[uint64][]int{1: span_(0, 9), 6: span_(30, 40)})
	evAB := classify(t, a, b, nil) // merge, split
	evBC := classify(t, b, c, nil) // continue, birth, deaths
	if len(evAB) != 2 || len(evBC) != 4 {
		t.Fatalf("events %q and %q: want 2 and 4", briefs(evAB), briefs(evBC))
	}
	batch := db.NewBatch()
	if err := snapshot.Write(batch, b); err != nil {
		t.Fatal(err)
	}
	if err := PutAll(batch, b.ID, evAB); err != nil {
		t.Fatal(err)
	}
	mustCommit(t, batch)
	if got, err := snapshot.Load(db, 2); err != nil || !reflect.DeepEqual(got, b) {
		t.Fatalf("snapshot committed with its events: %v", err)
	}

	pending, err := Pending(db, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(pending) != 2 || pending[0].Index != 0 || pending[1].Index != 1 || pending[0].SnapshotID != 2 {
		t.Fatalf("pending %+v", pending)
	}
	for i, p := range pending {
		if !reflect.DeepEqual(p.Event, evAB[i]) {
			t.Errorf("pending %d decodes to %+v, want %+v", i, p.Event, evAB[i])
		}
		want, _ := Marshal(&evAB[i])
		if string(p.Raw) != string(want) {
			t.Errorf("pending %d raw bytes differ from the record", i)
		}
	}

	batch = db.NewBatch()
	if err := snapshot.Write(batch, c); err != nil {
		t.Fatal(err)
	}
	if err := PutAll(batch, c.ID, evBC); err != nil {
		t.Fatal(err)
	}
	mustCommit(t, batch)
	if p, err := Pending(db, 3); err != nil || len(p) != 3 {
		t.Fatalf("Pending(max 3): %d, %v", len(p), err)
	}
	batch = db.NewBatch()
	if err := MarkPublished(batch, 2, 1); err != nil {
		t.Fatal(err)
	}
	mustCommit(t, batch)
	pending, err = Pending(db, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(pending) != 4 || pending[0].SnapshotID != 3 || pending[0].Index != 0 || pending[3].Index != 3 {
		t.Fatalf("after marking 2/1: %+v", pending)
	}
	batch = db.NewBatch()
	if err := MarkPublished(batch, 3, 3); err != nil {
		t.Fatal(err)
	}
	mustCommit(t, batch)
	if p, err := Pending(db, 0); err != nil || len(p) != 0 {
		t.Fatalf("all published: %d pending, %v", len(p), err)
	}
	list, err := List(db, 3)
	if err != nil || len(list) != 4 || list[1].Event.ID != evBC[1].ID {
		t.Fatalf("List(3): %d, %v", len(list), err)
	}
	if list, err := List(db, 2); err != nil || len(list) != 2 {
		t.Fatalf("List(2): %d, %v", len(list), err)
	}

	// Damaged values are reported as corruption.
	batch = db.NewBatch()
	batch.Set(eventKey(4, 0), []byte{FormatVersion, '{'}, nil)
	mustCommit(t, batch)
	if _, err := Pending(db, 0); !IsCorrupt(err) {
		t.Errorf("bad JSON: %v, want corruption", err)
	}
	batch = db.NewBatch()
	batch.Set(eventKey(4, 0), []byte{9}, nil)
	mustCommit(t, batch)
	if _, err := List(db, 4); !IsCorrupt(err) {
		t.Errorf("bad version: %v, want corruption", err)
	}
	batch = db.NewBatch()
	batch.Set(cursorKey, []byte{1, 2}, nil)
	mustCommit(t, batch)
	if _, err := Pending(db, 0); !IsCorrupt(err) {
		t.Errorf("bad cursor: %v, want corruption", err)
	}
	if err := Put(db.NewBatch(), 1, -1, &evAB[0]); !errors.Is(err, ErrInvalid) {
		t.Errorf("negative index: %v", err)
	}
}

// TestJSONLWriter: a file sink appends one decodable line per event, creates
// the file private (member ids may be personal data), and refuses use after
// Close.
func TestJSONLWriter(t *testing.T) {
	a := snap(t, 1, nil, map[uint64][]int{1: span_(0, 4), 2: span_(5, 9)})
	b := snap(t, 2, nil, map[uint64][]int{1: span_(0, 9)})
	evs := classify(t, a, b, nil)
	path := filepath.Join(t.TempDir(), "events.jsonl")
	for range 2 { // the second open appends
		w, err := OpenJSONL(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := w.WriteAll(evs); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); !errors.Is(err, ErrClosed) {
			t.Errorf("second Close: %v, want ErrClosed", err)
		}
		if err := w.Write(&evs[0]); !errors.Is(err, ErrClosed) {
			t.Errorf("Write after Close: %v, want ErrClosed", err)
		}
	}
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o600 {
		t.Errorf("mode %v, want 0600", fi.Mode().Perm())
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	n := 0
	for sc.Scan() {
		var ev Event
		if err := json.Unmarshal(sc.Bytes(), &ev); err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(ev, evs[n%len(evs)]) {
			t.Errorf("line %d differs", n)
		}
		n++
	}
	if n != 2*len(evs) {
		t.Errorf("%d lines, want %d", n, 2*len(evs))
	}
}
