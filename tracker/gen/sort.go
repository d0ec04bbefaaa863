package gen

import (
	"math/bits"
	"slices"
)

// sortKeys sorts packed edge keys (see edgeKey) of a graph on n nodes in
// increasing order. It repacks each key as U<<b | V with b = bits.Len(n-1),
// so that 2b bits instead of 64 carry the order, runs an LSD radix sort on
// digits of at most 12 bits (Knuth, TAOCP vol. 3, 5.2.5; for N = 10^5 that
// is three passes) and unpacks. Digits on which all keys agree are skipped.
func sortKeys(keys []uint64, n int) {
	if len(keys) < 1024 {
		slices.Sort(keys)
		return
	}
	b := uint(bits.Len(uint(max(n-1, 1))))
	for i, k := range keys {
		keys[i] = (k>>32)<<b | k&(1<<32-1)
	}
	total := 2 * b
	passes := (total + 11) / 12
	digitBits := (total + passes - 1) / passes
	buckets := 1 << digitBits
	mask := uint64(buckets - 1)
	count := make([]int, int(passes)*buckets)
	for _, k := range keys {
		for p := range passes {
			count[int(p)*buckets+int(k>>(p*digitBits)&mask)]++
		}
	}
	src, dst := keys, make([]uint64, len(keys))
	for p := range passes {
		c := count[int(p)*buckets : int(p+1)*buckets]
		shift := p * digitBits
		if c[int(src[0]>>shift&mask)] == len(src) {
			continue // every key has this digit
		}
		sum := 0
		for i, x := range c {
			c[i] = sum
			sum += x
		}
		for _, k := range src {
			d := k >> shift & mask
			dst[c[d]] = k
			c[d]++
		}
		src, dst = dst, src
	}
	low := uint64(1)<<b - 1
	for i, k := range src {
		keys[i] = (k>>b)<<32 | k&low
	}
}
