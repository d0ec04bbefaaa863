package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"shoal/ingest"
	"shoal/tracker"
)

// detectResult is the --json output of shoal detect.
type detectResult struct {
	File        string      `json:"file"`
	Nodes       int         `json:"nodes"`
	Edges       int         `json:"edges"`
	TotalWeight float64     `json:"total_weight"`
	Resolution  float64     `json:"resolution"`
	Seed        uint64      `json:"seed"`
	Modularity  float64     `json:"modularity"`
	Communities int         `json:"communities"`
	Sizes       []int       `json:"sizes"`
	Levels      int         `json:"levels"`
	Runs        []detectRun `json:"runs,omitempty"`
	Stability   *stability  `json:"stability,omitempty"`
	Null        *nullResult `json:"null,omitempty"`
	Scan        []scanPoint `json:"scan,omitempty"`
	// StableResolution is the scanned gamma nearest 1 whose runs agree
	// (mean pairwise NMI >= 0.9, chosen threshold); absent if none.
	StableResolution *float64 `json:"stable_resolution,omitempty"`
}

// nullResult compares the observed Q with the Q the same optimiser finds
// on degree-preserving rewirings (the configuration model).
type nullResult struct {
	Runs        int               `json:"runs"`
	Mean        float64           `json:"mean"`
	Std         float64           `json:"std"`
	Z           float64           `json:"z"`
	Communities []communitySignif `json:"communities"`
}

// communitySignif is a community's internal weight against the
// configuration model's expectation tot^2 / 4m.
type communitySignif struct {
	Community uint64  `json:"community"`
	Size      int     `json:"size"`
	Internal  float64 `json:"internal"`
	Expected  float64 `json:"expected"`
	Ratio     float64 `json:"ratio"`
}

type scanPoint struct {
	Resolution  float64 `json:"resolution"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
	MeanNMI     float64 `json:"mean_nmi"`
}

type detectRun struct {
	Seed        uint64  `json:"seed"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
}

// stability summarises K runs with different seeds (NMI and ARI: see the
// tracker doc.go, "Validation").
type stability struct {
	MeanNMI        float64 `json:"mean_nmi"`
	MeanARI        float64 `json:"mean_ari"`
	QMin           float64 `json:"q_min"`
	QMax           float64 `json:"q_max"`
	CommunitiesMin int     `json:"communities_min"`
	CommunitiesMax int     `json:"communities_max"`
}

func runDetect(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "detect", "FILE [options]")
	trf := addTrackerFlags(fs, false)
	runs := fs.Int("runs", 1, "run with seeds seed..seed+K-1, keep the best by modularity and report all K")
	out := fs.String("out", "", "write node<TAB>community lines (external ids) to this file")
	asJSON := fs.Bool("json", false, "print one JSON object instead of the summary")
	nullK := fs.Int("null", 0, "compare Q with K degree-preserving rewirings of the graph (z-score, per-community expected weight)")
	scan := fs.String("scan", "", "scan the resolution over A:B:STEP (each point: --runs seeds, at least 5)")
	lo := addInputFlags(fs)
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
	seed := &opts.Seed
	if *nullK < 0 {
		return usagef("--null %d: must be >= 0", *nullK)
	}
	var gammas []float64
	if *scan != "" {
		if gammas, err = parseScan(*scan); err != nil {
			return usageError{err}
		}
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
	loadTime := time.Since(start)
	stop := spinner(e, fmt.Sprintf("optimising %d nodes, %d edges", g.Nodes(), g.Edges()))
	var parts []*tracker.Partition
	best := 0
	for r := 0; r < *runs; r++ {
		if err := ctx.Err(); err != nil {
			stop()
			return err
		}
		o := opts
		o.Seed = *seed + uint64(r)
		p := tracker.Detect(g, &o)
		parts = append(parts, p)
		if p.Modularity > parts[best].Modularity {
			best = r
		}
	}
	stop()
	p := parts[best]
	res := detectResult{
		File: pos[0], Nodes: g.Nodes(), Edges: g.Edges(), TotalWeight: g.TotalWeight(),
		Resolution: opts.Resolution, Seed: *seed + uint64(best), Modularity: p.Modularity,
		Communities: len(p.Communities), Levels: p.Levels,
	}
	for _, c := range p.Communities {
		res.Sizes = append(res.Sizes, c.Size)
	}
	slices.SortFunc(res.Sizes, func(a, b int) int { return b - a })
	if *runs > 1 {
		res.Runs, res.Stability = summarise(parts, *seed)
	}
	if *nullK > 0 {
		stop := spinner(e, fmt.Sprintf("optimising %d rewired graphs", *nullK))
		o := opts
		o.Seed = res.Seed
		sig := tracker.Null(g, &o, p.Modularity, *nullK)
		stop()
		nr := &nullResult{Runs: *nullK, Mean: sig.NullMean, Std: sig.NullStd, Z: sig.Z}
		for _, c := range p.Communities {
			exp := tracker.ExpectedInternal(c.Degree, g.TotalWeight())
			cs := communitySignif{Community: c.ID, Size: c.Size, Internal: c.Internal, Expected: exp}
			if exp > 0 {
				cs.Ratio = c.Internal / exp
			}
			nr.Communities = append(nr.Communities, cs)
		}
		res.Null = nr
	}
	if len(gammas) > 0 {
		k := max(*runs, 5)
		stop := spinner(e, fmt.Sprintf("scanning %d resolutions, %d seeds each", len(gammas), k))
		for _, gm := range gammas {
			if err := ctx.Err(); err != nil {
				stop()
				return err
			}
			var ps []*tracker.Partition
			best := 0
			for r := 0; r < k; r++ {
				p := tracker.Detect(g, &tracker.Options{Resolution: gm, Seed: *seed + uint64(r)})
				ps = append(ps, p)
				if p.Modularity > ps[best].Modularity {
					best = r
				}
			}
			_, st := summarise(ps, *seed)
			res.Scan = append(res.Scan, scanPoint{Resolution: gm, Modularity: ps[best].Modularity, Communities: len(ps[best].Communities), MeanNMI: st.MeanNMI})
		}
		stop()
		for _, sp := range res.Scan {
			if sp.MeanNMI >= 0.9 && (res.StableResolution == nil || math.Abs(sp.Resolution-1) < math.Abs(*res.StableResolution-1)) {
				v := sp.Resolution
				res.StableResolution = &v
			}
		}
	}
	if *out != "" {
		if err := writeFileAtomic(*out, func(w io.Writer) error {
			return writeMembership(w, loaded.Dict, p.Membership)
		}); err != nil {
			return fmt.Errorf("write %s: %w", *out, err)
		}
	}
	if *asJSON {
		enc := json.NewEncoder(e.stdout)
		return enc.Encode(res)
	}
	printDetect(e.stdout, &res)
	if e.interactive {
		fmt.Fprintf(e.stderr, "loaded in %v, optimised in %v\n", loadTime.Round(time.Millisecond), (time.Since(start) - loadTime).Round(time.Millisecond))
	}
	return nil
}

// summarise reports every run and the stability of the set: mean pairwise
// NMI and ARI, and the spread of Q and of the number of communities.
func summarise(parts []*tracker.Partition, seed uint64) ([]detectRun, *stability) {
	st := &stability{QMin: parts[0].Modularity, QMax: parts[0].Modularity, CommunitiesMin: len(parts[0].Communities), CommunitiesMax: len(parts[0].Communities)}
	var runs []detectRun
	for i, p := range parts {
		runs = append(runs, detectRun{Seed: seed + uint64(i), Modularity: p.Modularity, Communities: len(p.Communities)})
		st.QMin = min(st.QMin, p.Modularity)
		st.QMax = max(st.QMax, p.Modularity)
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

func printDetect(w io.Writer, r *detectResult) {
	fmt.Fprintf(w, "%s: %d nodes, %d edges, total weight %g\n", r.File, r.Nodes, r.Edges, r.TotalWeight)
	how := fmt.Sprintf("seed %d", r.Seed)
	if len(r.Runs) > 1 {
		how = fmt.Sprintf("seed %d, best of %d", r.Seed, len(r.Runs))
	}
	fmt.Fprintf(w, "modularity %.6f at resolution %g (%s)\n", r.Modularity, r.Resolution, how)
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
		fmt.Fprintf(w, "over %d seeds: modularity %.6f..%.6f, %d..%d communities, mean pairwise NMI %.4f, ARI %.4f\n",
			len(r.Runs), st.QMin, st.QMax, st.CommunitiesMin, st.CommunitiesMax, st.MeanNMI, st.MeanARI)
	}
	if n := r.Null; n != nil {
		fmt.Fprintf(w, "against %d degree-preserving rewirings: null Q %.4f +- %.4f, z = %.1f\n", n.Runs, n.Mean, n.Std, n.Z)
	}
	if len(r.Scan) > 0 {
		fmt.Fprintln(w, "resolution  modularity  communities  mean NMI over seeds")
		for _, sp := range r.Scan {
			fmt.Fprintf(w, "%10.3f  %10.6f  %11d  %8.4f\n", sp.Resolution, sp.Modularity, sp.Communities, sp.MeanNMI)
		}
		if r.StableResolution != nil {
			fmt.Fprintf(w, "stable resolution nearest 1: %g\n", *r.StableResolution)
		} else {
			fmt.Fprintln(w, "no scanned resolution gives stable results (mean NMI >= 0.9)")
		}
	}
	if r.Modularity < 0.3 {
		fmt.Fprintln(w, "modularity below 0.3: weak structure (common reading of Q, not a test)")
	}
}

// parseScan reads A:B:STEP into the resolutions A, A+STEP, ... <= B.
func parseScan(s string) ([]float64, error) {
	f := strings.Split(s, ":")
	if len(f) != 3 {
		return nil, fmt.Errorf("--scan %q: want A:B:STEP", s)
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
		out[i] = v[0] + float64(i)*v[2]
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
