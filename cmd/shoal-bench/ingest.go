package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime/pprof"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/events/timeline"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
	"shoal/tracker/gen"
)

// ingestRow is one line of `shoal-bench ingest` (kind "ingest").
type ingestRow struct {
	Kind          string  `json:"kind"`
	PerMessage    int     `json:"events_per_message"`
	ApplyEvery    int     `json:"apply_every"`
	DriftBound    float64 `json:"drift_bound"`
	Events        int     `json:"events"`
	Messages      int     `json:"messages"`
	DrainSeconds  float64 `json:"drain_s"`
	DrainRate     float64 `json:"drain_events_per_s"`
	IngestSeconds float64 `json:"ingest_s"`
	IngestRate    float64 `json:"ingest_events_per_s"`
	Ratio         float64 `json:"ratio"`
	Edges         int     `json:"edges"`
	Commits       int     `json:"commits"`
}

// restartRow is the restart line (kind "restart").
type restartRow struct {
	Kind         string  `json:"kind"`
	Edges        int     `json:"edges"`
	Nodes        int     `json:"nodes"`
	OpenReadS    float64 `json:"open_read_s"`
	StaticS      float64 `json:"static_s"`
	SnapshotS    float64 `json:"snapshot_s"`
	ReadyStaticS float64 `json:"ready_static_s"`
	ReadySnapS   float64 `json:"ready_snapshot_s"`
	QStatic      float64 `json:"q_static"`
	QSnapshot    float64 `json:"q_snapshot"`
	// BytesPerEdge: all tables of the store (edges, dictionary, snapshot)
	// per edge after a full compaction; EdgeFamily: the edge family alone;
	// WithWAL: everything on disk, the write-ahead log files included.
	BytesPerEdge  float64 `json:"bytes_per_edge"`
	EdgeFamily    float64 `json:"edge_family_bytes_per_edge"`
	WithWAL       float64 `json:"disk_bytes_per_edge"`
	StoreBytes    uint64  `json:"store_table_bytes"`
	EdgeKeyValues int     `json:"edges_in_store"`
}

// runIngest measures, in one process with an embedded NATS server and a
// synced Pebble store in a temporary directory:
//   - sustained ingest (JetStream fetch, decode, Pebble commit, tracker
//     update) with 1 and with 100 events per message, beside the rate at
//     which the same consumer drains the same stream doing nothing
//     (Consumer.Drain: same subscription, batching and acks), as a ratio;
//   - restart: reopening a store of --restart-edges edges and rebuilding
//     the tracker from scratch and from the last snapshot;
//   - bytes per edge on disk (Pebble's metrics) before and after a full
//     compaction.
func runIngest(ctx context.Context, args []string, w io.Writer) error {
	fs := flag.NewFlagSet("ingest", flag.ContinueOnError)
	events := fs.Int("events", 1_000_000, "events per ingest run")
	restartEdges := fs.Int("restart-edges", 1_000_000, "edges of the restart store")
	asJSON := fs.Bool("json", false, "one JSON object per line instead of a table")
	keep := fs.String("dir", "", "work in this directory (kept) instead of a temporary one")
	profile := fs.String("cpuprofile", "", "write a CPU profile to FILE")
	configs := fs.String("configs", "1000/0.1,10000/0", "tracker configurations APPLY_EVERY/DRIFT_BOUND, comma separated (the first is the daemon's default)")
	perList := fs.String("per", "1,100", "events per message, comma separated")
	if err := fs.Parse(args); err != nil {
		return err
	}
	dir := *keep
	if dir == "" {
		var err error
		if dir, err = os.MkdirTemp("", "shoal-bench-ingest"); err != nil {
			return err
		}
		defer os.RemoveAll(dir)
	}
	em := &emitter{w: w, json: *asJSON}
	if *profile != "" {
		f, err := os.Create(*profile)
		if err != nil {
			return err
		}
		if err := pprof.StartCPUProfile(f); err != nil {
			return err
		}
		defer pprof.StopCPUProfile()
	}
	srv, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: -1, JetStream: true, StoreDir: filepath.Join(dir, "nats"), NoLog: true, NoSigs: true})
	if err != nil {
		return err
	}
	go srv.Start()
	if !srv.ReadyForConnections(10 * time.Second) {
		return errors.New("nats server not ready")
	}
	defer func() { srv.Shutdown(); srv.WaitForShutdown() }()
	nc, err := nats.Connect(srv.ClientURL(), nats.InProcessServer(srv))
	if err != nil {
		return err
	}
	defer nc.Close()
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(8192))
	if err != nil {
		return err
	}
	header := fmt.Sprintf("%-8s %6s %6s %5s %9s %9s %9s %12s %9s %12s %6s %8s", "kind", "per", "apply", "drift", "events", "messages", "drain_s", "drain_ev/s", "ingest_s", "ingest_ev/s", "ratio", "commits")
	var cfgs []ingestConfig
	for _, c := range strings.Split(*configs, ",") {
		a, b, ok := strings.Cut(c, "/")
		ae, err1 := strconv.Atoi(a)
		db, err2 := strconv.ParseFloat(b, 64)
		if !ok || err1 != nil || err2 != nil || ae < 1 || db < 0 {
			return fmt.Errorf("--configs: %q is not APPLY_EVERY/DRIFT_BOUND", c)
		}
		cfgs = append(cfgs, ingestConfig{ae, db})
	}
	run := 0
	for _, ps := range strings.Split(*perList, ",") {
		per, err := strconv.Atoi(ps)
		if err != nil || per < 1 {
			return fmt.Errorf("--per: %q", ps)
		}
		for _, cfg := range cfgs {
			if err := ctx.Err(); err != nil {
				return err
			}
			run++
			row, err := ingestOne(ctx, js, dir, run, *events, per, cfg)
			if err != nil {
				return err
			}
			em.row(row, header, func() string {
				return fmt.Sprintf("%-8s %6d %6d %5.2f %9d %9d %9.2f %12.0f %9.2f %12.0f %6.2f %8d", row.Kind, row.PerMessage, row.ApplyEvery, row.DriftBound,
					row.Events, row.Messages, row.DrainSeconds, row.DrainRate, row.IngestSeconds, row.IngestRate, row.Ratio, row.Commits)
			})
		}
	}
	rr, err := restartOne(dir, *restartEdges)
	if err != nil {
		return err
	}
	em.header = false
	em.row(rr, fmt.Sprintf("%-8s %9s %8s %11s %8s %10s %14s %16s %9s %9s %10s %10s %10s", "kind", "edges", "nodes", "open_read_s", "static_s", "snapshot_s",
		"ready_static_s", "ready_snapshot_s", "q_static", "q_snap", "bytes/edge", "e_family", "with_wal"), func() string {
		return fmt.Sprintf("%-8s %9d %8d %11.2f %8.2f %10.2f %14.2f %16.2f %9.4f %9.4f %10.1f %10.1f %10.1f", rr.Kind, rr.Edges, rr.Nodes, rr.OpenReadS, rr.StaticS,
			rr.SnapshotS, rr.ReadyStaticS, rr.ReadySnapS, rr.QStatic, rr.QSnapshot, rr.BytesPerEdge, rr.EdgeFamily, rr.WithWAL)
	})
	return nil
}

// benchEvents is an invented stream: n adds drawn from the edges of a
// planted-partition graph of n/5 edges (so pairs repeat, as interactions
// between the same accounts do), weight 1 or 2, times a millisecond apart.
func benchEvents(n int) ([][]byte, error) {
	g, err := gen.Planted(gen.PlantedOptions{N: max(1000, n/50), Groups: max(20, n/2500), AvgDegree: 20, Mu: 0.3, Seed: 7})
	if err != nil {
		return nil, err
	}
	rng := rand.New(rand.NewPCG(7, 7))
	out := make([][]byte, n)
	ts := int64(1_767_225_600_000)
	for i := range out {
		e := g.Edges[rng.IntN(len(g.Edges))]
		ts++
		b := append([]byte(`{"src":"acct-`), strconv.Itoa(int(e.U))...)
		b = append(b, `","dst":"acct-`...)
		b = append(b, strconv.Itoa(int(e.V))...)
		b = append(b, `","w":`...)
		b = strconv.AppendInt(b, int64(1+rng.IntN(2)), 10)
		b = append(b, `,"ts":`...)
		b = strconv.AppendInt(b, ts, 10)
		out[i] = append(b, '}')
	}
	return out, nil
}

// ingestConfig is the tracker side of a run: the chunk size and the drift
// guard.
type ingestConfig struct {
	applyEvery int
	driftBound float64
}

func ingestOne(ctx context.Context, js jetstream.JetStream, dir string, run, n, per int, cfg ingestConfig) (*ingestRow, error) {
	lines, err := benchEvents(n)
	if err != nil {
		return nil, err
	}
	graph := "bench" + strconv.Itoa(run)
	co := ingest.ConsumerOptions{Graph: graph}
	co.EnsureDefaults()
	if _, err := ingest.EnsureStream(ctx, js, co.StreamConfig()); err != nil {
		return nil, err
	}
	var futs []jetstream.PubAckFuture
	msgs := 0
	var last uint64
	for i := 0; i < len(lines); i += per {
		var data []byte
		for j := i; j < min(i+per, len(lines)); j++ {
			if j > i {
				data = append(data, '\n')
			}
			data = append(data, lines[j]...)
		}
		f, err := js.PublishAsync(co.Subject, data)
		if err != nil {
			return nil, err
		}
		futs = append(futs, f)
		msgs++
		if len(futs) == 8192 || i+per >= len(lines) {
			for _, f := range futs {
				select {
				case a := <-f.Ok():
					last = max(last, a.Sequence)
				case err := <-f.Err():
					return nil, err
				}
			}
			futs = futs[:0]
		}
	}

	st, err := ingest.OpenStore(filepath.Join(dir, "store-"+graph), &ingest.StoreOptions{Graph: graph, Create: true})
	if err != nil {
		return nil, err
	}
	defer st.Close()
	r, err := st.Restore()
	if err != nil {
		return nil, err
	}
	tr, err := tracker.New(&tracker.Options{DriftBound: cfg.driftBound})
	if err != nil {
		return nil, err
	}
	commits := 0
	// As in the daemon: the timeline applies batches in a goroutine of its
	// own while the consumer goes on (no snapshots here).
	tl, err := timeline.New(timeline.Config{Graph: graph, ApplyEvery: cfg.applyEvery, Async: true}, tr, nil, nil, timeline.NewState(), nil)
	if err != nil {
		return nil, err
	}
	defer tl.Close()
	co.Sink = benchSink{tl}
	co.OnCommit = func(ingest.CommitInfo) { commits++ }
	c, err := ingest.NewConsumer(js, st, ingest.RestoreFeed(r.Dict, r.Window), r.Present, &co)
	if err != nil {
		return nil, err
	}
	t0 := time.Now()
	if err := c.Drain(ctx, 1, msgs); err != nil {
		return nil, err
	}
	drain := time.Since(t0).Seconds()

	rctx, cancel := context.WithCancel(ctx)
	done := make(chan error, 1)
	t0 = time.Now()
	go func() { done <- c.Run(rctx) }()
	var full float64
	for {
		s := c.Stats()
		if s.State.Applied >= last && tl.Stats().Pending == 0 {
			full = time.Since(t0).Seconds()
			break
		}
		select {
		case err := <-done:
			cancel()
			return nil, fmt.Errorf("consumer stopped: %v", err)
		case <-time.After(time.Millisecond):
		}
	}
	cancel()
	if err := <-done; err != nil {
		return nil, err
	}
	if got := st.State().EventsApplied; got != uint64(n) {
		return nil, fmt.Errorf("%d events applied, want %d", got, n)
	}
	row := &ingestRow{Kind: "ingest", PerMessage: per, ApplyEvery: cfg.applyEvery, DriftBound: cfg.driftBound, Events: n, Messages: msgs, DrainSeconds: drain, DrainRate: float64(n) / drain,
		IngestSeconds: full, IngestRate: float64(n) / full, Edges: tr.Graph().Edges(), Commits: commits}
	row.Ratio = row.IngestRate / row.DrainRate
	return row, nil
}

// benchSink drives the timeline from the consumer, as the daemon's does.
type benchSink struct{ tl *timeline.Timeline }

func (s benchSink) Before(_ *ingest.Batch, ts int64, _ *ingest.State) error { return s.tl.At(ts) }

func (s benchSink) Changes(_ *ingest.Batch, _ uint64, chs []tracker.Change, st *ingest.State) error {
	err := s.tl.Add(chs)
	st.NextCommunity = s.tl.NextID()
	return err
}

func (s benchSink) Idle(*ingest.Batch, *ingest.State, bool) error { return s.tl.Flush() }

// restartOne writes a store of about e edges (a planted-partition graph,
// external ids "acct-<n>") with one snapshot, compacts it, and measures a
// restart: open and read everything back, then build the tracker from
// scratch or from the snapshot.
func restartOne(dir string, e int) (*restartRow, error) {
	g, err := gen.Planted(gen.PlantedOptions{N: e / 10, Groups: max(1, e/500), AvgDegree: 20, Mu: 0.3, Seed: 3})
	if err != nil {
		return nil, err
	}
	path := filepath.Join(dir, "store-restart")
	st, err := ingest.OpenStore(path, &ingest.StoreOptions{Graph: "restart", Create: true})
	if err != nil {
		return nil, err
	}
	b := st.NewBatch()
	for i := range g.N {
		if err := b.PutNode(uint32(i), "acct-"+strconv.Itoa(i), true); err != nil {
			return nil, err
		}
	}
	for i, ed := range g.Edges {
		if err := b.PutEdge(ed.U, ed.V, ed.W); err != nil {
			return nil, err
		}
		if i%100_000 == 99_999 {
			if err := st.Commit(b, nil); err != nil {
				return nil, err
			}
			b.Reset()
		}
	}
	tr0, err := tracker.NewFrom(tracker.NewGraph(g.N, g.Edges), &tracker.Options{})
	if err != nil {
		return nil, err
	}
	stats := tr0.Communities()
	s, err := snapshot.Freeze(snapshot.Header{ID: 1, Graph: "restart", Modularity: tr0.Modularity(), Gamma: 1, Edges: len(g.Edges)}, tr0.Membership(nil), stats)
	if err != nil {
		return nil, err
	}
	if err := snapshot.Write(b.Pebble(), s); err != nil {
		return nil, err
	}
	state := ingest.NewState()
	state.NextCommunity = tr0.NextID()
	if err := b.PutState(&state); err != nil {
		return nil, err
	}
	if err := st.Commit(b, &state); err != nil {
		return nil, err
	}
	if err := st.DB().Flush(); err != nil {
		return nil, err
	}
	if err := st.DB().Compact(context.Background(), []byte{0}, []byte{0xff}, true); err != nil {
		return nil, err
	}
	tables, disk := st.TableBytes(), st.DiskUsage()
	edgeBytes, err := st.EdgeBytes()
	if err != nil {
		return nil, err
	}
	if err := st.Close(); err != nil {
		return nil, err
	}
	ne := float64(len(g.Edges))
	row := &restartRow{Kind: "restart", Edges: len(g.Edges), Nodes: g.N, StoreBytes: tables,
		BytesPerEdge: float64(tables) / ne, EdgeFamily: float64(edgeBytes) / ne, WithWAL: float64(disk) / ne}
	open := func() (*ingest.Store, *ingest.Restored, float64, error) {
		t0 := time.Now()
		st, err := ingest.OpenStore(path, &ingest.StoreOptions{Graph: "restart"})
		if err != nil {
			return nil, nil, 0, err
		}
		r, err := st.Restore()
		return st, r, time.Since(t0).Seconds(), err
	}
	// From scratch.
	st, r, read, err := open()
	if err != nil {
		return nil, err
	}
	row.OpenReadS, row.EdgeKeyValues = read, len(r.Edges)
	t0 := time.Now()
	trS, _, err := timeline.Rebuild(r.Graph(), &tracker.Options{}, nil, 0, timeline.RebuildStatic)
	if err != nil {
		return nil, err
	}
	row.StaticS = time.Since(t0).Seconds()
	row.QStatic = trS.Modularity()
	st.Close()
	// From the snapshot (reopened, so both pay the same cold open).
	st, r, read, err = open()
	if err != nil {
		return nil, err
	}
	t0 = time.Now()
	latest, err := snapshot.Latest(st.DB())
	if err != nil {
		return nil, err
	}
	trP, _, err := timeline.Rebuild(r.Graph(), &tracker.Options{}, latest, r.State.NextCommunity, timeline.RebuildSnapshot)
	if err != nil {
		return nil, err
	}
	row.SnapshotS = time.Since(t0).Seconds()
	row.QSnapshot = trP.Modularity()
	st.Close()
	row.ReadyStaticS = row.OpenReadS + row.StaticS
	row.ReadySnapS = read + row.SnapshotS
	return row, nil
}
