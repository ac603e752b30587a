package npy

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

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
	// ErrArchive: the bytes are not an .npz (zip) archive this package can
	// read: not a zip archive, a damaged directory or checksum, or a
	// member compressed with a method other than stored and deflate.
	ErrArchive = errors.New("npy: malformed archive")
	// ErrMember: an archive has no member of the name asked for, or a
	// member name to write is empty, malformed or repeated.
	ErrMember = errors.New("npy: no such member")
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
// float16 (IEEE 754 binary16), '<i8' int64, '<i4' int32, '<i2' int16,
// '|i1' int8, '<u4' uint32, '<u2' uint16, '|u1' uint8, '|b1' bool. Every
// other descriptor, including complex, uint64, extended precision,
// strings, datetimes, objects and structured types, is refused with
// ErrDType.
//
// UnmarshalText (and so every place plumb reads a type's name) also takes
// the common names of the floating-point types: fp64 and double for
// float64, fp32 and single for float32, fp16, half and binary16 for
// float16.
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
	Bool   // '|b1': one byte each, 0 false and 1 true (any other byte reads as true)
	Int8   // '|i1'
	Int16  // '<i2'
	Uint32 // '<u4'
)

var dtypeWords = vocab.New("npy", "element type", "the element type of a .npy array", ErrDType,
	vocab.W(Float64, "float64", "IEEE 754 binary64, descriptor <f8"),
	vocab.W(Float32, "float32", "IEEE 754 binary32, descriptor <f4"),
	vocab.W(Float16, "float16", "IEEE 754 binary16, descriptor <f2"),
	vocab.W(Int64, "int64", "64-bit signed integers, descriptor <i8"),
	vocab.W(Int32, "int32", "32-bit signed integers, descriptor <i4"),
	vocab.W(Int16, "int16", "16-bit signed integers, descriptor <i2"),
	vocab.W(Int8, "int8", "8-bit signed integers, descriptor |i1"),
	vocab.W(Uint32, "uint32", "32-bit unsigned integers, descriptor <u4"),
	vocab.W(Uint16, "uint16", "16-bit unsigned integers (or bfloat16 bit patterns), descriptor <u2"),
	vocab.W(Uint8, "uint8", "8-bit unsigned integers (or FP8 bit patterns), descriptor |u1"),
	vocab.W(Bool, "bool", "booleans, one byte each (0 false, 1 true), descriptor |b1"),
).Aliases(map[string]DType{
	"fp64": Float64, "double": Float64,
	"fp32": Float32, "single": Float32,
	"fp16": Float16, "half": Float16, "binary16": Float16,
})

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
