package norm

import "github.com/plumbref/plumb/internal/num"

// kind is what an entry point computes: which layer, and whether a
// residual is added first.
type kind struct {
	center bool // LayerNorm: subtract the row mean (RMSNorm does not)
	fused  bool // the fused forms: normalise sum = x + residual
}

// The four kinds of entry point.
var (
	layerNorm    = kind{center: true}
	rmsNorm      = kind{}
	addLayerNorm = kind{center: true, fused: true}
	addRMSNorm   = kind{fused: true}
)

// runForward validates and runs a forward pass: the norm of x, or for a
// fused kind the norm of sum = x + residual (each element rounded once),
// which it also returns.
func runForward[T num.Float](fn string, k kind, x, residual []T, d int, w, b []T, o Options) (y, sum []T, err error) {
	if err := checkAll(fn, "x", x, d, w, b, o); err != nil {
		return nil, nil, err
	}
	sum = x
	if k.fused {
		if err := checkLike(fn, "residual", residual, "x", x, false); err != nil {
			return nil, nil, err
		}
		sum = make([]T, len(x))
		for i := range x {
			sum[i] = x[i] + residual[i]
		}
	}
	y = forward(sum, d, w, b, k.center, o)
	if !k.fused {
		sum = nil
	}
	return y, sum, nil
}

// yOnly drops the sum of runForward, for the unfused entry points.
func yOnly[T num.Float](y, _ []T, err error) ([]T, error) { return y, err }

// runBackward validates and runs a backward pass; for a fused kind the
// input is called sum and dsum (nil: zero) is added to the gradient with
// respect to it. The bias gradient is returned for LayerNorm (center)
// only.
func runBackward[T num.Float](fn string, k kind, x []T, d int, w, dy, dsum []T, o Options) (grads[T], error) {
	xName := "x"
	if k.fused {
		xName = "sum"
	}
	if err := checkAll(fn, xName, x, d, w, nil, o); err != nil {
		return grads[T]{}, err
	}
	if err := checkLike(fn, "dy", dy, xName, x, false); err != nil {
		return grads[T]{}, err
	}
	if k.fused {
		if err := checkLike(fn, "dsum", dsum, xName, x, true); err != nil {
			return grads[T]{}, err
		}
	}
	var b []T
	if k.center {
		b = make([]T, d) // only its presence matters: it asks for ∂L/∂b
	}
	g := backward(x, d, w, b, dy, k.center, o)
	for i := range dsum {
		g.dx[i] += dsum[i]
	}
	return g, nil
}

// grads64 and grads32 return the gradients of runBackward in the exported
// types; Bias is nil for RMSNorm, as runBackward leaves it.
func grads64(g grads[float64], err error) (Grads, error) {
	return Grads{X: g.dx, Weight: g.dw, Bias: g.db}, err
}

func grads32(g grads[float32], err error) (Grads32, error) {
	return Grads32{X: g.dx, Weight: g.dw, Bias: g.db}, err
}

// LayerNormBackward returns the gradients of a scalar loss L through
// LayerNorm, given the forward input x and dy = ∂L/∂y (the shape of x):
//
//	x̂ = (x − μ)/r,  g = dy ∘ γ
//	∂L/∂x = (g − mean(g) − c · x̂ · mean(g ∘ x̂)) / r
//	∂L/∂w_j = Σ_rows dy_j x̂_j,   ∂L/∂b_j = Σ_rows dy_j
//
// where r = √(σ² + ε) and c = 1 (EpsilonInRoot), or r = σ + ε and
// c = r/σ (EpsilonAddedToRoot; the c-term is 0 when σ = 0, its limit,
// since it is O(|x − μ|)). The means are over the row's d elements. The
// closed form follows from ∂σ²/∂x_k = 2(x_k − μ)/d and Σ_k (x_k − μ) = 0;
// for EpsilonInRoot it is the form of Ba, Kiros & Hinton 2016 (arXiv
// 1607.06450) differentiated by hand. Grads.Weight is nil when weight is
// nil; Grads.Bias is always returned (whether the layer has a bias does not
// change the other gradients).
//
// Special cases are:
//
//	a constant row       ∂L/∂x = (g − mean(g)) / √ε or / ε
//	a row holding NaN or ±Inf in x   ∂L/∂x = NaN for the row, and NaN in ∂L/∂w
//	len(dy) ≠ len(x)     ErrShape
//	other invalid input  as LayerNorm
//
// Accuracy: the package documentation's table, against the generator's
// 50-digit derivatives (see there for the one ill-conditioned direction).
func LayerNormBackward(x []float64, d int, weight, dy []float64, o Options) (Grads, error) {
	return grads64(runBackward("LayerNormBackward", layerNorm, x, d, weight, dy, nil, o))
}

// RMSNormBackward returns the gradients of a scalar loss L through
// RMSNorm, given the forward input x and dy = ∂L/∂y (the shape of x):
//
//	x̂ = x/r,  g = dy ∘ γ
//	∂L/∂x = (g − c · x̂ · mean(g ∘ x̂)) / r
//	∂L/∂w_j = Σ_rows dy_j x̂_j
//
// where s = √mean(x²), r = √(s² + ε) and c = 1 (EpsilonInRoot), or
// r = s + ε and c = r/s (EpsilonAddedToRoot; the c-term is 0 on a zero
// row, its limit). It follows from ∂s²/∂x_k = 2x_k/d.
// Grads.Weight is nil when weight is nil; Grads.Bias is nil.
//
// Special cases are:
//
//	a zero row           ∂L/∂x = g / √ε or g / ε
//	a row holding NaN or ±Inf in x   ∂L/∂x = NaN for the row, and NaN in ∂L/∂w
//	len(dy) ≠ len(x)     ErrShape
//	other invalid input  as RMSNorm
//
// Accuracy: the package documentation's table, against the generator's
// 50-digit derivatives (see there for the one ill-conditioned direction).
func RMSNormBackward(x []float64, d int, weight, dy []float64, o Options) (Grads, error) {
	return grads64(runBackward("RMSNormBackward", rmsNorm, x, d, weight, dy, nil, o))
}

// AddLayerNorm is the fused residual add and LayerNorm of a pre-norm block:
//
//	sum = x + residual     (each element rounded once to float64)
//	y   = LayerNorm(sum)
//
// It returns y, the input of the next sublayer, and sum, the new residual
// stream. The sum is rounded before it is normalised, so the result equals
// the unfused pair bit for bit. For a post-norm block, y is the new stream
// and sum is discarded (see the package documentation). residual must have
// the shape of x; other inputs and special cases are as LayerNorm.
func AddLayerNorm(x, residual []float64, d int, weight, bias []float64, o Options) (y, sum []float64, err error) {
	return runForward("AddLayerNorm", addLayerNorm, x, residual, d, weight, bias, o)
}

// AddRMSNorm is the fused residual add and RMSNorm of a pre-norm block:
// sum = x + residual (rounded once per element), y = RMSNorm(sum). It
// returns y and the new residual stream sum; see AddLayerNorm.
func AddRMSNorm(x, residual []float64, d int, weight []float64, o Options) (y, sum []float64, err error) {
	return runForward("AddRMSNorm", addRMSNorm, x, residual, d, weight, nil, o)
}

// AddLayerNormBackward is the backward of AddLayerNorm. It takes the saved
// sum, dy = ∂L/∂y and dsum = ∂L/∂sum (the gradient reaching the residual
// stream from later blocks; nil means zero), and returns
//
//	Grads.X = dsum + ∂L/∂x of LayerNormBackward(sum, dy)
//
// which is the gradient with respect to both x and residual, with the
// weight and bias gradients of LayerNormBackward.
func AddLayerNormBackward(sum []float64, d int, weight, dy, dsum []float64, o Options) (Grads, error) {
	return grads64(runBackward("AddLayerNormBackward", addLayerNorm, sum, d, weight, dy, dsum, o))
}

// AddRMSNormBackward is the backward of AddRMSNorm: Grads.X = dsum + ∂L/∂x
// of RMSNormBackward(sum, dy), the gradient with respect to both x and
// residual; dsum may be nil (zero).
func AddRMSNormBackward(sum []float64, d int, weight, dy, dsum []float64, o Options) (Grads, error) {
	return grads64(runBackward("AddRMSNormBackward", addRMSNorm, sum, d, weight, dy, dsum, o))
}

// Grads32 are the gradients returned by the float32 instantiations; the
// fields are as in Grads.
type Grads32 struct {
	X, Weight, Bias []float32
}

// LayerNormBackward32 is the float32 instantiation of the same body as
// LayerNormBackward: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference.
func LayerNormBackward32(x []float32, d int, weight, dy []float32, o Options) (Grads32, error) {
	return grads32(runBackward("LayerNormBackward32", layerNorm, x, d, weight, dy, nil, o))
}

// RMSNormBackward32 is the float32 instantiation of the same body as
// RMSNormBackward: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference.
func RMSNormBackward32(x []float32, d int, weight, dy []float32, o Options) (Grads32, error) {
	return grads32(runBackward("RMSNormBackward32", rmsNorm, x, d, weight, dy, nil, o))
}

// AddLayerNorm32 is the float32 instantiation of the same body as
// AddLayerNorm: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. The sum is rounded
// once per element to float32 before it is normalised, so y equals
// LayerNorm32(sum) bit for bit. Epsilon stays a float64 option and is
// rounded to float32 after scaling.
//
// Special cases are those of AddLayerNorm.
func AddLayerNorm32(x, residual []float32, d int, weight, bias []float32, o Options) (y, sum []float32, err error) {
	return runForward("AddLayerNorm32", addLayerNorm, x, residual, d, weight, bias, o)
}

// AddRMSNorm32 is the float32 instantiation of the same body as
// AddRMSNorm: the straightforward low-precision implementation the compare
// package uses as a yardstick; not a reference. y equals RMSNorm32(sum) bit
// for bit, sum rounded once per element to float32.
//
// Special cases are those of AddRMSNorm.
func AddRMSNorm32(x, residual []float32, d int, weight []float32, o Options) (y, sum []float32, err error) {
	return runForward("AddRMSNorm32", addRMSNorm, x, residual, d, weight, nil, o)
}

// AddLayerNormBackward32 is the float32 instantiation of the same body as
// AddLayerNormBackward: the straightforward low-precision implementation
// the compare package uses as a yardstick; not a reference. Grads32.X is
// dsum + the X of LayerNormBackward32(sum, dy), one float32 addition per
// element.
//
// Special cases are those of AddLayerNormBackward.
func AddLayerNormBackward32(sum []float32, d int, weight, dy, dsum []float32, o Options) (Grads32, error) {
	return grads32(runBackward("AddLayerNormBackward32", addLayerNorm, sum, d, weight, dy, dsum, o))
}

// AddRMSNormBackward32 is the float32 instantiation of the same body as
// AddRMSNormBackward: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. Grads32.X is
// dsum + the X of RMSNormBackward32(sum, dy).
//
// Special cases are those of AddRMSNormBackward.
func AddRMSNormBackward32(sum []float32, d int, weight, dy, dsum []float32, o Options) (Grads32, error) {
	return grads32(runBackward("AddRMSNormBackward32", addRMSNorm, sum, d, weight, dy, dsum, o))
}
