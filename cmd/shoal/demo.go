package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"shoal/events"
)

// The demo scenario is invented: a payments graph of 1,600 accounts in 40
// groups (households, small firms) over six days of event time, in which,
// on day 2, a ring of ten existing accounts from different groups and six
// new accounts starts paying each other heavily; on day 3 two groups start
// to trade as one; on day 4 one group stops paying within itself; on day 5
// the ring takes in three more new accounts. Nothing in it describes real
// people or transactions.
const (
	demoGroups    = 40
	demoGroupSize = 40
	demoDays      = 6
)

var demoStart = time.Date(2026, 11, 2, 0, 0, 0, 0, time.UTC)

func acct(i int) string { return fmt.Sprintf("acct-%04d", i) }

// demoEvent is one line of the scenario file.
type demoEvent struct {
	Op  string  `json:"op,omitempty"`
	Src string  `json:"src"`
	Dst string  `json:"dst"`
	W   float64 `json:"w,omitempty"`
	TS  string  `json:"ts"`
}

// demoScenario writes the invented scenario as JSON lines, in time order.
func demoScenario(w io.Writer) error {
	rng := rand.New(rand.NewPCG(2026, 11))
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	n := demoGroups * demoGroupSize
	ring := []string{acct(3), acct(87), acct(171), acct(250), acct(333), acct(419), acct(502), acct(655), acct(777), acct(901)}
	for i := 1; i <= 6; i++ {
		ring = append(ring, fmt.Sprintf("mule-%02d", i))
	}
	var lines []demoEvent
	for day := 0; day < demoDays; day++ {
		var evs []demoEvent
		at := func() string {
			return demoStart.Add(time.Duration(day)*24*time.Hour + time.Duration(rng.Int64N(int64(24*time.Hour)))).Format(time.RFC3339)
		}
		// Ordinary payments: most within the payer's group.
		for i := 0; i < n; i++ {
			g := i / demoGroupSize
			for p := 0; p < 3; p++ {
				j := g*demoGroupSize + rng.IntN(demoGroupSize)
				if rng.Float64() < 0.15 {
					j = rng.IntN(n)
				}
				if g == 12 && day >= 4 && j/demoGroupSize == 12 {
					j = rng.IntN(n) // group 12 no longer pays within itself
				}
				if j == i {
					continue
				}
				evs = append(evs, demoEvent{Src: acct(i), Dst: acct(j), W: 0.5 + 4.5*rng.Float64(), TS: at()})
			}
		}
		if day == 3 {
			// Groups 7 and 8 start to trade as one.
			for p := 0; p < 1200; p++ {
				evs = append(evs, demoEvent{Src: acct(7*demoGroupSize + rng.IntN(demoGroupSize)), Dst: acct(8*demoGroupSize + rng.IntN(demoGroupSize)), W: 0.5 + 4.5*rng.Float64(), TS: at()})
			}
		}
		if day == 4 {
			// Group 12's past payments among its members are withdrawn.
			for a := 0; a < demoGroupSize; a++ {
				for b := a + 1; b < demoGroupSize; b++ {
					evs = append(evs, demoEvent{Op: "remove", Src: acct(12*demoGroupSize + a), Dst: acct(12*demoGroupSize + b), TS: at()})
				}
			}
		}
		if day >= 2 {
			members := ring
			if day >= 5 {
				members = append(slices.Clone(ring), "mule-07", "mule-08", "mule-09")
			}
			for a, u := range members {
				for _, v := range members[a+1:] {
					for p := 0; p < 2; p++ {
						evs = append(evs, demoEvent{Src: u, Dst: v, W: 5 + 5*rng.Float64(), TS: at()})
					}
				}
			}
		}
		slices.SortStableFunc(evs, func(a, b demoEvent) int { return strings.Compare(a.TS, b.TS) })
		lines = append(lines, evs...)
	}
	// One payment just after the last day, so that the last day closes with
	// a snapshot.
	lines = append(lines, demoEvent{Src: acct(0), Dst: acct(1), W: 1, TS: demoStart.Add(demoDays * 24 * time.Hour).Format(time.RFC3339)})
	for i := range lines {
		if err := enc.Encode(&lines[i]); err != nil {
			return err
		}
	}
	return bw.Flush()
}

func runDemo(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "demo", "[options]")
	keep := fs.String("keep", "", "keep the scenario, the data directory and the event file in this directory (default: a temporary one, removed)")
	viaReplay := fs.Bool("replay", false, "run the scenario through shoal replay instead of the daemon (no NATS)")
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return usagef("no arguments expected, got %q", pos)
	}
	dir := *keep
	if dir == "" {
		if dir, err = os.MkdirTemp("", "shoal-demo"); err != nil {
			return err
		}
		defer os.RemoveAll(dir)
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	scenario := filepath.Join(dir, "payments.jsonl")
	if err := writeFileAtomic(scenario, demoScenario); err != nil {
		return fmt.Errorf("write scenario: %w", err)
	}
	evPath := filepath.Join(dir, "events.jsonl")
	fmt.Fprintln(e.stdout, "shoal demo: an invented payments scenario (1,600 accounts in 40 groups, six days);")
	fmt.Fprintln(e.stdout, "a ring forms on day 2, two groups trade as one from day 3, one group stops paying within itself on day 4.")
	if *viaReplay {
		fmt.Fprintf(e.stdout, "replaying %s with a snapshot every 24h of event time\n\n", scenario)
		sub := &env{stdin: e.stdin, stdout: io.Discard, stderr: io.Discard}
		if err := runReplay(ctx, sub, []string{scenario, "--every", "24h", "--graph", "demo-payments", "--members", "--min-size", "5", "--events-out", evPath}); err != nil {
			return fmt.Errorf("replay of the scenario: %w", err)
		}
	} else {
		fmt.Fprintf(e.stdout, "starting the daemon with an embedded NATS server (data in %s), publishing %s,\n", filepath.Join(dir, "data"), scenario)
		fmt.Fprintln(e.stdout, "snapshot every 24h of event time, events from the JetStream events stream:")
		fmt.Fprintln(e.stdout)
		if err := demoDaemon(ctx, e, dir, scenario, evPath); err != nil {
			return err
		}
	}
	return printDemoEvents(e.stdout, evPath)
}

// demoDaemon runs `shoal run` in process on an embedded server, publishes
// the scenario with `shoal publish`, waits until every event is applied and
// the events stream is quiet, and copies the events to evPath.
func demoDaemon(ctx context.Context, e *env, dir, scenario, evPath string) error {
	lines := 0
	if data, err := os.ReadFile(scenario); err == nil {
		lines = strings.Count(string(data), "\n")
	}
	logf, err := os.Create(filepath.Join(dir, "daemon.log"))
	if err != nil {
		return err
	}
	defer logf.Close()
	dctx, cancel := context.WithCancel(ctx)
	defer cancel()
	ready := filepath.Join(dir, "ready.json")
	done := make(chan error, 1)
	go func() {
		done <- runRun(dctx, &env{stdout: io.Discard, stderr: logf}, []string{
			"--data", filepath.Join(dir, "data"), "--graph", "demo", "--nats-listen", "127.0.0.1:0", "--http", "127.0.0.1:0",
			"--snapshot-every", "24h", "--min-size", "5", "--members", "--ready-file", ready, "--log-level", "warn"})
	}()
	stop := func() error {
		cancel()
		return <-done
	}
	var info struct {
		HTTP string `json:"http"`
		NATS string `json:"nats"`
	}
	deadline := time.Now().Add(60 * time.Second)
	for {
		if data, err := os.ReadFile(ready); err == nil && json.Unmarshal(data, &info) == nil && info.NATS != "" {
			break
		}
		select {
		case err := <-done:
			return fmt.Errorf("daemon stopped before it was ready: %v (see %s)", err, logf.Name())
		case <-time.After(50 * time.Millisecond):
		}
		if time.Now().After(deadline) {
			stop()
			return fmt.Errorf("daemon not ready after 60s (see %s)", logf.Name())
		}
	}
	sub := &env{stdin: e.stdin, stdout: io.Discard, stderr: io.Discard}
	if err := runPublish(ctx, sub, []string{scenario, "--nats", info.NATS, "--graph", "demo", "--lines-per-message", "100"}); err != nil {
		stop()
		return fmt.Errorf("publish the scenario: %w", err)
	}
	nc, err := nats.Connect(info.NATS)
	if err != nil {
		stop()
		return err
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		stop()
		return err
	}
	// Wait for every line to be applied, then for the events stream to be
	// quiet for a second (the outbox publishes after each snapshot).
	var last uint64
	quietSince := time.Time{}
	deadline = time.Now().Add(120 * time.Second)
	for {
		if time.Now().After(deadline) {
			stop()
			return fmt.Errorf("the daemon did not finish the scenario in 120s (see %s)", logf.Name())
		}
		time.Sleep(100 * time.Millisecond)
		st, err := demoStats(info.HTTP)
		if err != nil || int(st.EventsApplied+st.EventsRejected) < lines || st.PendingChanges > 0 {
			continue
		}
		si, err := js.Stream(ctx, "SHOAL_EVENTS_demo")
		if err != nil {
			continue
		}
		inf, err := si.Info(ctx)
		if err != nil {
			continue
		}
		if inf.State.Msgs != last || quietSince.IsZero() {
			last, quietSince = inf.State.Msgs, time.Now()
			continue
		}
		if time.Since(quietSince) > time.Second {
			break
		}
	}
	cons, err := js.OrderedConsumer(ctx, "SHOAL_EVENTS_demo", jetstream.OrderedConsumerConfig{})
	if err != nil {
		stop()
		return err
	}
	out, err := os.Create(evPath)
	if err != nil {
		stop()
		return err
	}
	for got := uint64(0); got < last; {
		batch, err := cons.Fetch(int(min(last-got, 500)), jetstream.FetchMaxWait(2*time.Second))
		if err != nil {
			out.Close()
			stop()
			return err
		}
		n := 0
		for m := range batch.Messages() {
			out.Write(m.Data())
			out.Write([]byte("\n"))
			n++
		}
		if n == 0 {
			break
		}
		got += uint64(n)
	}
	if err := out.Close(); err != nil {
		stop()
		return err
	}
	if err := stop(); err != nil && !errors.Is(err, context.Canceled) {
		return fmt.Errorf("daemon: %w (see %s)", err, logf.Name())
	}
	return nil
}

func demoStats(addr string) (*statsResponse, error) {
	resp, err := http.Get("http://" + addr + "/v1/stats")
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	var st statsResponse
	if err := json.NewDecoder(resp.Body).Decode(&st); err != nil {
		return nil, err
	}
	return &st, nil
}

// printDemoEvents prints one readable line per event other than continue.
func printDemoEvents(w io.Writer, path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<26)
	counts := map[events.Type]int{}
	for sc.Scan() {
		var ev events.Event
		if err := json.Unmarshal(sc.Bytes(), &ev); err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		counts[ev.Type]++
		if ev.Type == events.Continue {
			continue
		}
		day := func(ts string) string {
			if t, err := time.Parse(time.RFC3339, ts); err == nil {
				return t.Format("Jan 2")
			}
			return ts
		}
		fmt.Fprintf(w, "%s -> %s  %-7s %s\n", day(ev.FromTime), day(ev.ToTime), ev.Type, describe(&ev))
	}
	if err := sc.Err(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\n%d continuing communities not shown. %s.\n", counts[events.Continue], strings.ToUpper(events.Note[:1])+events.Note[1:])
	return nil
}

func describe(ev *events.Event) string {
	ids := func(s []events.Side) string {
		var b []string
		for _, x := range s {
			b = append(b, fmt.Sprintf("%d (%d)", x.Community, x.Size))
		}
		return strings.Join(b, " + ")
	}
	members := func(s []events.Side) string {
		if len(s) == 0 {
			return ""
		}
		m := s[0].Members
		if len(m) > 8 {
			return strings.Join(m[:8], " ") + fmt.Sprintf(" ... (%d more)", len(m)-8)
		}
		return strings.Join(m, " ")
	}
	switch ev.Type {
	case events.Birth:
		return fmt.Sprintf("community %s: %s", ids(ev.After), members(ev.After))
	case events.Death:
		return fmt.Sprintf("community %s is gone", ids(ev.Before))
	case events.Merge:
		return fmt.Sprintf("%s -> %s", ids(ev.Before), ids(ev.After))
	case events.Split:
		return fmt.Sprintf("%s -> %s", ids(ev.Before), ids(ev.After))
	default:
		s := fmt.Sprintf("community %s -> %s", ids(ev.Before), ids(ev.After))
		if ev.JoinedCount > 0 {
			s += fmt.Sprintf(", joined: %s", strings.Join(ev.Joined, " "))
		}
		return s
	}
}
