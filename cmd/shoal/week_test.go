package main

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"shoal/events"
)

// week is an invented scenario of payments over seven days of event time
// (nothing in it describes real people): 15 groups of 10 accounts that pay
// within their group every day, with a little noise across groups, and,
// planted:
//
//	day 1  a ring of 12 new accounts forms and pays heavily within itself
//	day 2  groups g01 and g02 start to trade as one (heavy payments across)
//	day 3  group g03 takes in 5 new accounts; group g04 parts into two
//	       halves (the payments across the halves are reversed: removes)
//	day 4  group g05 leaves: its accounts are removed (node-remove)
//
// The noise never goes to g04 or g05, so that the planted facts are the
// only reading of the data.
//
// With a snapshot at every day boundary, snapshot k holds days 0..k-1, so
// the ring is born in the events to snapshot 2, the merge is in those to
// 3, the growth and the split in those to 4 and the death in those to 5.
type week struct {
	lines []string // JSON lines, in time order
	t0    time.Time
	ring  []string
	group func(g int) []string
	newG3 []string
	halfA []string // g04's first half
	halfB []string
}

func makeWeek(seed uint64) *week {
	r := rand.New(rand.NewPCG(seed, 7))
	w := &week{t0: time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)}
	acct := func(g, i int) string { return fmt.Sprintf("acct-g%02d-%02d", g, i) }
	w.group = func(g int) []string {
		var out []string
		for i := 1; i <= 10; i++ {
			out = append(out, acct(g, i))
		}
		return out
	}
	for i := 1; i <= 12; i++ {
		w.ring = append(w.ring, fmt.Sprintf("ring-%02d", i))
	}
	for i := 1; i <= 5; i++ {
		w.newG3 = append(w.newG3, fmt.Sprintf("acct-g03-new%d", i))
	}
	w.halfA, w.halfB = w.group(4)[:5], w.group(4)[5:]
	type line struct {
		ms  int64
		txt string
	}
	var out []line
	at := func(day int) int64 {
		// A random time in the day, to the second.
		return w.t0.Add(time.Duration(day)*24*time.Hour + time.Duration(r.IntN(86400))*time.Second).UnixMilli()
	}
	emit := func(ms int64, op, a, b string, wt float64) {
		var txt string
		ts := time.UnixMilli(ms).UTC().Format(time.RFC3339)
		switch op {
		case "add":
			txt = fmt.Sprintf(`{"op":"add","src":%q,"dst":%q,"w":%g,"ts":%q}`, a, b, wt, ts)
		case "remove":
			txt = fmt.Sprintf(`{"op":"remove","src":%q,"dst":%q,"ts":%q}`, a, b, ts)
		case "node-remove":
			txt = fmt.Sprintf(`{"op":"node-remove","src":%q,"ts":%q}`, a, ts)
		}
		out = append(out, line{ms, txt})
	}
	pick := func(set []string) (string, string) {
		i := r.IntN(len(set))
		j := r.IntN(len(set) - 1)
		if j >= i {
			j++
		}
		return set[i], set[j]
	}
	for day := range 7 {
		for g := 1; g <= 15; g++ {
			if g == 5 && day >= 4 {
				continue // gone
			}
			members := w.group(g)
			if g == 3 && day >= 3 {
				members = append(members, w.newG3...)
			}
			if day == 0 {
				// A cycle first, so every group is connected from the start.
				for i := range members {
					emit(at(0), "add", members[i], members[(i+1)%len(members)], 1)
				}
			}
			for range 25 {
				a, b := pick(members)
				if g == 4 && day >= 3 {
					half := w.halfA
					if r.IntN(2) == 1 {
						half = w.halfB
					}
					a, b = pick(half)
				}
				emit(at(day), "add", a, b, 1)
			}
			// Noise: one payment a day to another group (never to g04,
			// whose halves must stay apart once it parts, nor to g05).
			o := 1 + r.IntN(15)
			if o != g && o != 4 && o != 5 {
				emit(at(day), "add", members[r.IntN(10)], w.group(o)[r.IntN(10)], 1)
			}
		}
		switch day {
		case 1:
			for range 80 {
				a, b := pick(w.ring)
				emit(at(1), "add", a, b, 1)
			}
		case 2:
			for range 60 {
				emit(at(2), "add", w.group(1)[r.IntN(10)], w.group(2)[r.IntN(10)], 2)
			}
		case 3:
			for _, n := range w.newG3 {
				for _, m := range w.group(3)[:6] {
					emit(at(3), "add", n, m, 1)
				}
			}
			ms := w.t0.Add(3 * 24 * time.Hour).UnixMilli()
			for _, a := range w.halfA {
				for _, b := range w.halfB {
					emit(ms, "remove", a, b, 0)
				}
			}
		case 4:
			ms := w.t0.Add(4*24*time.Hour + time.Hour).UnixMilli()
			for _, a := range w.group(5) {
				emit(ms, "node-remove", a, "", 0)
			}
		}
	}
	slices.SortStableFunc(out, func(a, b line) int {
		switch {
		case a.ms < b.ms:
			return -1
		case a.ms > b.ms:
			return 1
		}
		return 0
	})
	for _, l := range out {
		w.lines = append(w.lines, l.txt)
	}
	return w
}

func (w *week) write(t *testing.T, dir string) string {
	t.Helper()
	path := filepath.Join(dir, "week.jsonl")
	if err := os.WriteFile(path, []byte(strings.Join(w.lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func sortedNames(s ...[]string) []string {
	out := slices.Concat(s...)
	slices.Sort(out)
	return out
}

func sideMembers(sides []events.Side) [][]string {
	var out [][]string
	for _, s := range sides {
		out = append(out, sortedNames(s.Members))
	}
	slices.SortFunc(out, func(a, b []string) int { return strings.Compare(a[0], b[0]) })
	return out
}

// planted checks the five planted changes of the week among evs (daily
// snapshots) and returns the other non-continue events.
func (w *week) planted(t *testing.T, evs []events.Event) []string {
	t.Helper()
	type want struct {
		to            uint64
		typ           events.Type
		before, after [][]string
	}
	g := w.group
	wants := []want{
		{2, events.Birth, nil, [][]string{sortedNames(w.ring)}},
		{3, events.Merge, [][]string{sortedNames(g(1)), sortedNames(g(2))}, [][]string{sortedNames(g(1), g(2))}},
		{4, events.Grow, [][]string{sortedNames(g(3))}, [][]string{sortedNames(g(3), w.newG3)}},
		{4, events.Split, [][]string{sortedNames(g(4))}, [][]string{sortedNames(w.halfA), sortedNames(w.halfB)}},
		{5, events.Death, [][]string{sortedNames(g(5))}, nil},
	}
	found := make([]bool, len(wants))
	var other []string
	for _, ev := range evs {
		if ev.Type == events.Continue {
			continue
		}
		hit := false
		for i, wn := range wants {
			if !found[i] && ev.ToSnapshot == wn.to && ev.Type == wn.typ &&
				slices.EqualFunc(sideMembers(ev.Before), wn.before, slices.Equal) &&
				slices.EqualFunc(sideMembers(ev.After), wn.after, slices.Equal) {
				found[i], hit = true, true
				break
			}
		}
		if !hit {
			other = append(other, fmt.Sprintf("%d:%s %v -> %v", ev.ToSnapshot, ev.Type, sideMembers(ev.Before), sideMembers(ev.After)))
		}
	}
	for i, f := range found {
		if !f {
			t.Errorf("planted %s to snapshot %d not reported with the planted members", wants[i].typ, wants[i].to)
		}
	}
	return other
}

// TestReplayWeek: the week replayed with daily snapshots gives every
// planted change with the right members and at most two other
// non-continue events, whatever --apply-every is, and the same snapshot
// times (the day boundaries, and the end) and the same graph at each
// snapshot.
func TestReplayWeek(t *testing.T) {
	w := makeWeek(1)
	dir := t.TempDir()
	file := w.write(t, dir)
	var ref []snapshotLine
	for _, every := range []string{"1", "50", "1000", "100000"} {
		snaps, evOut := filepath.Join(dir, "s"+every), filepath.Join(dir, "e"+every)
		_, errs, code := runIn(t, "", "replay", file, "--every", "24h", "--apply-every", every, "--members",
			"--snapshots-out", snaps, "--events-out", evOut)
		if code != 0 {
			t.Fatalf("--apply-every %s: exit %d: %s", every, code, errs)
		}
		data, err := os.ReadFile(evOut)
		if err != nil {
			t.Fatal(err)
		}
		if other := w.planted(t, parseEvents(t, string(data))); len(other) > 2 {
			t.Errorf("--apply-every %s: %d other non-continue events: %v", every, len(other), other)
		}
		ss := readSnapshots(t, snaps)
		if len(ss) != 7 {
			t.Fatalf("--apply-every %s: %d snapshots, want 7 (six day boundaries and the end)", every, len(ss))
		}
		for k, s := range ss[:6] {
			if want := w.t0.Add(time.Duration(k+1) * 24 * time.Hour).Format(time.RFC3339); s.Time != want {
				t.Errorf("--apply-every %s: snapshot %d at %s, want the day boundary %s", every, s.ID, s.Time, want)
			}
		}
		if ref == nil {
			ref = ss
			continue
		}
		for k := range ss {
			a, b := ref[k], ss[k]
			if a.Time != b.Time || a.Seq != b.Seq || a.Nodes != b.Nodes || a.Edges != b.Edges || a.TotalWeight != b.TotalWeight {
				t.Errorf("--apply-every %s: snapshot %d is %s/%d events/%d nodes/%d edges/%v, with 1: %s/%d/%d/%d/%v",
					every, b.ID, b.Time, b.Seq, b.Nodes, b.Edges, b.TotalWeight, a.Time, a.Seq, a.Nodes, a.Edges, a.TotalWeight)
			}
		}
	}
}

// TestDaemonWeek: the daemon with its default snapshot schedule (every
// hour of event time: no snapshot flag given) on the week, published
// before it starts, takes the hourly snapshots and the same events as
// shoal replay --every 1h on the same ordered input. With the default
// --snapshot-keep of 48 the snapshot of the ring's birth is long gone at
// the end; the history still says when the ring was born, what the merged
// group came from, and since when a ring account has been in it.
func TestDaemonWeek(t *testing.T) {
	w := makeWeek(2)
	dir := t.TempDir()
	file := w.write(t, dir)
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	last := publishLines(t, js, "pay", w.lines)
	data := filepath.Join(dir, "data")
	d := startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "pay", "--members")
	d.waitApplied(last)
	d.stop()
	logs, _ := os.ReadFile(d.stderr)
	if !strings.Contains(string(logs), `"schedule":"every 1h0m0s"`) {
		t.Errorf("the daemon did not log its hourly schedule:\n%s", logs)
	}

	out, errs, code := runBin(t, "", "replay", file, "--every", "1h", "--members", "--graph", "pay")
	if code != 0 {
		t.Fatalf("replay: exit %d: %s", code, errs)
	}
	daemonEvents, errs, code := runBin(t, "", "export", "events", "--data", data)
	if code != 0 {
		t.Fatalf("export events: exit %d: %s", code, errs)
	}
	rep, dae := parseEvents(t, out), parseEvents(t, daemonEvents)
	// Replay takes one more snapshot at the end of the file; the daemon
	// takes none at shutdown without --snapshot-on-exit.
	var lastSnap uint64
	for _, ev := range dae {
		lastSnap = max(lastSnap, ev.ToSnapshot)
	}
	var repUpTo []events.Event
	for _, ev := range rep {
		if ev.ToSnapshot <= lastSnap {
			repUpTo = append(repUpTo, ev)
		}
	}
	// 7 days of hourly boundaries, the last event late on day 6.
	if lastSnap < 150 || len(repUpTo) != len(dae) {
		t.Fatalf("daemon: %d events up to snapshot %d; replay: %d up to it", len(dae), lastSnap, len(repUpTo))
	}
	for i := range dae {
		a, _ := json.Marshal(repUpTo[i])
		b, _ := json.Marshal(dae[i])
		if string(a) != string(b) {
			t.Fatalf("event %d differs:\nreplay %s\ndaemon %s", i, a, b)
		}
	}

	snaps, _, _ := runBin(t, "", "export", "snapshots", "--data", data, "--json")
	if n := strings.Count(snaps, "\n"); n != 48 {
		t.Errorf("%d snapshots kept, want the default 48", n)
	}
	hist, errs, code := runBin(t, "", "export", "history", "--data", data)
	if code != 0 {
		t.Fatalf("export history: exit %d: %s", code, errs)
	}
	var ringID uint64
	var ring struct {
		Born     uint64   `json:"born"`
		BornMs   int64    `json:"born_ms"`
		From     []uint64 `json:"from"`
		Snapshot uint64
	}
	comms := map[uint64]events.CommunityRecord{}
	nodes := map[string]events.NodeRecord{}
	for _, line := range strings.Split(strings.TrimSpace(hist), "\n") {
		var k struct {
			Kind string `json:"kind"`
			Node string `json:"node"`
		}
		json.Unmarshal([]byte(line), &k)
		switch k.Kind {
		case "community":
			var c events.CommunityRecord
			if err := json.Unmarshal([]byte(line), &c); err != nil {
				t.Fatal(err)
			}
			comms[c.ID] = c
		case "node":
			var n events.NodeRecord
			if err := json.Unmarshal([]byte(line), &n); err != nil {
				t.Fatal(err)
			}
			nodes[k.Node] = n
		}
	}
	// The ring's birth, from the events (replay's, whose snapshots are
	// all there), against the history's record.
	// With hourly snapshots the ring is born as soon as three of its
	// accounts are linked and grows from there: its birth is the first
	// birth of a community of ring accounts only.
	for _, ev := range rep {
		if ringID == 0 && ev.Type == events.Birth && !slices.ContainsFunc(ev.After[0].Members, func(m string) bool { return !strings.HasPrefix(m, "ring-") }) {
			ringID, ring.Snapshot = ev.After[0].Community, ev.ToSnapshot
			born, _ := time.Parse(time.RFC3339, ev.ToTime)
			ring.BornMs = born.UnixMilli()
		}
	}
	if ringID == 0 {
		t.Fatal("replay reported no birth of the ring")
	}
	rec, ok := comms[ringID]
	if !ok || rec.Born != ring.Snapshot || rec.BornTime != ring.BornMs {
		t.Fatalf("history of the ring %d: %+v; want born at snapshot %d (%d)", ringID, rec, ring.Snapshot, ring.BornMs)
	}
	// Planted: the ring forms on day 1, so its birth is an hour boundary
	// of day 1 (its first snapshot with three ring accounts linked).
	if day := time.UnixMilli(rec.BornTime).UTC().Sub(w.t0); day <= 24*time.Hour || day > 48*time.Hour {
		t.Errorf("the ring was born %v after the start, not on day 1", day)
	}
	if n := nodes["ring-01"]; n.Community != ringID || n.SinceTime < rec.BornTime || n.SinceTime > w.t0.Add(48*time.Hour).UnixMilli() {
		t.Errorf("ring-01: %+v; want in %d since day 1", n, ringID)
	}
	// The merged group came from g01's and g02's communities.
	c1, c2 := nodes["acct-g01-01"].Community, nodes["acct-g02-01"].Community
	if c1 == 0 || c1 != c2 {
		t.Fatalf("g01 and g02 are in %d and %d at the end, want one community", c1, c2)
	}
	// The planted merge, in replay's events: the communities it names
	// before, other than the one that kept its id, are where the merged
	// community came from.
	var from []uint64
	for _, ev := range rep {
		if ev.Type != events.Merge || from != nil {
			continue
		}
		am := ev.After[0].Members
		if ev.After[0].Community == c1 && slices.Contains(am, "acct-g01-01") && slices.Contains(am, "acct-g02-01") {
			for _, b := range ev.Before {
				if b.Community != c1 {
					from = append(from, b.Community)
				}
			}
		}
	}
	if len(from) == 0 {
		t.Fatal("replay reported no merge of g01 and g02")
	}
	for _, f := range from {
		if !slices.Contains(comms[c1].From, f) {
			t.Errorf("the merged community %d came from %v; the history says from %v", c1, from, comms[c1].From)
		}
	}
}

// TestReplayWeekCPM: the same week under the CPM objective at its default
// resolution gives every planted change with the planted members and no
// other non-continue event at all (modularity gives up to two: pairs of
// small groups its resolution limit joins on the sparse first day), for
// small and large batches alike.
func TestReplayWeekCPM(t *testing.T) {
	w := makeWeek(1)
	dir := t.TempDir()
	file := w.write(t, dir)
	for _, every := range []string{"1", "1000"} {
		evOut := filepath.Join(dir, "cpm"+every)
		_, errs, code := runIn(t, "", "replay", file, "--every", "24h", "--apply-every", every, "--members",
			"--objective", "cpm", "--events-out", evOut)
		if code != 0 {
			t.Fatalf("--apply-every %s: exit %d: %s", every, code, errs)
		}
		data, err := os.ReadFile(evOut)
		if err != nil {
			t.Fatal(err)
		}
		if other := w.planted(t, parseEvents(t, string(data))); len(other) > 0 {
			t.Errorf("--apply-every %s: %d other non-continue events: %v", every, len(other), other)
		}
	}
}
