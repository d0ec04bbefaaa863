package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"shoal/events"
)

// shoalBin is the shoal binary built once for the subprocess tests.
var shoalBin string

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "shoal-bin")
	if err != nil {
		panic(err)
	}
	shoalBin = filepath.Join(dir, "shoal")
	if runtime.GOOS == "windows" {
		shoalBin += ".exe"
	}
	out, err := exec.Command("go", "build", "-o", shoalBin, ".").CombinedOutput()
	if err != nil {
		os.Stderr.Write(out)
		panic(err)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// runBin runs the shoal binary and returns stdout, stderr and the exit code.
func runBin(t *testing.T, stdin string, args ...string) (string, string, int) {
	t.Helper()
	cmd := exec.Command(shoalBin, args...)
	cmd.Stdin = strings.NewReader(stdin)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	return out.String(), errb.String(), code
}

// runIn runs a command line in process.
func runIn(t *testing.T, stdin string, args ...string) (string, string, int) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(context.Background(), &env{stdin: strings.NewReader(stdin), stdout: &out, stderr: &errb}, args)
	return out.String(), errb.String(), code
}

func testdata(name string) string { return filepath.Join("..", "..", "testdata", name) }

// TestDetectKarate: the JSON object carries the fields the README promises
// and the proven optimum of karate (0.4198, Brandes et al. 2008,
// testdata/SOURCES.md) is reached by the best of 10 seeds.
func TestDetectKarate(t *testing.T) {
	out, errs, code := runIn(t, "", "detect", testdata("karate.tsv"), "--runs", "10", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r map[string]any
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"nodes", "edges", "total_weight", "resolution", "seed", "modularity", "communities", "sizes", "runs", "stability"} {
		if _, ok := r[k]; !ok {
			t.Errorf("missing %q in %s", k, out)
		}
	}
	if r["nodes"].(float64) != 34 || r["edges"].(float64) != 78 {
		t.Errorf("karate has 34 nodes and 78 edges (SOURCES.md), got %v and %v", r["nodes"], r["edges"])
	}
	if q := r["modularity"].(float64); q < 0.4197 || q > 0.4198+1e-4 {
		t.Errorf("best of 10 Q = %v, want the optimum 0.4198", q)
	}
	if n := len(r["runs"].([]any)); n != 10 {
		t.Errorf("%d runs reported, want 10", n)
	}
	sum := 0.0
	for _, s := range r["sizes"].([]any) {
		sum += s.(float64)
	}
	if sum != 34 {
		t.Errorf("sizes sum to %v, want 34", sum)
	}
}

// TestDetectFreshProcessDeterministic: the same input, options and seed
// give byte-identical output in two fresh processes.
func TestDetectFreshProcessDeterministic(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.tsv"), filepath.Join(dir, "b.tsv")
	out1, _, c1 := runBin(t, "", "detect", testdata("football.tsv"), "--seed", "7", "--json", "--out", a)
	out2, _, c2 := runBin(t, "", "detect", testdata("football.tsv"), "--seed", "7", "--json", "--out", b)
	if c1 != 0 || c2 != 0 {
		t.Fatalf("exit codes %d %d", c1, c2)
	}
	if out1 != out2 {
		t.Fatalf("outputs differ:\n%s\n%s", out1, out2)
	}
	ma, _ := os.ReadFile(a)
	mb, _ := os.ReadFile(b)
	if !bytes.Equal(ma, mb) || len(ma) == 0 {
		t.Fatal("membership files differ or are empty")
	}
	if lines := strings.Count(string(ma), "\n"); lines != 115 {
		t.Fatalf("membership has %d lines, football has 115 nodes", lines)
	}
}

// TestDetectMembershipFile: --out lists every node once with its external
// id, and the file scores the reported modularity when read back.
func TestDetectMembershipFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "m.tsv")
	in := "# invented example\nalice bob\nbob carol\ncarol alice\ndave erin\nerin frank\nfrank dave\nalice dave 0.1\n"
	out, errs, code := runIn(t, in, "detect", "-", "--out", path, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	comm := map[string]string{}
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		f := strings.Split(line, "\t")
		comm[f[0]] = f[1]
	}
	if len(comm) != 6 || comm["alice"] != comm["bob"] || comm["bob"] != comm["carol"] || comm["dave"] != comm["erin"] || comm["alice"] == comm["dave"] {
		t.Fatalf("two triangles joined by a light edge must come out as two communities: %v", comm)
	}
	// Hand calculation: m = 6.1; each triangle has in = 6 and tot = 6.1, so
	// Q = 2 * (6/12.2 - (6.1/12.2)^2) = 0.483606...
	want := 2 * (6/12.2 - math.Pow(6.1/12.2, 2))
	if math.Abs(r.Modularity-want) > 1e-12 {
		t.Fatalf("Q %v, want %v", r.Modularity, want)
	}
}

// TestDetectBadInput: a bad line exits 2, names the file and line, and
// prints no partial result; --out is not written.
func TestDetectBadInput(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "bad.tsv")
	if err := os.WriteFile(in, []byte("a b 1\nb c 1\nc d NaN\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "m.tsv")
	stdout, stderr, code := runBin(t, "", "detect", in, "--out", out)
	if code != 2 {
		t.Fatalf("exit %d, want 2", code)
	}
	if stdout != "" {
		t.Fatalf("partial output on stdout: %q", stdout)
	}
	if !strings.Contains(stderr, "bad.tsv:3") || !strings.Contains(stderr, "weight") {
		t.Fatalf("error does not name file, line and field: %q", stderr)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatalf("--out written despite the error")
	}
}

// TestUsageErrors: bad usage exits 2 with a message; a missing file exits 1.
func TestUsageErrors(t *testing.T) {
	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"detect"}, 2, "want exactly one FILE"},
		{[]string{"detect", testdata("karate.tsv"), "--resolution", "-1"}, 2, "resolution"},
		{[]string{"detect", testdata("karate.tsv"), "--runs", "0"}, 2, "--runs"},
		{[]string{"detect", testdata("karate.tsv"), "--format", "xml"}, 2, "format"},
		{[]string{"detect", testdata("karate.tsv"), "--bogus"}, 2, "bogus"},
		{[]string{"nosuch"}, 2, "unknown command"},
		{[]string{"detect", filepath.Join(t.TempDir(), "missing.tsv")}, 1, "missing.tsv"},
	} {
		_, errs, code := runIn(t, "", c.args...)
		if code != c.code || !strings.Contains(errs, c.msg) {
			t.Errorf("%v: exit %d (want %d), stderr %q (want %q)", c.args, code, c.code, errs, c.msg)
		}
	}
}

// TestDemo: the invented scenario's planted changes come out as events,
// through the daemon (embedded NATS, Pebble, JetStream events stream) and
// through replay alike: the ring of mule accounts is born, group 12 (which
// stops paying within itself) dies, and the output carries the caution
// about communities. (The daemon applies a partial chunk whenever it has
// caught up with the stream, so its other events depend on how fast the
// demo's publisher runs; only the planted changes are compared.)
func TestDemo(t *testing.T) {
	for _, args := range [][]string{{"demo"}, {"demo", "--replay"}} {
		out, errs, code := runIn(t, "", args...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, errs)
		}
		var birth, death bool
		for _, line := range strings.Split(out, "\n") {
			birth = birth || (strings.Contains(line, " birth ") && strings.Contains(line, "acct-0250"))
			death = death || strings.Contains(line, " death ")
		}
		if !birth || !death || !strings.Contains(out, "not evidence") {
			t.Fatalf("%v: output lacks the ring's birth, the group's death or the caution:\n%s", args, out)
		}
	}
}

// TestDemoAnyBatching: the demo's invented scenario replayed with batches
// of 1, 3, 10, 100 and 1000 events gives the ring's birth on its day (the
// events from the snapshot of Nov 4 to the next) with the ring's members, whatever the
// batching: the daemon's batches follow the arrival of messages, and a
// ring that formed a few payments a batch was once glued to a group of 40
// at batches of 1 to 10 (tracker.Settle before each snapshot fixed it).
func TestDemoAnyBatching(t *testing.T) {
	dir := t.TempDir()
	scenario := filepath.Join(dir, "payments.jsonl")
	f, err := os.Create(scenario)
	if err != nil {
		t.Fatal(err)
	}
	if err := demoScenario(f); err != nil {
		t.Fatal(err)
	}
	f.Close()
	for _, every := range []string{"1", "3", "10", "100", "1000"} {
		out, errs, code := runIn(t, "", "replay", scenario, "--every", "24h", "--min-size", "5", "--apply-every", every, "--members")
		if code != 0 {
			t.Fatalf("--apply-every %s: exit %d: %s", every, code, errs)
		}
		born := false
		for _, ev := range parseEvents(t, out) {
			if ev.Type == events.Birth && strings.HasPrefix(ev.FromTime, "2026-11-04") && slices.Contains(ev.After[0].Members, "acct-0250") && slices.Contains(ev.After[0].Members, "mule-01") {
				born = true
			}
		}
		if !born {
			t.Errorf("--apply-every %s: no birth of the ring (acct-0250, mule-01) in the events from the snapshot of Nov 4", every)
		}
	}
}
