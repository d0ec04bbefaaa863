package gen

// powerLaw is a discrete power law truncated to the integers lo..hi:
// P(k) is proportional to k^-tau, except that the weight of lo itself is
// scaled by a factor theta in (0, 1]. theta < 1 plays the part of a
// fractional lower bound: it lets the mean take any value between the means
// of the laws on [lo, hi] and [lo+1, hi] (see [fitMean]).
type powerLaw struct {
	lo  int
	cdf []float64 // cdf[i] = total weight of lo..lo+i
}

// newPowerLaw builds the table for lo..hi. Preconditions: 1 <= lo <= hi,
// 0 < theta <= 1, tau finite.
func newPowerLaw(lo, hi int, tau, theta float64) *powerLaw {
	p := &powerLaw{lo: lo, cdf: make([]float64, hi-lo+1)}
	sum := 0.0
	for k := lo; k <= hi; k++ {
		w := detPow(float64(k), -tau)
		if k == lo {
			w *= theta
		}
		sum += w
		p.cdf[k-lo] = sum
	}
	return p
}

// sample draws one value by inverting the cumulative table (binary search).
func (p *powerLaw) sample(r *rng) int {
	u := r.float64() * p.cdf[len(p.cdf)-1]
	// First i with cdf[i] > u; it exists because u < total.
	i, j := 0, len(p.cdf)-1
	for i < j {
		h := int(uint(i+j) >> 1)
		if p.cdf[h] > u {
			j = h
		} else {
			i = h + 1
		}
	}
	return p.lo + i
}

// mean returns the expected value of the law.
func (p *powerLaw) mean() float64 {
	s, prev := 0.0, 0.0
	for i, c := range p.cdf {
		s += float64(float64(p.lo+i) * (c - prev))
		prev = c
	}
	return s / p.cdf[len(p.cdf)-1]
}

// fitMean finds the lower bound lo and the weight factor theta of the power
// law with exponent tau on [lo, hi] whose mean is m, as LFR 2008 (section II)
// asks: "the extremes of the distribution kmin and kmax are chosen such that
// the average degree is <k>". lo is the largest integer whose full law on
// [lo, hi] has mean <= m; theta then solves, in closed form,
//
//	(theta w_lo lo + A1) / (theta w_lo + A0) = m,
//	theta = (m A0 - A1) / (w_lo (lo - m)),
//
// where w_k = k^-tau, A0 = sum_{k>lo} w_k and A1 = sum_{k>lo} k w_k.
// ok is false when even lo = 1 gives a mean above m, or m > hi.
func fitMean(hi int, tau, m float64) (lo int, theta float64, ok bool) {
	if !(m <= float64(hi)) || hi < 1 {
		return 0, 0, false
	}
	a0, a1 := 0.0, 0.0 // sums over k+1..hi
	for k := hi; k >= 1; k-- {
		w := detPow(float64(k), -tau)
		b0, b1 := a0+w, a1+float64(float64(k)*w)
		if b1 <= float64(m*b0) { // mean over [k, hi] <= m
			if k == hi {
				return k, 1, true
			}
			theta = (float64(m*a0) - a1) / float64(w*(float64(k)-m))
			if theta > 1 {
				theta = 1
			}
			if !(theta > 0) {
				// Only by rounding, when the mean over [k+1, hi] is m.
				return k + 1, 1, true
			}
			return k, theta, true
		}
		a0, a1 = b0, b1
	}
	return 0, 0, false
}
