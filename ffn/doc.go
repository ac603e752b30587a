// Package ffn is the float64 reference for the position-wise feed-forward
// layers of a transformer block: the activations and their derivatives,
// the two-layer network, the gated units, forward and backward, and the
// hidden-size rule.
//
// Activations (each with a derivative …Deriv, and the vector forms
// Activate and ActivateGrad):
//
//	ReLU(x)         max(0, x)                               Vaswani et al. 2017, Eq. (2)
//	GELU(x)         x·Φ(x) = ½x·(1 + erf(x/√2))             Hendrycks & Gimpel 2016, §2
//	GELUTanh(x)     ½x·(1 + tanh(√(2/π)(x + 0.044715x³)))   Hendrycks & Gimpel 2016, §2
//	GELUSigmoid(x)  x·σ(1.702x)                             Hendrycks & Gimpel 2016, §2
//	Sigmoid(x)      σ(x) = 1/(1 + e^{−x})
//	Swish(x, β)     x·σ(βx)                                 Ramachandran et al. 2017, arXiv 1710.05941
//	SiLU(x)         x·σ(x) = Swish(x, 1)                    Elfwing et al. 2018, arXiv 1702.03118
//
// Layers (Forward, Backward; their fast forms ForwardFast, BackwardFast;
// and the float32 instantiations of all four), for each row x:
//
//	plain:  y = φ(x·W₁ + b₁)·W₂ + b₂                 Vaswani et al. 2017, arXiv 1706.03762, §3.3
//	gated:  y = (φ(x·W + b) ⊗ (x·V + c))·W₂ + b₂     Shazeer 2020, arXiv 2002.05202, Eq. (4)–(6)
//
// with GLU (φ = σ), Bilinear (φ = identity), ReGLU (ReLU), GEGLU (GELU)
// and SwiGLU (Swish) as the gated units; the activation is on the gate
// projection W. HiddenSize gives the hidden width m·⌈(2/3·4d)/m⌉.
//
// Conventions, and their alternatives:
//
//   - Weight layout is an option: InByOut (the zero value) stores a matrix
//     as [in, out] (the papers' x·W), OutByIn as [out, in] (one row per
//     output unit, x·Wᵀ).
//   - A gated unit's gate and value projections are separate (W1, V) or
//     one fused matrix of 2·Hidden output units, all gate units then all
//     value units (GateUpStacked) or alternating (GateUpInterleaved).
//   - GELU has three forms, each its own activation: exact (erf), the tanh
//     approximation, the sigmoid approximation; their values differ from
//     the third decimal (at x = 1: 0.841345, 0.841192, 0.845796).
//   - ReLU's derivative at 0 is 0.
//   - A nil bias is a zero bias; Backward returns every bias gradient.
//   - In the direct form each output is a sum over the input index in
//     ascending order, one rounding per product and per addition (the loop
//     in Forward's doc); layout and packing never change the arithmetic, so
//     every storage form gives bit-identical results. Neither form's
//     results depend on GOMAXPROCS.
//
// The activations keep their relative accuracy in the tails. Where the
// textbook form cancels (1 + erf(z) for z < 0, 1 + tanh(u) for u < 0) it is
// replaced by an exact identity (erfc(−z), 2σ(2u)); σ is evaluated with the
// exponential of a non-positive number only; and the argument of each
// exponential or erfc (−x/√2, x², 1.702x, βx, the tanh cubic) is carried as
// an unevaluated sum of two floats, because rounding it would cost about
// |argument|·ulp — up to 1e-13 relative at |x| = 30.
//
// Every exported function that takes or returns tensors (slices) has a
// float32 twin, its name suffixed 32, running the same generic body; the
// scalar functions are float64 only. The twins are the straightforward
// low-precision implementation the compare package uses as a yardstick;
// not a reference. Their transcendental functions are the float64 ones
// rounded to float32. A port whose accumulators are
// narrower declares it with Options.Accumulation (bfloat16 or binary16):
// Forward32 then rounds every running sum of its projections to that
// format after each addition, the yardstick of such a port (measured on
// layers of 64 inputs and 96 hidden units: normwise error 0.016 with
// bfloat16 sums, 0.0017 with binary16, against 2.3e-7 in float32;
// TestAccumulationCostsItsFormat). The float64 functions, Backward32 and
// the fast forms ignore it.
//
// Special cases are listed at each function. Every error wraps exactly one
// of ErrShape, ErrWeightLen, ErrHidden, ErrBeta and ErrOption and names the
// function called, the argument, its value and what was wanted
// ("ffn: invalid shape: Forward: Dims.In = 0; want ≥ 1"); no function
// panics on its arguments.
//
// # Accuracy
//
// Measured against the golden files made by an independent generator
// (testdata/gen/fam_ffn.py, mpmath at 50 significant digits on the exact
// float64 inputs); the project's target is 1e-14.
//
// Worst error of the activations over the golden cases: normwise for |x| ≤ 8 (core), largest relative for 5 ≤ |x| ≤ 30 (tail) and beyond (far):
//
//	                         core      tail      far
//	relu                     0
//	relu derivative          0
//	gelu                     6.2e-17   2.0e-16   2.2e-16
//	gelu derivative          4.8e-17   2.2e-16   2.4e-16
//	gelu-tanh                7.7e-17   1.8e-16   0
//	gelu-tanh derivative     8.2e-17   2.1e-16   0
//	gelu-sigmoid             1.1e-16   2.0e-16   2.2e-16
//	gelu-sigmoid derivative  1.0e-16   3.6e-16   1.6e-16
//	sigmoid                  7.2e-17   2.0e-16   2.1e-16
//	sigmoid derivative       9.2e-17   2.7e-16   5.9e-16
//	silu                     5.7e-17   2.2e-16   2.1e-16
//	silu derivative          1.2e-16   3.4e-16   2.2e-16
//	swish                    9.9e-17   3.4e-16   2.4e-16
//	swish derivative         1.4e-16   5.0e-16   4.2e-16
//	identity                 0         0         0
//	identity derivative      0         0         0
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// For swish the ranges are those of βx, over four values of β. The layers
// (plain, 34 cases, and gated, 48 cases; dweights is the worst of every
// weight and bias gradient):
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	                y         dx        dweights
//	Forward         5.3e-16
//	ForwardFast     5.3e-16
//	Backward                  4.7e-16   5.6e-16
//	BackwardFast              4.7e-16   5.6e-16
//	Forward32       3.7e-07
//	ForwardFast32   3.7e-07
//	Backward32                3.0e-07   3.1e-07
//	BackwardFast32            3.0e-07   3.1e-07
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// Backward also agrees with central finite differences. The fast forms are
// the direct ones bit for bit (TestFastIsDirect, on random layers of up to
// 256 inputs and hidden units in every storage form), so their rows repeat
// the direct forms'.
//
// # Two forms
//
// Forward and Backward are the direct form: a loop per output that reads
// like the formula, the one the golden values check first. ForwardFast and
// BackwardFast compute the same as matrix products, with plumb's own
// register-blocked product (internal/num's MatrixProduct, pure Go, after Goto and
// van de Geijn 2008, ACM TOMS 34(3)), whose every sum has the direct
// form's terms in the direct form's order: the same bits, faster. BenchmarkForward,
// BenchmarkForwardFast and BenchmarkBackwardFast time 16 rows of a SwiGLU
// layer with model width 1024 and hidden width 2816; their times, and
// plumb run ffn-forward on 4096 rows of width 4096 and hidden width 11008
// beside numpy float64 over OpenBLAS, are in BENCHMARKS.md at the
// repository root (measured and rendered by internal/benchdoc).
//
// The transcendental functions are plumb's correctly rounded exp and erfc
// (internal/elem), and the matrix products plumb's own: every result of
// this package, float32 twins included, is the same bits on every
// architecture and for any GOMAXPROCS.
package ffn
