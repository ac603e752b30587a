package npy_test

import (
	"bytes"
	"fmt"
	"strings"

	"github.com/plumbref/plumb/npy"
)

// Write a 2×3 float32 tensor; the header is the one NumPy writes.
func ExampleWrite() {
	a, err := npy.New(npy.Float32, []int{2, 3}, []float32{1, 2, 3, 4, 5, 6})
	if err != nil {
		panic(err)
	}
	var buf bytes.Buffer
	if err := npy.Write(&buf, a); err != nil {
		panic(err)
	}
	b := buf.Bytes()
	fmt.Printf("%q version %d.%d, header %d bytes\n", b[:6], b[6], b[7], int(b[8])|int(b[9])<<8)
	fmt.Println(strings.TrimSpace(string(b[10:128])))
	fmt.Println(len(b), "bytes: data start at byte 128")
	// Output:
	// "\x93NUMPY" version 1.0, header 118 bytes
	// {'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }
	// 152 bytes: data start at byte 128
}

// Read gives row-major values whatever the file's order, and reports how
// the file stored them.
func ExampleRead() {
	a, _ := npy.New(npy.Int32, []int{2, 3}, []int32{1, 2, 3, 4, 5, 6})
	a.ByteOrder, a.FortranOrder = npy.BigEndian, true // stored column-major, big-endian
	var buf bytes.Buffer
	if err := npy.Write(&buf, a); err != nil {
		panic(err)
	}
	b, err := npy.Read(&buf)
	if err != nil {
		panic(err)
	}
	fmt.Println(b.DType, b.Shape, b.Values)
	fmt.Println(b.Version, b.ByteOrder, "fortran_order:", b.FortranOrder)
	// Output:
	// int32 [2 3] [1 2 3 4 5 6]
	// 1.0 big-endian fortran_order: true
}

// bfloat16 tensors travel as uint16 bit patterns; the reader says what the
// bits are, since the file cannot.
func ExampleArray_Float64s() {
	a, _ := npy.New(npy.Uint16, []int{4}, []uint16{0x3f80, 0xc000, 0x3eab, 0x7f80})
	var buf bytes.Buffer
	_ = npy.Write(&buf, a)

	b, _ := npy.Read(&buf)
	raw, _ := b.Float64s()
	b.Bits = npy.BFloat16
	vals, _ := b.Float64s()
	fmt.Println(raw)
	fmt.Println(vals)
	// Output:
	// [16256 49152 16043 32640]
	// [1 -2 0.333984375 +Inf]
}

// FP8 travels as uint8 bit patterns; Bits says how to read them.
func ExampleArray_Float64s_e4m3() {
	a, err := npy.New(npy.Uint8, []int{5}, []uint8{0x38, 0x7e, 0x08, 0x01, 0xff})
	if err != nil {
		fmt.Println(err)
		return
	}
	a.Bits = npy.E4M3
	v, _ := a.Float64s()
	fmt.Println(v)
	// Output:
	// [1 448 0.015625 0.001953125 NaN]
}

// A tensor type outside the supported set is refused by name.
func ExampleReadHeader() {
	h := "{'descr': '<c16', 'fortran_order': False, 'shape': (3,), }\n"
	f := "\x93NUMPY\x01\x00" + string(rune(len(h))) + "\x00" + h
	_, err := npy.ReadHeader(strings.NewReader(f))
	fmt.Println(err)
	// Output:
	// npy: unsupported element type: ReadHeader: 'descr' = '<c16' (complex); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'
}
