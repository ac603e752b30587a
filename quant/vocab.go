package quant

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one of
// them, so callers can match with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "quant: invalid group: Quantise: Scheme.Group = 5; want a
// divisor of Cols = 12".
var (
	// ErrSize: a negative dimension, a product of dimensions beyond
	// MaxElements, or inner dimensions of a product that disagree.
	ErrSize = errors.New("quant: invalid size")
	// ErrLength: a slice whose length does not match the shape or the
	// scheme (codes, scales, zero points, MX blocks).
	ErrLength = errors.New("quant: length mismatch")
	// ErrOption: a convention value that is none of its words, an output
	// format that is not a compare.Format, or a scheme a function cannot
	// take (a per-group operand of MatMulInt8).
	ErrOption = errors.New("quant: invalid option")
	// ErrGroup: a group size below one, or one that does not divide the
	// axis its groups are cut from.
	ErrGroup = errors.New("quant: invalid group")
	// ErrScale: a scale that is zero, negative, NaN, ±Inf or not a value
	// of its scale format.
	ErrScale = errors.New("quant: invalid scale")
	// ErrCode: a code or zero point outside the range of its width and
	// range, or an MX element pattern wider than its format.
	ErrCode = errors.New("quant: code out of range")
	// ErrPacked: a packed int4 buffer whose length is not ⌈n/2⌉ bytes.
	ErrPacked = errors.New("quant: invalid packed buffer")
	// ErrValue: an input that cannot be quantised: NaN or ±Inf in
	// Quantise, or a magnitude whose scale lies beyond the scale format
	// (or, in EncodeMX, beyond E8M0's 2^127).
	ErrValue = errors.New("quant: value cannot be quantised")
	// ErrOverflow: an integer product whose int32 sum could overflow.
	ErrOverflow = errors.New("quant: int32 accumulation could overflow")
)

// MaxElements is the most elements one tensor of this package may hold,
// 2^28 (2 GiB of float64), the limit of plumb's kernel packages. Larger
// shapes are refused with ErrSize before anything is allocated; products
// of dimensions are compared by division, so they cannot wrap around.
const MaxElements = 1 << 28

// Symmetry says whether a block's codes are offset by an integer zero point.
type Symmetry int

const (
	// Symmetric: x̂ = q·s, no zero point; the scale is chosen from max|x|. The zero value.
	Symmetric Symmetry = iota
	// Asymmetric: x̂ = (q − z)·s with an integer zero point z, so that the codes cover [min(x, 0), max(x, 0)] and real zero is exactly a code (Jacob et al. 2018, §2.1).
	Asymmetric
	// AsymmetricFloat: x̂ = (q − z)·s with a zero point z that is a value of the scale format, not an integer, so that the codes cover [min x, max x] whether or not it holds zero (common practice for per-group weights); real zero need not be a code.
	AsymmetricFloat
)

var symmetryWords = vocab.New("quant", "symmetry", "whether a block's codes carry a zero point", ErrOption,
	vocab.W(Symmetric, "symmetric", "x̂ = q·s: zero point 0, the range centred on zero"),
	vocab.W(Asymmetric, "asymmetric", "x̂ = (q − z)·s with an integer zero point z; the range [min(x, 0), max(x, 0)]"),
	vocab.W(AsymmetricFloat, "asymmetric-float", "x̂ = (q − z)·s with a zero point z in the scale format; the range [min x, max x]"),
)

// String returns s's word ("asymmetric").
func (s Symmetry) String() string { return symmetryWords.String(s) }

// MarshalText returns s's word; a value with none is an error wrapping
// ErrOption.
func (s Symmetry) MarshalText() ([]byte, error) { return symmetryWords.Marshal(s) }

// UnmarshalText sets s from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (s *Symmetry) UnmarshalText(b []byte) error { return symmetryWords.Unmarshal(s, b) }

// Meaning returns one line saying what s means.
func (s Symmetry) Meaning() string { return symmetryWords.Meaning(s) }

// Values lists every Symmetry, the zero value first.
func (Symmetry) Values() []Symmetry { return symmetryWords.Values() }

// Check returns nil if s is one of the Symmetry constants, or an error
// wrapping ErrOption that lists the words.
func (s Symmetry) Check() error { return symmetryWords.Check(s) }

// Granularity says which elements of a [Rows, Cols] tensor share one scale (and zero point).
type Granularity int

const (
	// PerTensor: one scale for the whole tensor. The zero value.
	PerTensor Granularity = iota
	// PerChannel: one scale per row (ChannelRows) or per column (ChannelCols).
	PerChannel
	// PerGroup: one scale per Group consecutive elements of each row (ChannelRows, groups running along the columns) or of each column (ChannelCols, groups running down the rows).
	PerGroup
)

var granularityWords = vocab.New("quant", "granularity", "which elements share one scale", ErrOption,
	vocab.W(PerTensor, "per-tensor", "one scale for the whole tensor"),
	vocab.W(PerChannel, "per-channel", "one scale per row or per column, as Scheme.Channel says"),
	vocab.W(PerGroup, "per-group", "one scale per Scheme.Group consecutive elements of a row or of a column"),
)

// String returns g's word ("per-group").
func (g Granularity) String() string { return granularityWords.String(g) }

// MarshalText returns g's word; a value with none is an error wrapping
// ErrOption.
func (g Granularity) MarshalText() ([]byte, error) { return granularityWords.Marshal(g) }

// UnmarshalText sets g from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (g *Granularity) UnmarshalText(b []byte) error { return granularityWords.Unmarshal(g, b) }

// Meaning returns one line saying what g means.
func (g Granularity) Meaning() string { return granularityWords.Meaning(g) }

// Values lists every Granularity, the zero value first.
func (Granularity) Values() []Granularity { return granularityWords.Values() }

// Check returns nil if g is one of the Granularity constants, or an error
// wrapping ErrOption that lists the words.
func (g Granularity) Check() error { return granularityWords.Check(g) }

// Channel says which index of a [Rows, Cols] tensor a per-channel or per-group scale follows.
type Channel int

const (
	// ChannelRows: the scales follow the row index: scale[r] per channel, scale[r, c/Group] per group ([Rows, Cols/Group] scales). The zero value.
	ChannelRows Channel = iota
	// ChannelCols: the scales follow the column index: scale[c] per channel, scale[r/Group, c] per group ([Rows/Group, Cols] scales).
	ChannelCols
)

var channelWords = vocab.New("quant", "channel axis", "which index of a [rows, cols] tensor the scales follow", ErrOption,
	vocab.W(ChannelRows, "rows", "scales follow the row index: per row, or groups cut along each row"),
	vocab.W(ChannelCols, "columns", "scales follow the column index: per column, or groups cut down each column"),
)

// String returns c's word ("columns").
func (c Channel) String() string { return channelWords.String(c) }

// MarshalText returns c's word; a value with none is an error wrapping
// ErrOption.
func (c Channel) MarshalText() ([]byte, error) { return channelWords.Marshal(c) }

// UnmarshalText sets c from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (c *Channel) UnmarshalText(b []byte) error { return channelWords.Unmarshal(c, b) }

// Meaning returns one line saying what c means.
func (c Channel) Meaning() string { return channelWords.Meaning(c) }

// Values lists every Channel, the zero value first.
func (Channel) Values() []Channel { return channelWords.Values() }

// Check returns nil if c is one of the Channel constants, or an error
// wrapping ErrOption that lists the words.
func (c Channel) Check() error { return channelWords.Check(c) }

// Width is the number of bits of a code, a two's complement integer.
type Width int

const (
	// Int8: codes in −128..127. The zero value.
	Int8 Width = iota
	// Int4: codes in −8..7, two to a byte when packed (Pack4).
	Int4
)

var widthWords = vocab.New("quant", "integer width", "how many bits a code has", ErrOption,
	vocab.W(Int8, "int8", "8-bit codes, −128..127 (or −127..127 clipped)"),
	vocab.W(Int4, "int4", "4-bit codes, −8..7 (or −7..7 clipped)"),
)

// String returns w's word ("int4").
func (w Width) String() string { return widthWords.String(w) }

// MarshalText returns w's word; a value with none is an error wrapping
// ErrOption.
func (w Width) MarshalText() ([]byte, error) { return widthWords.Marshal(w) }

// UnmarshalText sets w from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (w *Width) UnmarshalText(b []byte) error { return widthWords.Unmarshal(w, b) }

// Meaning returns one line saying what w means.
func (w Width) Meaning() string { return widthWords.Meaning(w) }

// Values lists every Width, the zero value first.
func (Width) Values() []Width { return widthWords.Values() }

// Check returns nil if w is one of the Width constants, or an error
// wrapping ErrOption that lists the words.
func (w Width) Check() error { return widthWords.Check(w) }

// Range says whether the most negative two's complement code is used.
type Range int

const (
	// RangeFull: −128..127 or −8..7. The zero value.
	RangeFull Range = iota
	// RangeClipped: −127..127 or −7..7, a range symmetric about zero (common practice, so that q and −q are both codes).
	RangeClipped
)

var rangeWords = vocab.New("quant", "code range", "whether the most negative code is used", ErrOption,
	vocab.W(RangeFull, "full", "every code of the width: −128..127, −8..7"),
	vocab.W(RangeClipped, "symmetric-clipped", "the most negative code left out: −127..127, −7..7"),
)

// String returns r's word ("symmetric-clipped").
func (r Range) String() string { return rangeWords.String(r) }

// MarshalText returns r's word; a value with none is an error wrapping
// ErrOption.
func (r Range) MarshalText() ([]byte, error) { return rangeWords.Marshal(r) }

// UnmarshalText sets r from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (r *Range) UnmarshalText(b []byte) error { return rangeWords.Unmarshal(r, b) }

// Meaning returns one line saying what r means.
func (r Range) Meaning() string { return rangeWords.Meaning(r) }

// Values lists every Range, the zero value first.
func (Range) Values() []Range { return rangeWords.Values() }

// Check returns nil if r is one of the Range constants, or an error
// wrapping ErrOption that lists the words.
func (r Range) Check() error { return rangeWords.Check(r) }

// Rounding says how x/s is rounded to the nearest integer when it lies halfway between two.
type Rounding int

const (
	// HalfEven: ties go to the even integer, 2.5 → 2, −3.5 → −4 (IEEE 754-2019 §4.3.1, roundTiesToEven). The zero value.
	HalfEven Rounding = iota
	// HalfAway: ties go away from zero, 2.5 → 3, −2.5 → −3 (IEEE 754-2019 §4.3.1, roundTiesToAway; C's round).
	HalfAway
)

var roundingWords = vocab.New("quant", "rounding", "how x/s is rounded to an integer at a tie", ErrOption,
	vocab.W(HalfEven, "half-even", "ties to the even integer (IEEE 754-2019 §4.3.1 roundTiesToEven)"),
	vocab.W(HalfAway, "half-away", "ties away from zero (IEEE 754-2019 §4.3.1 roundTiesToAway)"),
)

// String returns r's word ("half-away").
func (r Rounding) String() string { return roundingWords.String(r) }

// MarshalText returns r's word; a value with none is an error wrapping
// ErrOption.
func (r Rounding) MarshalText() ([]byte, error) { return roundingWords.Marshal(r) }

// UnmarshalText sets r from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (r *Rounding) UnmarshalText(b []byte) error { return roundingWords.Unmarshal(r, b) }

// Meaning returns one line saying what r means.
func (r Rounding) Meaning() string { return roundingWords.Meaning(r) }

// Values lists every Rounding, the zero value first.
func (Rounding) Values() []Rounding { return roundingWords.Values() }

// Check returns nil if r is one of the Rounding constants, or an error
// wrapping ErrOption that lists the words.
func (r Rounding) Check() error { return roundingWords.Check(r) }

// ScaleFormat is the number format a scale is stored in. The scale chosen for a block is rounded upward to it (see Quantise).
type ScaleFormat int

const (
	// ScaleFloat32: IEEE 754 binary32. The zero value.
	ScaleFloat32 ScaleFormat = iota
	// ScaleBinary16: IEEE 754 binary16; positive scales from 2^−24 to 65504.
	ScaleBinary16
	// ScaleBFloat16: bfloat16, 8 significand bits.
	ScaleBFloat16
	// ScalePow2: a power of two 2^e, −127 ≤ e ≤ 127: the values of the E8M0 scale of OCP MX v1.0 §5.4 (section number from memory), so that a rescale is a shift.
	ScalePow2
)

var scaleWords = vocab.New("quant", "scale format", "which number format a scale is stored in", ErrOption,
	vocab.W(ScaleFloat32, "float32", "IEEE 754 binary32 scales"),
	vocab.W(ScaleBinary16, "binary16", "IEEE 754 binary16 scales"),
	vocab.W(ScaleBFloat16, "bfloat16", "bfloat16 scales: 8 significand bits"),
	vocab.W(ScalePow2, "pow2", "powers of two from 2^−127 to 2^127, the values of E8M0"),
)

// String returns s's word ("pow2").
func (s ScaleFormat) String() string { return scaleWords.String(s) }

// MarshalText returns s's word; a value with none is an error wrapping
// ErrOption.
func (s ScaleFormat) MarshalText() ([]byte, error) { return scaleWords.Marshal(s) }

// UnmarshalText sets s from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (s *ScaleFormat) UnmarshalText(b []byte) error { return scaleWords.Unmarshal(s, b) }

// Meaning returns one line saying what s means.
func (s ScaleFormat) Meaning() string { return scaleWords.Meaning(s) }

// Values lists every ScaleFormat, the zero value first.
func (ScaleFormat) Values() []ScaleFormat { return scaleWords.Values() }

// Check returns nil if s is one of the ScaleFormat constants, or an error
// wrapping ErrOption that lists the words.
func (s ScaleFormat) Check() error { return scaleWords.Check(s) }

// NibbleOrder says which half of a packed byte holds the first of its two int4 codes.
type NibbleOrder int

const (
	// LowFirst: code 2i in bits 0–3 of byte i, code 2i+1 in bits 4–7. The zero value.
	LowFirst NibbleOrder = iota
	// HighFirst: code 2i in bits 4–7 of byte i, code 2i+1 in bits 0–3.
	HighFirst
)

var orderWords = vocab.New("quant", "nibble order", "which half of a byte holds the first of two int4 codes", ErrOption,
	vocab.W(LowFirst, "low-first", "code 2i in bits 0–3 of byte i, code 2i+1 in bits 4–7"),
	vocab.W(HighFirst, "high-first", "code 2i in bits 4–7 of byte i, code 2i+1 in bits 0–3"),
)

// String returns n's word ("high-first").
func (n NibbleOrder) String() string { return orderWords.String(n) }

// MarshalText returns n's word; a value with none is an error wrapping
// ErrOption.
func (n NibbleOrder) MarshalText() ([]byte, error) { return orderWords.Marshal(n) }

// UnmarshalText sets n from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (n *NibbleOrder) UnmarshalText(b []byte) error { return orderWords.Unmarshal(n, b) }

// Meaning returns one line saying what n means.
func (n NibbleOrder) Meaning() string { return orderWords.Meaning(n) }

// Values lists every NibbleOrder, the zero value first.
func (NibbleOrder) Values() []NibbleOrder { return orderWords.Values() }

// Check returns nil if n is one of the NibbleOrder constants, or an error
// wrapping ErrOption that lists the words.
func (n NibbleOrder) Check() error { return orderWords.Check(n) }

// NibbleCode says how an int4 code q, −8 ≤ q ≤ 7, is written in four bits.
type NibbleCode int

const (
	// TwosComplement: the nibble is q mod 16 (−1 is 0xF, −8 is 0x8). The zero value.
	TwosComplement NibbleCode = iota
	// OffsetBinary: the nibble is q + 8 (−8 is 0x0, 0 is 0x8, 7 is 0xF), an unsigned code with zero point 8.
	OffsetBinary
)

var nibbleWords = vocab.New("quant", "nibble code", "how an int4 code is written in four bits", ErrOption,
	vocab.W(TwosComplement, "twos-complement", "q mod 16: −1 is 0xF, −8 is 0x8"),
	vocab.W(OffsetBinary, "offset-binary", "q + 8: −8 is 0x0, 0 is 0x8, 7 is 0xF"),
)

// String returns n's word ("offset-binary").
func (n NibbleCode) String() string { return nibbleWords.String(n) }

// MarshalText returns n's word; a value with none is an error wrapping
// ErrOption.
func (n NibbleCode) MarshalText() ([]byte, error) { return nibbleWords.Marshal(n) }

// UnmarshalText sets n from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (n *NibbleCode) UnmarshalText(b []byte) error { return nibbleWords.Unmarshal(n, b) }

// Meaning returns one line saying what n means.
func (n NibbleCode) Meaning() string { return nibbleWords.Meaning(n) }

// Values lists every NibbleCode, the zero value first.
func (NibbleCode) Values() []NibbleCode { return nibbleWords.Values() }

// Check returns nil if n is one of the NibbleCode constants, or an error
// wrapping ErrOption that lists the words.
func (n NibbleCode) Check() error { return nibbleWords.Check(n) }

// Element is the format of the private elements of an MX block (OCP MX v1.0 §5.3; the section numbers of this package are from memory). The table gives each one's largest magnitude and emax, the exponent of its largest power of two, that the conversion of EncodeMX subtracts:
//
//	element  bits  bias  max normal   emax  source
//	E4M3        8     7  448             8  OFP8 rev 1.0; compare.E4M3
//	E5M2        8    15  57344          15  OFP8 rev 1.0; compare.E5M2
//	E3M2        6     3  28              4  OCP MX v1.0 §5.3.2: 2^4·1.75
//	E2M3        6     1  7.5             2  OCP MX v1.0 §5.3.2: 2^2·1.875
//	E2M1        4     1  6               2  OCP MX v1.0 §5.3.3: 2^2·1.5
//	INT8        8     —  1.984375        0  OCP MX v1.0 §5.3.4: 127·2^−6 (from memory)
//
// E3M2, E2M3 and E2M1 have no infinities and no NaN: every bit pattern is a
// number, subnormals included. INT8 is two's complement with an implicit
// scale of 2^−6: the pattern of the integer q means q·2^−6, −2 ≤ value ≤
// 1.984375 (from memory).
type Element int

const (
	// ElemE4M3: FP8 E4M3 (MXFP8). The zero value.
	ElemE4M3 Element = iota
	// ElemE5M2: FP8 E5M2 (MXFP8).
	ElemE5M2
	// ElemE3M2: FP6 E3M2 (MXFP6).
	ElemE3M2
	// ElemE2M3: FP6 E2M3 (MXFP6).
	ElemE2M3
	// ElemE2M1: FP4 E2M1 (MXFP4).
	ElemE2M1
	// ElemInt8: 8-bit two's complement times 2^−6 (MXINT8).
	ElemInt8
)

var elementWords = vocab.New("quant", "MX element format", "the format of the 32 elements of an MX block", ErrOption,
	vocab.W(ElemE4M3, "e4m3", "FP8 E4M3 elements (MXFP8), max 448"),
	vocab.W(ElemE5M2, "e5m2", "FP8 E5M2 elements (MXFP8), max 57344"),
	vocab.W(ElemE3M2, "e3m2", "FP6 E3M2 elements (MXFP6), max 28"),
	vocab.W(ElemE2M3, "e2m3", "FP6 E2M3 elements (MXFP6), max 7.5"),
	vocab.W(ElemE2M1, "e2m1", "FP4 E2M1 elements (MXFP4), max 6"),
	vocab.W(ElemInt8, "int8", "8-bit two's complement elements times 2^−6 (MXINT8), max 1.984375"),
)

// String returns e's word ("int8").
func (e Element) String() string { return elementWords.String(e) }

// MarshalText returns e's word; a value with none is an error wrapping
// ErrOption.
func (e Element) MarshalText() ([]byte, error) { return elementWords.Marshal(e) }

// UnmarshalText sets e from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (e *Element) UnmarshalText(b []byte) error { return elementWords.Unmarshal(e, b) }

// Meaning returns one line saying what e means.
func (e Element) Meaning() string { return elementWords.Meaning(e) }

// Values lists every Element, the zero value first.
func (Element) Values() []Element { return elementWords.Values() }

// Check returns nil if e is one of the Element constants, or an error
// wrapping ErrOption that lists the words.
func (e Element) Check() error { return elementWords.Check(e) }

// ScaleRule says which magnitude of a block its scale is chosen from.
type ScaleRule int

const (
	// RuleAbsMax: the block's largest magnitude (its extremes, when asymmetric), so that no element is clipped. The zero value.
	RuleAbsMax ScaleRule = iota
	// RulePercentile: the Scheme.Percentile-th percentile of the block's magnitudes |x| (nearest rank), so that the largest elements are clipped to the extreme codes (percentile calibration, common practice).
	RulePercentile
)

var ruleWords = vocab.New("quant", "scale rule", "which magnitude of a block its scale is chosen from", ErrOption,
	vocab.W(RuleAbsMax, "absmax", "the largest magnitude: no element is clipped"),
	vocab.W(RulePercentile, "percentile", "the p-th percentile of |x| (nearest rank): larger elements are clipped"),
)

// String returns r's word ("percentile").
func (r ScaleRule) String() string { return ruleWords.String(r) }

// MarshalText returns r's word; a value with none is an error wrapping
// ErrOption.
func (r ScaleRule) MarshalText() ([]byte, error) { return ruleWords.Marshal(r) }

// UnmarshalText sets r from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (r *ScaleRule) UnmarshalText(b []byte) error { return ruleWords.Unmarshal(r, b) }

// Meaning returns one line saying what r means.
func (r ScaleRule) Meaning() string { return ruleWords.Meaning(r) }

// Values lists every ScaleRule, the zero value first.
func (ScaleRule) Values() []ScaleRule { return ruleWords.Values() }

// Check returns nil if r is one of the ScaleRule constants, or an error
// wrapping ErrOption that lists the words.
func (r ScaleRule) Check() error { return ruleWords.Check(r) }

// FP8Element is the 8-bit floating-point format of the elements of an FP8Tensor (OCP 8-bit Floating Point Specification (OFP8), revision 1.0, 2023, through package compare).
type FP8Element int

const (
	// FP8E4M3: 4 exponent bits, 3 fraction bits, max 448, no infinities (S.1111.111 is NaN). The zero value.
	FP8E4M3 FP8Element = iota
	// FP8E5M2: 5 exponent bits, 2 fraction bits, max 57344, with ±Inf (IEEE 754 style).
	FP8E5M2
)

var fp8Words = vocab.New("quant", "FP8 element", "which 8-bit float format an element is", ErrOption,
	vocab.W(FP8E4M3, "e4m3", "OFP8 E4M3: max 448, NaN but no infinity"),
	vocab.W(FP8E5M2, "e5m2", "OFP8 E5M2: max 57344, with infinities"),
)

// String returns e's word ("e5m2").
func (e FP8Element) String() string { return fp8Words.String(e) }

// MarshalText returns e's word; a value with none is an error wrapping
// ErrOption.
func (e FP8Element) MarshalText() ([]byte, error) { return fp8Words.Marshal(e) }

// UnmarshalText sets e from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (e *FP8Element) UnmarshalText(b []byte) error { return fp8Words.Unmarshal(e, b) }

// Meaning returns one line saying what e means.
func (e FP8Element) Meaning() string { return fp8Words.Meaning(e) }

// Values lists every FP8Element, the zero value first.
func (FP8Element) Values() []FP8Element { return fp8Words.Values() }

// Check returns nil if e is one of the FP8Element constants, or an error
// wrapping ErrOption that lists the words.
func (e FP8Element) Check() error { return fp8Words.Check(e) }

// Overflow says what an FP8 element becomes when x/s rounds beyond the format's largest magnitude.
type Overflow int

const (
	// OverflowSpecial: the format's overflow, that of compare.Format.Round: NaN in E4M3 (which has no infinity), ±Inf in E5M2 (OFP8 rev 1.0, the non-saturating mode). The zero value.
	OverflowSpecial Overflow = iota
	// OverflowSaturate: ±max, 448 in E4M3 and 57344 in E5M2 (OFP8 rev 1.0, the saturating mode).
	OverflowSaturate
)

var overflowWords = vocab.New("quant", "FP8 overflow", "what an element beyond the format's largest magnitude becomes", ErrOption,
	vocab.W(OverflowSpecial, "nan-or-inf", "non-saturating: NaN in E4M3, ±Inf in E5M2"),
	vocab.W(OverflowSaturate, "saturate", "saturating: ±448 in E4M3, ±57344 in E5M2"),
)

// String returns o's word ("saturate").
func (o Overflow) String() string { return overflowWords.String(o) }

// MarshalText returns o's word; a value with none is an error wrapping
// ErrOption.
func (o Overflow) MarshalText() ([]byte, error) { return overflowWords.Marshal(o) }

// UnmarshalText sets o from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (o *Overflow) UnmarshalText(b []byte) error { return overflowWords.Unmarshal(o, b) }

// Meaning returns one line saying what o means.
func (o Overflow) Meaning() string { return overflowWords.Meaning(o) }

// Values lists every Overflow, the zero value first.
func (Overflow) Values() []Overflow { return overflowWords.Values() }

// Check returns nil if o is one of the Overflow constants, or an error
// wrapping ErrOption that lists the words.
func (o Overflow) Check() error { return overflowWords.Check(o) }
