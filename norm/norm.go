package norm

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// Options are the convention switches shared by every function. The zero
// value is not usable: Epsilon must be set (see the package documentation
// for why ε = 0 is refused).
type Options struct {
	// Epsilon is ε, finite and > 0.
	Epsilon float64
	// Placement says where ε enters; the zero value is EpsilonInRoot.
	Placement EpsilonPlacement
	// Weight says how the weight becomes the gain; the zero value is
	// WeightAsIs. It has no effect when the weight is nil.
	Weight WeightForm
	// Variance is how the float32 instantiations of LayerNorm compute the
	// variance (a port's precision idiom; the float64 reference ignores
	// it): LayerNorm32, LayerNormBackward32, AddLayerNorm32 and
	// AddLayerNormBackward32 honour it; RMSNorm has no mean and ignores
	// it. The zero value is VarianceTwoPass.
	Variance Variance
}

// Grads are the gradients of a scalar loss L returned by the backward
// functions.
type Grads struct {
	// X is ∂L/∂x, the shape of x. For the fused residual-add functions it
	// is the gradient with respect to both addends.
	X []float64
	// Weight is ∂L/∂w, length d, summed over the rows; nil when the weight
	// was nil. It is the same for both weight forms, since ∂γ/∂w = 1.
	Weight []float64
	// Bias is ∂L/∂b, length d, the column sums of ∂L/∂y (LayerNorm only;
	// nil for RMSNorm).
	Bias []float64
}

func (o Options) check(fn string) error {
	e := o.Epsilon
	if !(e > 0) || math.IsInf(e, 1) {
		why := "ε = 0 divides 0 by 0 on a constant row"
		switch {
		case math.IsNaN(e) || math.IsInf(e, 0):
			why = "it would make every output NaN or 0"
		case e < 0:
			why = "a negative ε can make the denominator 0 or NaN"
		}
		return fmt.Errorf("%w: %s: Options.Epsilon = %v; want a finite number > 0 (%s)", ErrEpsilon, fn, e, why)
	}
	if err := placementWords.CheckAt(fn+": Options.Placement", o.Placement); err != nil {
		return err
	}
	if err := varianceWords.CheckAt(fn+": Options.Variance", o.Variance); err != nil {
		return err
	}
	return weightWords.CheckAt(fn+": Options.Weight", o.Weight)
}

// checkRows validates the row length d against the input x, which the
// caller knows by name ("x", or "sum" for the fused backward).
func checkRows[T num.Float](fn, name string, x []T, d int) error {
	if d < 1 {
		return fmt.Errorf("%w: %s: d = %d; want ≥ 1", ErrShape, fn, d)
	}
	if len(x)%d != 0 {
		return fmt.Errorf("%w: %s: %s has %d elements; want a multiple of d = %d", ErrShape, fn, name, len(x), d)
	}
	return nil
}

// checkLike validates a tensor v that must have the shape of the input x
// (named xName); nil is accepted only when optional, and means zero.
func checkLike[T num.Float](fn, name string, v []T, xName string, x []T, optional bool) error {
	if optional && v == nil {
		return nil
	}
	if len(v) != len(x) {
		orNil := ""
		if optional {
			orNil = ", or nil for zero"
		}
		return fmt.Errorf("%w: %s: %s has %d elements; want len(%s) = %d%s", ErrShape, fn, name, len(v), xName, len(x), orNil)
	}
	return nil
}

// checkVec validates an optional per-feature vector (weight or bias).
func checkVec[T num.Float](fn, name string, v []T, d int) error {
	if v != nil && len(v) != d {
		return fmt.Errorf("%w: %s: %s has %d elements; want d = %d, or nil for none", ErrShape, fn, name, len(v), d)
	}
	return nil
}

func checkAll[T num.Float](fn, xName string, x []T, d int, w, b []T, o Options) error {
	if err := checkRows(fn, xName, x, d); err != nil {
		return err
	}
	if err := checkVec(fn, "weight", w, d); err != nil {
		return err
	}
	if err := checkVec(fn, "bias", b, d); err != nil {
		return err
	}
	return o.check(fn)
}

// LayerNorm normalises each row of x (rows of d elements, row-major; any
// leading dimensions flattened) to zero mean and unit variance and applies
// the gain and bias:
//
//	μ = (1/d) Σ_j x_j,   σ² = (1/d) Σ_j (x_j − μ)²     (biased variance)
//	y_j = γ_j (x_j − μ) / √(σ² + ε) + b_j              (EpsilonInRoot)
//	y_j = γ_j (x_j − μ) / (√σ² + ε) + b_j              (EpsilonAddedToRoot)
//
// with γ_j = w_j (WeightAsIs) or 1 + w_j (WeightOnePlus). A nil weight means
// γ = 1 and a nil bias means b = 0. Source: Ba, Kiros & Hinton 2016, "Layer
// Normalization", arXiv 1607.06450, §3 Eq. (3)–(4) (the statistics) and
// §3.1 (gain and bias); the paper has no ε, and putting it inside the root
// is common practice.
//
// The statistics are computed in two passes with a compensated mean, on a
// row scaled by a power of two; see the package documentation.
//
// Special cases are:
//
//	LayerNorm(x, d, …) = [], nil      for len(x) = 0
//	a constant row                    y = b (x − μ = 0 exactly)
//	a row holding NaN or ±Inf         y = NaN for the whole row
//	d < 1, len(x) mod d ≠ 0           ErrShape
//	len(weight), len(bias) ∉ {0, d}   ErrShape (nil means absent)
//	ε ≤ 0, NaN or +Inf                ErrEpsilon
//
// Accuracy: the package documentation's table, measured on the 50-digit
// golden values (rows of up to 1024, rows with offset 1e8 and spread 1).
func LayerNorm(x []float64, d int, weight, bias []float64, o Options) ([]float64, error) {
	return yOnly(runForward("LayerNorm", layerNorm, x, nil, d, weight, bias, o))
}

// LayerNorm32 is the float32 instantiation of the same body as LayerNorm:
// the straightforward low-precision implementation the compare package uses
// as a yardstick; not a reference. Epsilon stays a float64 option and is
// rounded to float32 after scaling. With o.Variance = VarianceOnePass it
// computes the variance as a one-pass port does (see Variance).
func LayerNorm32(x []float32, d int, weight, bias []float32, o Options) ([]float32, error) {
	return yOnly(runForward("LayerNorm32", layerNorm, x, nil, d, weight, bias, o))
}

// RMSNorm divides each row of x (rows of d elements, row-major) by its root
// mean square and applies the gain:
//
//	s² = (1/d) Σ_j x_j²
//	y_j = γ_j x_j / √(s² + ε)          (EpsilonInRoot)
//	y_j = γ_j x_j / (√s² + ε)          (EpsilonAddedToRoot)
//
// with γ_j = w_j (WeightAsIs) or 1 + w_j (WeightOnePlus); a nil weight means
// γ = 1. Source: Zhang & Sennrich 2019, "Root Mean Square Layer
// Normalization", arXiv 1910.07467; the paper has no ε and no
// bias, and both ε placements and the 1 + w gain are common practice.
//
// The mean square is taken of the row scaled by an exact power of two, so
// that rows near 1e-300 (whose squares underflow) or 1e200 (whose squares
// overflow) are normalised correctly; see the package documentation.
//
// Special cases are:
//
//	RMSNorm(x, d, …) = [], nil        for len(x) = 0
//	a zero row                        y = 0
//	a row holding NaN or ±Inf         y = NaN for the whole row
//	d < 1, len(x) mod d ≠ 0           ErrShape
//	len(weight) ∉ {0, d}              ErrShape (nil means absent)
//	ε ≤ 0, NaN or +Inf                ErrEpsilon
//
// Accuracy: the package documentation's table, measured on the 50-digit
// golden values, including rows near 1e-300 and 1e200.
func RMSNorm(x []float64, d int, weight []float64, o Options) ([]float64, error) {
	return yOnly(runForward("RMSNorm", rmsNorm, x, nil, d, weight, nil, o))
}

// RMSNorm32 is the float32 instantiation of the same body as RMSNorm: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. Epsilon stays a float64 option and is
// rounded to float32 after scaling.
func RMSNorm32(x []float32, d int, weight []float32, o Options) ([]float32, error) {
	return yOnly(runForward("RMSNorm32", rmsNorm, x, nil, d, weight, nil, o))
}
