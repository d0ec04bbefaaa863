package main

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"shoal/ingest"
	"shoal/tracker"
	"shoal/tracker/hub"
)

// The hub policy of the commands (flags in hubFlags, flags.go): nodes that
// stay in the store and the answers but out of the optimisation (package
// tracker/hub). This file turns the flags and the --hubs file into a
// hub.Policy for each command's node ids, and the counts into output.

// hubName is a node named in a --hubs file, with its line.
type hubName struct {
	name string
	line int
}

// hubPolicy is the policy the flags (or the daemon's store) ask for,
// before node names are resolved to ids.
type hubPolicy struct {
	degree     int
	percentile float64
	// from says where the names come from (the --hubs file, or "the
	// store"), for messages.
	from  string
	names []hubName
}

func (p *hubPolicy) off() bool {
	return p == nil || (p.degree == 0 && p.percentile == 0 && len(p.names) == 0)
}

// String describes the policy in words.
func (p *hubPolicy) String() string {
	if p.off() {
		return "none"
	}
	var parts []string
	if p.degree > 0 {
		parts = append(parts, fmt.Sprintf("more than %d neighbours", p.degree))
	}
	if p.percentile > 0 {
		parts = append(parts, fmt.Sprintf("above the %gth percentile of neighbour counts", p.percentile))
	}
	if len(p.names) > 0 {
		parts = append(parts, fmt.Sprintf("%d listed in %s", len(p.names), p.from))
	}
	return strings.Join(parts, ", or ")
}

// policy makes the hub.Policy on the ids lookup gives. strict: a name
// lookup does not know is bad input naming the file and line (a static
// input knows every node); otherwise unknown names are returned, for
// hub.Policy.Listed to resolve when they appear.
func (p *hubPolicy) policy(lookup func(string) (uint32, bool), strict bool) (hub.Policy, map[string]bool, error) {
	pol := hub.Policy{Degree: p.degree, Percentile: p.percentile}
	var later map[string]bool
	for _, n := range p.names {
		id, ok := lookup(n.name)
		switch {
		case ok:
			pol.Nodes = append(pol.Nodes, id)
		case strict:
			return pol, nil, usagef("%s:%d: hub %q is not a node of the input", p.from, n.line, n.name)
		default:
			if later == nil {
				later = map[string]bool{}
			}
			later[n.name] = true
		}
	}
	if err := pol.Validate(); err != nil {
		return pol, nil, usageError{err}
	}
	return pol, later, nil
}

// readHubList reads a --hubs file: one node name per line, surrounding
// blanks trimmed; blank lines and lines starting with # are skipped. A
// name given twice is bad input naming both lines.
func readHubList(path string) ([]hubName, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, usagef("--hubs: %v", err)
	}
	defer f.Close()
	return parseHubList(f, path)
}

func parseHubList(r io.Reader, path string) ([]hubName, error) {
	var out []hubName
	seen := map[string]int{}
	err := eachListLine(r, func(line int, s string) error {
		if first, dup := seen[s]; dup {
			return usagef("%s:%d: hub %q already listed at line %d", path, line, s, first)
		}
		seen[s] = line
		out = append(out, hubName{s, line})
		return nil
	})
	var ue usageError
	if err != nil && !errors.As(err, &ue) {
		return nil, fmt.Errorf("--hubs: read %s: %w", path, err)
	}
	return out, err
}

// hubReport is what the hub policy kept out of the optimisation, in the
// JSON of detect, replay and diff.
type hubReport struct {
	// Policy is the rule in words.
	Policy string `json:"policy"`
	// Threshold is the percentile rule's threshold (more neighbours than
	// this make a hub), absent without the rule.
	Threshold *int `json:"percentile_threshold,omitempty"`
	// Hubs counts the hubs present, EdgesExcluded and WeightExcluded their
	// edges; ChangesDropped the changes not passed to the tracker because
	// they touch a hub (replay, diff).
	Hubs           int     `json:"hubs"`
	EdgesExcluded  int     `json:"edges_excluded"`
	WeightExcluded float64 `json:"weight_excluded"`
	ChangesDropped uint64  `json:"changes_dropped"`
	// Stranded counts the nodes all of whose neighbours are hubs: in no
	// community, as nothing is left to optimise for them.
	Stranded int `json:"stranded"`
	// Names are the hubs (detect).
	Names []string `json:"names,omitempty"`
}

func newHubReport(p *hubPolicy, c hub.Counts, thr int) *hubReport {
	r := &hubReport{Policy: p.String(), Hubs: c.Hubs, EdgesExcluded: c.Edges, WeightExcluded: c.Weight, ChangesDropped: c.Dropped, Stranded: c.Stranded}
	if thr >= 0 {
		r.Threshold = &thr
	}
	return r
}

// printHubs writes the one-line text summary of r (nothing if nil).
func printHubs(w io.Writer, r *hubReport) {
	if r == nil {
		return
	}
	fmt.Fprintf(w, "hubs (%s", r.Policy)
	if r.Threshold != nil {
		fmt.Fprintf(w, "; percentile threshold %d", *r.Threshold)
	}
	fmt.Fprintf(w, "): %d kept out of the optimisation with %d edges of weight %g", r.Hubs, r.EdgesExcluded, r.WeightExcluded)
	if r.Stranded > 0 {
		fmt.Fprintf(w, "; %d nodes whose neighbours are all hubs are in no community", r.Stranded)
	}
	if r.ChangesDropped > 0 {
		fmt.Fprintf(w, "; %d changes not passed to the tracker", r.ChangesDropped)
	}
	fmt.Fprintln(w, "; the other figures are of the graph without them")
}

// detectHubs is the hub policy of shoal detect on its graph.
type detectHubs struct {
	p *hubPolicy
	x *hub.Excluded
}

// exclude takes the hubs out of g (nil without a policy).
func (f *hubFlags) exclude(g *tracker.Graph, d *ingest.Dict) (*detectHubs, error) {
	p, err := f.policy()
	if err != nil || p.off() {
		return nil, err
	}
	pol, _, err := p.policy(d.Lookup, true)
	if err != nil {
		return nil, err
	}
	x, err := hub.Exclude(g, &pol)
	if err != nil {
		return nil, usageError{err}
	}
	return &detectHubs{p: p, x: x}, nil
}

// report puts the counts, the hubs' names and each community's hubs into
// res (nothing without a policy).
func (h *detectHubs) report(res *detectResult, membership []uint64, d *ingest.Dict) {
	if h == nil {
		return
	}
	res.Hubs = newHubReport(h.p, h.x.Counts, h.x.Threshold)
	res.Hubs.Names = []string{}
	for _, v := range h.x.Hubs {
		res.Hubs.Names = append(res.Hubs.Names, d.Name(v))
	}
	touched := h.x.Touched(membership)
	for i := range res.PerCommunity {
		for _, v := range touched[res.PerCommunity[i].Community] {
			res.PerCommunity[i].Hubs = append(res.PerCommunity[i].Hubs, d.Name(v))
		}
	}
}

// settingHubs is the store setting of the daemon's hub policy (see
// encodeHubSetting).
const settingHubs = "hubs"

// encodeHubSetting: version 1 | degree (uvarint) | percentile (IEEE 754,
// 8 bytes big-endian) | count (uvarint) | count x (length (uvarint) |
// name). The names are those of the store's dictionary (pseudonyms in a
// pseudonymised store).
func encodeHubSetting(p *hubPolicy) []byte {
	b := []byte{1}
	b = binary.AppendUvarint(b, uint64(p.degree))
	b = binary.BigEndian.AppendUint64(b, math.Float64bits(p.percentile))
	b = binary.AppendUvarint(b, uint64(len(p.names)))
	for _, n := range p.names {
		b = binary.AppendUvarint(b, uint64(len(n.name)))
		b = append(b, n.name...)
	}
	return b
}

var errHubSetting = errors.New("store: setting hubs: corrupt")

func decodeHubSetting(b []byte) (*hubPolicy, error) {
	if len(b) < 1 || b[0] != 1 {
		return nil, fmt.Errorf("%w: unknown version", errHubSetting)
	}
	b = b[1:]
	next := func() (uint64, bool) {
		x, n := binary.Uvarint(b)
		if n <= 0 {
			return 0, false
		}
		b = b[n:]
		return x, true
	}
	p := &hubPolicy{from: "the store"}
	deg, ok := next()
	if !ok || deg > math.MaxInt32 || len(b) < 8 {
		return nil, fmt.Errorf("%w: degree", errHubSetting)
	}
	p.degree = int(deg)
	p.percentile = math.Float64frombits(binary.BigEndian.Uint64(b))
	b = b[8:]
	count, ok := next()
	if !ok || count > uint64(len(b)) {
		return nil, fmt.Errorf("%w: name count", errHubSetting)
	}
	for i := range count {
		n, ok := next()
		if !ok || n > uint64(len(b)) {
			return nil, fmt.Errorf("%w: name %d", errHubSetting, i+1)
		}
		p.names = append(p.names, hubName{string(b[:n]), int(i + 1)})
		b = b[n:]
	}
	if len(b) != 0 {
		return nil, fmt.Errorf("%w: %d trailing bytes", errHubSetting, len(b))
	}
	if err := (&hub.Policy{Degree: p.degree, Percentile: p.percentile}).Validate(); err != nil {
		return nil, fmt.Errorf("store: setting hubs: %w", err)
	}
	return p, nil
}

// hubFilter makes the hub filter of shoal replay (nil without a policy).
// Names are resolved in the input's dictionary, which knows every node, so
// an unknown name is bad input; a listed node is a hub from the moment it
// gets its dense id (its first add).
func (r *replayer) hubFilter(p *hubPolicy) (*hub.Filter, error) {
	if p.off() {
		return nil, nil
	}
	pol, _, err := p.policy(r.in.dict.Lookup, true)
	if err != nil {
		return nil, err
	}
	listed := make([]bool, r.in.dict.Len())
	for _, f := range pol.Nodes { // reading ids
		listed[f] = true
	}
	pol.Nodes = nil
	if len(p.names) > 0 {
		pol.Listed = func(u uint32) bool { return int(u) < len(r.order) && listed[r.order[u]] }
	}
	f, err := hub.NewFilter(&pol, nil)
	if err != nil {
		return nil, usageError{err}
	}
	return f, nil
}

// hubGraph makes the hub filter over full, a static graph a timeline
// starts from (shoal diff: OLD), and returns the graph to build the tracker
// on: full itself without a policy (and a nil filter), else the filter's
// Tracked graph, the filter owning full from then on. An unknown name is
// bad input.
func hubGraph(p *hubPolicy, full *tracker.Graph, lookup func(string) (uint32, bool)) (*hub.Filter, *tracker.Graph, error) {
	if p.off() {
		return nil, full, nil
	}
	pol, _, err := p.policy(lookup, true)
	if err != nil {
		return nil, nil, err
	}
	f, err := hub.NewFilter(&pol, full)
	if err != nil {
		return nil, nil, usageError{err}
	}
	return f, f.Tracked(), nil
}

// settleHubs makes the daemon's hub policy the one the flags give (any of
// --hub-degree, --hub-percentile, --hubs on the command line sets the
// whole policy: --hub-degree 0 alone turns it off), or, without them, the
// one stored with the store, so that a restart without the flags keeps
// it. Names are stored as the store's dictionary holds them: pseudonyms
// in a pseudonymised store, so the store never holds the names as given.
// A change is logged; the tracker is rebuilt on the new policy (Rebuild
// revisits the communities it changes).
func (d *daemon) settleHubs() error {
	o := d.o
	v, found, err := d.store.Setting(settingHubs)
	if err != nil {
		return err
	}
	var stored *hubPolicy
	if found {
		if stored, err = decodeHubSetting(v); err != nil {
			return err
		}
	}
	switch {
	case o.hubsSet:
		if d.pseudo != nil {
			for i := range o.hubs.names {
				o.hubs.names[i].name = d.pseudo.ID(o.hubs.names[i].name)
			}
		}
		val := encodeHubSetting(o.hubs)
		if found && string(val) != string(v) {
			d.log.Warn("hub policy changed; the tracker is rebuilt on the new one", "was", stored.String(), "now", o.hubs.String())
		}
		if !found || string(val) != string(v) {
			if err := d.store.PutSetting(settingHubs, val); err != nil {
				return err
			}
		}
	case found:
		o.hubs = stored
	default:
		o.hubs = nil
	}
	d.log.Info("hubs", "policy", o.hubs.String())
	return nil
}

// hubFilter makes the daemon's hub filter over the restored graph and
// returns the graph to rebuild the tracker on (the restored one without a
// policy). A listed name the dictionary does not hold yet is resolved when
// it appears: hub.Policy.Listed asks about every new node id, in the
// consumer's goroutine, which owns the dictionary.
func (d *daemon) hubFilter(r *ingest.Restored) (*hub.Filter, *tracker.Graph, error) {
	full := r.Graph()
	if d.o.hubs.off() {
		return nil, full, nil
	}
	pol, later, err := d.o.hubs.policy(r.Dict.Lookup, false)
	if err != nil {
		return nil, nil, err
	}
	if len(later) > 0 {
		dict := r.Dict
		pol.Listed = func(u uint32) bool { return later[dict.Name(u)] }
		d.log.Info("hubs: listed nodes not seen yet become hubs when they appear", "count", len(later))
	}
	f, err := hub.NewFilter(&pol, full)
	if err != nil {
		return nil, nil, usageError{err}
	}
	return f, f.Tracked(), nil
}
