package events

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// ErrInvalid is returned (wrapped) for bad options or inconsistent
// snapshots.
var ErrInvalid = errors.New("events: invalid input")

// Defaults; doc.go gives the source of each.
const (
	DefaultMinSize        = 3
	DefaultTheta          = 0.3
	DefaultGrowthFraction = 0.1
	DefaultMaxListed      = 100
)

// Options configure [Classify]. The zero value gives the defaults.
type Options struct {
	// MinSize is the smallest community size that takes part in matching;
	// smaller communities produce no events. Default 3; 0 means the default.
	MinSize int
	// Theta is the smallest Jaccard similarity of a continuation, in (0, 1].
	// Default 0.3; 0 means the default.
	Theta float64
	// GrowthFraction is the relative size change that makes a continuation a
	// grow or shrink, in (0, 1). Default 0.1; 0 means the default.
	GrowthFraction float64
	// MaxListed caps the joined and left lists and the birth/death overlap
	// lists. Default 100; 0 means the default; negative lists nothing (the
	// counts are still given).
	MaxListed int
	// Members adds the full member list of every community in before and
	// after. Default false.
	Members bool
	// Name turns a dense internal node id into the external id written in
	// events. nil means the decimal internal id.
	Name func(node uint32) string
}

// EnsureDefaults replaces zero fields by their defaults.
func (o *Options) EnsureDefaults() {
	if o.MinSize == 0 {
		o.MinSize = DefaultMinSize
	}
	if o.Theta == 0 {
		o.Theta = DefaultTheta
	}
	if o.GrowthFraction == 0 {
		o.GrowthFraction = DefaultGrowthFraction
	}
	if o.MaxListed == 0 {
		o.MaxListed = DefaultMaxListed
	}
}

// Validate reports every problem at once. Call it after EnsureDefaults.
func (o *Options) Validate() error {
	var errs []string
	if o.MinSize < 1 {
		errs = append(errs, fmt.Sprintf("min size %d must be at least 1", o.MinSize))
	}
	if math.IsNaN(o.Theta) || o.Theta <= 0 || o.Theta > 1 {
		errs = append(errs, fmt.Sprintf("theta %v must be in (0, 1]", o.Theta))
	}
	if math.IsNaN(o.GrowthFraction) || o.GrowthFraction <= 0 || o.GrowthFraction >= 1 {
		errs = append(errs, fmt.Sprintf("growth fraction %v must be in (0, 1)", o.GrowthFraction))
	}
	if len(errs) > 0 {
		return fmt.Errorf("%w: options: %s", ErrInvalid, strings.Join(errs, "; "))
	}
	return nil
}
