package tracker

import (
	"errors"
	"fmt"
	"math"
)

// Options configure the optimiser and the tracker. The zero value works.
type Options struct {
	// Resolution is gamma in the modularity of doc.go (Objective); gamma > 1
	// favours smaller communities, gamma < 1 larger ones. Zero means 1.
	Resolution float64
	// Seed seeds the random node orders (math/rand/v2 PCG). The same seed,
	// input and options give the same partition and ids on any machine.
	// Zero is a valid seed.
	Seed uint64
	// MaxLevels caps the number of levels of one static run. Zero means 64.
	MaxLevels int
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
	}
	if o.MaxLevels == 0 {
		o.MaxLevels = 64
	}
	return o
}

// Validate reports every problem with o at once.
func (o *Options) Validate() error {
	var errs []error
	if !(o.Resolution > 0) || math.IsInf(o.Resolution, 0) {
		errs = append(errs, fmt.Errorf("tracker: resolution %v: must be finite and > 0", o.Resolution))
	}
	if o.MaxLevels < 0 {
		errs = append(errs, fmt.Errorf("tracker: max levels %d: must be >= 0", o.MaxLevels))
	}
	if o.FullEvery < 0 {
		errs = append(errs, fmt.Errorf("tracker: full-pass interval %d: must be >= 0", o.FullEvery))
	}
	if math.IsNaN(o.DriftBound) || o.DriftBound < 0 {
		errs = append(errs, fmt.Errorf("tracker: drift bound %v: must be >= 0", o.DriftBound))
	}
	return errors.Join(errs...)
}
