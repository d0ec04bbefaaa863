package main

import (
	"context"
	"encoding/binary"
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
	"shoal/events/publish"
	"shoal/events/timeline"
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
	schedule       timeline.Schedule
	scheduleSet    bool // given on the command line (else the store's, else the default)
	applyEvery     int
	history        time.Duration
	snapshotKeep   int
	snapshotOnExit bool
	topts          tracker.Options
	objectiveSet   bool // --objective or --resolution given (else the store's)
	hubs           *hubPolicy
	hubsSet        bool // a hub flag given (else the store's policy)
	eo             events.Options
	rebuild        string
	keyFile        string
	readyFile      string
	// deriveNames fills in the stream and subject names that default to
	// ones made from the graph name, once that is known.
	deriveNames func(graph string)
}

// daemon is one running `shoal run`.
//
// Goroutines: the consumer (the caller of run) owns the feed and drives the
// timeline (d.tl) through ingestSink; the timeline's own goroutine applies
// the batches to the tracker (timeline.Config.Async); the committer (the
// consumer's) commits and calls onCommit; the outbox publisher, the HTTP
// server and the signal watcher. run starts and stops all of them. HTTP
// handlers read the tracker through Timeline.Read (a read lock the batch
// goroutine takes for writing) and the rest through atomics.
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
	tl       *timeline.Timeline

	// Owned by the consumer goroutine.
	batch   *ingest.Batch // the batch the timeline's snapshots go into
	lastSeq uint64        // stream sequence of the last event folded

	trimBefore atomic.Uint64 // events of snapshots below this id are past --history
	lastSnap   atomic.Pointer[snapshot.Header]
	snapshots  atomic.Int64
	outboxErr  atomic.Pointer[string]
	wake       chan struct{}
	started    time.Time
	ready      atomic.Bool
	crash      *failpoints
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

	defer func() {
		if cerr := d.tl.Close(); cerr != nil {
			err = errors.Join(err, cerr)
		}
	}()
	co := o.consumer
	co.Graph = d.o.graph
	co.Pseudonymizer = d.pseudo
	co.Sink = ingestSink{d}
	co.OnCommit = d.onCommit
	co.OnError = func(err error) { log.Warn("ingest: recovering", "err", err) }
	co.Failpoint = func(name string) error { d.crash.hit(name); return nil }
	d.cons, err = ingest.NewConsumer(d.js, d.store, d.feed, d.restored.Present, &co)
	if err != nil {
		return usageError{err}
	}
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
	// The ingest stream exists before the daemon says it is ready, so that
	// a producer started on the ready file finds it (shoal publish refuses
	// a missing stream); the consumer creates it too, with retries, when
	// the server is not reachable yet.
	streamCfg := d.cons.Options()
	if _, err := ingest.EnsureStream(ctx, d.js, streamCfg.StreamConfig()); err != nil {
		log.Warn("ingest: stream not ready yet; the consumer retries", "err", err)
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
	newWindow := false
	if s, err := ingest.OpenStore(dir, &ingest.StoreOptions{ReadOnly: true, AnyWindow: true, AnyKey: true}); err == nil {
		m := s.Meta()
		s.Close()
		if o.graph == "" {
			o.graph = m.Graph
		}
		switch {
		case !o.windowSet:
			o.window = m.Window
		case o.window.Milliseconds() == m.Window.Milliseconds():
		case (o.window == 0) != (m.Window == 0):
			return usagef("--window %s: the store in %s was created with window %s; a window cannot be turned on or off on an existing store (give --window %s, or start a new --data directory)",
				windowText(o.window), dir, windowText(m.Window), windowText(m.Window))
		default:
			d.log.Warn("store: window changed: adds from now on count for the new span; increments already stored keep their expiry",
				"was", m.Window, "now", o.window)
			newWindow = true
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
	s, err := ingest.OpenStore(dir, &ingest.StoreOptions{Graph: o.graph, Window: o.window, KeyID: keyID, Create: true, AnyWindow: newWindow})
	if err != nil {
		return err
	}
	d.store = s
	if newWindow {
		if err := s.SetWindow(o.window); err != nil {
			return err
		}
	}
	if err := d.settleSchedule(); err != nil {
		return err
	}
	if err := d.settleObjective(); err != nil {
		return err
	}
	if err := d.settleHubs(); err != nil {
		return err
	}
	d.log.Info("store: open", "dir", dir, "graph", o.graph, "window", windowText(o.window), "pseudonymized", d.pseudo != nil,
		"applied_seq", s.State().Applied, "events_applied", s.State().EventsApplied)
	return nil
}

// Store settings of the snapshot schedule (8 bytes big-endian each).
const (
	settingEvery       = "snapshot-every"
	settingEveryEvents = "snapshot-every-events"
)

// settleSchedule makes the snapshot schedule the one the flags give, or,
// without the flags, the one stored with the store (the default, hourly,
// for a new store), so that a restart without the flags keeps doing what
// the store was doing. A change is logged and stored; it takes effect from
// the next boundary. With no rule at all, a warning says that no events
// will come.
func (d *daemon) settleSchedule() error {
	o := d.o
	var stored timeline.Schedule
	ok := true
	for _, f := range []struct {
		name string
		set  func(v uint64)
	}{
		{settingEvery, func(v uint64) { stored.Every = time.Duration(v) * time.Millisecond }},
		{settingEveryEvents, func(v uint64) { stored.EveryEvents = int(v) }},
	} {
		v, found, err := d.store.Setting(f.name)
		if err != nil {
			return err
		}
		if found && len(v) != 8 {
			return fmt.Errorf("store: setting %s of %d bytes, want 8", f.name, len(v))
		}
		if !found {
			ok = false
			continue
		}
		f.set(binary.BigEndian.Uint64(v))
	}
	switch {
	case ok && !o.scheduleSet:
		o.schedule = stored
	case ok && stored != o.schedule:
		d.log.Warn("snapshot schedule changed; the new one applies from the next boundary", "was", stored.String(), "now", o.schedule.String())
	}
	if !ok || stored != o.schedule {
		for _, f := range []struct {
			name string
			v    uint64
		}{{settingEvery, uint64(o.schedule.Every.Milliseconds())}, {settingEveryEvents, uint64(o.schedule.EveryEvents)}} {
			if err := d.store.PutSetting(f.name, binary.BigEndian.AppendUint64(nil, f.v)); err != nil {
				return err
			}
		}
	}
	if o.schedule.Off() {
		d.log.Warn("snapshots are off (--snapshot-every 0 and no --snapshot-every-events): no lifecycle events will be reported")
	} else {
		d.log.Info("snapshots", "schedule", o.schedule.String())
	}
	return nil
}

// settingObjective is the store setting of the objective: one byte
// (tracker.Objective) and the resolution (8 bytes, IEEE 754 big-endian).
const settingObjective = "objective"

// settleObjective makes the tracker's objective and resolution the ones
// the flags give, or, without the flags, the ones stored with the store, so
// that a restart without them keeps optimising what the store was. A
// partition optimised for one objective or resolution is a poor start for
// another: a change turns --rebuild auto into a static rebuild (logged),
// and is refused with --rebuild snapshot.
func (d *daemon) settleObjective() error {
	o := d.o
	v, found, err := d.store.Setting(settingObjective)
	if err != nil {
		return err
	}
	if found {
		if len(v) != 9 || v[0] > byte(tracker.ObjectiveCPM) {
			return fmt.Errorf("store: setting %s: %d bytes, want 9 with a known objective", settingObjective, len(v))
		}
		obj, res := tracker.Objective(v[0]), math.Float64frombits(binary.BigEndian.Uint64(v[1:]))
		switch {
		case !o.objectiveSet:
			o.topts.Objective, o.topts.Resolution = obj, res
		case obj != o.topts.Objective || res != o.topts.Resolution:
			was := fmt.Sprintf("%s at resolution %g", obj, res)
			now := fmt.Sprintf("%s at resolution %g", o.topts.Objective, o.topts.Resolution)
			switch o.rebuild {
			case "snapshot":
				return usagef("the store was tracked with %s; %s needs a fresh partition: use --rebuild static (or auto), or drop --objective and --resolution", was, now)
			case "auto":
				o.rebuild = "static"
			}
			d.log.Warn("objective changed; the tracker is rebuilt from scratch", "was", was, "now", now)
		}
	}
	if err := o.topts.Validate(); err != nil {
		return fmt.Errorf("store: setting %s: %w", settingObjective, err)
	}
	val := append([]byte{byte(o.topts.Objective)}, binary.BigEndian.AppendUint64(nil, math.Float64bits(o.topts.Resolution))...)
	if !found || string(val) != string(v) {
		if err := d.store.PutSetting(settingObjective, val); err != nil {
			return err
		}
	}
	d.log.Info("objective", "objective", o.topts.Objective.String(), "resolution", o.topts.Resolution)
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

// restore rebuilds the feed, the tracker and the timeline from the store:
// the previous snapshot, the history and the timeline's position.
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
	var prev *snapshot.Snapshot
	latest, err := snapshot.Latest(db)
	switch {
	case err == nil:
		prev = latest
		h := latest.Header
		d.lastSnap.Store(&h)
	case errors.Is(err, snapshot.ErrNotFound):
	default:
		return err
	}
	if hs, err := snapshot.List(db); err == nil {
		d.snapshots.Store(int64(len(hs)))
	}
	hist, err := events.LoadHistory(db, &events.HistoryOptions{Keep: d.o.history, MinSize: d.o.eo.MinSize})
	if err != nil {
		return fmt.Errorf("store: lineage history: %w", err)
	}
	st := r.State
	t1 := time.Now()
	hubs, g, err := d.hubFilter(r)
	if err != nil {
		return err
	}
	tr, method, err := timeline.Rebuild(g, &d.o.topts, prev, st.NextCommunity, d.o.rebuild)
	if err != nil {
		return err
	}
	cfg := timeline.Config{
		Graph: d.o.graph, Schedule: d.o.schedule, ApplyEvery: d.o.applyEvery, Match: d.o.eo,
		Expire: d.feed.Window().AppendExpire, Async: true, Hubs: hubs,
		Seq: func() uint64 { return d.lastSeq },
	}
	tst := timeline.State{Events: st.EventsApplied, Watermark: st.Watermark, Mark: st.SnapshotMark, MarkEvents: st.SnapshotEvents}
	d.lastSeq = st.Applied
	if d.tl, err = timeline.New(cfg, tr, prev, hist, tst, timeline.SinkFunc(d.writeSnapshot)); err != nil {
		return usageError{err}
	}
	g = tr.Graph()
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

// ingestSink drives the timeline from the consumer (its goroutine): each
// event's time, then its changes; an idle stream applies what is pending;
// at shutdown, with --snapshot-on-exit, a last snapshot. What the timeline
// writes (snapshots) goes into the batch being built, and its position
// into the state that batch commits, so both survive a crash together.
type ingestSink struct{ d *daemon }

func (s ingestSink) Before(b *ingest.Batch, ts int64, st *ingest.State) error {
	s.d.batch = b
	err := s.d.tl.At(ts)
	s.d.keep(st)
	return err
}

func (s ingestSink) Changes(b *ingest.Batch, seq uint64, chs []tracker.Change, st *ingest.State) error {
	s.d.batch, s.d.lastSeq = b, seq
	err := s.d.tl.Add(chs)
	s.d.keep(st)
	return err
}

func (s ingestSink) Idle(b *ingest.Batch, st *ingest.State, final bool) error {
	s.d.batch = b
	var err error
	if final && s.d.o.snapshotOnExit {
		_, err = s.d.tl.Snapshot(math.MinInt64)
	} else {
		err = s.d.tl.Flush()
	}
	s.d.keep(st)
	return err
}

// keep copies the timeline's position into the state the batch commits.
func (d *daemon) keep(st *ingest.State) {
	ts := d.tl.State()
	st.SnapshotMark, st.SnapshotEvents = ts.Mark, ts.MarkEvents
	st.NextCommunity = d.tl.NextID()
}

// writeSnapshot is the timeline's sink: the snapshot, the events that lead
// to it (the outbox) and the history go into the batch being built, so
// they commit with the events they account for.
func (d *daemon) writeSnapshot(s *snapshot.Snapshot, evs []events.Event, h *events.History) error {
	b := d.batch.Pebble()
	if err := snapshot.Write(b, s); err != nil {
		return err
	}
	if err := events.PutAll(b, s.ID, evs); err != nil {
		return err
	}
	if err := h.Put(b); err != nil {
		return err
	}
	d.crash.hit("snapshot-written")
	d.batch.Snapshots++
	// Events older than --history go (once published); the snapshot index
	// of the history says where that starts.
	horizon := s.Time - d.o.history.Milliseconds()
	for _, r := range h.Snapshots() {
		if r.Time >= horizon {
			d.trimBefore.Store(r.ID)
			break
		}
	}
	hd := s.Header
	d.lastSnap.Store(&hd)
	d.snapshots.Add(1)
	attrs := []any{"id", s.ID, "time", snapshot.RFC3339(s.Time), "seq", s.Seq, "nodes", s.Nodes, "edges", s.Edges,
		"communities", len(s.Communities), "modularity", s.Modularity, "events", len(evs)}
	if d.o.hubs != nil && !d.o.hubs.off() {
		// Counted by the timeline just before this sink was called.
		c := d.tl.Stats().Hubs
		attrs = append(attrs, "hubs", c.Hubs, "hub_edges_excluded", c.Edges, "hub_changes_dropped", c.Dropped)
	}
	d.log.Info("snapshot", attrs...)
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

// retain keeps the last --snapshot-keep snapshots, and the events of the
// last --history of event time (published ones only: the outbox never
// loses an event). It runs in its own small batch after the one that
// committed the snapshot: a crash in between leaves an extra old snapshot,
// removed the next time.
func (d *daemon) retain() {
	db := d.store.DB()
	b := db.NewBatch()
	defer b.Close()
	n, err := snapshot.Retain(b, db, d.o.snapshotKeep)
	if before := d.trimBefore.Load(); err == nil && before > 0 {
		_, err = events.Trim(b, db, before)
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
	ep := &publish.Publisher{JS: d.js, DB: d.store.DB(), Prefix: d.o.eventsPrefix, Failpoint: d.crash.hit}
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
