package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/community"
	"gonum.org/v1/gonum/graph/simple"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// TestDetectScanAndNull: the resolution scan on karate reproduces gonum
// v0.17.0's values at gamma 0.5 (Q = 0.6218, 2 communities) and 2
// (Q = 0.1645, 7 communities; testdata/SOURCES.md, tol 1e-3); the
// recommended resolution follows the modularity rule (nearest 1 with mean
// NMI >= 0.9, chosen threshold); the null model puts karate's Q well above
// rewired graphs (z > 3, a common reading of significance), and each
// community's internal weight above its configuration-model expectation
// tot^2/4m.
func TestDetectScanAndNull(t *testing.T) {
	out, errs, code := runIn(t, "", "detect", testdata("karate.tsv"), "--scan", "0.5:2:0.5", "--null", "5", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.Objective != "modularity" || r.Quality != r.Modularity {
		t.Errorf("objective %q, quality %v, modularity %v: for modularity the quality is Q", r.Objective, r.Quality, r.Modularity)
	}
	if len(r.Scan) != 4 {
		t.Fatalf("%d scan points, want 4 (0.5, 1, 1.5, 2)", len(r.Scan))
	}
	for _, c := range []struct {
		i     int
		q     float64
		comms int
	}{{0, 0.6218, 2}, {3, 0.1645, 7}} {
		sp := r.Scan[c.i]
		if math.Abs(sp.Modularity-c.q) > 1e-3 || sp.Communities != c.comms {
			t.Errorf("gamma %v: Q %.4f with %d communities, gonum %.4f with %d", sp.Resolution, sp.Modularity, sp.Communities, c.q, c.comms)
		}
	}
	want := math.NaN()
	for _, sp := range r.Scan {
		if sp.MeanNMI >= 0.9 && !(math.Abs(sp.Resolution-1) >= math.Abs(want-1)) {
			want = sp.Resolution
		}
	}
	switch {
	case math.IsNaN(want) && r.RecommendedResolution != nil:
		t.Errorf("recommended %v, but no point has mean NMI >= 0.9: %+v", *r.RecommendedResolution, r.Scan)
	case !math.IsNaN(want) && (r.RecommendedResolution == nil || *r.RecommendedResolution != want):
		t.Errorf("recommended %v, want %v (nearest 1 with NMI >= 0.9): %+v", r.RecommendedResolution, want, r.Scan)
	}
	if r.Null == nil || r.Null.Z < 3 || r.Null.Mean >= r.Modularity {
		t.Fatalf("null model: %+v", r.Null)
	}
	for _, c := range r.PerCommunity {
		if c.Internal <= c.Expected {
			t.Errorf("community %d: internal %.1f not above expected %.1f", c.Community, c.Internal, c.Expected)
		}
	}
	for _, bad := range []string{"1:0.5:0.1", "a:b:c", "0.5:2", "0:1:0.1", "automatic"} {
		if _, _, code := runIn(t, "", "detect", testdata("karate.tsv"), "--scan", bad); code != 2 {
			t.Errorf("--scan %s: exit %d, want 2", bad, code)
		}
	}
}

// TestDetectParallelSameOutput: the runs of --runs, --null and --scan go
// to a worker pool and are collected by index, so the JSON output is
// byte-identical with 1, 2 and 4 workers, for both objectives.
func TestDetectParallelSameOutput(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	dir := t.TempDir()
	for _, args := range [][]string{
		{"detect", testdata("karate.tsv"), "--runs", "4", "--null", "3", "--scan", "0.5:1.5:0.5", "--json"},
		{"detect", testdata("football.tsv"), "--objective", "cpm", "--runs", "4", "--null", "3", "--scan", "0.05:0.2:0.05", "--json"},
	} {
		var first string
		var firstUnstable []byte
		for _, procs := range []int{1, 2, 4} {
			runtime.GOMAXPROCS(procs)
			unstable := filepath.Join(dir, fmt.Sprintf("u%d.tsv", procs))
			out, errs, code := runIn(t, "", append(args, "--unstable-out", unstable)...)
			if code != 0 {
				t.Fatalf("%v with GOMAXPROCS %d: exit %d: %s", args, procs, code, errs)
			}
			u, err := os.ReadFile(unstable)
			if err != nil {
				t.Fatal(err)
			}
			if procs == 1 {
				first, firstUnstable = out, u
				if !strings.Contains(out, `"null"`) || !strings.Contains(out, `"scan"`) || !strings.Contains(out, `"runs"`) {
					t.Fatalf("output lacks runs, null or scan: %s", out)
				}
				continue
			}
			if out != first || string(u) != string(firstUnstable) {
				t.Errorf("%v: output with GOMAXPROCS %d differs from 1:\n%s\n%s", args, procs, first, out)
			}
		}
	}
}

// TestParallelPool: every index runs once with its result in its slot, at
// most GOMAXPROCS at a time and more than one at a time when GOMAXPROCS
// allows; after a cancellation no new job starts, the call returns the
// context's error, and no job is still running when it returns.
func TestParallelPool(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	const n = 200
	got := make([]int, n)
	var active, peak atomic.Int32
	meet := make(chan struct{})
	var timedOut atomic.Bool
	err := parallel(context.Background(), n, func(i int) {
		a := active.Add(1)
		for p := peak.Load(); a > p && !peak.CompareAndSwap(p, a); p = peak.Load() {
		}
		switch i {
		case 0: // waits for job 1, which only a second worker can run
			select {
			case <-meet:
			case <-time.After(10 * time.Second):
				timedOut.Store(true)
			}
		case 1:
			close(meet)
		}
		got[i] = i * i
		active.Add(-1)
	})
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range got {
		if v != i*i {
			t.Fatalf("slot %d holds %d, want %d", i, v, i*i)
		}
	}
	if timedOut.Load() || peak.Load() != 2 {
		t.Errorf("peak of %d jobs at once (job 0 timed out waiting: %v), want 2 with GOMAXPROCS 2", peak.Load(), timedOut.Load())
	}

	ctx, cancel := context.WithCancel(context.Background())
	var started, finished atomic.Int32
	err = parallel(ctx, n, func(i int) {
		started.Add(1)
		if i == 10 {
			cancel()
		}
		finished.Add(1)
	})
	if !errors.Is(err, context.Canceled) {
		t.Errorf("err %v, want context.Canceled", err)
	}
	if s, f := started.Load(), finished.Load(); s != f || s >= n || s < 11 {
		t.Errorf("%d jobs started, %d finished at return; want all started ones finished, fewer than %d", s, f, n)
	}
}

// TestDetectCancelled: a cancelled context stops detect before its runs
// (exit 1, the context's error) and prints no result.
func TestDetectCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	var out, errb strings.Builder
	code := run(ctx, &env{stdin: strings.NewReader(""), stdout: &out, stderr: &errb}, []string{"detect", testdata("karate.tsv"), "--runs", "4", "--json"})
	if code != 1 || out.Len() != 0 || !strings.Contains(errb.String(), "context canceled") {
		t.Errorf("exit %d, stdout %q, stderr %q; want 1, nothing, the context's error", code, out.String(), errb.String())
	}
}

// TestDetectCPM: with --objective cpm the best run is picked by the CPM
// value H (Traag, Van Dooren and Nesterov 2011: H = sum over communities
// of e_c - gamma n_c (n_c - 1) / 2), recomputed here from the membership
// file; its modularity is Q at resolution 1 by gonum v0.17.0's
// community.Q; each community's expected weight and z are those of the
// configuration model on a weighted graph (checkInternalZ); the text names
// the number; and a scan point at the same
// resolution and seeds finds the same best run, so the scan runs CPM too.
// On the weighted Les Miserables (Knuth 1993) at gamma 0.2 the eight seeds'
// best by H and best by modularity are different runs (measured here), so
// picking by modularity fails the check.
func TestDetectCPM(t *testing.T) {
	mfile := filepath.Join(t.TempDir(), "m.tsv")
	out, errs, code := runIn(t, "", "detect", testdata("lesmis.tsv"), "--objective", "cpm", "--resolution", "0.2", "--runs", "8", "--out", mfile, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	edges := readEdgeFile(t, testdata("lesmis.tsv"))
	memb := readMembershipFile(t, mfile)
	if r.Objective != "cpm" || r.Resolution != 0.2 {
		t.Errorf("objective %q at %v, want cpm at 0.2", r.Objective, r.Resolution)
	}
	if h := cpmByHand(edges, memb, nil, 0.2); math.Abs(r.Quality-h) > 1e-9*math.Abs(h) {
		t.Errorf("H %v, by the formula %v", r.Quality, h)
	}
	if q := gonumQ(edges, memb, 1); math.Abs(r.Modularity-q) > 1e-9 {
		t.Errorf("modularity %v, gonum's community.Q at resolution 1 %v", r.Modularity, q)
	}
	checkInternalZ(t, "lesmis.tsv", &r, edges, memb)
	bestQ := math.Inf(-1)
	var bestSeed uint64
	for _, run := range r.Runs {
		if run.Quality > bestQ {
			bestQ, bestSeed = run.Quality, run.Seed
		}
	}
	if len(r.Runs) != 8 || r.Quality != bestQ || r.Seed != bestSeed {
		t.Errorf("reported H %v of seed %d; the best run by H is seed %d with %v", r.Quality, r.Seed, bestSeed, bestQ)
	}
	text, _, _ := runIn(t, "", "detect", testdata("lesmis.tsv"), "--objective", "cpm", "--resolution", "0.2")
	if !strings.Contains(text, "CPM value H = ") || !strings.Contains(text, "modularity at resolution 1") {
		t.Errorf("text does not say what the numbers are:\n%s", text)
	}
	out, errs, code = runIn(t, "", "detect", testdata("lesmis.tsv"), "--objective", "cpm", "--runs", "8", "--scan", "0.2:0.3:0.1", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s detectResult
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if len(s.Scan) != 2 || s.Scan[0].Resolution != 0.2 || s.Scan[0].Quality != r.Quality || s.Scan[0].Modularity != r.Modularity {
		t.Errorf("scan point %+v; detect at 0.2 with the same 8 seeds: H %v, Q %v", s.Scan, r.Quality, r.Modularity)
	}
}

// TestDetectScanCPMRecommend: four 6-cliques joined in a ring by single
// edges (invented). CPM keeps a community when it holds more than gamma
// times its pairs (Traag, Van Dooren and Nesterov 2011), so for gamma in
// (0.03, 1) every seed returns the four cliques (mean NMI 1), and at gamma
// >= 1 a clique (15 edges, 15 pairs) is worth nothing and the seeds return
// singletons, which agree too. The most stable non-trivial point, ties to
// the larger gamma, is 0.75 of 0.15, 0.45, 0.75, 1.05, 1.35.
func TestDetectScanCPMRecommend(t *testing.T) {
	var b strings.Builder
	for c := 0; c < 4; c++ {
		for i := 0; i < 6; i++ {
			for j := i + 1; j < 6; j++ {
				fmt.Fprintf(&b, "n%d n%d\n", 6*c+i, 6*c+j)
			}
		}
		fmt.Fprintf(&b, "n%d n%d\n", 6*c+5, (6*c+6)%24)
	}
	out, errs, code := runIn(t, b.String(), "detect", "-", "--objective", "cpm", "--scan", "0.15:1.35:0.3", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Scan) != 5 {
		t.Fatalf("%d points, want 5: %+v", len(r.Scan), r.Scan)
	}
	for _, sp := range r.Scan {
		want := 4
		if sp.Resolution > 1 {
			want = 24
		}
		if sp.Communities != want || sp.MeanNMI < 1-1e-9 {
			t.Errorf("gamma %v: %d communities, mean NMI %v; want %d and 1", sp.Resolution, sp.Communities, sp.MeanNMI, want)
		}
	}
	if r.RecommendedResolution == nil || *r.RecommendedResolution != 0.75 {
		t.Errorf("recommended %v, want 0.75: %+v", r.RecommendedResolution, r.Scan)
	}
}

// TestDetectScanAuto: --scan auto takes 0.5 to 2 for modularity; for CPM
// it runs log-spaced from the graph's density, weight over node pairs, to
// its mean edge weight (karate: 78 edges over 34 nodes, testdata/SOURCES.md;
// the weighted karate's weights summed from the file).
func TestDetectScanAuto(t *testing.T) {
	scan := func(args ...string) []scanPoint {
		t.Helper()
		out, errs, code := runIn(t, "", append([]string{"detect", "--scan", "auto", "--json"}, args...)...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, errs)
		}
		var r detectResult
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return r.Scan
	}
	mod := scan(testdata("karate.tsv"))
	if len(mod) < 3 || mod[0].Resolution != 0.5 || mod[len(mod)-1].Resolution != 2 {
		t.Errorf("modularity auto scan %+v, want 0.5 to 2", mod)
	}
	wsum := 0.0
	wedges := readEdgeFile(t, testdata("karate_weighted.tsv"))
	for _, e := range wedges {
		wsum += e.w
	}
	for _, c := range []struct {
		file   string
		lo, hi float64
	}{
		{"karate.tsv", 78.0 / (34 * 33 / 2), 1},
		{"karate_weighted.tsv", wsum / (34 * 33 / 2), wsum / float64(len(wedges))},
	} {
		sp := scan(testdata(c.file), "--objective", "cpm")
		if len(sp) < 5 {
			t.Fatalf("%s: %d points, want at least 5", c.file, len(sp))
		}
		first, last := sp[0].Resolution, sp[len(sp)-1].Resolution
		if math.Abs(first/c.lo-1) > 5e-3 || math.Abs(last/c.hi-1) > 5e-3 {
			t.Errorf("%s: cpm auto scan %v..%v, want %v..%v (3 significant digits)", c.file, first, last, c.lo, c.hi)
		}
		step := math.Log(last/first) / float64(len(sp)-1)
		for i := 1; i < len(sp); i++ {
			if d := math.Log(sp[i].Resolution / sp[i-1].Resolution); math.Abs(d-step) > 0.01 {
				t.Errorf("%s: step %d is a factor %v, want %v (log-spaced)", c.file, i, math.Exp(d), math.Exp(step))
			}
		}
	}
}

// TestDetectNodeStability: on the GN benchmark (Girvan and Newman 2002,
// testdata/SOURCES.md) at mixing 0.1 every run finds the four planted
// groups, so every node is stable; at mixing 0.5, where half of each
// node's links leave its group and the groups are barely communities,
// the seeds disagree and many nodes fall below 0.9. --unstable-out lists
// exactly the nodes below the threshold, sorted by stability then name,
// each with its community in --out and a share of the nine other runs;
// the JSON counts them, and the members' means per community add up to the
// overall mean. On karate (Zachary 1977) the instructor and the
// administrator (nodes 0 and 33, the centres of the factions of
// testdata/karate_labels.tsv) are stable. --unstable-out without --runs >=
// 2 is a usage error that points at --runs.
func TestDetectNodeStability(t *testing.T) {
	dir := t.TempDir()
	ufile, mfile := filepath.Join(dir, "u.tsv"), filepath.Join(dir, "m.tsv")
	stab := func(file string) (detectResult, []string) {
		t.Helper()
		out, errs, code := runIn(t, "", "detect", testdata(file), "--runs", "10", "--unstable-out", ufile, "--out", mfile, "--json")
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var r detectResult
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		data, err := os.ReadFile(ufile)
		if err != nil {
			t.Fatal(err)
		}
		var lines []string
		if len(data) > 0 {
			lines = strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
		}
		ns := r.NodeStability
		if ns == nil || ns.Unstable != len(lines) || ns.Below != 0.9 {
			t.Fatalf("%s: node_stability %+v, file lists %d nodes", file, ns, len(lines))
		}
		sum := 0.0
		for _, c := range r.PerCommunity {
			if c.Stability == nil {
				t.Fatalf("%s: community %d has no stability", file, c.Community)
			}
			sum += *c.Stability * float64(c.Size)
		}
		if math.Abs(sum/float64(r.Nodes)-ns.Mean) > 1e-9 {
			t.Errorf("%s: mean stability %v, from the communities %v", file, ns.Mean, sum/float64(r.Nodes))
		}
		return r, lines
	}
	if r, lines := stab("gn_benchmark_mu010_edges.tsv"); len(lines) != 0 || r.NodeStability.Mean != 1 {
		t.Errorf("GN mixing 0.1: %d nodes unstable, mean %v; want every node stable", len(lines), r.NodeStability.Mean)
	}
	r, lines := stab("gn_benchmark_mu050_edges.tsv")
	if 4*len(lines) < r.Nodes {
		t.Errorf("GN mixing 0.5: %d of %d nodes below 0.9, want a quarter or more", len(lines), r.Nodes)
	}
	memb := readMembershipFile(t, mfile)
	prevS, prevName := -1.0, ""
	for _, line := range lines {
		f := strings.Split(line, "\t")
		if len(f) != 3 {
			t.Fatalf("line %q: want node, community, stability", line)
		}
		s, err := strconv.ParseFloat(f[2], 64)
		if err != nil || s >= 0.9 || s < 0 {
			t.Errorf("line %q: stability not in [0, 0.9)", line)
		}
		if k := s * 9; math.Abs(k-math.Round(k)) > 1e-3 {
			t.Errorf("line %q: stability is not a share of 9 runs", line)
		}
		if c, _ := strconv.ParseUint(f[1], 10, 64); c != memb[f[0]] {
			t.Errorf("line %q: community %s, --out says %d", line, f[1], memb[f[0]])
		}
		if s < prevS || (s == prevS && f[0] <= prevName) {
			t.Errorf("line %q out of order after %s %v", line, prevName, prevS)
		}
		prevS, prevName = s, f[0]
	}
	_, lines = stab("karate.tsv")
	for _, line := range lines {
		if f := strings.Split(line, "\t"); f[0] == "0" || f[0] == "33" {
			t.Errorf("karate: faction centre listed as unstable: %q", line)
		}
	}
	for _, args := range [][]string{
		{"--unstable-out", ufile},
		{"--runs", "1", "--unstable-out", ufile},
		{"--runs", "5", "--unstable-below", "0"},
		{"--runs", "5", "--unstable-below", "1.5"},
	} {
		_, errs, code := runIn(t, "", append([]string{"detect", testdata("karate.tsv")}, args...)...)
		if code != 2 || !strings.Contains(errs, "--") {
			t.Errorf("%v: exit %d, stderr %q; want a usage error", args, code, errs)
		}
		if args[0] == "--unstable-out" && !strings.Contains(errs, "--runs") {
			t.Errorf("%v: %q does not point at --runs", args, errs)
		}
	}
}

// TestDetectSignificance: the configuration model (doc.go, Validation)
// expects tot^2/4m inside a community of summed degree tot and, the
// internal edge count being Poisson, z = (internal - expected) /
// sqrt(wbar expected); both are recomputed here from --out and the edge
// file. Against 100 rewirings, the main communities (5% of the nodes or
// more) of football (Girvan and Newman 2002: the conferences) and of Les
// Miserables (Knuth 1993, unweighted as in testdata/SOURCES.md) have
// calibrated z above 3 (common practice); football's are all significant
// at 1% after the Bonferroni correction, and at least half of Les
// Miserables' are (tracker/signif_test.go measures 4 of 6: two miss the
// corrected bound by a little). The text says how many are significant.
// Five graphs drawn from the configuration model itself (rewired
// football) have none flagged: at 1% after the correction a graph is
// flagged about once in a hundred (tracker/signif_test.go measures the
// rate).
func TestDetectSignificance(t *testing.T) {
	dir := t.TempDir()
	lesmis := filepath.Join(dir, "lesmis_unweighted.tsv")
	var lb strings.Builder
	for _, e := range readEdgeFile(t, testdata("lesmis.tsv")) {
		fmt.Fprintf(&lb, "%s\t%s\n", e.u, e.v)
	}
	if err := os.WriteFile(lesmis, []byte(lb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{testdata("football.tsv"), lesmis} {
		mfile := filepath.Join(dir, "m.tsv")
		out, errs, code := runIn(t, "", "detect", f, "--null", "100", "--out", mfile, "--json")
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var r detectResult
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		name := filepath.Base(f)
		checkInternalZ(t, name, &r, readEdgeFile(t, f), readMembershipFile(t, mfile))
		main, sig := 0, 0
		for _, c := range r.PerCommunity {
			if c.P == nil || c.Significant == nil {
				t.Fatalf("%s community %d: no p or significant with --null", name, c.Community)
			}
			if *c.Significant != (*c.P < 0.01/float64(r.Null.Tested)) {
				t.Errorf("%s community %d: p %v, significant %v, Bonferroni bound 0.01/%d", name, c.Community, *c.P, *c.Significant, r.Null.Tested)
			}
			if float64(c.Size) < 0.05*float64(r.Nodes) {
				continue
			}
			main++
			if *c.Significant {
				sig++
			}
			if c.ZNull == nil || *c.ZNull <= 3 || (name == "football.tsv" && !*c.Significant) {
				t.Errorf("%s community %d of %d members: z_null %v, p %v, significant %v; want z > 3 (football: significant)", name, c.Community, c.Size, c.ZNull, *c.P, *c.Significant)
			}
		}
		t.Logf("%s: %d of %d main communities significant", name, sig, main)
		if main < 3 || 2*sig < main || r.Null.Tested != r.Communities {
			t.Errorf("%s: %d of %d main communities significant, %d tested of %d", name, sig, main, r.Null.Tested, r.Communities)
		}
		text, _, _ := runIn(t, "", "detect", f, "--null", "100")
		if want := fmt.Sprintf("%d of %d communities significant at 0.01 after a Bonferroni correction", r.Null.Significant, r.Communities); !strings.Contains(text, want) {
			t.Errorf("%s: text lacks %q:\n%s", name, want, text)
		}
	}
	n, es := 0, readEdgeFile(t, testdata("football.tsv"))
	var tes []tracker.Edge
	for _, e := range es {
		u, _ := strconv.Atoi(e.u)
		v, _ := strconv.Atoi(e.v)
		n = max(n, u+1, v+1)
		tes = append(tes, tracker.Edge{U: uint32(u), V: uint32(v), W: e.w})
	}
	for seed := uint64(1); seed <= 5; seed++ {
		rg := tracker.Rewire(tracker.NewGraph(n, tes), seed, 10*len(tes))
		var b strings.Builder
		for _, e := range rg.EdgeList(nil) {
			fmt.Fprintf(&b, "%d\t%d\n", e.U, e.V)
		}
		out, errs, code := runIn(t, b.String(), "detect", "-", "--null", "100", "--json")
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var r detectResult
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		if r.Null.Significant != 0 {
			t.Errorf("rewired football (seed %d): %d communities flagged significant", seed, r.Null.Significant)
		}
	}
}

// TestDetectNodeWeights: two triangles {a,b,c} {d,e,f} joined by c-d
// (invented). With CPM at gamma 0.5 and unit weights, H = 2 (3 - 0.5 * 3) =
// 3 for the two triangles; with node a weighing 10, a community holding a
// counts n(n-1)/2 pairs with n its summed weight (Traag, Van Dooren and
// Nesterov 2011), so by hand the best is {a} (-22.5), {b,c} (0.5), {d,e,f}
// (1.5): H = -20.5. Bad weight files are bad input naming file and line.
func TestDetectNodeWeights(t *testing.T) {
	dir := t.TempDir()
	graphIn := "a b\nb c\nc a\nd e\ne f\nf d\nc d\n"
	wfile := filepath.Join(dir, "w.tsv")
	write := func(s string) {
		if err := os.WriteFile(wfile, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	detect := func(args ...string) detectResult {
		t.Helper()
		out, errs, code := runIn(t, graphIn, append([]string{"detect", "-", "--objective", "cpm", "--resolution", "0.5", "--json"}, args...)...)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var r detectResult
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return r
	}
	if r := detect(); math.Abs(r.Quality-3) > 1e-12 || r.Communities != 2 {
		t.Errorf("unit weights: H %v with %d communities, want 3 with 2", r.Quality, r.Communities)
	}
	write("# invented\n\na\t10\nb 1\n")
	r := detect("--node-weights", wfile)
	if math.Abs(r.Quality-(-20.5)) > 1e-12 || r.Communities != 3 || fmt.Sprint(r.Sizes) != "[3 2 1]" {
		t.Errorf("a weighs 10: H %v, sizes %v; want -20.5 with {a} {b,c} {d,e,f}", r.Quality, r.Sizes)
	}
	for _, c := range []struct{ file, want string }{
		{"a\t2\nzed\t2\n", "w.tsv:2"},
		{"a\t0\n", "w.tsv:1"},
		{"a\t-1\n", "w.tsv:1"},
		{"# x\na\tNaN\n", "w.tsv:2"},
		{"a\tInf\n", "w.tsv:1"},
		{"a\n", "w.tsv:1"},
		{"a\t2\nb\t3\na\t4\n", "w.tsv:3"},
	} {
		write(c.file)
		_, errs, code := runIn(t, graphIn, "detect", "-", "--objective", "cpm", "--node-weights", wfile)
		if code != 2 || !strings.Contains(errs, c.want) {
			t.Errorf("weights %q: exit %d, stderr %q; want 2 naming %s", c.file, code, errs, c.want)
		}
	}
	if _, errs, code := runIn(t, graphIn, "detect", "-", "--node-weights", filepath.Join(dir, "none.tsv")); code != 1 || !strings.Contains(errs, "none.tsv") {
		t.Errorf("missing weights file: exit %d, stderr %q", code, errs)
	}
}

// TestDetectCPMWeightWarning: the default CPM resolution is for unit
// weights (tracker.DefaultCPMResolution); on the weighted karate (mean
// weight about 3) detect warns and points at --scan auto, unless the
// resolution was given; unit weights and modularity give no warning.
func TestDetectCPMWeightWarning(t *testing.T) {
	for _, c := range []struct {
		args []string
		warn bool
	}{
		{[]string{testdata("karate_weighted.tsv"), "--objective", "cpm"}, true},
		{[]string{testdata("karate_weighted.tsv"), "--objective", "cpm", "--resolution", "0.05"}, false},
		{[]string{testdata("karate.tsv"), "--objective", "cpm"}, false},
		{[]string{testdata("karate_weighted.tsv")}, false},
	} {
		_, errs, code := runIn(t, "", append([]string{"detect"}, c.args...)...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", c.args, code, errs)
		}
		if got := strings.Contains(errs, "warning") && strings.Contains(errs, "--scan auto"); got != c.warn {
			t.Errorf("%v: stderr %q, want a warning: %v", c.args, errs, c.warn)
		}
	}
}

// checkInternalZ recomputes each community's expected internal weight
// under the configuration model, tot^2/4m, and its z, (internal -
// expected) / sqrt(wbar expected) with wbar the mean edge weight (a
// Poisson count of edges of mean weight wbar; doc.go, Validation), from
// the edge file and the membership.
func checkInternalZ(t *testing.T, name string, r *detectResult, edges []fileEdge, memb map[string]uint64) {
	t.Helper()
	in, deg := map[uint64]float64{}, map[uint64]float64{}
	m := 0.0
	for _, e := range edges {
		m += e.w
		deg[memb[e.u]] += e.w
		deg[memb[e.v]] += e.w
		if memb[e.u] == memb[e.v] {
			in[memb[e.u]] += e.w
		}
	}
	wbar := m / float64(len(edges))
	if len(r.PerCommunity) != r.Communities {
		t.Fatalf("%s: %d communities described, %d found", name, len(r.PerCommunity), r.Communities)
	}
	for _, c := range r.PerCommunity {
		exp := deg[c.Community] * deg[c.Community] / (4 * m)
		z := (in[c.Community] - exp) / math.Sqrt(wbar*exp)
		if math.Abs(c.Expected-exp) > 1e-9*exp || math.Abs(c.Z-z) > 1e-9*math.Abs(z) {
			t.Errorf("%s community %d: expected %v, z %v; by hand %v, %v", name, c.Community, c.Expected, c.Z, exp, z)
		}
	}
}

type fileEdge struct {
	u, v string
	w    float64
}

// readEdgeFile reads "u v [w]" lines (# comments), independently of ingest.
func readEdgeFile(t *testing.T, path string) []fileEdge {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []fileEdge
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fs := strings.Fields(sc.Text())
		if len(fs) == 0 || strings.HasPrefix(fs[0], "#") {
			continue
		}
		e := fileEdge{u: fs[0], v: fs[1], w: 1}
		if len(fs) > 2 {
			if e.w, err = strconv.ParseFloat(fs[2], 64); err != nil {
				t.Fatal(err)
			}
		}
		out = append(out, e)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

func readMembershipFile(t *testing.T, path string) map[string]uint64 {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]uint64{}
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		f := strings.Split(line, "\t")
		c, err := strconv.ParseUint(f[1], 10, 64)
		if err != nil {
			t.Fatal(err)
		}
		out[f[0]] = c
	}
	return out
}

// cpmByHand is H = sum over communities of e_c - gamma n_c (n_c - 1) / 2
// (Traag, Van Dooren and Nesterov 2011), n_c the summed node weight (1 by
// default).
func cpmByHand(edges []fileEdge, memb map[string]uint64, nw map[string]float64, gamma float64) float64 {
	n := map[uint64]float64{}
	for v, c := range memb {
		w := 1.0
		if x, ok := nw[v]; ok {
			w = x
		}
		n[c] += w
	}
	h := 0.0
	for _, e := range edges {
		if memb[e.u] == memb[e.v] {
			h += e.w
		}
	}
	for _, x := range n {
		h -= gamma * x * (x - 1) / 2
	}
	return h
}

// gonumQ is gonum v0.17.0's community.Q of the membership.
func gonumQ(edges []fileEdge, memb map[string]uint64, gamma float64) float64 {
	names := make([]string, 0, len(memb))
	for v := range memb {
		names = append(names, v)
	}
	sort.Strings(names)
	id := map[string]int64{}
	g := simple.NewWeightedUndirectedGraph(0, 0)
	for i, v := range names {
		id[v] = int64(i)
		g.AddNode(simple.Node(i))
	}
	for _, e := range edges {
		u, v := g.Node(id[e.u]), g.Node(id[e.v])
		w := e.w
		if old, ok := g.Weight(u.ID(), v.ID()); ok {
			w += old
		}
		g.SetWeightedEdge(g.NewWeightedEdge(u, v, w))
	}
	groups := map[uint64][]graph.Node{}
	for _, v := range names {
		groups[memb[v]] = append(groups[memb[v]], g.Node(id[v]))
	}
	var comms [][]graph.Node
	for _, c := range groups {
		comms = append(comms, c)
	}
	return community.Q(g, comms, gamma)
}

// TestDetectRecommendedCPM: on an invented graph of many small planted
// groups (LFR, groups of 8 to 30, mean degree 8, a quarter of each node's
// links outside; about 10^5 edges), `detect --objective cpm --scan auto`
// recommends a resolution at which CPM recovers at least 99% of the groups
// (a group counts when one community matches it with Jaccard >= 0.8), and
// the recommendation sits between the density of the links between groups
// and the groups' own mean density.
func TestDetectRecommendedCPM(t *testing.T) {
	g, err := gen.LFR(gen.LFROptions{N: 25000, AvgDegree: 8, MaxDegree: 20, MinCommunity: 8, MaxCommunity: 30, Mu: 0.25, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "groups.tsv")
	f, err := os.Create(file)
	if err != nil {
		t.Fatal(err)
	}
	if err := gen.WriteEdgeList(f, g); err != nil {
		t.Fatal(err)
	}
	f.Close()
	out, errs, code := runIn(t, "", "detect", file, "--objective", "cpm", "--scan", "auto", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var res struct {
		RecommendedResolution *float64 `json:"recommended_resolution"`
	}
	if err := json.Unmarshal([]byte(out), &res); err != nil || res.RecommendedResolution == nil {
		t.Fatalf("no recommended resolution (%v): %s", err, out)
	}
	gamma := *res.RecommendedResolution
	memb := filepath.Join(dir, "memb.tsv")
	if _, errs, code := runIn(t, "", "detect", file, "--objective", "cpm", "--resolution", strconv.FormatFloat(gamma, 'g', -1, 64), "--out", memb); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	found := map[string]string{}
	data, err := os.ReadFile(memb)
	if err != nil {
		t.Fatal(err)
	}
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		k, v, _ := strings.Cut(line, "\t")
		found[k] = v
	}
	size := map[string]int{}
	for _, c := range found {
		size[c]++
	}
	groups := make([][]int, g.Communities())
	for i, c := range g.Membership {
		groups[c] = append(groups[c], i)
	}
	recovered := 0
	var density float64
	inside := 0
	for _, grp := range groups {
		cnt := map[string]int{}
		for _, u := range grp {
			cnt[found[strconv.Itoa(u)]]++
		}
		for c, x := range cnt {
			if float64(x)/float64(len(grp)+size[c]-x) >= 0.8 {
				recovered++
				break
			}
		}
	}
	in := make([]int, len(groups))
	for _, e := range g.Edges {
		if g.Membership[e.U] == g.Membership[e.V] {
			in[g.Membership[e.U]]++
			inside++
		}
	}
	for c, grp := range groups {
		s := float64(len(grp))
		density += float64(in[c]) / (s * (s - 1) / 2)
	}
	density /= float64(len(groups))
	between := float64(len(g.Edges)-inside) / (float64(g.N) * float64(g.N-1) / 2)
	t.Logf("recommended %g: %d of %d groups recovered; group density %.3f, between %.2g", gamma, recovered, len(groups), density, between)
	if float64(recovered) < 0.99*float64(len(groups)) {
		t.Errorf("at the recommended %g CPM recovers %d of %d groups, want >= 99%%", gamma, recovered, len(groups))
	}
	if gamma <= between || gamma >= density {
		t.Errorf("recommended %g outside (%g, %g), the densities between and inside the groups", gamma, between, density)
	}
}
