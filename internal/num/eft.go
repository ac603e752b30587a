package num

import "math"

// The error-free transformations of floating-point sums and products
// (Dekker 1971, "A floating-point technique for extending the available
// precision", Numer. Math. 18; Knuth, TAOCP vol. 2, §4.2.2, Theorem B):
// each returns the rounded result and its exact rounding error. Every
// product that must be rounded is written T(a*b), so that no architecture
// fuses it into a multiply-add (Go may fuse x*y + z on arm64, ppc64le,
// s390x and amd64 with GOAMD64=v3): the results are the same bits
// everywhere.

// TwoSum returns s = fl(a + b) and e with s + e = a + b exactly (Knuth's
// branch-free form). An infinite or NaN sum has e = 0, so that the error
// term never turns an overflow into a NaN.
func TwoSum[T Float](a, b T) (s, e T) {
	s = a + b
	if math.IsInf(float64(s), 0) || s != s {
		return s, 0
	}
	bb := s - a
	return s, (a - (s - bb)) + (b - bb)
}

// FastTwoSum is TwoSum for |a| ≥ |b| or a = 0 (Dekker's form, three
// operations). The caller guarantees the order; an infinite sum has e = 0.
func FastTwoSum[T Float](a, b T) (s, e T) {
	s = a + b
	if math.IsInf(float64(s), 0) || s != s {
		return s, 0
	}
	return s, b - (s - a)
}

// TwoProd returns p = fl(a·b) and e with p + e = a·b exactly, barring
// underflow of e. For float64 the error is math.FMA(a, b, −p); for float32
// the float64 product of two float32 values is exact, so e is its
// difference from p, rounded to float32 (exact unless it underflows). An
// infinite or NaN product has e = 0.
func TwoProd[T Float](a, b T) (p, e T) {
	p = T(a * b)
	if math.IsInf(float64(p), 0) || p != p {
		return p, 0
	}
	return p, T(math.FMA(float64(a), float64(b), -float64(p)))
}
