// Package npy reads and writes NumPy .npy files, the format in which
// tensors cross between plumb and a port under test in another language.
//
// Format: NumPy's format description (the numpy.lib.format module
// documentation, "NPY format", versions 1.0, 2.0 and 3.0; first proposed in
// NumPy Enhancement Proposal 1, 2007). A file is
//
//	"\x93NUMPY"   6 bytes, the magic string
//	major, minor  2 bytes, the format version: 1.0, 2.0 or 3.0
//	HEADER_LEN    little-endian unsigned, 2 bytes (1.0) or 4 bytes (2.0, 3.0)
//	header        HEADER_LEN bytes: a Python dictionary literal, latin-1
//	              (1.0, 2.0) or UTF-8 (3.0), with the keys 'descr' (the
//	              element type, e.g. '<f8'), 'fortran_order' (True, False)
//	              and 'shape' (a tuple of integers, () for a scalar),
//	              padded with spaces and ended by a newline so that the
//	              data start at a multiple of 64 bytes (16 in older files)
//	data          ∏shape × itemsize bytes, row-major or column-major
//
// Supported element types, by their descriptors: '<f8' / '>f8' float64,
// '<f4' / '>f4' float32, '<f2' / '>f2' float16 (IEEE 754 binary16), '<i8' /
// '>i8' int64, '<i4' / '>i4' int32, '<i2' / '>i2' int16, '|i1' int8,
// '<u4' / '>u4' uint32, '<u2' / '>u2' uint16, '|u1' uint8, '|b1' bool
// (masks, token ids, quantised tensors). Anything else (complex, uint64,
// other widths, strings, objects, structured types) is refused with
// ErrDType and the descriptor's text. A type's name is read in NumPy's
// spelling ("float16") or a common one of the floating-point types (fp64,
// double, fp32, single, fp16, half, binary16).
//
// Archives: an .npz file, NumPy's zip archive of .npy members
// (numpy.savez stores them, numpy.savez_compressed deflates them), is read
// with OpenArchive or NewArchive, member by member (Archive.Read, by the
// name numpy.savez gave: the member's name without ".npy"), and written with
// ArchiveWriter. A zip archive given to Read or ReadFile is refused with a
// message that says it is one.
//
// Raw binary: ReadRaw and ReadRawFile read the elements alone, row-major and
// little-endian, as a C or GPU harness dumps a buffer; the caller gives the
// type and shape, and data of any other length are refused with both sizes
// stated.
//
// Conventions, and their alternatives:
//
//   - Array.Values is always row-major (C order). A Fortran-order file is
//     transposed on read, and Header.FortranOrder reports it; setting
//     FortranOrder makes Write store the data column-major. The alternative,
//     handing the caller the column-major data, was refused: every other
//     plumb tensor is row-major, and a flag a caller forgets is a silently
//     transposed tensor.
//   - The byte order is converted on read and reported in Header.ByteOrder;
//     Write uses it (little-endian by default). A multi-byte descriptor with
//     '=' (native) or no byte-order mark is refused: the file cannot say
//     whose native order it meant. NumPy itself never writes one.
//   - Raw values are kept: float16 stays as its binary16 bit patterns
//     ([]uint16), integers as integers. Array.Float64s converts every type
//     to float64 exactly, or fails (an int64 beyond 2⁵³ that float64 cannot
//     hold).
//   - bfloat16 and OCP 8-bit floating point (E4M3, E5M2) have no NumPy
//     type: they travel as uint16 and uint8 bit patterns, and the header has
//     no room to say so (NumPy's reader refuses any extra key). The caller
//     says it: set Array.Bits after Read, agreed out of band (a file name
//     like k.bf16.npy, the test's configuration). Write does not record it.
//   - Write picks version 1.0 when the header fits its 2-byte length and
//     2.0 otherwise, as NumPy does, unless Header.Version names one. Its
//     bytes are the ones NumPy's own writer produces for the same array,
//     including the spare room NumPy leaves after the dictionary.
//   - Read accepts any padding of spaces, tabs and newlines after the
//     dictionary, and does not check the alignment.
//
// Special cases are:
//
//	shape ()                       a scalar: one element
//	a zero dimension               no data; Values is an empty slice
//	header length > MaxHeaderLen   ErrFormat, before the header is read
//	more than MaxElements elements ErrShape, before the data are read
//	data shorter than promised     ErrData; allocation stays bounded by the
//	                               bytes actually present
//	trailing bytes                 left in the reader by Read; ErrData from
//	                               ReadFile
//
// Every error about the array or the file's content wraps exactly one of
// the sentinel errors (ErrFormat, ErrDType, ErrShape, ErrData, ErrValues,
// ErrBits, ErrInexact, ErrArchive, ErrMember) and names the function called (for ReadFile and
// WriteFile with the path), what it found and what it wanted ("npy:
// malformed file: Read: format version = 4.0; want 1.0, 2.0 or 3.0");
// errors of the file system or of the io.Writer are wrapped as they come.
// No function panics on its input, whatever the bytes, nor on a nil
// reader, writer, array or receiver.
//
// Typical use: a port under test dumps its output with numpy.save (or any
// writer of the format), the test reads it with ReadFile, converts it with
// Float64s and compares it with the reference; reference inputs and outputs
// go the other way with WriteFile. Values destined for a low-precision type
// (float16, bfloat16, FP8) must be rounded to its bit patterns first; this
// package moves bit patterns and decodes them, it does not round: use
// compare.Format.Encode (one correct rounding from float64) to make them.
//
// Accuracy: reading and writing are exact (bit patterns are moved, never
// rounded), and so is every conversion Float64s makes. An outside check
// (numpy_test.go) has NumPy write every supported type in both byte
// orders, both orders and all three versions, reads them here and writes
// them back byte for byte; it has NumPy load every file this package writes
// and compare the bit patterns; it does the same for .npz archives in both
// directions (numpy.savez and numpy.savez_compressed against ArchiveWriter,
// stored and deflated); and it compares the float16 decoding (which
// is compare.Binary16's) with NumPy's own float16 conversion on all 65536 patterns. It runs when /usr/bin/python3
// can import numpy and says it skipped otherwise, except in CI (CI=true),
// where NumPy is installed and its absence is a failure.
package npy
