// Package quanttest is a conformance suite for quantisers: RunQuantise
// judges a kernel's integer quantisation (and, when given, its int4
// packing and its scaled FP8 quantisation) and RunMX its OCP MX encoding
// (and dot product) against package quant's exact reference, bit for bit.
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
package quanttest
