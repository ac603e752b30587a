package npy

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// The outside check: NumPy (Debian's python3-numpy under /usr/bin/python3)
// writes files that this package reads, and loads files this package
// writes. Each side states the expected values on its own: the writer puts
// them in a manifest as bit patterns (and, for floating-point types, as
// float64 hexadecimal strings), the reader compares.

const python = "/usr/bin/python3"

// needNumPy skips the test, saying why, when NumPy is not importable; in
// CI (the environment variable CI set to true, as .ci/run runs), which
// installs NumPy, its absence fails the test instead.
func needNumPy(t *testing.T) {
	t.Helper()
	out, err := exec.Command(python, "-c", "import numpy; print(numpy.__version__)").CombinedOutput()
	if err != nil {
		msg := fmt.Sprintf("outside check against NumPy: %s cannot import numpy (install python3-numpy to run it): %v: %s", python, err, bytes.TrimSpace(out))
		if os.Getenv("CI") == "true" {
			t.Fatal(msg + "; CI installs it, so this is a failure there")
		}
		t.Skip("skipped: " + msg)
	}
	t.Logf("NumPy %s", bytes.TrimSpace(out))
}

// manifestEntry describes one file: its header as the writer meant it, the
// bit pattern of every element row-major (as an unsigned integer of the
// element's size, in decimal), and for floating-point types the value as a
// float64 hexadecimal string.
type manifestEntry struct {
	File    string   `json:"file"`
	Descr   string   `json:"descr"`
	Shape   []int    `json:"shape"`
	Fortran bool     `json:"fortran"`
	Version []int    `json:"version"`
	Bits    []string `json:"bits"`
	Values  []string `json:"values,omitempty"`
}

// numpyWrites has NumPy write every supported type in both byte orders,
// both orders and all three versions with numpy.lib.format.write_array, a
// few more shapes, and all 65536 binary16 patterns with NumPy's float64
// conversion of them. Values come from NumPy's own generator.
const numpyWrites = `
import json, os, sys
import numpy as np
from numpy.lib import format as fmt

out = sys.argv[1]
rng = np.random.default_rng(7)

def values(code, n):
    if code[0] == 'f':
        t = np.dtype(code)
        info = np.finfo(t)
        special = [np.nan, np.inf, -np.inf, -0.0, float(info.max), float(info.tiny), float(info.smallest_subnormal)]
        v = np.concatenate([np.array(special, dtype=t), (rng.standard_normal(n) * 1000).astype(t)])
    elif code == 'b1':
        v = np.concatenate([np.array([True, False]), rng.integers(0, 2, size=n).astype(bool)])
    else:
        info = np.iinfo(np.dtype(code))
        v = np.concatenate([np.array([info.min, info.max, 1], dtype=code),
                            rng.integers(info.min, info.max, size=n, dtype=code, endpoint=True)])
    return v[:n]

manifest = []
def save(name, a, version):
    path = os.path.join(out, name)
    with open(path, 'wb') as f:
        fmt.write_array(f, a, version=version)
    le = a.astype(a.dtype.newbyteorder('<')) if a.dtype.itemsize > 1 else a
    flat = np.ascontiguousarray(le).ravel(order='C')
    e = {'file': name, 'descr': a.dtype.str, 'shape': list(a.shape),
         'fortran': bool(a.flags.f_contiguous and not a.flags.c_contiguous),
         'version': list(version),
         'bits': [str(int(x)) for x in flat.view('<u%d' % a.dtype.itemsize)]}
    if a.dtype.kind == 'f':
        e['values'] = [float(x).hex() for x in flat.astype('<f8')]
    manifest.append(e)

for code in ['f8', 'f4', 'f2', 'i8', 'i4', 'i2', 'i1', 'u4', 'u2', 'u1', 'b1']:
    for order in '<>':
        t = np.dtype(order + code)
        base = values(code, 24).reshape(2, 3, 4).astype(t)
        for fortran in (False, True):
            a = np.asfortranarray(base) if fortran else np.ascontiguousarray(base)
            for version in ((1, 0), (2, 0), (3, 0)):
                save('%s%s_%s_v%d.npy' % ('be' if order == '>' else 'le', code, 'F' if fortran else 'C', version[0]), a, version)
    for shape in [(), (0, 3), (5,), (1, 1)]:
        n = int(np.prod(shape))
        save('%s_shape%s.npy' % (code, '_'.join(map(str, shape))), values(code, max(n, 1))[:n].reshape(shape).astype(code), (1, 0))

allf2 = np.arange(65536, dtype='<u2').view('<f2')
np.save(os.path.join(out, 'f2_all.npy'), allf2)
with np.errstate(invalid='ignore'):
    np.save(os.path.join(out, 'f2_all_as_f8.npy'), allf2.astype('<f8'))

with open(os.path.join(out, 'manifest.json'), 'w') as f:
    json.dump(manifest, f)
`

// numpyLoads has NumPy load every file of a manifest written by the Go side
// and compare version, dtype, shape, memory order and bit patterns.
const numpyLoads = `
import json, os, sys
import numpy as np
from numpy.lib import format as fmt

out = sys.argv[1]
bad = 0
manifest = json.load(open(os.path.join(out, 'manifest.json')))
for e in manifest:
    path = os.path.join(out, e['file'])
    def fail(msg):
        global bad
        bad += 1
        print('FAIL %s: %s' % (e['file'], msg))
    with open(path, 'rb') as f:
        v = fmt.read_magic(f)
    if list(v) != e['version']:
        fail('version %r, want %r' % (v, e['version']))
    a = np.load(path, allow_pickle=False)
    if a.dtype.str != e['descr']:
        fail('dtype %s, want %s' % (a.dtype.str, e['descr']))
    if list(a.shape) != e['shape']:
        fail('shape %r, want %r' % (a.shape, e['shape']))
    if e['fortran'] and a.ndim > 1 and a.size > 1 and not a.flags.f_contiguous:
        fail('not loaded Fortran-contiguous')
    le = a.astype(a.dtype.newbyteorder('<')) if a.dtype.itemsize > 1 else a
    flat = np.ascontiguousarray(le).ravel(order='C').view('<u%d' % a.dtype.itemsize)
    got = [str(int(x)) for x in flat]
    if got != e['bits']:
        i = next((k for k in range(min(len(got), len(e['bits']))) if got[k] != e['bits'][k]), None)
        fail('bit patterns differ (first at element %r: %r, want %r)' % (i, got[i] if i is not None else None, e['bits'][i] if i is not None else None))
    if 'values' in e:
        want = np.array([float.fromhex(x) for x in e['values']])
        vals = flat.view(a.dtype.newbyteorder('<')).astype('<f8')
        same = (vals == want) | (np.isnan(vals) & np.isnan(want))
        # NaN has no signed spelling in a hexadecimal string: its bits were compared above.
        if not same.all() or ((np.signbit(vals) != np.signbit(want)) & ~np.isnan(want)).any():
            fail('values differ from the float64 the writer stated')
print('checked %d files, %d failures' % (len(manifest), bad))
sys.exit(1 if bad else 0)
`

func runPython(t *testing.T, script, dir string) {
	t.Helper()
	out, err := exec.Command(python, "-c", script, dir).CombinedOutput()
	ensure.NoError(t, err, "NumPy script failed:\n%s", out)
	t.Logf("%s", bytes.TrimSpace(out))
}

// wantDType maps NumPy's dtype.str to the type and byte order, written out
// here rather than taken from the package's parser.
var wantDType = map[string]struct {
	dt DType
	bo ByteOrder
}{
	"<f8": {Float64, LittleEndian}, ">f8": {Float64, BigEndian},
	"<f4": {Float32, LittleEndian}, ">f4": {Float32, BigEndian},
	"<f2": {Float16, LittleEndian}, ">f2": {Float16, BigEndian},
	"<i8": {Int64, LittleEndian}, ">i8": {Int64, BigEndian},
	"<i4": {Int32, LittleEndian}, ">i4": {Int32, BigEndian},
	"<u2": {Uint16, LittleEndian}, ">u2": {Uint16, BigEndian},
	"<i2": {Int16, LittleEndian}, ">i2": {Int16, BigEndian},
	"<u4": {Uint32, LittleEndian}, ">u4": {Uint32, BigEndian},
	"|u1": {Uint8, LittleEndian}, "|i1": {Int8, LittleEndian}, "|b1": {Bool, LittleEndian},
}

// bitStrings returns the bit pattern of each element as a decimal string.
func bitStrings(v any) []string {
	out := []string{}
	add := func(u uint64) { out = append(out, strconv.FormatUint(u, 10)) }
	switch v := v.(type) {
	case []float64:
		for _, x := range v {
			add(math.Float64bits(x))
		}
	case []float32:
		for _, x := range v {
			add(uint64(math.Float32bits(x)))
		}
	case []int64:
		for _, x := range v {
			add(uint64(x))
		}
	case []int32:
		for _, x := range v {
			add(uint64(uint32(x)))
		}
	case []uint16:
		for _, x := range v {
			add(uint64(x))
		}
	case []uint8:
		for _, x := range v {
			add(uint64(x))
		}
	case []int16:
		for _, x := range v {
			add(uint64(uint16(x)))
		}
	case []int8:
		for _, x := range v {
			add(uint64(uint8(x)))
		}
	case []uint32:
		for _, x := range v {
			add(uint64(x))
		}
	case []bool:
		for _, x := range v {
			if x {
				add(1)
			} else {
				add(0)
			}
		}
	}
	return out
}

func TestNumPyWritesGoReads(t *testing.T) {
	needNumPy(t)
	dir := t.TempDir()
	runPython(t, numpyWrites, dir)
	raw, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	ensure.NoError(t, err)
	var manifest []manifestEntry
	ensure.NoError(t, json.Unmarshal(raw, &manifest))
	ensure.Len(t, manifest, 11*2*2*3+11*4, "every combination written")

	for _, e := range manifest {
		path := filepath.Join(dir, e.File)
		a, err := ReadFile(path)
		ensure.NoError(t, err, e.File)
		want, ok := wantDType[e.Descr]
		ensure.True(t, ok, "%s: descr %s", e.File, e.Descr)
		expect.Equal(t, Header{Version: Version{uint8(e.Version[0]), uint8(e.Version[1])}, DType: want.dt, ByteOrder: want.bo, FortranOrder: e.Fortran, Shape: e.Shape}, a.Header, e.File)
		ensure.Equal(t, e.Bits, bitStrings(a.Values), e.File)
		if e.Values != nil {
			f, err := a.Float64s()
			ensure.NoError(t, err)
			for i, s := range e.Values {
				w, err := strconv.ParseFloat(s, 64)
				ensure.NoError(t, err, s)
				if math.IsNaN(w) {
					ensure.True(t, math.IsNaN(f[i]), "%s element %d: %v, want NaN", e.File, i, f[i])
					continue
				}
				ensure.Equal(t, math.Float64bits(w), math.Float64bits(f[i]), "%s element %d: %v, want %v", e.File, i, f[i], w)
			}
		}
		// Written back with the header read, the bytes are NumPy's.
		var buf bytes.Buffer
		ensure.NoError(t, Write(&buf, a))
		orig, err := os.ReadFile(path)
		ensure.NoError(t, err)
		ensure.Equal(t, orig, buf.Bytes(), "%s: Write differs from NumPy's bytes", e.File)
	}

	// All 65536 binary16 patterns: Float64s (which decodes with
	// compare.Binary16) against NumPy's float64 conversion, bit for bit (for
	// NaN: NaN-ness only; the payload and sign are not carried).
	f2, err := ReadFile(filepath.Join(dir, "f2_all.npy"))
	ensure.NoError(t, err)
	f8, err := ReadFile(filepath.Join(dir, "f2_all_as_f8.npy"))
	ensure.NoError(t, err)
	bits, numpy := f2.Values.([]uint16), f8.Values.([]float64)
	ensure.Len(t, bits, 1<<16)
	ensure.Len(t, numpy, 1<<16)
	decoded, err := f2.Float64s()
	ensure.NoError(t, err)
	for i, b := range bits {
		got, want := decoded[i], numpy[i]
		ok := uint16(i) == b && math.Float64bits(got) == math.Float64bits(want)
		if math.IsNaN(want) {
			ok = uint16(i) == b && math.IsNaN(got)
		}
		if !ok {
			t.Fatalf("pattern %d (%#04x): Float64s %v, NumPy %v", i, b, got, want)
		}
	}
}

func TestGoWritesNumPyReads(t *testing.T) {
	needNumPy(t)
	dir := t.TempDir()
	r := rand.New(rand.NewPCG(3, 4))
	var manifest []manifestEntry
	descr := map[DType]string{Float64: "f8", Float32: "f4", Float16: "f2", Int64: "i8", Int32: "i4", Int16: "i2", Int8: "i1",
		Uint32: "u4", Uint16: "u2", Uint8: "u1", Bool: "b1"}
	save := func(a *Array) {
		name := fmt.Sprintf("go%02d.npy", len(manifest))
		ensure.NoError(t, WriteFile(filepath.Join(dir, name), a))
		mark := "<"
		switch {
		case a.DType.Size() == 1:
			mark = "|"
		case a.ByteOrder == BigEndian:
			mark = ">"
		}
		v := a.Version
		if v == (Version{}) {
			v = Version1
		}
		e := manifestEntry{File: name, Descr: mark + descr[a.DType], Shape: a.Shape, Fortran: a.FortranOrder,
			Version: []int{int(v.Major), int(v.Minor)}, Bits: bitStrings(a.Values)}
		if a.DType == Float64 || a.DType == Float32 || a.DType == Float16 {
			f, err := a.Float64s()
			ensure.NoError(t, err)
			for _, x := range f {
				e.Values = append(e.Values, strconv.FormatFloat(x, 'x', -1, 64))
			}
		}
		if e.Shape == nil {
			e.Shape = []int{}
		}
		manifest = append(manifest, e)
	}
	for _, dt := range allDTypes {
		for _, bo := range []ByteOrder{LittleEndian, BigEndian} {
			for _, fortran := range []bool{false, true} {
				for _, ver := range []Version{{}, Version1, Version2, Version3} {
					shape := []int{2, 3, 4}
					save(&Array{Header: Header{Version: ver, DType: dt, ByteOrder: bo, FortranOrder: fortran, Shape: shape}, Values: randomValues(dt, 24, r)})
				}
			}
		}
		for _, shape := range [][]int{{}, {0, 3}, {5}, {1, 1}} {
			n, _ := count("test", "shape", shape)
			save(&Array{Header: Header{DType: dt, Shape: shape}, Values: randomValues(dt, n, r)})
		}
	}
	raw, err := json.Marshal(manifest)
	ensure.NoError(t, err)
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "manifest.json"), raw, 0o644))
	runPython(t, numpyLoads, dir)
}

// numpyWritesArchives has NumPy write two .npz archives of every supported
// type (numpy.savez stores, numpy.savez_compressed deflates), keyword and
// positional names, and a manifest entry per member ("file" is
// ARCHIVE:NAME).
const numpyWritesArchives = `
import json, os, sys
import numpy as np

out = sys.argv[1]
rng = np.random.default_rng(11)
arrays = {}
for code in ['<f8', '>f4', '<f2', '<i8', '<i4', '>i2', '|i1', '<u4', '<u2', '|u1', '|b1']:
    t = np.dtype(code)
    if t.kind == 'b':
        v = rng.integers(0, 2, size=6).astype(bool)
    elif t.kind == 'f':
        v = (rng.standard_normal(6) * 100).astype(t)
    else:
        info = np.iinfo(t)
        v = rng.integers(info.min, info.max, size=6, dtype=t.newbyteorder('='), endpoint=True).astype(t)
    arrays['x_' + t.name] = v.reshape(2, 3)
manifest = []
for name, save in (('stored.npz', np.savez), ('deflated.npz', np.savez_compressed)):
    save(os.path.join(out, name), np.arange(3.0), **arrays)
    members = dict(arrays, arr_0=np.arange(3.0))
    for k, a in members.items():
        le = a.astype(a.dtype.newbyteorder('<')) if a.dtype.itemsize > 1 else a
        flat = np.ascontiguousarray(le).ravel()
        manifest.append({'file': name + ':' + k, 'descr': a.dtype.str, 'shape': list(a.shape),
                         'fortran': False, 'version': [1, 0],
                         'bits': [str(int(x)) for x in flat.view('<u%d' % a.dtype.itemsize)]})
with open(os.path.join(out, 'manifest.json'), 'w') as f:
    json.dump(manifest, f)
`

// numpyLoadsArchives has NumPy load the archive a.npz written by the Go
// side and compare each member with the manifest (file ARCHIVE:NAME).
const numpyLoadsArchives = `
import json, os, sys
import numpy as np

out = sys.argv[1]
bad = 0
manifest = json.load(open(os.path.join(out, 'manifest.json')))
opened = {}
for e in manifest:
    archive, name = e['file'].split(':')
    if archive not in opened:
        opened[archive] = np.load(os.path.join(out, archive), allow_pickle=False)
    z = opened[archive]
    a = z[name]
    flat = np.ascontiguousarray(a.astype(a.dtype.newbyteorder('<')) if a.dtype.itemsize > 1 else a).ravel()
    got = [str(int(x)) for x in flat.view('<u%d' % a.dtype.itemsize)]
    if a.dtype.str != e['descr'] or list(a.shape) != e['shape'] or got != e['bits']:
        bad += 1
        print('FAIL %s: %s %r, want %s %r' % (e['file'], a.dtype.str, a.shape, e['descr'], e['shape']))
for archive, z in opened.items():
    want = sorted(x['file'].split(':')[1] for x in manifest if x['file'].startswith(archive + ':'))
    if sorted(z.files) != want:
        bad += 1
        print('FAIL %s: members %r, want %r' % (archive, sorted(z.files), want))
print('checked %d members, %d failures' % (len(manifest), bad))
sys.exit(1 if bad else 0)
`

// Archives written by numpy.savez and numpy.savez_compressed read here,
// member by member, with NumPy's types, shapes and bit patterns.
func TestNumPyArchivesGoReads(t *testing.T) {
	needNumPy(t)
	dir := t.TempDir()
	runPython(t, numpyWritesArchives, dir)
	raw, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	ensure.NoError(t, err)
	var manifest []manifestEntry
	ensure.NoError(t, json.Unmarshal(raw, &manifest))
	ensure.Len(t, manifest, 2*12)
	archives := map[string]*Archive{}
	for _, e := range manifest {
		name, member, _ := strings.Cut(e.File, ":")
		a, ok := archives[name]
		if !ok {
			a, err = OpenArchive(filepath.Join(dir, name))
			ensure.NoError(t, err, name)
			defer a.Close()
			archives[name] = a
			expect.Len(t, a.Names(), 12, name)
		}
		got, err := a.Read(member)
		ensure.NoError(t, err, e.File)
		want, ok := wantDType[e.Descr]
		ensure.True(t, ok, e.Descr)
		expect.Equal(t, Header{Version: Version1, DType: want.dt, ByteOrder: want.bo, Shape: e.Shape}, got.Header, e.File)
		expect.Equal(t, e.Bits, bitStrings(got.Values), e.File)
	}
	ensure.Len(t, archives, 2)
}

// Archives written here, stored and deflated, load in NumPy with the
// types, shapes and bit patterns written.
func TestGoArchivesNumPyReads(t *testing.T) {
	needNumPy(t)
	dir := t.TempDir()
	r := rand.New(rand.NewPCG(12, 13))
	var manifest []manifestEntry
	descr := map[DType]string{Float64: "f8", Float32: "f4", Float16: "f2", Int64: "i8", Int32: "i4", Int16: "i2", Int8: "i1",
		Uint32: "u4", Uint16: "u2", Uint8: "u1", Bool: "b1"}
	for _, c := range []struct {
		file     string
		compress bool
	}{{"stored.npz", false}, {"deflated.npz", true}} {
		f, err := os.Create(filepath.Join(dir, c.file))
		ensure.NoError(t, err)
		w := NewArchiveWriter(f, c.compress)
		for i, dt := range allDTypes {
			bo := ByteOrder(i % 2)
			a := &Array{Header: Header{DType: dt, ByteOrder: bo, FortranOrder: i%3 == 0, Shape: []int{3, 2}}, Values: randomValues(dt, 6, r)}
			name := "m_" + dt.String()
			ensure.NoError(t, w.Add(name, a))
			mark := "<"
			switch {
			case dt.Size() == 1:
				mark = "|"
			case bo == BigEndian:
				mark = ">"
			}
			manifest = append(manifest, manifestEntry{File: c.file + ":" + name, Descr: mark + descr[dt], Shape: a.Shape, Bits: bitStrings(a.Values)})
		}
		ensure.NoError(t, w.Close())
		ensure.NoError(t, f.Close())
	}
	raw, err := json.Marshal(manifest)
	ensure.NoError(t, err)
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "manifest.json"), raw, 0o644))
	runPython(t, numpyLoadsArchives, dir)
}
