package main

import (
	"flag"
	"fmt"
	"math"
	"time"

	"shoal/events"
	"shoal/events/timeline"
	"shoal/tracker"
)

// Flag groups: each is defined here once and used by every command that
// takes it, so that a flag means the same everywhere.

// trackerFlags are the optimiser's flags (detect, diff, replay, run); the
// drift guard only where a tracker runs incrementally.
type trackerFlags struct {
	objective              *string
	resolution, driftBound *float64
	seed                   *uint64
	fullEvery              *int
}

func addTrackerFlags(fs *flag.FlagSet, incremental bool) *trackerFlags {
	f := &trackerFlags{
		objective:  fs.String("objective", "modularity", "quality to maximise: modularity, or cpm (the Constant Potts Model: small dense groups in big graphs, no resolution limit)"),
		resolution: fs.Float64("resolution", 0, fmt.Sprintf("resolution gamma (> 0): for modularity, above 1 favours smaller communities (0: 1); for cpm, the link density per node pair a group must exceed (0: %g, for unit weights)", tracker.DefaultCPMResolution)),
		seed:       fs.Uint64("seed", 0, "seed of the random node orders"),
	}
	if incremental {
		f.fullEvery = fs.Int("full-every", 0, "drift guard: a full warm-started pass every N batches (0: never on a count)")
		f.driftBound = fs.Float64("drift-bound", 0.25, "drift guard: a full warm-started pass once the weight changed since the last one exceeds this fraction of the total (0: never)")
	}
	return f
}

func (f *trackerFlags) options() (tracker.Options, error) {
	obj, err := tracker.ParseObjective(*f.objective)
	if err != nil {
		return tracker.Options{}, usageError{fmt.Errorf("--objective: %w", err)}
	}
	if *f.resolution < 0 {
		return tracker.Options{}, usagef("--resolution %v: must be > 0 (0: the objective's default)", *f.resolution)
	}
	o := tracker.Options{Objective: obj, Resolution: *f.resolution, Seed: *f.seed}
	o.EnsureDefaults()
	if f.fullEvery != nil {
		o.FullEvery, o.DriftBound = *f.fullEvery, *f.driftBound
	}
	if err := o.Validate(); err != nil {
		return o, usageError{err}
	}
	return o, nil
}

// matchFlags are the event-matching flags (diff, replay, run).
type matchFlags struct {
	minSize, maxListed *int
	theta, growth      *float64
	members            *bool
}

func addMatchFlags(fs *flag.FlagSet) *matchFlags {
	return &matchFlags{
		minSize:   fs.Int("min-size", events.DefaultMinSize, "smallest community size that takes part in events"),
		theta:     fs.Float64("theta", events.DefaultTheta, "smallest Jaccard similarity of a continuation, in (0, 1]"),
		growth:    fs.Float64("growth", events.DefaultGrowthFraction, "relative size change that makes a continuation a grow or shrink, in (0, 1)"),
		maxListed: fs.Int("max-listed", events.DefaultMaxListed, "cap on the joined and left member lists of an event (negative: none listed)"),
		members:   fs.Bool("members", false, "put the full member lists of the communities before and after into each event"),
	}
}

func (m *matchFlags) options(name func(uint32) string) (events.Options, error) {
	o := events.Options{
		MinSize: *m.minSize, Theta: *m.theta, GrowthFraction: *m.growth,
		MaxListed: *m.maxListed, Members: *m.members, Name: name,
	}
	if o.MaxListed == 0 {
		o.MaxListed = -1 // 0 means the default in events.Options; here it means none
	}
	if err := o.Validate(); err != nil {
		return o, usageError{err}
	}
	return o, nil
}

// timelineFlags are the flags of the timeline (replay, run): when to
// snapshot, the batch size, the window, and how long lineage is kept.
// prefix is "" for replay (--every) and "snapshot-" for the daemon
// (--snapshot-every), whose other flags are about the store.
type timelineFlags struct {
	every       *time.Duration
	everyEvents *int
	applyEvery  *int
	window      *time.Duration
	history     *time.Duration
	names       [2]string // the flag names of every and every-events
}

// defaultHistory is how long lineage is kept by default: months, as a
// fraud review looks back over a quarter (common practice).
const defaultHistory = 90 * 24 * time.Hour

func addTimelineFlags(fs *flag.FlagSet, prefix string, defEvery time.Duration) *timelineFlags {
	f := &timelineFlags{names: [2]string{prefix + "every", prefix + "every-events"}}
	f.every = fs.Duration(f.names[0], defEvery, "snapshot at every multiple of DURATION of event time since the Unix epoch (UTC); 0: no time rule")
	f.everyEvents = fs.Int(f.names[1], 0, "also snapshot once N events came since the last snapshot (0: no count rule)")
	f.applyEvery = fs.Int("apply-every", 1000, "apply events to the tracker in batches of N (a speed knob: a batch also ends at every snapshot)")
	f.window = fs.Duration("window", 0, "sliding window: an add counts for this long after its time (0: forever)")
	f.history = fs.Duration("history", defaultHistory, "keep the lineage of communities (births, deaths, merges, splits, sizes) and the events for this long of event time, whatever snapshots are kept")
	return f
}

func (f *timelineFlags) schedule() (timeline.Schedule, error) {
	s := timeline.Schedule{Every: *f.every, EveryEvents: *f.everyEvents}
	switch {
	case *f.every < 0 || (*f.every > 0 && *f.every < time.Millisecond):
		return s, usagef("--%s %v: must be 0 or at least 1ms", f.names[0], *f.every)
	case *f.everyEvents < 0:
		return s, usagef("--%s %d: must not be negative", f.names[1], *f.everyEvents)
	case *f.applyEvery < 1:
		return s, usagef("--apply-every %d: must be at least 1", *f.applyEvery)
	case *f.window < 0:
		return s, usagef("--window %v: must not be negative", *f.window)
	case *f.window > 0 && *f.window < time.Millisecond:
		return s, usagef("--window %v: must be at least 1ms", *f.window)
	case *f.history <= 0:
		return s, usagef("--history %v: the lineage must be kept for some time (default %v)", *f.history, defaultHistory)
	}
	return s, nil
}

// hubFlags are the hub policy (detect, replay, diff, run): nodes so widely
// connected that they would glue unrelated groups together stay in the
// store and the answers (each community lists the hubs its members touch)
// but out of the optimisation (package tracker/hub). Off by default: a
// threshold right for one graph is wrong for another (karate's instructor,
// with 16 of its 78 edges, is the centre of one of its two factions), so
// hubs are asked for, never assumed.
type hubFlags struct {
	degree     *int
	percentile *float64
	file       *string
	read       *hubPolicy // the file is read once
}

func addHubFlags(fs *flag.FlagSet) *hubFlags {
	return &hubFlags{
		degree:     fs.Int("hub-degree", 0, "keep nodes with more than N distinct neighbours out of the optimisation, as hubs listed by the communities they touch (0: no degree rule; off by default, as a threshold right for one graph is wrong for another)"),
		percentile: fs.Float64("hub-percentile", 0, "keep nodes with more distinct neighbours than the P-th percentile (nearest rank over the nodes with a neighbour; P in (0, 100)) out of the optimisation (0: no percentile rule)"),
		file:       fs.String("hubs", "", "keep the nodes named in FILE (one per line; blank lines and # comments skipped) out of the optimisation; detect, replay and diff refuse a name their input lacks, the daemon makes it a hub when it appears"),
	}
}

// given reports whether any hub flag is on the command line.
func (f *hubFlags) given(fs *flag.FlagSet) bool {
	set := false
	fs.Visit(func(fl *flag.Flag) {
		set = set || fl.Name == "hub-degree" || fl.Name == "hub-percentile" || fl.Name == "hubs"
	})
	return set
}

// policy checks the flags and reads the --hubs file.
func (f *hubFlags) policy() (*hubPolicy, error) {
	if f.read != nil {
		return f.read, nil
	}
	p := &hubPolicy{degree: *f.degree, percentile: *f.percentile, from: *f.file}
	switch {
	case p.degree < 0:
		return nil, usagef("--hub-degree %d: must be 0 (no degree rule) or more", p.degree)
	case math.IsNaN(p.percentile) || p.percentile < 0 || p.percentile >= 100:
		return nil, usagef("--hub-percentile %v: must be 0 (no percentile rule) or in (0, 100)", p.percentile)
	}
	if *f.file != "" {
		var err error
		if p.names, err = readHubList(*f.file); err != nil {
			return nil, err
		}
	}
	f.read = p
	return p, nil
}
