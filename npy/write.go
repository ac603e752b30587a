package npy

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
)

// Write writes a as one .npy file to w: magic string, version, header
// length, header, data. The bytes are those NumPy's own writer produces for
// the same array (a test compares them): the dictionary with sorted keys,
// the room NumPy leaves for a growing dimension, spaces and a newline so
// that the data start at a multiple of 64 bytes.
//
// The header is taken from a:
//
//   - Version zero: 1.0 when the header fits its 2-byte length, otherwise
//     2.0 (what NumPy does; 3.0 is never needed, the header being ASCII).
//     Version1, Version2 or Version3: that version, or ErrFormat if the
//     header does not fit it.
//   - ByteOrder: the byte order of the data ('|' for one-byte types).
//   - FortranOrder: the data are written column-major (Values, row-major,
//     is transposed); otherwise row-major.
//
// Bits is not written: the format has no place for it (see Bits).
//
// NumPy's reader refuses, unless told to trust the file, headers over 10000
// characters: shapes of more than about 3000 dimensions.
//
// Special cases are:
//
//	invalid DType or ByteOrder        ErrDType
//	Values of the wrong type/length   ErrValues
//	Bits that do not fit DType        ErrBits
//	negative or overflowing shape     ErrShape
//	more than MaxElements elements    ErrShape
//	header longer than MaxHeaderLen   ErrShape (too many dimensions)
//	unknown Version                   ErrFormat
//	a nil a                           ErrValues
//	a nil w                           ErrFormat (there is no file to write)
//	w fails                           its error, wrapped
func Write(w io.Writer, a *Array) error {
	if w == nil {
		return fmt.Errorf("%w: Write: w = nil; want an io.Writer to write the .npy file to", ErrFormat)
	}
	return write("Write", w, a)
}

// write is Write for a call of fn.
func write(fn string, w io.Writer, a *Array) error {
	if a == nil {
		return fmt.Errorf("%w: %s: a = nil; want an Array", ErrValues, fn)
	}
	if err := a.check(fields(fn)); err != nil {
		return err
	}
	if err := orderWords.CheckAt(fn+": Array.ByteOrder", a.ByteOrder); err != nil {
		return err
	}
	head, err := header(fn, &a.Header)
	if err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.WriteString(head)
	v := a.Values
	if a.FortranOrder {
		v = reorder(v, a.Shape, toFortran)
	}
	encode(bw, v, a.ByteOrder)
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("npy: %s: writing a %v array of shape %v: %w", fn, a.DType, a.Shape, err)
	}
	return nil
}

// header returns magic string, version, length and padded header, for a
// call of fn.
func header(fn string, h *Header) (string, error) {
	dict := formatDict(h)
	v := h.Version
	switch {
	case v == Version{}:
		v = Version1
		if padded(dict, 2) > math.MaxUint16 {
			v = Version2
		}
	case !v.known():
		return "", fmt.Errorf("%w: %s: Array.Version = %v; want 1.0, 2.0, 3.0 or zero (choose)", ErrFormat, fn, v)
	}
	lenSize := 4
	if v == Version1 {
		lenSize = 2
	}
	hlen := padded(dict, lenSize)
	if hlen > MaxHeaderLen {
		return "", fmt.Errorf("%w: %s: Array.Shape has %d dimensions, a header of %d bytes; want at most MaxHeaderLen = %d bytes", ErrShape, fn, len(h.Shape), hlen, MaxHeaderLen)
	}
	if lenSize == 2 && hlen > math.MaxUint16 {
		return "", fmt.Errorf("%w: %s: Array.Version = 1.0 with a header of %d bytes, which does not fit version 1.0; want at most %d bytes, or Version2, or zero (choose)",
			ErrFormat, fn, hlen, math.MaxUint16)
	}
	var b strings.Builder
	b.WriteString(magic)
	b.WriteByte(v.Major)
	b.WriteByte(v.Minor)
	var n [4]byte
	binary.LittleEndian.PutUint32(n[:], uint32(hlen))
	b.Write(n[:lenSize])
	b.WriteString(dict)
	b.WriteString(strings.Repeat(" ", hlen-len(dict)-1))
	b.WriteByte('\n')
	return b.String(), nil
}

// padded returns the header length for the dictionary: NumPy pads it with 1
// to 64 spaces (64 when it is already aligned) and a newline, so that magic
// string, version, length field and header end at a multiple of 64.
func padded(dict string, lenSize int) int {
	n := len(dict) + 1
	return n + 64 - (len(magic)+2+lenSize+n)%64
}

// encode writes the values in the byte order; errors stay in bw for Flush.
func encode(bw *bufio.Writer, v any, o ByteOrder) {
	var bo binary.AppendByteOrder = binary.LittleEndian
	if o == BigEndian {
		bo = binary.BigEndian
	}
	switch v := v.(type) {
	case []float64:
		encodeEach(bw, v, func(b []byte, x float64) []byte { return bo.AppendUint64(b, math.Float64bits(x)) })
	case []float32:
		encodeEach(bw, v, func(b []byte, x float32) []byte { return bo.AppendUint32(b, math.Float32bits(x)) })
	case []int64:
		encodeEach(bw, v, func(b []byte, x int64) []byte { return bo.AppendUint64(b, uint64(x)) })
	case []int32:
		encodeEach(bw, v, func(b []byte, x int32) []byte { return bo.AppendUint32(b, uint32(x)) })
	case []uint16:
		encodeEach(bw, v, bo.AppendUint16)
	case []int16:
		encodeEach(bw, v, func(b []byte, x int16) []byte { return bo.AppendUint16(b, uint16(x)) })
	case []uint32:
		encodeEach(bw, v, bo.AppendUint32)
	case []uint8:
		bw.Write(v)
	case []int8:
		encodeEach(bw, v, func(b []byte, x int8) []byte { return append(b, byte(x)) })
	case []bool:
		encodeEach(bw, v, func(b []byte, x bool) []byte {
			if x {
				return append(b, 1)
			}
			return append(b, 0)
		})
	}
}

func encodeEach[T any](bw *bufio.Writer, v []T, put func([]byte, T) []byte) {
	buf := make([]byte, 0, 1<<12)
	for _, x := range v {
		buf = put(buf, x)
		if len(buf) >= 1<<12-8 {
			bw.Write(buf)
			buf = buf[:0]
		}
	}
	bw.Write(buf)
}

// WriteFile writes a to the file at path (created or truncated, mode 0644)
// with Write.
func WriteFile(path string, a *Array) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := write("WriteFile: "+path, f, a); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
