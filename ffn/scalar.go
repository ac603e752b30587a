package ffn

// The scalar activations and their derivatives, the float64 reference. They
// are float64 only; their float32 instantiations are the vector forms
// Activate32 and ActivateGrad32, which run the same generic bodies.

// ReLU returns the rectified linear unit max(0, x) (Nair & Hinton 2010,
// "Rectified Linear Units Improve Restricted Boltzmann Machines"; the
// feed-forward layer of Vaswani et al. 2017, arXiv 1706.03762, Eq. (2)).
//
// Special cases are:
//
//	ReLU(x) = 0 for x ≤ 0 (including −0, which gives +0)
//	ReLU(+Inf) = +Inf
//	ReLU(NaN) = NaN
//
// The result is exact.
func ReLU(x float64) float64 { return relu(x) }

// ReLUDeriv returns the derivative of ReLU: 1 for x > 0, 0 for x < 0. At
// x = 0, where ReLU has no derivative, it returns 0, the convention of
// taking the indicator of x > 0 [common practice]; 1 or ½ are the other
// choices a port may have made.
//
// Special cases are:
//
//	ReLUDeriv(0) = 0
//	ReLUDeriv(±Inf) = 1, 0
//	ReLUDeriv(NaN) = NaN
func ReLUDeriv(x float64) float64 { return reluDeriv(x) }

// Sigmoid returns the logistic function σ(x) = 1/(1 + e^{−x}).
//
// It is evaluated as 1/(1 + e^{−x}) for x ≥ 0 and e^{x}/(1 + e^{x}) for
// x < 0, so the exponential never overflows and the result keeps its
// relative accuracy in the lower tail, where it is about e^{x}.
//
// Special cases are:
//
//	Sigmoid(+Inf) = 1
//	Sigmoid(−Inf) = 0
//	Sigmoid(NaN) = NaN
//	Sigmoid(x) = 0 for x < about −745, where e^{x} underflows
//
// Accuracy: the activation table of the package documentation.
func Sigmoid(x float64) float64 { return sigmoid(x) }

// SigmoidDeriv returns σ′(x) = σ(x)·σ(−x), computed in that form rather
// than as σ(x)·(1 − σ(x)), which loses 1 − σ(x) to cancellation for large
// x.
//
// Special cases are:
//
//	SigmoidDeriv(±Inf) = 0
//	SigmoidDeriv(NaN) = NaN
//
// Accuracy: the activation table of the package documentation.
func SigmoidDeriv(x float64) float64 { return sigmoidDeriv(x) }

// Swish returns x·σ(βx) (Ramachandran et al. 2017, "Searching for
// Activation Functions", arXiv 1710.05941). β = 1 is SiLU; β = 0 gives
// x/2; as β → +∞ it tends to ReLU.
//
// βx is carried as an unevaluated sum of two float64 values into the
// stable sigmoid, so the lower tail, about x·e^{βx}, keeps its relative
// accuracy for large |βx| instead of losing |βx| ulps to the rounding of
// the product.
//
// Special cases are:
//
//	Swish(x, 0) = x/2
//	Swish(+Inf, β) = +Inf for β > 0, 0 for β < 0
//	Swish(−Inf, β) = −0 for β > 0, −Inf for β < 0
//	Swish(x, β) = NaN if x or β is NaN, or β is ±Inf
//
// (Layers and Activate refuse a NaN or infinite β with ErrBeta.)
//
// Accuracy: the activation table of the package documentation (β = 1,
// 1.5, 0.25, −0.7).
func Swish(x, beta float64) float64 { return swish(x, beta) }

// SwishDeriv returns d/dx x·σ(βx) = σ(βx)·(1 + βx·σ(−βx)).
//
// The derivative has a zero at βx ≈ −1.27846 [mpmath] (where
// 1 + t·σ(−t) = 0); near it the error is small in absolute terms but large
// relative to the value.
//
// Special cases are:
//
//	SwishDeriv(x, 0) = ½
//	SwishDeriv(±Inf, β) = 1 on the side where βx → +∞, 0 on the other
//	SwishDeriv(x, β) = NaN if x or β is NaN, or β is ±Inf
//
// Accuracy: the activation table of the package documentation (β = 1,
// 1.5, 0.25, −0.7).
func SwishDeriv(x, beta float64) float64 { return swishDeriv(x, beta) }

// SiLU returns the sigmoid-weighted linear unit x·σ(x) (Elfwing et al.
// 2018, "Sigmoid-Weighted Linear Units for Neural Network Function
// Approximation in Reinforcement Learning", arXiv 1702.03118):
// Swish with β = 1. Special cases and accuracy are those of Swish.
func SiLU(x float64) float64 { return swish(x, 1) }

// SiLUDeriv returns σ(x)·(1 + x·σ(−x)), the derivative of SiLU; see
// SwishDeriv.
func SiLUDeriv(x float64) float64 { return swishDeriv(x, 1) }

// GELU returns the Gaussian error linear unit x·Φ(x), Φ the standard
// normal distribution function, in its exact form (Hendrycks & Gimpel 2016,
// "Gaussian Error Linear Units (GELUs)", arXiv 1606.08415, §2):
//
//	GELU(x) = ½·x·(1 + erf(x/√2)) = ½·x·erfc(−x/√2)
//
// It is evaluated in the erfc form for every x, so that for negative x,
// where 1 + erf(x/√2) cancels completely, the value (about φ(x), e^{−x²/2})
// keeps its relative accuracy. The argument −x/√2 is carried as an
// unevaluated sum hi + lo and erfc(hi + lo) is taken as erfc(hi) −
// lo·(2/√π)·e^{−hi²}: the rounding of x/√2 would otherwise cost about x²
// ulps in the tail (1e-13 at x = −30). The tanh and sigmoid approximations
// are GELUTanh and GELUSigmoid.
//
// Special cases are:
//
//	GELU(+Inf) = +Inf
//	GELU(−Inf) = −0
//	GELU(NaN) = NaN
//	GELU(x) = −0 for x < about −38.5, where the value underflows
//
// Accuracy: the activation table of the package documentation.
func GELU(x float64) float64 { return gelu(x) }

// GELUDeriv returns the derivative of the exact GELU,
//
//	Φ(x) + x·φ(x),   φ(x) = e^{−x²/2}/√(2π),
//
// with Φ evaluated as in GELU and x² carried exactly (as hi + lo) into
// the exponential.
//
// Special cases are:
//
//	GELUDeriv(+Inf) = 1
//	GELUDeriv(−Inf) = 0
//	GELUDeriv(NaN) = NaN
//
// Accuracy: the activation table of the package documentation.
// The derivative has a zero at x ≈ −0.75179 [mpmath]; near it the error
// is small in absolute terms only.
func GELUDeriv(x float64) float64 { return geluDeriv(x) }

// GELUTanh returns the tanh approximation of GELU (Hendrycks & Gimpel
// 2016, arXiv 1606.08415, §2):
//
//	½·x·(1 + tanh(√(2/π)·(x + 0.044715·x³)))
//
// with the constant 0.044715 exactly as printed. It is evaluated through
// the identity 1 + tanh(u) = 2σ(2u) as x·σ(2u), with 2u carried as an
// unevaluated sum hi + lo, so that neither the cancellation in
// 1 + tanh(u) for negative x nor the rounding of the cubic (about 2|u| ulps
// in e^{2u}) spoils the tail.
//
// Special cases are:
//
//	GELUTanh(x) = x for x ≥ 30, where it rounds to x
//	GELUTanh(x) = −0 for x ≤ −30 (it underflows from about x = −22)
//	GELUTanh(NaN) = NaN
//
// Accuracy: against the 50-digit golden values, normwise relative error
// 7.8e-17 over |x| ≤ 8 (with tiny and signed-zero inputs), and at most 1.9e-16
// relative to each value for 5 ≤ |x| ≤ 30 (where the
// value underflows, the result is the correctly signed zero).
func GELUTanh(x float64) float64 { return geluTanh(x) }

// GELUTanhDeriv returns the derivative of GELUTanh,
//
//	σ(2u)·(1 + x·σ(−2u)·2u′),   2u′ = 2·√(2/π)·(1 + 3·0.044715·x²).
//
// Special cases are:
//
//	GELUTanhDeriv(x) = 1 for x ≥ 30
//	GELUTanhDeriv(x) = −0 for x ≤ −30
//	GELUTanhDeriv(NaN) = NaN
//
// Accuracy: the activation table of the package documentation.
func GELUTanhDeriv(x float64) float64 { return geluTanhDeriv(x) }

// GELUSigmoid returns the sigmoid approximation of GELU, x·σ(1.702x)
// (Hendrycks & Gimpel 2016, arXiv 1606.08415, §2), with 1.702 exactly as
// printed. It is Swish with β = 1.702, evaluated the same way.
//
// Special cases are:
//
//	GELUSigmoid(+Inf) = +Inf
//	GELUSigmoid(−Inf) = −0
//	GELUSigmoid(NaN) = NaN
//
// Accuracy: the activation table of the package documentation.
func GELUSigmoid(x float64) float64 { return geluSigmoid(x) }

// GELUSigmoidDeriv returns the derivative of GELUSigmoid,
// σ(t)·(1 + t·σ(−t)) with t = 1.702x.
//
// Special cases are:
//
//	GELUSigmoidDeriv(+Inf) = 1
//	GELUSigmoidDeriv(−Inf) = 0
//	GELUSigmoidDeriv(NaN) = NaN
//
// Accuracy: the activation table of the package documentation.
func GELUSigmoidDeriv(x float64) float64 { return geluSigmoidDeriv(x) }
