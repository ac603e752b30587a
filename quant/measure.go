package quant

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
)

// SQNR returns the signal-to-quantisation-noise ratio of xhat, an
// approximation of x, in decibels:
//
//	SQNR = 10·log₁₀(Σ x² / Σ (x − x̂)²)
//
// (common practice; the ratio of signal power to noise power). Both sums
// are computed exactly, Σ (x − x̂)² as Σ x² − 2·Σ x·x̂ + Σ x̂² in a
// big-integer sum, and rounded once to float64; the quotient and the
// logarithm add the rest: with u = 2^−53, the quotient is within 3u relative
// of the exact one, which moves the result by at most 10·3u/ln 10 ≈ 2^−49
// dB, and Log10 adds its own error of an ulp or so.
//
// Special cases are:
//
//	x = xhat (no noise), x not all 0     +Inf
//	x all 0, xhat not                    −Inf
//	x and xhat empty or all 0            +Inf (no noise)
//	NaN or ±Inf in x or xhat             NaN
//	len(xhat) ≠ len(x)                   error ErrLength
func SQNR(x, xhat []float64) (float64, error) { return sqnr("SQNR", x, xhat) }

// SQNR32 is SQNR of float32 tensors (widened exactly), its result rounded
// to float32.
//
// Special cases are those of SQNR.
func SQNR32(x, xhat []float32) (float32, error) {
	v, err := sqnr("SQNR32", x, xhat)
	return float32(v), err
}

func sqnr[T num.Float](fn string, x, xhat []T) (float64, error) {
	if len(xhat) != len(x) {
		return math.NaN(), fmt.Errorf("%w: %s: len(xhat) = %d; want len(x) = %d", ErrLength, fn, len(xhat), len(x))
	}
	signal, noise := newExactSum(), newExactSum()
	for i := range x {
		a, b := float64(x[i]), float64(xhat[i])
		if math.IsNaN(a) || math.IsNaN(b) || math.IsInf(a, 0) || math.IsInf(b, 0) {
			return math.NaN(), nil
		}
		signal.addProduct(a, a, 1, 0)
		noise.addProduct(a, a, 1, 0)
		noise.addProduct(a, b, -1, 1)
		noise.addProduct(b, b, 1, 0)
	}
	ps, pn := signal.round(compare.Float64), noise.round(compare.Float64)
	switch {
	case pn == 0:
		return math.Inf(1), nil
	case ps == 0:
		return math.Inf(-1), nil
	}
	// ps/pn may overflow or underflow: take the logarithms apart then.
	if r := ps / pn; r > 0 && !math.IsInf(r, 0) && r >= 0x1p-1022 {
		return 10 * math.Log10(r), nil
	}
	return 10 * (math.Log10(ps) - math.Log10(pn)), nil
}
