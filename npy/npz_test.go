package npy

import (
	"archive/zip"
	"bytes"
	"encoding/binary"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// archiveOf writes the arrays as an .npz archive, in the order of names.
func archiveOf(t *testing.T, compress bool, names []string, arrays []*Array) []byte {
	t.Helper()
	var buf bytes.Buffer
	w := NewArchiveWriter(&buf, compress)
	for i, n := range names {
		ensure.NoError(t, w.Add(n, arrays[i]))
	}
	ensure.NoError(t, w.Close())
	return buf.Bytes()
}

// Every type, stored and deflated, written and read back with the same
// header and bit patterns; the members are NAME.npy with the method asked
// for, and the bytes are the same for the same arrays.
func TestArchiveRoundTrip(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	var names []string
	var arrays []*Array
	for i, dt := range allDTypes {
		shape := [][]int{{2, 3}, {}, {0, 4}, {5}}[i%4]
		n, _ := count("test", "shape", shape)
		names = append(names, dt.String())
		arrays = append(arrays, &Array{Header: Header{DType: dt, Shape: shape, ByteOrder: ByteOrder(i % 2)}, Values: randomValues(dt, n, r)})
	}
	for _, compress := range []bool{false, true} {
		data := archiveOf(t, compress, names, arrays)
		expect.Equal(t, data, archiveOf(t, compress, names, arrays), "deterministic bytes")
		zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
		ensure.NoError(t, err)
		for i, f := range zr.File {
			expect.Equal(t, names[i]+".npy", f.Name)
			want := zip.Store
			if compress {
				want = zip.Deflate
			}
			expect.Equal(t, want, f.Method)
		}
		a, err := NewArchive(bytes.NewReader(data), int64(len(data)))
		ensure.NoError(t, err)
		expect.Equal(t, names, a.Names())
		for i, n := range names {
			got, err := a.Read(n)
			ensure.NoError(t, err, n)
			want := arrays[i].Header
			want.Version = Version1
			if arrays[i].DType.Size() == 1 {
				want.ByteOrder = LittleEndian
			}
			expect.Equal(t, want, got.Header, n)
			sameBits(t, arrays[i].Values, got.Values)
			// The member name with ".npy" names it too.
			_, err = a.Read(n + ".npy")
			ensure.NoError(t, err)
		}
		ensure.NoError(t, a.Close())
	}
}

// An archive file opened by path, and one member replaced with Copy
// keeping the others' bytes.
func TestArchiveFileAndCopy(t *testing.T) {
	dir := t.TempDir()
	x, _ := New(Float64, []int{2}, []float64{1, 2})
	y, _ := New(Int8, []int{3}, []int8{-1, 0, 1})
	path := filepath.Join(dir, "a.npz")
	ensure.NoError(t, os.WriteFile(path, archiveOf(t, true, []string{"x", "y"}, []*Array{x, y}), 0o644))
	a, err := OpenArchive(path)
	ensure.NoError(t, err)
	defer a.Close()

	var buf bytes.Buffer
	w := NewArchiveWriter(&buf, false)
	ensure.NoError(t, w.Copy(a, "y"))
	z, _ := New(Bool, []int{2}, []bool{true, false})
	ensure.NoError(t, w.Add("x", z))
	err = w.Copy(a, "nope")
	ensure.ErrorIs(t, err, ErrMember)
	expect.Contains(t, err.Error(), `name = "nope"; want one of the 2 members: x, y`)
	ensure.NoError(t, w.Close())
	b, err := NewArchive(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	ensure.NoError(t, err)
	expect.Equal(t, []string{"y", "x"}, b.Names())
	got, err := b.Read("y")
	ensure.NoError(t, err)
	expect.Equal(t, []int8{-1, 0, 1}, got.Values)
	got, err = b.Read("x")
	ensure.NoError(t, err)
	expect.Equal(t, []bool{true, false}, got.Values)
}

// zipOf builds a zip archive member by member with archive/zip, for the
// malformed cases.
func zipOf(t *testing.T, members map[string][]byte, method uint16) []byte {
	t.Helper()
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, name := range []string{"a.npy", "b.npy", "notes.txt", "c.npy"} {
		data, ok := members[name]
		if !ok {
			continue
		}
		f, err := zw.CreateHeader(&zip.FileHeader{Name: name, Method: method})
		ensure.NoError(t, err)
		_, err = f.Write(data)
		ensure.NoError(t, err)
	}
	ensure.NoError(t, zw.Close())
	return buf.Bytes()
}

func npyBytes(t *testing.T, a *Array) []byte {
	t.Helper()
	var buf bytes.Buffer
	ensure.NoError(t, Write(&buf, a))
	return buf.Bytes()
}

func TestArchiveErrors(t *testing.T) {
	x, _ := New(Float64, []int{2}, []float64{1, 2})
	good := npyBytes(t, x)
	open := func(data []byte) (*Archive, error) { return NewArchive(bytes.NewReader(data), int64(len(data))) }

	// Not an archive: a .npy file, text, nothing.
	_, err := open(good)
	ensure.ErrorIs(t, err, ErrArchive)
	expect.EqualError(t, err, `npy: malformed archive: NewArchive: the file is a .npy file (it starts with "\x93NUMPY"); want an .npz archive: read it with ReadFile`)
	_, err = open([]byte("hello"))
	expect.EqualError(t, err, `npy: malformed archive: NewArchive: the file starts with "hello"; want a zip archive ("PK\x03\x04"), as numpy.savez writes`)
	_, err = NewArchive(nil, 0)
	expect.ErrorIs(t, err, ErrArchive)
	// A zip cut short: its directory is gone.
	whole := zipOf(t, map[string][]byte{"a.npy": good}, zip.Store)
	_, err = open(whole[:len(whole)-10])
	ensure.ErrorIs(t, err, ErrArchive)
	expect.Contains(t, err.Error(), "want an intact zip archive")

	// No such member: the message lists them.
	a, err := open(zipOf(t, map[string][]byte{"a.npy": good, "b.npy": good, "notes.txt": []byte("hi")}, zip.Store))
	ensure.NoError(t, err)
	expect.Equal(t, []string{"a", "b", "notes.txt"}, a.Names())
	_, err = a.Read("c")
	ensure.ErrorIs(t, err, ErrMember)
	expect.EqualError(t, err, `npy: no such member: NewArchive: Archive.Read: name = "c"; want one of the 3 members: a, b, notes.txt`)
	// A member that is not a .npy file says so, as Read does.
	_, err = a.Read("notes.txt")
	ensure.ErrorIs(t, err, ErrFormat)
	expect.Contains(t, err.Error(), "NewArchive: member notes.txt: the file has 2 bytes")
	empty, err := open(zipOf(t, nil, zip.Store))
	ensure.NoError(t, err)
	_, err = empty.Read("a")
	expect.EqualError(t, err, `npy: no such member: NewArchive: Archive.Read: name = "a"; want a member; the archive has none`)

	// Bytes after the member's data, and data shorter than its header.
	a, err = open(zipOf(t, map[string][]byte{"a.npy": append(append([]byte{}, good...), 0), "b.npy": good[:len(good)-1]}, zip.Deflate))
	ensure.NoError(t, err)
	_, err = a.Read("a")
	ensure.ErrorIs(t, err, ErrData)
	expect.Contains(t, err.Error(), "member a.npy: bytes follow the 16 bytes of data")
	_, err = a.Read("b")
	ensure.ErrorIs(t, err, ErrData)

	// A method other than stored and deflate.
	data := zipOf(t, map[string][]byte{"a.npy": good}, zip.Store)
	i := bytes.Index(data, []byte("PK\x01\x02")) // the central directory entry: method at offset 10
	binary.LittleEndian.PutUint16(data[i+10:], 14)
	a, err = open(data)
	ensure.NoError(t, err)
	_, err = a.Read("a")
	ensure.ErrorIs(t, err, ErrArchive)
	expect.Contains(t, err.Error(), "compression method = 14; want stored (0) or deflate (8)")

	// A damaged member: a flipped data byte fails the checksum.
	data = zipOf(t, map[string][]byte{"a.npy": good}, zip.Store)
	data[bytes.Index(data, []byte("\x93NUMPY"))+len(good)-1] ^= 0xff
	a, err = open(data)
	ensure.NoError(t, err)
	_, err = a.Read("a")
	ensure.ErrorIs(t, err, ErrArchive)
	expect.Contains(t, err.Error(), "checksum")

	// Names to write: empty, with .npy, with a folder, twice.
	w := NewArchiveWriter(&bytes.Buffer{}, false)
	for _, n := range []string{"", "x.npy", "a/b"} {
		expect.ErrorIs(t, w.Add(n, x), ErrMember, n)
	}
	ensure.NoError(t, w.Add("x", x))
	err = w.Add("x", x)
	ensure.ErrorIs(t, err, ErrMember)
	expect.Contains(t, err.Error(), `name = "x" given twice`)
	expect.ErrorIs(t, w.Add("bad", &Array{Values: []float32{1}}), ErrValues)

	// Nil receivers and writers are errors, not panics.
	var nw *ArchiveWriter
	expect.ErrorIs(t, nw.Add("x", x), ErrMember)
	expect.ErrorIs(t, nw.Copy(a, "a"), ErrMember)
	expect.ErrorIs(t, nw.Close(), ErrMember)
	var na *Archive
	_, err = na.Read("a")
	expect.ErrorIs(t, err, ErrMember)
	expect.Nil(t, na.Names())
	expect.NoError(t, na.Close())
	nilw := NewArchiveWriter(nil, false)
	_ = nilw.Add("x", x) // buffered
	expect.ErrorIs(t, nilw.Close(), ErrFormat, "a nil io.Writer fails when the archive is written")

	// A member claiming a huge shape costs nothing before it fails.
	huge := file("{'descr': '<f8', 'fortran_order': False, 'shape': (268435456,), }", make([]byte, 64))
	a, err = open(zipOf(t, map[string][]byte{"a.npy": huge}, zip.Deflate))
	ensure.NoError(t, err)
	var rerr error
	used := allocated(func() { _, rerr = a.Read("a") })
	ensure.ErrorIs(t, rerr, ErrData)
	expect.Less(t, used, uint64(1<<22), "allocation bounded by the member's bytes")
}

// The first four bytes tell an archive.
func TestIsArchive(t *testing.T) {
	expect.True(t, IsArchive([]byte("PK\x03\x04rest")))
	expect.True(t, IsArchive([]byte("PK\x05\x06")))
	expect.False(t, IsArchive([]byte("\x93NUMPY")))
	expect.False(t, IsArchive([]byte("PK")))
}

func TestReadRaw(t *testing.T) {
	// float32 1, −2 and int16 −1, 258, little-endian.
	f32 := []byte{0, 0, 0x80, 0x3f, 0, 0, 0, 0xc0}
	a, err := ReadRaw(bytes.NewReader(f32), Float32, []int{2, 1})
	ensure.NoError(t, err)
	expect.Equal(t, Header{DType: Float32, Shape: []int{2, 1}}, a.Header)
	expect.Equal(t, []float32{1, -2}, a.Values)
	a, err = ReadRaw(bytes.NewReader([]byte{0xff, 0xff, 2, 1}), Int16, []int{2})
	ensure.NoError(t, err)
	expect.Equal(t, []int16{-1, 258}, a.Values)
	a, err = ReadRaw(bytes.NewReader([]byte{0, 1, 7}), Bool, []int{3})
	ensure.NoError(t, err)
	expect.Equal(t, []bool{false, true, true}, a.Values, "any byte but 0 is true")

	// Sizes that do not match the shape: both stated, from a stream and a file.
	_, err = ReadRaw(onlyReader{bytes.NewReader(f32)}, Float32, []int{3})
	ensure.ErrorIs(t, err, ErrData)
	expect.Contains(t, err.Error(), "ReadRaw: the data ends early")
	expect.Contains(t, err.Error(), "want 12 bytes, the 3 float32 elements (4 bytes each) of shape [3]")
	_, err = ReadRaw(onlyReader{bytes.NewReader(f32)}, Float32, []int{1})
	expect.EqualError(t, err, "npy: data does not match the header: ReadRaw: the data are 8 bytes; want 4, the 1 float32 elements (4 bytes each) of shape [1] (8 bytes are that shape in 8-byte elements: float64, int64?)")
	path := filepath.Join(t.TempDir(), "x.bin")
	ensure.NoError(t, os.WriteFile(path, make([]byte, 1000), 0o644))
	_, err = ReadRawFile(path, Float32, []int{1, 8, 128, 64})
	ensure.ErrorIs(t, err, ErrData)
	expect.EqualError(t, err, "npy: data does not match the header: ReadRawFile: "+path+": the data are 1000 bytes; want 262144, the 65536 float32 elements (4 bytes each) of shape [1 8 128 64] (1000 bytes are 250 float32 elements)")
	ensure.NoError(t, os.WriteFile(path, make([]byte, 16), 0o644))
	a, err = ReadRawFile(path, Float64, []int{2})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0, 0}, a.Values)
	_, err = ReadRawFile(filepath.Join(t.TempDir(), "none.bin"), Float64, []int{2})
	expect.True(t, errors.Is(err, os.ErrNotExist))

	// Bad types and shapes, before anything is read.
	_, err = ReadRaw(bytes.NewReader(nil), DType(99), []int{1})
	expect.ErrorIs(t, err, ErrDType)
	_, err = ReadRaw(bytes.NewReader(nil), Float64, []int{-1})
	expect.ErrorIs(t, err, ErrShape)
	var rerr error
	used := allocated(func() { _, rerr = ReadRaw(onlyReader{bytes.NewReader(nil)}, Float64, []int{1 << 28}) })
	expect.ErrorIs(t, rerr, ErrData)
	expect.Less(t, used, uint64(1<<20))
	_, err = ReadRaw(bytes.NewReader(nil), Float64, []int{1 << 28, 2})
	expect.ErrorIs(t, err, ErrShape)
	_, err = ReadRaw(nil, Float64, []int{1})
	expect.ErrorIs(t, err, ErrData)
	// Zero elements: no bytes.
	a, err = ReadRaw(bytes.NewReader(nil), Float64, []int{0, 3})
	ensure.NoError(t, err)
	expect.Empty(t, a.Values)
}
