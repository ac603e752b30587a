package attention

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// Softmax returns the softmax of every row of n elements of x, a row-major
// [rows, n] slice (len(x) a multiple of n):
//
//	softmax(x)_j = e^{x_j − m} / Σ_k e^{x_k − m},  m = max_k x_k,
//
// the normalised exponential of Vaswani et al. 2017, arXiv 1706.03762,
// §3.2.1 Eq. (1). For x = (1, 3, 2) it is (e, e³, e²)/(e + e³ + e²) =
// (0.090030573170380458, 0.66524095577482189, 0.24472847105479765)
// (computed with mpmath at 40 digits, rounded to 17 significant digits).
// Subtracting the row maximum first (an identity) keeps
// every exponent ≤ 0, so no exponential overflows whatever the logits; rows
// of logits near ±1000 are exact to rounding. It is the softmax of the
// attention kernels, with no sink and no mask, exported for kernels that
// compute it alone.
//
// Special cases are:
//
//	a row of −Inf only      NaN in every element (0/0; Forward calls this an
//	                        empty row)
//	−Inf elements           0
//	a NaN in a row          NaN in every element of the row
//	+Inf in a row           NaN in every element of the row (Inf − Inf)
//	len(x) = 0              an empty slice
//
// Accuracy: the denominator is a plain running sum, so its relative error
// is bounded by (n − 1)·2⁻⁵³ (Higham 2002, §4.2) and in practice grows like
// √n ulps; the measured worst normwise relative error against the 50-digit
// values of testdata/golden/attention/softmax.json is in the package
// documentation's table.
func Softmax(x []float64, n int) ([]float64, error) { return softmax(x, n, "Softmax") }

// Softmax32 is the float32 instantiation of the same body as Softmax: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. Exponentials and logarithms are taken in
// float64 and rounded to float32.
func Softmax32(x []float32, n int) ([]float32, error) { return softmax(x, n, "Softmax32") }

// LogSumExp returns, for every row of n elements of x, the natural
// log-sum-exp
//
//	lse(x) = m + log Σ_k e^{x_k − m},  m = max_k x_k,
//
// the log of the softmax denominator (Milakov & Gimelshein 2018, arXiv
// 1805.02867, §3.1, where the running maximum plays the role of m). For x =
// (1, 3, 2) it is log(e + e³ + e²) = 3.4076059644443803 (computed with
// mpmath at 40 digits, rounded to 17 significant digits). The maximum's
// own term, exactly 1, is kept out of the sum, which is then added with
// log1p: lse = m + log1p(Σ_{j≠a} e^{x_j − m}), a the first maximum.
//
// Special cases are:
//
//	a row of −Inf only      −Inf
//	a NaN in a row          NaN
//	+Inf in a row           +Inf
//	len(x) = 0              an empty slice
//
// Accuracy: the package documentation's table.
func LogSumExp(x []float64, n int) ([]float64, error) { return logSumExp(x, n, "LogSumExp") }

// LogSumExp32 is the float32 instantiation of the same body as LogSumExp;
// see Softmax32.
func LogSumExp32(x []float32, n int) ([]float32, error) { return logSumExp(x, n, "LogSumExp32") }

func checkRows(n, length int, fn string) error {
	if n < 1 {
		return fmt.Errorf("%w: %s: n = %d; want a row length ≥ 1", ErrShape, fn, n)
	}
	if length%n != 0 {
		return fmt.Errorf("%w: %s: x has %d elements; want a multiple of the row length n = %d", ErrLength, fn, length, n)
	}
	return nil
}

func softmax[T num.Float](x []T, n int, fn string) ([]T, error) {
	if err := checkRows(n, len(x), fn); err != nil {
		return nil, err
	}
	out := append([]T(nil), x...)
	for r := 0; r < len(x); r += n {
		row := out[r : r+n]
		softmaxRow(row, T(math.Inf(-1)), true)
	}
	if out == nil {
		out = []T{}
	}
	return out, nil
}

func logSumExp[T num.Float](x []T, n int, fn string) ([]T, error) {
	if err := checkRows(n, len(x), fn); err != nil {
		return nil, err
	}
	out := make([]T, len(x)/n)
	for r := range out {
		out[r] = lseRow(x[r*n : (r+1)*n])
	}
	return out, nil
}

// rowArgMax returns the first index a of the maximum m of x, with done
// true when m is the row's log-sum-exp already: a NaN (returned as m) or
// −Inf, every term 0.
func rowArgMax[T num.Float](x []T) (a int, m T, done bool) {
	for j, v := range x {
		if v != v {
			return j, v, true
		}
		if v > x[a] {
			a = j
		}
	}
	m = x[a]
	return a, m, math.IsInf(float64(m), -1)
}

// lseRow is m + log1p(Σ_{j≠a} e^{x_j − m}) with a the first index of the
// maximum m: the maximum's own term is exactly 1, and taking it out of the
// sum before the logarithm keeps the small terms' contribution accurate
// (log(1 + r) rounds r when formed as 1 + r first).
func lseRow[T num.Float](x []T) T {
	a, m, done := rowArgMax(x)
	if done {
		return m
	}
	var rest T
	for j, v := range x {
		if j != a {
			rest += T(elem.Exp(float64(v - m)))
		}
	}
	return m + T(elem.Log1p(float64(rest)))
}
