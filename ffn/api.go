package ffn

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// Forward returns the layer's output for the Rows × In input x (row-major),
// a Rows × Out slice. For each row x:
//
//	plain (Options.Gated false):  y = φ(x·W₁ + b₁)·W₂ + b₂
//	gated (Options.Gated true):   y = (φ(x·W + b) ⊗ (x·V + c))·W₂ + b₂
//
// The plain layer is the position-wise feed-forward network of Vaswani et
// al. 2017, "Attention Is All You Need", arXiv 1706.03762, §3.3 Eq. (2),
// there with φ = ReLU. The gated units are those of Shazeer 2020, "GLU
// Variants Improve Transformer", arXiv 2002.05202, Eq. (1)–(6), which
// apply φ to the gate projection W, not to V:
//
//	GLU       Gated, ActSigmoid          (Dauphin et al. 2016, arXiv 1612.08083)
//	Bilinear  Gated, ActIdentity
//	ReGLU     Gated, ActReLU
//	GEGLU     Gated, ActGELU (or ActGELUTanh, ActGELUSigmoid)
//	SwiGLU    Gated, ActSwish with Beta, or ActSiLU for β = 1
//
// Shazeer's Eq. (6) layers have no biases; give nil biases for them.
//
// Conventions, and their alternatives:
//
//   - Weights are stored as Options.Layout says: InByOut ([in, out], the
//     papers' x·W; the zero value) or OutByIn ([out, in], one row per
//     output unit, x·Wᵀ).
//   - A gated unit's W and V may be given separately (W1, V) or as one
//     fused matrix (Fused) of 2·Hidden units, all gate units then all value
//     units (GateUpStacked) or alternating (GateUpInterleaved).
//   - Each output is the sum over inputs in ascending order, one rounding
//     per product and per addition, then the bias (the loop below). The
//     layout and the packing change where W[i][j] is read, never the order
//     of the arithmetic: all forms give bit-identical results.
//
// The definition, for unit j of a projection of the row x:
//
//	s := 0
//	for i := range x {
//		s = float64(x[i]*W[i][j]) + s
//	}
//	s += b[j]
//
// Special cases are:
//
//	Rows = 0                          an empty result, no error
//	NaN or ±Inf in x or a weight      propagate as the arithmetic says
//	Act or Layout not declared        ErrOption
//	Packing not declared, with Fused  ErrOption
//	Swish β NaN or ±Inf, β elsewhere  ErrBeta
//	a size < 1 (Rows < 0), len(x)     ErrShape
//	a weight implying another Hidden  ErrHidden
//	any other wrong weight length     ErrWeightLen
//
// Accuracy: the layer table of the package documentation, measured on the
// 50-digit golden values.
func Forward(x []float64, d Dims, w Weights[float64], o Options) ([]float64, error) {
	return forward("Forward", x, d, &w, o)
}

// Forward32 is the float32 instantiation of the same body as Forward: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. With o.Accumulation set it keeps every
// running sum of its projections in bfloat16 or binary16 (see
// Accumulation), as a port of that idiom does: that port's yardstick.
func Forward32(x []float32, d Dims, w Weights[float32], o Options) ([]float32, error) {
	return forward("Forward32", x, d, &w, o)
}

// Backward returns the gradient of a scalar loss with respect to the input
// x and to every parameter of the layer, given dy, its gradient with
// respect to the output of Forward (Rows × Out). The result dx is Rows ×
// In; the gradients come in a Weights of the same form as w (same layout,
// same packing; gradients of W1 and V, or of Fused), with every bias
// gradient present even when the bias was nil.
//
// It is the chain rule written out; per row, with a the pre-activation
// (x·W₁ + b₁, or the gate x·W + b), u = x·V + c and h the hidden vector:
//
//	db₂ = dy                  dW₂ = hᵀ·dy
//	dh  = dy·W₂ᵀ
//	plain:  da = dh ⊙ φ′(a)
//	gated:  da = dh ⊙ u ⊙ φ′(a),  du = dh ⊙ φ(a)
//	db  = da,  dW = xᵀ·da,  dc = du,  dV = xᵀ·du
//	dx  = da·Wᵀ + du·Vᵀ
//
// Parameter gradients are summed over rows in ascending row order. φ′ is
// the derivative documented at each activation (ReLUDeriv, GELUDeriv, …);
// at x = 0 ReLU's is 0.
//
// Special cases and errors are those of Forward, and dy must hold Rows ×
// Out elements (ErrShape).
//
// Accuracy: the layer table of the package documentation, measured on the
// 50-digit golden gradients. Central finite differences
// agree to within their own error (tested at 1e-7).
func Backward(x, dy []float64, d Dims, w Weights[float64], o Options) (dx []float64, grad Weights[float64], err error) {
	return backward("Backward", x, dy, d, &w, o)
}

// Backward32 is the float32 instantiation of the same body as Backward:
// the straightforward low-precision implementation the compare package
// uses as a yardstick; not a reference. It sums in float32 whatever
// o.Accumulation says: the idiom is modelled for the forward pass only.
func Backward32(x, dy []float32, d Dims, w Weights[float32], o Options) (dx []float32, grad Weights[float32], err error) {
	return backward("Backward32", x, dy, d, &w, o)
}

func activate[T num.Float](fn string, x []T, a Act, beta float64) ([]T, error) {
	if err := checkActBeta(fn, "a", "beta", a, beta); err != nil {
		return nil, err
	}
	phi, _ := activation(a, T(beta))
	y := make([]T, len(x))
	for i, v := range x {
		y[i] = phi(v)
	}
	return y, nil
}

func activateGrad[T num.Float](fn string, x, dy []T, a Act, beta float64) ([]T, error) {
	if err := checkActBeta(fn, "a", "beta", a, beta); err != nil {
		return nil, err
	}
	if len(dy) != len(x) {
		return nil, fmt.Errorf("%w: %s: dy has %d elements; want len(x) = %d", ErrShape, fn, len(dy), len(x))
	}
	_, deriv := activation(a, T(beta))
	dx := make([]T, len(x))
	for i, v := range x {
		dx[i] = dy[i] * deriv(v)
	}
	return dx, nil
}

// Activate returns φ(x) elementwise for the activation a (beta is Swish's
// β and must be 0 for any other activation). It is the vector form of the
// scalar functions below, with their special cases and accuracy, and with
// the argument checks of a layer: an unknown activation gives ErrOption, a
// NaN or infinite Swish β, or a β given to another activation, ErrBeta.
func Activate(x []float64, a Act, beta float64) ([]float64, error) {
	return activate("Activate", x, a, beta)
}

// Activate32 is the float32 instantiation of the same body as Activate:
// the straightforward low-precision implementation the compare package
// uses as a yardstick; not a reference.
func Activate32(x []float32, a Act, beta float64) ([]float32, error) {
	return activate("Activate32", x, a, beta)
}

// ActivateGrad returns dy ⊙ φ′(x), the gradient through the activation a
// of a loss whose gradient with respect to φ(x) is dy. Errors are those of
// Activate, and ErrShape when dy and x differ in length.
func ActivateGrad(x, dy []float64, a Act, beta float64) ([]float64, error) {
	return activateGrad("ActivateGrad", x, dy, a, beta)
}

// ActivateGrad32 is the float32 instantiation of the same body as
// ActivateGrad: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference.
func ActivateGrad32(x, dy []float32, a Act, beta float64) ([]float32, error) {
	return activateGrad("ActivateGrad32", x, dy, a, beta)
}

// HiddenSize returns the hidden width of a gated feed-forward layer for a
// model width d, rounded up to a multiple of m:
//
//	h = m·⌈(2/3 · 4d) / m⌉
//
// A plain layer's hidden width is 4d (Vaswani et al. 2017, §3.3: 512 and
// 2048); a gated unit has three matrices instead of two, so Shazeer 2020
// (arXiv 2002.05202, §2) cuts the hidden width by 2/3 to keep the parameter
// count. Rounding up to a multiple of m, for hardware-friendly shapes, is
// common practice; m = 1 gives ⌈8d/3⌉. The arithmetic is exact, in
// integers: h = m·⌈8d / 3m⌉. For d = 4096, m = 256: h = 11008.
//
// Special cases are:
//
//	d < 1 or m < 1            ErrShape
//	h would overflow an int   ErrShape
func HiddenSize(d, m int) (int, error) {
	switch {
	case d < 1:
		return 0, fmt.Errorf("%w: HiddenSize: model width d = %d; want ≥ 1", ErrShape, d)
	case m < 1:
		return 0, fmt.Errorf("%w: HiddenSize: multiple m = %d; want ≥ 1", ErrShape, m)
	}
	q := 0
	if m <= math.MaxInt/3 && d <= (math.MaxInt-3*m)/8 {
		q = (8*d + 3*m - 1) / (3 * m)
	}
	if q == 0 || q > math.MaxInt/m {
		return 0, fmt.Errorf("%w: HiddenSize: d = %d, m = %d; want a hidden size m·⌈8d/3m⌉ that fits an int", ErrShape, d, m)
	}
	return q * m, nil
}
