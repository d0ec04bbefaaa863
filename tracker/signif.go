package tracker

import (
	"cmp"
	"math"
	"slices"
	"sort"
)

// InternalZ compares the internal weight of a member set with what the
// configuration model (doc.go, Validation) expects for a set of the same
// summed degree: expected = tot^2 / 4m ([ExpectedInternal]) and, taking
// the number of internal edges as Poisson with that mean in units of the
// mean edge weight wbar = m / edges, z = (internal - expected) /
// sqrt(wbar expected). It is 0 when nothing is expected.
//
// This z treats the set as if it had been drawn blind. The optimiser chose
// the set because it is dense, so even a random graph's communities score
// high: it ranks and screens communities of one graph, it is not a test.
// [Calibrate] gives the test, against the communities the same optimiser
// finds in rewired graphs.
func InternalZ(internal, degree, m, meanWeight float64) (expected, z float64) {
	expected = ExpectedInternal(degree, m)
	if expected <= 0 || !(meanWeight > 0) {
		return expected, 0
	}
	return expected, (internal - expected) / math.Sqrt(meanWeight*expected)
}

// NullCommunity is one community found in a rewired graph: its size and
// its InternalZ.
type NullCommunity struct {
	Size int
	Z    float64
}

// Calibrated is a community's InternalZ against the null communities of
// comparable size.
type Calibrated struct {
	// Z is (z - mean) / sd over the null communities of comparable size,
	// Pool their number; P the empirical one-sided p-value (see
	// Calibrate).
	Z    float64
	P    float64
	Pool int
	// Significant is P below level / k (Bonferroni's correction for the
	// k communities tested at once).
	Significant bool
}

// minPool is the fewest null communities, nearest in size, an observed
// community is compared with; sizeBand widens the pool to every null
// community within that factor of its size. Chosen defaults.
const (
	minPool  = 30
	sizeBand = 1.5
)

// Calibrate compares the InternalZ of every observed community (sizes and
// zs, parallel slices) with the InternalZ of the communities the same
// optimiser found in rewired graphs of the same degrees (null), those of
// comparable size: every null community within a factor sizeBand of its
// size, and at least the minPool nearest in log size. The blind z grows
// with the size of a set, which is why the comparison is by size.
//
// Z is (z - mean) / sd over the pool, for reading. P is the one-sided
// p-value of z against the pool (tailP): empirical inside the bulk, an
// exponential tail fitted to the pool's top tenth beyond it. A normal law
// fitted to the pool was tried first and flagged a community in 5% of
// rewired graphs at a nominal 1%: the null's upper tail is heavier. A
// community is significant when P < level / k for k = len(sizes)
// (Bonferroni). With no null communities every result is zero.
func Calibrate(sizes []int, zs []float64, null []NullCommunity, level float64) []Calibrated {
	out := make([]Calibrated, len(sizes))
	if len(null) == 0 {
		return out
	}
	type cand struct{ d, z float64 }
	cands := make([]cand, len(null))
	k := float64(len(sizes))
	band := math.Log(sizeBand)
	var pool []float64
	for i, s := range sizes {
		ls := math.Log(float64(max(s, 1)))
		for j, nc := range null {
			cands[j] = cand{math.Abs(math.Log(float64(max(nc.Size, 1))) - ls), nc.Z}
		}
		slices.SortStableFunc(cands, func(a, b cand) int { return cmp.Compare(a.d, b.d) })
		pool = pool[:0]
		for j, c := range cands {
			if j >= minPool && c.d > band+1e-12 {
				break
			}
			pool = append(pool, c.z)
		}
		mean, sd := meanSD(pool)
		r := Calibrated{Pool: len(pool)}
		switch {
		case sd > 0:
			r.Z = (zs[i] - mean) / sd
		case zs[i] > mean:
			r.Z = math.Inf(1)
		}
		r.P = tailP(pool, zs[i])
		r.Significant = r.P < level/k
		out[i] = r
	}
	return out
}

// tailP is the one-sided p-value of z against the sample pool: the
// empirical (1 + count >= z) / (1 + n) while z is below the pool's 90th
// percentile u; beyond it, the peaks-over-threshold estimate with an
// exponential excess law (Davison and Smith 1990, shape 0): (n_u / n)
// exp(-(z - u) / beta), with n_u the values above u and beta their mean
// excess. An exponential tail is heavier than a normal one, so for a null
// of normal-like tail the estimate errs on the safe side.
func tailP(pool []float64, z float64) float64 {
	n := len(pool)
	if n == 0 {
		return 1
	}
	s := slices.Clone(pool)
	slices.Sort(s)
	ui := int(0.9 * float64(n))
	if n < 10 || z <= s[ui] {
		above := n - sort.SearchFloat64s(s, z)
		return float64(1+above) / float64(1+n)
	}
	u := s[ui]
	var beta float64
	tail := s[ui+1:]
	for _, v := range tail {
		beta += v - u
	}
	if len(tail) == 0 || beta <= 0 {
		return 1 / float64(1+n)
	}
	beta /= float64(len(tail))
	return float64(len(tail)) / float64(n) * math.Exp(-(z-u)/beta)
}

func meanSD(x []float64) (mean, sd float64) {
	if len(x) == 0 {
		return 0, 0
	}
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	if len(x) < 2 {
		return mean, 0
	}
	for _, v := range x {
		sd += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(sd / float64(len(x)-1))
}

// NodeStability measures, for each node, how often it sits with its
// community of the best run across other runs (seeds): for node i with
// best-run community B, in each other run r the community of r holding
// the most members of B (ties: the smaller id) is B's match, and i sits
// with B in r when it is in that match. The result is the share of the
// other runs where it does: 1 for a node whose group every run finds, low
// for a node on a boundary the runs draw differently. Absent nodes
// (NoCommunity in best) get NaN; with no other runs every node gets 1.
func NodeStability(best []uint64, others [][]uint64) []float64 {
	out := make([]float64, len(best))
	for i, c := range best {
		if c == NoCommunity {
			out[i] = math.NaN()
		}
	}
	if len(others) == 0 {
		for i := range out {
			if !math.IsNaN(out[i]) {
				out[i] = 1
			}
		}
		return out
	}
	type pair struct{ b, r uint64 }
	for _, run := range others {
		// Count (best community, run community) pairs and pick each best
		// community's match.
		pairs := make([]pair, 0, len(best))
		for i, c := range best {
			if c != NoCommunity && i < len(run) {
				pairs = append(pairs, pair{c, run[i]})
			}
		}
		slices.SortFunc(pairs, func(x, y pair) int {
			if r := cmp.Compare(x.b, y.b); r != 0 {
				return r
			}
			return cmp.Compare(x.r, y.r)
		})
		match := map[uint64]uint64{}
		for i := 0; i < len(pairs); {
			b := pairs[i].b
			bestR, bestN := NoCommunity, 0
			for i < len(pairs) && pairs[i].b == b {
				j := i
				for j < len(pairs) && pairs[j] == pairs[i] {
					j++
				}
				if j-i > bestN {
					bestR, bestN = pairs[i].r, j-i
				}
				i = j
			}
			match[b] = bestR
		}
		for i, c := range best {
			if c != NoCommunity && i < len(run) && run[i] == match[c] {
				out[i]++
			}
		}
	}
	for i := range out {
		if !math.IsNaN(out[i]) {
			out[i] /= float64(len(others))
		}
	}
	return out
}
