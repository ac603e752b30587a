// Package quant holds float64 references for quantised tensors: integer
// quantisation and dequantisation under explicit conventions, the OCP
// Microscaling (MX) block formats, integer and weight-only matrix products,
// and measures of quantisation error.
//
// A quantised kernel is judged against the exact computation on the values
// it actually holds: its codes dequantised exactly, then the arithmetic
// done exactly and rounded once. The unquantised float64 result answers a
// different question (how much the quantisation loses: SQNR, Bound) and is
// not the reference a kernel's arithmetic is held to.
//
// # Integer quantisation
//
// A Scheme fixes every choice; each is a convention type with words
// (String, MarshalText, UnmarshalText, Meaning, Values, Check), and each
// zero value is the default:
//
//	convention   default        alternatives
//	Symmetry     symmetric      asymmetric (integer zero point), asymmetric-float (zero point in the scale format)
//	Granularity  per-tensor     per-channel, per-group
//	Channel      rows           columns (the index the scales follow)
//	Width        int8           int4
//	Range        full           symmetric-clipped (−127..127, −7..7)
//	Rounding     half-even      half-away
//	ScaleFormat  float32        binary16, bfloat16, pow2
//	ScaleRule    absmax         percentile (Scheme.Percentile, nearest rank)
//
// The model is that of Jacob et al. 2018, "Quantization and Training of
// Neural Networks for Efficient Integer-Arithmetic-Only Inference", arXiv
// 1712.05877, §2.1 Eq. (1): r = S(q − Z), with a real scale S and an
// integer zero point Z so that real zero is exactly a code. The scale of a
// block is chosen from its absolute maximum (symmetric: S = amax/qmax) or
// its range (asymmetric: S = (max − min)/(qmax − qmin)), rounded upward to
// the scale format before any element is quantised; Quantise states the
// rule in full and why upward. The scale formats are those of package
// compare (IEEE 754-2019 binary32 and binary16; bfloat16), rounded with
// compare.Format, or powers of two from 2^−127 to 2^127 (the values of
// E8M0, OCP MX v1.0 §5.4, from memory).
//
// Dequantise is exact: (q − z)·s has at most 8 + 24 significand bits
// (with a float zero point it is the exact value rounded once to float64).
// Bound gives the per-element error bound s/2 that round to nearest
// implies, which the absolute-maximum rule guarantees for every element (no
// element is clipped). The percentile rule clips the largest elements on
// purpose, and a float zero point rounded to bfloat16 can clip an extreme
// one: Bound's s/2 then holds for the unclipped elements only, and BoundOf,
// given x too, reports each clipped element's actual error.
//
// # FP8 with scales
//
// QuantiseFP8 and DequantiseFP8 hold a tensor as FP8 elements with one
// scale per tensor, channel or group (FP8Scheme): P = round(x/s), the
// exact quotient rounded once to OCP 8-bit Floating Point Specification
// (OFP8), revision 1.0, 2023, E4M3 or E5M2 through package compare, and
// x̂ = P·s exactly. The scale is chosen as up(amax/max) (448 or 57344) so
// that nothing overflows, or given (static scales), and then Overflow says
// what an element beyond max·s becomes: NaN in E4M3 and ±Inf in E5M2
// (nan-or-inf, the non-saturating conversion), or ±max (saturate). Pack4 and Unpack4 put int4 codes two to a byte,
// low or high nibble first, two's complement or offset binary.
//
// # Microscaling formats
//
// EncodeMX, DecodeMX, BoundMX and DotMX implement the block formats of
// Open Compute Project, "OCP Microscaling Formats (MX) Specification",
// version 1.0, 2023: 32 elements sharing a power-of-two scale stored as
// E8M0 (§5.1, §5.4), elements FP8 E4M3 and E5M2 (OCP 8-bit Floating Point
// Specification (OFP8), revision 1.0, 2023, through package compare), FP6
// E3M2 and E2M3, FP4 E2M1 and INT8 (§5.3). The conversion is that of §6.3
// (shared exponent ⌊log₂ amax⌋ − emax, elements rounded to nearest even
// with saturation); the dot product that of §6.1–6.2, computed exactly and
// rounded once. The specification's text was not at hand when this package
// was written: its section numbers, the MXINT8 element (two's complement
// times 2^−6) and the treatment of NaN and ±Inf inputs (a NaN scale) are
// from memory, and marked so where they are used. The element values were
// derived from the bit layouts, and the tests check the tables of FP4 and
// FP6 values (E2M1: ±{0, 0.5, 1, 1.5, 2, 3, 4, 6}; E2M3 max 7.5; E3M2 max
// 28).
//
// # Products
//
// MatMulInt8 multiplies two quantised matrices in int32 (Jacob et al. 2018,
// §2.2–2.3, Eq. (3)–(7)), refusing with ErrOverflow any K for which the sum
// could overflow, and rescales by the product of the scales, per tensor or
// per row of the left operand and per column of the right. WeightOnly
// multiplies float64 (WeightOnly32: float32) activations by exactly
// dequantised int4 or int8 weights, the exact sums rounded once to an
// output format of package compare (float64, float32, binary16, bfloat16).
// MatMulInt8To rounds MatMulInt8's rescaled result once to such a format.
//
// MatMulFP8 multiplies two FP8Matrix operands, E4M3 or E5M2 codes (OCP
// 8-bit Floating Point Specification (OFP8), revision 1.0, 2023, decoded
// through package compare) with float32 scales per tensor, per row of the
// left operand or per column of the right: Σₖ (va·sa)(vb·sb), every term
// exact, the sum exact and rounded once to the chosen output format.
// DecodeFP8 gives the operands' exact values.
//
// # Quantised caches and attention
//
// A CacheTensor is a [Batch, Heads, Len, Dim] key or value cache whose
// elements are int8, E4M3 or E5M2 codes (CacheCode) with float32 scales
// per tensor, per head or per token (CacheScaling), each element c·s exact
// in float64 (DecodeCache). QuantiseCache chooses a block's scale as
// amax/qmax rounded upward to float32 (qmax 127, 448, 57344) and each code
// as the nearest to x/s, decided exactly; AppendCache appends new tokens
// to a per-token cache, quantising each new row with its own scale and
// keeping what the cache holds bit for bit. Attend computes softmax
// attention (Vaswani et al. 2017, Eq. (1); grouped heads as Ainslie et al.
// 2023) in float64 on the exactly dequantised cache, and with ProbCode
// e4m3 or e5m2 models a kernel that quantises the unnormalised weights
// exp(x − max x) to FP8 with the fixed scale 1/448 or 1/57344 before their
// product with V; Attend32 is its float32 yardstick.
//
// # Error measures
//
// SQNR is the signal-to-quantisation-noise ratio in decibels,
// 10·log₁₀(Σx²/Σ(x − x̂)²), from exact sums (common practice for the
// measure). Bound and BoundMX give the per-element error bounds of the
// formats: half a step for round to nearest, and the saturation of the
// largest MX elements.
//
// # Accuracy
//
// Against the golden cases of testdata/golden/quant (written by
// testdata/gen/fam_quant.py with exact rationals from the definitions
// above, sharing no code with this package); codes, scales, zero points
// and dequantised values are compared bit for bit (1 in the table would
// mean some bit differed), SQNR by its relative error:
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	               codes     scales    zeros     values
//	Quantise       0         0         0
//	Quantise32     0         0
//	Dequantise                                   0
//	Pack4          0
//	Unpack4        0
//	QuantiseFP8    0         0
//	DequantiseFP8                                0
//	SQNR                                         0
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// # Exactness
//
// Every float64 value here that could be exact is: dequantised values, MX
// decoded values, int32 sums, scale products. Sums of products of float64
// values (WeightOnly, DotMX, SQNR's sums) are carried exactly in big
// integers and rounded once; to formats narrower than float64 they are
// rounded through float64 rounded to odd, which is one rounding (Boldo and
// Melquiond 2008, IEEE Trans. Computers 57(4)). Quotients that choose codes
// are resolved exactly (the nearest integer to x/s is decided by exact
// comparisons, not by the rounded quotient). Go fuses x*y + z into one
// rounding on some architectures; no expression here depends on whether it
// does.
//
// # The float32 rule
//
// Every function that takes or returns float tensors has a float32 twin
// with the suffix 32, a generic body over float32 and float64: Quantise32,
// QuantiseFP832, BoundOf32, EncodeMX32, WeightOnly32, SQNR32,
// QuantiseCache32, AppendCache32 and Attend32; DecodeFP832, DecodeCache32,
// MatMulFP832 and MatMulInt8To32 round their exact (or once-rounded)
// results once to float32. Functions whose inputs are codes and whose
// float64 outputs are exact or rounded once (Dequantise, DequantiseFP8, Bound,
// DecodeMX, BoundMX, DotMX, MatMulInt8) have none: a float32 caller rounds
// their result once (compare.Narrow), which no float32 arithmetic inside
// could improve on.
//
// # Errors and sizes
//
// Every error wraps exactly one of the sentinel errors (ErrSize, ErrLength,
// ErrOption, ErrGroup, ErrScale, ErrCode, ErrPacked, ErrValue, ErrOverflow)
// and names the function, the argument, its value and what was wanted. No
// function panics on its arguments. Sizes are checked against MaxElements
// before anything is allocated.
package quant
