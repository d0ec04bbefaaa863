package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestPublishMissingStream: publishing to a graph whose stream is not on
// the server (no daemon for it, or a --graph forgotten) is refused with
// exit 2 and a hint naming the flags, and sends nothing; --create-stream
// creates the stream and publishes.
func TestPublishMissingStream(t *testing.T) {
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	file := filepath.Join(t.TempDir(), "in.tsv")
	if err := os.WriteFile(file, []byte("a b 1\nb c 1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, errs, code := runIn(t, "", "publish", file, "--nats", ts.url())
	if code != 2 || !strings.Contains(errs, "SHOAL_EDGES_default") || !strings.Contains(errs, "--graph") || !strings.Contains(errs, "--create-stream") {
		t.Fatalf("publish to a missing stream: exit %d, %q; want 2 and a hint with --graph and --create-stream", code, errs)
	}
	if _, err := js.Stream(context.Background(), "SHOAL_EDGES_default"); err == nil {
		t.Fatal("the refused publish created the stream")
	}
	_, errs, code = runIn(t, "", "publish", file, "--nats", ts.url(), "--create-stream")
	if code != 0 {
		t.Fatalf("publish --create-stream: exit %d, %s", code, errs)
	}
	st, err := js.Stream(context.Background(), "SHOAL_EDGES_default")
	if err != nil {
		t.Fatal(err)
	}
	info, err := st.Info(context.Background())
	if err != nil || info.State.Msgs != 2 {
		t.Fatalf("stream holds %v messages (%v), want the 2 lines", info.State.Msgs, err)
	}
	// Now that it exists, a plain publish goes through.
	if _, errs, code = runIn(t, "", "publish", file, "--nats", ts.url()); code != 0 {
		t.Fatalf("publish to the existing stream: exit %d, %s", code, errs)
	}
	// A stream that does not take the subject is refused too.
	_, errs, code = runIn(t, "", "publish", file, "--nats", ts.url(), "--subject", "elsewhere.x")
	if code != 2 || !strings.Contains(errs, "--subject") {
		t.Fatalf("publish to a subject the stream does not take: exit %d, %q", code, errs)
	}
}

func TestSubjectMatches(t *testing.T) {
	for _, c := range []struct {
		pattern, subject string
		want             bool
	}{
		{"shoal.edges.g", "shoal.edges.g", true},
		{"shoal.edges.g", "shoal.edges.h", false},
		{"shoal.edges.*", "shoal.edges.h", true},
		{"shoal.*", "shoal.edges.h", false},
		{"shoal.>", "shoal.edges.h", true},
		{"shoal.>", "shoal", false},
		{"shoal.edges.g", "shoal.edges", false},
	} {
		if got := subjectMatches(c.pattern, c.subject); got != c.want {
			t.Errorf("subjectMatches(%q, %q) = %v, want %v (NATS subject wildcards)", c.pattern, c.subject, got, c.want)
		}
	}
}

// TestDaemonScheduleStored: the snapshot schedule is kept with the store.
// A restart without the flag keeps the stored one (2h here), a restart
// with another logs the change, and --snapshot-every 0 logs that snapshots
// are off.
func TestDaemonScheduleStored(t *testing.T) {
	ts := startTestServer(t)
	data := filepath.Join(t.TempDir(), "data")
	logOf := restartLog(t, ts.url(), data, "sched")
	if l := logOf("--snapshot-every", "2h"); !strings.Contains(l, `"schedule":"every 2h0m0s"`) {
		t.Fatalf("first start with --snapshot-every 2h:\n%s", l)
	}
	if l := logOf(); !strings.Contains(l, `"schedule":"every 2h0m0s"`) || strings.Contains(l, "schedule changed") {
		t.Fatalf("a restart without the flag did not keep the stored 2h:\n%s", l)
	}
	if l := logOf("--snapshot-every", "30m"); !strings.Contains(l, "schedule changed") || !strings.Contains(l, `"was":"every 2h0m0s"`) || !strings.Contains(l, `"schedule":"every 30m0s"`) {
		t.Fatalf("a restart with --snapshot-every 30m:\n%s", l)
	}
	if l := logOf("--snapshot-every", "0"); !strings.Contains(l, "snapshots are off") {
		t.Fatalf("--snapshot-every 0 gave no warning:\n%s", l)
	}
	if l := logOf(); !strings.Contains(l, "snapshots are off") {
		t.Fatalf("a restart after --snapshot-every 0 did not keep it off:\n%s", l)
	}
}

// TestDaemonObjectiveStored: the objective and resolution are kept with the
// store: a restart without --objective keeps CPM, a restart with another
// objective rebuilds from scratch (logged), and --rebuild snapshot with a
// changed objective is refused.
func TestDaemonObjectiveStored(t *testing.T) {
	ts := startTestServer(t)
	data := filepath.Join(t.TempDir(), "data")
	logOf := restartLog(t, ts.url(), data, "obj")
	if l := logOf("--objective", "cpm", "--resolution", "0.1"); !strings.Contains(l, `"objective":"cpm","resolution":0.1`) {
		t.Fatalf("first start with --objective cpm:\n%s", l)
	}
	if l := logOf(); !strings.Contains(l, `"objective":"cpm","resolution":0.1`) || strings.Contains(l, "objective changed") {
		t.Fatalf("a restart without the flag did not keep cpm at 0.1:\n%s", l)
	}
	if l := logOf("--objective", "modularity"); !strings.Contains(l, "objective changed") || !strings.Contains(l, `"objective":"modularity","resolution":1`) {
		t.Fatalf("a restart with --objective modularity:\n%s", l)
	}
	_, errs, code := runIn(t, "", "run", "--data", data, "--http", "off", "--nats", ts.url(), "--graph", "obj", "--objective", "cpm", "--rebuild", "snapshot")
	if code != 2 || !strings.Contains(errs, "--rebuild static") {
		t.Fatalf("--rebuild snapshot with a changed objective: exit %d\n%s", code, errs)
	}
}

// restartLog returns a function that starts the daemon on data with the
// given flags, stops it and returns its log.
func restartLog(t *testing.T, natsURL, data, graph string) func(args ...string) string {
	return func(args ...string) string {
		d := startDaemon(t, data, nil, append([]string{"--nats", natsURL, "--graph", graph}, args...)...)
		d.stop()
		b, err := os.ReadFile(d.stderr)
		if err != nil {
			t.Fatal(err)
		}
		return string(b)
	}
}
