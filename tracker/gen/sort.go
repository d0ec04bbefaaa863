package gen

import "slices"

// sortKeys sorts keys in increasing order: an LSD radix sort on 11-bit
// digits (Knuth, TAOCP vol. 3, 5.2.5) that skips the digits on which all
// keys agree, which for packed edge keys of a graph with fewer than 2^22
// nodes are at least two of the six.
func sortKeys(keys []uint64) {
	const (
		digitBits = 11
		buckets   = 1 << digitBits
		passes    = (64 + digitBits - 1) / digitBits
	)
	n := len(keys)
	if n < 1024 {
		slices.Sort(keys)
		return
	}
	count := make([]int, passes*buckets)
	for _, k := range keys {
		for p := range passes {
			count[p*buckets+int(k>>(p*digitBits)&(buckets-1))]++
		}
	}
	src, dst := keys, make([]uint64, n)
	for p := range passes {
		c := count[p*buckets : (p+1)*buckets]
		if c[int(src[0]>>(p*digitBits)&(buckets-1))] == n {
			continue // every key has this digit
		}
		sum := 0
		for i, x := range c {
			c[i] = sum
			sum += x
		}
		shift := uint(p * digitBits)
		for _, k := range src {
			d := k >> shift & (buckets - 1)
			dst[c[d]] = k
			c[d]++
		}
		src, dst = dst, src
	}
	if &src[0] != &keys[0] {
		copy(keys, src)
	}
}
