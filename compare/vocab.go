package compare

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// The sentinel errors. Every error this package returns wraps exactly one of
// them (match with errors.Is) and reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// naming the function called, the argument or field, its value and what
// was expected.
var (
	// ErrFormat: an invalid Format value or an unknown format name, or a
	// format wider than the arithmetic a yardstick runs in.
	ErrFormat = errors.New("compare: invalid number format")
	// ErrBits: a bit pattern wider than its format.
	ErrBits = errors.New("compare: bit pattern out of range")
	// ErrShape: lengths that disagree with each other or with a shape, or a
	// negative dimension.
	ErrShape = errors.New("compare: shape mismatch")
	// ErrTolerance: a negative or NaN tolerance, relative-error floor or
	// yardstick factor.
	ErrTolerance = errors.New("compare: invalid tolerance")
	// ErrYardstick: the low-precision function of a yardstick failed or
	// returned the wrong number of elements.
	ErrYardstick = errors.New("compare: yardstick failed")
	// ErrReport: a nil *Report, or JSON that is not a Report's.
	ErrReport = errors.New("compare: invalid report")
)

// Format is a binary floating-point number format: float64, float32, IEEE
// 754 binary16, bfloat16, or one of the two OCP 8-bit formats E4M3 and
// E5M2. Its zero value is Float64.
//
// Every value of every Format is exactly a float64, so values are carried
// as float64 throughout this package; a Format says which float64 values
// are representable, how other values round to them, and how they are
// encoded as bit patterns.
//
// A value outside the declared constants is not a valid Format: its Valid
// method reports false, its rounding methods return NaN and its encoding
// methods return 0; the package's functions refuse it with ErrFormat.
type Format int

// The formats. Their parameters (sign, exponent and fraction bits, bias)
// and the specification each follows:
//
//	format    bits  exp  frac  bias  max                     min normal  min subnormal  source
//	Float64     64   11    52  1023  1.7976931348623157e308  2^-1022     2^-1074        IEEE 754-2019 §3.6, table 3.5 (binary64)
//	Float32     32    8    23   127  3.4028234663852886e38   2^-126      2^-149         IEEE 754-2019 §3.6, table 3.5 (binary32)
//	Binary16    16    5    10    15  65504                   2^-14       2^-24          IEEE 754-2019 §3.6, table 3.5 (binary16)
//	BFloat16    16    8     7   127  3.3895313892515355e38   2^-126      2^-133         no formal standard: binary32 with the low 16 fraction bits dropped
//	E4M3         8    4     3     7  448                     2^-6        2^-9           OCP 8-bit Floating Point Specification (OFP8), 2023
//	E5M2         8    5     2    15  57344                   2^-14       2^-16          OCP 8-bit Floating Point Specification (OFP8), 2023
//
// All but E4M3 follow the IEEE 754 layout: an exponent field of all ones
// holds ±Inf (fraction 0) and NaN (any other fraction). E4M3 has no
// infinities: an all-ones exponent field holds ordinary numbers up to
// S.1111.110 = ±448, and only S.1111.111 is NaN (OFP8 §4).
const (
	Float64 Format = iota
	Float32
	Binary16
	BFloat16
	E4M3
	E5M2
	numFormats
)

var formatWords = vocab.New("compare", "number format", "the binary floating-point format a candidate is stored in", ErrFormat,
	vocab.W(Float64, "float64", "IEEE 754 binary64: 53 significand bits"),
	vocab.W(Float32, "float32", "IEEE 754 binary32: 24 significand bits"),
	vocab.W(Binary16, "binary16", "IEEE 754 binary16 (half): 11 significand bits, 5 exponent bits"),
	vocab.W(BFloat16, "bfloat16", "binary32 with the low 16 fraction bits dropped: 8 significand bits"),
	vocab.W(E4M3, "e4m3", "OCP 8-bit E4M3: 4 significand bits, no infinities, max 448"),
	vocab.W(E5M2, "e5m2", "OCP 8-bit E5M2: 3 significand bits, IEEE-style infinities, max 57344"),
).Aliases(map[string]Format{
	"double": Float64, "fp64": Float64,
	"single": Float32, "fp32": Float32,
	"float16": Binary16, "half": Binary16, "fp16": Binary16,
	"bf16":    BFloat16,
	"fp8e4m3": E4M3, "fp8-e4m3": E4M3,
	"fp8e5m2": E5M2, "fp8-e5m2": E5M2,
})

// Formats lists every format, widest first.
func Formats() []Format { return formatWords.Values() }

// FormatByName returns the format called name: float64, float32, binary16,
// bfloat16, e4m3 or e5m2, compared without regard to case; also accepted are
// double, fp64, single, fp32, float16, half, fp16, bf16, fp8e4m3, fp8-e4m3,
// fp8e5m2 and fp8-e5m2. An unknown name gives an error wrapping ErrFormat
// that lists the known names.
func FormatByName(name string) (Format, error) {
	var f Format
	err := f.UnmarshalText([]byte(name))
	return f, vocab.At(err, ErrFormat, "FormatByName: name")
}

// String returns the format's word ("bfloat16"), or "Format(n)" for an
// invalid value.
func (f Format) String() string { return formatWords.String(f) }

// MarshalText returns f's word, so that a Format in a JSON object is a
// string; an invalid f is an error wrapping ErrFormat.
func (f Format) MarshalText() ([]byte, error) { return formatWords.Marshal(f) }

// UnmarshalText sets f from its word or one of the other names
// FormatByName accepts; any other text is an error wrapping ErrFormat that
// lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (f *Format) UnmarshalText(b []byte) error { return formatWords.Unmarshal(f, b) }

// Meaning returns one line saying what f is.
func (f Format) Meaning() string { return formatWords.Meaning(f) }

// Values lists every Format, widest first.
func (Format) Values() []Format { return formatWords.Values() }

// Check returns nil if f is one of the Format constants, or an error
// wrapping ErrFormat that lists the words.
func (f Format) Check() error { return formatWords.Check(f) }
