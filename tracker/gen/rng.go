package gen

import (
	"math/bits"
	"math/rand/v2"
)

// seedStream is the fixed PCG stream (increment) selector used with the
// caller's seed. ASCII "shoalgen".
const seedStream = 0x73686f616c67656e

// rng draws the generators' random numbers. Only the raw Uint64 stream of
// PCG, whose output math/rand/v2 specifies exactly, is used; bounded
// integers, floats and shuffles are derived here so that no change in the
// standard library's helper methods can change a generated graph.
type rng struct {
	src rand.PCG
}

func newRNG(seed uint64) *rng {
	r := &rng{}
	r.src.Seed(seed, seedStream)
	return r
}

// intn returns a uniform integer in [0, n). n must be > 0. Lemire's
// multiply-and-reject method (Lemire 2019, "Fast random integer generation
// in an interval", ACM TOMACS 29(1)).
func (r *rng) intn(n int) int {
	un := uint64(n)
	hi, lo := bits.Mul64(r.src.Uint64(), un)
	if lo < un {
		thresh := -un % un
		for lo < thresh {
			hi, lo = bits.Mul64(r.src.Uint64(), un)
		}
	}
	return int(hi)
}

// float64 returns a uniform float64 in [0, 1) with 53 random bits.
func (r *rng) float64() float64 {
	return float64(float64(r.src.Uint64()>>11) * 0x1p-53)
}

// shuffle32 permutes s uniformly at random (Fisher-Yates).
func (r *rng) shuffle32(s []uint32) {
	for i := len(s) - 1; i > 0; i-- {
		j := r.intn(i + 1)
		s[i], s[j] = s[j], s[i]
	}
}

// perm returns a uniformly random permutation of 0..n-1.
func (r *rng) perm(n int) []uint32 {
	p := make([]uint32, n)
	for i := range p {
		p[i] = uint32(i)
	}
	r.shuffle32(p)
	return p
}
