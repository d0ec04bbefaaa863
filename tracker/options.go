package tracker

import (
	"errors"
	"fmt"
	"math"
)

// Objective is the quality function the optimiser maximises (doc.go,
// Objective).
type Objective uint8

const (
	// ObjectiveModularity is modularity with resolution gamma (Newman 2006;
	// Reichardt and Bornholdt 2006). It is the zero value.
	ObjectiveModularity Objective = iota
	// ObjectiveCPM is the Constant Potts Model (Traag, Van Dooren and
	// Nesterov 2011): a community is worth keeping when its internal weight
	// exceeds gamma times its number of node pairs. It has no resolution
	// limit: a small dense group stays apart in any graph.
	ObjectiveCPM
)

// DefaultCPMResolution is the resolution of the CPM objective when none is
// given: a group is kept when at least one in twenty of its pairs is linked
// (unit weights). Chosen default, from the planted small-group graphs of
// the README (groups of 8 to 30 with a quarter of their links outside);
// weighted graphs need their own value, which shoal detect --scan finds.
const DefaultCPMResolution = 0.05

// String returns "modularity" or "cpm".
func (o Objective) String() string {
	switch o {
	case ObjectiveModularity:
		return "modularity"
	case ObjectiveCPM:
		return "cpm"
	}
	return fmt.Sprintf("objective(%d)", uint8(o))
}

// ParseObjective reads "modularity" or "cpm".
func ParseObjective(s string) (Objective, error) {
	switch s {
	case "modularity":
		return ObjectiveModularity, nil
	case "cpm":
		return ObjectiveCPM, nil
	}
	return 0, fmt.Errorf("tracker: objective %q: want modularity or cpm", s)
}

// Options configure the optimiser and the tracker. The zero value works.
type Options struct {
	// Objective selects modularity (the zero value) or CPM.
	Objective Objective
	// Resolution is gamma of the objective (doc.go, Objective). For
	// modularity, gamma > 1 favours smaller communities, gamma < 1 larger
	// ones, and zero means 1. For CPM it is the density threshold, in units
	// of edge weight per node pair, and zero means DefaultCPMResolution.
	Resolution float64
	// Seed seeds the random node orders (math/rand/v2 PCG). The same seed,
	// input and options give the same partition and ids on any machine.
	// Zero is a valid seed.
	Seed uint64
	// MaxLevels caps the number of levels of one static run. Zero means 64.
	MaxLevels int
	// Passes caps the passes of a static run: each pass after the first
	// restarts the levels from the last pass's partition and is kept only
	// when it raises the quality (Leiden's iteration). Zero means until a
	// pass gains less than 0.1% (at most 16); 1 is a single pass. Measured on
	// an invented planted partition of 9 x 10^5 edges: one pass merged a
	// third of the 90 groups (Q 0.678), four reached Q 0.688 and 87.
	Passes int
	// FullEvery makes Apply run a full static pass, warm-started from the
	// current partition, every FullEvery batches (the drift guard). Zero
	// means never on a count.
	FullEvery int
	// DriftBound makes Apply run the same full pass once the drift
	// estimate, the edge weight changed since the last full pass as a
	// fraction of the total weight m, exceeds it (see doc.go, "Drift
	// guard"). Zero means never on the estimate.
	DriftBound float64
}

// EnsureDefaults fills in zero fields with their defaults and returns o.
func (o *Options) EnsureDefaults() *Options {
	if o.Resolution == 0 {
		o.Resolution = 1
		if o.Objective == ObjectiveCPM {
			o.Resolution = DefaultCPMResolution
		}
	}
	if o.MaxLevels == 0 {
		o.MaxLevels = 64
	}
	return o
}

// Validate reports every problem with o at once.
func (o *Options) Validate() error {
	var errs []error
	if o.Objective > ObjectiveCPM {
		errs = append(errs, fmt.Errorf("tracker: objective %d: unknown", o.Objective))
	}
	if !(o.Resolution > 0) || math.IsInf(o.Resolution, 0) {
		errs = append(errs, fmt.Errorf("tracker: resolution %v: must be finite and > 0", o.Resolution))
	}
	if o.MaxLevels < 0 {
		errs = append(errs, fmt.Errorf("tracker: max levels %d: must be >= 0", o.MaxLevels))
	}
	if o.Passes < 0 {
		errs = append(errs, fmt.Errorf("tracker: passes %d: must be >= 0", o.Passes))
	}
	if o.FullEvery < 0 {
		errs = append(errs, fmt.Errorf("tracker: full-pass interval %d: must be >= 0", o.FullEvery))
	}
	if math.IsNaN(o.DriftBound) || o.DriftBound < 0 {
		errs = append(errs, fmt.Errorf("tracker: drift bound %v: must be >= 0", o.DriftBound))
	}
	return errors.Join(errs...)
}
