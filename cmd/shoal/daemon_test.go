package main

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/json"
	"fmt"
	"io"
	"io/fs"
	"math"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/cockroachdb/pebble/v2"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/ingest"
)

// daemonProc is a `shoal run` subprocess.
type daemonProc struct {
	t      testing.TB
	cmd    *exec.Cmd
	http   string
	nats   string
	stderr string // path of its stderr
	exited chan struct{}
	code   int
}

// startDaemon runs the shoal binary as a daemon on data with extra flags
// and env, and waits until it is consuming (its ready file). HTTP listens
// on a free port.
func startDaemon(t testing.TB, data string, env []string, args ...string) *daemonProc {
	t.Helper()
	dir := t.TempDir()
	ready := filepath.Join(dir, "ready.json")
	errPath := filepath.Join(dir, "stderr")
	ef, err := os.Create(errPath)
	if err != nil {
		t.Fatal(err)
	}
	full := append([]string{"run", "--data", data, "--http", "127.0.0.1:0", "--ready-file", ready, "--log-format", "json"}, args...)
	cmd := exec.Command(shoalBin, full...)
	cmd.Stderr, cmd.Stdout = ef, ef
	cmd.Env = append(os.Environ(), env...)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	p := &daemonProc{t: t, cmd: cmd, stderr: errPath, exited: make(chan struct{})}
	go func() {
		err := cmd.Wait()
		ef.Close()
		p.code = 0
		if ee, ok := err.(*exec.ExitError); ok {
			p.code = ee.ExitCode()
			if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
				p.code = -int(ws.Signal())
			}
		}
		close(p.exited)
	}()
	t.Cleanup(func() {
		select {
		case <-p.exited:
		default:
			cmd.Process.Kill()
			<-p.exited
		}
		if t.Failed() {
			b, _ := os.ReadFile(errPath)
			if len(b) > 4000 {
				b = b[len(b)-4000:]
			}
			t.Logf("daemon stderr (tail):\n%s", b)
		}
	})
	deadline := time.Now().Add(60 * time.Second)
	for {
		if b, err := os.ReadFile(ready); err == nil && len(b) > 0 {
			var info struct{ HTTP, NATS string }
			if err := json.Unmarshal(b, &info); err == nil {
				p.http, p.nats = info.HTTP, info.NATS
				break
			}
		}
		select {
		case <-p.exited:
			b, _ := os.ReadFile(errPath)
			t.Fatalf("daemon exited (%d) before it was ready:\n%s", p.code, b)
		default:
		}
		if time.Now().After(deadline) {
			t.Fatal("daemon not ready after 60s")
		}
		time.Sleep(10 * time.Millisecond) // polling interval
	}
	return p
}

// stats is the part of /v1/stats the tests read.
type stats struct {
	Nodes          int     `json:"nodes"`
	Edges          int     `json:"edges"`
	TotalWeight    float64 `json:"total_weight"`
	AppliedSeq     uint64  `json:"applied_seq"`
	EventsApplied  uint64  `json:"events_applied"`
	EventsRejected uint64  `json:"events_rejected"`
	Watermark      string  `json:"watermark"`
	Modularity     float64 `json:"modularity"`
	Communities    int     `json:"communities"`
	PendingChanges int     `json:"pending_changes"`
	Consuming      bool    `json:"consuming"`
	Snapshots      int     `json:"snapshots"`
}

func (p *daemonProc) stats() (stats, error) {
	var s stats
	resp, err := http.Get("http://" + p.http + "/v1/stats")
	if err != nil {
		return s, err
	}
	defer resp.Body.Close()
	err = json.NewDecoder(resp.Body).Decode(&s)
	return s, err
}

// waitApplied polls /v1/stats until seq is applied and nothing is pending.
func (p *daemonProc) waitApplied(seq uint64) stats {
	p.t.Helper()
	var s stats
	deadline := time.Now().Add(120 * time.Second)
	for {
		var err error
		s, err = p.stats()
		if err == nil && s.AppliedSeq >= seq && s.PendingChanges == 0 {
			return s
		}
		select {
		case <-p.exited:
			p.t.Fatalf("daemon exited (%d) at seq %d, waiting for %d", p.code, s.AppliedSeq, seq)
		default:
		}
		if time.Now().After(deadline) {
			p.t.Fatalf("seq %d not applied after 120s (at %d, %v)", seq, s.AppliedSeq, err)
		}
		time.Sleep(10 * time.Millisecond) // polling interval
	}
}

// stop sends SIGTERM and waits for a clean exit.
func (p *daemonProc) stop() {
	p.t.Helper()
	p.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-p.exited:
	case <-time.After(60 * time.Second):
		p.t.Fatal("daemon did not stop within 60s of SIGTERM")
	}
	if p.code != 0 {
		b, _ := os.ReadFile(p.stderr)
		p.t.Fatalf("daemon exit code %d after SIGTERM:\n%s", p.code, b)
	}
}

// kill sends SIGKILL and waits.
func (p *daemonProc) kill() {
	p.cmd.Process.Kill()
	<-p.exited
}

// waitExit waits for the process to die by itself (a failpoint).
func (p *daemonProc) waitExit(d time.Duration) int {
	p.t.Helper()
	select {
	case <-p.exited:
		return p.code
	case <-time.After(d):
		p.t.Fatalf("daemon still running after %v", d)
		return 0
	}
}

// testServer is an in-process NATS server with JetStream, restartable on
// the same port and store.
type testServer struct {
	t    testing.TB
	dir  string
	port int
	s    *server.Server
}

func startTestServer(t testing.TB) *testServer {
	ts := &testServer{t: t, dir: t.TempDir(), port: -1}
	ts.start()
	t.Cleanup(ts.shutdown)
	return ts
}

func (ts *testServer) start() {
	s, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: ts.port, JetStream: true, StoreDir: ts.dir, NoLog: true, NoSigs: true})
	if err != nil {
		ts.t.Fatal(err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		ts.t.Fatal("nats server not ready")
	}
	ts.s = s
	ts.port = s.Addr().(*net.TCPAddr).Port
}

func (ts *testServer) shutdown() {
	if ts.s != nil {
		ts.s.Shutdown()
		ts.s.WaitForShutdown()
		ts.s = nil
	}
}

func (ts *testServer) url() string { return fmt.Sprintf("nats://127.0.0.1:%d", ts.port) }

// jsConnect connects a test client with reconnects.
func jsConnect(t testing.TB, url string) jetstream.JetStream {
	t.Helper()
	nc, err := nats.Connect(url, nats.MaxReconnects(-1), nats.ReconnectWait(20*time.Millisecond))
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

// publishLines publishes one message per entry and returns the last
// stream sequence. The stream is created as shoal publish creates it.
func publishLines(t testing.TB, js jetstream.JetStream, graph string, msgs []string) uint64 {
	t.Helper()
	ctx := context.Background()
	if _, err := js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{Name: "SHOAL_EDGES_" + graph, Subjects: []string{"shoal.edges." + graph}, Storage: jetstream.FileStorage}); err != nil {
		t.Fatal(err)
	}
	var last uint64
	for i := 0; i < len(msgs); i += 1000 {
		var futs []jetstream.PubAckFuture
		for _, m := range msgs[i:min(i+1000, len(msgs))] {
			f, err := js.PublishAsync("shoal.edges."+graph, []byte(m))
			if err != nil {
				t.Fatal(err)
			}
			futs = append(futs, f)
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

// streamMessages reads every message of a stream, in order.
func streamMessages(t testing.TB, js jetstream.JetStream, name string) []jetstream.Msg {
	t.Helper()
	ctx := context.Background()
	s, err := js.Stream(ctx, name)
	if err != nil {
		t.Fatal(err)
	}
	info, err := s.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	n := int(info.State.Msgs)
	if n == 0 {
		return nil
	}
	c, err := s.OrderedConsumer(ctx, jetstream.OrderedConsumerConfig{})
	if err != nil {
		t.Fatal(err)
	}
	var out []jetstream.Msg
	for len(out) < n {
		b, err := c.Fetch(n-len(out), jetstream.FetchMaxWait(10*time.Second))
		if err != nil {
			t.Fatal(err)
		}
		got := 0
		for m := range b.Messages() {
			out = append(out, m)
			got++
		}
		if got == 0 {
			t.Fatalf("stream %s: read %d of %d", name, len(out), n)
		}
	}
	return out
}

// exportEdgeMap runs shoal export edges and returns the edges by names.
func exportEdgeMap(t *testing.T, data string) map[[2]string]float64 {
	t.Helper()
	out, errs, code := runBin(t, "", "export", "edges", "--data", data)
	if code != 0 {
		t.Fatalf("export edges: exit %d: %s", code, errs)
	}
	m := map[[2]string]float64{}
	for _, line := range strings.Split(strings.TrimSuffix(out, "\n"), "\n") {
		if line == "" {
			continue
		}
		f := strings.Split(line, "\t")
		if len(f) != 3 {
			t.Fatalf("export line %q", line)
		}
		w, err := strconv.ParseFloat(f[2], 64)
		if err != nil {
			t.Fatal(err)
		}
		m[namePair(f[0], f[1])] = w
	}
	return m
}

func namePair(a, b string) [2]string {
	if a > b {
		a, b = b, a
	}
	return [2]string{a, b}
}

func compareEdges(t testing.TB, got, want map[[2]string]float64, tol float64) {
	t.Helper()
	bad := 0
	for k, w := range want {
		g, ok := got[k]
		if !ok || math.Abs(g-w) > tol*math.Max(1, math.Abs(w)) {
			if bad++; bad <= 5 {
				t.Errorf("edge %v: stored %v (present %v), folded %v", k, g, ok, w)
			}
		}
	}
	for k, g := range got {
		if _, ok := want[k]; !ok {
			if bad++; bad <= 5 {
				t.Errorf("edge %v: stored %v, not in the fold", k, g)
			}
		}
	}
	if bad > 0 {
		t.Fatalf("%d edges differ (%d stored, %d folded)", bad, len(got), len(want))
	}
}

// fold is the hand fold of the event model (ingest doc.go): add adds
// w (1 by default), remove deletes (with w subtracts, the edge going when
// at most 1e-12 of it is left, the rounding rule of ingest.Load), set sets
// (0 deletes), node-remove deletes the node's edges.
type fold map[[2]string]float64

type ev struct {
	Op  string   `json:"op,omitempty"`
	Src string   `json:"src"`
	Dst string   `json:"dst,omitempty"`
	W   *float64 `json:"w,omitempty"`
	TS  int64    `json:"ts,omitempty"`
}

func (f fold) apply(e ev) {
	switch e.Op {
	case "", "add":
		w := 1.0
		if e.W != nil {
			w = *e.W
		}
		f[namePair(e.Src, e.Dst)] += w
	case "remove":
		k := namePair(e.Src, e.Dst)
		if e.W == nil {
			delete(f, k)
			return
		}
		if before, ok := f[k]; ok {
			if now := before - *e.W; now <= before*1e-12 {
				delete(f, k)
			} else {
				f[k] = now
			}
		}
	case "set":
		if *e.W == 0 {
			delete(f, namePair(e.Src, e.Dst))
		} else {
			f[namePair(e.Src, e.Dst)] = *e.W
		}
	case "node-remove":
		for k := range f {
			if k[0] == e.Src || k[1] == e.Src {
				delete(f, k)
			}
		}
	}
}

func (e ev) line() string {
	b, _ := json.Marshal(e)
	return string(b)
}

func wp(w float64) *float64 { return &w }

func readAll(t testing.TB, r io.Reader) string {
	b, err := io.ReadAll(r)
	if err != nil {
		t.Fatal(err)
	}
	return string(bytes.TrimSpace(b))
}

// TestStoreOfAnotherVersion: a store written with another format version
// makes shoal run and shoal export fail with exit 1 and a message naming
// both versions, and not a byte of the data directory changes.
func TestStoreOfAnotherVersion(t *testing.T) {
	data := filepath.Join(t.TempDir(), "data")
	s, err := ingest.OpenStore(ingest.StoreDir(data), &ingest.StoreOptions{Graph: "v", Create: true})
	if err != nil {
		t.Fatal(err)
	}
	b := s.NewBatch()
	b.PutNode(0, "a", true)
	b.PutNode(1, "b", true)
	b.PutEdge(0, 1, 1)
	if err := s.Commit(b, nil); err != nil {
		t.Fatal(err)
	}
	s.Close()
	db, err := pebble.Open(ingest.StoreDir(data), &pebble.Options{FormatMajorVersion: pebble.FormatNewest, Logger: quietPebble{}})
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Set([]byte("mformat"), []byte{7}, pebble.Sync); err != nil {
		t.Fatal(err)
	}
	db.Close()
	before := treeDigest(t, data)
	for _, args := range [][]string{
		{"run", "--data", data, "--nats-listen", "127.0.0.1:0", "--http", "off"},
		{"export", "edges", "--data", data},
	} {
		out, errs, code := runBin(t, "", args...)
		if code != 1 || !strings.Contains(errs, "format version 7") || !strings.Contains(errs, "reads version 1") || out != "" {
			t.Errorf("%v: exit %d, stdout %q, stderr %q", args[0], code, out, errs)
		}
	}
	if after := treeDigest(t, data); after != before {
		t.Fatal("refusing the store changed the data directory")
	}
}

func treeDigest(t *testing.T, dir string) string {
	t.Helper()
	h := sha256.New()
	err := filepath.WalkDir(dir, func(p string, de fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		fmt.Fprintln(h, p)
		if !de.IsDir() {
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			h.Write(b)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return fmt.Sprintf("%x", h.Sum(nil))
}

// TestPseudonymizedDaemon: with --pseudonymize-key-file the exported edges
// carry the HMAC pseudonyms of the ids (computed here with the same key),
// never the ids; the store refuses to be reopened without the key; the
// reject of a bad line still carries the bytes as sent, read back from the
// ingest stream.
func TestPseudonymizedDaemon(t *testing.T) {
	dir := t.TempDir()
	keyFile := filepath.Join(dir, "key")
	key := []byte("0123456789abcdef0123456789abcdef")
	if err := os.WriteFile(keyFile, append(key, '\n'), 0o600); err != nil {
		t.Fatal(err)
	}
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	msgs := []string{
		`{"op":"add","src":"alice@example.org","dst":"bob@example.org","w":2}`,
		`{"op":"add","src":"bob@example.org","dst":"carol@example.org"}`,
		`{"op":"add","src":"alice@example.org","dst":"bob@example.org"}`,
		`{"op":"add","src":"dave@example.org","dst":"carol@example.org","w":"x"}`,
	}
	last := publishLines(t, js, "p", msgs)
	data := filepath.Join(dir, "data")
	d := startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "p", "--pseudonymize-key-file", keyFile)
	st := d.waitApplied(last)
	if st.EventsApplied != 3 || st.EventsRejected != 1 {
		t.Fatalf("applied %d, rejected %d", st.EventsApplied, st.EventsRejected)
	}
	var rejects []jetstream.Msg
	deadline := time.Now().Add(30 * time.Second)
	for len(rejects) == 0 && time.Now().Before(deadline) {
		if _, err := js.Stream(t.Context(), "SHOAL_REJECTS_p"); err == nil {
			rejects = streamMessages(t, js, "SHOAL_REJECTS_p")
		}
		time.Sleep(20 * time.Millisecond) // polling interval
	}
	d.stop()
	p, _ := ingest.NewPseudonymizer(key)
	a, b, c := p.ID("alice@example.org"), p.ID("bob@example.org"), p.ID("carol@example.org")
	want := map[[2]string]float64{namePair(a, b): 3, namePair(b, c): 1}
	compareEdges(t, exportEdgeMap(t, data), want, 0)
	out, _, _ := runBin(t, "", "export", "nodes", "--data", data)
	if strings.Contains(out, "@") {
		t.Fatalf("a raw id in the export: %s", out)
	}
	if len(rejects) != 1 || string(rejects[0].Data()) != msgs[3] || rejects[0].Headers().Get("Shoal-Reject-Code") != "bad_weight" {
		t.Fatalf("rejects %v", rejects)
	}
	_, errs, code := runBin(t, "", "run", "--data", data, "--nats", ts.url(), "--http", "off")
	if code != 1 || !strings.Contains(errs, "pseudonymize-key-file") {
		t.Fatalf("reopening without the key: exit %d, %q", code, errs)
	}
}

// TestDaemonUsage: bad flags exit 2 with a message.
func TestDaemonUsage(t *testing.T) {
	for _, c := range []struct {
		args []string
		msg  string
	}{
		{[]string{"run"}, "--data DIR is required"},
		{[]string{"run", "--data", t.TempDir(), "--graph", "a.b"}, "--graph"},
		{[]string{"run", "--data", t.TempDir(), "--history", "0"}, "--history 0"},
		{[]string{"run", "--data", t.TempDir(), "--snapshot-every", "1us"}, "at least 1ms"},
		{[]string{"run", "--data", t.TempDir(), "--snapshot-keep", "1"}, "at least 2"},
		{[]string{"run", "--data", t.TempDir(), "--nats-user", "u", "--nats-token", "t"}, "at most one"},
		{[]string{"run", "--data", t.TempDir(), "--pseudonymize-key-file", "/nonexistent/key"}, "key"},
		{[]string{"publish"}, "exactly one FILE"},
		{[]string{"publish", "x", "--lines-per-message", "0"}, "at least 1"},
		{[]string{"export", "--data", t.TempDir()}, "what to export"},
		{[]string{"export", "vertices", "--data", t.TempDir()}, "unknown export"},
		{[]string{"export", "snapshot", "x", "--data", t.TempDir()}, "snapshot id"},
		{[]string{"query", "nodes"}, "query stats"},
	} {
		_, errs, code := runIn(t, "", c.args...)
		if code != 2 || !strings.Contains(errs, c.msg) {
			t.Errorf("%v: exit %d, stderr %q; want 2 and %q", c.args, code, errs, c.msg)
		}
	}
	// An export of a directory without a store is a failure, not bad usage.
	_, errs, code := runIn(t, "", "export", "edges", "--data", t.TempDir())
	if code != 1 || !strings.Contains(errs, "no store") {
		t.Errorf("export of an empty directory: exit %d, %q", code, errs)
	}
	// query against nothing.
	_, errs, code = runIn(t, "", "query", "stats", "--http", "127.0.0.1:1", "--timeout", "2s")
	if code != 1 || !strings.Contains(errs, "no daemon") {
		t.Errorf("query without a daemon: exit %d, %q", code, errs)
	}
}

type quietPebble struct{}

func (quietPebble) Infof(string, ...any)         {}
func (quietPebble) Errorf(string, ...any)        {}
func (quietPebble) Fatalf(f string, args ...any) { panic(fmt.Sprintf(f, args...)) }
