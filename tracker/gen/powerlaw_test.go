package gen

import (
	"math"
	"testing"
)

// fitMean must hit the requested mean: recompute the mean of the fitted law
// from its definition with math.Pow (an independent reference) and compare.
// LFR 2008, section II: k_min is "chosen such that the average degree is
// <k>".
func TestFitMean(t *testing.T) {
	for _, c := range []struct {
		hi       int
		tau, avg float64
	}{
		{50, 2, 20}, // LF2009 standard sets
		{50, 2, 15},
		{200, 2, 10},
		{100, 3, 8},
		{1000, 2.5, 5},
		{50, 2, 50}, // degenerate: everybody at k_max
	} {
		lo, theta, ok := fitMean(c.hi, c.tau, c.avg)
		if !ok || lo < 1 || lo > c.hi || !(theta > 0 && theta <= 1) {
			t.Errorf("fitMean(%v) = %d, %v, %v", c, lo, theta, ok)
			continue
		}
		z, s := 0.0, 0.0
		for k := lo; k <= c.hi; k++ {
			w := math.Pow(float64(k), -c.tau)
			if k == lo {
				w *= theta
			}
			z += w
			s += float64(k) * w
		}
		if got := s / z; math.Abs(got-c.avg) > 1e-9*c.avg {
			t.Errorf("fitMean(%v): mean of the fitted law = %.12g, want %g", c, got, c.avg)
		}
		if got := newPowerLaw(lo, c.hi, c.tau, theta).mean(); math.Abs(got-c.avg) > 1e-9*c.avg {
			t.Errorf("powerLaw.mean = %.12g, want %g", got, c.avg)
		}
	}
	// The mean of k^-2 on [1, 50] is H_50 / H_50^(2) = 4.4992/1.6251 = 2.77
	// (harmonic numbers, hand calculation): a lower mean is impossible.
	if _, _, ok := fitMean(50, 2, 2.5); ok {
		t.Error("fitMean(50, 2, 2.5) succeeded; the least possible mean is 2.77")
	}
	if _, _, ok := fitMean(50, 2, 2.8); !ok {
		t.Error("fitMean(50, 2, 2.8) failed; the least possible mean is 2.77")
	}
}

// Sampled frequencies must follow the weights: for P(k) ~ k^-2 on [1, 4]
// the probabilities are (1, 1/4, 1/9, 1/16) / (205/144) = 144/205, 36/205,
// 16/205, 9/205 (hand calculation). 200000 draws put the standard error
// of each frequency below 0.0011; the tolerance is 0.005.
func TestPowerLawSample(t *testing.T) {
	p := newPowerLaw(1, 4, 2, 1)
	r := newRNG(2)
	const draws = 200000
	var count [5]int
	for range draws {
		k := p.sample(r)
		if k < 1 || k > 4 {
			t.Fatalf("sample = %d outside [1, 4]", k)
		}
		count[k]++
	}
	want := []float64{0, 144.0 / 205, 36.0 / 205, 16.0 / 205, 9.0 / 205}
	for k := 1; k <= 4; k++ {
		if got := float64(count[k]) / draws; math.Abs(got-want[k]) > 0.005 {
			t.Errorf("P(%d) = %.4f, want %.4f", k, got, want[k])
		}
	}
}
