// Package quanttest is a conformance suite for quantised kernels.
// RunQuantise judges a kernel's integer quantisation (and, when given, its
// int4 packing and its scaled FP8 quantisation) and RunMX its OCP MX
// encoding (and dot product) against package quant's exact reference, bit
// for bit. RunMatMul runs int8, FP8 and weight-only matrix-product
// kernels and RunAttention attention kernels on quantised key/value
// caches, each judged against the exact computation on the codes the
// kernel is given (package quant), not against the unquantised float64
// result.
//
//	func TestMyInt8(t *testing.T) {
//		quanttest.RunMatMul(t, quanttest.MatMulKernel{Int8: myInt8})
//	}
//
// Quantised outputs are codes and scales, not approximations: a kernel
// that agrees with the reference on most elements but differs on a tie,
// on the scale's last bit or on one clipped element is wrong, and the
// suite fails the case with the first difference, the input there and how
// many values differ. The conventions each case uses are in its message
// (see quant.Scheme, quant.FP8Scheme).
//
//	func TestMyQuantiser(t *testing.T) {
//		quanttest.RunQuantise(t, quanttest.Kernel{Quantise: myQuantise, Pack4: myPack4})
//	}
//
// A test that must watch the suite fail passes a conformance.Recorder.
//
// # Cases
//
// RunQuantise's integer cases (Cases), each run through Kernel.Quantise,
// and for int4 schemes through Kernel.Pack4 under every nibble order and
// code:
//
//	ties_half_even         s = 1/4 and x = k/8: every other x/s a tie, to even
//	ties_half_away         the same ties, away from zero
//	clipped_int8           symmetric-clipped: −127..127, an outlier clipped at −127 not −128
//	clipped_int4_pow2      int4 −7..7 with power-of-two scales
//	scale_rounded_up       bfloat16 scales: 1/127 rounds down to nearest, so the scale must round up
//	asymmetric_per_row     integer zero points, one scale per row
//	groups_down_columns    groups of 2 down each column, binary16 scales
//	zero_block             a row of zeros beside others: scale 1, codes 0 (asymmetric: the zero point)
//	subnormal_scale        magnitudes near 2^−140: float32 scales in the subnormal range
//	percentile             the 90th percentile by nearest rank, two outliers clipped
//	float_zero_point       a float zero point in binary16, int4 groups of 8 far from zero
//
// Its FP8 cases (FP8Cases), run when Kernel.QuantiseFP8 is set (OCP 8-bit
// Floating Point Specification (OFP8), revision 1.0, 2023):
//
//	fp8_e4m3_chosen        E4M3, scale up(amax/448) per row
//	fp8_e5m2_groups        E5M2, groups of 4, bfloat16 scales
//	fp8_e4m3_overflow_nan  a given scale 2: 928/2 ties to 448, 960/2 overflows to NaN (E4M3 has no infinity)
//	fp8_e4m3_saturate      the same with saturation: ±448
//	fp8_e5m2_overflow_inf  E5M2 beyond 57344 is ±Inf
//
// RunMX's cases (MXCases), one pair per element format of OCP
// Microscaling Formats (MX) Specification v1.0, 2023:
//
//	mx_e4m3                two blocks of mixed values
//	mx_e4m3_zero_block     a block of zeros, then one with a power-of-two maximum
//	mx_e5m2                two blocks of mixed values
//	mx_e5m2_zero_block     a block of zeros, then one with a power-of-two maximum
//	mx_e3m2                two blocks of mixed values
//	mx_e3m2_zero_block     a block of zeros, then one with a power-of-two maximum
//	mx_e2m3                two blocks of mixed values
//	mx_e2m3_zero_block     a block of zeros, then one with a power-of-two maximum
//	mx_e2m1                two blocks of mixed values
//	mx_e2m1_zero_block     a block of zeros, then one with a power-of-two maximum
//	mx_int8                two blocks of mixed values
//	mx_int8_zero_block     a block of zeros, then one with a power-of-two maximum
//
// MatMulCases returns the cases of RunMatMul, each run as subtests int8,
// fp8 and weight-only (those of a function the kernel has):
//
//	per_tensor             one scale per operand, outputs in float32
//	row_and_column_scales  per-row scales of a, per-column scales of b, different counts of each
//	zero_points            asymmetric weights whose zero points matter
//	long_sums              K = 4096 of large codes: int32 sums beyond 2^24, which float32 cannot hold
//	bfloat16_out           outputs rounded to bfloat16
//
// AttentionCases returns the cases of RunAttention:
//
//	int8_per_tensor        int8 keys and values, one scale each
//	e4m3_per_head_grouped  E4M3 cache, a scale per head, 4 query heads on 2 key/value heads
//	e5m2_per_token_causal  E5M2 cache, a scale per token, the causal mask
//	int8_per_token_decode  one query on a per-token int8 cache of 33 tokens: a decoding step
//	weights_e4m3           the softmax weights quantised to E4M3 with the scale 1/448 before P·V
//	weights_e5m2           the softmax weights quantised to E5M2 with the scale 1/57344
//
// # What is judged, and how closely
//
// Int8: the int32 sums exactly (int32 accumulation is exact; a kernel
// that accumulates in float32 loses the low bits of sums beyond 2^24, as
// long_sums makes them), and the rescaled output within one unit in the
// last place of the output format of quant.MatMulInt8To's result. FP8 and
// weight-only: each output within γ_(K+1)·Σₖ|aₖ·bₖ| plus one unit in the
// last place of the output format of the exact result (quant.MatMulFP8,
// quant.WeightOnly32), γ_n = n·u/(1 − n·u), u = 2^−24: the a-priori
// bound of a float32 sum of products in any order (Higham 2002, "Accuracy
// and Stability of Numerical Algorithms", 2nd ed., §3.1, Eq. (3.5)).
// Attention: quant.Attend (float64 on the exactly dequantised cache)
// within the yardstick of quant.Attend32 (compare.MeasureYardstick with
// compare.DefaultK). With the weights quantised, a float32 kernel whose
// unnormalised weight lies within its rounding error of a boundary
// between two FP8 codes may pick the other code; the cases' inputs are
// fixed (generators seeded by the case name) and none of them does for
// the float32 form of the reference.
//
// Run functions take any conformance.TB; conformance.Recorder records
// instead of failing, to show the suite catching a slipped kernel.
package quanttest
