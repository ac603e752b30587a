package npy

import (
	"errors"
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/vocab"
)

// The sentinel errors. Every error this package returns wraps exactly one of
// them (match with errors.Is) and reads
//
//	<sentinel>: <function>: <what> = <value>; want <expectation>
//
// naming the function called (with the file's path for ReadFile and
// WriteFile), what was found and what was expected. (An error of the
// reader or writer itself, or of opening a file, is returned wrapped as it
// is.)
var (
	// ErrFormat: the bytes are not a .npy file this package can parse: a
	// wrong magic string, an unknown version, a header that is not a
	// Python dictionary literal with the keys 'descr', 'fortran_order' and
	// 'shape', or a header longer than MaxHeaderLen.
	ErrFormat = errors.New("npy: malformed file")
	// ErrDType: the header's 'descr' names an element type outside the
	// supported set (see DType), or one without a byte order.
	ErrDType = errors.New("npy: unsupported element type")
	// ErrShape: a negative dimension, a shape whose element count
	// overflows, or one of more than MaxElements elements.
	ErrShape = errors.New("npy: invalid shape")
	// ErrData: the data section is shorter than the header promises, or
	// (ReadFile only) bytes follow it.
	ErrData = errors.New("npy: data does not match the header")
	// ErrValues: Array.Values is not the slice type DType needs, or its
	// length is not the shape's element count.
	ErrValues = errors.New("npy: values do not match the header")
	// ErrBits: an Array.Bits interpretation that does not fit its DType
	// (bfloat16 needs Uint16, FP8 needs Uint8).
	ErrBits = errors.New("npy: bit interpretation does not fit the element type")
	// ErrInexact: Float64s met an int64 value that float64 cannot hold
	// exactly.
	ErrInexact = errors.New("npy: value not exactly representable as float64")
)

// MaxElements is the most elements an array of this package may hold,
// 2^28: Read, ReadFile and ReadHeader refuse a header whose shape holds
// more, and New, Write, WriteFile and Float64s an Array of more, with
// ErrShape, before anything is allocated. 2^28 float64 values are 2 GiB,
// the most one allocation of a test machine is expected to hold (Float64s
// turns 2^28 bytes of uint8 into that much); an array beyond it would
// otherwise end the program with an out-of-memory crash no caller can
// recover from. Every file Write produces can be read back. Every test
// case of the package is far inside the limit.
const MaxElements = 1 << 28

// DType is an element type a .npy file may hold. The zero value is
// Float64.
//
// Each has one canonical NumPy descriptor, the kind letter and the size in
// bytes after the byte-order mark: '<f8' float64, '<f4' float32, '<f2'
// float16 (IEEE 754 binary16), '<i8' int64, '<i4' int32, '<u2' uint16,
// '|u1' uint8. Every other descriptor, including complex, bool, other
// integer widths, extended precision, strings, datetimes, objects and
// structured types, is refused with ErrDType.
type DType uint8

// The supported element types.
const (
	Float64 DType = iota // the zero value
	Float32
	Float16
	Int64
	Int32
	Uint16
	Uint8
)

var dtypeInfo = [...]struct {
	kind byte
	size int
}{
	Float64: {'f', 8},
	Float32: {'f', 4},
	Float16: {'f', 2},
	Int64:   {'i', 8},
	Int32:   {'i', 4},
	Uint16:  {'u', 2},
	Uint8:   {'u', 1},
}

func (d DType) valid() bool { return d.Check() == nil }

var dtypeWords = vocab.New("npy", "element type", "the element type of a .npy array", ErrDType,
	vocab.W(Float64, "float64", "IEEE 754 binary64, descriptor <f8"),
	vocab.W(Float32, "float32", "IEEE 754 binary32, descriptor <f4"),
	vocab.W(Float16, "float16", "IEEE 754 binary16, descriptor <f2"),
	vocab.W(Int64, "int64", "64-bit signed integers, descriptor <i8"),
	vocab.W(Int32, "int32", "32-bit signed integers, descriptor <i4"),
	vocab.W(Uint16, "uint16", "16-bit unsigned integers (or bfloat16 bit patterns), descriptor <u2"),
	vocab.W(Uint8, "uint8", "8-bit unsigned integers (or FP8 bit patterns), descriptor |u1"),
)

// String returns NumPy's name of the type ("float64"), or "DType(n)" for an
// invalid value.
func (d DType) String() string { return dtypeWords.String(d) }

// MarshalText returns d's word; a value with none is an error wrapping
// ErrDType.
func (d DType) MarshalText() ([]byte, error) { return dtypeWords.Marshal(d) }

// UnmarshalText sets d from its word; any other text is an error wrapping
// ErrDType that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (d *DType) UnmarshalText(b []byte) error { return dtypeWords.Unmarshal(d, b) }

// Meaning returns one line saying what d is.
func (d DType) Meaning() string { return dtypeWords.Meaning(d) }

// Values lists every DType, the zero value first.
func (DType) Values() []DType { return dtypeWords.Values() }

// Check returns nil if d is one of the DType constants, or an error
// wrapping ErrDType that lists the words.
func (d DType) Check() error { return dtypeWords.Check(d) }

// Size returns the size of one element in bytes, or 0 for an invalid value.
func (d DType) Size() int {
	if !d.valid() {
		return 0
	}
	return dtypeInfo[d].size
}

// goType is the Go slice type Array.Values holds for the type.
func (d DType) goType() string {
	switch d {
	case Float64:
		return "[]float64"
	case Float32:
		return "[]float32"
	case Int64:
		return "[]int64"
	case Int32:
		return "[]int32"
	case Float16, Uint16:
		return "[]uint16"
	case Uint8:
		return "[]uint8"
	}
	return "nothing"
}

// ByteOrder is the order of the bytes of one element in the file. The zero
// value, LittleEndian, is what NumPy writes on the usual little-endian
// machines.
//
// For one-byte types the order does not apply: the file says '|', Read
// reports LittleEndian and Write ignores the field.
type ByteOrder uint8

// The byte orders.
const (
	LittleEndian ByteOrder = iota // descr prefix '<'
	BigEndian                     // descr prefix '>'
)

var orderWords = vocab.New("npy", "byte order", "the order of the bytes of one element in a .npy file", ErrDType,
	vocab.W(LittleEndian, "little-endian", "least significant byte first, descriptor prefix <"),
	vocab.W(BigEndian, "big-endian", "most significant byte first, descriptor prefix >"),
)

// String returns "little-endian" or "big-endian".
func (o ByteOrder) String() string { return orderWords.String(o) }

// MarshalText returns o's word; a value with none is an error wrapping
// ErrDType.
func (o ByteOrder) MarshalText() ([]byte, error) { return orderWords.Marshal(o) }

// UnmarshalText sets o from its word; any other text is an error wrapping
// ErrDType that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (o *ByteOrder) UnmarshalText(b []byte) error { return orderWords.Unmarshal(o, b) }

// Meaning returns one line saying what o means.
func (o ByteOrder) Meaning() string { return orderWords.Meaning(o) }

// Values lists every ByteOrder, the zero value first.
func (ByteOrder) Values() []ByteOrder { return orderWords.Values() }

// Check returns nil if o is one of the ByteOrder constants, or an error
// wrapping ErrDType that lists the words.
func (o ByteOrder) Check() error { return orderWords.Check(o) }

// Version is a .npy format version. The zero value asks Write to choose (see
// Write); Read always reports the file's version.
//
// NumPy's format description defines three:
//
//	1.0  2-byte header length (header at most 65535 bytes), latin-1 header
//	2.0  4-byte header length, latin-1 header
//	3.0  4-byte header length, UTF-8 header
type Version struct {
	Major, Minor uint8
}

// The three versions NumPy's format description defines.
var (
	Version1 = Version{1, 0}
	Version2 = Version{2, 0}
	Version3 = Version{3, 0}
)

// String returns "1.0", "2.0" or "3.0".
func (v Version) String() string { return fmt.Sprintf("%d.%d", v.Major, v.Minor) }

func (v Version) known() bool {
	return v.Minor == 0 && v.Major >= 1 && v.Major <= 3
}

// Header is what a .npy header says about the array, in Go terms.
type Header struct {
	// Version is the format version of the file (Read), or the version to
	// write, zero meaning "choose" (Write).
	Version Version
	// DType is the element type.
	DType DType
	// ByteOrder is the byte order of the elements in the file.
	ByteOrder ByteOrder
	// FortranOrder says the file stores the data column-major (first index
	// fastest). It describes the file only: Array.Values is always
	// row-major, and Read and Write transpose.
	FortranOrder bool
	// Shape is the array's shape; an empty shape is a scalar (one element).
	Shape []int
}

// Bits says which number format the raw bit patterns of a Uint16 or Uint8
// array hold. NumPy has no bfloat16 or 8-bit floating-point type, so such
// tensors travel as '<u2' or '|u1' arrays of bit patterns, and the .npy
// header has no place to say which format they are: a header with a key
// other than 'descr', 'fortran_order' and 'shape' is refused by NumPy's own
// reader. The writer and the reader must therefore agree on it out of band
// (a file name such as q.bf16.npy, a side file, a test's configuration),
// and the caller of Read sets Array.Bits. Write ignores Bits.
//
// The zero value, Integer, reads the patterns as the unsigned integers they
// are.
type Bits uint8

// The bit-pattern interpretations.
const (
	// Integer: the unsigned integer value (any integer or float type; the
	// only choice for types other than Uint16 and Uint8).
	Integer Bits = iota
	// BFloat16: Uint16 patterns of bfloat16 (1 sign, 8 exponent, 7
	// fraction bits: the top half of an IEEE 754 binary32).
	BFloat16
	// E4M3: Uint8 patterns of OCP 8-bit floating point E4M3 (OCP 8-bit
	// Floating Point Specification (OFP8), 2023): bias 7, no infinities,
	// S.1111.111 is NaN, largest finite 448.
	E4M3
	// E5M2: Uint8 patterns of OCP 8-bit floating point E5M2 (same
	// specification): bias 15, S.11111.00 is ±Inf, S.11111.{01,10,11}
	// NaN, largest finite 57344.
	E5M2
)

var bitsWords = vocab.New("npy", "bit-pattern reading", "which number format the bit patterns of a uint16 or uint8 array hold", ErrDType,
	vocab.W(Integer, "integer", "the unsigned integers the patterns are"),
	vocab.W(BFloat16, "bfloat16", "uint16 patterns of bfloat16"),
	vocab.W(E4M3, "e4m3", "uint8 patterns of OCP 8-bit E4M3"),
	vocab.W(E5M2, "e5m2", "uint8 patterns of OCP 8-bit E5M2"),
)

// String returns "integer", "bfloat16", "e4m3" or "e5m2".
func (b Bits) String() string { return bitsWords.String(b) }

// MarshalText returns b's word; a value with none is an error wrapping
// ErrDType.
func (b Bits) MarshalText() ([]byte, error) { return bitsWords.Marshal(b) }

// UnmarshalText sets b from its word; any other text is an error wrapping
// ErrDType that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (b *Bits) UnmarshalText(t []byte) error { return bitsWords.Unmarshal(b, t) }

// Meaning returns one line saying what b means.
func (b Bits) Meaning() string { return bitsWords.Meaning(b) }

// Values lists every Bits, the zero value first.
func (Bits) Values() []Bits { return bitsWords.Values() }

// Check returns nil if b is one of the Bits constants, or an error wrapping
// ErrDType that lists the words.
func (b Bits) Check() error { return bitsWords.Check(b) }

// fits reports whether the interpretation applies to the element type.
func (b Bits) fits(d DType) bool {
	switch b {
	case Integer:
		return true
	case BFloat16:
		return d == Uint16
	case E4M3, E5M2:
		return d == Uint8
	}
	return false
}

// Array is one array: its header and its elements.
//
// Values holds the elements in row-major (C) order whatever the file's
// order, as the Go slice type DType calls for:
//
//	Float64 []float64    Int64  []int64    Uint16 []uint16
//	Float32 []float32    Int32  []int32    Uint8  []uint8
//	Float16 []uint16 (IEEE 754 binary16 bit patterns; Go has no float16)
//
// The raw values are kept as stored; Float64s converts them.
type Array struct {
	Header
	// Bits says how to read Uint16 or Uint8 bit patterns as numbers. The
	// file does not record it; see Bits.
	Bits Bits
	// Values holds the elements, row-major; see Array.
	Values any
}

// New returns an Array of the given type, shape and row-major values, after
// checking that values has the slice type dt calls for and one element per
// position of shape, and that shape holds at most MaxElements (ErrShape).
// The slices are used, not copied. The byte order is little-endian, the
// file order C, and the version chosen by Write.
func New(dt DType, shape []int, values any) (*Array, error) {
	a := &Array{Header: Header{DType: dt, Shape: shape}, Values: values}
	if err := a.check(arrayArgs{fn: "New", dtype: "dt", shape: "shape", values: "values", bits: "Array.Bits"}); err != nil {
		return nil, err
	}
	return a, nil
}

// Len returns the number of elements the shape holds: the product of its
// dimensions, 1 for a scalar. It returns -1 if a dimension is negative or
// the product overflows an int, and for a nil h. It is a count, not a
// check of MaxElements.
func (h *Header) Len() int {
	if h == nil {
		return -1
	}
	n, err := count("Header.Len", "Header.Shape", h.Shape)
	if err != nil {
		return -1
	}
	return n
}

// count is the element count of a shape, checked for a call of fn, which
// calls the shape name.
func count(fn, name string, shape []int) (int, error) {
	empty := false
	for i, d := range shape {
		if d < 0 {
			return 0, fmt.Errorf("%w: %s: %s[%d] = %d; want ≥ 0", ErrShape, fn, name, i, d)
		}
		empty = empty || d == 0
	}
	if empty {
		return 0, nil // whatever the other dimensions: (2⁴⁰, 2⁴⁰, 0) holds nothing
	}
	n := 1
	for i, d := range shape {
		if n > math.MaxInt/d {
			return 0, fmt.Errorf("%w: %s: %s = %v; want at most %d elements (the count overflows at dimension %d)", ErrShape, fn, name, shape, math.MaxInt, i)
		}
		n *= d
	}
	return n, nil
}

// holdable checks, for a call of fn, that n, the element count of shape
// (called name), is at most MaxElements.
func holdable(fn, name string, shape []int, n int) error {
	if n > MaxElements {
		return fmt.Errorf("%w: %s: %s = %v, %d elements; want at most MaxElements = %d", ErrShape, fn, name, shape, n, MaxElements)
	}
	return nil
}

// valuesLen returns the length of Values if it has the type DType needs.
func (a *Array) valuesLen() (int, bool) {
	switch v := a.Values.(type) {
	case []float64:
		return len(v), a.DType == Float64
	case []float32:
		return len(v), a.DType == Float32
	case []int64:
		return len(v), a.DType == Int64
	case []int32:
		return len(v), a.DType == Int32
	case []uint16:
		return len(v), a.DType == Uint16 || a.DType == Float16
	case []uint8:
		return len(v), a.DType == Uint8
	}
	return 0, false
}

// arrayArgs names, in messages, the function called and how it took an
// Array's type, shape, values and bit reading: New's arguments, or the
// fields of an Array.
type arrayArgs struct{ fn, dtype, shape, values, bits string }

// fields names an Array's parts as its fields, for a call of fn.
func fields(fn string) arrayArgs {
	return arrayArgs{fn: fn, dtype: "Array.DType", shape: "Array.Shape", values: "Array.Values", bits: "Array.Bits"}
}

// check validates the array: known type, valid shape, values of the right
// type and length, an interpretation that fits.
func (a *Array) check(args arrayArgs) error {
	fn := args.fn
	if err := dtypeWords.CheckAt(fn+": "+args.dtype, a.DType); err != nil {
		return err
	}
	n, err := count(fn, args.shape, a.Shape)
	if err != nil {
		return err
	}
	if err := holdable(fn, args.shape, a.Shape, n); err != nil {
		return err
	}
	got, ok := a.valuesLen()
	if !ok {
		return fmt.Errorf("%w: %s: %s is a %T; want a %s for DType %v", ErrValues, fn, args.values, a.Values, a.DType.goType(), a.DType)
	}
	if got != n {
		return fmt.Errorf("%w: %s: %s has %d elements; want %d for shape %v", ErrValues, fn, args.values, got, n, a.Shape)
	}
	if !a.Bits.fits(a.DType) {
		return fmt.Errorf("%w: %s: %s = %v; want integer for DType %v (bfloat16 reads uint16, e4m3 and e5m2 uint8)", ErrBits, fn, args.bits, a.Bits, a.DType)
	}
	return nil
}

// Float64s returns the elements as float64 values, row-major, in a new
// slice. Every conversion is exact:
//
//	Float64, Float32       the value
//	Float16                binary16 decoded (IEEE 754-2019 §3.4)
//	Int32, Uint16, Uint8   the integer (Bits = Integer)
//	Int64                  the integer, or ErrInexact if |v| > 2⁵³ and v
//	                       is not a float64 (the error names the index)
//	Uint16, Bits=BFloat16  the bfloat16 value
//	Uint8, Bits=E4M3/E5M2  the OCP 8-bit floating-point value
//
// Special cases are:
//
//	NaN patterns        NaN of the same sign (the payload is not kept)
//	infinity patterns   ±Inf (E4M3 has none)
//	−0                  −0
//	invalid Array       ErrDType, ErrShape, ErrValues or ErrBits
//	more than MaxElements  ErrShape
//	a nil a             ErrValues
func (a *Array) Float64s() ([]float64, error) {
	const fn = "Array.Float64s"
	if a == nil {
		return nil, fmt.Errorf("%w: %s: receiver = nil; want an Array", ErrValues, fn)
	}
	if err := a.check(fields(fn)); err != nil {
		return nil, err
	}
	switch v := a.Values.(type) {
	case []float64:
		return append([]float64(nil), v...), nil
	case []float32:
		return convert(v, func(x float32) float64 { return float64(x) }), nil
	case []int32:
		return convert(v, func(x int32) float64 { return float64(x) }), nil
	case []int64:
		out := make([]float64, len(v))
		for i, x := range v {
			f := float64(x)
			if f >= 0x1p63 || int64(f) != x {
				return nil, fmt.Errorf("%w: %s: Array.Values[%d] = %d; want an integer float64 holds exactly (the nearest is %v)", ErrInexact, fn, i, x, f)
			}
			out[i] = f
		}
		return out, nil
	case []uint16:
		switch {
		case a.DType == Float16:
			return decodeAll(v, compare.Binary16), nil
		case a.Bits == BFloat16:
			return decodeAll(v, compare.BFloat16), nil
		}
		return convert(v, func(x uint16) float64 { return float64(x) }), nil
	case []uint8:
		switch a.Bits {
		case E4M3:
			return decodeAll(v, compare.E4M3), nil
		case E5M2:
			return decodeAll(v, compare.E5M2), nil
		}
		return convert(v, func(x uint8) float64 { return float64(x) }), nil
	}
	return nil, fmt.Errorf("%w: %s: Array.Values is a %T; want one of the Values slice types", ErrValues, fn, a.Values) // not reached: check accepted it
}

func convert[T any](v []T, f func(T) float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = f(x)
	}
	return out
}

// decodeAll decodes bit patterns of format f with compare's decoder, the
// one definition of every format in plumb. A pattern of the format's width
// always decodes, so the error is impossible here.
func decodeAll[T uint8 | uint16](v []T, f compare.Format) []float64 {
	out := make([]float64, len(v))
	for i, b := range v {
		out[i], _ = f.Decode(uint64(b))
	}
	return out
}
