// Package gen draws the pseudo-random inputs that plumb gen writes: Normal
// and Uniform return, value for value, what plumb gen -dist normal and
// -dist uniform write for the same seed, so that a Go test and a port that
// reads the command's files share their inputs.
//
//	q, err := gen.Normal(1, 1*8*128*64, 0, 1) // plumb gen -shape 1,8,128,64 -seed 1 q.npy
//
// The generator is Go's math/rand/v2 PCG (128-bit state, LCG step, DXSM
// output) seeded (seed, 0). A uniform value is low + (high − low)·u with
// u = (x >> 11)·2⁻⁵³ for the next 64-bit output x. Normal values come in
// pairs by the Box–Muller transform (Box & Muller 1958, Ann. Math. Statist.
// 29(2)): from two outputs x1, x2, u1 = ((x1 >> 11) + 1)·2⁻⁵³ in (0, 1],
// u2 = (x2 >> 11)·2⁻⁵³, r = √(−2 ln u1), t = 2π·u2, and the pair is
// mean + std·r·cos t, mean + std·r·sin t (an odd last value takes the cosine
// and drops the sine). Every operation is rounded to float64; ln, cos and
// sin are plumb's correctly rounded functions, so the values are the same
// bits on every machine. plumb help gen states the algorithm with its
// constants, for a port in another language that regenerates the inputs.
//
// The values are float64. A float32 kernel takes them rounded to float32
// (compare.Narrow), as plumb gen -dtype float32 writes them.
package gen

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/internal/elem"
)

// MaxElements is the largest number of values one call draws: 2²⁸, the
// largest .npy file plumb reads or writes.
const MaxElements = 1 << 28

// ErrParameter is matched (errors.Is) by every error of this package: a
// count out of range or a parameter of a distribution that is not finite or
// not in order. The message reads
//
//	gen: invalid parameter: <function>: <parameter> = <value>; want <expectation>
var ErrParameter = errors.New("gen: invalid parameter")

// Normal returns n values of the normal distribution of the given mean and
// standard deviation: mean + std·z for each standard normal z, the values
// of plumb gen -seed seed -mean mean -std std for a tensor of n elements.
// The first values of seed 1, mean 0 and std 1 are 0.8588583889475008,
// 0.5383481862322732 and 0.8094635935566922.
//
// Special cases are:
//
//	n = 0                      an empty slice
//	n < 0 or n > MaxElements   ErrParameter
//	mean or std NaN or ±Inf    ErrParameter
//	std < 0                    ErrParameter
//	std = 0                    n copies of mean
func Normal(seed uint64, n int, mean, std float64) ([]float64, error) {
	if err := checkCount("Normal", n); err != nil {
		return nil, err
	}
	switch {
	case !finite(mean):
		return nil, fmt.Errorf("%w: Normal: mean = %v; want a finite number", ErrParameter, mean)
	case !finite(std) || std < 0:
		return nil, fmt.Errorf("%w: Normal: std = %v; want a finite number ≥ 0", ErrParameter, std)
	}
	src := rand.NewPCG(seed, 0)
	x := make([]float64, n)
	for i := 0; i < n; i += 2 {
		u1 := float64(src.Uint64()>>11+1) * 0x1p-53 // (0, 1]
		u2 := float64(src.Uint64()>>11) * 0x1p-53   // [0, 1)
		r := math.Sqrt(-2 * elem.Log(u1))
		t := float64(2*math.Pi) * u2
		x[i] = mean + float64(std*float64(r*elem.Cos(t)))
		if i+1 < n {
			x[i+1] = mean + float64(std*float64(r*elem.Sin(t)))
		}
	}
	return x, nil
}

// Uniform returns n values uniform in [low, high): low + (high − low)·u for
// each u uniform in [0, 1), the values of plumb gen -dist uniform -seed
// seed -low low -high high for a tensor of n elements. (Rounding can make a
// value equal high when high − low is much larger than |low|.) The first
// values of seed 1, low 0 and high 1 are 0.5982609488236689,
// 0.08911177802144832 and 0.715356444878812: bit-exact in any language with
// 64-bit integers and IEEE float64.
//
// Special cases are:
//
//	n = 0                      an empty slice
//	n < 0 or n > MaxElements   ErrParameter
//	low or high NaN or ±Inf    ErrParameter
//	low ≥ high                 ErrParameter
//	high − low overflows       ErrParameter
func Uniform(seed uint64, n int, low, high float64) ([]float64, error) {
	if err := checkCount("Uniform", n); err != nil {
		return nil, err
	}
	w := high - low
	if !finite(low) || !finite(high) || !(low < high) || !finite(w) {
		return nil, fmt.Errorf("%w: Uniform: low = %v and high = %v; want finite numbers, low < high, with high − low finite", ErrParameter, low, high)
	}
	src := rand.NewPCG(seed, 0)
	x := make([]float64, n)
	for i := range x {
		u := float64(src.Uint64()>>11) * 0x1p-53 // [0, 1), exactly
		x[i] = low + float64(w*u)
	}
	return x, nil
}

func checkCount(fn string, n int) error {
	if n < 0 || n > MaxElements {
		return fmt.Errorf("%w: %s: n = %d; want 0 ≤ n ≤ MaxElements = %d", ErrParameter, fn, n, MaxElements)
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
