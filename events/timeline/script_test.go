package timeline

import (
	"bytes"
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/cockroachdb/datadriven"
	"github.com/cockroachdb/pebble/v2"

	"shoal/events"
	"shoal/ingest"
	"shoal/snapshot"
	"shoal/tracker"
)

// TestScripts drives the timeline from the scripts in testdata/scripts
// (github.com/cockroachdb/datadriven, the form pebble's tests use). The
// events go through a real ingest.Feed (dictionary and window), the
// snapshots, their events and the history into a real Pebble database, and
// tracker.Check runs after every batch. Commands:
//
//	init every=DUR every-events=N apply-every=N window=DUR min-size=N
//	add at=DUR [w=W]      each input line names nodes: every pair is linked
//	                      by one add event at time DUR (from the epoch);
//	                      "a b | c d": only the pairs across the bar
//	remove at=DUR         each line: every pair of the nodes (or across
//	                      the bar) is removed
//	drop at=DUR           each line: the nodes are removed (node-remove)
//	tick at=DUR           one event at DUR that changes nothing
//	end                   the end of the input: a last snapshot if due
//	restart               store the state, rebuild everything from the
//	                      store and the feed, and go on
//	communities           the communities of the last snapshot
//	lineage ID            the history of community ID
//	node NAME             a node's community and since when
//
// Every command prints the snapshots it caused and their non-continue
// events: type, the communities before and after with their sizes, and
// the members that joined and left. Times print as offsets from the epoch.
func TestScripts(t *testing.T) {
	datadriven.Walk(t, "testdata/scripts", func(t *testing.T, path string) {
		s := &script{t: t, dir: t.TempDir()}
		defer s.close()
		datadriven.RunTest(t, path, s.run)
	})
}

type script struct {
	t    *testing.T
	dir  string
	db   *pebble.DB
	cfg  Config
	feed *ingest.Feed
	tl   *Timeline
	out  bytes.Buffer
	last *snapshot.Snapshot
}

func (s *script) close() {
	if s.tl != nil {
		s.tl.Close()
	}
	if s.db != nil {
		s.db.Close()
	}
}

func (s *script) run(t *testing.T, d *datadriven.TestData) string {
	s.out.Reset()
	var err error
	switch d.Cmd {
	case "init":
		err = s.init(d)
	case "add", "remove", "drop", "tick":
		if s.tl == nil {
			d.Fatalf(t, "%s before init", d.Cmd)
		}
		err = s.events(d)
	case "end":
		err = s.tl.End()
	case "restart":
		err = s.restart()
	case "communities":
		s.communities()
	case "lineage":
		id, perr := strconv.ParseUint(d.CmdArgs[0].Key, 10, 64)
		if perr != nil {
			d.Fatalf(t, "lineage %s: %v", d.CmdArgs[0].Key, perr)
		}
		s.lineage(id)
	case "node":
		s.node(d.CmdArgs[0].Key)
	default:
		d.Fatalf(t, "unknown command %s", d.Cmd)
	}
	if err != nil {
		fmt.Fprintf(&s.out, "error: %v\n", err)
	}
	if s.out.Len() == 0 {
		return "ok\n"
	}
	return s.out.String()
}

func (s *script) init(d *datadriven.TestData) error {
	var err error
	if s.db, err = pebble.Open(filepath.Join(s.dir, "db"), &pebble.Options{Logger: quiet{}}); err != nil {
		return err
	}
	s.cfg = Config{Graph: "script", ApplyEvery: 1000, Check: true}
	s.cfg.Match.MinSize = 3
	window := time.Duration(0)
	for _, a := range d.CmdArgs {
		v := a.Vals[0]
		switch a.Key {
		case "every":
			s.cfg.Schedule.Every = mustDuration(s.t, v)
		case "every-events":
			s.cfg.Schedule.EveryEvents = mustInt(s.t, v)
		case "apply-every":
			s.cfg.ApplyEvery = mustInt(s.t, v)
		case "window":
			window = mustDuration(s.t, v)
		case "min-size":
			s.cfg.Match.MinSize = mustInt(s.t, v)
		default:
			s.t.Fatalf("init: unknown argument %s", a.Key)
		}
	}
	s.feed = ingest.NewFeed(window)
	tr, err := tracker.New(&tracker.Options{})
	if err != nil {
		return err
	}
	return s.start(tr, nil, nil, NewState())
}

// start makes the timeline over tr; the expiry and the names come from the
// feed, the snapshots go to the store and the output.
func (s *script) start(tr *tracker.Tracker, prev *snapshot.Snapshot, hist *events.History, st State) error {
	cfg := s.cfg
	cfg.Expire = s.feed.Window().AppendExpire
	dict := s.feed.Dict()
	cfg.Match.Name = dict.Name
	if hist == nil {
		var err error
		if hist, err = events.NewHistory(&events.HistoryOptions{MinSize: cfg.Match.MinSize}); err != nil {
			return err
		}
	}
	var err error
	s.tl, err = New(cfg, tr, prev, hist, st, SinkFunc(s.snapshot))
	return err
}

func (s *script) snapshot(sn *snapshot.Snapshot, evs []events.Event, h *events.History) error {
	b := s.db.NewBatch()
	defer b.Close()
	if err := snapshot.Write(b, sn); err != nil {
		return err
	}
	if err := events.PutAll(b, sn.ID, evs); err != nil {
		return err
	}
	if err := h.Put(b); err != nil {
		return err
	}
	// Keep two full snapshots, as a daemon with --snapshot-keep 2 would:
	// the history must answer for the dropped ones.
	if _, err := snapshot.Retain(b, s.db, 2); err != nil {
		return err
	}
	if err := b.Commit(pebble.Sync); err != nil {
		return err
	}
	eligible := 0
	for i := range sn.Communities {
		if sn.Communities[i].Size >= s.cfg.Match.MinSize {
			eligible++
		}
	}
	fmt.Fprintf(&s.out, "snapshot %d at %s: %d nodes, %d edges, %s (%d eligible)\n",
		sn.ID, offset(sn.Time), sn.Nodes, sn.Edges, plural(len(sn.Communities), "community", "communities"), eligible)
	for i := range evs {
		ev := &evs[i]
		if ev.Type == events.Continue {
			continue
		}
		fmt.Fprintf(&s.out, "  %s %s -> %s", ev.Type, sides(ev.Before), sides(ev.After))
		if len(ev.Joined) > 0 {
			fmt.Fprintf(&s.out, " joined %s", strings.Join(ev.Joined, " "))
		}
		if len(ev.Left) > 0 {
			fmt.Fprintf(&s.out, " left %s", strings.Join(ev.Left, " "))
		}
		fmt.Fprintln(&s.out)
	}
	s.last = sn
	return nil
}

func sides(ss []events.Side) string {
	if len(ss) == 0 {
		return "-"
	}
	parts := make([]string, len(ss))
	for i, sd := range ss {
		parts[i] = fmt.Sprintf("c%d(%d)", sd.Community, sd.Size)
	}
	return strings.Join(parts, "+")
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// offset prints a time in ms as an offset from the epoch.
func offset(ms int64) string { return (time.Duration(ms) * time.Millisecond).String() }

func (s *script) events(d *datadriven.TestData) error {
	at := int64(-1)
	w := 0.0
	for _, a := range d.CmdArgs {
		switch a.Key {
		case "at":
			at = mustDuration(s.t, a.Vals[0]).Milliseconds()
		case "w":
			f, err := strconv.ParseFloat(a.Vals[0], 64)
			if err != nil {
				d.Fatalf(s.t, "w: %v", err)
			}
			w = f
		}
	}
	if at < 0 {
		d.Fatalf(s.t, "%s needs at=DURATION", d.Cmd)
	}
	var evs []ingest.Event
	mk := func(op ingest.Op, a, b string) ingest.Event {
		return ingest.Event{Op: op, Src: a, Dst: b, W: w, HasW: w != 0, TS: at, HasTS: true}
	}
	switch d.Cmd {
	case "tick":
		evs = append(evs, mk(ingest.OpRemove, "nobody", "nowhere"))
	default:
		for _, line := range strings.Split(strings.TrimSpace(d.Input), "\n") {
			names := strings.Fields(line)
			switch d.Cmd {
			case "drop":
				for _, n := range names {
					evs = append(evs, mk(ingest.OpNodeRemove, n, ""))
				}
			default:
				op := ingest.OpAdd
				if d.Cmd == "remove" {
					op = ingest.OpRemove
				}
				if l, r, ok := strings.Cut(line, "|"); ok {
					// Only the pairs across the bar.
					for _, a := range strings.Fields(l) {
						for _, b := range strings.Fields(r) {
							evs = append(evs, mk(op, a, b))
						}
					}
					continue
				}
				for i := range names {
					for j := i + 1; j < len(names); j++ {
						evs = append(evs, mk(op, names[i], names[j]))
					}
				}
			}
		}
	}
	var chs []tracker.Change
	for i := range evs {
		if err := s.tl.At(evs[i].TS); err != nil {
			return err
		}
		chs = s.feed.Append(chs[:0], &evs[i], ingest.NoArrival)
		if err := s.tl.Add(chs); err != nil {
			return err
		}
	}
	return nil
}

// restart stops the timeline and builds a new one as the daemon does at
// start: the graph from the feed (the store's edges), the tracker from the
// last stored snapshot (Rebuild), the history from the store, the state
// as stored with the last batch.
func (s *script) restart() error {
	st := s.tl.State()
	st.LastSnapshot = 0 // comes back from the stored snapshot
	next := s.tl.NextID()
	if err := s.tl.Close(); err != nil {
		return err
	}
	prev, err := snapshot.Latest(s.db)
	switch {
	case errors.Is(err, snapshot.ErrNotFound):
		prev = nil
	case err != nil:
		return err
	}
	hist, err := events.LoadHistory(s.db, &events.HistoryOptions{MinSize: s.cfg.Match.MinSize})
	if err != nil {
		return err
	}
	win := s.feed.Window()
	weights := map[[2]uint32]float64{}
	for _, inc := range win.Increments(nil) {
		weights[[2]uint32{inc.U, inc.V}] += inc.W
	}
	var edges []tracker.Edge
	has := make([]bool, s.feed.Dict().Len())
	for k, w := range weights {
		edges = append(edges, tracker.Edge{U: k[0], V: k[1], W: w})
		has[k[0]], has[k[1]] = true, true
	}
	slices.SortFunc(edges, func(a, b tracker.Edge) int {
		if a.U != b.U {
			return int(a.U) - int(b.U)
		}
		return int(a.V) - int(b.V)
	})
	g := tracker.NewGraph(len(has), edges)
	for i, h := range has {
		if !h {
			g.RemoveNode(uint32(i), nil)
		}
	}
	tr, method, err := Rebuild(g, &tracker.Options{}, prev, next, RebuildAuto)
	if err != nil {
		return err
	}
	fmt.Fprintf(&s.out, "rebuilt (%s): %d nodes, %s\n", method, g.Nodes(), plural(tr.NumCommunities(), "community", "communities"))
	return s.start(tr, prev, hist, st)
}

func (s *script) communities() {
	if s.last == nil {
		fmt.Fprintln(&s.out, "no snapshot")
		return
	}
	dict := s.feed.Dict()
	for _, c := range s.last.Communities {
		names := make([]string, len(c.Members))
		for i, m := range c.Members {
			names[i] = dict.Name(m)
		}
		slices.Sort(names)
		fmt.Fprintf(&s.out, "c%d: %s\n", c.ID, strings.Join(names, " "))
	}
}

func (s *script) lineage(id uint64) {
	h := s.tl.History()
	r, ok := h.Community(id)
	if !ok {
		fmt.Fprintf(&s.out, "c%d: not in the history\n", id)
		return
	}
	fmt.Fprintf(&s.out, "c%d: born at snapshot %d (%s)", id, r.Born, offset(r.BornTime))
	if r.Died > 0 {
		fmt.Fprintf(&s.out, ", died at snapshot %d (%s)", r.Died, offset(r.DiedTime))
	}
	fmt.Fprintf(&s.out, "; from %v, to %v\n", r.From, r.To)
	anc, desc := h.Lineage(id)
	fmt.Fprintf(&s.out, "  ancestors %v, descendants %v\n", anc, desc)
	for _, e := range r.Events {
		fmt.Fprintf(&s.out, "  %s at snapshot %d (%s)\n", e.Type, e.Snapshot, offset(e.Time))
	}
}

func (s *script) node(name string) {
	v, ok := s.feed.Dict().Lookup(name)
	if !ok {
		fmt.Fprintf(&s.out, "%s: unknown\n", name)
		return
	}
	r, ok := s.tl.History().Node(v)
	if !ok || r.Community == 0 {
		fmt.Fprintf(&s.out, "%s: in no recorded community\n", name)
		return
	}
	fmt.Fprintf(&s.out, "%s: in c%d since snapshot %d (%s)\n", name, r.Community, r.Since, offset(r.SinceTime))
}

// quiet drops Pebble's log lines.
type quiet struct{}

func (quiet) Infof(string, ...any)           {}
func (quiet) Errorf(string, ...any)          {}
func (quiet) Fatalf(format string, a ...any) { panic(fmt.Sprintf(format, a...)) }

func mustDuration(t *testing.T, s string) time.Duration {
	d, err := time.ParseDuration(s)
	if err != nil {
		t.Fatalf("duration %q: %v", s, err)
	}
	return d
}

func mustInt(t *testing.T, s string) int {
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatalf("number %q: %v", s, err)
	}
	return n
}
