package gen

import "math"

// This file holds the few transcendental functions the generators need,
// written with the four basic operations only so that every result is the
// same on every machine.
//
// NB: the math package uses assembly for Log and Exp on some architectures
// (amd64 among them), so its last bit may differ between machines (for
// subnormal arguments much more: on amd64, Go 1.26, math.Log(2^-1074) is
// -709.09, not -744.44 as on 386; see detmath_test.go), and the
// Go compiler may fuse x*y+z into one FMA instruction on others (arm64,
// ppc64le, s390x). Either would let a weight or a skip length differ by one
// ulp and, once in a while, change a sampled integer. Below, every product
// that feeds a sum is wrapped in an explicit float64 conversion, which the Go
// spec ("Floating-point operators") says prevents fusion. Frexp, Ldexp and
// Floor are exact, so they are safe to take from the math package.

const (
	// ln2Hi + ln2Lo = ln 2. ln2Hi has its low 21 bits zero, so k*ln2Hi is
	// exact for every exponent k a float64 can have (|k| < 2^11). Values as in fdlibm
	// (Sun Microsystems, e_log.c / e_exp.c).
	ln2Hi  = 6.93147180369123816490e-01
	ln2Lo  = 1.90821492927058770002e-10
	invLn2 = 1.44269504088896338700e+00
)

// detLog returns the natural logarithm of x, deterministically, within a few
// ulp of the exact value (subnormal x included). Non-positive, infinite and NaN arguments return what
// math.Log returns (those results are exact).
func detLog(x float64) float64 {
	if !(x > 0) || math.IsInf(x, 1) {
		return math.Log(x)
	}
	f, e := math.Frexp(x) // x = f * 2^e, f in [0.5, 1)
	if f < math.Sqrt2/2 {
		f *= 2 // exact
		e--
	}
	// ln f = 2 atanh(s) = 2 (s + s^3/3 + s^5/5 + ...), s = (f-1)/(f+1),
	// |s| <= 0.1716 on f in [1/sqrt2, sqrt2): twelve terms leave an error
	// below 1e-20 relative (s^24/25 < 1.7e-20).
	s := (f - 1) / (f + 1)
	s2 := float64(s * s)
	r := 1.0 / 23
	r = float64(r*s2) + 1.0/21
	r = float64(r*s2) + 1.0/19
	r = float64(r*s2) + 1.0/17
	r = float64(r*s2) + 1.0/15
	r = float64(r*s2) + 1.0/13
	r = float64(r*s2) + 1.0/11
	r = float64(r*s2) + 1.0/9
	r = float64(r*s2) + 1.0/7
	r = float64(r*s2) + 1.0/5
	r = float64(r*s2) + 1.0/3
	r = float64(r*s2) + 1
	k := float64(e)
	return float64(k*ln2Hi) + (float64(k*ln2Lo) + float64(2*s*r))
}

// detExp returns e^x, deterministically, within a few ulp of the exact
// value.
func detExp(x float64) float64 {
	switch {
	case x != x:
		return x
	case x > 709.782712893384:
		return math.Inf(1)
	case x < -745.1332191019412:
		return 0
	}
	// x = k ln2 + r with |r| <= ln2/2; e^x = 2^k e^r.
	k := math.Floor(float64(x*invLn2) + 0.5)
	r := (x - float64(k*ln2Hi)) - float64(k*ln2Lo)
	// Taylor series of e^r to r^17/17!: the rest is below 0.35^18/18! < 1e-23.
	p := 1.0 / 355687428096000 // 1/17!
	p = float64(p*r) + 1.0/20922789888000
	p = float64(p*r) + 1.0/1307674368000
	p = float64(p*r) + 1.0/87178291200
	p = float64(p*r) + 1.0/6227020800
	p = float64(p*r) + 1.0/479001600
	p = float64(p*r) + 1.0/39916800
	p = float64(p*r) + 1.0/3628800
	p = float64(p*r) + 1.0/362880
	p = float64(p*r) + 1.0/40320
	p = float64(p*r) + 1.0/5040
	p = float64(p*r) + 1.0/720
	p = float64(p*r) + 1.0/120
	p = float64(p*r) + 1.0/24
	p = float64(p*r) + 1.0/6
	p = float64(p*r) + 1.0/2
	p = float64(p*r) + 1
	p = float64(p*r) + 1
	return math.Ldexp(p, int(k))
}

// detPow returns x^y for x > 0, deterministically (e^(y ln x)). The
// relative error grows with |y ln x| (about |y ln x| ulp), which is harmless
// for the power-law weights it is used for.
func detPow(x, y float64) float64 {
	return detExp(float64(y * detLog(x)))
}
