package npy

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"testing"
)

// FuzzRead feeds arbitrary bytes to Read. It must not panic, must not
// allocate much more than the input holds (a header may claim any shape),
// must fail with one of the sentinel errors, and what it accepts must have
// one value per position of the shape and survive Write and Read again
// unchanged.
func FuzzRead(f *testing.F) {
	r := rand.New(rand.NewPCG(5, 6))
	for _, dt := range allDTypes {
		for _, fortran := range []bool{false, true} {
			a := &Array{Header: Header{DType: dt, ByteOrder: BigEndian, FortranOrder: fortran, Shape: []int{2, 3}}, Values: randomValues(dt, 6, r)}
			var buf bytes.Buffer
			if err := Write(&buf, a); err != nil {
				f.Fatal(err)
			}
			f.Add(buf.Bytes())
		}
	}
	f.Add(file("{'descr': [('a', '<f8')], 'fortran_order': False, 'shape': (1,)}", nil))
	f.Add(file("{'descr': '<f8', 'fortran_order': False, 'shape': (1099511627776,), }", nil))
	f.Add([]byte("\x93NUMPY\x03\x00\x08\x00\x00\x00{'a': ("))
	sentinels := []error{ErrFormat, ErrDType, ErrShape, ErrData}
	f.Fuzz(func(t *testing.T, data []byte) {
		var a *Array
		var err error
		used := allocated(func() { a, err = Read(bytes.NewReader(data)) })
		// Read holds the data at most three times (bytes, values,
		// transposed values) and the header as runes (4 bytes each), plus
		// parser overhead: 64 bytes per input byte and 64 KiB are ample,
		// while a lying header would claim gigabytes.
		if limit := 64*uint64(len(data)) + 1<<16; used > limit {
			t.Fatalf("Read allocated %d bytes for %d input bytes (limit %d)", used, len(data), limit)
		}
		if err != nil {
			k := 0
			for _, s := range sentinels {
				if errors.Is(err, s) {
					k++
				}
			}
			if k != 1 {
				t.Fatalf("error wraps %d sentinels, want 1: %v", k, err)
			}
			return
		}
		if n, ok := a.valuesLen(); !ok || n != a.Len() {
			t.Fatalf("Values %T of length %d for shape %v of %v", a.Values, n, a.Shape, a.DType)
		}
		var buf bytes.Buffer
		if err := Write(&buf, a); err != nil {
			t.Fatalf("Write refused what Read accepted: %v", err)
		}
		b, err := Read(&buf)
		if err != nil {
			t.Fatalf("Read refused what Write wrote: %v", err)
		}
		if !bytes.Equal(bitsOf(a), bitsOf(b)) || a.Version != b.Version || a.DType != b.DType || a.ByteOrder != b.ByteOrder || a.FortranOrder != b.FortranOrder {
			t.Fatalf("round trip changed the array: %+v → %+v", a.Header, b.Header)
		}
	})
}

// bitsOf returns the values' bytes, little-endian, row-major.
func bitsOf(a *Array) []byte {
	var buf bytes.Buffer
	c := *a
	c.Header = Header{DType: a.DType, Shape: a.Shape}
	_ = Write(&buf, &c)
	return buf.Bytes()
}

// FuzzArchive feeds arbitrary bytes to NewArchive and reads every member,
// and the same bytes to ReadRaw: no panic, and every error of the archive's
// content wraps one of the sentinels.
func FuzzArchive(f *testing.F) {
	x, _ := New(Float32, []int{2, 2}, []float32{1, 2, 3, 4})
	for _, compress := range []bool{false, true} {
		var buf bytes.Buffer
		w := NewArchiveWriter(&buf, compress)
		if err := w.Add("x", x); err != nil {
			f.Fatal(err)
		}
		if err := w.Close(); err != nil {
			f.Fatal(err)
		}
		f.Add(buf.Bytes())
	}
	f.Add([]byte("PK\x05\x06"))
	sentinels := []error{ErrFormat, ErrDType, ErrShape, ErrData, ErrArchive, ErrMember}
	one := func(t *testing.T, err error) {
		k := 0
		for _, s := range sentinels {
			if errors.Is(err, s) {
				k++
			}
		}
		if k != 1 {
			t.Fatalf("error wraps %d sentinels, want 1: %v", k, err)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if _, err := ReadRaw(bytes.NewReader(data), Int16, []int{len(data) / 2}); err != nil && len(data)%2 == 0 {
			t.Fatalf("ReadRaw refused %d bytes of int16: %v", len(data), err)
		}
		a, err := NewArchive(bytes.NewReader(data), int64(len(data)))
		if err != nil {
			one(t, err)
			return
		}
		for _, n := range a.Names() {
			if _, err := a.Read(n); err != nil {
				one(t, err)
			}
		}
	})
}
