package main

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"shoal/events"
	"shoal/ingest"
)

// plantedStream is invented data: five groups whose history is planted
// hour by hour (event time), perHour events an hour (a multiple of 1000,
// so that with --apply-every 1000 every hour ends a chunk):
//
//	hour 0  A (a0..a19), B (b0..b19), C (c0..c29), D (d0..d19), each dense inside
//	hour 1  A and B merge: half the hour's events join an a to a b; C, D go on
//	hour 2  C splits: every c0..c14 - c15..c29 edge is removed, then C1 and C2
//	        go on apart; AB and D go on
//	hour 3  D dies: each d is node-removed; E (e0..e19) is born; AB, C1, C2 go on
//	hour 4  one event, which closes hour 3
//
// What must come out between the hourly snapshots: a merge of A and B, a
// split of C into its halves, the death of D and the birth of E. Weights
// are 1 or 2.
func plantedStream(perHour int, seed uint64) (lines []string, f fold, t0 int64) {
	rng := rand.New(rand.NewPCG(seed, 1))
	const hour = int64(time.Hour / time.Millisecond)
	t0 = 1_767_225_600_000 // 2026-01-01T00:00:00Z, a whole hour
	f = fold{}
	group := func(p string, lo, hi int) []string {
		var g []string
		for i := lo; i < hi; i++ {
			g = append(g, p+strconv.Itoa(i))
		}
		return g
	}
	A, B, C, D, E := group("a", 0, 20), group("b", 0, 20), group("c", 0, 30), group("d", 0, 20), group("e", 0, 20)
	C1, C2 := C[:15], C[15:]
	emit := func(e ev) {
		f.apply(e)
		lines = append(lines, e.line())
	}
	// add draws a pair from g1 x g2 (within g1 when g2 is nil).
	add := func(ts int64, g1, g2 []string) {
		if g2 == nil {
			g2 = g1
		}
		a, b := g1[rng.IntN(len(g1))], g2[rng.IntN(len(g2))]
		for a == b {
			b = g2[rng.IntN(len(g2))]
		}
		e := ev{Op: "add", Src: a, Dst: b, TS: ts}
		if rng.IntN(2) == 0 {
			e.W = wp(2)
		}
		emit(e)
	}
	hourOf := func(h int, fixed []ev, draw func(ts int64)) {
		base := t0 + int64(h)*hour
		n := perHour - len(fixed)
		step := hour / int64(perHour)
		for i, e := range fixed {
			e.TS = base + int64(i)*step
			emit(e)
		}
		for i := range n {
			draw(base + int64(len(fixed)+i)*step)
		}
	}
	hourOf(0, nil, func(ts int64) {
		add(ts, [][]string{A, B, C, D}[rng.IntN(4)], nil)
	})
	hourOf(1, nil, func(ts int64) {
		switch rng.IntN(4) {
		case 0, 1:
			add(ts, A, B)
		case 2:
			add(ts, C, nil)
		default:
			add(ts, D, nil)
		}
	})
	var removes []ev
	for _, x := range C1 {
		for _, y := range C2 {
			if _, ok := f[namePair(x, y)]; ok {
				removes = append(removes, ev{Op: "remove", Src: x, Dst: y})
			}
		}
	}
	hourOf(2, removes, func(ts int64) {
		switch rng.IntN(4) {
		case 0:
			add(ts, slices.Concat(A, B), nil)
		case 1:
			add(ts, C1, nil)
		case 2:
			add(ts, C2, nil)
		default:
			add(ts, D, nil)
		}
	})
	var kills []ev
	for _, d := range D {
		kills = append(kills, ev{Op: "node-remove", Src: d})
	}
	hourOf(3, kills, func(ts int64) {
		switch rng.IntN(4) {
		case 0:
			add(ts, slices.Concat(A, B), nil)
		case 1:
			add(ts, C1, nil)
		case 2:
			add(ts, C2, nil)
		default:
			add(ts, E, nil)
		}
	})
	emit(ev{Op: "add", Src: "a0", Dst: "a1", TS: t0 + 4*hour})
	return lines, f, t0
}

func members(sides []events.Side) []string {
	var m []string
	for _, s := range sides {
		m = append(m, s.Members...)
	}
	slices.Sort(m)
	return m
}

func prefixed(p string, lo, hi int) []string {
	var out []string
	for i := lo; i < hi; i++ {
		out = append(out, p+strconv.Itoa(i))
	}
	slices.Sort(out)
	return out
}

// TestEndToEnd: the daemon with its embedded NATS server, fed 10^5 events
// of the planted stream through shoal publish, applies every event, keeps
// exactly the graph that folding the input by hand gives, and publishes
// the planted lifecycle events on shoal.events.<graph>.<type>, each once.
func TestEndToEnd(t *testing.T) {
	perHour := 25000 // 4 hours: 10^5 events
	if testing.Short() {
		perHour = 5000
	}
	lines, want, _ := plantedStream(perHour, 11)
	dir := t.TempDir()
	file := filepath.Join(dir, "planted.jsonl")
	if err := os.WriteFile(file, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	data := filepath.Join(dir, "data")
	d := startDaemon(t, data, nil, "--graph", "planted", "--nats-listen", "127.0.0.1:0", "--snapshot-every", "1h", "--members")
	_, errs, code := runBin(t, "", "publish", file, "--nats", d.nats, "--graph", "planted", "--lines-per-message", "1")
	if code != 0 {
		t.Fatalf("publish: exit %d: %s", code, errs)
	}
	if !strings.Contains(errs, "published "+strconv.Itoa(len(lines))+" messages") {
		t.Fatalf("publish summary: %q", errs)
	}
	st := d.waitApplied(uint64(len(lines)))
	if st.EventsApplied != uint64(len(lines)) || st.EventsRejected != 0 {
		t.Fatalf("events applied %d rejected %d, want %d and 0", st.EventsApplied, st.EventsRejected, len(lines))
	}
	if st.Snapshots != 4 {
		t.Fatalf("%d snapshots, want 4 (hours 0..3)", st.Snapshots)
	}
	// shoal query stats --json prints the fields the issue names.
	out, errs, code := runBin(t, "", "query", "stats", "--http", d.http, "--json")
	if code != 0 {
		t.Fatalf("query stats: exit %d: %s", code, errs)
	}
	var q map[string]any
	if err := json.Unmarshal([]byte(out), &q); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"nodes", "edges", "total_weight", "applied_seq", "events_applied", "events_rejected", "watermark", "modularity", "communities"} {
		if _, ok := q[k]; !ok {
			t.Errorf("query stats lacks %q", k)
		}
	}
	if q["events_applied"].(float64) != float64(len(lines)) || q["edges"].(float64) != float64(len(want)) {
		t.Errorf("query stats: events_applied %v, edges %v; want %d, %d", q["events_applied"], q["edges"], len(lines), len(want))
	}
	if q["watermark"] != "2026-01-01T04:00:00Z" {
		t.Errorf("watermark %v, want the last event's time 2026-01-01T04:00:00Z", q["watermark"])
	}
	// Events on the events stream (the outbox drains after each snapshot).
	js := jsConnect(t, d.nats)
	var msgs []eventMsg
	deadline := time.Now().Add(30 * time.Second)
	for {
		msgs = readEventStream(t, js, "SHOAL_EVENTS_planted")
		if len(msgs) > 0 && msgs[len(msgs)-1].ev.ToSnapshot == 4 || time.Now().After(deadline) {
			break
		}
		time.Sleep(20 * time.Millisecond) // polling interval
	}
	checkOnce(t, msgs)
	byStep := map[uint64][]events.Event{}
	for _, m := range msgs {
		if m.subject != "shoal.events.planted."+string(m.ev.Type) {
			t.Errorf("event %s on subject %s", m.ev.Type, m.subject)
		}
		byStep[m.ev.ToSnapshot] = append(byStep[m.ev.ToSnapshot], m.ev)
	}
	only := func(step uint64, typ events.Type) events.Event {
		t.Helper()
		var found []events.Event
		for _, e := range byStep[step] {
			if e.Type == typ {
				found = append(found, e)
			}
		}
		if len(found) != 1 {
			t.Fatalf("snapshot %d: %d %s events, want 1 (%v)", step, len(found), typ, byStep[step])
		}
		return found[0]
	}
	none := func(step uint64, typ events.Type) {
		t.Helper()
		for _, e := range byStep[step] {
			if e.Type == typ {
				t.Errorf("snapshot %d: unexpected %s %v -> %v", step, typ, members(e.Before), members(e.After))
			}
		}
	}
	merge := only(2, events.Merge)
	if got, w := members(merge.After), slices.Concat(prefixed("a", 0, 20), prefixed("b", 0, 20)); !slices.Equal(got, slices.Sorted(slices.Values(w))) {
		t.Errorf("merge made %v, want A and B", got)
	}
	if len(merge.Before) != 2 || merge.Before[0].Size != 20 || merge.Before[1].Size != 20 {
		t.Errorf("merge of %v, want two groups of 20", merge.Before)
	}
	none(2, events.Split)
	split := only(3, events.Split)
	if got := members(split.Before); !slices.Equal(got, prefixed("c", 0, 30)) {
		t.Errorf("split of %v, want C", got)
	}
	if len(split.After) != 2 || split.After[0].Size != 15 || split.After[1].Size != 15 {
		t.Errorf("split into %v, want the halves of C", split.After)
	}
	none(3, events.Merge)
	if got := members(only(4, events.Death).Before); !slices.Equal(got, prefixed("d", 0, 20)) {
		t.Errorf("death of %v, want D", got)
	}
	if got := members(only(4, events.Birth).After); !slices.Equal(got, prefixed("e", 0, 20)) {
		t.Errorf("birth of %v, want E", got)
	}
	none(4, events.Merge)
	none(4, events.Split)

	d.stop()
	compareEdges(t, exportEdgeMap(t, data), want, 0)
}

type eventMsg struct {
	subject, id string
	ev          events.Event
}

func readEventStream(t testing.TB, js jetstream.JetStream, name string) []eventMsg {
	t.Helper()
	var out []eventMsg
	for _, m := range streamMessages(t, js, name) {
		var e events.Event
		if err := json.Unmarshal(m.Data(), &e); err != nil {
			t.Fatalf("event message %q: %v", m.Data(), err)
		}
		out = append(out, eventMsg{subject: m.Subject(), id: m.Headers().Get("Nats-Msg-Id"), ev: e})
	}
	return out
}

// checkOnce: every event message carries its event id as message id and
// no event is on the stream twice.
func checkOnce(t testing.TB, msgs []eventMsg) {
	t.Helper()
	seen := map[string]bool{}
	for _, m := range msgs {
		if m.id != m.ev.ID {
			t.Errorf("message id %q for event %q", m.id, m.ev.ID)
		}
		if seen[m.ev.ID] {
			t.Errorf("event %s (%s, snapshot %d) published twice", m.ev.ID, m.ev.Type, m.ev.ToSnapshot)
		}
		seen[m.ev.ID] = true
	}
}

// randomStream is invented data: n events of all four ops over k nodes,
// one second apart, and the hand fold of them.
func randomStream(n, k int, seed uint64) ([]string, fold) {
	rng := rand.New(rand.NewPCG(seed, 2))
	f := fold{}
	var lines []string
	ts := int64(1_767_225_600_000)
	id := func() string { return "n" + strconv.Itoa(rng.IntN(k)) }
	for range n {
		ts += 1000
		e := ev{Src: id(), Dst: id(), TS: ts}
		switch p := rng.IntN(100); {
		case p < 75:
			e.Op = "add"
			if rng.IntN(2) == 0 {
				e.W = wp(float64(1 + rng.IntN(4)))
			}
		case p < 85:
			e.Op = "remove"
			if rng.IntN(2) == 0 {
				e.W = wp(1)
			}
		case p < 97:
			e.Op = "set"
			e.W = wp(float64(rng.IntN(3)))
		default:
			e.Op, e.Dst = "node-remove", ""
		}
		f.apply(e)
		lines = append(lines, e.line())
	}
	return lines, f
}

// TestCrash: the daemon is killed with SIGKILL at seven points, four of
// them failpoints inside the protocol (before a commit, between commit and
// ack, while a snapshot sits in an uncommitted batch, after events were
// published and before the outbox cursor moved) and three at random
// moments; it is restarted each time. At the end the store is exactly the
// fold of the input, every event was applied once, and every lifecycle
// event in the store is on the events stream exactly once.
func TestCrash(t *testing.T) {
	n := 30000
	if testing.Short() {
		n = 8000
	}
	lines, want := randomStream(n, 400, 21)
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	last := publishLines(t, js, "crash", lines)
	data := filepath.Join(t.TempDir(), "data")
	args := []string{"--nats", ts.url(), "--graph", "crash", "--max-batch", "200", "--apply-every", "500",
		"--snapshot-every", "20m", "--snapshot-keep", "1000"}
	for _, fp := range []string{"batch-before-commit:7", "batch-after-commit:5", "snapshot-written:2", "events-before-mark:1"} {
		d := startDaemon(t, data, []string{"SHOAL_CRASH_AT=" + fp}, args...)
		if code := d.waitExit(60 * time.Second); code != -int(syscall.SIGKILL) {
			t.Fatalf("failpoint %s: exit %d, want death by SIGKILL", fp, code)
		}
	}
	rng := rand.New(rand.NewPCG(5, 5))
	for range 3 {
		d := startDaemon(t, data, nil, args...)
		s, err := d.stats()
		if err != nil {
			t.Fatal(err)
		}
		target := s.AppliedSeq + uint64(500+rng.IntN(n/8))
		deadline := time.Now().Add(60 * time.Second)
		for s.AppliedSeq < target && s.AppliedSeq < last && time.Now().Before(deadline) {
			s, _ = d.stats()
		}
		d.kill()
	}
	d := startDaemon(t, data, nil, args...)
	st := d.waitApplied(last)
	if st.EventsApplied != uint64(n) || st.EventsRejected != 0 {
		t.Fatalf("after the crashes: %d events applied, %d rejected; want %d, 0", st.EventsApplied, st.EventsRejected, n)
	}
	// Let the outbox drain, then stop.
	storedEvents := func() int {
		out, _, _ := runBin(t, "", "export", "events", "--data", data)
		return strings.Count(out, "\n")
	}
	d.stop()
	stored := storedEvents()
	if stored == 0 {
		t.Fatal("no lifecycle event stored: the stream plants none?")
	}
	msgs := readEventStream(t, js, "SHOAL_EVENTS_crash")
	if len(msgs) != stored {
		// The stop drains the outbox within 5s; a restart would send the rest.
		d = startDaemon(t, data, nil, args...)
		deadline := time.Now().Add(30 * time.Second)
		for len(msgs) < stored && time.Now().Before(deadline) {
			time.Sleep(20 * time.Millisecond) // polling interval
			msgs = readEventStream(t, js, "SHOAL_EVENTS_crash")
		}
		d.stop()
	}
	checkOnce(t, msgs)
	out, _, _ := runBin(t, "", "export", "events", "--data", data)
	onStream := map[string]bool{}
	for _, m := range msgs {
		onStream[m.ev.ID] = true
	}
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		var e events.Event
		if err := json.Unmarshal([]byte(line), &e); err != nil {
			t.Fatal(err)
		}
		if !onStream[e.ID] {
			t.Errorf("stored event %s (%s, snapshot %d) was never published", e.ID, e.Type, e.ToSnapshot)
		}
	}
	if len(msgs) != stored {
		t.Fatalf("%d events on the stream, %d stored", len(msgs), stored)
	}
	compareEdges(t, exportEdgeMap(t, data), want, 0)
}

// TestBrokerOutage: the NATS server goes away mid-stream and comes back on
// the same port with its JetStream store; /readyz says so in between; the
// daemon resumes and nothing is lost or doubled.
func TestBrokerOutage(t *testing.T) {
	lines, want := randomStream(20000, 300, 31)
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	half := publishLines(t, js, "out", lines[:10000])
	data := filepath.Join(t.TempDir(), "data")
	d := startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "out", "--max-batch", "100")
	deadline := time.Now().Add(60 * time.Second)
	for s, _ := d.stats(); s.AppliedSeq < half/3 && time.Now().Before(deadline); s, _ = d.stats() {
	}
	ts.shutdown()
	waitReady(t, d, http.StatusServiceUnavailable)
	ts.start()
	waitReady(t, d, http.StatusOK)
	last := publishLines(t, js, "out", lines[10000:])
	st := d.waitApplied(last)
	if st.EventsApplied != uint64(len(lines)) {
		t.Fatalf("%d events applied, want %d", st.EventsApplied, len(lines))
	}
	d.stop()
	compareEdges(t, exportEdgeMap(t, data), want, 0)
}

func waitReady(t *testing.T, d *daemonProc, code int) {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for {
		resp, err := http.Get("http://" + d.http + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == code {
				return
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("/readyz never answered %d", code)
		}
		time.Sleep(10 * time.Millisecond) // polling interval
	}
}

// badMessages is one message per kind of bad input (27 kinds), with the
// reject code it must get: the decode sentinels of ingest/errors.go and
// the event model of the ingest doc.go, plus the empty message.
var badMessages = []struct{ msg, code string }{
	{`{"op":"add","src":"a","dst":"b"`, "syntax"},
	{`{"op":"add","src":"a","dst":"b"} x`, "syntax"},
	{`{"op":"add","src":"a","src":"c","dst":"b"}`, "syntax"},
	{`{"op":"add","src":1,"dst":"b"}`, "syntax"},
	{`{"op":"add","src":"a","dst":"b",}`, "syntax"},
	{`{"op":"add","src":"a","dst":"b","w":"3"}`, "bad_weight"},
	{`{"op":"merge","src":"a","dst":"b"}`, "unknown_op"},
	{`{"op":"add","src":"a","dst":"b","weight":3}`, "unknown_field"},
	{`{"op":"node-remove","src":"a","dst":"b"}`, "unknown_field"},
	{`{"op":"add","dst":"b"}`, "missing_field"},
	{`{"op":"add","src":"a"}`, "missing_field"},
	{`{"op":"set","src":"a","dst":"b"}`, "missing_field"},
	{`{"op":"add","src":"","dst":"b"}`, "empty_id"},
	{`{"op":"add","src":"` + strings.Repeat("y", 300) + `","dst":"b"}`, "id_too_long"},
	{`{"op":"add","src":"a","dst":"b","w":-2}`, "bad_weight"},
	{`{"op":"add","src":"a","dst":"b","w":0}`, "bad_weight"},
	{`{"op":"add","src":"a","dst":"b","w":1e999}`, "bad_weight"},
	{`{"op":"set","src":"a","dst":"b","w":-1}`, "bad_weight"},
	{`{"op":"node-remove","src":"a","w":1}`, "bad_weight"},
	{`{"op":"add","src":"a","dst":"b","ts":"noon"}`, "bad_time"},
	{`{"op":"add","src":"a","dst":"b","ts":"2026-13-01T00:00:00Z"}`, "bad_time"},
	{"{\"op\":\"add\",\"src\":\"\xc3\x28\",\"dst\":\"b\"}", "bad_encoding"},
	{`{"op":"add","src":"a\u0001","dst":"b"}`, "bad_encoding"},
	{"a b NaN", "bad_weight"},
	{"a b c d e", "syntax"},
	{"a b 1 soon", "bad_time"},
	{"", "empty_message"},
}

// TestBadInput: each kind of bad message, mixed into a good stream, lands
// on shoal.rejects.<graph> with its original bytes, its stream sequence and
// the right code; the good events are all applied; events_applied and
// events_rejected in /v1/stats match the corpus exactly.
func TestBadInput(t *testing.T) {
	good, want := randomStream(3000, 100, 41)
	var msgs []string
	badSeq := map[uint64]int{}
	for i, g := range good {
		msgs = append(msgs, g)
		if i%100 == 50 && len(badSeq) < len(badMessages) {
			badSeq[uint64(len(msgs)+1)] = len(badSeq)
			msgs = append(msgs, badMessages[len(badSeq)-1].msg)
		}
	}
	if len(badSeq) != len(badMessages) {
		t.Fatalf("placed %d of %d bad messages", len(badSeq), len(badMessages))
	}
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	last := publishLines(t, js, "bad", msgs)
	data := filepath.Join(t.TempDir(), "data")
	d := startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "bad")
	st := d.waitApplied(last)
	if st.EventsApplied != uint64(len(good)) || st.EventsRejected != uint64(len(badMessages)) {
		t.Fatalf("stats: %d applied, %d rejected; want %d, %d", st.EventsApplied, st.EventsRejected, len(good), len(badMessages))
	}
	var rejects []jetstream.Msg
	deadline := time.Now().Add(30 * time.Second)
	for len(rejects) < len(badMessages) && time.Now().Before(deadline) {
		if _, err := js.Stream(t.Context(), "SHOAL_REJECTS_bad"); err == nil {
			rejects = streamMessages(t, js, "SHOAL_REJECTS_bad")
		}
		time.Sleep(20 * time.Millisecond) // polling interval
	}
	if len(rejects) != len(badMessages) {
		t.Fatalf("%d rejects on the stream, want %d", len(rejects), len(badMessages))
	}
	for _, m := range rejects {
		h := m.Headers()
		seq, _ := strconv.ParseUint(h.Get("Shoal-Stream-Seq"), 10, 64)
		i, ok := badSeq[seq]
		if !ok {
			t.Fatalf("reject for stream seq %d, a good message", seq)
		}
		b := badMessages[i]
		if h.Get("Shoal-Reject-Code") != b.code || string(m.Data()) != b.msg || h.Get("Shoal-Reason") == "" {
			t.Errorf("%q: code %q body %q reason %q; want code %q and the bytes as sent",
				b.msg, h.Get("Shoal-Reject-Code"), m.Data(), h.Get("Shoal-Reason"), b.code)
		}
		delete(badSeq, seq)
	}
	d.stop()
	compareEdges(t, exportEdgeMap(t, data), want, 0)
}

// windowStream is invented data: four groups of 25 nodes, events half a
// second apart for about 2.8 hours; from half way on, group g3 links to g0
// instead of itself. The first event, x1-x2, is never repeated: a 30
// minute window drops it.
func windowStream(n int) []ev {
	rng := rand.New(rand.NewPCG(51, 3))
	t0 := int64(1_767_225_600_000)
	out := []ev{{Op: "add", Src: "x1", Dst: "x2", W: wp(5), TS: t0}}
	for i := 1; i < n; i++ {
		ts := t0 + int64(i)*500
		g := rng.IntN(4)
		h := g
		if rng.IntN(10) == 0 {
			h = rng.IntN(4)
		}
		if g == 3 && i > n/2 {
			h = 0
		}
		e := ev{Op: "add", Src: "g" + strconv.Itoa(g) + "-" + strconv.Itoa(rng.IntN(25)), Dst: "g" + strconv.Itoa(h) + "-" + strconv.Itoa(rng.IntN(25)), TS: ts}
		if rng.IntN(3) == 0 {
			e.W = wp(float64(1 + rng.IntN(3)))
		}
		out = append(out, e)
	}
	return out
}

// TestWindowReplay: with a 30 minute window, the edge whose only increment
// fell out of the window is gone from the graph, from the edges and from
// the increments in the store, and every other edge weighs the sum of its
// adds inside the window (a brute-force fold here). shoal replay --window
// of the same file, with the same chunking, gives the same lifecycle
// events byte for byte, and so the same final partition.
func TestWindowReplay(t *testing.T) {
	evs := windowStream(20000)
	var lines []string
	for _, e := range evs {
		lines = append(lines, e.line())
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "window.jsonl")
	if err := os.WriteFile(file, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	last := publishLines(t, js, "w", lines)
	data := filepath.Join(dir, "data")
	common := []string{"--window", "30m", "--apply-every", "500", "--min-size", "1", "--members", "--graph", "w"}
	d := startDaemon(t, data, nil, append([]string{"--nats", ts.url(), "--snapshot-every", "20m", "--snapshot-on-exit", "--idle-apply", "1m"}, common...)...)
	d.waitApplied(last)
	d.stop()

	// Brute force: an add at ts counts while ts + 30m is after the
	// watermark (the last time).
	wm := evs[len(evs)-1].TS
	want := fold{}
	live := 0
	for _, e := range evs {
		if e.TS+30*60_000 > wm {
			w := 1.0
			if e.W != nil {
				w = *e.W
			}
			want[namePair(e.Src, e.Dst)] += w
			live++
		}
	}
	got := exportEdgeMap(t, data)
	if _, ok := got[namePair("x1", "x2")]; ok {
		t.Fatal("x1-x2 is still in the store after its increment expired")
	}
	compareEdges(t, got, want, 1e-9)
	s, err := ingest.OpenStore(ingest.StoreDir(data), &ingest.StoreOptions{ReadOnly: true, AnyWindow: true, AnyKey: true})
	if err != nil {
		t.Fatal(err)
	}
	incs := 0
	err = s.Increments(func(inc ingest.Increment) error {
		incs++
		if inc.Expiry <= wm {
			return fmt.Errorf("increment expiring at %d kept past the watermark %d", inc.Expiry, wm)
		}
		return nil
	})
	s.Close()
	if err != nil {
		t.Fatal(err)
	}
	if incs != live {
		t.Fatalf("%d increments stored, %d adds inside the window", incs, live)
	}
	snapTSV, _, code := runBin(t, "", "export", "snapshot", "latest", "--data", data)
	if code != 0 {
		t.Fatal("export snapshot latest failed")
	}
	if strings.Contains(snapTSV, "\tx1\n") || strings.Contains(snapTSV, "\tx2\n") {
		t.Fatal("x1 or x2 still has a community in the final snapshot")
	}

	out, errs, code := runBin(t, "", append([]string{"replay", file, "--every", "20m"}, common...)...)
	if code != 0 {
		t.Fatalf("replay: exit %d: %s", code, errs)
	}
	daemonEvents, _, _ := runBin(t, "", "export", "events", "--data", data)
	rl, dl := strings.Split(strings.TrimSpace(out), "\n"), strings.Split(strings.TrimSpace(daemonEvents), "\n")
	if len(rl) < 20 {
		t.Fatalf("replay gave %d events; the stream should plant more", len(rl))
	}
	if len(rl) != len(dl) {
		t.Fatalf("replay: %d events, daemon: %d", len(rl), len(dl))
	}
	for i := range rl {
		if rl[i] != dl[i] {
			t.Fatalf("event %d differs:\nreplay %s\ndaemon %s", i, rl[i], dl[i])
		}
	}
	// The final partition: the daemon's last snapshot against the after
	// sides of replay's last step (with --min-size 1 every community of a
	// snapshot is in exactly one event's after side).
	final := map[string]string{}
	for _, line := range strings.Split(snapTSV, "\n") {
		if f := strings.Split(line, "\t"); len(f) == 2 && !strings.HasPrefix(line, "#") {
			final[f[1]] = f[0]
		}
	}
	var lastStep uint64
	rep := map[string]string{}
	for _, l := range rl {
		var e events.Event
		json.Unmarshal([]byte(l), &e)
		lastStep = max(lastStep, e.ToSnapshot)
	}
	for _, l := range rl {
		var e events.Event
		json.Unmarshal([]byte(l), &e)
		if e.ToSnapshot != lastStep {
			continue
		}
		for _, a := range e.After {
			for _, m := range a.Members {
				rep[m] = strconv.FormatUint(a.Community, 10)
			}
		}
	}
	if len(final) == 0 || len(final) != len(rep) {
		t.Fatalf("final partition: daemon %d nodes, replay %d", len(final), len(rep))
	}
	for n, c := range final {
		if rep[n] != c {
			t.Fatalf("node %s: daemon community %s, replay %s", n, c, rep[n])
		}
	}
}
