package npy

import (
	"fmt"
	"io"
	"os"
	"strings"
)

// Raw binary: the elements alone, row-major and little-endian, with no
// header, as a C or GPU harness dumps a buffer with fwrite. The reader
// says the element type and the shape; the file must hold exactly the
// bytes they need.

// ReadRaw reads raw little-endian data of the element type and shape from
// r: exactly Len·Size bytes, and nothing after them. When r can say how
// many bytes it holds (a Len method, a regular *os.File), data of another
// length are refused before they are read. The Array is
// little-endian, C order, version zero; Bits is Integer (set it for
// bfloat16 or FP8 patterns).
//
// Special cases are:
//
//	an invalid dt                        ErrDType
//	a negative or overflowing shape      ErrShape
//	more than MaxElements elements       ErrShape, before reading
//	fewer or more bytes than the shape needs  ErrData, stating both
func ReadRaw(r io.Reader, dt DType, shape []int) (*Array, error) {
	if r == nil {
		return nil, fmt.Errorf("%w: ReadRaw: r = nil; want an io.Reader holding the data", ErrData)
	}
	return readRaw("ReadRaw", r, dt, shape, -1)
}

// ReadRawFile reads the raw file at path with ReadRaw; a file of another
// size than the shape needs is refused before it is read.
func ReadRawFile(path string, dt DType, shape []int) (*Array, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return readRaw("ReadRawFile: "+path, f, dt, shape, -1)
}

// readRaw is ReadRaw for a call of fn; size is the length of r when known,
// or −1.
func readRaw(fn string, r io.Reader, dt DType, shape []int, size int64) (*Array, error) {
	if err := dtypeWords.CheckAt(fn+": dt", dt); err != nil {
		return nil, err
	}
	n, err := count(fn, "shape", shape)
	if err != nil {
		return nil, err
	}
	if err := holdable(fn, "shape", shape, n); err != nil {
		return nil, err
	}
	want := int64(n) * int64(dt.Size())
	if size < 0 {
		if rem, ok := remaining(r); ok {
			size = rem
		}
	}
	if size >= 0 && size != want {
		return nil, rawSizeError(fn, size, "", dt, shape, n)
	}
	data, err := readN(r, int(want))
	if err != nil {
		return nil, fmt.Errorf("%w: %s: the data ends early (%v); want %d bytes, %s", ErrData, fn, err, want, rawNeed(dt, shape, n))
	}
	// Count what follows, up to a bound, to say how long the data are.
	extra, _ := io.Copy(io.Discard, io.LimitReader(r, rawExtraLimit+1))
	if extra > 0 {
		more := ""
		if extra > rawExtraLimit {
			more = "more than "
		}
		return nil, rawSizeError(fn, want+extra, more, dt, shape, n)
	}
	shape = append([]int{}, shape...)
	return &Array{Header: Header{DType: dt, Shape: shape}, Values: decode(data, dt, LittleEndian)}, nil
}

// rawExtraLimit bounds the bytes counted after the data of a raw stream.
const rawExtraLimit = 1 << 26

// rawNeed says what the shape needs: "the 8192 float32 elements (4 bytes
// each) of shape [8 1024]".
func rawNeed(dt DType, shape []int, n int) string {
	return fmt.Sprintf("the %d %v elements (%d bytes each) of shape %v", n, dt, dt.Size(), shape)
}

// rawSizeError refuses data of got bytes (more: "more than " when only a
// bound is known) for the type and shape, and names the element sizes
// that would make got fit the shape.
func rawSizeError(fn string, got int64, more string, dt DType, shape []int, n int) error {
	want := int64(n) * int64(dt.Size())
	hint := ""
	if more == "" && n > 0 && got%int64(n) == 0 && got/int64(n) != int64(dt.Size()) {
		w := got / int64(n)
		var fit []string
		for _, d := range dt.Values() {
			if int64(d.Size()) == w {
				fit = append(fit, d.String())
			}
		}
		if len(fit) > 0 {
			hint = fmt.Sprintf(" (%d bytes are that shape in %d-byte elements: %s?)", got, w, strings.Join(fit, ", "))
		}
	} else if more == "" && dt.Size() > 0 && got%int64(dt.Size()) == 0 {
		hint = fmt.Sprintf(" (%d bytes are %d %v elements)", got, got/int64(dt.Size()), dt)
	}
	return fmt.Errorf("%w: %s: the data are %s%d bytes; want %d, %s%s", ErrData, fn, more, got, want, rawNeed(dt, shape, n), hint)
}
