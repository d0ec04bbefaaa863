package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"shoal/events"
	"shoal/snapshot"
	"shoal/tracker/gen"
)

// parseEvents decodes JSON-lines event records.
func parseEvents(t testing.TB, out string) []events.Event {
	t.Helper()
	var evs []events.Event
	sc := bufio.NewScanner(strings.NewReader(out))
	sc.Buffer(nil, 1<<24)
	for sc.Scan() {
		var ev events.Event
		if err := json.Unmarshal(sc.Bytes(), &ev); err != nil {
			t.Fatalf("event line %q: %v", sc.Text(), err)
		}
		if ev.Schema != events.Schema {
			t.Fatalf("schema %q", ev.Schema)
		}
		evs = append(evs, ev)
	}
	return evs
}

// readSnapshots decodes a --snapshots-out file.
func readSnapshots(t testing.TB, path string) []snapshotLine {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var out []snapshotLine
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		var s snapshotLine
		if err := json.Unmarshal([]byte(line), &s); err != nil {
			t.Fatalf("snapshot line %q: %v", line, err)
		}
		out = append(out, s)
	}
	return out
}

// checkConsistent checks the events of a replay against its snapshot
// headers, by the matching rules of the events package doc:
//   - events run between consecutive snapshots and carry their times;
//   - every community of snapshot k with at least minSize members appears
//     as `after` in an event to k, and as `before` in an event from k; none
//     smaller appears at all; a community is in at most two events on a
//     side, and then one is a merge and the other a split (the many-to-many
//     case the events doc allows);
//   - the shape of each type (birth: nothing before, one after; merge: two
//     or more before; grow: larger; ...);
//   - the per-snapshot event counts of the header lines add up.
//
// With times (the event times in applied order, Unix ms) it also checks
// the schedule of replay.go: every snapshot but the last is at a boundary,
// a multiple of every since the epoch, and holds exactly the events before
// it; the snapshots are at the first boundary after each event whose
// interval is later than the previous event's (schedule).
func checkConsistent(t *testing.T, evs []events.Event, snaps []snapshotLine, minSize int, times []int64, every time.Duration, total int) {
	t.Helper()
	if len(snaps) < 2 {
		t.Fatalf("only %d snapshots", len(snaps))
	}
	var want []scheduled
	if times != nil {
		want = schedule(times, every)
		if len(want) != len(snaps)-1 {
			t.Fatalf("%d snapshots before the last, the schedule gives %d", len(snaps)-1, len(want))
		}
	}
	for i, s := range snaps {
		if s.ID != uint64(i+1) {
			t.Fatalf("snapshot %d has id %d", i+1, s.ID)
		}
		if i+1 < len(snaps) && want != nil {
			at, err := time.Parse(time.RFC3339Nano, s.Time)
			if err != nil {
				t.Fatal(err)
			}
			if at.UnixMilli() != want[i].at || int(s.Seq) != want[i].seq || s.WatermarkMs != want[i].at {
				t.Fatalf("snapshot %d at %s (watermark %s) after %d events; the schedule says at %s after %d",
					s.ID, s.Time, s.Watermark, s.Seq, snapshot.RFC3339(want[i].at), want[i].seq)
			}
		}
		if i > 0 && (s.Seq <= snaps[i-1].Seq || s.WatermarkMs < snaps[i-1].WatermarkMs) {
			t.Fatalf("snapshot %d: seq or watermark went back", s.ID)
		}
	}
	if last := snaps[len(snaps)-1]; int(last.Seq) != total {
		t.Fatalf("last snapshot at seq %d, input has %d events", last.Seq, total)
	}
	type use struct{ types []events.Type }
	after := map[uint64]map[uint64]*use{}  // to snapshot -> community -> events
	before := map[uint64]map[uint64]*use{} // from snapshot -> community -> events
	count := map[uint64]int{}
	for _, ev := range evs {
		if ev.FromSnapshot+1 != ev.ToSnapshot || ev.ToSnapshot < 2 || ev.ToSnapshot > uint64(len(snaps)) {
			t.Fatalf("event %s from %d to %d", ev.ID, ev.FromSnapshot, ev.ToSnapshot)
		}
		if ev.FromTime != snaps[ev.FromSnapshot-1].Watermark || ev.ToTime != snaps[ev.ToSnapshot-1].Watermark {
			t.Fatalf("event %s times %s..%s do not match the snapshots", ev.ID, ev.FromTime, ev.ToTime)
		}
		count[ev.ToSnapshot]++
		nb, na := len(ev.Before), len(ev.After)
		ok := false
		switch ev.Type {
		case events.Birth:
			ok = nb == 0 && na == 1 && ev.JoinedCount == ev.After[0].Size
		case events.Death:
			ok = nb == 1 && na == 0 && ev.LeftCount == ev.Before[0].Size
		case events.Merge:
			ok = nb >= 2 && na == 1
		case events.Split:
			ok = nb == 1 && na >= 2
		case events.Grow:
			ok = nb == 1 && na == 1 && ev.After[0].Size > ev.Before[0].Size
		case events.Shrink:
			ok = nb == 1 && na == 1 && ev.After[0].Size < ev.Before[0].Size
		case events.Continue:
			ok = nb == 1 && na == 1
		}
		if !ok {
			t.Fatalf("event %s of type %s has %d before and %d after communities", ev.ID, ev.Type, nb, na)
		}
		for _, sides := range []struct {
			m    map[uint64]map[uint64]*use
			snap uint64
			list []events.Side
		}{{after, ev.ToSnapshot, ev.After}, {before, ev.FromSnapshot, ev.Before}} {
			if sides.m[sides.snap] == nil {
				sides.m[sides.snap] = map[uint64]*use{}
			}
			for _, c := range sides.list {
				if c.Size < minSize {
					t.Fatalf("event %s names community %d of size %d < min size %d", ev.ID, c.Community, c.Size, minSize)
				}
				u := sides.m[sides.snap][c.Community]
				if u == nil {
					u = &use{}
					sides.m[sides.snap][c.Community] = u
				}
				u.types = append(u.types, ev.Type)
			}
		}
	}
	for k := 2; k <= len(snaps); k++ {
		s, p := snaps[k-1], snaps[k-2]
		if got := len(after[uint64(k)]); got != s.Eligible {
			t.Errorf("snapshot %d has %d communities of at least %d, %d appear as after", k, s.Eligible, minSize, got)
		}
		if got := len(before[uint64(k-1)]); got != p.Eligible {
			t.Errorf("snapshot %d has %d communities of at least %d, %d appear as before", k-1, p.Eligible, minSize, got)
		}
		if count[uint64(k)] != s.Events {
			t.Errorf("snapshot %d header counts %d events, %d found", k, s.Events, count[uint64(k)])
		}
		for _, m := range []map[uint64]*use{after[uint64(k)], before[uint64(k-1)]} {
			for c, u := range m {
				slices.Sort(u.types)
				if len(u.types) > 2 || (len(u.types) == 2 && !slices.Equal(u.types, []events.Type{events.Merge, events.Split})) {
					t.Errorf("snapshots %d-%d: community %d in events %v", k-1, k, c, u.types)
				}
			}
		}
	}
}

// summaryCounts reads the "N events: merge a, split b, ..." summary line.
func summaryCounts(t *testing.T, stderr string) map[events.Type]int {
	t.Helper()
	for _, line := range strings.Split(stderr, "\n") {
		_, rest, ok := strings.Cut(line, " events: ")
		if !ok {
			continue
		}
		out := map[events.Type]int{}
		for _, f := range strings.Split(rest, ", ") {
			typ, n, _ := strings.Cut(f, " ")
			v, err := strconv.Atoi(n)
			if err != nil {
				t.Fatalf("summary %q", line)
			}
			out[events.Type(typ)] = v
		}
		return out
	}
	t.Fatalf("no event summary in %q", stderr)
	return nil
}

func countTypes(evs []events.Event) map[events.Type]int {
	out := map[events.Type]int{}
	for _, t := range events.Types {
		out[t] = 0
	}
	for _, ev := range evs {
		out[ev.Type]++
	}
	return out
}

// fileTimes reads the third column of a "src dst ts" file, in seconds, as
// Unix milliseconds, in file order.
func fileTimes(t *testing.T, path string) []int64 {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var ts []int64
	for _, line := range strings.Split(string(data), "\n") {
		f := strings.Fields(line)
		if len(f) < 3 || strings.HasPrefix(f[0], "#") {
			continue
		}
		v, err := strconv.ParseInt(f[2], 10, 64)
		if err != nil {
			t.Fatal(err)
		}
		ts = append(ts, v*1000)
	}
	return ts
}

// TestReplayCollegeMsg replays SNAP CollegeMsg (testdata/collegemsg.tsv,
// Panzarasa, Opsahl and Carley 2009) with weekly snapshots and checks the
// events against the snapshots (checkConsistent), the summary against the
// events, the totals against SNAP's published counts (1899 nodes, 59835
// temporal edges: every line adds 1, so the final total weight is 59835),
// and the snapshot schedule against the rule in replay.go, written out in
// schedule: a snapshot at the end of every week (multiples of 168h since
// the epoch) with an event after it, holding the events before it, with
// the default --apply-every 1000 (batches end at the boundaries).
func TestReplayCollegeMsg(t *testing.T) {
	snaps := filepath.Join(t.TempDir(), "snaps.jsonl")
	out, errs, code := runIn(t, "", "replay", testdata("collegemsg.tsv"), "--time-unit", "s", "--columns", "src,dst,ts",
		"--every", "168h", "--snapshots-out", snaps)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	evs := parseEvents(t, out)
	ss := readSnapshots(t, snaps)
	checkConsistent(t, evs, ss, events.DefaultMinSize, fileTimes(t, testdata("collegemsg.tsv")), 168*time.Hour, 59835)
	if got, want := summaryCounts(t, errs), countTypes(evs); !mapsEqual(got, want) {
		t.Errorf("summary counts %v, events %v", got, want)
	}
	last := ss[len(ss)-1]
	if last.Nodes != 1899 || last.TotalWeight != 59835 {
		t.Errorf("final snapshot: %d nodes, total weight %v; SNAP: 1899 nodes, 59835 messages", last.Nodes, last.TotalWeight)
	}
	if len(evs) == 0 || countTypes(evs)[events.Birth] == 0 {
		t.Fatalf("a growing message network should produce births: %v", countTypes(evs))
	}
}

// scheduled is a snapshot the schedule asks for: at time at (ms), holding
// the first seq events.
type scheduled struct {
	at  int64
	seq int
}

// schedule is the rule of replay.go written out for sorted event times:
// the time rule starts at the boundary before the first event, and each
// event in a later interval than the one before it closes the interval of
// that one: a snapshot at the end of it, holding the events before it. An
// interval with no event in it gives no snapshot.
func schedule(times []int64, every time.Duration) []scheduled {
	w := every.Milliseconds()
	floor := func(ts int64) int64 {
		b := ts / w * w
		if b > ts {
			b -= w
		}
		return b
	}
	var out []scheduled
	for i := 1; i < len(times); i++ {
		if floor(times[i]) > floor(times[i-1]) {
			out = append(out, scheduled{at: floor(times[i-1]) + w, seq: i})
		}
	}
	return out
}

func mapsEqual(a, b map[events.Type]int) bool {
	for _, t := range events.Types {
		if a[t] != b[t] {
			return false
		}
	}
	return true
}

// TestReplayDeterministic: the same file and flags give byte-identical
// events and snapshot headers, in process and in two fresh processes.
func TestReplayDeterministic(t *testing.T) {
	dir := t.TempDir()
	args := func(snaps string) []string {
		return []string{"replay", testdata("collegemsg.tsv"), "--time-unit", "s", "--columns", "src,dst,ts",
			"--every", "336h", "--window", "720h", "--members", "--seed", "3", "--snapshots-out", snaps}
	}
	var outs, snaps [][]byte
	for i := range 4 {
		path := filepath.Join(dir, fmt.Sprintf("s%d.jsonl", i))
		var out, errs string
		var code int
		if i < 2 {
			out, errs, code = runIn(t, "", args(path)...)
		} else {
			out, errs, code = runBin(t, "", args(path)...)
		}
		if code != 0 {
			t.Fatalf("run %d: exit %d: %s", i, code, errs)
		}
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		outs, snaps = append(outs, []byte(out)), append(snaps, data)
	}
	if len(outs[0]) == 0 || !bytes.Contains(outs[0], []byte(`"members":[`)) {
		t.Fatal("no events, or no member lists with --members")
	}
	for i := 1; i < 4; i++ {
		if !bytes.Equal(outs[i], outs[0]) || !bytes.Equal(snaps[i], snaps[0]) {
			t.Fatalf("run %d differs from run 0 (runs 0-1 in process, 2-3 fresh processes)", i)
		}
	}
}

// TestReplayUnsorted replays the first 10000 lines of SNAP
// email-Eu-core-temporal-Dept1 (Paranjape, Benson and Leskovec 2017), which
// SOURCES.md notes are not sorted by time: replay says it sorted them, and
// its output is byte for byte that of a copy stable-sorted by the test
// (equal times keep file order), under the same graph name. With a 30-day
// window the events are still consistent with the snapshots.
func TestReplayUnsorted(t *testing.T) {
	src := testdata("email_eu_core_temporal_dept1_head10000.tsv")
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	type line struct {
		ts   int64
		text string
	}
	var lines []line
	for _, l := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		f := strings.Fields(l)
		if strings.HasPrefix(l, "#") {
			continue
		}
		v, err := strconv.ParseInt(f[2], 10, 64)
		if err != nil {
			t.Fatal(err)
		}
		lines = append(lines, line{v, l})
	}
	if slices.IsSortedFunc(lines, func(a, b line) int { return int(a.ts - b.ts) }) {
		t.Fatal("the file is sorted; SOURCES.md says it is not")
	}
	slices.SortStableFunc(lines, func(a, b line) int {
		switch {
		case a.ts < b.ts:
			return -1
		case a.ts > b.ts:
			return 1
		}
		return 0
	})
	var b strings.Builder
	for _, l := range lines {
		b.WriteString(l.text + "\n")
	}
	dir := t.TempDir()
	sorted := filepath.Join(dir, "sorted.tsv")
	if err := os.WriteFile(sorted, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	flags := []string{"--time-unit", "s", "--columns", "src,dst,ts", "--every", "720h", "--window", "720h",
		"--apply-every", "250", "--graph", "dept1", "--members"}
	snapsA, snapsB := filepath.Join(dir, "a.jsonl"), filepath.Join(dir, "b.jsonl")
	outA, errA, codeA := runIn(t, "", append([]string{"replay", src, "--snapshots-out", snapsA}, flags...)...)
	outB, errB, codeB := runIn(t, "", append([]string{"replay", sorted, "--snapshots-out", snapsB}, flags...)...)
	if codeA != 0 || codeB != 0 {
		t.Fatalf("exit %d %d: %s %s", codeA, codeB, errA, errB)
	}
	if !strings.Contains(errA, "not in time order: stable-sorted its 10000 events") {
		t.Errorf("no note about sorting: %q", errA)
	}
	if strings.Contains(errB, "not in time order") {
		t.Errorf("sorted file reported unsorted: %q", errB)
	}
	a, _ := os.ReadFile(snapsA)
	bb, _ := os.ReadFile(snapsB)
	if outA != outB || !bytes.Equal(a, bb) {
		t.Fatal("replay of the unsorted file differs from replay of its stable-sorted copy")
	}
	evs := parseEvents(t, outA)
	checkConsistent(t, evs, readSnapshots(t, snapsA), events.DefaultMinSize, fileTimes(t, sorted), 720*time.Hour, 10000)
	if len(evs) == 0 {
		t.Fatal("no events")
	}
}

// scenarioLine formats an invented edge event "src dst w ts" at minute m
// after 2026-01-01T00:00:00Z (an hour boundary).
func scenarioLine(src, dst string, w float64, m int) string {
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	return fmt.Sprintf("%s %s %g %s\n", src, dst, w, t0.Add(time.Duration(m)*time.Minute).Format(time.RFC3339))
}

// clique returns the lines of a clique on the named nodes, one edge a
// minute from minute m.
func clique(prefix string, n, m int) (string, int) {
	var b strings.Builder
	for i := 1; i <= n; i++ {
		for j := i + 1; j <= n; j++ {
			b.WriteString(scenarioLine(fmt.Sprintf("%s%d", prefix, i), fmt.Sprintf("%s%d", prefix, j), 1, m))
			m++
		}
	}
	return b.String(), m
}

func eventsOf(evs []events.Event, to uint64) []events.Event {
	var out []events.Event
	for _, ev := range evs {
		if ev.ToSnapshot == to {
			out = append(out, ev)
		}
	}
	return out
}

func memberNames(s events.Side) []string {
	m := slices.Clone(s.Members)
	slices.Sort(m)
	return m
}

// TestReplayBirthInSecondInterval is a hand-built scenario (invented
// data). Hour 0: two 5-cliques a and b joined by one edge. Hour 1: a
// third 5-clique c forms, apart from them. Hour 2: a few more edges inside
// a and b. With hourly snapshots and --apply-every 1, snapshot 1 holds hour
// 0, snapshot 2 hours 0-1, snapshot 3 all: exactly one birth, of c with
// its five members, between snapshots 1 and 2, and otherwise only
// continuations (a and b keep their members and ids throughout).
func TestReplayBirthInSecondInterval(t *testing.T) {
	var in strings.Builder
	a, m := clique("a", 5, 0)
	bq, m := clique("b", 5, m)
	in.WriteString(a + bq)
	in.WriteString(scenarioLine("a1", "b1", 1, m))
	c, _ := clique("c", 5, 60)
	in.WriteString(c)
	in.WriteString(scenarioLine("a1", "a2", 1, 120))
	in.WriteString(scenarioLine("b3", "b4", 1, 125))
	in.WriteString(scenarioLine("a4", "a5", 1, 130))
	snaps := filepath.Join(t.TempDir(), "s.jsonl")
	out, errs, code := runIn(t, in.String(), "replay", "-", "--every", "1h", "--apply-every", "1", "--members", "--snapshots-out", snaps)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	ss := readSnapshots(t, snaps)
	if len(ss) != 3 || ss[0].Seq != 21 || ss[1].Seq != 31 || ss[2].Seq != 34 {
		t.Fatalf("snapshots %+v; want 3 at events 21 (hour 0), 31 (hour 1) and 34 (end)", ss)
	}
	if ss[0].Watermark != "2026-01-01T01:00:00Z" || ss[1].Watermark != "2026-01-01T02:00:00Z" ||
		ss[0].Time != ss[0].Watermark || ss[1].Time != ss[1].Watermark {
		t.Fatalf("snapshots at %s, %s (watermarks %s, %s): want the boundaries 01:00 and 02:00", ss[0].Time, ss[1].Time, ss[0].Watermark, ss[1].Watermark)
	}
	evs := parseEvents(t, out)
	checkConsistent(t, evs, ss, 3, nil, 0, 34)
	births := 0
	for _, ev := range evs {
		switch ev.Type {
		case events.Birth:
			births++
			if ev.FromSnapshot != 1 || ev.ToSnapshot != 2 {
				t.Errorf("birth between snapshots %d and %d, want 1 and 2", ev.FromSnapshot, ev.ToSnapshot)
			}
			if got := memberNames(ev.After[0]); !slices.Equal(got, []string{"c1", "c2", "c3", "c4", "c5"}) {
				t.Errorf("born community has members %v, want c1..c5", got)
			}
		case events.Continue:
			if ev.Before[0].Community != ev.After[0].Community || ev.Overlaps[0].Jaccard != 1 {
				t.Errorf("continue %d -> %d with Jaccard %v: unchanged groups keep their ids and members", ev.Before[0].Community, ev.After[0].Community, ev.Overlaps[0].Jaccard)
			}
		default:
			t.Errorf("unexpected %s event between %d and %d", ev.Type, ev.FromSnapshot, ev.ToSnapshot)
		}
	}
	// Pair 1-2: a and b continue, c is born; pair 2-3: all three continue.
	if births != 1 || len(eventsOf(evs, 2)) != 3 || len(eventsOf(evs, 3)) != 3 {
		t.Fatalf("%d births, %d events to snapshot 2, %d to 3; want 1, 3, 3", births, len(eventsOf(evs, 2)), len(eventsOf(evs, 3)))
	}
}

// TestReplayWindowExpiry is a hand-built window scenario (invented data),
// with a 1h window, snapshots every 30 minutes and --apply-every 1.
//
//	00:00-00:05  4-clique p (6 edges)      expire 01:00-01:05
//	00:10-00:15  4-clique q (6 edges)      expire 01:10-01:15
//	00:50        p1-p2 again               expires 01:50
//	01:05-01:10  q's 6 edges again         expire 02:05-02:10
//	01:35        q1-q2 again
//	01:55        q3-q4 again
//
// Snapshots (at each half hour with an event after it, holding the graph
// exactly as it was then, and at the end), worked by hand from the window
// rule (an increment counts while its expiry is after the watermark; the
// snapshot at T expires what is due by T first):
//
//	1  00:30  p, q: 12 edges, weight 12, 8 nodes
//	2  01:00  p1-p2's first increment expired at 01:00: 12 edges,
//	          weight 13 - 1 = 12, 8 nodes
//	3  01:30  p's edges expired but p1-p2 (01:50); q's first increments
//	          expired at 01:10-01:15, its second ones live:
//	          7 edges, weight 1 + 6 = 7, 6 nodes
//	4  end    wm 01:55: p1-p2 expired: 6 edges, weight 6+1+1 = 8, 4 nodes
//
// Events: 1-2 continue p and q; 2-3 death of p (what is left of it, p1-p2,
// is below the size floor), continue q; 3-4 continue q.
func TestReplayWindowExpiry(t *testing.T) {
	var in strings.Builder
	p, _ := clique("p", 4, 0)
	q, _ := clique("q", 4, 10)
	in.WriteString(p + q)
	in.WriteString(scenarioLine("p1", "p2", 1, 50))
	q2, _ := clique("q", 4, 65)
	in.WriteString(q2)
	in.WriteString(scenarioLine("q1", "q2", 1, 95))
	in.WriteString(scenarioLine("q3", "q4", 1, 115))
	snaps := filepath.Join(t.TempDir(), "s.jsonl")
	out, errs, code := runIn(t, in.String(), "replay", "-", "--window", "1h", "--every", "30m", "--apply-every", "1", "--members", "--snapshots-out", snaps)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	ss := readSnapshots(t, snaps)
	type want struct {
		wm           string
		edges, nodes int
		weight       float64
	}
	wants := []want{
		{"2026-01-01T00:30:00Z", 12, 8, 12},
		{"2026-01-01T01:00:00Z", 12, 8, 12},
		{"2026-01-01T01:30:00Z", 7, 6, 7},
		{"2026-01-01T01:55:00Z", 6, 4, 8},
	}
	if len(ss) != len(wants) {
		t.Fatalf("%d snapshots, want %d: %+v", len(ss), len(wants), ss)
	}
	for i, w := range wants {
		s := ss[i]
		if s.Watermark != w.wm || s.Edges != w.edges || s.Nodes != w.nodes || s.TotalWeight != w.weight {
			t.Errorf("snapshot %d: wm %s, %d edges, %d nodes, weight %v; want %s, %d, %d, %v",
				i+1, s.Watermark, s.Edges, s.Nodes, s.TotalWeight, w.wm, w.edges, w.nodes, w.weight)
		}
	}
	evs := parseEvents(t, out)
	checkConsistent(t, evs, ss, 3, nil, 0, 21)
	var got []string
	for _, ev := range evs {
		got = append(got, fmt.Sprintf("%d:%s", ev.ToSnapshot, ev.Type))
		if ev.Type == events.Death {
			if m := memberNames(ev.Before[0]); !slices.Equal(m, []string{"p1", "p2", "p3", "p4"}) || ev.LeftCount != 4 {
				t.Errorf("death of %v (left %d), want p1..p4", m, ev.LeftCount)
			}
		}
	}
	if w := []string{"2:continue", "2:continue", "3:continue", "3:death", "4:continue"}; !slices.Equal(got, w) {
		t.Fatalf("events %v, want %v", got, w)
	}
}

// TestReplayBadInput: a bad line stops replay with exit code 2, the file
// and line in the message, and nothing on stdout or in the output files.
func TestReplayBadInput(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.jsonl")
	in := `{"op":"add","src":"a","dst":"b","ts":1000}
{"op":"add","src":"b","dst":"c","ts":2000}
{"op":"add","src":"c","dst":"a","weight":2,"ts":3000}
`
	if err := os.WriteFile(bad, []byte(in), 0o600); err != nil {
		t.Fatal(err)
	}
	evOut := filepath.Join(dir, "ev.jsonl")
	out, errs, code := runBin(t, "", "replay", bad, "--every-events", "1", "--apply-every", "1", "--events-out", evOut)
	if code != 2 || out != "" || !strings.Contains(errs, "bad.jsonl:3") || !strings.Contains(errs, "weight") {
		t.Fatalf("exit %d, stdout %q, stderr %q; want 2, nothing, bad.jsonl:3 and the field", code, out, errs)
	}
	if _, err := os.Stat(evOut); !os.IsNotExist(err) {
		t.Fatalf("events file written on bad input: %v", err)
	}
	// An edge list with a bad weight, on stdin.
	out, errs, code = runIn(t, "a b 1 1000\nb c x 2000\n", "replay", "-", "--every-events", "1", "--apply-every", "1")
	if code != 2 || out != "" || !strings.Contains(errs, "stdin:2") {
		t.Fatalf("exit %d, stdout %q, stderr %q", code, out, errs)
	}
}

// TestReplayUsage: flag combinations that cannot work are refused with
// exit code 2 before anything is read or written.
func TestReplayUsage(t *testing.T) {
	f := testdata("karate.tsv") // no time column
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"replay", f}, "no snapshot schedule"},
		{[]string{"replay", f, "--every-events", "-1"}, "must not be negative"},
		{[]string{"replay", f, "--every-events", "10", "--history", "0"}, "--history 0"},
		{[]string{"replay", f, "--every", "1h"}, "no event has a time"},
		{[]string{"replay", f, "--every-events", "10", "--apply-every", "10", "--window", "1h"}, "no event has a time"},
		{[]string{"replay", f, "--every-events", "10", "--apply-every", "0"}, "--apply-every 0"},
		{[]string{"replay", f, "--every-events", "10", "--apply-every", "10", "--theta", "2"}, "theta"},
		{[]string{"replay", f, f, "--every-events", "10"}, "exactly one FILE"},
	} {
		out, errs, code := runIn(t, "", c.args...)
		if code != 2 || out != "" || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2 and %q", c.args, code, out, errs, c.want)
		}
	}
	// Without times, --every-events works, for any batch size: karate (78
	// edges) gives snapshots at 10, 20, ..., 70 and 78.
	snaps := filepath.Join(t.TempDir(), "s.jsonl")
	_, errs, code := runIn(t, "", "replay", f, "--every-events", "10", "--apply-every", "7", "--snapshots-out", snaps)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if ss := readSnapshots(t, snaps); len(ss) != 8 || ss[7].Seq != 78 || ss[7].Nodes != 34 {
		t.Fatalf("%d snapshots, last %+v; want 8, the last at 78 events with karate's 34 nodes", len(ss), ss[len(ss)-1])
	}
}

// writeReplayBench writes gen.WriteStream's stream of n events to path.
func writeReplayBench(tb testing.TB, path string, n int, jsonl bool) {
	tb.Helper()
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	if err := gen.WriteStream(f, n, jsonl); err != nil {
		tb.Fatal(err)
	}
	if err := f.Close(); err != nil {
		tb.Fatal(err)
	}
}

// BenchmarkReplay replays 10^6 generated events (writeReplayBench, about
// 278 hours of event time) with daily or hourly snapshots, in process, and
// reports events per second. The budget is 10 s for 10^6 events on
// this machine. Run with -benchtime 1x: one replay takes seconds.
func BenchmarkReplay(b *testing.B) {
	const n = 1_000_000
	for _, c := range []struct {
		name  string
		jsonl bool
		extra []string
	}{
		{"edgelist/daily", false, []string{"--columns", "src,dst,ts", "--every", "24h"}},
		{"edgelist/hourly", false, []string{"--columns", "src,dst,ts", "--every", "1h"}},
		{"jsonl-removes/daily", true, []string{"--every", "24h"}},
		{"jsonl-removes/hourly", true, []string{"--every", "1h"}},
		{"jsonl-window-24h/daily", true, []string{"--every", "24h", "--window", "24h"}},
	} {
		b.Run(c.name, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "stream")
			writeReplayBench(b, path, n, c.jsonl)
			args := append([]string{"replay", path, "--events-out", filepath.Join(b.TempDir(), "ev.jsonl")}, c.extra...)
			for b.Loop() {
				var errs bytes.Buffer
				if code := run(context.Background(), &env{stdin: strings.NewReader(""), stdout: io.Discard, stderr: &errs}, args); code != 0 {
					b.Fatalf("exit %d: %s", code, errs.String())
				}
			}
			b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "events/s")
		})
	}
}

// TestReplayUntimedEvents: an event without a time takes the watermark at
// its place in the file, and those before the first timed event take the
// first time (replay.go, "Reading"). Invented data, with a 1h window so
// that the time an event gets decides when it expires:
//
//	x-y  no time  -> 00:00, expires 01:00
//	a-b  00:00             expires 01:00
//	c-d  no time  -> 00:00, expires 01:00
//	e-f  00:40             expires 01:40
//	g-h  no time  -> 00:40, expires 01:40
//	a-b  01:20             expires 02:20
//
// Snapshots every 30 minutes: at 00:30 (x-y, a-b, c-d), at 01:00 (x-y, a-b
// and c-d expired at 01:00 exactly: e-f and g-h left), and at the end
// (01:20: a-b again, e-f, g-h). Had
// the untimed events been put at the epoch, x-y would never count, and had
// they been put at the end of time, c-d would not expire.
func TestReplayUntimedEvents(t *testing.T) {
	in := `{"src":"x","dst":"y"}
{"src":"a","dst":"b","ts":"2026-01-01T00:00:00Z"}
{"src":"c","dst":"d"}
{"src":"e","dst":"f","ts":"2026-01-01T00:40:00Z"}
{"src":"g","dst":"h"}
{"src":"a","dst":"b","ts":"2026-01-01T01:20:00Z"}
`
	snaps := filepath.Join(t.TempDir(), "s.jsonl")
	_, errs, code := runIn(t, in, "replay", "-", "--window", "1h", "--every", "30m", "--apply-every", "1", "--snapshots-out", snaps)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if strings.Contains(errs, "not in time order") {
		t.Errorf("untimed events made the file look unsorted: %q", errs)
	}
	ss := readSnapshots(t, snaps)
	var got []string
	for _, s := range ss {
		got = append(got, fmt.Sprintf("%d@%s:%d edges,%d nodes", s.Seq, s.Watermark[11:16], s.Edges, s.Nodes))
	}
	want := []string{"3@00:30:3 edges,6 nodes", "5@01:00:2 edges,4 nodes", "6@01:20:3 edges,6 nodes"}
	if !slices.Equal(got, want) {
		t.Fatalf("snapshots %v, want %v", got, want)
	}
}
