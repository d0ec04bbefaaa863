package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"slices"
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
}

type detectRun struct {
	Seed        uint64  `json:"seed"`
	Modularity  float64 `json:"modularity"`
	Communities int     `json:"communities"`
}

// stability summarises K runs with different seeds (DESIGN.md section 5,
// "Validation").
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
	resolution := fs.Float64("resolution", 1, "modularity resolution gamma (> 0); above 1 favours smaller communities")
	seed := fs.Uint64("seed", 0, "seed of the random node order")
	runs := fs.Int("runs", 1, "run with seeds seed..seed+K-1, keep the best by modularity and report all K")
	out := fs.String("out", "", "write node<TAB>community lines (external ids) to this file")
	asJSON := fs.Bool("json", false, "print one JSON object instead of the summary")
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
	opts := tracker.Options{Resolution: *resolution, Seed: *seed}
	if err := opts.Validate(); err != nil {
		return usageError{err}
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
	if r.Modularity < 0.3 {
		fmt.Fprintln(w, "modularity below 0.3: weak structure (common reading of Q, not a test)")
	}
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
