package npy

import (
	"bytes"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

var allDTypes = []DType{Float64, Float32, Float16, Int64, Int32, Int16, Int8, Uint32, Uint16, Uint8, Bool}

// randomValues returns n values of the type, drawn from r, with the type's
// special values first (NaN, ±Inf, −0, extremes) when n allows.
func randomValues(dt DType, n int, r *rand.Rand) any {
	switch dt {
	case Float64:
		v := []float64{math.NaN(), math.Inf(1), math.Inf(-1), math.Copysign(0, -1), math.MaxFloat64, math.SmallestNonzeroFloat64}
		for len(v) < n {
			v = append(v, r.NormFloat64()*math.Ldexp(1, r.IntN(40)-20))
		}
		return v[:n]
	case Float32:
		v := []float32{float32(math.NaN()), float32(math.Inf(-1)), math.MaxFloat32, math.SmallestNonzeroFloat32}
		for len(v) < n {
			v = append(v, float32(r.NormFloat64()))
		}
		return v[:n]
	case Int64:
		v := []int64{math.MinInt64, math.MaxInt64, -1, 0}
		for len(v) < n {
			v = append(v, int64(r.Uint64()))
		}
		return v[:n]
	case Int32:
		v := []int32{math.MinInt32, math.MaxInt32, -1}
		for len(v) < n {
			v = append(v, int32(r.Uint32()))
		}
		return v[:n]
	case Float16, Uint16:
		v := []uint16{0xffff, 0x7c00, 0x8000, 0x0001}
		for len(v) < n {
			v = append(v, uint16(r.Uint32()))
		}
		return v[:n]
	case Uint8:
		v := []uint8{0xff, 0x80, 0x7f}
		for len(v) < n {
			v = append(v, uint8(r.Uint32()))
		}
		return v[:n]
	case Int16:
		v := []int16{math.MinInt16, math.MaxInt16, -1}
		for len(v) < n {
			v = append(v, int16(r.Uint32()))
		}
		return v[:n]
	case Int8:
		v := []int8{math.MinInt8, math.MaxInt8, -1}
		for len(v) < n {
			v = append(v, int8(r.Uint32()))
		}
		return v[:n]
	case Uint32:
		v := []uint32{math.MaxUint32, 1 << 31, 0}
		for len(v) < n {
			v = append(v, r.Uint32())
		}
		return v[:n]
	case Bool:
		v := []bool{true, false}
		for len(v) < n {
			v = append(v, r.IntN(2) == 1)
		}
		return v[:n]
	}
	return nil
}

// sameBits compares two Values slices bit for bit (NaN payloads included).
func sameBits(t *testing.T, want, got any) {
	t.Helper()
	switch w := want.(type) {
	case []float64:
		sameBitsOf(t, w, got, math.Float64bits)
	case []float32:
		sameBitsOf(t, w, got, func(x float32) uint64 { return uint64(math.Float32bits(x)) })
	default:
		ensure.Equal(t, want, got)
	}
}

// sameBitsOf is sameBits for a float slice type, compared through bits.
func sameBitsOf[T float32 | float64](t *testing.T, want []T, got any, bits func(T) uint64) {
	t.Helper()
	g, ok := got.([]T)
	ensure.True(t, ok, "got %T", got)
	ensure.Len(t, g, len(want))
	for i := range want {
		ensure.Equal(t, bits(want[i]), bits(g[i]), "element %d", i)
	}
}

// Property: Write then Read returns the same header (the version Write
// chose) and the same bit patterns, for every type, byte order, file
// order, version and a range of shapes. Fixed seed.
func TestRoundTrip(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	shapes := [][]int{{}, {0}, {0, 5}, {7}, {2, 3}, {2, 3, 4}, {1, 1, 1}, {3, 1, 2, 2}}
	for _, dt := range allDTypes {
		for _, bo := range []ByteOrder{LittleEndian, BigEndian} {
			for _, fortran := range []bool{false, true} {
				for _, ver := range []Version{{}, Version1, Version2, Version3} {
					for _, shape := range shapes {
						n, err := count("test", "shape", shape)
						ensure.NoError(t, err)
						a := &Array{Header: Header{Version: ver, DType: dt, ByteOrder: bo, FortranOrder: fortran, Shape: shape}, Values: randomValues(dt, n, r)}
						var buf bytes.Buffer
						ensure.NoError(t, Write(&buf, a))
						ensure.Zero(t, (buf.Len()-n*dt.Size())%64, "data must start at a multiple of 64 (format description)")
						got, err := Read(&buf)
						ensure.NoError(t, err, "%v %v fortran=%v %v %v", dt, bo, fortran, ver, shape)
						want := a.Header
						if want.Version == (Version{}) {
							want.Version = Version1
						}
						if dt.Size() == 1 {
							want.ByteOrder = LittleEndian
						}
						expect.Equal(t, want, got.Header)
						sameBits(t, a.Values, got.Values)
						expect.Zero(t, buf.Len(), "Read must consume exactly the array")
					}
				}
			}
		}
	}
}

// The bytes NumPy 1.24.2 writes for numpy.save(f, numpy.arange(6.0).reshape(2, 3))
// (recorded from NumPy): 128-byte header, then six little-endian float64.
func TestWriteMatchesRecordedNumPyBytes(t *testing.T) {
	want := "\x93NUMPY\x01\x00v\x00{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }" +
		strings.Repeat(" ", 58) + "\n"
	a, err := New(Float64, []int{2, 3}, []float64{0, 1, 2, 3, 4, 5})
	ensure.NoError(t, err)
	var buf bytes.Buffer
	ensure.NoError(t, Write(&buf, a))
	ensure.Equal(t, 128+6*8, buf.Len())
	expect.Equal(t, want, buf.String()[:128])
	expect.Equal(t, []byte{0, 0, 0, 0, 0, 0, 0xf0, 0x3f}, buf.Bytes()[136:144], "1.0 as little-endian IEEE 754 binary64")
}

// Column-major order, by definition of the format's 'fortran_order': the
// first index varies fastest. Matrix [[1 2 3] [4 5 6]] is stored 1 4 2 5 3 6.
func TestFortranOrderTransposes(t *testing.T) {
	a, err := New(Int32, []int{2, 3}, []int32{1, 2, 3, 4, 5, 6})
	ensure.NoError(t, err)
	a.FortranOrder = true
	var buf bytes.Buffer
	ensure.NoError(t, Write(&buf, a))
	data := buf.Bytes()[128:]
	var stored []int32
	for i := 0; i < len(data); i += 4 {
		stored = append(stored, int32(data[i])|int32(data[i+1])<<8|int32(data[i+2])<<16|int32(data[i+3])<<24)
	}
	expect.Equal(t, []int32{1, 4, 2, 5, 3, 6}, stored)
	got, err := Read(bytes.NewReader(buf.Bytes()))
	ensure.NoError(t, err)
	expect.Equal(t, []int32{1, 2, 3, 4, 5, 6}, got.Values)
	expect.True(t, got.FortranOrder)

	// Three dimensions, shape (2, 2, 2): column-major offset i + 2j + 4k.
	b, err := New(Uint8, []int{2, 2, 2}, []uint8{0, 1, 2, 3, 4, 5, 6, 7}) // row-major value = 4i + 2j + k
	ensure.NoError(t, err)
	b.FortranOrder = true
	buf.Reset()
	ensure.NoError(t, Write(&buf, b))
	expect.Equal(t, []byte{0, 4, 2, 6, 1, 5, 3, 7}, buf.Bytes()[128:])
}

// file assembles a version 1.0 file around a header dictionary text and data.
func file(dict string, data []byte) []byte {
	h := dict + "\n"
	b := []byte("\x93NUMPY\x01\x00")
	b = append(b, byte(len(h)), byte(len(h)>>8))
	b = append(b, h...)
	return append(b, data...)
}

func TestReadHeaderVariants(t *testing.T) {
	eight := make([]byte, 8)
	tests := []struct {
		name, dict string
		want       Header
	}{
		{"NumPy's own", "{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }", Header{Version1, Float64, LittleEndian, false, []int{1}}},
		{"keys in another order, double quotes, no trailing comma", `{"shape": (2, 4), "fortran_order": True, "descr": ">u1"}`, Header{Version1, Uint8, LittleEndian, true, []int{2, 4}}},
		{"one-byte type, every mark", "{'descr': '=u1', 'fortran_order': False, 'shape': (8,)}", Header{Version1, Uint8, LittleEndian, false, []int{8}}},
		{"one-byte type, no mark", "{'descr': 'u1', 'fortran_order': False, 'shape': (8,)}", Header{Version1, Uint8, LittleEndian, false, []int{8}}},
		{"Python 2 long suffix", "{'descr': '>i4', 'fortran_order': False, 'shape': (2L,)}", Header{Version1, Int32, BigEndian, false, []int{2}}},
		{"tabs, newlines, unaligned padding", "{ 'descr' : '<f2' ,\n\t'fortran_order' : False , 'shape' : ( 4 , ) }   ", Header{Version1, Float16, LittleEndian, false, []int{4}}},
		{"scalar", "{'descr': '<i8', 'fortran_order': False, 'shape': ()}", Header{Version1, Int64, LittleEndian, false, []int{}}},
		{"zero size", "{'descr': '<f4', 'fortran_order': False, 'shape': (0, 1000000000000)}", Header{Version1, Float32, LittleEndian, false, []int{0, 1000000000000}}},
		{"zero size after an overflowing product", "{'descr': '<f4', 'fortran_order': True, 'shape': (4294967296, 4294967296, 0)}", Header{Version1, Float32, LittleEndian, true, []int{1 << 32, 1 << 32, 0}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			h, err := ReadHeader(bytes.NewReader(file(tc.dict, eight)))
			ensure.NoError(t, err)
			expect.Empty(t, cmp.Diff(tc.want, h))
			// Each case's data fill 8 bytes, or none for the empty shapes.
			a, err := Read(bytes.NewReader(file(tc.dict, eight)))
			ensure.NoError(t, err)
			n, ok := a.valuesLen()
			expect.True(t, ok)
			expect.Equal(t, h.Len(), n)
		})
	}
}

func TestReadErrors(t *testing.T) {
	dict := func(descr, fortran, shape string) []byte {
		return file("{'descr': "+descr+", 'fortran_order': "+fortran+", 'shape': "+shape+", }", make([]byte, 64))
	}
	deep := strings.Repeat("[", 40) + strings.Repeat("]", 40)
	tests := []struct {
		name string
		in   []byte
		want error
		says string // the whole message
	}{
		{"empty", nil, ErrFormat, "npy: malformed file: Read: the file has 0 bytes (EOF); want at least 10 (magic string, version, header length)"},
		{"bad magic", []byte("\x93NUMPZ\x01\x00\x00\x00"), ErrFormat, "npy: malformed file: Read: the file starts with \"\\x93NUMPZ\"; want the magic string \"\\x93NUMPY\""},
		{"version 4.0", []byte("\x93NUMPY\x04\x00\x00\x00"), ErrFormat, "npy: malformed file: Read: format version = 4.0; want 1.0, 2.0 or 3.0"},
		{"version 1.1", []byte("\x93NUMPY\x01\x01\x00\x00"), ErrFormat, "npy: malformed file: Read: format version = 1.1; want 1.0, 2.0 or 3.0"},
		{"truncated length", []byte("\x93NUMPY\x02\x00\x10\x00"), ErrFormat, "npy: malformed file: Read: the file ends inside the 4-byte header length (unexpected EOF); want all of it"},
		{"header length too large", []byte("\x93NUMPY\x02\x00\xff\xff\xff\xff"), ErrFormat, "npy: malformed file: Read: header length = 4294967295; want at most MaxHeaderLen = 1048576"},
		{"truncated header", []byte("\x93NUMPY\x01\x00\x40\x00{'descr'"), ErrFormat, "npy: malformed file: Read: the header of 64 bytes ends early (input ended early: 8 bytes remain); want all of it"},
		{"structured", dict("[('a', '<f8'), ('b', '<i4')]", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = [('a', '<f8'), ('b', '<i4')], a structured type; want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"complex", dict("'<c16'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<c16' (complex); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"bool of 2 bytes", dict("'<b2'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<b2' (bool); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"int128", dict("'<i16'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<i16' (signed integer of an unsupported size); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"uint64", dict("'<u8'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<u8' (unsigned integer of an unsupported size); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"zip archive", []byte("PK\x03\x04\x14\x00\x00\x00\x00\x00"), ErrFormat, "npy: malformed file: Read: the file is a zip archive, as an .npz file is (it starts with \"PK\\x03\\x04\"); want a .npy file: the members of an .npz archive are .npy files, read them with OpenArchive"},
		{"long double", dict("'<f16'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<f16' (floating point of an unsupported size); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"unicode", dict("'<U3'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '<U3' (unicode string); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"object", dict("'|O'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '|O' (Python object); want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"native order", dict("'=f8'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '=f8', no byte order for a type of 8 bytes; want '<' or '>' (a file does not say which machine's native order '=' or none meant)"},
		{"not applicable order", dict("'|f8'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = '|f8', no byte order for a type of 8 bytes; want '<' or '>' (a file does not say which machine's native order '=' or none meant)"},
		{"no order", dict("'f8'", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = 'f8', no byte order for a type of 8 bytes; want '<' or '>' (a file does not say which machine's native order '=' or none meant)"},
		{"descr integer", dict("8", "False", "(1,)"), ErrDType, "npy: unsupported element type: Read: 'descr' = 8, an integer; want one of '<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"},
		{"fortran_order 0", dict("'<f8'", "0", "(1,)"), ErrFormat, "npy: malformed file: Read: 'fortran_order' = 0; want True or False"},
		{"shape list", dict("'<f8'", "False", "[1]"), ErrFormat, "npy: malformed file: Read: 'shape' = [1]; want a tuple of integers"},
		{"shape (1) is not a tuple", dict("'<f8'", "False", "(1)"), ErrFormat, "npy: malformed file: Read: header byte 53: a parenthesised value without a comma, which is not a tuple; want (x,)"},
		{"shape of strings", dict("'<f8'", "False", "('a',)"), ErrFormat, "npy: malformed file: Read: 'shape' = ('a',), dimension 0 = 'a'; want an integer"},
		{"negative dimension", dict("'<f8'", "False", "(2, -1)"), ErrShape, "npy: invalid shape: Read: 'shape'[1] = -1; want ≥ 0"},
		{"dimension beyond int64", dict("'<f8'", "False", "(99999999999999999999,)"), ErrShape, "npy: invalid shape: Read: 'shape' = (99999999999999999999,), dimension 0 = 99999999999999999999; want one that fits an int"},
		{"element count overflows", dict("'<f8'", "False", "(4294967296, 4294967296)"), ErrShape, "npy: invalid shape: Read: 'shape' = [4294967296 4294967296]; want at most 9223372036854775807 elements (the count overflows at dimension 1)"},
		{"more elements than MaxElements", dict("'<f8'", "False", "(2305843009213693952,)"), ErrShape, "npy: invalid shape: Read: 'shape' = [2305843009213693952], 2305843009213693952 elements; want at most MaxElements = 268435456"},
		{"missing key", file("{'descr': '<f8', 'shape': (1,)}", nil), ErrFormat, "npy: malformed file: Read: the header has no 'fortran_order' key; want 'descr', 'fortran_order' and 'shape'"},
		{"extra key", file("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), 'format': 'bf16'}", nil), ErrFormat, "npy: malformed file: Read: header key 'format'; want one of 'descr', 'fortran_order', 'shape'"},
		{"duplicate key", file("{'descr': '<f8', 'descr': '<f8', 'fortran_order': False, 'shape': (1,)}", nil), ErrFormat, "npy: malformed file: Read: header key 'descr' twice; want each key once"},
		{"not a dict", file("('<f8', False, (1,))", nil), ErrFormat, "npy: malformed file: Read: the header is a tuple; want a dictionary"},
		{"garbage after dict", file("{'descr': '<f8', 'fortran_order': False, 'shape': (1,)} x", nil), ErrFormat, "npy: malformed file: Read: header byte 56: \"x\\n\" after the dictionary; want only spaces and a newline"},
		{"unterminated string", file("{'descr: '<f8'}", nil), ErrFormat, "npy: malformed file: Read: header byte 10: \"<f8'}\\n\" after dictionary key 'descr: '; want ':'"},
		{"nested too deep", file(deep, nil), ErrFormat, "npy: malformed file: Read: header byte 33: a literal nested deeper than 32; want at most 32 levels"},
		{"data too short", dict("'<f8'", "False", "(9,)"), ErrData, "npy: data does not match the header: Read: the data ends early (input ended early: 64 bytes remain); want the 72 bytes that shape [9] of float64 needs"},
		{"huge shape, no data", dict("'<f8'", "False", "(268435456,)"), ErrData, "npy: data does not match the header: Read: the data ends early (input ended early: 64 bytes remain); want the 2147483648 bytes that shape [268435456] of float64 needs"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(bytes.NewReader(tc.in))
			ensure.ErrorIs(t, err, tc.want)
			expect.EqualError(t, err, tc.says)
			for _, other := range []error{ErrFormat, ErrDType, ErrShape, ErrData} {
				if other != tc.want {
					expect.NotErrorIs(t, err, other, "one sentinel per error")
				}
			}
		})
	}
}

// onlyReader hides Len and Seek, so Read cannot know how much remains.
type onlyReader struct{ r io.Reader }

func (o onlyReader) Read(p []byte) (int, error) { return o.r.Read(p) }

// allocated returns the bytes allocated while f runs (TotalAlloc counts
// every allocation, collected or not).
func allocated(f func()) uint64 {
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	f()
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// A header that lies about the shape or its own length must fail without
// allocating what it claims, whether or not the reader reports its length.
func TestLyingHeaderDoesNotAllocate(t *testing.T) {
	const limit = 1 << 20 // far below any claim below, far above honest overhead
	huge := file("{'descr': '<f8', 'fortran_order': False, 'shape': (1099511627776,), }", make([]byte, 1000))
	longHeader := append([]byte("\x93NUMPY\x02\x00\x00\x00\x10\x00"), "{'descr'"...) // claims 1 MiB of header
	bigData := file("{'descr': '<f8', 'fortran_order': False, 'shape': (268435456,), }", make([]byte, 3<<20))
	for _, tc := range []struct {
		name string
		in   []byte
		want error
	}{
		{"shape 2^40 float64", huge, ErrShape}, // beyond MaxElements: refused by the header alone
		{"header length 1 MiB", longHeader, ErrFormat},
		{"2 GiB claimed, 3 MiB present", bigData, ErrData},
	} {
		for _, hide := range []bool{false, true} {
			var err error
			n := allocated(func() {
				var r io.Reader = bytes.NewReader(tc.in)
				if hide {
					r = onlyReader{r}
				}
				_, err = Read(r)
			})
			ensure.ErrorIs(t, err, tc.want, "%s hide=%v", tc.name, hide)
			limit := uint64(limit)
			if tc.name == "2 GiB claimed, 3 MiB present" && hide {
				limit = 4 * 3 << 20 // the buffer doubles as the 3 MiB arrive: its sizes sum to under four times that
			}
			expect.Less(t, n, limit, "%s hide=%v allocated %d bytes", tc.name, hide, n)
			t.Logf("%s hide=%v: %d bytes", tc.name, hide, n)
		}
	}
}

func TestStreamOfArrays(t *testing.T) {
	var buf bytes.Buffer
	a, _ := New(Float32, []int{3}, []float32{1, 2, 3})
	b, _ := New(Uint8, []int{2, 2}, []uint8{9, 8, 7, 6})
	ensure.NoError(t, Write(&buf, a))
	ensure.NoError(t, Write(&buf, b))
	r := onlyReader{&buf}
	got, err := Read(r)
	ensure.NoError(t, err)
	expect.Equal(t, a.Values, got.Values)
	got, err = Read(r)
	ensure.NoError(t, err)
	expect.Equal(t, b.Values, got.Values)
	_, err = Read(r)
	expect.ErrorIs(t, err, ErrFormat)
}

func TestFiles(t *testing.T) {
	dir := t.TempDir()
	a, err := New(Int64, []int{2, 2}, []int64{1, -2, 3, -4})
	ensure.NoError(t, err)
	p := filepath.Join(dir, "a.npy")
	ensure.NoError(t, WriteFile(p, a))
	got, err := ReadFile(p)
	ensure.NoError(t, err)
	expect.Equal(t, a.Values, got.Values)

	b, _ := os.ReadFile(p)
	ensure.NoError(t, os.WriteFile(p, append(b, 0), 0o644))
	_, err = ReadFile(p)
	ensure.ErrorIs(t, err, ErrData)
	expect.EqualError(t, err, "npy: data does not match the header: ReadFile: "+p+": bytes follow the 32 bytes of data that shape [2 2] of int64 needs; want the file to end there")

	ensure.NoError(t, os.WriteFile(p, b[:len(b)-1], 0o644))
	_, err = ReadFile(p)
	ensure.ErrorIs(t, err, ErrData)
	expect.EqualError(t, err, "npy: data does not match the header: ReadFile: "+p+": the data ends early (input ended early: 31 bytes remain); want the 32 bytes that shape [2 2] of int64 needs")
	bad := &Array{Header: Header{DType: Int64, Shape: []int{3}}, Values: []int64{1}}
	expect.EqualError(t, WriteFile(p, bad), "npy: values do not match the header: WriteFile: "+p+": Array.Values has 1 elements; want 3 for shape [3]")

	_, err = ReadFile(filepath.Join(dir, "missing.npy"))
	expect.ErrorIs(t, err, os.ErrNotExist)
	expect.Error(t, WriteFile(filepath.Join(dir, "no", "such", "dir.npy"), a))
}

func TestWriteErrors(t *testing.T) {
	tests := []struct {
		name string
		a    *Array
		want error
		says string // the whole message
	}{
		{"nil", nil, ErrValues, "npy: values do not match the header: Write: a = nil; want an Array"},
		{"unknown dtype", &Array{Header: Header{DType: 99}, Values: []float64{1}}, ErrDType, "npy: unsupported element type: Write: Array.DType = 99; want one of float64, float32, float16, int64, int32, int16, int8, uint32, uint16, uint8, bool"},
		{"zero dtype is float64", &Array{Values: []float32{1}}, ErrValues, "npy: values do not match the header: Write: Array.Values is a []float32; want a []float64 for DType float64"},
		{"wrong slice", &Array{Header: Header{DType: Float64, Shape: []int{1}}, Values: []float32{1}}, ErrValues, "npy: values do not match the header: Write: Array.Values is a []float32; want a []float64 for DType float64"},
		{"float16 needs bits", &Array{Header: Header{DType: Float16, Shape: []int{1}}, Values: []float32{1}}, ErrValues, "npy: values do not match the header: Write: Array.Values is a []float32; want a []uint16 for DType float16"},
		{"wrong length", &Array{Header: Header{DType: Int32, Shape: []int{2, 2}}, Values: []int32{1, 2, 3}}, ErrValues, "npy: values do not match the header: Write: Array.Values has 3 elements; want 4 for shape [2 2]"},
		{"negative", &Array{Header: Header{DType: Uint8, Shape: []int{-1}}, Values: []uint8{}}, ErrShape, "npy: invalid shape: Write: Array.Shape[0] = -1; want ≥ 0"},
		{"byte order", &Array{Header: Header{DType: Float32, ByteOrder: 7, Shape: []int{}}, Values: []float32{1}}, ErrDType, "npy: unsupported element type: Write: Array.ByteOrder = 7; want one of little-endian, big-endian"},
		{"version", &Array{Header: Header{Version: Version{4, 0}, DType: Uint8, Shape: []int{}}, Values: []uint8{1}}, ErrFormat, "npy: malformed file: Write: Array.Version = 4.0; want 1.0, 2.0, 3.0 or zero (choose)"},
		{"bits", &Array{Header: Header{DType: Uint8, Shape: []int{}}, Bits: BFloat16, Values: []uint8{1}}, ErrBits, "npy: bit interpretation does not fit the element type: Write: Array.Bits = bfloat16; want integer for DType uint8 (bfloat16 reads uint16, e4m3 and e5m2 uint8)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := Write(io.Discard, tc.a)
			ensure.ErrorIs(t, err, tc.want)
			expect.EqualError(t, err, tc.says)
		})
	}
}

type failWriter struct{}

var errDisk = errors.New("disk full")

func (failWriter) Write([]byte) (int, error) { return 0, errDisk }

func TestWriteReportsWriterError(t *testing.T) {
	a, _ := New(Float64, []int{1}, []float64{1})
	expect.ErrorIs(t, Write(failWriter{}, a), errDisk)
}

// A shape of 22000 dimensions of 1 makes a 66 kB header: too long for the
// 2-byte length of version 1.0 (65535), so Write picks 2.0 and refuses an
// explicit 1.0. Such a header is what version 2.0 exists for (format
// description, "Format Version 2.0").
func TestVersionChoice(t *testing.T) {
	shape := make([]int, 22000)
	for i := range shape {
		shape[i] = 1
	}
	a, err := New(Float32, shape, []float32{2.5})
	ensure.NoError(t, err)
	var buf bytes.Buffer
	ensure.NoError(t, Write(&buf, a))
	got, err := Read(&buf)
	ensure.NoError(t, err)
	expect.Equal(t, Version2, got.Version)
	expect.Equal(t, []float32{2.5}, got.Values)

	a.Version = Version1
	err = Write(io.Discard, a)
	ensure.ErrorIs(t, err, ErrFormat)
	expect.Regexp(t, `^npy: malformed file: Write: Array.Version = 1.0 with a header of \d+ bytes, which does not fit version 1.0; want at most 65535 bytes, or Version2, or zero \(choose\)$`, err.Error())

	a.Version = Version{}
	a.Shape = make([]int, MaxHeaderLen/3)
	a.Values = []float32{}
	expect.ErrorIs(t, Write(io.Discard, a), ErrShape)
}

func TestFloat64s(t *testing.T) {
	tests := []struct {
		name string
		a    Array
		want []float64
	}{
		// Values from the definitions of each type; binary16 0x3c00 = 1,
		// 0xc000 = −2 (IEEE 754-2019 §3.4); bfloat16 0x3f80 = 1 (upper half
		// of binary32 1.0 = 0x3f800000); E4M3 0x38 = 1 and E5M2 0x3c = 1
		// (exponent field = bias, OFP8 2023).
		{"float64", Array{Header: Header{DType: Float64}, Values: []float64{-1.5}}, []float64{-1.5}},
		{"float32", Array{Header: Header{DType: Float32}, Values: []float32{0.1}}, []float64{float64(float32(0.1))}},
		{"float16", Array{Header: Header{DType: Float16, Shape: []int{2}}, Values: []uint16{0x3c00, 0xc000}}, []float64{1, -2}},
		{"int64 2^53", Array{Header: Header{DType: Int64, Shape: []int{3}}, Values: []int64{1 << 53, math.MinInt64, -7}}, []float64{0x1p53, -0x1p63, -7}},
		{"int32", Array{Header: Header{DType: Int32}, Values: []int32{math.MinInt32}}, []float64{-0x1p31}},
		{"uint16 integer", Array{Header: Header{DType: Uint16}, Values: []uint16{0x3f80}}, []float64{0x3f80}},
		{"uint16 bfloat16", Array{Header: Header{DType: Uint16}, Bits: BFloat16, Values: []uint16{0x3f80}}, []float64{1}},
		{"uint8 integer", Array{Header: Header{DType: Uint8}, Values: []uint8{0x38}}, []float64{0x38}},
		{"uint8 e4m3", Array{Header: Header{DType: Uint8}, Bits: E4M3, Values: []uint8{0x38}}, []float64{1}},
		{"uint8 e5m2", Array{Header: Header{DType: Uint8}, Bits: E5M2, Values: []uint8{0x3c}}, []float64{1}},
		{"int16", Array{Header: Header{DType: Int16, Shape: []int{2}}, Values: []int16{math.MinInt16, 7}}, []float64{-0x1p15, 7}},
		{"int8", Array{Header: Header{DType: Int8, Shape: []int{2}}, Values: []int8{math.MinInt8, math.MaxInt8}}, []float64{-128, 127}},
		{"uint32", Array{Header: Header{DType: Uint32}, Values: []uint32{math.MaxUint32}}, []float64{0x1p32 - 1}},
		{"bool", Array{Header: Header{DType: Bool, Shape: []int{3}}, Values: []bool{true, false, true}}, []float64{1, 0, 1}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := tc.a.Float64s()
			ensure.NoError(t, err)
			expect.Equal(t, tc.want, got)
		})
	}

	for _, v := range []int64{1<<53 + 1, math.MaxInt64, -(1<<62 + 1)} {
		a := Array{Header: Header{DType: Int64, Shape: []int{2}}, Values: []int64{0, v}}
		_, err := a.Float64s()
		ensure.ErrorIs(t, err, ErrInexact, "%d", v)
		expect.Contains(t, err.Error(), "npy: value not exactly representable as float64: Array.Float64s: Array.Values[1] = ")
	}
	for _, a := range []Array{
		{Header: Header{DType: Uint16}, Bits: E4M3, Values: []uint16{1}},
		{Header: Header{DType: Float16}, Bits: BFloat16, Values: []uint16{1}},
		{Header: Header{DType: Float32}, Bits: E5M2, Values: []float32{1}},
		{Header: Header{DType: Uint8}, Bits: 9, Values: []uint8{1}},
	} {
		_, err := a.Float64s()
		expect.ErrorIs(t, err, ErrBits)
	}
	_, err := (&Array{Header: Header{DType: Float64}, Values: []float32{1}}).Float64s()
	expect.ErrorIs(t, err, ErrValues)
}

// TestZeroValues checks the documented defaults: an Array whose DType,
// ByteOrder and Bits are left zero is a little-endian float64 array read as
// numbers, written with descriptor '<f8' (NumPy's format description) and
// read back as float64.
func TestZeroValues(t *testing.T) {
	var h Header
	expect.Equal(t, Float64, h.DType)
	expect.Equal(t, LittleEndian, h.ByteOrder)
	expect.Equal(t, Integer, Array{}.Bits)
	expect.Equal(t, 8, h.DType.Size())

	var buf bytes.Buffer
	ensure.NoError(t, Write(&buf, &Array{Header: Header{Shape: []int{2}}, Values: []float64{2.5, -0.125}}))
	expect.Contains(t, buf.String(), "'descr': '<f8'")
	got, err := Read(bytes.NewReader(buf.Bytes()))
	ensure.NoError(t, err)
	expect.Equal(t, Float64, got.DType)
	expect.Equal(t, LittleEndian, got.ByteOrder)
	expect.Equal(t, []float64{2.5, -0.125}, got.Values)

	a, err := New(0, []int{}, []float64{3})
	ensure.NoError(t, err, "DType 0 is Float64")
	v, err := a.Float64s()
	ensure.NoError(t, err)
	expect.Equal(t, []float64{3}, v)
}

// TestWords checks the words of the convention types: the zero value is
// first, and any other text or value is an error wrapping ErrDType that
// lists the words. (Every word's round trip, for every convention, is
// checked in internal/vocab.)
func TestWords(t *testing.T) {
	expect.Equal(t, []DType{Float64, Float32, Float16, Int64, Int32, Int16, Int8, Uint32, Uint16, Uint8, Bool}, DType(0).Values())
	expect.Equal(t, []ByteOrder{LittleEndian, BigEndian}, ByteOrder(0).Values())
	expect.Equal(t, []Bits{Integer, BFloat16, E4M3, E5M2}, Bits(0).Values())
	var d DType
	err := d.UnmarshalText([]byte("float8"))
	ensure.ErrorIs(t, err, ErrDType)
	expect.Equal(t, `npy: unsupported element type: element type = "float8"; want one of float64, float32, float16, int64, int32, int16, int8, uint32, uint16, uint8, bool`, err.Error())
	expect.Equal(t, Float64, d, "a refused word leaves the value alone")
	// The common names of the floating-point types read as the types.
	for text, want := range map[string]DType{"fp64": Float64, "double": Float64, "FP32": Float32, "single": Float32,
		"fp16": Float16, "half": Float16, "binary16": Float16, "bool": Bool, "int8": Int8, "int16": Int16, "uint32": Uint32} {
		var got DType
		ensure.NoError(t, got.UnmarshalText([]byte(text)), text)
		expect.Equal(t, want, got, text)
	}
	err = DType(99).Check()
	ensure.ErrorIs(t, err, ErrDType)
	expect.Contains(t, err.Error(), "element type = 99; want one of float64")
	expect.ErrorIs(t, ByteOrder(2).Check(), ErrDType)
	_, err = ByteOrder(2).MarshalText()
	expect.ErrorIs(t, err, ErrDType)
	var b Bits
	err = b.UnmarshalText([]byte("e3m4"))
	ensure.ErrorIs(t, err, ErrDType)
	expect.Contains(t, err.Error(), "want one of integer, bfloat16, e4m3, e5m2")
}

func TestStrings(t *testing.T) {
	expect.Equal(t, "float16", Float16.String())
	expect.Equal(t, "float64", DType(0).String())
	expect.Equal(t, "DType(99)", DType(99).String())
	expect.Equal(t, "little-endian", ByteOrder(0).String())
	expect.Equal(t, "ByteOrder(7)", ByteOrder(7).String())
	expect.Equal(t, "integer", Bits(0).String())
	expect.Equal(t, 0, DType(99).Size())
	expect.Equal(t, "big-endian", BigEndian.String())
	expect.Equal(t, "3.0", Version3.String())
	expect.Equal(t, "e5m2", E5M2.String())
	expect.Equal(t, "Bits(9)", Bits(9).String())
	expect.Equal(t, -1, (&Header{Shape: []int{-2}}).Len())
	expect.Equal(t, 1, (&Header{}).Len())
}

// One attention tensor of batch 1, 16 heads, 2048 positions, head
// dimension 128, in float32 (16 MiB of data).
func benchArray(b *testing.B) *Array {
	shape := []int{1, 16, 2048, 128}
	v := make([]float32, 16*2048*128)
	for i := range v {
		v[i] = float32(i%1000) / 7
	}
	a, err := New(Float32, shape, v)
	ensure.NoError(b, err)
	return a
}

func BenchmarkWrite(b *testing.B) {
	a := benchArray(b)
	b.SetBytes(int64(a.Len() * 4))
	for b.Loop() {
		ensure.NoError(b, Write(io.Discard, a))
	}
}

func BenchmarkRead(b *testing.B) {
	for _, fortran := range []bool{false, true} {
		name := "C"
		if fortran {
			name = "Fortran"
		}
		b.Run(name, func(b *testing.B) {
			a := benchArray(b)
			a.FortranOrder = fortran
			var buf bytes.Buffer
			ensure.NoError(b, Write(&buf, a))
			data := buf.Bytes()
			b.SetBytes(int64(len(data)))
			for b.Loop() {
				_, err := Read(bytes.NewReader(data))
				ensure.NoError(b, err)
			}
		})
	}
}

// TestMaxElements: an array of more than MaxElements = 2^28 elements is
// refused with ErrShape by every function that reads or makes one, before
// its data are read or allocated; at the limit itself a header is
// accepted (a shape of exactly 2^28 fails later, on the missing data, in
// TestLyingHeaderDoesNotAllocate).
func TestMaxElements(t *testing.T) {
	ensure.Equal(t, 1<<28, MaxElements)
	over := "{'descr': '|u1', 'fortran_order': False, 'shape': (16384, 16385), }"
	_, err := ReadHeader(bytes.NewReader(file(over, nil)))
	ensure.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "npy: invalid shape: ReadHeader: 'shape' = [16384 16385], 268451840 elements; want at most MaxElements = 268435456")
	_, err = Read(bytes.NewReader(file(over, nil)))
	expect.EqualError(t, err, "npy: invalid shape: Read: 'shape' = [16384 16385], 268451840 elements; want at most MaxElements = 268435456")
	h, err := ReadHeader(bytes.NewReader(file("{'descr': '|u1', 'fortran_order': False, 'shape': (16384, 16384), }", nil)))
	ensure.NoError(t, err)
	expect.Equal(t, MaxElements, h.Len())

	_, err = New(Uint8, []int{MaxElements + 1}, []uint8{})
	ensure.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "npy: invalid shape: New: shape = [268435457], 268435457 elements; want at most MaxElements = 268435456")
	big := &Array{Header: Header{DType: Uint8, Shape: []int{1 << 14, 1 << 15}}, Values: []uint8{1}}
	_, err = big.Float64s()
	ensure.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "npy: invalid shape: Array.Float64s: Array.Shape = [16384 32768], 536870912 elements; want at most MaxElements = 268435456")
	err = Write(io.Discard, big)
	ensure.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "npy: invalid shape: Write: Array.Shape = [16384 32768], 536870912 elements; want at most MaxElements = 268435456")
}

// TestNilArguments: nil arrays, readers, writers and receivers are errors
// wrapping a sentinel, not panics. (The nil receivers of the convention
// types' UnmarshalText, for every convention, are checked in
// internal/vocab.)
func TestNilArguments(t *testing.T) {
	_, err := (*Array)(nil).Float64s()
	ensure.ErrorIs(t, err, ErrValues)
	expect.EqualError(t, err, "npy: values do not match the header: Array.Float64s: receiver = nil; want an Array")
	_, err = ReadHeader(nil)
	ensure.ErrorIs(t, err, ErrFormat)
	expect.EqualError(t, err, "npy: malformed file: ReadHeader: r = nil; want an io.Reader holding a .npy file")
	_, err = Read(nil)
	ensure.ErrorIs(t, err, ErrFormat)
	expect.EqualError(t, err, "npy: malformed file: Read: r = nil; want an io.Reader holding a .npy file")
	a, err := New(Float64, []int{1}, []float64{1})
	ensure.NoError(t, err)
	err = Write(nil, a)
	ensure.ErrorIs(t, err, ErrFormat)
	expect.EqualError(t, err, "npy: malformed file: Write: w = nil; want an io.Writer to write the .npy file to")
	err = Write(io.Discard, nil)
	ensure.ErrorIs(t, err, ErrValues)
	expect.EqualError(t, err, "npy: values do not match the header: Write: a = nil; want an Array")
	expect.Equal(t, -1, (*Header)(nil).Len())
}
