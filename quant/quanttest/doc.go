// Package quanttest is a conformance suite for quantised kernels:
// RunMatMul(t, kernel) runs int8, FP8 and weight-only matrix-product
// kernels, RunAttention(t, kernel) attention kernels on quantised
// key/value caches, each judged against the exact computation on the
// codes the kernel is given (package quant), not against the unquantised
// float64 result.
//
//	func TestMyInt8(t *testing.T) {
//		quanttest.RunMatMul(t, quanttest.MatMulKernel{Int8: myInt8})
//	}
//
// # Cases
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
