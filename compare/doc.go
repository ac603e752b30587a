// Package compare judges a candidate tensor against plumb's float64
// reference: exact low-precision number formats, ULP distances, a diff
// report, tolerances, and the yardstick that turns "is this error
// acceptable for my format?" from a guessed atol/rtol into a measurement.
//
// # Number formats
//
// Format covers float64, float32, IEEE 754 binary16, bfloat16 and the OCP
// 8-bit formats E4M3 and E5M2 (the table at Float64 gives their parameters
// and sources). Every value of every format is exactly a float64, so values
// are carried as float64. Format.Round converts a float64 to the nearest
// value, ties to even, in one step (never through float32, which can round
// twice to a different value), with each standard's overflow: ±Inf, or NaN
// for E4M3; Format.RoundSaturating clamps to ±Max instead. Encode and Decode
// convert to and from bit patterns; ULP and ULPDistance measure spacing and
// distance on the format's grid.
//
// Sources: IEEE 754-2019, "IEEE Standard for Floating-Point Arithmetic",
// §3.6 table 3.5 (binary16, binary32, binary64), §4.3.1 (roundTiesToEven),
// §7.4 (overflow); Open Compute Project, "OCP 8-bit Floating Point
// Specification (OFP8)", revision 1.0, 2023 (E4M3, E5M2, saturating and
// non-saturating conversion). bfloat16 has no formal standard; it is
// binary32 with the low 16 fraction bits dropped, and follows the IEEE 754
// rules for rounding, subnormals, infinities and NaN here. Saturation of an
// infinite input (±Inf → ±Max) is this package's reading of the OFP8
// saturating mode, applied to every format alike.
//
// Accuracy: the conversions are exact (a power-of-two scaling and one
// integer rounding). The tests check every bit pattern of the 8- and 16-bit
// formats (decode, encode, order, and the rounding of every midpoint between
// neighbours and of the float64 values on either side of it), Float32
// against Go's own conversion on 1.2 million values, and all formats against a
// table computed with exact rational arithmetic (testdata/gen/fam_compare.py,
// testdata/golden/compare/round.json: 6 cases, one per format, 1 491
// inputs): no difference in any bit.
//
// # Diff report
//
// Diff compares a candidate with the reference, both row-major float64
// tensors with a shape, and returns a Report: max absolute error, max
// relative error with a floor for references near zero (Options.RelFloor;
// by default 2^−10 of the largest reference magnitude), RMS error, mean
// signed error (a bias detector), the normwise relative error ‖got −
// ref‖₂/‖ref‖₂, the signal-to-quantisation-noise ratio in decibels
// (10·log₁₀(Σ ref²/Σ (got − ref)²) = −20·log₁₀ of the normwise error, common
// practice), the distribution of ULP distances in the candidate's format,
// NaN and Inf mismatches, the k worst elements with their multi-dimensional
// index, and under a Tolerance a verdict. Report.WriteText renders it aligned
// for a terminal; json.Marshal gives a JSON object with stable keys of our
// own (see Report.MarshalJSON), and json.Unmarshal reads it back.
//
// # Tolerances and the yardstick
//
// A Tolerance is explicit (absolute, relative, ULPs, normwise), or measured
// by MeasureYardstick: the same kernel is run as the straightforward
// low-precision implementation — inputs rounded to the candidate's format,
// arithmetic in float32 (the float32 instantiation of the kernel's generic
// body) or float64, output rounded — its error against the float64
// reference is measured, and a candidate may have at most k times that
// error plus the floor of one rounding to the format (k = DefaultK = 2,
// common practice). Wiring a kernel takes a closure:
//
//	y, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{q, k, v}, want, shape, compare.DefaultK,
//		func(in [][]float32) ([]float32, error) {
//			out, _, err := attention.Forward32(in[0], in[1], in[2], s, opts)
//			return out, err
//		})
//	report, err := compare.Diff(want, got, shape, y.Options())
//
// (attention.Forward32 stands for the float32 instantiation a kernel
// package exports; this package imports none of them.) For attention with
// 8 query heads on 2 kv heads, 128 queries and keys, head dimension 64 and
// standard normal inputs, the bfloat16 yardstick measures a max absolute
// error of 0.00455 and a normwise error of 0.00335; the tolerance is then
// 0.0133 absolute and 0.0106 normwise. A candidate with one head scaled by
// 1.05 fails it; one scaled by 1.01 passes, for in bfloat16 (8 significant
// bits) 1% on one head of eight is within what the format itself loses.
//
// # Test helpers
//
// Check is a testing.TB helper that fails a test with the whole report;
// Approx is a go-cmp option that compares float64 values and slices under a
// tolerance.
//
// # Conventions, and their alternatives
//
//   - Arguments are (reference, candidate), the order of go-cmp's (want,
//     got); errors are candidate − reference, so a positive mean signed error
//     means the candidate is too large.
//   - ULP is the spacing in the binade of x (Goldberg 1991); other
//     definitions take the smaller spacing below x at a power of two (Muller
//     2005, INRIA RR-5504, compares them).
//   - ULP distances count steps between the values rounded to the format: 0
//     means the candidate is the correctly rounded reference. The
//     alternative, |got − ref| / ULP(ref), is fractional; the report's
//     relative error carries that information.
//   - NaN matches NaN and an infinity the same infinity; any other pair with
//     a non-finite value fails under every tolerance.
//
// Special cases are:
//
//	empty tensors          an empty report; the verdict passes
//	all-zero reference     relative floor 1 (relative error = absolute error), normwise error absolute
//	lengths or shape wrong ErrShape
//	invalid Format         ErrFormat (methods return NaN or 0)
//	negative or NaN tolerance, floor or k  ErrTolerance
//	the yardstick's function fails         ErrYardstick
//	values near ±Max                       finite RMS, MeanSigned, Normwise where exact ones are
//	a NaN measure                          the verdict fails, whatever the tolerance
//	a nil *Report, JSON not of a Report    ErrReport
//
// Every error wraps exactly one of the sentinel errors and names the
// function called, the argument, its value and what was wanted
// ("compare: invalid tolerance: Diff: Options.RelFloor = -1; want a finite
// value ≥ 0 (0 for the default)"). No function panics on its arguments,
// nil receivers included.
//
// Sizes: unlike the kernel packages, compare sizes nothing from numbers
// alone. Its largest allocation is one copy of an input (Widen,
// RoundSlice, the rounded inputs and output of MeasureYardstick); a Report
// holds at most its Worst elements and the histogram. Its memory is so
// bounded by that of its inputs, and it needs no element limit of its own.
// A shape must have an element count that fits an int and equals the
// length of the reference (ErrShape).
package compare
