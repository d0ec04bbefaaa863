package ingest

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/cockroachdb/pebble/v2/vfs"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/tracker"
)

// runServer starts an in-process NATS server with JetStream on port (-1:
// a random one), storing under dir. Shut down in cleanup.
func runServer(t testing.TB, dir string, port int) *server.Server {
	t.Helper()
	s, err := server.NewServer(&server.Options{
		Host: "127.0.0.1", Port: port, JetStream: true, StoreDir: dir,
		NoLog: true, NoSigs: true, JetStreamMaxMemory: 64 << 20,
	})
	if err != nil {
		t.Fatal(err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		t.Fatal("nats server not ready")
	}
	t.Cleanup(func() { s.Shutdown(); s.WaitForShutdown() })
	return s
}

func connect(t testing.TB, url string) (*nats.Conn, jetstream.JetStream) {
	t.Helper()
	nc, err := nats.Connect(url, nats.MaxReconnects(-1), nats.ReconnectWait(20*time.Millisecond), nats.RetryOnFailedConnect(true))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return nc, js
}

// waitFor polls cond until it holds or the deadline passes.
func waitFor(t testing.TB, d time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", d, what)
		}
		time.Sleep(5 * time.Millisecond) // polling interval, not a wait for an outcome
	}
}

// genEvents returns n random valid events over k nodes: mostly adds (some
// without a weight), removes with and without a weight, sets (some 0) and
// node removals, with increasing times. Invented data.
func genEvents(rng *rand.Rand, n, k int) []Event {
	evs := make([]Event, 0, n)
	ts := int64(1_700_000_000_000)
	id := func() string { return "n" + strconv.Itoa(rng.IntN(k)) }
	for len(evs) < n {
		ts += int64(rng.IntN(1000))
		ev := Event{Src: id(), Dst: id(), TS: ts, HasTS: true}
		switch p := rng.IntN(100); {
		case p < 70:
			ev.Op = OpAdd
			if rng.IntN(3) > 0 {
				ev.W, ev.HasW = float64(1+rng.IntN(9))/4, true
			}
		case p < 80:
			ev.Op = OpRemove
			if rng.IntN(2) == 0 {
				ev.W, ev.HasW = 0.5, true
			}
		case p < 92:
			ev.Op = OpSet
			ev.W, ev.HasW = float64(rng.IntN(4)), true
		default:
			ev.Op, ev.Dst = OpNodeRemove, ""
		}
		evs = append(evs, ev)
	}
	return evs
}

func jsonLine(ev *Event) string {
	var b strings.Builder
	fmt.Fprintf(&b, `{"op":%q,"src":%q`, ev.Op.String(), ev.Src)
	if ev.Dst != "" {
		fmt.Fprintf(&b, `,"dst":%q`, ev.Dst)
	}
	if ev.HasW {
		b.WriteString(`,"w":` + strconv.FormatFloat(ev.W, 'g', -1, 64))
	}
	if ev.HasTS {
		b.WriteString(`,"ts":` + strconv.FormatInt(ev.TS, 10))
	}
	b.WriteByte('}')
	return b.String()
}

// messages groups the JSON lines of evs per messages of per lines.
func messages(evs []Event, per int) [][]byte {
	var out [][]byte
	for i := 0; i < len(evs); i += per {
		var b bytes.Buffer
		for j := i; j < min(i+per, len(evs)); j++ {
			if j > i {
				b.WriteByte('\n')
			}
			b.WriteString(jsonLine(&evs[j]))
		}
		out = append(out, b.Bytes())
	}
	return out
}

func publishAll(t testing.TB, js jetstream.JetStream, subject string, msgs [][]byte) uint64 {
	t.Helper()
	ms := make([]*nats.Msg, len(msgs))
	for i, m := range msgs {
		ms[i] = &nats.Msg{Subject: subject, Data: m}
	}
	var last uint64
	for i := 0; i < len(ms); i += 500 {
		chunk := ms[i:min(i+500, len(ms))]
		futs := make([]jetstream.PubAckFuture, len(chunk))
		for j, m := range chunk {
			f, err := js.PublishMsgAsync(m)
			if err != nil {
				t.Fatal(err)
			}
			futs[j] = f
		}
		for _, f := range futs {
			select {
			case a := <-f.Ok():
				last = max(last, a.Sequence)
			case err := <-f.Err():
				t.Fatal(err)
			case <-time.After(30 * time.Second):
				t.Fatal("publish ack timeout")
			}
		}
	}
	return last
}

func ensureIngestStream(t testing.TB, js jetstream.JetStream, graph string) {
	t.Helper()
	_, err := EnsureStream(context.Background(), js, jetstream.StreamConfig{
		Name: "SHOAL_EDGES_" + graph, Subjects: []string{"shoal.edges." + graph}, Storage: jetstream.FileStorage,
	})
	if err != nil {
		t.Fatal(err)
	}
}

// foldByName folds events with Load (the one-shot fold of the same rules,
// itself checked against a brute-force fold in load_test.go) and returns
// the edges keyed by their external ids.
func foldByName(t testing.TB, evs []Event) map[[2]string]float64 {
	t.Helper()
	var b strings.Builder
	for i := range evs {
		b.WriteString(jsonLine(&evs[i]))
		b.WriteByte('\n')
	}
	l, err := Load(strings.NewReader(b.String()), LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	out := map[[2]string]float64{}
	for _, e := range l.Edges {
		out[pairOf(l.Dict.Name(e.U), l.Dict.Name(e.V))] = e.W
	}
	return out
}

func pairOf(a, b string) [2]string {
	if a > b {
		a, b = b, a
	}
	return [2]string{a, b}
}

// storedByName reads the store's edges keyed by external ids.
func storedByName(t testing.TB, s *Store) map[[2]string]float64 {
	t.Helper()
	var names []string
	if err := s.Nodes(func(id uint32, name string, _ bool) error {
		names = append(names, name)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	out := map[[2]string]float64{}
	if err := s.Edges(func(u, v uint32, w float64) error {
		out[pairOf(names[u], names[v])] = w
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	return out
}

func diffEdges(t testing.TB, got, want map[[2]string]float64, tol float64) {
	t.Helper()
	bad := 0
	for k, w := range want {
		if g, ok := got[k]; !ok || math.Abs(g-w) > tol*math.Max(1, w) {
			if bad++; bad <= 5 {
				t.Errorf("edge %v: got %v (present %v), want %v", k, g, ok, w)
			}
		}
	}
	for k, g := range got {
		if _, ok := want[k]; !ok {
			if bad++; bad <= 5 {
				t.Errorf("edge %v: got %v, want none", k, g)
			}
		}
	}
	if bad > 0 {
		t.Fatalf("%d edges differ (%d stored, %d expected)", bad, len(got), len(want))
	}
}

// harness is a store, a feed, a tracker and a consumer wired as the daemon
// wires them, with a sink of its own that applies the changes to the
// tracker after every applyEvery-th event and when the stream is idle (the
// daemon's sink is the timeline, tested in cmd/shoal and events/timeline).
type harness struct {
	t          testing.TB
	store      *Store
	tr         *tracker.Tracker
	c          *Consumer
	applyEvery uint64
	mu         sync.Mutex
	chunks     []chunkRec
	pending    []tracker.Change
	cancel     context.CancelFunc
	done       chan error
	applied    func()
}

// chunkRec is one batch the harness applied: after how many events, and
// whether the stream was idle.
type chunkRec struct {
	events uint64
	idle   bool
}

func newHarness(t testing.TB, js jetstream.JetStream, dir string, so *StoreOptions, co ConsumerOptions) *harness {
	return newHarnessEvery(t, js, dir, so, co, 1000)
}

func newHarnessEvery(t testing.TB, js jetstream.JetStream, dir string, so *StoreOptions, co ConsumerOptions, every uint64) *harness {
	t.Helper()
	h := &harness{t: t, applyEvery: every}
	so.Graph, so.Create = co.Graph, true
	h.store = newStore(t, dir, so)
	r, err := h.store.Restore()
	if err != nil {
		t.Fatal(err)
	}
	h.tr, err = tracker.NewFrom(r.Graph(), &tracker.Options{})
	if err != nil {
		t.Fatal(err)
	}
	co.Sink = h
	h.c, err = NewConsumer(js, h.store, RestoreFeed(r.Dict, r.Window), r.Present, &co)
	if err != nil {
		t.Fatal(err)
	}
	return h
}

func (h *harness) Before(*Batch, int64, *State) error { return nil }

func (h *harness) Changes(_ *Batch, _ uint64, chs []tracker.Change, st *State) error {
	h.mu.Lock()
	h.pending = append(h.pending, chs...)
	h.mu.Unlock()
	if st.EventsApplied%h.applyEvery == 0 {
		return h.flush(st, false)
	}
	return nil
}

func (h *harness) Idle(_ *Batch, st *State, _ bool) error { return h.flush(st, true) }

func (h *harness) flush(st *State, idle bool) error {
	h.mu.Lock()
	defer h.mu.Unlock()
	if len(h.pending) > 0 {
		if _, err := h.tr.Apply(h.pending); err != nil {
			return err
		}
	}
	h.pending = h.pending[:0]
	st.NextCommunity = h.tr.NextID()
	h.chunks = append(h.chunks, chunkRec{events: st.EventsApplied, idle: idle})
	if h.applied != nil {
		h.applied()
	}
	return nil
}

func (h *harness) start() {
	ctx, cancel := context.WithCancel(context.Background())
	h.cancel, h.done = cancel, make(chan error, 1)
	go func() {
		defer func() {
			if r := recover(); r != nil {
				if h.c.sub != nil {
					h.c.sub.stop()
				}
				h.done <- fmt.Errorf("crashed: %v", r)
			}
		}()
		h.done <- h.c.Run(ctx)
	}()
}

func (h *harness) stop() error {
	h.cancel()
	select {
	case err := <-h.done:
		return err
	case <-time.After(30 * time.Second):
		h.t.Fatal("consumer did not stop")
		return nil
	}
}

func (h *harness) waitApplied(seq uint64) {
	h.t.Helper()
	waitFor(h.t, 60*time.Second, fmt.Sprintf("stream seq %d applied", seq), func() bool {
		s := h.c.Stats()
		h.mu.Lock()
		n := len(h.pending)
		h.mu.Unlock()
		return s.State.Applied >= seq && n == 0
	})
}

// checkTracker: the tracker's graph is the store's, and its invariants hold.
func (h *harness) checkTracker() {
	h.t.Helper()
	if err := h.tr.Check(); err != nil {
		h.t.Fatal(err)
	}
	r, err := h.store.Restore()
	if err != nil {
		h.t.Fatal(err)
	}
	g := h.tr.Graph()
	if g.Edges() != len(r.Edges) {
		h.t.Fatalf("tracker has %d edges, store %d", g.Edges(), len(r.Edges))
	}
	for _, e := range r.Edges {
		if w := g.Weight(e.U, e.V); math.Abs(w-e.W) > 1e-9*e.W {
			h.t.Fatalf("edge %d-%d: tracker %v, store %v", e.U, e.V, w, e.W)
		}
	}
}

// TestConsumerFold: a random stream of all four ops, one event per message
// and seven per message, ends in a store whose edges are exactly the fold
// of the input by Load, with exact counters; the tracker fed the chunks
// holds the same graph; chunks fall on multiples of ApplyEvery events plus
// one idle remainder.
func TestConsumerFold(t *testing.T) {
	for _, per := range []int{1, 7} {
		t.Run(fmt.Sprintf("per=%d", per), func(t *testing.T) {
			srv := runServer(t, t.TempDir(), -1)
			_, js := connect(t, srv.ClientURL())
			ensureIngestStream(t, js, "g")
			evs := genEvents(rand.New(rand.NewPCG(uint64(per), 9)), 3000, 150)
			last := publishAll(t, js, "shoal.edges.g", messages(evs, per))
			h := newHarnessEvery(t, js, t.TempDir(), &StoreOptions{}, ConsumerOptions{Graph: "g", MaxBatch: 100}, 250)
			h.start()
			h.waitApplied(last)
			if err := h.stop(); err != nil {
				t.Fatal(err)
			}
			st := h.store.State()
			if st.Applied != last || st.EventsApplied != uint64(len(evs)) || st.EventsRejected != 0 || st.Messages != last {
				t.Fatalf("state %+v: want applied %d, %d events", st, last, len(evs))
			}
			diffEdges(t, storedByName(t, h.store), foldByName(t, evs), 0)
			h.checkTracker()
			for i, ch := range h.chunks {
				if !ch.idle && ch.events%250 != 0 {
					t.Fatalf("chunk %d of reason count ends at event %d", i, ch.events)
				}
			}
			if n := len(h.chunks); n < 3000/250 {
				t.Fatalf("%d chunks, want at least %d", n, 3000/250)
			}
			h.store.Close()
		})
	}
}

// TestConsumerRedeliveryIsSkipped: with a 1s ack wait and an Apply that
// holds the first batch until the server has redelivered it (into the pull
// request that still has room: fewer messages than it asked for), the
// redelivered messages come at or below the stored sequence and are acked
// without being applied: the counters and the edges are still exact.
func TestConsumerRedeliveryIsSkipped(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "g")
	evs := genEvents(rand.New(rand.NewPCG(3, 3)), 60, 20)
	last := publishAll(t, js, "shoal.edges.g", messages(evs, 1))
	h := newHarnessEvery(t, js, t.TempDir(), &StoreOptions{}, ConsumerOptions{Graph: "g", MaxBatch: 100, AckWait: time.Second}, 20)
	var once sync.Once
	h.applied = func() {
		once.Do(func() {
			waitFor(t, 30*time.Second, "a redelivery", func() bool {
				ci, err := js.Consumer(context.Background(), "SHOAL_EDGES_g", "shoal-g")
				if err != nil {
					return false
				}
				info, err := ci.Info(context.Background())
				return err == nil && info.NumRedelivered > 0
			})
		})
	}
	h.start()
	h.waitApplied(last)
	waitFor(t, 30*time.Second, "duplicates counted", func() bool { return h.c.Stats().Duplicates > 0 })
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	if st := h.store.State(); st.EventsApplied != uint64(len(evs)) || st.Messages != last {
		t.Fatalf("state %+v after redelivery, want %d events", st, len(evs))
	}
	diffEdges(t, storedByName(t, h.store), foldByName(t, evs), 0)
	h.checkTracker()
}

// TestConsumerRestartResumes: a consumer stopped half way and a new one on
// the reopened store apply every message once between them, even though
// the durable consumer was moved back to the start in between.
func TestConsumerRestartResumes(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "g")
	evs := genEvents(rand.New(rand.NewPCG(4, 4)), 2000, 100)
	msgs := messages(evs, 1)
	mid := publishAll(t, js, "shoal.edges.g", msgs[:1000])
	dir := t.TempDir()
	h := newHarness(t, js, dir, &StoreOptions{}, ConsumerOptions{Graph: "g"})
	h.start()
	h.waitApplied(mid)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	h.store.Close()
	// Someone rewinds the durable consumer; the store still knows better.
	if _, err := js.ResetConsumerToSequence(context.Background(), "SHOAL_EDGES_g", "shoal-g", 1); err != nil {
		t.Fatal(err)
	}
	last := publishAll(t, js, "shoal.edges.g", msgs[1000:])
	h2 := newHarness(t, js, dir, &StoreOptions{}, ConsumerOptions{Graph: "g"})
	h2.start()
	h2.waitApplied(last)
	if err := h2.stop(); err != nil {
		t.Fatal(err)
	}
	if st := h2.store.State(); st.EventsApplied != uint64(len(evs)) {
		t.Fatalf("%d events applied over two runs, want %d", st.EventsApplied, len(evs))
	}
	diffEdges(t, storedByName(t, h2.store), foldByName(t, evs), 0)
	h2.store.Close()
}

// TestConsumerCrash: crash the consumer (a panic at a failpoint) before and
// after commits at several points, keep only what was synced (Pebble's
// crashable in-memory file system), reopen and resume: the final store is
// the exact fold, with every event counted once.
func TestConsumerCrash(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "g")
	evs := genEvents(rand.New(rand.NewPCG(5, 5)), 3000, 120)
	last := publishAll(t, js, "shoal.edges.g", messages(evs, 3))
	fsys := vfs.NewCrashableMem()
	points := []struct {
		name string
		n    int
	}{{"batch-before-commit", 2}, {"batch-after-commit", 3}, {"batch-before-commit", 5}, {"batch-after-commit", 1}, {"batch-after-commit", 4}}
	for _, p := range points {
		count := 0
		var clone *vfs.MemFS
		h := newHarness(t, js, "store", &StoreOptions{FS: fsys}, ConsumerOptions{Graph: "g", MaxBatch: 50,
			Failpoint: func(name string) error {
				if name == p.name {
					if count++; count == p.n {
						clone = fsys.CrashClone(vfs.CrashCloneCfg{})
						return errors.New("crash at " + name)
					}
				}
				return nil
			}})
		h.start()
		err := <-h.done
		if err == nil || !strings.Contains(err.Error(), "crash at") {
			t.Fatalf("run ended with %v before the crash point %v", err, p)
		}
		fsys = clone
	}
	h := newHarness(t, js, "store", &StoreOptions{FS: fsys}, ConsumerOptions{Graph: "g"})
	h.start()
	h.waitApplied(last)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	if st := h.store.State(); st.EventsApplied != uint64(len(evs)) || st.Applied != last {
		t.Fatalf("state %+v after crashes, want %d events up to seq %d", st, len(evs), last)
	}
	diffEdges(t, storedByName(t, h.store), foldByName(t, evs), 0)
	h.checkTracker()
}

// TestConsumerBrokerOutage: the server goes away mid-stream and comes back
// on the same port with the same JetStream store; the consumer rides it
// out and nothing is lost or doubled.
func TestConsumerBrokerOutage(t *testing.T) {
	jsDir := t.TempDir()
	srv := runServer(t, jsDir, -1)
	port := srv.Addr().(interface{ String() string })
	_ = port
	url := srv.ClientURL()
	p := srv.Addr().String()
	portNum, _ := strconv.Atoi(p[strings.LastIndexByte(p, ':')+1:])
	_, js := connect(t, url)
	ensureIngestStream(t, js, "g")
	evs := genEvents(rand.New(rand.NewPCG(6, 6)), 20000, 400)
	last := publishAll(t, js, "shoal.edges.g", messages(evs, 1))
	h := newHarness(t, js, t.TempDir(), &StoreOptions{}, ConsumerOptions{Graph: "g", MaxBatch: 200})
	h.start()
	waitFor(t, 60*time.Second, "a third of the stream", func() bool { return h.c.Stats().State.Applied > last/3 })
	srv.Shutdown()
	srv.WaitForShutdown()
	mid := h.c.Stats().State.Applied
	if mid >= last {
		t.Fatalf("the whole stream was applied before the outage (%d); make it longer", mid)
	}
	runServer(t, jsDir, portNum)
	h.waitApplied(last)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	if st := h.store.State(); st.EventsApplied != uint64(len(evs)) {
		t.Fatalf("%d events applied, want %d", st.EventsApplied, len(evs))
	}
	diffEdges(t, storedByName(t, h.store), foldByName(t, evs), 0)
	h.checkTracker()
	h.store.Close()
}

// badCorpus is one message per kind of bad input, with the reject code and
// field it must get. The codes follow the decoder's sentinels (errors.go)
// and the event model of doc.go (Event model).
var badCorpus = []struct {
	msg, code, field string
}{
	{`{"op":"add","src":"a","dst":"b"`, "syntax", ""},
	{`{"op":"add","src":"a","dst":"b"} trailing`, "syntax", ""},
	{`{"op":"add","src":"a","src":"c","dst":"b"}`, "syntax", "src"},
	{`{"op":"add","src":1,"dst":"b"}`, "syntax", "src"},
	{`{"op":"add","src":"a","dst":"b","w":"3"}`, "bad_weight", "w"},
	{`{"op":"link","src":"a","dst":"b"}`, "unknown_op", "op"},
	{`{"op":"add","src":"a","dst":"b","weight":3}`, "unknown_field", ""},
	{`{"op":"node-remove","src":"a","dst":"b"}`, "unknown_field", "dst"},
	{`{"op":"add","dst":"b"}`, "missing_field", "src"},
	{`{"op":"add","src":"a"}`, "missing_field", "dst"},
	{`{"op":"set","src":"a","dst":"b"}`, "missing_field", "w"},
	{`{"op":"add","src":"","dst":"b"}`, "empty_id", "src"},
	{`{"op":"add","src":"a","dst":"` + strings.Repeat("x", 257) + `"}`, "id_too_long", "dst"},
	{`{"op":"add","src":"a","dst":"b","w":-1}`, "bad_weight", "w"},
	{`{"op":"add","src":"a","dst":"b","w":0}`, "bad_weight", "w"},
	{`{"op":"add","src":"a","dst":"b","w":1e400}`, "bad_weight", "w"},
	{`{"op":"node-remove","src":"a","w":2}`, "bad_weight", "w"},
	{`{"op":"add","src":"a","dst":"b","ts":"yesterday"}`, "bad_time", "ts"},
	{`{"op":"add","src":"a","dst":"b","ts":"2026-02-30T00:00:00Z"}`, "bad_time", "ts"},
	{"{\"op\":\"add\",\"src\":\"a\xff\",\"dst\":\"b\"}", "bad_encoding", ""},
	{`{"op":"add","src":"a\u0007","dst":"b"}`, "bad_encoding", "src"},
	{`{"op":"add","src":"\ud800","dst":"b"}`, "bad_encoding", ""},
	{"a b NaN", "bad_weight", "weight"},
	{"a b 1 2 3", "syntax", ""},
	{"a b 1 tomorrow", "bad_time", "time"},
	{"", "empty_message", ""},
	{"# only a comment\n\n", "empty_message", ""},
}

// TestConsumerBadInput: every kind of bad message in badCorpus, mixed into
// a good stream, lands in the rejects outbox and then on the rejects
// subject with the original bytes, its stream sequence and the right code;
// the good events are all applied and the counters match the corpus
// exactly.
func TestConsumerBadInput(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "g")
	rs, err := EnsureStream(context.Background(), js, jetstream.StreamConfig{Name: "SHOAL_REJECTS_g", Subjects: []string{"shoal.rejects.g"}})
	if err != nil {
		t.Fatal(err)
	}
	good := genEvents(rand.New(rand.NewPCG(7, 7)), 600, 50)
	goodMsgs := messages(good, 1)
	var msgs [][]byte
	badAt := map[uint64]int{} // stream seq -> corpus index
	for i, m := range goodMsgs {
		msgs = append(msgs, m)
		if i%20 == 10 && len(badAt) < len(badCorpus) {
			badAt[uint64(len(msgs)+1)] = len(badAt)
			msgs = append(msgs, []byte(badCorpus[len(badAt)-1].msg))
		}
	}
	// One message mixing good and bad lines: the good ones count.
	mixed := jsonLine(&good[0]) + "\n{\"op\":\"add\"}\n" + jsonLine(&good[1])
	msgs = append(msgs, []byte(mixed))
	mixedSeq := uint64(len(msgs))
	if len(badAt) != len(badCorpus) {
		t.Fatalf("corpus placement: %d of %d", len(badAt), len(badCorpus))
	}
	last := publishAll(t, js, "shoal.edges.g", msgs)
	h := newHarness(t, js, t.TempDir(), &StoreOptions{}, ConsumerOptions{Graph: "g", MaxBatch: 64})
	h.start()
	h.waitApplied(last)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	wantRejected := uint64(len(badCorpus) + 1)
	if st := h.store.State(); st.EventsApplied != uint64(len(good)+2) || st.EventsRejected != wantRejected {
		t.Fatalf("applied %d rejected %d, want %d and %d", st.EventsApplied, st.EventsRejected, len(good)+2, wantRejected)
	}
	diffEdges(t, storedByName(t, h.store), foldByName(t, append(append([]Event(nil), good...), good[0], good[1])), 1e-12)

	pub := &RejectPublisher{JS: js, Store: h.store, Graph: "g", Subject: "shoal.rejects.g"}
	n, err := pub.Publish(context.Background())
	if err != nil || n != int(wantRejected) {
		t.Fatalf("published %d rejects (%v), want %d", n, err, wantRejected)
	}
	if left, _ := h.store.PendingRejects(0); len(left) != 0 {
		t.Fatalf("%d rejects left in the outbox", len(left))
	}
	// Publishing again sends nothing; re-publishing the same ids would be
	// de-duplicated by the stream anyway.
	if n, _ := pub.Publish(context.Background()); n != 0 {
		t.Fatalf("second publish sent %d", n)
	}
	cons, err := rs.OrderedConsumer(context.Background(), jetstream.OrderedConsumerConfig{})
	if err != nil {
		t.Fatal(err)
	}
	seen := 0
	for seen < int(wantRejected) {
		m, err := cons.Next(jetstream.FetchMaxWait(10 * time.Second))
		if err != nil {
			t.Fatalf("after %d rejects: %v", seen, err)
		}
		seen++
		hd := m.Headers()
		seq, _ := strconv.ParseUint(hd.Get(HeaderSeq), 10, 64)
		if seq == mixedSeq {
			if hd.Get(HeaderLine) != "2" || hd.Get(HeaderCode) != "missing_field" || string(m.Data()) != `{"op":"add"}` {
				t.Errorf("mixed message reject: line %s code %s body %q", hd.Get(HeaderLine), hd.Get(HeaderCode), m.Data())
			}
			continue
		}
		i, ok := badAt[seq]
		if !ok {
			t.Fatalf("reject for seq %d, which is a good message", seq)
		}
		c := badCorpus[i]
		if hd.Get(HeaderCode) != c.code || hd.Get(HeaderField) != c.field {
			t.Errorf("%q: code %q field %q, want %q %q (reason %q)", c.msg, hd.Get(HeaderCode), hd.Get(HeaderField), c.code, c.field, hd.Get(HeaderReason))
		}
		want := c.msg
		if c.code != "empty_message" {
			want = strings.TrimSuffix(want, "\n")
		}
		if string(m.Data()) != want || hd.Get(HeaderReason) == "" || hd.Get(jetstream.MsgIDHeader) == "" {
			t.Errorf("%q: body %q, reason %q", c.msg, m.Data(), hd.Get(HeaderReason))
		}
		delete(badAt, seq)
	}
	if len(badAt) != 0 {
		t.Fatalf("%d bad messages without a reject", len(badAt))
	}
	h.store.Close()
}

// TestConsumerWindow: with a one-hour window, an edge whose increments all
// expire leaves the graph, the edge family and the increment family; the
// other edges weigh exactly the sum of their live increments (a
// brute-force window fold in the test).
func TestConsumerWindow(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "w")
	const hour = int64(time.Hour / time.Millisecond)
	t0 := int64(1_750_000_000_000)
	var evs []Event
	add := func(src, dst string, w float64, ts int64) {
		evs = append(evs, Event{Op: OpAdd, Src: src, Dst: dst, W: w, HasW: true, TS: ts, HasTS: true})
	}
	add("old1", "old2", 3, t0)
	add("old1", "old2", 4, t0+10*60_000)
	rng := rand.New(rand.NewPCG(8, 8))
	for i := range 2000 {
		ts := t0 + int64(i)*3_000 // 100 minutes in all
		add("n"+strconv.Itoa(rng.IntN(30)), "n"+strconv.Itoa(rng.IntN(30)), float64(1+rng.IntN(3)), ts)
	}
	last := publishAll(t, js, "shoal.edges.w", messages(evs, 5))
	h := newHarnessEvery(t, js, t.TempDir(), &StoreOptions{Window: time.Hour}, ConsumerOptions{Graph: "w"}, 300)
	h.start()
	h.waitApplied(last)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	// Brute force: an add counts while ts + 1h > watermark.
	wm := evs[len(evs)-1].TS
	want := map[[2]string]float64{}
	for _, ev := range evs {
		if ev.TS+hour > wm {
			want[pairOf(ev.Src, ev.Dst)] += ev.W
		}
	}
	got := storedByName(t, h.store)
	if _, ok := got[pairOf("old1", "old2")]; ok {
		t.Fatal("the expired edge old1-old2 is still stored")
	}
	diffEdges(t, got, want, 1e-12)
	incs := 0
	err := h.store.Increments(func(inc Increment) error {
		incs++
		if inc.Expiry <= wm {
			return fmt.Errorf("increment expiring at %d kept past the watermark %d", inc.Expiry, wm)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	live := 0
	for _, ev := range evs {
		if ev.TS+hour > wm {
			live++
		}
	}
	if incs != live {
		t.Fatalf("%d increments stored, %d adds inside the window", incs, live)
	}
	h.checkTracker()
	old1, _ := h.c.feed.Dict().Lookup("old1")
	if h.tr.Graph().Degree(old1) != 0 {
		t.Fatal("old1 keeps weight in the tracker after its only edge expired")
	}
	// Reopen: the window comes back from family 'x'.
	h.store.Close()
	s := newStore(t, h.store.Dir(), &StoreOptions{Graph: "w", Window: time.Hour})
	defer s.Close()
	r, err := s.Restore()
	if err != nil {
		t.Fatal(err)
	}
	if r.Window.Len() != live || r.Window.Watermark() != wm {
		t.Fatalf("restored window: %d increments, watermark %d; want %d, %d", r.Window.Len(), r.Window.Watermark(), live, wm)
	}
}

// TestConsumerPseudonymized: with a key, no byte string of a raw id is
// anywhere in the store (keys or values, rejects included), and the edges
// are the fold of the input with every id replaced by its pseudonym.
func TestConsumerPseudonymized(t *testing.T) {
	srv := runServer(t, t.TempDir(), -1)
	_, js := connect(t, srv.ClientURL())
	ensureIngestStream(t, js, "p")
	p, err := NewPseudonymizer([]byte("a key of at least sixteen bytes"))
	if err != nil {
		t.Fatal(err)
	}
	evs := genEvents(rand.New(rand.NewPCG(9, 9)), 500, 40)
	for i := range evs {
		evs[i].Src = "acct-" + evs[i].Src
		if evs[i].Dst != "" {
			evs[i].Dst = "acct-" + evs[i].Dst
		}
	}
	msgs := messages(evs, 2)
	msgs = append(msgs, []byte(`{"op":"add","src":"acct-secret","dst":"acct-n1","w":"x"}`))
	last := publishAll(t, js, "shoal.edges.p", msgs)
	h := newHarness(t, js, t.TempDir(), &StoreOptions{KeyID: p.KeyID()}, ConsumerOptions{Graph: "p", Pseudonymizer: p})
	h.start()
	h.waitApplied(last)
	if err := h.stop(); err != nil {
		t.Fatal(err)
	}
	it, err := h.store.DB().NewIter(nil)
	if err != nil {
		t.Fatal(err)
	}
	for ok := it.First(); ok; ok = it.Next() {
		if bytes.Contains(it.Key(), []byte("acct-")) || bytes.Contains(it.Value(), []byte("acct-")) {
			t.Fatalf("raw id in the store under key %q", it.Key())
		}
	}
	it.Close()
	want := map[[2]string]float64{}
	for k, w := range foldByName(t, evs) {
		want[pairOf(p.ID(k[0]), p.ID(k[1]))] = w
	}
	diffEdges(t, storedByName(t, h.store), want, 0)
	// The reject is published with the bytes read back from the stream.
	stream, err := js.Stream(context.Background(), "SHOAL_EDGES_p")
	if err != nil {
		t.Fatal(err)
	}
	rs, err := EnsureStream(context.Background(), js, jetstream.StreamConfig{Name: "SHOAL_REJECTS_p", Subjects: []string{"shoal.rejects.p"}})
	if err != nil {
		t.Fatal(err)
	}
	pub := &RejectPublisher{JS: js, Store: h.store, Graph: "p", Subject: "shoal.rejects.p", Pseudonymized: true,
		Source: func(ctx context.Context, seq uint64) ([]byte, error) {
			m, err := stream.GetMsg(ctx, seq)
			if err != nil {
				return nil, err
			}
			return m.Data, nil
		}}
	if n, err := pub.Publish(context.Background()); n != 1 || err != nil {
		t.Fatalf("published %d (%v)", n, err)
	}
	m, err := rs.GetMsg(context.Background(), 1)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(m.Data, []byte("acct-secret")) || m.Header.Get(HeaderCode) != "bad_weight" || !strings.Contains(m.Header.Get(HeaderReason), "w") {
		t.Fatalf("reject %q with headers %v", m.Data, m.Header)
	}
	h.store.Close()
}
