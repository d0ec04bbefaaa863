package main

import (
	"bufio"
	"bytes"
	"context"
	_ "embed"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"slices"
	"strconv"
	"strings"
	"time"

	"shoal/tracker"
	"shoal/tracker/gen"
)

// refsScript is the reference side of `shoal-bench refs`: igraph's and
// leidenalg's Leiden on the same edge file, timed around the algorithm
// call alone (refs.py says how).
//
//go:embed refs.py
var refsScript []byte

// refsRow is one method on one graph in `shoal-bench refs`.
type refsRow struct {
	Kind      string `json:"kind"` // "method"
	Graph     string `json:"graph"`
	Nodes     int    `json:"nodes"`
	Edges     int    `json:"edges"`
	Groups    int    `json:"planted_groups"`
	Objective string `json:"objective"`
	Method    string `json:"method"`
	// Iterations is the Leiden iteration count given to a reference (-1:
	// until stable); shoal always runs until local moving stops.
	Iterations int `json:"iterations,omitempty"`
	Runs       int `json:"runs"`
	// Seconds is the median over the runs (seeds 0..runs-1) of the
	// algorithm alone; Speedup is a reference's Seconds over shoal's on the
	// same graph and objective.
	Seconds float64 `json:"seconds"`
	Speedup float64 `json:"shoal_speedup,omitempty"`
	// The best run by the objective (H for cpm, Q for modularity), every
	// method scored by the same functions: tracker.CPM at the benchmark's
	// resolution, tracker.Modularity at resolution 1.
	BestSeed    int     `json:"best_seed"`
	Communities int     `json:"communities"`
	H           float64 `json:"cpm_h"`
	Q           float64 `json:"modularity_q"`
	// Recovered is the share of planted groups that one found community
	// matches with Jaccard similarity >= 0.8.
	Recovered float64 `json:"recovered"`
}

// refsMemRow is the resident memory of shoal's side on one graph: a child
// process (this binary, `refs-peak`) reads the edge file, builds the graph,
// drops the edge list and runs one Detect (seed 0) with GOMAXPROCS=1. The
// per-edge figures are above the child's resident size before it read the
// file (Baseline: the runtime and this binary's code), so they hold what
// the graph and the run take.
type refsMemRow struct {
	Kind      string `json:"kind"` // "memory"
	Graph     string `json:"graph"`
	Edges     int    `json:"edges"`
	Objective string `json:"objective"`
	Baseline  int64  `json:"baseline_rss_bytes"`
	GraphRSS  int64  `json:"graph_rss_bytes"`
	// DetectPeak is the peak resident size during Detect, the graph
	// included (VmHWM after resetting it once the graph was built; 0 when
	// /proc/self/clear_refs is not writable).
	DetectPeak int64 `json:"detect_peak_bytes,omitempty"`
	// ProcessPeak is the child's peak resident size over its whole life
	// (VmHWM; getrusage's maxrss would keep this process's peak across
	// fork and exec on Linux), parsing the edge file included.
	ProcessPeak int64   `json:"process_peak_bytes"`
	GraphPerE   float64 `json:"graph_bytes_per_edge"`
	DetectPerE  float64 `json:"detect_peak_bytes_per_edge,omitempty"`
	// The reference process (python, igraph's graph, every run of both
	// libraries on this graph): its peak above its size after the imports.
	PythonBaseline int64   `json:"python_baseline_bytes,omitempty"`
	PythonPeak     int64   `json:"python_peak_bytes,omitempty"`
	PythonPerE     float64 `json:"python_peak_bytes_per_edge,omitempty"`
	Communities    int     `json:"communities"`
}

// refsGraphs are the invented graphs of `shoal-bench refs`, all from
// tracker/gen with seed 1:
//
//   - lfr-small: LFR (Lancichinetti, Fortunato and Radicchi 2008) with
//     many small planted groups, sizes 8 to 30, <k> = 8, k_max = 20, mu =
//     0.25; N = edges / 4 gives about 10^5, 10^6 and (with --max-edges
//     10000000) 10^7 edges. Scored with CPM and with modularity.
//   - planted: a planted partition (Condon and Karp 2001) of 90000 nodes
//     in 90 groups of 1000, <k> = 20, mu = 0.3: about 9 x 10^5 edges, with
//     groups large enough that modularity need not merge them (measured:
//     the planted partition has Q = 0.6885, and leidenalg finds it).
//     Modularity only.
type refsGraph struct {
	name       string
	g          *gen.Graph
	objectives []tracker.Objective
}

func refsGraphList(maxEdges int) []func() (*refsGraph, error) {
	var makers []func() (*refsGraph, error)
	for _, e := range []int{100_000, 1_000_000, 10_000_000} {
		if e > maxEdges {
			continue
		}
		makers = append(makers, func() (*refsGraph, error) {
			g, err := gen.LFR(gen.LFROptions{N: e / 4, AvgDegree: 8, MaxDegree: 20, MinCommunity: 8, MaxCommunity: 30, Mu: 0.25, Seed: 1})
			return &refsGraph{name: "lfr-small", g: g, objectives: []tracker.Objective{tracker.ObjectiveCPM, tracker.ObjectiveModularity}}, err
		})
	}
	if maxEdges >= 900_000 {
		makers = append(makers, func() (*refsGraph, error) {
			g, err := gen.Planted(gen.PlantedOptions{N: 90_000, Groups: 90, AvgDegree: 20, Mu: 0.3, Seed: 1})
			return &refsGraph{name: "planted", g: g, objectives: []tracker.Objective{tracker.ObjectiveModularity}}, err
		})
	}
	return makers
}

// runRefs is `shoal-bench refs`: shoal's static Detect in-process against
// igraph's and leidenalg's Leiden through python3, on the same generated
// graphs in the same run, CPM and modularity.
//
//	shoal-bench refs [--max-edges N] [--seeds K] [--resolution G] [--python PATH]
//	                 [--igraph-iterations I] [--leidenalg-iterations I] [--json]
func runRefs(ctx context.Context, args []string, w io.Writer) error {
	fs, maxEdges, asJSON := commonFlags("refs")
	seeds := fs.Int("seeds", 3, "runs per method, seeds 0..K-1: the median time and the best partition are reported")
	gamma := fs.Float64("resolution", tracker.DefaultCPMResolution, "CPM resolution, the same for every method")
	python := fs.String("python", "", "python3 that imports igraph and leidenalg (default: /usr/bin/python3, then python3 on PATH)")
	igIter := fs.Int("igraph-iterations", -1, "n_iterations of igraph's community_leiden (-1: until stable)")
	laIter := fs.Int("leidenalg-iterations", 2, "n_iterations of leidenalg.find_partition (2: its default; -1: until stable, measured 12 times slower for modularity at 10^6 edges)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *seeds < 1 || !(*gamma > 0) {
		return errors.New("--seeds must be >= 1 and --resolution > 0")
	}
	makers := refsGraphList(*maxEdges)
	if len(makers) == 0 {
		return fmt.Errorf("--max-edges %d: the smallest graph has 10^5 edges", *maxEdges)
	}
	note := func(format string, a ...any) {
		out := w
		if *asJSON {
			out = os.Stderr
		}
		fmt.Fprintf(out, format+"\n", a...)
	}
	py, versions, tried := findRefPython(*python)
	if py == "" {
		note("no python3 that imports igraph and leidenalg (tried %s): install them with\n"+
			"  apt-get install python3-igraph python3-leidenalg\n"+
			"(or pass --python PATH); running shoal's side only.", strings.Join(tried, ", "))
	}
	dir, err := os.MkdirTemp("", "shoal-bench-refs")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	script := filepath.Join(dir, "refs.py")
	if err := os.WriteFile(script, refsScript, 0o644); err != nil {
		return err
	}
	self, err := os.Executable()
	if err != nil {
		return err
	}
	note("invented graphs (tracker/gen, seed 1); CPM resolution %g; %d seeds per method; shoal: tracker.Detect in-process with GOMAXPROCS=1 around each timed run; "+
		"igraph community_leiden n_iterations=%d, leidenalg find_partition n_iterations=%d (both single-threaded); every partition scored by tracker.CPM and tracker.Modularity",
		*gamma, *seeds, *igIter, *laIter)

	if py != "" {
		note("references: %s (python, igraph, leidenalg versions: %s)", py, strings.Join(versions, ", "))
	}
	em := &emitter{w: w, json: *asJSON}
	header := fmt.Sprintf("%-10s %8s %9s %7s  %-10s %-9s %5s %4s %9s %8s %8s %12s %8s %9s",
		"graph", "nodes", "edges", "groups", "objective", "method", "iter", "runs", "seconds", "speedup", "comms", "H", "Q", "recovered")
	line := func(r *refsRow) func() string {
		return func() string {
			iter, sp := "-", "1"
			if r.Method != "shoal" {
				iter = strconv.Itoa(r.Iterations)
				sp = fmt.Sprintf("%.1f", r.Speedup)
			}
			return fmt.Sprintf("%-10s %8d %9d %7d  %-10s %-9s %5s %4d %9.3f %8s %8d %12.1f %8.4f %9.3f",
				r.Graph, r.Nodes, r.Edges, r.Groups, r.Objective, r.Method, iter, r.Runs, r.Seconds, sp, r.Communities, r.H, r.Q, r.Recovered)
		}
	}
	var mems []*refsMemRow
	for gi, mk := range makers {
		if err := ctx.Err(); err != nil {
			return err
		}
		rg, err := mk()
		if err != nil {
			return err
		}
		gg := rg.g
		edgePath := filepath.Join(dir, fmt.Sprintf("graph%d.tsv", gi))
		if err := writeEdgeFile(edgePath, gg); err != nil {
			return err
		}
		g := tracker.NewGraph(gg.N, gg.Edges)
		base := refsRow{Kind: "method", Graph: rg.name, Nodes: gg.N, Edges: len(gg.Edges), Groups: gg.Communities(), Runs: *seeds}
		score := func(r *refsRow, m []uint32) {
			r.Communities = countLabels(m)
			r.H = tracker.CPM(g, m, *gamma)
			r.Q = tracker.Modularity(g, m, 1)
			r.Recovered = recoveredShare(gg.Membership, m)
		}
		better := func(obj tracker.Objective, h, q, bh, bq float64) bool {
			if obj == tracker.ObjectiveCPM {
				return h > bh
			}
			return q > bq
		}

		// Shoal, in-process.
		shoalSec := map[tracker.Objective]float64{}
		seed0 := map[tracker.Objective]int{} // communities of the seed-0 run
		for _, obj := range rg.objectives {
			r := base
			r.Objective, r.Method = obj.String(), "shoal"
			var secs []float64
			var best []uint32
			bh, bq := 0.0, 0.0
			for s := 0; s < *seeds; s++ {
				o := &tracker.Options{Objective: obj, Seed: uint64(s)}
				if obj == tracker.ObjectiveCPM {
					o.Resolution = *gamma
				}
				runtime.GC()
				prev := runtime.GOMAXPROCS(1)
				t0 := time.Now()
				p := tracker.Detect(g, o)
				d := time.Since(t0)
				runtime.GOMAXPROCS(prev)
				secs = append(secs, d.Seconds())
				if s == 0 {
					seed0[obj] = len(p.Communities)
				}
				m := dense(p.Membership)
				h, q := tracker.CPM(g, m, *gamma), tracker.Modularity(g, m, 1)
				if best == nil || better(obj, h, q, bh, bq) {
					best, bh, bq, r.BestSeed = m, h, q, s
				}
			}
			r.Seconds = median(secs)
			score(&r, best)
			shoalSec[obj] = r.Seconds
			em.row(&r, header, line(&r))
		}

		// References, through python3: one process per graph.
		var pyBase, pyPeak int64
		if py != "" {
			var runs []string
			for _, obj := range rg.objectives {
				runs = append(runs, "--run", obj.String()+":leidenalg", "--run", obj.String()+":igraph")
			}
			var seedList []string
			for s := 0; s < *seeds; s++ {
				seedList = append(seedList, strconv.Itoa(s))
			}
			cmdArgs := append([]string{script, edgePath, strconv.Itoa(gg.N), dir,
				"--resolution", strconv.FormatFloat(*gamma, 'g', -1, 64), "--seeds", strings.Join(seedList, ","),
				"--igraph-iterations", strconv.Itoa(*igIter), "--leidenalg-iterations", strconv.Itoa(*laIter)}, runs...)
			res, err := runRefScript(ctx, py, cmdArgs)
			if err != nil {
				return err
			}
			if res.versions.Nodes != gg.N || res.versions.Edges != len(gg.Edges) {
				return fmt.Errorf("refs.py read %d nodes and %d edges, the graph has %d and %d", res.versions.Nodes, res.versions.Edges, gg.N, len(gg.Edges))
			}
			pyBase, pyPeak = res.versions.BaselineKiB*1024, res.peakKiB*1024
			for _, obj := range rg.objectives {
				for _, method := range []string{"leidenalg", "igraph"} {
					r := base
					r.Objective, r.Method = obj.String(), method
					r.Iterations = *igIter
					if method == "leidenalg" {
						r.Iterations = *laIter
					}
					var secs []float64
					var best []uint32
					bh, bq := 0.0, 0.0
					for _, run := range res.runs {
						if run.Objective != obj.String() || run.Method != method {
							continue
						}
						m, err := readLabels(run.Membership, gg.N)
						if err != nil {
							return err
						}
						secs = append(secs, run.Seconds)
						h, q := tracker.CPM(g, m, *gamma), tracker.Modularity(g, m, 1)
						// leidenalg reports its own quality: Q, or H of
						// Traag et al. 2011 (leidenalg 0.9.1 reports 2H on
						// undirected graphs, measured here on a triangle with
						// a pendant node); a mismatch means one of the
						// scorings is wrong.
						if run.Native != nil {
							ok := near6(*run.Native, q)
							if obj == tracker.ObjectiveCPM {
								ok = near6(*run.Native, h) || near6(*run.Native, 2*h)
							}
							if !ok {
								note("warning: %s %s seed %d: leidenalg's quality %.9g, shoal's scoring H %.9g, Q %.9g", rg.name, obj, run.Seed, *run.Native, h, q)
							}
						}
						if best == nil || better(obj, h, q, bh, bq) {
							best, bh, bq, r.BestSeed = m, h, q, run.Seed
						}
						os.Remove(run.Membership)
					}
					if best == nil {
						return fmt.Errorf("refs.py gave no %s run of %s", obj, method)
					}
					r.Runs = len(secs)
					r.Seconds = median(secs)
					r.Speedup = r.Seconds / shoalSec[obj]
					score(&r, best)
					em.row(&r, header, line(&r))
				}
			}
		}

		// Peak resident memory of shoal's side, in a child process.
		for _, obj := range rg.objectives {
			mr, err := shoalPeak(ctx, self, edgePath, gg.N, obj, *gamma)
			if err != nil {
				return err
			}
			mr.Graph, mr.Edges = rg.name, len(gg.Edges)
			e := float64(mr.Edges)
			mr.GraphPerE = float64(mr.GraphRSS-mr.Baseline) / e
			if mr.DetectPeak > 0 {
				mr.DetectPerE = float64(mr.DetectPeak-mr.Baseline) / e
			}
			if pyPeak > 0 {
				mr.PythonBaseline, mr.PythonPeak = pyBase, pyPeak
				mr.PythonPerE = float64(pyPeak-pyBase) / e
			}
			if mr.Communities != seed0[obj] {
				// Detect is deterministic (tracker/doc.go): the same graph
				// read back from the file must give the same partition.
				return fmt.Errorf("%s %s: refs-peak found %d communities, the in-process run with seed 0 %d", rg.name, obj, mr.Communities, seed0[obj])
			}
			mems = append(mems, mr)
		}
		os.Remove(edgePath)
	}

	if *asJSON {
		for _, m := range mems {
			em.row(m, "", nil)
		}
		return nil
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "resident memory, bytes per edge above each process's size before it loaded the graph (shoal: a child process, seed 0, GOMAXPROCS=1)")
	fmt.Fprintf(w, "%-10s %9s  %-10s %11s %12s %14s %13s  %11s %14s\n", "graph", "edges", "objective",
		"baseline_MB", "graph_B/edge", "detect_B/edge", "process_MB", "python_MB", "python_B/edge")
	for _, m := range mems {
		fmt.Fprintf(w, "%-10s %9d  %-10s %11.1f %12.1f %14.1f %13.1f  %11.1f %14.1f\n", m.Graph, m.Edges, m.Objective,
			float64(m.Baseline)/1e6, m.GraphPerE, m.DetectPerE, float64(m.ProcessPeak)/1e6, float64(m.PythonPeak)/1e6, m.PythonPerE)
	}
	fmt.Fprintln(w, "graph: the built graph; detect: the peak over Detect, graph included; process_MB: the child's whole peak, parsing the file included;")
	fmt.Fprintln(w, "python: the reference process's peak (igraph's graph and every run of both libraries on it), per edge above its size after the imports")
	return nil
}

// near6 reports whether a and b agree to 1e-6 relative.
func near6(a, b float64) bool { return abs(a-b) <= 1e-6*max(1, abs(b)) }

func abs(x float64) float64 { return max(x, -x) }

func median(x []float64) float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// dense turns a partition's community ids into uint32 labels.
func dense(m []uint64) []uint32 {
	ids := map[uint64]uint32{}
	out := make([]uint32, len(m))
	for i, c := range m {
		d, ok := ids[c]
		if !ok {
			d = uint32(len(ids))
			ids[c] = d
		}
		out[i] = d
	}
	return out
}

func countLabels(m []uint32) int {
	seen := map[uint32]bool{}
	for _, c := range m {
		seen[c] = true
	}
	return len(seen)
}

// recoveredShare is the share of the planted groups that one found
// community matches with Jaccard similarity |P ∩ F| / |P ∪ F| >= 0.8 (the
// recovery rule of the README; 0.8 is our choice, common practice for
// "found" is a Jaccard or F1 threshold between 0.5 and 0.9).
func recoveredShare(planted, found []uint32) float64 {
	k := 0
	for _, c := range planted {
		k = max(k, int(c)+1)
	}
	if k == 0 {
		return 0
	}
	psize := make([]int, k)
	fsize := map[uint32]int{}
	pair := map[uint64]int{}
	for i, p := range planted {
		psize[p]++
		fsize[found[i]]++
		pair[uint64(p)<<32|uint64(found[i])]++
	}
	matched := make([]bool, k)
	for key, x := range pair {
		p, f := uint32(key>>32), uint32(key)
		if float64(x) >= 0.8*float64(psize[p]+fsize[f]-x) {
			matched[p] = true
		}
	}
	n := 0
	for _, ok := range matched {
		if ok {
			n++
		}
	}
	return float64(n) / float64(k)
}

func writeEdgeFile(path string, g *gen.Graph) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := gen.WriteEdgeList(f, g); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// readLabels reads one integer label per line for n nodes.
func readLabels(path string, n int) ([]uint32, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	out := make([]uint32, 0, n)
	for _, f := range bytes.Fields(b) {
		v, err := strconv.ParseUint(string(f), 10, 32)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		out = append(out, uint32(v))
	}
	if len(out) != n {
		return nil, fmt.Errorf("%s: %d labels for %d nodes", path, len(out), n)
	}
	return out, nil
}

// findRefPython returns the first python3 that imports igraph and
// leidenalg: the one given, else /usr/bin/python3 (where Debian's
// python3-igraph and python3-leidenalg install), else python3 on PATH;
// with the versions of python, igraph and leidenalg, and the candidates
// tried.
func findRefPython(given string) (py string, versions, tried []string) {
	cands := []string{given}
	if given == "" {
		cands = []string{"/usr/bin/python3"}
		if p, err := exec.LookPath("python3"); err == nil && p != "/usr/bin/python3" {
			cands = append(cands, p)
		}
	}
	for _, c := range cands {
		out, err := exec.Command(c, "-c", "import sys, igraph, leidenalg; print(sys.version.split()[0], igraph.__version__, leidenalg.version)").Output()
		if err == nil {
			return c, strings.Fields(string(out)), cands
		}
	}
	return "", nil, cands
}

type refRun struct {
	Objective  string   `json:"objective"`
	Method     string   `json:"method"`
	Seed       int      `json:"seed"`
	Seconds    float64  `json:"seconds"`
	Membership string   `json:"membership"`
	Native     *float64 `json:"native_quality"`
}

type refResult struct {
	versions struct {
		Nodes       int   `json:"nodes"`
		Edges       int   `json:"edges"`
		BaselineKiB int64 `json:"baseline_rss_kib"`
	}
	runs    []refRun
	peakKiB int64
}

func runRefScript(ctx context.Context, py string, args []string) (*refResult, error) {
	cmd := exec.CommandContext(ctx, py, args...)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return nil, fmt.Errorf("%s %s: %v\n%s", py, filepath.Base(args[0]), err, stderr.String())
	}
	res := &refResult{}
	sc := bufio.NewScanner(bytes.NewReader(out))
	for sc.Scan() {
		var kind struct {
			Kind   string `json:"kind"`
			MaxRSS int64  `json:"max_rss_kib"`
		}
		if err := json.Unmarshal(sc.Bytes(), &kind); err != nil {
			return nil, fmt.Errorf("refs.py: %q: %v", sc.Text(), err)
		}
		switch kind.Kind {
		case "versions":
			err = json.Unmarshal(sc.Bytes(), &res.versions)
		case "run":
			var r refRun
			err = json.Unmarshal(sc.Bytes(), &r)
			res.runs = append(res.runs, r)
		case "peak":
			res.peakKiB = kind.MaxRSS
		}
		if err != nil {
			return nil, err
		}
	}
	return res, nil
}

// shoalPeak runs `shoal-bench refs-peak` (this binary) on the edge file; the
// child reports its own resident sizes from /proc/self/status.
func shoalPeak(ctx context.Context, self, path string, n int, obj tracker.Objective, gamma float64) (*refsMemRow, error) {
	if obj != tracker.ObjectiveCPM {
		gamma = 0 // modularity at resolution 1
	}
	cmd := exec.CommandContext(ctx, self, "refs-peak", "--edges", path, "--nodes", strconv.Itoa(n),
		"--objective", obj.String(), "--resolution", strconv.FormatFloat(gamma, 'g', -1, 64))
	cmd.Env = append(os.Environ(), "GOMAXPROCS=1")
	var stderr strings.Builder
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return nil, fmt.Errorf("refs-peak: %v\n%s", err, stderr.String())
	}
	r := &refsMemRow{Kind: "memory", Objective: obj.String()}
	if err := json.Unmarshal(out, r); err != nil {
		return nil, fmt.Errorf("refs-peak: %q: %v", out, err)
	}
	return r, nil
}

// runRefsPeak is the child of shoalPeak: note the resident size, read the
// edge file, build the graph, drop the edge list, reset the peak-resident counter (Linux:
// writing 5 to /proc/self/clear_refs sets VmHWM to the current size), run
// one Detect and print the graph's resident size and the peak over Detect.
func runRefsPeak(_ context.Context, args []string, w io.Writer) error {
	fs := flag.NewFlagSet("refs-peak", flag.ContinueOnError)
	path := fs.String("edges", "", "edge file (u<TAB>v lines)")
	n := fs.Int("nodes", 0, "number of nodes")
	objName := fs.String("objective", "modularity", "modularity or cpm")
	gamma := fs.Float64("resolution", 0, "resolution (0: the objective's default)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	obj, err := tracker.ParseObjective(*objName)
	if err != nil {
		return err
	}
	runtime.GOMAXPROCS(1)
	baseline := procStatus("VmRSS")
	edges, err := readEdgeFile(*path)
	if err != nil {
		return err
	}
	g := tracker.NewGraph(*n, edges)
	edges = nil
	debug.FreeOSMemory()
	graphRSS := procStatus("VmRSS")
	peak := procStatus("VmHWM") // parsing the file included
	var reset bool
	if f, err := os.OpenFile("/proc/self/clear_refs", os.O_WRONLY, 0); err == nil {
		_, err = f.WriteString("5")
		reset = f.Close() == nil && err == nil
	}
	p := tracker.Detect(g, &tracker.Options{Objective: obj, Resolution: *gamma})
	out := struct {
		Baseline    int64 `json:"baseline_rss_bytes"`
		GraphRSS    int64 `json:"graph_rss_bytes"`
		DetectPeak  int64 `json:"detect_peak_bytes,omitempty"`
		ProcessPeak int64 `json:"process_peak_bytes"`
		Communities int   `json:"communities"`
	}{Baseline: baseline, GraphRSS: graphRSS, ProcessPeak: peak, Communities: len(p.Communities)}
	if reset {
		out.DetectPeak = procStatus("VmHWM")
		out.ProcessPeak = max(peak, out.DetectPeak)
	}
	runtime.KeepAlive(g)
	return json.NewEncoder(w).Encode(out)
}

// procStatus reads a "Vm...: N kB" line of /proc/self/status, in bytes (0
// when absent).
func procStatus(key string) int64 {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0
	}
	for _, l := range strings.Split(string(b), "\n") {
		if rest, ok := strings.CutPrefix(l, key+":"); ok {
			f := strings.Fields(rest)
			if len(f) > 0 {
				v, _ := strconv.ParseInt(f[0], 10, 64)
				return v * 1024
			}
		}
	}
	return 0
}

func readEdgeFile(path string) ([]tracker.Edge, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var edges []tracker.Edge
	sc := bufio.NewScanner(bufio.NewReaderSize(f, 1<<16))
	for sc.Scan() {
		u, v, ok := strings.Cut(sc.Text(), "\t")
		a, err1 := strconv.ParseUint(u, 10, 32)
		b, err2 := strconv.ParseUint(v, 10, 32)
		if !ok || err1 != nil || err2 != nil {
			return nil, fmt.Errorf("%s: bad line %q", path, sc.Text())
		}
		edges = append(edges, tracker.Edge{U: uint32(a), V: uint32(b), W: 1})
	}
	return edges, sc.Err()
}
