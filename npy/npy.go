package npy

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
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
	Bool:    {'b', 1},
	Int8:    {'i', 1},
	Int16:   {'i', 2},
	Uint32:  {'u', 4},
}

func (d DType) valid() bool { return d.Check() == nil }

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
	case Bool:
		return "[]bool"
	case Int8:
		return "[]int8"
	case Int16:
		return "[]int16"
	case Uint32:
		return "[]uint32"
	}
	return "nothing"
}

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
//	Float64 []float64    Int64  []int64    Uint32 []uint32    Bool []bool
//	Float32 []float32    Int32  []int32    Uint16 []uint16
//	                     Int16  []int16    Uint8  []uint8
//	                     Int8   []int8
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
	case []bool:
		return len(v), a.DType == Bool
	case []int8:
		return len(v), a.DType == Int8
	case []int16:
		return len(v), a.DType == Int16
	case []uint32:
		return len(v), a.DType == Uint32
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
//	Int32, Int16, Int8     the integer
//	Uint32, Uint16, Uint8  the integer (Bits = Integer)
//	Bool                   0 (false) or 1 (true)
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
	case []int16:
		return convert(v, func(x int16) float64 { return float64(x) }), nil
	case []int8:
		return convert(v, func(x int8) float64 { return float64(x) }), nil
	case []uint32:
		return convert(v, func(x uint32) float64 { return float64(x) }), nil
	case []bool:
		return convert(v, func(x bool) float64 {
			if x {
				return 1
			}
			return 0
		}), nil
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
