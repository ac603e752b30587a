// Package norm is the reference for the normalisation layers of a
// transformer block: LayerNorm and RMSNorm with their variants, the fused
// residual add + norm of pre-norm blocks, forward and backward.
//
// Every function works on rows: x is a row-major tensor whose last
// dimension d is normalised, any leading dimensions (batch, sequence,
// heads) flattened into rows, so len(x) = rows·d. The weight and bias have
// d elements, shared by every row; nil means absent (gain 1, bias 0).
//
//	LayerNorm   y = γ ∘ (x − μ)/r + b,  μ = mean(x), s² = mean((x − μ)²)
//	RMSNorm     y = γ ∘ x/r,                         s² = mean(x²)
//	            r = √(s² + ε)   EpsilonInRoot (default)
//	            r = √s² + ε     EpsilonAddedToRoot
//	            γ = w           WeightAsIs (default)
//	            γ = 1 + w       WeightOnePlus
//
// Sources: LayerNorm, Ba, Kiros & Hinton 2016, "Layer Normalization", arXiv
// 1607.06450, §3 Eq. (3)–(4) and §3.1; RMSNorm, Zhang & Sennrich 2019,
// "Root Mean Square Layer Normalization", arXiv 1910.07467 (its definition
// ā_i = a_i/RMS(a)·g_i, RMS(a) = √mean(a²)).
// Neither paper has an ε; both placements of ε and the 1 + w gain are
// common practice.
//
// Worked values, for the row x = (1, 2, 3, 4) without weight or bias,
// computed with mpmath at 40 digits from the formulas above and rounded to
// 17 significant digits (the golden case worked/1234 of each layer holds
// the same row):
//
//	LayerNorm, ε = 10⁻⁵ in the root: μ = 2.5, s² = 1.25,
//	    y = (−1.3416354199689270, −0.44721180665630899, 0.44721180665630899, 1.3416354199689270)
//	RMSNorm, ε = 2⁻¹⁰⁷⁴: s² = 7.5, y = x/√7.5,
//	    y = (0.36514837167011074, 0.73029674334022148, 1.0954451150103322, 1.4605934866804430)
//
// # Conventions, and their alternatives
//
//   - The variance is the biased one, divided by d (Ba et al. §3, Eq. 3). The
//     unbiased variance (divided by d − 1) is not offered: no layer uses it.
//   - ε inside the root (EpsilonInRoot) or added to the root
//     (EpsilonAddedToRoot); both are offered for both layers.
//   - The gain is the weight (WeightAsIs) or one plus the weight
//     (WeightOnePlus, for weights stored as offsets from 1). The weight
//     gradient is the same for both.
//   - RMSNorm neither subtracts the mean nor adds a bias, as in the paper.
//   - ε must be finite and > 0; ε = 0 is refused (ErrEpsilon). With ε = 0 a
//     zero row (RMSNorm) or a constant row (LayerNorm) is 0/0, and the
//     backward is unbounded near it: an oracle must not return NaN where a
//     port returns numbers, nor hide a forgotten ε. To reproduce the ε-free
//     formula of either paper use ε = 2⁻¹⁰⁷⁴ (math.SmallestNonzeroFloat64):
//     it changes nothing a float64 can show unless s² < 2⁻¹⁰²⁰ or so,
//     where the ε-free formula is 0/0 or nearly so.
//   - A row holding NaN or ±Inf gives NaN for the whole row: its statistic
//     is not finite, so no element of it is meaningful.
//
// # Numerics
//
// Statistics are computed in two passes, not with Welford's one-pass
// update (Welford 1962, Technometrics 4(3)). The row is in memory, so the
// one-pass form buys nothing, and its error on data with a large offset is
// that of a two-pass form with an inexact mean (Chan, Golub & LeVeque
// 1983, "Algorithms for Computing the Sample Variance: Analysis and
// Recommendations", The American Statistician 37(3)). Here the first pass
// is a compensated sum (Ogita, Rump & Oishi 2005, "Accurate Sum and Dot
// Product", SIAM J. Sci. Comput. 26(6), Sum2) and the mean is kept as an
// unevaluated sum μ_hi + μ_lo; the deviations are (x − μ_hi) − μ_lo, the
// first subtraction exact where it cancels. This matters: even correctly
// rounded to float64, a mean near 1e8 is off by up to 7.5e-9, and on a row
// of spread 1 every output is off by that much relative; the textbook
// formulas in float64 miss the golden rows of offset 1e8 and spread 1 by
// 5e-8. With the compensated mean these rows are normalised to 2.2e-16.
// A port that takes the one-pass σ² = mean(x²) − mean(x)² instead declares
// it with Options.Variance = VarianceOnePass: the float32 instantiations
// then compute that way, so that its yardstick measures the idiom's cost
// (on float32 rows of mean 1e4 and spread 1, no correct digit:
// TestOnePassLosesTheOffset); the float64 functions ignore the option.
//
// The second pass takes the mean square of the deviations scaled by an
// exact power of two 2⁻ᵏ, chosen from the larger of the largest deviation
// and √ε (ε in the root) or ε (added to the root), and scales ε by 2⁻²ᵏ or
// 2⁻ᵏ to match. So inputs near 1e-300, whose squares underflow to 0, and
// inputs near 1e200, whose squares overflow, are normalised as accurately
// as any others: on a row near 1e-300 with ε = 1e-310 added to the root, a
// kernel that squares x directly returns outputs 1e10 times too large.
//
// The backward functions use the closed forms written in their
// documentation, on the same scaled quantities. Outputs that fall in the
// subnormal range (below 2⁻¹⁰²² in magnitude) are rounded twice and may be
// off by a unit of 2⁻¹⁰⁷⁴; every other output is a few roundings from the
// exact value. Every sum runs in row
// order on one goroutine; products that must be rounded are converted
// explicitly, so no compiler may fuse them, and the one fused multiply-add
// (the remainder of the mean's division) is an explicit math.FMA. Results
// are bit-identical on every architecture and for any GOMAXPROCS.
//
// # Blocks and other uses
//
// A pre-norm block (Xiong et al. 2020, "On Layer Normalization in the
// Transformer Architecture", arXiv 2002.04745) keeps the residual stream h
// un-normalised:
//
//	y, h = AddRMSNorm(f, h, …)    // h ← h + f; y = Norm(h)
//	f    = Sublayer(y)
//
// where f is the previous sublayer's output. A post-norm block (Vaswani et
// al. 2017, "Attention Is All You Need", arXiv 1706.03762, §3.1:
// LayerNorm(x + Sublayer(x))) normalises the stream itself:
//
//	h, _ = AddLayerNorm(Sublayer(h), h, …)
//
// Normalising each head's query and key vectors before the dot product
// (Henry et al. 2020, "Query-Key Normalization for Transformers", arXiv
// 2010.04245, which uses an ℓ₂ norm and a learned scale; Dehghani et al.
// 2023, "Scaling Vision Transformers to 22 Billion Parameters", arXiv
// 2302.05442, which uses LayerNorm) is RMSNorm or LayerNorm with d the head
// dimension over a [batch, seq, heads, head_dim] tensor, and a weight of
// head_dim elements shared by all heads.
//
// # Special cases
//
// Special cases are:
//
//	len(x) = 0                      empty outputs, no error
//	d = 1                           LayerNorm: y = b; RMSNorm: s = |x|
//	constant row (LayerNorm)        y = b, ∂L/∂x = (g − mean g)/√ε or /ε
//	zero row (RMSNorm)              y = 0, ∂L/∂x = g/√ε or g/ε
//	row holding NaN or ±Inf         that row of y and ∂L/∂x is NaN
//	d < 1, len(x) mod d ≠ 0         ErrShape
//	weight or bias length ∉ {0, d}  ErrShape
//	residual, dy, dsum length       ErrShape unless len(x)
//	ε ≤ 0, NaN or +Inf              ErrEpsilon
//	unnamed Placement or Weight     ErrOption
//
// Every error wraps one of ErrShape, ErrEpsilon and ErrOption, and names
// the function, the argument, its value and the value wanted. No function
// panics on its arguments.
//
// # Accuracy
//
// Measured against the 50-digit golden values of testdata/golden/norm
// (written by testdata/gen/fam_norm.py, which differentiates the forward
// definition with dual numbers rather than using the closed forms), over
// rows of 1 to 1024 elements, every option, rows near 1e-300, 1e-160 and
// 1e200, rows with offset ±1e8 and spread 1, constant and zero rows.
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	                      y         sum       dx        dweight   dbias
//	LayerNorm             4.6e-16
//	LayerNormBackward                         3.9e-16   2.7e-16   0
//	RMSNorm               2.2e-16
//	RMSNormBackward                           8.1e-16   1.9e-16
//	AddLayerNorm          1.3e-16   0
//	AddLayerNormBackward                      1.2e-16   1.3e-16   0
//	AddRMSNorm            1.4e-16   0
//	AddRMSNormBackward                        1.6e-16   1.4e-16
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// The golden tests hold every output to 1e-14.
//
// One limit comes from the function's conditioning. Write s for the root
// mean square of the row's deviations (x − μ for LayerNorm, x for
// RMSNorm), κ = ε/(s² + ε) with ε inside the root and κ = ε/(s + ε) with ε
// added to it, and θ for the angle between g = dy ∘ γ (centred, for
// LayerNorm) and x̂. ∂L/∂x is (1/r) times the part of g across x̂ plus κ
// times the part along it, while a relative change of 2⁻⁵³ in one input
// rotates x̂ and moves ∂L/∂x by about 2⁻⁵³‖g‖/r; the closed form, which
// rounds x̂, makes errors of that size. So for every d the normwise
// relative error of ∂L/∂x is at most about
//
//	d · 2⁻⁵³ / √(sin²θ + κ² cos²θ)
//
// which is near d·2⁻⁵³ for dy of random direction and reaches d·2⁻⁵³/κ ≈
// d·2⁻⁵³·s²/ε when dy is parallel to x̂ and ε ≪ s² (extra precision would be
// needed to do better). Where the deviations span one dimension, RMSNorm
// of one element and LayerNorm of two (x₀ − μ = −(x₁ − μ)), x̂ cannot
// rotate: dy is always parallel to it and the function is well
// conditioned. There the gradient comes from its own closed form,
// ∂L/∂x₀ = −∂L/∂x₁ = (g₀ − g₁)/2 · ε/r³ (ε in the root) or · ε/r² (added to
// it) for LayerNorm and g₀ · ε/r³ or g₀ · ε/r² for RMSNorm, accurate to a
// few roundings at every ε; the golden cases small/d1, d2, d3 check it
// down to ε = 1e-30.
//
// # Float32
//
// Every exported function that takes or returns tensors has a float32 twin
// named with the suffix 32 (LayerNorm32, AddRMSNormBackward32, …) that runs
// the same generic body instantiated at float32: the straightforward
// low-precision implementation a yardstick is measured on, never a
// reference. Scalar functions and functions of parameters or tables are
// float64 only. Options, and so ε, stay float64 in the twins.
package norm
