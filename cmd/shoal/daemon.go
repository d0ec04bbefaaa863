package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"net/http"
	"os"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/events"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
)

// daemonOptions is what `shoal run` was asked to do.
type daemonOptions struct {
	data       string
	graph      string // "" until resolved from the flag or the store
	window     time.Duration
	windowSet  bool
	natsURL    string // "" runs the embedded server
	natsListen string
	nf         *natsFlags

	consumer       ingest.ConsumerOptions
	eventsStream   string
	eventsPrefix   string
	rejectsStream  string
	rejectsSubject string

	httpAddr       string
	trigger        snapshot.Trigger
	snapshotKeep   int
	snapshotOnExit bool
	topts          tracker.Options
	eo             events.Options
	rebuild        string
	keyFile        string
	readyFile      string
	// deriveNames fills in the stream and subject names that default to
	// ones made from the graph name, once that is known.
	deriveNames func(graph string)
}

// daemon is one running `shoal run`. The consumer goroutine (Run's caller)
// owns the tracker, the feed, the previous snapshot and the trigger; the
// HTTP handlers read the tracker under mu, which the consumer holds while
// it changes the tracker.
//
// Goroutines: the consumer (the caller of run), the outbox publisher, the
// HTTP server, the signal watcher; run starts and stops all of them.
type daemon struct {
	o       *daemonOptions
	log     *slog.Logger
	store   *ingest.Store
	feed    *ingest.Feed
	pseudo  *ingest.Pseudonymizer
	embed   *server.Server
	nc      *nats.Conn
	js      jetstream.JetStream
	cons    *ingest.Consumer
	natsURL string // where clients reach the server

	restored *ingest.Restored // between restore and the consumer's creation

	mu struct {
		sync.Mutex
		tr *tracker.Tracker
	}

	// Owned by the consumer goroutine.
	trig       snapshot.Trigger
	prev       *snapshot.Snapshot
	lastID     uint64
	mem        []uint64
	trackerSeq uint64

	queue  *ingest.ChunkQueue // chunks on their way to the tracker
	nextID atomic.Uint64      // the tracker's NextID after the last chunk

	lastSnap  atomic.Pointer[snapshot.Header]
	snapshots atomic.Int64
	outboxErr atomic.Pointer[string]
	wake      chan struct{}
	started   time.Time
	ready     atomic.Bool
	crash     *failpoints
}

// runDaemon runs the daemon until ctx is done (the first SIGINT or
// SIGTERM) and shuts it down in order: stop fetching, commit the batch in
// hand, apply the remainder (and take the final snapshot if asked), publish
// what the outbox holds (bounded), close the store, drain NATS. A second
// signal exits at once.
func runDaemon(ctx context.Context, e *env, o *daemonOptions, log *slog.Logger) (err error) {
	d := &daemon{o: o, log: log, wake: make(chan struct{}, 1), started: time.Now(), crash: parseFailpoints(os.Getenv("SHOAL_CRASH_AT"))}
	stopSignals := watchSecondSignal(ctx, log)
	defer stopSignals()

	if err := d.openStore(); err != nil {
		return err
	}
	defer func() {
		if cerr := d.store.Close(); cerr != nil && !errors.Is(cerr, ingest.ErrClosed) {
			err = errors.Join(err, cerr)
		}
	}()
	if err := d.restore(); err != nil {
		return err
	}
	if err := d.startNATS(); err != nil {
		return err
	}
	defer d.stopNATS()

	co := o.consumer
	co.Graph = d.o.graph
	co.Pseudonymizer = d.pseudo
	co.Apply = d.apply
	co.NextChunk = d.nextChunk
	co.OnCommit = d.onCommit
	co.OnError = func(err error) { log.Warn("ingest: recovering", "err", err) }
	co.Failpoint = func(name string) error { d.crash.hit(name); return nil }
	d.cons, err = ingest.NewConsumer(d.js, d.store, d.feed, d.restored.Present, &co)
	if err != nil {
		return usageError{err}
	}
	d.nextID.Store(d.mu.tr.NextID())
	d.queue = ingest.NewChunkQueue(0, d.applyTracker)
	defer d.queue.Close()
	d.restored = nil

	var hs *http.Server
	httpAddr := ""
	if o.httpAddr != "" {
		ln, err := net.Listen("tcp", o.httpAddr)
		if err != nil {
			return fmt.Errorf("http: %w", err)
		}
		httpAddr = ln.Addr().String()
		hs = &http.Server{Handler: d.handler(), ReadHeaderTimeout: 10 * time.Second}
		go func() {
			if err := hs.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
				log.Error("http server stopped", "err", err)
			}
		}()
		log.Info("http: listening", "addr", httpAddr)
	}
	if o.readyFile != "" {
		info := map[string]any{"http": httpAddr, "nats": d.natsURL, "pid": os.Getpid(), "graph": d.o.graph}
		if err := writeFileAtomic(o.readyFile, func(w io.Writer) error { return json.NewEncoder(w).Encode(info) }); err != nil {
			return fmt.Errorf("--ready-file: %w", err)
		}
	}

	octx, ocancel := context.WithCancel(context.Background())
	var owg sync.WaitGroup
	owg.Add(1)
	go func() {
		defer owg.Done()
		d.runOutbox(octx)
	}()

	d.ready.Store(true)
	log.Info("ingest: consuming", "stream", d.cons.Options().Stream, "subject", d.cons.Options().Subject, "from_seq", d.store.State().Applied+1)
	runErr := d.cons.Run(ctx)
	d.ready.Store(false)
	if runErr != nil {
		log.Error("ingest stopped", "err", runErr)
	} else {
		log.Info("ingest: stopped", "applied_seq", d.store.State().Applied, "events_applied", d.store.State().EventsApplied)
	}

	// The outbox gets a bounded last chance to publish the final snapshot's
	// events; what it cannot send stays in the store for the next start.
	ocancel()
	owg.Wait()
	if runErr == nil {
		fctx, fcancel := context.WithTimeout(context.Background(), 5*time.Second)
		d.drainOutbox(fctx)
		fcancel()
	}
	if hs != nil {
		sctx, scancel := context.WithTimeout(context.Background(), 2*time.Second)
		_ = hs.Shutdown(sctx)
		scancel()
	}
	return runErr
}

// watchSecondSignal exits the process at the second SIGINT or SIGTERM
// after ctx is done (the first one cancels ctx, in main).
func watchSecondSignal(ctx context.Context, log *slog.Logger) func() {
	ch := make(chan os.Signal, 2)
	signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		n := 0
		for {
			select {
			case <-done:
				return
			case <-ch:
				n++
				if n == 1 {
					log.Info("shutting down (a second signal exits at once)")
				} else {
					log.Warn("second signal: exiting now")
					os.Exit(1)
				}
			}
		}
	}()
	_ = ctx
	return func() {
		signal.Stop(ch)
		close(done)
		wg.Wait()
	}
}

// openStore opens or creates the store, taking the graph name and window
// from it when the flags do not give them.
func (d *daemon) openStore() error {
	o := d.o
	if err := os.MkdirAll(o.data, 0o700); err != nil {
		return err
	}
	dir := ingest.StoreDir(o.data)
	if s, err := ingest.OpenStore(dir, &ingest.StoreOptions{ReadOnly: true, AnyWindow: true, AnyKey: true}); err == nil {
		m := s.Meta()
		s.Close()
		if o.graph == "" {
			o.graph = m.Graph
		}
		if !o.windowSet {
			o.window = m.Window
		}
	} else if !errors.Is(err, ingest.ErrNotStore) || !isNoStore(dir) {
		return err
	}
	if o.graph == "" {
		o.graph = "default"
	}
	if o.deriveNames != nil {
		o.deriveNames(o.graph)
	}
	var keyID []byte
	if o.keyFile != "" {
		key, err := ingest.ReadKeyFile(o.keyFile)
		if err != nil {
			return usageError{err}
		}
		if d.pseudo, err = ingest.NewPseudonymizer(key); err != nil {
			return usageError{err}
		}
		keyID = d.pseudo.KeyID()
	}
	s, err := ingest.OpenStore(dir, &ingest.StoreOptions{Graph: o.graph, Window: o.window, KeyID: keyID, Create: true})
	if err != nil {
		return err
	}
	d.store = s
	d.log.Info("store: open", "dir", dir, "graph", o.graph, "window", windowText(o.window), "pseudonymized", d.pseudo != nil,
		"applied_seq", s.State().Applied, "events_applied", s.State().EventsApplied)
	return nil
}

// isNoStore reports whether dir holds no Pebble database at all (as
// opposed to one that is not a shoal store).
func isNoStore(dir string) bool {
	_, err := os.Stat(filepath.Join(dir, "CURRENT"))
	if err == nil {
		return false
	}
	names, _ := filepath.Glob(filepath.Join(dir, "MANIFEST-*"))
	return len(names) == 0
}

func windowText(w time.Duration) string {
	if w == 0 {
		return "none"
	}
	return w.String()
}

// restore rebuilds the feed and the tracker from the store, and the
// previous snapshot and the trigger from the last snapshot.
func (d *daemon) restore() error {
	t0 := time.Now()
	r, err := d.store.Restore()
	if err != nil {
		return err
	}
	tRead := time.Since(t0)
	d.feed = ingest.RestoreFeed(r.Dict, r.Window)
	name := r.Dict.Name
	d.o.eo.Name = func(u uint32) string { return name(u) }
	db := d.store.DB()
	latest, err := snapshot.Latest(db)
	switch {
	case err == nil:
		d.prev = latest
		d.lastID = latest.ID
		h := latest.Header
		d.lastSnap.Store(&h)
	case errors.Is(err, snapshot.ErrNotFound):
	default:
		return err
	}
	if hs, err := snapshot.List(db); err == nil {
		d.snapshots.Store(int64(len(hs)))
	}
	st := r.State
	d.trig = d.o.trigger
	if st.SnapshotMark != math.MinInt64 {
		d.trig.Mark(st.SnapshotMark, int(st.SnapshotEvents))
	}
	d.trackerSeq = st.Applied

	t1 := time.Now()
	method := d.o.rebuild
	if method == "auto" {
		method = "static"
		if d.prev != nil {
			method = "snapshot"
		}
	}
	var tr *tracker.Tracker
	switch {
	case len(r.Edges) == 0:
		method = "empty"
		tr, err = r.Tracker(&d.o.topts, nil, 0)
	case method == "snapshot" && d.prev != nil:
		tr, err = r.Tracker(&d.o.topts, d.prev.Membership(r.Dict.Len()), st.NextCommunity)
	default:
		method = "static"
		tr, err = r.Tracker(&d.o.topts, nil, 0)
	}
	if err != nil {
		return err
	}
	g := tr.Graph()
	d.mu.tr = tr
	d.restored = r
	d.log.Info("tracker: rebuilt", "method", method, "nodes", g.Nodes(), "edges", g.Edges(), "communities", tr.NumCommunities(),
		"modularity", finite(tr.Modularity()), "read", tRead.Round(time.Millisecond), "build", time.Since(t1).Round(time.Millisecond))
	return nil
}

// startNATS starts the embedded server (no --nats) or connects to the
// given one, and makes the JetStream context.
func (d *daemon) startNATS() error {
	o := d.o
	name := "shoal run " + o.graph
	if o.natsURL == "" {
		host, portText, err := net.SplitHostPort(o.natsListen)
		if err != nil {
			return usagef("--nats-listen %q: %v", o.natsListen, err)
		}
		port, err := strconv.Atoi(portText)
		if err != nil || port < 0 || port > 65535 {
			return usagef("--nats-listen %q: bad port", o.natsListen)
		}
		if port == 0 {
			port = server.RANDOM_PORT
		}
		if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
			d.log.Warn("nats: the embedded server listens beyond loopback without authentication", "addr", o.natsListen)
		}
		so := &server.Options{
			ServerName: "shoal-" + o.graph,
			Host:       host, Port: port,
			JetStream: true, StoreDir: filepath.Join(o.data, "nats"),
			NoSigs: true, MaxPayload: 8 << 20,
		}
		s, err := server.NewServer(so)
		if err != nil {
			return fmt.Errorf("nats: embedded server: %w", err)
		}
		s.SetLoggerV2(&natsLog{d.log}, false, false, false)
		go s.Start()
		if !s.ReadyForConnections(30 * time.Second) {
			s.Shutdown()
			return errors.New("nats: the embedded server did not start within 30s (is the port in use?)")
		}
		d.embed = s
		d.natsURL = s.ClientURL()
		d.log.Info("nats: embedded server", "url", d.natsURL, "store", so.StoreDir)
		nc, err := nats.Connect(d.natsURL, nats.Name(name), nats.InProcessServer(s), nats.MaxReconnects(-1))
		if err != nil {
			return fmt.Errorf("nats: %w", err)
		}
		d.nc = nc
	} else {
		nc, err := o.nf.connect(o.natsURL, name, d.log)
		if err != nil {
			return err
		}
		d.nc = nc
		d.natsURL = o.natsURL
		d.log.Info("nats: connecting", "url", nc.ConnectedUrlRedacted())
	}
	js, err := jetstream.New(d.nc)
	if err != nil {
		return fmt.Errorf("nats: jetstream: %w", err)
	}
	d.js = js
	return nil
}

func (d *daemon) stopNATS() {
	if d.nc != nil {
		_ = d.nc.Drain()
		deadline := time.Now().Add(5 * time.Second)
		for !d.nc.IsClosed() && time.Now().Before(deadline) {
			time.Sleep(10 * time.Millisecond)
		}
		d.nc.Close()
	}
	if d.embed != nil {
		d.embed.Shutdown()
		d.embed.WaitForShutdown()
	}
}

// natsLog passes the embedded server's log lines to slog.
type natsLog struct{ l *slog.Logger }

func (n *natsLog) Noticef(f string, a ...any) { n.l.Debug("nats-server: " + fmt.Sprintf(f, a...)) }
func (n *natsLog) Warnf(f string, a ...any)   { n.l.Warn("nats-server: " + fmt.Sprintf(f, a...)) }
func (n *natsLog) Fatalf(f string, a ...any)  { n.l.Error("nats-server: " + fmt.Sprintf(f, a...)) }
func (n *natsLog) Errorf(f string, a ...any)  { n.l.Error("nats-server: " + fmt.Sprintf(f, a...)) }
func (n *natsLog) Debugf(f string, a ...any)  {}
func (n *natsLog) Tracef(f string, a ...any)  {}

// apply hands a chunk to the tracker (consumer goroutine).
// The chunk goes to the tracker goroutine (d.queue) and the consumer goes
// on; a snapshot waits for the queue to drain first.
func (d *daemon) apply(b *ingest.Batch, ch *ingest.Chunk) error {
	if len(ch.Changes) > 0 || ch.Reason != ingest.ChunkFinal {
		if err := d.queue.Push(ch.Changes); err != nil {
			return err
		}
	}
	d.trackerSeq = ch.Seq
	ch.State.NextCommunity = d.nextID.Load()
	if ch.Reason == ingest.ChunkFinal && d.o.snapshotOnExit && ch.State.EventsApplied > ch.State.SnapshotEvents {
		if err := d.snapshot(b, ch.Seq, ch.Watermark); err != nil {
			return err
		}
		ch.State.SnapshotEvents = ch.State.EventsApplied
		ch.State.SnapshotMark = d.boundary(ch.Watermark)
		d.trig.Mark(ch.State.SnapshotMark, int(ch.State.SnapshotEvents))
	}
	return nil
}

// nextChunk takes a snapshot when one is due before the chunk that starts
// with an event at ts (the rule of shoal replay: between chunks, when the
// next event is at or past the next multiple of --snapshot-every since the
// epoch, or --snapshot-every-events have been applied since the last).
func (d *daemon) nextChunk(b *ingest.Batch, ts int64, st *ingest.State) error {
	if d.o.trigger.Every == 0 && d.o.trigger.EveryEvents == 0 {
		return nil
	}
	if st.SnapshotMark == math.MinInt64 {
		st.SnapshotMark, st.SnapshotEvents = d.boundary(ts), st.EventsApplied
		d.trig.Mark(st.SnapshotMark, int(st.SnapshotEvents))
		return nil
	}
	if !d.trig.Due(ts, int(st.EventsApplied)) {
		return nil
	}
	if err := d.snapshot(b, d.trackerSeq, st.Watermark); err != nil {
		return err
	}
	st.SnapshotMark, st.SnapshotEvents = d.boundary(ts), st.EventsApplied
	d.trig.Mark(st.SnapshotMark, int(st.SnapshotEvents))
	return nil
}

// boundary is the last multiple of --snapshot-every since the epoch at or
// before ts (ts itself without --snapshot-every), as in shoal replay.
func (d *daemon) boundary(ts int64) int64 {
	every := d.o.trigger.Every.Milliseconds()
	if every <= 0 || ts == math.MinInt64 {
		return ts
	}
	b := ts / every * every
	if b > ts {
		b -= every
	}
	return b
}

// applyTracker runs in the tracker goroutine (the chunk queue).
func (d *daemon) applyTracker(chs []tracker.Change) error {
	d.mu.Lock()
	res, err := d.mu.tr.Apply(chs)
	next := d.mu.tr.NextID()
	d.mu.Unlock()
	d.nextID.Store(next)
	if res.Full {
		d.log.Debug("tracker: drift guard ran a full pass")
	}
	return err
}

// snapshot freezes the tracker into b with the events since the previous
// snapshot (the outbox), so that they commit with the batch. It waits for
// the tracker goroutine to apply every chunk first; the tracker is then
// still, and read here without the lock (HTTP readers only read too).
func (d *daemon) snapshot(b *ingest.Batch, seq uint64, wm int64) error {
	if err := d.queue.Wait(); err != nil {
		return err
	}
	if wm == math.MinInt64 {
		wm = 0
	}
	tr := d.mu.tr
	stats := tr.Communities()
	for i := range stats {
		// Totals kept in place can drift to -1e-17 after removals.
		stats[i].Internal = max(stats[i].Internal, 0)
		stats[i].Degree = max(stats[i].Degree, 0)
	}
	d.mem = tr.Membership(d.mem)
	g := tr.Graph()
	id := d.lastID + 1
	s, err := snapshot.Freeze(snapshot.Header{
		ID: id, Graph: d.o.graph, Seq: seq, Watermark: wm, Time: time.Now().UnixMilli(),
		Modularity: finite(tr.Modularity()), Gamma: tr.Options().Resolution,
		TotalWeight: g.TotalWeight(), Edges: g.Edges(),
	}, d.mem, stats)
	if err != nil {
		return fmt.Errorf("snapshot %d: %w", id, err)
	}
	var evs []events.Event
	if d.prev != nil {
		if evs, err = events.Classify(d.prev, s, &d.o.eo); err != nil {
			return fmt.Errorf("events of snapshot %d: %w", id, err)
		}
	}
	if err := snapshot.Write(b.Pebble(), s); err != nil {
		return err
	}
	if err := events.PutAll(b.Pebble(), id, evs); err != nil {
		return err
	}
	d.crash.hit("snapshot-written")
	b.Snapshots++
	d.prev, d.lastID = s, id
	h := s.Header
	d.lastSnap.Store(&h)
	d.snapshots.Add(1)
	d.log.Info("snapshot", "id", id, "seq", seq, "watermark", snapshot.RFC3339(wm), "nodes", s.Nodes, "edges", s.Edges,
		"communities", len(s.Communities), "modularity", s.Modularity, "events", len(evs))
	return nil
}

// onCommit runs after every commit (in the consumer's committer
// goroutine): retention after a snapshot, and a wake-up for the outbox.
func (d *daemon) onCommit(ci ingest.CommitInfo) {
	if ci.Rejects > 0 || ci.Snapshots > 0 {
		if ci.Snapshots > 0 {
			d.retain()
		}
		select {
		case d.wake <- struct{}{}:
		default:
		}
	}
	d.log.Debug("ingest: batch", "messages", ci.Messages, "events", ci.Events, "rejects", ci.Rejects,
		"duplicates", ci.Duplicates, "applied_seq", ci.State.Applied, "lag", ci.Lag)
}

// retain keeps the last --snapshot-keep snapshots and drops the published
// events of older ones. It runs in its own small batch after the one that
// committed the snapshot: a crash in between leaves an extra old snapshot,
// removed the next time.
func (d *daemon) retain() {
	db := d.store.DB()
	b := db.NewBatch()
	defer b.Close()
	n, err := snapshot.Retain(b, db, d.o.snapshotKeep)
	if h := d.lastSnap.Load(); err == nil && h != nil && h.ID >= uint64(d.o.snapshotKeep) {
		_, err = events.Trim(b, db, h.ID-uint64(d.o.snapshotKeep)+1)
	}
	if err == nil && !b.Empty() {
		err = b.Commit(nil)
	}
	if err != nil {
		d.log.Warn("snapshot retention", "err", err)
		return
	}
	if n > 0 {
		d.snapshots.Add(-int64(n))
	}
}

// runOutbox publishes rejects and events when woken and every few
// seconds, until ctx is done.
func (d *daemon) runOutbox(ctx context.Context) {
	t := time.NewTicker(5 * time.Second)
	defer t.Stop()
	for {
		d.drainOutbox(ctx)
		select {
		case <-ctx.Done():
			return
		case <-d.wake:
		case <-t.C:
		}
	}
}

// drainOutbox makes sure the events and rejects streams exist, then
// publishes what the outbox holds.
func (d *daemon) drainOutbox(ctx context.Context) {
	ep := &events.Publisher{JS: d.js, DB: d.store.DB(), Prefix: d.o.eventsPrefix, Failpoint: d.crash.hit}
	rp := &ingest.RejectPublisher{JS: d.js, Store: d.store, Graph: d.o.graph, Subject: d.o.rejectsSubject, Pseudonymized: d.pseudo != nil}
	if d.pseudo != nil {
		rp.Source = func(ctx context.Context, seq uint64) ([]byte, error) {
			s, err := d.js.Stream(ctx, d.cons.Options().Stream)
			if err != nil {
				return nil, err
			}
			m, err := s.GetMsg(ctx, seq)
			if err != nil {
				return nil, err
			}
			return m.Data, nil
		}
	}
	var errs []error
	for _, sc := range []jetstream.StreamConfig{
		{Name: d.o.eventsStream, Description: "shoal lifecycle events of graph " + d.o.graph, Subjects: []string{d.o.eventsPrefix + ".>"},
			Storage: jetstream.FileStorage, Duplicates: 24 * time.Hour},
		{Name: d.o.rejectsStream, Description: "shoal rejected input of graph " + d.o.graph, Subjects: []string{d.o.rejectsSubject},
			Storage: jetstream.FileStorage, Duplicates: 24 * time.Hour},
	} {
		if _, err := ingest.EnsureStream(ctx, d.js, sc); err != nil {
			errs = append(errs, err)
		}
	}
	if len(errs) == 0 {
		if n, err := rp.Publish(ctx); err != nil {
			errs = append(errs, err)
		} else if n > 0 {
			d.log.Info("rejects: published", "count", n, "subject", d.o.rejectsSubject)
		}
		if n, err := ep.Publish(ctx); err != nil {
			errs = append(errs, err)
		} else if n > 0 {
			d.log.Info("events: published", "count", n, "subject", d.o.eventsPrefix+".<type>")
		}
	}
	if err := errors.Join(errs...); err != nil && ctx.Err() == nil {
		msg := err.Error()
		d.outboxErr.Store(&msg)
		d.log.Warn("outbox: will retry", "err", err)
	} else if err == nil {
		d.outboxErr.Store(nil)
	}
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

// failpoints kill the process with SIGKILL the n-th time a named point is
// passed, for crash tests: SHOAL_CRASH_AT="snapshot-written:2" or a comma
// separated list. The points: batch-before-commit, batch-after-commit (the
// consumer), snapshot-written (a snapshot is in the batch, not committed),
// events-before-mark (events published, cursor not moved).
type failpoints struct {
	mu    sync.Mutex
	at    map[string]int
	count map[string]int
}

func parseFailpoints(spec string) *failpoints {
	if spec == "" {
		return nil
	}
	f := &failpoints{at: map[string]int{}, count: map[string]int{}}
	for _, p := range strings.Split(spec, ",") {
		name, n, ok := strings.Cut(strings.TrimSpace(p), ":")
		k, err := strconv.Atoi(n)
		if ok && err == nil && k > 0 {
			f.at[name] = k
		}
	}
	return f
}

func (f *failpoints) hit(name string) {
	if f == nil {
		return
	}
	f.mu.Lock()
	f.count[name]++
	kill := f.at[name] > 0 && f.count[name] == f.at[name]
	f.mu.Unlock()
	if kill {
		p, _ := os.FindProcess(os.Getpid())
		_ = p.Kill()
		select {} // the kill is on its way
	}
}
