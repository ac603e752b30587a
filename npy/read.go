package npy

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"unicode/utf8"
)

// MaxHeaderLen is the longest header, in bytes, that Read accepts and Write
// produces: 1 MiB, room for a shape of tens of thousands of dimensions.
// Longer headers are refused with ErrFormat before they are read, so a
// header length that lies cannot make Read allocate. (NumPy's own reader
// refuses headers over 10000 characters unless told to trust the file.)
const MaxHeaderLen = 1 << 20

// magic is the six bytes every .npy file starts with.
const magic = "\x93NUMPY"

// chunk is the most Read allocates ahead of the bytes it has received when
// the reader cannot say how many bytes remain.
const chunk = 1 << 16

// ReadHeader reads the magic string, version and header of a .npy file from
// r and leaves r at the first byte of the data.
//
// It accepts versions 1.0, 2.0 and 3.0, a latin-1 (1.0, 2.0) or UTF-8 (3.0)
// header that is a Python dictionary literal with exactly the keys 'descr',
// 'fortran_order' and 'shape' in any order, followed by any spaces, tabs
// and newlines. Integers may carry the 'L' suffix that Python 2 writers of
// versions 1.0 and 2.0 left. It does not insist on NumPy's 64-byte (or older 16-byte)
// alignment of the data or on the final newline, neither of which affects
// the meaning. See DType for the accepted descriptors; a descriptor that
// does not say the byte order of a multi-byte type ('=f8', '|f8', 'f8') is
// refused, because the file cannot say which machine's native order it
// meant.
//
// Special cases are:
//
//	fewer bytes than the header needs  ErrFormat
//	header length > MaxHeaderLen       ErrFormat, before reading it
//	unsupported descr                  ErrDType, naming the descriptor
//	negative or overflowing shape      ErrShape
//	more than MaxElements elements     ErrShape
//	a nil r                            ErrFormat (there is no file to read)
func ReadHeader(r io.Reader) (Header, error) { return readHeader("ReadHeader", r) }

// readHeader is ReadHeader for a call of fn.
func readHeader(fn string, r io.Reader) (Header, error) {
	if r == nil {
		return Header{}, fmt.Errorf("%w: %s: r = nil; want an io.Reader holding a .npy file", ErrFormat, fn)
	}
	var pre [10]byte
	if n, err := io.ReadFull(r, pre[:8]); err != nil {
		return Header{}, fmt.Errorf("%w: %s: the file has %d bytes (%v); want at least 10 (magic string, version, header length)", ErrFormat, fn, n, err)
	}
	if string(pre[:6]) != magic {
		if isZip(pre[:4]) {
			return Header{}, fmt.Errorf("%w: %s: the file is a zip archive, as an .npz file is (it starts with %q); want a .npy file: the members of an .npz archive are .npy files, read them with OpenArchive", ErrFormat, fn, pre[:4])
		}
		return Header{}, fmt.Errorf("%w: %s: the file starts with %q; want the magic string %q", ErrFormat, fn, pre[:6], magic)
	}
	v := Version{pre[6], pre[7]}
	if !v.known() {
		return Header{}, fmt.Errorf("%w: %s: format version = %v; want 1.0, 2.0 or 3.0", ErrFormat, fn, v)
	}
	lenSize := 4
	if v == Version1 {
		lenSize = 2
	}
	if _, err := io.ReadFull(r, pre[:lenSize]); err != nil {
		return Header{}, fmt.Errorf("%w: %s: the file ends inside the %d-byte header length (%v); want all of it", ErrFormat, fn, lenSize, err)
	}
	var hlen uint64
	if lenSize == 2 {
		hlen = uint64(binary.LittleEndian.Uint16(pre[:2]))
	} else {
		hlen = uint64(binary.LittleEndian.Uint32(pre[:4]))
	}
	if hlen > MaxHeaderLen {
		return Header{}, fmt.Errorf("%w: %s: header length = %d; want at most MaxHeaderLen = %d", ErrFormat, fn, hlen, MaxHeaderLen)
	}
	raw, err := readN(r, int(hlen))
	if err != nil {
		return Header{}, fmt.Errorf("%w: %s: the header of %d bytes ends early (%v); want all of it", ErrFormat, fn, hlen, err)
	}
	var text string
	if v == Version3 {
		if !utf8.Valid(raw) {
			return Header{}, fmt.Errorf("%w: %s: a version 3.0 header that is not UTF-8; want valid UTF-8", ErrFormat, fn)
		}
		text = string(raw)
	} else {
		text = latin1(raw)
	}
	h, err := parseHeader(fn, text)
	if err != nil {
		return Header{}, err
	}
	h.Version = v
	return h, nil
}

// latin1 decodes ISO 8859-1: each byte is the code point of the same value.
func latin1(b []byte) string {
	r := make([]rune, len(b))
	for i, c := range b {
		r[i] = rune(c)
	}
	return string(r)
}

// Read reads one array from r: the header (see ReadHeader) and exactly the
// data it promises, leaving r just after it (several arrays may follow one
// another in a stream). Values is row-major: Fortran-order data are
// transposed and Header.FortranOrder reports the file's order; big-endian
// data are converted and Header.ByteOrder reports the file's order. Bits is
// Integer; set it for bfloat16 or FP8 data before calling Float64s.
//
// Allocation is bounded by the input: the data are read in pieces and the
// buffer grows only as bytes arrive, or is checked at once against the
// remaining length when r reports it (a Len method, as *bytes.Reader,
// *strings.Reader and *bytes.Buffer have, or a regular *os.File). A header
// that claims more than MaxElements elements fails with ErrShape before
// any data are read, and one that claims fewer but more than the input
// holds costs nothing before it fails with ErrData.
//
// Special cases are:
//
//	shape with a zero dimension   no data, Values empty
//	shape ()                      one element
//	data shorter than promised    ErrData, saying how many bytes came
//	more than MaxElements         ErrShape
//	errors of ReadHeader          as there
func Read(r io.Reader) (*Array, error) { return read("Read", r) }

// read is Read for a call of fn.
func read(fn string, r io.Reader) (*Array, error) {
	h, err := readHeader(fn, r)
	if err != nil {
		return nil, err
	}
	n, _ := count(fn, "'shape'", h.Shape) // checked by readHeader; n ≤ MaxElements, but n·size can exceed a 32-bit int
	size := h.DType.Size()
	if n > math.MaxInt/size {
		return nil, fmt.Errorf("%w: %s: 'shape' = %v of %v, more than %d bytes; want a size that fits an int", ErrShape, fn, h.Shape, h.DType, math.MaxInt)
	}
	data, err := readN(r, n*size)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: the data ends early (%v); want the %d bytes that shape %v of %v needs", ErrData, fn, err, n*size, h.Shape, h.DType)
	}
	a := &Array{Header: h, Values: decode(data, h.DType, h.ByteOrder)}
	if h.FortranOrder {
		a.Values = reorder(a.Values, h.Shape, fromFortran)
	}
	return a, nil
}

// ReadFile reads the .npy file at path with Read and also refuses bytes
// after the data (ErrData): in a file they mean the header is wrong.
func ReadFile(path string) (*Array, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	fn := "ReadFile: " + path
	a, err := read(fn, f)
	if err != nil {
		return nil, err
	}
	var one [1]byte
	if k, _ := f.Read(one[:]); k != 0 {
		return nil, fmt.Errorf("%w: %s: bytes follow the %d bytes of data that shape %v of %v needs; want the file to end there",
			ErrData, fn, a.Len()*a.DType.Size(), a.Shape, a.DType)
	}
	return a, nil
}

// remaining returns how many bytes r still holds, if it can tell.
func remaining(r io.Reader) (int64, bool) {
	switch r := r.(type) {
	case interface{ Len() int }: // bytes.Reader, strings.Reader, bytes.Buffer
		return int64(r.Len()), true
	case *os.File:
		fi, err := r.Stat()
		if err != nil || !fi.Mode().IsRegular() {
			return 0, false
		}
		pos, err := r.Seek(0, io.SeekCurrent)
		if err != nil {
			return 0, false
		}
		return fi.Size() - pos, true
	}
	return 0, false
}

// errShort reports a short read.
var errShort = errors.New("input ended early")

// readN reads exactly n bytes. It allocates n bytes at once only when r says
// that many remain (a Len method, or a regular *os.File), or n ≤ chunk;
// otherwise the buffer doubles as the bytes arrive, so that the buffers of a
// lying length sum to less than four times the bytes received plus chunk.
func readN(r io.Reader, n int) ([]byte, error) {
	rem, known := remaining(r)
	if known && rem < int64(n) {
		return nil, fmt.Errorf("%w: %d bytes remain", errShort, rem)
	}
	if known || n <= chunk {
		buf := make([]byte, n)
		if k, err := io.ReadFull(r, buf); err != nil {
			return nil, fmt.Errorf("%w: got %d bytes (%v)", errShort, k, err)
		}
		return buf, nil
	}
	buf := make([]byte, 0, chunk)
	for len(buf) < n {
		if len(buf) == cap(buf) {
			grown := make([]byte, len(buf), min(n, 2*cap(buf)))
			copy(grown, buf)
			buf = grown
		}
		k, err := io.ReadFull(r, buf[len(buf):cap(buf)])
		buf = buf[:len(buf)+k]
		if err != nil {
			return nil, fmt.Errorf("%w: got %d bytes (%v)", errShort, len(buf), err)
		}
	}
	return buf, nil
}

// decode converts the file's bytes into the Values slice of the type.
func decode(b []byte, dt DType, o ByteOrder) any {
	var bo binary.ByteOrder = binary.LittleEndian
	if o == BigEndian {
		bo = binary.BigEndian
	}
	switch dt {
	case Float64:
		return decodeEach(b, 8, func(p []byte) float64 { return math.Float64frombits(bo.Uint64(p)) })
	case Float32:
		return decodeEach(b, 4, func(p []byte) float32 { return math.Float32frombits(bo.Uint32(p)) })
	case Int64:
		return decodeEach(b, 8, func(p []byte) int64 { return int64(bo.Uint64(p)) })
	case Int32:
		return decodeEach(b, 4, func(p []byte) int32 { return int32(bo.Uint32(p)) })
	case Int16:
		return decodeEach(b, 2, func(p []byte) int16 { return int16(bo.Uint16(p)) })
	case Uint32:
		return decodeEach(b, 4, bo.Uint32)
	case Float16, Uint16:
		return decodeEach(b, 2, bo.Uint16)
	case Int8:
		return decodeEach(b, 1, func(p []byte) int8 { return int8(p[0]) })
	case Bool:
		return decodeEach(b, 1, func(p []byte) bool { return p[0] != 0 })
	}
	return b // Uint8: the bytes are the values
}

func decodeEach[T any](b []byte, size int, f func([]byte) T) []T {
	out := make([]T, len(b)/size)
	for i := range out {
		out[i] = f(b[i*size : i*size+size])
	}
	return out
}

// The two directions of reorder.
const (
	fromFortran = iota // column-major source, row-major result
	toFortran          // row-major source, column-major result
)

// reorder returns the values of v (one of the Values slice types) moved
// between row-major and column-major order of shape, in a new slice.
func reorder(v any, shape []int, dir int) any {
	switch v := v.(type) {
	case []float64:
		return permute(v, shape, dir)
	case []float32:
		return permute(v, shape, dir)
	case []int64:
		return permute(v, shape, dir)
	case []int32:
		return permute(v, shape, dir)
	case []uint16:
		return permute(v, shape, dir)
	case []uint8:
		return permute(v, shape, dir)
	case []bool:
		return permute(v, shape, dir)
	case []int8:
		return permute(v, shape, dir)
	case []int16:
		return permute(v, shape, dir)
	case []uint32:
		return permute(v, shape, dir)
	}
	return v
}

// permute walks the column-major order of shape (first index fastest) while
// tracking the row-major offset of the same multi-index, and copies each
// element between the two positions.
func permute[T any](v []T, shape []int, dir int) []T {
	out := make([]T, len(v))
	if len(shape) < 2 || len(v) == 0 {
		copy(out, v)
		return out
	}
	stride := make([]int, len(shape))
	s := 1
	for i := len(shape) - 1; i >= 0; i-- {
		stride[i] = s
		s *= shape[i]
	}
	idx := make([]int, len(shape))
	off := 0
	for k := range v {
		if dir == fromFortran {
			out[off] = v[k]
		} else {
			out[k] = v[off]
		}
		for d := range idx {
			idx[d]++
			off += stride[d]
			if idx[d] < shape[d] {
				break
			}
			off -= stride[d] * shape[d]
			idx[d] = 0
		}
	}
	return out
}
