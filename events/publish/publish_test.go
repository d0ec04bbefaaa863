package publish

import (
	"context"
	"path/filepath"
	"testing"
	"time"

	"github.com/cockroachdb/pebble/v2"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/events"
	"shoal/snapshot"
	"shoal/tracker"
)

func runJetStream(t *testing.T) jetstream.JetStream {
	t.Helper()
	s, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: -1, JetStream: true, StoreDir: t.TempDir(), NoLog: true, NoSigs: true})
	if err != nil {
		t.Fatal(err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		t.Fatal("nats server not ready")
	}
	t.Cleanup(func() { s.Shutdown(); s.WaitForShutdown() })
	nc, err := nats.Connect(s.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return js
}

// TestPublisher: the outbox goes to <prefix>.<type> with the event id as
// message id; a crash after the server's acks and before the cursor moved
// (the failpoint) makes the next round publish the same events again, which
// the stream's duplicate window drops, so the stream holds each event once;
// Trim then deletes the published events below a snapshot and keeps the
// rest.
func TestPublisher(t *testing.T) {
	js := runJetStream(t)
	ctx := context.Background()
	st, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "EV", Subjects: []string{"shoal.events.g.>"}, Duplicates: time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	db := openDB(t)
	a := part(t, 1, map[uint64][2]int{1: {0, 4}, 2: {5, 9}, 3: {10, 20}})
	b := part(t, 2, map[uint64][2]int{1: {0, 9}, 4: {10, 14}, 5: {15, 20}})
	c := part(t, 3, map[uint64][2]int{1: {0, 9}, 6: {30, 40}})
	evAB, evBC := classify(t, a, b), classify(t, b, c)
	batch := db.NewBatch()
	events.PutAll(batch, 2, evAB)
	events.PutAll(batch, 3, evBC)
	mustCommit(t, batch)
	want := len(evAB) + len(evBC)

	crash := &Publisher{JS: js, DB: db, Prefix: "shoal.events.g", Batch: 4, Failpoint: func(string) { panic("crash") }}
	func() {
		defer func() { recover() }()
		crash.Publish(ctx)
	}()
	if pend, _ := events.Pending(db, 0); len(pend) != want {
		t.Fatalf("%d pending after the crash, want all %d (the cursor did not move)", len(pend), want)
	}
	p := &Publisher{JS: js, DB: db, Prefix: "shoal.events.g", Batch: 4}
	n, err := p.Publish(ctx)
	if err != nil || n != want {
		t.Fatalf("published %d (%v), want %d", n, err, want)
	}
	info, err := st.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if info.State.Msgs != uint64(want) {
		t.Fatalf("stream holds %d messages, want each of the %d events once", info.State.Msgs, want)
	}
	all := append(append([]events.Event(nil), evAB...), evBC...)
	for i := range all {
		m, err := st.GetMsg(ctx, uint64(i+1))
		if err != nil {
			t.Fatal(err)
		}
		if m.Subject != "shoal.events.g."+string(all[i].Type) || m.Header.Get(jetstream.MsgIDHeader) != all[i].ID || m.Header.Get(HeaderType) != string(all[i].Type) {
			t.Fatalf("message %d: subject %s, id %s; want %s, %s", i+1, m.Subject, m.Header.Get(jetstream.MsgIDHeader), all[i].Type, all[i].ID)
		}
	}

	tb := db.NewBatch()
	upto, err := events.Trim(tb, db, 3)
	if err != nil || upto != 3 {
		t.Fatalf("trim up to %d (%v), want 3", upto, err)
	}
	mustCommit(t, tb)
	if l, _ := events.List(db, 2); len(l) != 0 {
		t.Fatalf("%d events of snapshot 2 left after trim", len(l))
	}
	if l, _ := events.List(db, 3); len(l) != len(evBC) {
		t.Fatalf("%d events of snapshot 3 left, want %d", len(l), len(evBC))
	}
	// Nothing is pending: trimming did not move the cursor back.
	if pend, _ := events.Pending(db, 0); len(pend) != 0 {
		t.Fatalf("%d pending after trim", len(pend))
	}
}

// part freezes a snapshot of the given communities (id -> members lo..hi);
// the figures do not matter to publishing.
func part(t *testing.T, id uint64, parts map[uint64][2]int) *snapshot.Snapshot {
	t.Helper()
	n := 0
	for _, r := range parts {
		n = max(n, r[1]+1)
	}
	mem := make([]uint64, n)
	for i := range mem {
		mem[i] = tracker.NoCommunity
	}
	var stats []tracker.CommunityStats
	for c, r := range parts {
		for v := r[0]; v <= r[1]; v++ {
			mem[v] = c
		}
		stats = append(stats, tracker.CommunityStats{ID: c, Size: r[1] - r[0] + 1})
	}
	s, err := snapshot.Freeze(snapshot.Header{ID: id, Graph: "test", Watermark: int64(id) * 3600_000}, mem, stats)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func classify(t *testing.T, a, b *snapshot.Snapshot) []events.Event {
	t.Helper()
	evs, err := events.Classify(a, b, &events.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return evs
}

type quiet struct{}

func (quiet) Infof(string, ...any)           {}
func (quiet) Errorf(string, ...any)          {}
func (quiet) Fatalf(format string, a ...any) { panic(format) }

func openDB(t *testing.T) *pebble.DB {
	t.Helper()
	db, err := pebble.Open(filepath.Join(t.TempDir(), "db"), &pebble.Options{Logger: quiet{}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

func mustCommit(t *testing.T, b *pebble.Batch) {
	t.Helper()
	if err := b.Commit(pebble.Sync); err != nil {
		t.Fatal(err)
	}
}
