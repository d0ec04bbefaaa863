package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"shoal/tracker/gen"
)

// sharedHubName names the nodes of gen.SharedHub: a0..a4 and b0..b4 the
// two groups, "shop" the hub they share, x<id> the background.
func sharedHubName(v uint32) string {
	switch {
	case v < 5:
		return fmt.Sprintf("a%d", v)
	case v < 10:
		return fmt.Sprintf("b%d", v-5)
	case v == 10:
		return "shop"
	}
	return fmt.Sprintf("x%d", v)
}

// writeSharedHub writes gen.SharedHub's edges as "src dst w time" lines,
// one a minute from 2026-01-01, and returns the file.
func writeSharedHub(t *testing.T) string {
	t.Helper()
	sg, err := gen.SharedHub(gen.SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	for i, e := range sg.Edges {
		fmt.Fprintf(&b, "%s %s 1 %s\n", sharedHubName(e.U), sharedHubName(e.V), t0.Add(time.Duration(i)*time.Minute).Format(time.RFC3339))
	}
	path := filepath.Join(t.TempDir(), "shop.txt")
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// groupsApart reads a node<TAB>community file and reports whether a0..a4
// share a community, b0..b4 another, and whether those two are the same.
func groupsApart(t *testing.T, memb map[string]uint64) (whole bool, same bool) {
	t.Helper()
	whole = true
	for i := range 5 {
		a, b := fmt.Sprintf("a%d", i), fmt.Sprintf("b%d", i)
		whole = whole && memb[a] == memb["a0"] && memb[b] == memb["b0"]
	}
	return whole, memb["a0"] == memb["b0"]
}

// TestDetectHubDegree: shoal detect on two cliques that share only a hub
// (gen.SharedHub; package hub's static test checks against gonum's
// community.Q that modularity at resolution 1 merges them): without a
// policy they come out as one community with the hub; with --hub-degree 8
// (the hub has 10 neighbours, every other node at most 6) as two, the hub
// in none; the JSON counts one hub with its 10 edges, names it, and lists
// it for exactly the two communities of its neighbours; the text summary
// says so.
func TestDetectHubDegree(t *testing.T) {
	in := writeSharedHub(t)
	dir := t.TempDir()
	plain, with := filepath.Join(dir, "plain.tsv"), filepath.Join(dir, "with.tsv")
	if _, errs, code := runIn(t, "", "detect", in, "--out", plain); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	m := readMembershipFile(t, plain)
	if whole, same := groupsApart(t, m); !whole || !same || m["shop"] != m["a0"] {
		t.Fatalf("without a policy: the groups are not one community with the hub: %v", m)
	}

	out, errs, code := runIn(t, "", "detect", in, "--hub-degree", "8", "--json", "--out", with)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	m = readMembershipFile(t, with)
	if whole, same := groupsApart(t, m); !whole || same {
		t.Fatalf("with --hub-degree 8: the groups are not two communities: %v", m)
	}
	if _, ok := m["shop"]; ok {
		t.Fatalf("the hub has a community: %d", m["shop"])
	}
	h := r.Hubs
	if h == nil || h.Hubs != 1 || h.EdgesExcluded != 10 || h.WeightExcluded != 10 || !slices.Equal(h.Names, []string{"shop"}) {
		t.Fatalf("hub report %+v: want 1 hub (shop) with 10 edges of weight 10", h)
	}
	touching := map[uint64]bool{}
	for _, c := range r.PerCommunity {
		if len(c.Hubs) > 0 {
			if !slices.Equal(c.Hubs, []string{"shop"}) {
				t.Errorf("community %d lists hubs %v", c.Community, c.Hubs)
			}
			touching[c.Community] = true
		}
	}
	if len(touching) != 2 || !touching[m["a0"]] || !touching[m["b0"]] {
		t.Errorf("communities listing the hub: %v, want those of a0 (%d) and b0 (%d)", touching, m["a0"], m["b0"])
	}
	if r.Nodes != 130 {
		t.Errorf("%d nodes optimised, want the 131 less the hub", r.Nodes)
	}
	text, _, _ := runIn(t, "", "detect", in, "--hub-degree", "8")
	if !strings.Contains(text, "1 kept out of the optimisation with 10 edges of weight 10") {
		t.Errorf("text summary without the hub counts:\n%s", text)
	}

	for _, bad := range [][]string{{"--hub-degree", "-1"}, {"--hub-percentile", "100"}, {"--hubs", filepath.Join(dir, "missing")}} {
		if _, errs, code := runIn(t, "", append([]string{"detect", in}, bad...)...); code != 2 {
			t.Errorf("%v: exit %d, want 2: %s", bad, code, errs)
		}
	}
}

// TestReplayHubsFile: shoal replay with --hubs FILE (one name per line, #
// comments) keeps the listed hub out: the groups that share it, merged
// without the policy, stay apart, as the lineage's node lines show; the
// summary counts the hub, its edges and the changes dropped. A name the
// input does not have is bad input naming the file and line; so is a name
// given twice.
func TestReplayHubsFile(t *testing.T) {
	in := writeSharedHub(t)
	dir := t.TempDir()
	hubs := filepath.Join(dir, "hubs.txt")
	if err := os.WriteFile(hubs, []byte("# the shop everyone pays\n\nshop\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	lineage := func(args ...string) (map[string]uint64, string) {
		t.Helper()
		hist := filepath.Join(t.TempDir(), "h.jsonl")
		_, errs, code := runIn(t, "", append([]string{"replay", in, "--every", "1h", "--history-out", hist, "--json"}, args...)...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, errs)
		}
		data, err := os.ReadFile(hist)
		if err != nil {
			t.Fatal(err)
		}
		m := map[string]uint64{}
		for _, l := range strings.Split(strings.TrimSpace(string(data)), "\n") {
			var n struct {
				Kind      string `json:"kind"`
				Node      string `json:"node"`
				Community uint64 `json:"community"`
			}
			if err := json.Unmarshal([]byte(l), &n); err != nil {
				t.Fatal(err)
			}
			if n.Kind == "node" {
				m[n.Node] = n.Community
			}
		}
		return m, errs
	}
	m, _ := lineage()
	if whole, same := groupsApart(t, m); !whole || !same {
		t.Fatalf("without a policy the groups are not one community: %v", m)
	}
	m, errs := lineage("--hubs", hubs)
	if whole, same := groupsApart(t, m); !whole || same {
		t.Fatalf("with --hubs the groups are not two communities: %v", m)
	}
	if _, ok := m["shop"]; ok {
		t.Fatal("the hub has a community in the lineage")
	}
	var sum replaySummary
	if err := json.Unmarshal([]byte(errs), &sum); err != nil {
		t.Fatalf("summary %q: %v", errs, err)
	}
	// Every one of the hub's 10 add events touches a listed hub: all
	// dropped.
	if h := sum.Hubs; h == nil || h.Hubs != 1 || h.EdgesExcluded != 10 || h.ChangesDropped != 10 || !strings.Contains(h.Policy, "listed in "+hubs) {
		t.Fatalf("hub report %+v: want 1 listed hub, 10 edges, 10 changes dropped", sum.Hubs)
	}

	for name, content := range map[string]string{"unknown": "shop\n# nobody here\nnobody\n", "twice": "shop\nb1\nshop\n"} {
		path := filepath.Join(dir, name)
		if err := os.WriteFile(path, []byte(content), 0o600); err != nil {
			t.Fatal(err)
		}
		_, errs, code := runIn(t, "", "replay", in, "--every", "1h", "--hubs", path)
		if want := path + ":3:"; code != 2 || !strings.Contains(errs, want) {
			t.Errorf("%s: exit %d, want 2 and %q: %s", name, code, want, errs)
		}
	}
}

// TestDaemonHubs: shoal run with --hubs naming a node not seen yet makes
// it a hub when it appears: in the snapshot taken at exit, a0..a4 and
// b0..b4 are two communities, each listing the hub, which is in none. The
// policy is kept with the store: a restart without the flag keeps it (no
// change logged); --hub-degree 0 alone turns it off (logged).
func TestDaemonHubs(t *testing.T) {
	sg, err := gen.SharedHub(gen.SharedHubOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var msgs []string
	for _, e := range sg.Edges {
		msgs = append(msgs, fmt.Sprintf(`{"op":"add","src":%q,"dst":%q}`, sharedHubName(e.U), sharedHubName(e.V)))
	}
	dir := t.TempDir()
	hubs := filepath.Join(dir, "hubs.txt")
	if err := os.WriteFile(hubs, []byte("shop\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ts := startTestServer(t)
	js := jsConnect(t, ts.url())
	last := publishLines(t, js, "hubd", msgs)
	data := filepath.Join(dir, "data")
	logOf := func(d *daemonProc) string {
		b, err := os.ReadFile(d.stderr)
		if err != nil {
			t.Fatal(err)
		}
		return string(b)
	}
	d := startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "hubd", "--hubs", hubs, "--snapshot-every", "0", "--snapshot-on-exit")
	d.waitApplied(last)
	d.stop()
	if l := logOf(d); !strings.Contains(l, `"policy":"1 listed in `+hubs+`"`) || !strings.Contains(l, "become hubs when they appear") {
		t.Fatalf("first start with --hubs:\n%s", l)
	}
	out, errs, code := runBin(t, "", "export", "snapshot", "latest", "--data", data, "--json")
	if code != 0 {
		t.Fatalf("export: exit %d: %s", code, errs)
	}
	comm := map[string]uint64{}
	hubsOf := map[uint64][]string{}
	for _, l := range strings.Split(strings.TrimSpace(out), "\n") {
		var c struct {
			Kind      string   `json:"kind"`
			Community uint64   `json:"community"`
			Members   []string `json:"members"`
			Hubs      []string `json:"hubs"`
		}
		if err := json.Unmarshal([]byte(l), &c); err != nil {
			t.Fatal(err)
		}
		for _, m := range c.Members {
			comm[m] = c.Community
		}
		hubsOf[c.Community] = c.Hubs
	}
	if whole, same := groupsApart(t, comm); !whole || same {
		t.Fatalf("the groups are not two communities: %v", comm)
	}
	if _, ok := comm["shop"]; ok {
		t.Fatal("the hub is a member of a community")
	}
	for _, v := range []string{"a0", "b0"} {
		if !slices.Equal(hubsOf[comm[v]], []string{"shop"}) {
			t.Errorf("the community of %s lists hubs %v, want [shop]", v, hubsOf[comm[v]])
		}
	}

	d = startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "hubd")
	d.stop()
	if l := logOf(d); !strings.Contains(l, `"policy":"1 listed in the store"`) || strings.Contains(l, "hub policy changed") {
		t.Fatalf("a restart without the flag did not keep the stored policy:\n%s", l)
	}
	d = startDaemon(t, data, nil, "--nats", ts.url(), "--graph", "hubd", "--hub-degree", "0")
	d.stop()
	if l := logOf(d); !strings.Contains(l, "hub policy changed") || !strings.Contains(l, `"policy":"none"`) {
		t.Fatalf("--hub-degree 0 did not turn the stored policy off:\n%s", l)
	}
}
