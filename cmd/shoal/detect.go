package main

import (
	"cmp"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"runtime/debug"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"shoal/ingest"
	"shoal/tracker"
)

// detectResult is the --json output of shoal detect.
type detectResult struct {
	File        string  `json:"file"`
	Nodes       int     `json:"nodes"`
	Edges       int     `json:"edges"`
	TotalWeight float64 `json:"total_weight"`
	// Objective is "modularity" or "cpm"; Quality its value for the best
	// run (Q, or the CPM value H); Modularity is Q at Resolution for
	// modularity and, for cpm, Q at resolution 1, for comparison.
	Objective   string  `json:"objective"`
	Resolution  float64 `json:"resolution"`
	Seed        uint64  `json:"seed"`
	Quality     float64 `json:"quality"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	Sizes       []int   `json:"sizes"`
	Levels      int     `json:"levels"`
	// PerCommunity describes every community of the best run, by id.
	PerCommunity  []communityReport `json:"per_community"`
	Runs          []detectRun       `json:"runs,omitempty"`
	Stability     *stability        `json:"stability,omitempty"`
	NodeStability *nodeStability    `json:"node_stability,omitempty"`
	Null          *nullResult       `json:"null,omitempty"`
	Scan          []scanPoint       `json:"scan,omitempty"`
	// RecommendedResolution is the scanned gamma chosen by the rule in
	// RecommendedBy (see recommend); absent if no point qualifies.
	RecommendedResolution *float64 `json:"recommended_resolution,omitempty"`
	RecommendedBy         string   `json:"recommended_by,omitempty"`
	// Hubs is what --hub-degree, --hub-percentile or --hubs kept out of the
	// optimisation (hubs.go); the other figures are of the graph without.
	Hubs *hubReport `json:"hubs,omitempty"`
}

// communityReport is one community of the best run: its internal weight
// against the configuration model (tracker.InternalZ: a screening figure,
// how unusual the set would be if drawn blind), with --runs >= 2 the mean
// stability of its members, and with --null the calibrated figures.
type communityReport struct {
	Community uint64  `json:"community"`
	Size      int     `json:"size"`
	Internal  float64 `json:"internal"`
	Degree    float64 `json:"degree"`
	Expected  float64 `json:"expected"`
	Z         float64 `json:"z"`
	// Stability is the mean node stability of the members.
	Stability *float64 `json:"stability,omitempty"`
	// ZNull is Z against the null communities of comparable size (absent
	// when they have no spread), P the one-sided p-value, Pool the number
	// of null communities compared with, Significant P below the
	// Bonferroni-corrected level (tracker.Calibrate).
	ZNull       *float64 `json:"z_null,omitempty"`
	P           *float64 `json:"p,omitempty"`
	Pool        int      `json:"pool,omitempty"`
	Significant *bool    `json:"significant,omitempty"`
	// Hubs are the hubs adjacent to a member (names; with a hub policy).
	Hubs []string `json:"hubs,omitempty"`
}

// nullResult compares the observed quality with the quality the same
// optimiser finds on degree-preserving rewirings (the configuration model),
// and says how many communities pass the calibrated test.
type nullResult struct {
	Runs int     `json:"runs"`
	Mean float64 `json:"mean"`
	Std  float64 `json:"std"`
	Z    float64 `json:"z"`
	// NullCommunities is the number of communities found in the rewired
	// graphs; Level, Correction and Tested describe the test, Significant
	// counts the communities that pass it.
	NullCommunities int     `json:"null_communities"`
	Level           float64 `json:"level"`
	Correction      string  `json:"correction"`
	Tested          int     `json:"tested"`
	Significant     int     `json:"significant"`
}

// nodeStability summarises tracker.NodeStability over the best run.
type nodeStability struct {
	Below    float64 `json:"below"`
	Unstable int     `json:"unstable"`
	Mean     float64 `json:"mean"`
}

type scanPoint struct {
	Resolution  float64 `json:"resolution"`
	Quality     float64 `json:"quality"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	MeanNMI     float64 `json:"mean_nmi"`
}

type detectRun struct {
	Seed        uint64  `json:"seed"`
	Quality     float64 `json:"quality"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
}

// stability summarises K runs with different seeds (NMI and ARI: see the
// tracker doc.go, "Validation"); QMin and QMax are the spread of the
// objective's quality.
type stability struct {
	MeanNMI        float64 `json:"mean_nmi"`
	MeanARI        float64 `json:"mean_ari"`
	QMin           float64 `json:"q_min"`
	QMax           float64 `json:"q_max"`
	CommunitiesMin int     `json:"communities_min"`
	CommunitiesMax int     `json:"communities_max"`
}

// signifLevel is the level of the per-community test of --null, before
// the Bonferroni correction (common practice).
const signifLevel = 0.01

func runDetect(ctx context.Context, e *env, args []string) error {
	// A one-shot run holds one large graph: a collector running at 25%
	// heap growth instead of 100% kept the peak resident memory at 1.26 GB
	// instead of 1.65 GB on an invented graph of 10^7 edges, and was not
	// slower (fewer pages touched). GOGC, when set, wins.
	if os.Getenv("GOGC") == "" {
		defer debug.SetGCPercent(debug.SetGCPercent(25))
	}
	fs := newFlags(e, "detect", "FILE [options]")
	trf := addTrackerFlags(fs, false)
	runs := fs.Int("runs", 1, "run with seeds seed..seed+K-1 in parallel, keep the best by the objective's quality and report all K")
	out := fs.String("out", "", "write node<TAB>community lines (external ids) to this file")
	asJSON := fs.Bool("json", false, "print one JSON object instead of the summary")
	nullK := fs.Int("null", 0, "run the optimiser on K degree-preserving rewirings of the graph: z-score of the quality, and each community tested against the communities found there (1%, Bonferroni); a significant community is structure, not evidence about its members")
	scan := fs.String("scan", "", "scan the resolution over A:B:STEP, or auto (cpm: log-spaced from the graph's density to its mean edge weight; modularity: 0.5 to 2); each point runs max(--runs, 5) seeds")
	unstableOut := fs.String("unstable-out", "", "write node<TAB>community<TAB>stability for the nodes of the best run that stay with their community in fewer than --unstable-below of the other runs (needs --runs 2 or more)")
	unstableBelow := fs.Float64("unstable-below", 0.9, "node stability threshold, in (0, 1] (chosen default)")
	nodeWeights := fs.String("node-weights", "", "read node<TAB>weight lines (# comments) from this file: a node's size in the CPM objective (default 1)")
	lo := addInputFlags(fs)
	hf := addHubFlags(fs)
	pos, err := parse(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usagef("want exactly one FILE (or - for stdin), got %d arguments", len(pos))
	}
	if *runs < 1 {
		return usagef("--runs %d: must be at least 1", *runs)
	}
	opts, err := trf.options()
	if err != nil {
		return err
	}
	resolutionSet := false
	fs.Visit(func(f *flag.Flag) { resolutionSet = resolutionSet || f.Name == "resolution" })
	seed := opts.Seed
	if *nullK < 0 {
		return usagef("--null %d: must be >= 0", *nullK)
	}
	var gammas []float64
	autoScan := *scan == "auto"
	if *scan != "" && !autoScan {
		if gammas, err = parseScan(*scan); err != nil {
			return usageError{err}
		}
	}
	if *unstableOut != "" && *runs < 2 {
		return usagef("--unstable-out needs --runs 2 or more: a node's stability compares the best run with the other runs (try --runs 10)")
	}
	if !(*unstableBelow > 0 && *unstableBelow <= 1) {
		return usagef("--unstable-below %v: must be in (0, 1]", *unstableBelow)
	}
	loadOpts, err := lo.options(pos[0])
	if err != nil {
		return err
	}
	start := time.Now()
	loaded, err := loadWithProgress(e, pos[0], loadOpts)
	if err != nil {
		return err
	}
	g := tracker.NewGraph(loaded.Dict.Len(), loaded.Edges)
	loaded.Edges = nil                      // the graph holds them now: 16 bytes per edge back before the optimiser runs
	hubs, err := hf.exclude(g, loaded.Dict) // hubs.go: out of g, before anything reads it
	if err != nil {
		return err
	}
	if *nodeWeights != "" {
		if err := readNodeWeights(*nodeWeights, loaded.Dict, g); err != nil {
			return err
		}
		if opts.Objective != tracker.ObjectiveCPM {
			fmt.Fprintf(e.stderr, "shoal detect: warning: --node-weights counts only for --objective cpm; modularity weighs nodes by their degree\n")
		}
	}
	wbar := meanEdgeWeight(g)
	if opts.Objective == tracker.ObjectiveCPM && !resolutionSet && g.Edges() > 0 && math.Abs(wbar-1) > 1e-9 {
		fmt.Fprintf(e.stderr, "shoal detect: warning: the mean edge weight is %g, but the default CPM resolution %g assumes unit weights; pick one with --scan auto, or set --resolution\n", wbar, opts.Resolution)
	}
	if autoScan {
		if gammas, err = autoRange(g, opts.Objective); err != nil {
			return usageError{err}
		}
	}
	loadTime := time.Since(start)

	// The runs share g: tracker.Detect and tracker.NullRun only read it.
	stop := spinner(e, fmt.Sprintf("optimising %d nodes, %d edges, %d runs", g.Nodes(), g.Edges(), *runs))
	parts := make([]*tracker.Partition, *runs)
	err = parallel(ctx, *runs, func(r int) {
		o := opts
		o.Seed = seed + uint64(r)
		parts[r] = tracker.Detect(g, &o)
	})
	stop()
	if err != nil {
		return err
	}
	best := 0
	for r, p := range parts {
		if p.Quality > parts[best].Quality {
			best = r
		}
	}
	p := parts[best]
	res := detectResult{
		File: pos[0], Nodes: g.Nodes(), Edges: g.Edges(), TotalWeight: g.TotalWeight(),
		Objective: opts.Objective.String(), Resolution: opts.Resolution, Seed: seed + uint64(best),
		Quality: p.Quality, Modularity: p.Modularity, Communities: len(p.Communities), Levels: p.Levels,
	}
	m := g.TotalWeight()
	zs := make([]float64, len(p.Communities))
	sizes := make([]int, len(p.Communities))
	for i, c := range p.Communities {
		exp, z := tracker.InternalZ(c.Internal, c.Degree, m, wbar)
		zs[i], sizes[i] = z, c.Size
		res.PerCommunity = append(res.PerCommunity, communityReport{
			Community: c.ID, Size: c.Size, Internal: c.Internal, Degree: c.Degree, Expected: exp, Z: z,
		})
	}
	hubs.report(&res, p.Membership, loaded.Dict)
	res.Sizes = slices.Clone(sizes)
	slices.SortFunc(res.Sizes, func(a, b int) int { return b - a })
	var nodeStab []float64
	if *runs > 1 {
		res.Runs, res.Stability = summarise(parts, seed)
		var others [][]uint64
		for r, q := range parts {
			if r != best {
				others = append(others, q.Membership)
			}
		}
		nodeStab = tracker.NodeStability(p.Membership, others)
		res.NodeStability = summariseNodes(nodeStab, p, *unstableBelow, res.PerCommunity)
	}
	if *nullK > 0 {
		stop := spinner(e, fmt.Sprintf("optimising %d rewired graphs", *nullK))
		o := opts
		o.Seed = res.Seed
		nrs := make([]tracker.NullResult, *nullK)
		err := parallel(ctx, *nullK, func(r int) { nrs[r] = tracker.NullRun(g, &o, r) })
		stop()
		if err != nil {
			return err
		}
		sig := tracker.Summarise(p.Quality, nrs)
		cal := tracker.Calibrate(sizes, zs, sig.Communities, signifLevel)
		nr := &nullResult{
			Runs: *nullK, Mean: sig.NullMean, Std: sig.NullStd, Z: sig.Z,
			NullCommunities: len(sig.Communities), Level: signifLevel, Tested: len(sizes),
			Correction: fmt.Sprintf("bonferroni: p < %g / %d communities", signifLevel, len(sizes)),
		}
		for i, c := range cal {
			cr := &res.PerCommunity[i]
			if !math.IsInf(c.Z, 0) && !math.IsNaN(c.Z) {
				cr.ZNull = &c.Z
			}
			cr.P, cr.Pool, cr.Significant = &c.P, c.Pool, &c.Significant
			if c.Significant {
				nr.Significant++
			}
		}
		res.Null = nr
	}
	if len(gammas) > 0 {
		k := max(*runs, 5)
		stop := spinner(e, fmt.Sprintf("scanning %d resolutions, %d seeds each", len(gammas), k))
		res.Scan, err = scanResolutions(ctx, g, opts, gammas, k)
		stop()
		if err != nil {
			return err
		}
		res.RecommendedResolution, res.RecommendedBy = recommend(res.Scan, opts.Objective, g.Nodes())
	}
	if *out != "" {
		if err := writeFileAtomic(*out, func(w io.Writer) error {
			return writeMembership(w, loaded.Dict, p.Membership)
		}); err != nil {
			return fmt.Errorf("write %s: %w", *out, err)
		}
	}
	if *unstableOut != "" {
		if err := writeFileAtomic(*unstableOut, func(w io.Writer) error {
			return writeUnstable(w, loaded.Dict, p.Membership, nodeStab, *unstableBelow)
		}); err != nil {
			return fmt.Errorf("write %s: %w", *unstableOut, err)
		}
	}
	if *asJSON {
		enc := json.NewEncoder(e.stdout)
		if err := enc.Encode(res); err != nil {
			return fmt.Errorf("encode the result: %w", err)
		}
		return nil
	}
	printDetect(e.stdout, &res, *unstableOut)
	if e.interactive {
		fmt.Fprintf(e.stderr, "loaded in %v, optimised in %v\n", loadTime.Round(time.Millisecond), (time.Since(start) - loadTime).Round(time.Millisecond))
	}
	return nil
}

// parallel runs job(0), ..., job(n-1) on min(n, GOMAXPROCS) goroutines,
// handing out indices in increasing order, and returns once every job it
// started has finished: no goroutine outlives the call. Jobs write their
// results by index, so the outcome does not depend on the number of
// workers. Once ctx is done no further job starts (a running one finishes:
// the optimiser has no cancellation points) and ctx's error is returned if
// any job was left out.
func parallel(ctx context.Context, n int, job func(i int)) error {
	var next, done atomic.Int64
	var wg sync.WaitGroup
	for w := min(n, runtime.GOMAXPROCS(0)); w > 0; w-- {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ctx.Err() == nil {
				i := next.Add(1) - 1
				if i >= int64(n) {
					return
				}
				job(int(i))
				done.Add(1)
			}
		}()
	}
	wg.Wait()
	if done.Load() < int64(n) {
		return ctx.Err()
	}
	return nil
}

// scanResolutions runs k seeds (seed.. seed+k-1 of opts) at every gamma,
// all (gamma, seed) pairs on one worker pool, and summarises each point
// as soon as its last run ends, so that only the memberships of the points
// in progress are held.
func scanResolutions(ctx context.Context, g *tracker.Graph, opts tracker.Options, gammas []float64, k int) ([]scanPoint, error) {
	points := make([]scanPoint, len(gammas))
	parts := make([][]*tracker.Partition, len(gammas))
	left := make([]atomic.Int32, len(gammas))
	for i := range gammas {
		parts[i] = make([]*tracker.Partition, k)
		left[i].Store(int32(k))
	}
	err := parallel(ctx, len(gammas)*k, func(j int) {
		i, r := j/k, j%k
		o := opts
		o.Resolution = gammas[i]
		o.Seed = opts.Seed + uint64(r)
		parts[i][r] = tracker.Detect(g, &o)
		if left[i].Add(-1) > 0 {
			return
		}
		ps := parts[i]
		best := 0
		for r, p := range ps {
			if p.Quality > ps[best].Quality {
				best = r
			}
		}
		_, st := summarise(ps, opts.Seed)
		points[i] = scanPoint{Resolution: gammas[i], Quality: ps[best].Quality, Modularity: ps[best].Modularity,
			Communities: len(ps[best].Communities), MeanNMI: st.MeanNMI}
		parts[i] = nil
	})
	return points, err
}

// recommend picks a scanned resolution by the agreement between seeds.
// Modularity: the gamma nearest 1 whose seeds agree (mean NMI >= 0.9,
// chosen threshold; ties: the smaller). CPM, whose gamma has no natural
// centre: the most stable point (highest mean NMI; ties within 1e-9: the
// larger gamma), leaving out the points whose best run is one community
// or has a mean community size below 2, as such partitions agree across
// seeds on any graph.
func recommend(scan []scanPoint, obj tracker.Objective, nodes int) (*float64, string) {
	var pick *scanPoint
	if obj == tracker.ObjectiveCPM {
		for i := range scan {
			sp := &scan[i]
			if sp.Communities < 2 || 2*sp.Communities > nodes {
				continue
			}
			if pick == nil || sp.MeanNMI > pick.MeanNMI+1e-9 || (sp.MeanNMI >= pick.MeanNMI-1e-9 && sp.Resolution > pick.Resolution) {
				pick = sp
			}
		}
		if pick == nil {
			return nil, ""
		}
		v := pick.Resolution
		return &v, "the highest mean NMI across seeds, ties to the larger resolution, leaving out one-community and mostly-singleton points"
	}
	for i := range scan {
		sp := &scan[i]
		if sp.MeanNMI >= 0.9 && (pick == nil || math.Abs(sp.Resolution-1) < math.Abs(pick.Resolution-1)) {
			pick = sp
		}
	}
	if pick == nil {
		return nil, ""
	}
	v := pick.Resolution
	return &v, "the nearest 1 with a mean NMI across seeds of 0.9 or more"
}

// autoRange is the resolutions of --scan auto. Modularity: 0.5 to 2 by
// 0.25. CPM: log-spaced from the graph's density (total weight over the
// node pairs, counted in node weight) up to its mean edge weight, the
// threshold at which a pair joined by an average edge is no longer worth
// keeping together; four points per factor of ten, 5 to 25 points, each
// rounded to 3 significant digits.
func autoRange(g *tracker.Graph, obj tracker.Objective) ([]float64, error) {
	if obj != tracker.ObjectiveCPM {
		var out []float64
		for v := 0.5; v <= 2+1e-9; v += 0.25 {
			out = append(out, v)
		}
		return out, nil
	}
	if g.Edges() == 0 {
		return nil, fmt.Errorf("--scan auto: the graph has no edges")
	}
	var w float64
	for i := 0; i < g.Len(); i++ {
		if g.Has(uint32(i)) {
			w += g.NodeWeight(uint32(i))
		}
	}
	hi := meanEdgeWeight(g)
	lo := hi / 10
	if pairs := w * (w - 1) / 2; pairs > 0 && g.TotalWeight()/pairs < hi {
		lo = g.TotalWeight() / pairs
	}
	n := min(max(int(math.Ceil(4*math.Log10(hi/lo)))+1, 5), 25)
	var out []float64
	for i := 0; i < n; i++ {
		v := round3(lo * math.Pow(hi/lo, float64(i)/float64(n-1)))
		if len(out) == 0 || v > out[len(out)-1] {
			out = append(out, v)
		}
	}
	return out, nil
}

func round3(v float64) float64 {
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 3, 64), 64)
	return r
}

func meanEdgeWeight(g *tracker.Graph) float64 {
	if g.Edges() == 0 {
		return 0
	}
	return g.TotalWeight() / float64(g.Edges())
}

// summarise reports every run and the stability of the set: mean pairwise
// NMI and ARI, and the spread of the quality and of the number of
// communities.
func summarise(parts []*tracker.Partition, seed uint64) ([]detectRun, *stability) {
	st := &stability{QMin: parts[0].Quality, QMax: parts[0].Quality, CommunitiesMin: len(parts[0].Communities), CommunitiesMax: len(parts[0].Communities)}
	var runs []detectRun
	for i, p := range parts {
		runs = append(runs, detectRun{Seed: seed + uint64(i), Quality: p.Quality, Modularity: p.Modularity, Communities: len(p.Communities)})
		st.QMin = min(st.QMin, p.Quality)
		st.QMax = max(st.QMax, p.Quality)
		st.CommunitiesMin = min(st.CommunitiesMin, len(p.Communities))
		st.CommunitiesMax = max(st.CommunitiesMax, len(p.Communities))
	}
	pairs := 0
	for i := range parts {
		for j := i + 1; j < len(parts); j++ {
			st.MeanNMI += tracker.NMI(parts[i].Membership, parts[j].Membership)
			st.MeanARI += tracker.ARI(parts[i].Membership, parts[j].Membership)
			pairs++
		}
	}
	st.MeanNMI /= float64(pairs)
	st.MeanARI /= float64(pairs)
	return runs, st
}

// summariseNodes counts the nodes below the threshold and the mean
// stability, overall and (into per) per community of the best run p.
func summariseNodes(st []float64, p *tracker.Partition, below float64, per []communityReport) *nodeStability {
	ns := &nodeStability{Below: below}
	idx := make(map[uint64]int, len(per))
	for i, c := range per {
		idx[c.Community] = i
	}
	sum := make([]float64, len(per))
	count := 0
	for i, s := range st {
		if math.IsNaN(s) {
			continue
		}
		count++
		ns.Mean += s
		if s < below {
			ns.Unstable++
		}
		sum[idx[p.Membership[i]]] += s
	}
	if count > 0 {
		ns.Mean /= float64(count)
	}
	for i := range per {
		v := sum[i] / float64(per[i].Size)
		per[i].Stability = &v
	}
	return ns
}

// writeUnstable writes node<TAB>community<TAB>stability for the nodes
// whose stability is below the threshold, by stability and then name.
func writeUnstable(w io.Writer, d *ingest.Dict, membership []uint64, st []float64, below float64) error {
	type row struct {
		name string
		node uint32
		s    float64
	}
	var rows []row
	for i, s := range st {
		if !math.IsNaN(s) && s < below {
			rows = append(rows, row{d.Name(uint32(i)), uint32(i), s})
		}
	}
	slices.SortFunc(rows, func(a, b row) int {
		if c := cmp.Compare(a.s, b.s); c != 0 {
			return c
		}
		return strings.Compare(a.name, b.name)
	})
	for _, r := range rows {
		if _, err := fmt.Fprintf(w, "%s\t%d\t%.4f\n", r.name, membership[r.node], r.s); err != nil {
			return err
		}
	}
	return nil
}

// readNodeWeights sets the node weights of g from a file of
// node<TAB>weight lines (the last blank-separated field is the weight, so
// a name may hold spaces). Blank lines and lines starting with # are
// skipped. Names are resolved with d; an unknown node, a node given twice
// or a weight that is not finite and > 0 is bad input naming the file and
// line.
func readNodeWeights(path string, d *ingest.Dict, g *tracker.Graph) error {
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("--node-weights: %w", err)
	}
	defer f.Close()
	seen := map[uint32]int{}
	err = eachListLine(f, func(line int, s string) error {
		cut := strings.LastIndexAny(s, " \t")
		if cut < 0 {
			return usagef("%s:%d: want node<TAB>weight, got %q", path, line, s)
		}
		name, ws := strings.TrimRight(s[:cut], " \t"), s[cut+1:]
		id, ok := d.Lookup(name)
		if !ok {
			return usagef("%s:%d: node %q is not in the graph", path, line, name)
		}
		w, err := strconv.ParseFloat(ws, 64)
		if err != nil || !(w > 0) || math.IsInf(w, 0) {
			return usagef("%s:%d: weight %q of node %q: want a finite number > 0", path, line, ws, name)
		}
		if first, dup := seen[id]; dup {
			return usagef("%s:%d: node %q already given at line %d", path, line, name, first)
		}
		seen[id] = line
		g.SetNodeWeight(id, w)
		return nil
	})
	var ue usageError
	if err != nil && !errors.As(err, &ue) {
		return fmt.Errorf("--node-weights: read %s: %w", path, err)
	}
	return err
}

// qualityName says what the quality of an objective is, in words.
func qualityName(obj string) (long, short string) {
	if obj == tracker.ObjectiveCPM.String() {
		return "CPM value H", "H"
	}
	return "modularity Q", "Q"
}

func printDetect(w io.Writer, r *detectResult, unstableOut string) {
	long, short := qualityName(r.Objective)
	fmt.Fprintf(w, "%s: %d nodes, %d edges, total weight %g\n", r.File, r.Nodes, r.Edges, r.TotalWeight)
	printHubs(w, r.Hubs)
	how := fmt.Sprintf("seed %d", r.Seed)
	if len(r.Runs) > 1 {
		how = fmt.Sprintf("seed %d, best of %d", r.Seed, len(r.Runs))
	}
	if r.Objective == tracker.ObjectiveCPM.String() {
		fmt.Fprintf(w, "%s = %.6g at resolution %g (%s); its modularity at resolution 1, for comparison: %.6f\n", long, r.Quality, r.Resolution, how, r.Modularity)
	} else {
		fmt.Fprintf(w, "%s = %.6f at resolution %g (%s)\n", long, r.Quality, r.Resolution, how)
	}
	const show = 20
	sizes := r.Sizes
	more := ""
	if len(sizes) > show {
		more = fmt.Sprintf(" ... (%d more)", len(sizes)-show)
		sizes = sizes[:show]
	}
	var b strings.Builder
	for i, s := range sizes {
		if i > 0 {
			b.WriteByte(' ')
		}
		fmt.Fprint(&b, s)
	}
	fmt.Fprintf(w, "%d communities, sizes largest first: %s%s\n", r.Communities, b.String(), more)
	if st := r.Stability; st != nil {
		fmt.Fprintf(w, "over %d seeds: %s %.6g..%.6g, %d..%d communities, mean pairwise NMI %.4f, ARI %.4f\n",
			len(r.Runs), short, st.QMin, st.QMax, st.CommunitiesMin, st.CommunitiesMax, st.MeanNMI, st.MeanARI)
	}
	if ns := r.NodeStability; ns != nil {
		fmt.Fprintf(w, "node stability (share of the other %d runs in which a node stays with its community): mean %.4f; %d of %d nodes below %g",
			len(r.Runs)-1, ns.Mean, ns.Unstable, r.Nodes, ns.Below)
		if unstableOut != "" {
			fmt.Fprintf(w, ", listed in %s", unstableOut)
		}
		fmt.Fprintln(w)
	}
	if n := r.Null; n != nil {
		fmt.Fprintf(w, "against %d degree-preserving rewirings: their %s %.6g +- %.4g, z = %.1f\n", n.Runs, short, n.Mean, n.Std, n.Z)
		fmt.Fprintf(w, "%d of %d communities significant at %g after a Bonferroni correction for %d (each against the communities of comparable size among the %d found in the rewirings); a significant community is structure in the graph, not evidence about its members\n",
			n.Significant, n.Tested, n.Level, n.Tested, n.NullCommunities)
	}
	if len(r.Scan) > 0 {
		fmt.Fprintf(w, "resolution  %12s  communities  mean NMI over seeds\n", short)
		for _, sp := range r.Scan {
			fmt.Fprintf(w, "%10.4g  %12.6g  %11d  %8.4f\n", sp.Resolution, sp.Quality, sp.Communities, sp.MeanNMI)
		}
		switch {
		case r.RecommendedResolution != nil:
			fmt.Fprintf(w, "recommended resolution: %g (%s)\n", *r.RecommendedResolution, r.RecommendedBy)
		case r.Objective == tracker.ObjectiveCPM.String():
			fmt.Fprintln(w, "no scanned resolution gives more than one community with a mean size of 2 or more")
		default:
			fmt.Fprintln(w, "no scanned resolution gives stable results (mean NMI >= 0.9)")
		}
	}
	if r.Objective == tracker.ObjectiveModularity.String() && r.Modularity < 0.3 {
		fmt.Fprintln(w, "modularity below 0.3: weak structure (common reading of Q, not a test)")
	}
}

// parseScan reads A:B:STEP into the resolutions A, A+STEP, ... <= B, each
// rounded to 12 significant digits (0.01 + 5 * 0.01 is 0.060000000000000005
// in floating point).
func parseScan(s string) ([]float64, error) {
	f := strings.Split(s, ":")
	if len(f) != 3 {
		return nil, fmt.Errorf("--scan %q: want A:B:STEP or auto", s)
	}
	var v [3]float64
	for i, x := range f {
		n, err := strconv.ParseFloat(x, 64)
		if err != nil || !(n > 0) || math.IsInf(n, 0) {
			return nil, fmt.Errorf("--scan %q: %q is not a positive number", s, x)
		}
		v[i] = n
	}
	if v[1] < v[0] {
		return nil, fmt.Errorf("--scan %q: B below A", s)
	}
	steps := int(math.Floor((v[1]-v[0])/v[2]+1e-9)) + 1
	if steps > 1000 {
		return nil, fmt.Errorf("--scan %q: %d points, at most 1000", s, steps)
	}
	out := make([]float64, steps)
	for i := range out {
		out[i], _ = strconv.ParseFloat(strconv.FormatFloat(v[0]+float64(i)*v[2], 'g', 12, 64), 64)
	}
	return out, nil
}

// writeMembership writes node<TAB>community lines in node-id order.
func writeMembership(w io.Writer, d *ingest.Dict, membership []uint64) error {
	buf := make([]byte, 0, 64)
	for i, c := range membership {
		if c == tracker.NoCommunity {
			continue
		}
		buf = d.AppendName(buf[:0], uint32(i))
		buf = append(buf, '\t')
		buf = fmt.Appendf(buf, "%d\n", c)
		if _, err := w.Write(buf); err != nil {
			return err
		}
	}
	return nil
}
