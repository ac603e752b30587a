// Package posenc computes position encodings for attention: sinusoidal
// absolute encodings, rotary encodings (RoPE) with every common pairing,
// partial rotation and context-scaling method, and ALiBi slopes and biases.
//
// # What is computed
//
//	Sinusoidal.Table   PE(m, 2i) = sin(m·ω_i), PE(m, 2i+1) = cos(m·ω_i),
//	                   ω_i = b^{−2i/d}                 Vaswani et al. 2017 §3.5
//	Sinusoidal.Add     x + PE                          (same)
//	Rotary.Frequencies θ_i = b^{−2i/r}, then scaled    Su et al. 2021 Eq. (15)
//	Rotary.Tables      cos(m·θ_i), sin(m·θ_i)          (same), Eq. (34)
//	Rotary.Apply       (x, y) → (x cos − y sin, x sin + y cos) per pair
//	Rotary.ApplyInverse  the transpose: inverse and backward pass
//	NTKBase            b′ = b·s^{r/(r−2)}             Peng et al. 2023 Eq. (16)
//	YaRNMagnitude      √(1/t) = 0.1·ln s + 1           Peng et al. 2023 Eq. (21)–(22)
//	ALiBiSlopes        m_k = 2^{−8k/n}                 Press et al. 2022 §3
//	ALiBiBias          −m_h·d(p(i), j), [H, Lq, Lk]    Press et al. 2022 §3
//
// Sources: Vaswani et al. 2017, "Attention Is All You Need", arXiv
// 1706.03762; Su et al. 2021, "RoFormer: Enhanced Transformer with Rotary
// Position Embedding", arXiv 2104.09864; Chen et al. 2023, "Extending
// Context Window of Large Language Models via Positional Interpolation",
// arXiv 2306.15595; Peng et al. 2023, "YaRN: Efficient Context Window
// Extension of Large Language Models", arXiv 2309.00071 (equation numbers
// of v2); Press et al. 2022, "Train Short, Test Long: Attention with Linear
// Biases Enables Input Length Extrapolation", arXiv 2108.12409.
//
// # Conventions, and their alternatives
//
//   - Rotary pairing: PairAdjacent rotates dims (2i, 2i+1) (the paper);
//     PairHalves rotates (i, i + r/2). They are a fixed permutation of
//     dims apart and give different outputs on the same vector.
//   - Partial rotation: the first r = Rotated dims are rotated with
//     frequencies over r (θ_i = b^{−2i/r}), the rest pass through.
//     Frequencies over the full head dimension would be another convention;
//     plumb does not offer it.
//   - Sinusoidal layout: Interleaved (sin, cos, sin, cos, …: the paper) or
//     Concatenated (all sines, then all cosines).
//   - Context scaling: each method changes exactly one quantity.
//     Interpolation changes the positions (m → m/s, applied as θ_i/s);
//     NTKAware the base (b → b′); YaRN each frequency by its own amount
//     (θ_d → h(θ_d)), with the ramp either linear in the ratio ρ (RampRatio,
//     the paper) or linear in the dimension index between rounded bounds
//     (RampDims, the authors' code); PerFrequency each frequency by a
//     caller-given divisor; dynamic scaling (Scaling.CurrentLength) the
//     factor s itself, as a function of the current length. YaRN's
//     temperature is a multiplier on q and k (Rotary.Magnitude, set to
//     YaRNMagnitude(s)), which scales the logits by its square.
//   - Positions are integers. Rotary accepts negative positions (a rotation
//     by a negative angle); sinusoidal positions start at 0.
//   - ALiBi bias: added to the scaled logits q·k/√d, one [Lq, Lk] plane per
//     head, shared by every batch entry; query positions follow
//     mask.Geometry (AlignEnd or AlignStart, plus Offset). The form
//     (mask.ALiBiForm) chooses the distance d: the causal form is the
//     paper's −m·(p − j) for every key, so keys after the query get a
//     positive bias; the past-only form gives them 0; the symmetric form,
//     −m·|p − j|, is common practice for attention without a causal mask.
//     The bias masks nothing: under mask.Causal the three forms agree.
//   - Slopes for a head count that is not a power of two follow the
//     authors' published code (see ALiBiSlopes).
//
// # How angles are computed, and the accuracy that results
//
// A rotary or sinusoidal entry is sin or cos of m·θ_i, where m can be as
// large as MaxPosition = 2^31 − 1. Computing θ_i in float64 and rounding the
// product m·θ_i to float64 gives an absolute angle error up to
// ulp(m·θ_i)/2 ≈ 6e-11 at m = 10⁶ from the product, plus m times the error
// of θ_i itself (about m·θ_i·2^−53, the same size again): entries off by
// ~1e-11, far from a float64 reference. plumb instead
//
//  1. computes every frequency θ_i (and every scaled frequency: the factor
//     s, the NTK base, YaRN's ρ and γ) in double-double arithmetic, about
//     106 bits, from a double-double exp and log;
//  2. forms the product m·θ_i exactly as a double-double hi + lo (the
//     float64 product and its rounding error, recovered with math.FMA);
//  3. returns sin(hi)·cos(lo) + cos(hi)·sin(lo), with math.Sincos for each
//     part: Go's math.Sincos reduces its argument with a three-part π/4
//     below 2^29 and with Payne–Hanek reduction above, so sin(hi) is
//     accurate to about an ulp at any hi up to MaxPosition.
//
// Measured against the 50-digit golden tables at positions up to 10⁶ and
// up to 2^31 − 1, the normwise relative error of the sin table is 7.8e-17
// at worst with this method; forming the angle in float64 gives 1.0e-11
// (up to 10⁶) and 1.7e-8 (up to 2^31 − 1), and keeping the product exact
// with FMA but θ_i in float64 still gives 8.5e-12 and 1.4e-8: the
// frequency's own rounding matters as much as the product's. (go test -v
// -run LargePositionAngles reproduces these figures.) The tests hold every
// table and rotation to a normwise relative error of 8e-16 — the same bound
// at every position — which the float64 method fails by more than
// four orders of magnitude.
//
// # Measured accuracy
//
// Measured against the 50-digit golden files (testdata/golden/posenc,
// written by testdata/gen/fam_posenc.py; see TestGolden*), positions up to
// 2^31 − 1, every scaling method at factors 2, 4, 8 and 32 (and 0.5 where a
// method takes a factor), magnitudes ≠ 1.
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	                     table     cos       sin       y
//	Sinusoidal.Table     6.7e-17
//	Sinusoidal.Add                                     6.8e-17
//	Rotary.Tables                  8.1e-17   9.2e-17
//	Rotary.Apply                                       1.3e-16
//	Rotary.ApplyInverse                                1.3e-16
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// Rotary.Frequencies, NTKBase, YaRNMagnitude, ALiBiSlopes and ALiBiBias
// are bit-exact: every value correctly rounded.
//
// The float32 instantiations (Rotary.Apply32, Rotary.ApplyInverse32,
// Sinusoidal.Add32, ALiBiBias32) are yardsticks, not references: the same
// bodies run in float32 on the reference tables rounded to float32.
// Rotary.Angles makes the rotary ones a port of a precision idiom instead:
// the frequencies rounded to float32 (AnglesFloat32Frequencies), or the
// angles formed as float32 products of float32 positions and frequencies
// (AnglesFloat32, the usual framework idiom [common practice]), whose
// error grows linearly with the position: near position 2048 it is about
// 35 times that near 64 at dimension 64, base 10000, against a flat 2⁻²⁵
// for the tables rounded once (TestAnglesErrorGrowsWithPosition). The
// float64 reference ignores the field.
//
// Every error wraps exactly one of the package's sentinel errors (ErrDim,
// ErrBase, ErrFactor, ErrLength, ErrPosition, ErrHeads, ErrShape,
// ErrOption) and names the function called, the argument, its value and
// what was wanted ("posenc: invalid base: Rotary.Apply: Rotary.Base = 1;
// want a finite number > 1"). No function panics on its arguments, nil
// receivers included. A result sized from the arguments alone (a table, a
// bias, the slopes) holds at most MaxElements = 2^28 elements; a larger
// request is an error, checked before anything is allocated.
// Results are deterministic: the same inputs give bit-identical outputs
// for any GOMAXPROCS (nothing runs in parallel). The package's own
// arithmetic is written so that no compiler fuses it (float64(x*y) where a
// product must round, math.FMA where fusion is meant), so it is the same
// on every architecture; the one caveat is Go's math.Sincos, whose pure-Go
// body the compiler may fuse on architectures with FMA instructions, so
// table entries there may differ in the last bit (well inside every stated
// bound). Slopes and the ALiBi bias use no such function and are identical
// everywhere.
package posenc
