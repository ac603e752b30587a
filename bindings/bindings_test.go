// Package bindings_test checks the two files a port in another language
// uses beside the plumb command: the Python module python/plumbcheck.py
// (its own unittest suite, run against the built plumb, and its bit
// patterns against package compare's for dense samples) and the C header
// c/plumb_npy.h (a test program compiled with cc writes files that plumb
// and package npy read back bit for bit).
//
// The tests need Debian's /usr/bin/python3 with numpy and a C compiler;
// without them they are skipped, except under CI (CI set), where they
// fail.
package bindings_test

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/testbin"
	"github.com/plumbref/plumb/npy"
)

// python is Debian's interpreter, which has python3-numpy.
const python = "/usr/bin/python3"

// plumbBin is the plumb command, built once.
var plumbBin string

func TestMain(m *testing.M) { testbin.Main(m, "../cmd/plumb", &plumbBin) }

// need skips the test when the tool is missing, or fails it under CI.
func need(t *testing.T, what string, err error) {
	t.Helper()
	if err == nil {
		return
	}
	if os.Getenv("CI") != "" {
		t.Fatalf("%s is missing under CI: %v", what, err)
	}
	t.Skipf("%s is missing (%v); skipped", what, err)
}

// needNumpy skips (or fails under CI) without numpy.
func needNumpy(t *testing.T) {
	t.Helper()
	out, err := exec.Command(python, "-c", "import numpy").CombinedOutput()
	if err != nil {
		err = fmt.Errorf("%w: %s", err, bytes.TrimSpace(out))
	}
	need(t, python+" with numpy (apt-get install python3-numpy)", err)
}

// TestPythonModule runs the module's own tests (unittest) against the
// plumb just built: every test must run, none skipped.
func TestPythonModule(t *testing.T) {
	needNumpy(t)
	cmd := exec.Command(python, "-m", "unittest", "-v", "test_plumbcheck")
	cmd.Dir = "python"
	cmd.Env = append(os.Environ(), "PLUMBCHECK_BINARY="+plumbBin, "PLUMBCHECK_REQUIRE_BINARY=1", "PYTHONDONTWRITEBYTECODE=1")
	out, err := cmd.CombinedOutput()
	ensure.NoError(t, err, "%s", out)
	s := string(out)
	m := regexp.MustCompile(`(?m)^Ran (\d+) tests? in`).FindStringSubmatch(s)
	ensure.NotNil(t, m, "%s", s)
	n, _ := strconv.Atoi(m[1])
	expect.GreaterOrEqual(t, n, 12, "%s", s)
	expect.Regexp(t, `(?m)^OK$`, s, "every test passed and none was skipped")
	expect.NotContains(t, s, "skipped")
}

// denseFloat32 is every float32 whose top 16 bits are any of the 65536
// patterns and whose low 16 bits are one of lows: ties and near-ties of
// bfloat16 (0x8000) and of binary16 at each exponent of its subnormals
// (0x1000, 0x2000, 0x4000), so NaNs, infinities, zeros and float32
// subnormals included. The C test program builds the same sample.
func denseFloat32() []uint32 {
	lows := []uint32{0x0000, 0x0001, 0x0fff, 0x1000, 0x1001, 0x1fff, 0x2000, 0x2001, 0x3fff,
		0x4000, 0x4001, 0x7fff, 0x8000, 0x8001, 0xc000, 0xffff, 0x1234, 0xc3a5}
	out := make([]uint32, 0, 65536*len(lows))
	for hi := uint32(0); hi < 65536; hi++ {
		for _, lo := range lows {
			out = append(out, hi<<16|lo)
		}
	}
	return out
}

// float64Sample holds values that need one rounding from float64: the
// midpoint of every two neighbouring values of each 8- and 16-bit format
// (a tie) and the float64 neighbours on each side of it, random values of
// every exponent, and the edges (±0, ±Inf, NaN, the largest float64, the
// smallest subnormal).
func float64Sample() []float64 {
	var x []float64
	for _, f := range []compare.Format{compare.BFloat16, compare.E4M3, compare.E5M2} {
		for b := uint64(0); b+1 < 1<<f.Width(); b++ {
			lo, _ := f.Decode(b)
			hi, _ := f.Decode(b + 1)
			if !finiteF(lo) || !finiteF(hi) || lo == hi {
				continue
			}
			mid := lo/2 + hi/2
			x = append(x, mid, math.Nextafter(mid, math.Inf(1)), math.Nextafter(mid, math.Inf(-1)))
		}
		// Past the largest value: the tie to the next binade and beyond.
		top := f.Max() + f.ULP(f.Max())/2
		x = append(x, top, -top, math.Nextafter(top, 0), math.Nextafter(top, math.Inf(1)), 2*f.Max())
	}
	r := rand.New(rand.NewPCG(1, 2))
	for range 100000 {
		x = append(x, math.Ldexp(1+r.Float64(), r.IntN(400)-200)*float64(1-2*r.IntN(2)))
	}
	return append(x, 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64)
}

func finiteF(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// encodeScript encodes the samples in every format, both overflow modes,
// and decodes every pattern, with plumbcheck.
const encodeScript = `
import sys
import numpy as np
sys.path.insert(0, "python")
import plumbcheck as pc
d = sys.argv[1]
x32 = np.load(d + "/x32.npy")
x64 = np.load(d + "/x64.npy")
for fmt in ("bfloat16", "e4m3", "e5m2"):
    for sat in (False, True):
        for name, x in (("32", x32), ("64", x64)):
            np.save("%s/enc_%s_%d_%s.npy" % (d, fmt, sat, name), pc.encode(x, fmt, saturate=sat))
    w = pc.FORMATS[fmt].width
    np.save("%s/dec_%s.npy" % (d, fmt), pc.decode(np.arange(1 << w), fmt))
`

// TestPythonEncodingsMatchCompare: plumbcheck.encode gives compare's
// Encode (EncodeSaturating) bit for bit on every value of the samples, and
// plumbcheck.decode compare's Decode on every pattern.
func TestPythonEncodingsMatchCompare(t *testing.T) {
	needNumpy(t)
	dir := t.TempDir()
	u32 := denseFloat32()
	x32 := make([]float32, len(u32))
	for i, u := range u32 {
		x32[i] = math.Float32frombits(u)
	}
	write(t, filepath.Join(dir, "x32.npy"), npy.Float32, []int{len(x32)}, x32)
	x64 := float64Sample()
	write(t, filepath.Join(dir, "x64.npy"), npy.Float64, []int{len(x64)}, x64)
	cmd := exec.Command(python, "-c", encodeScript, dir)
	cmd.Env = append(os.Environ(), "PYTHONDONTWRITEBYTECODE=1")
	out, err := cmd.CombinedOutput()
	ensure.NoError(t, err, "%s", out)

	for _, f := range []compare.Format{compare.BFloat16, compare.E4M3, compare.E5M2} {
		for _, sat := range []bool{false, true} {
			enc := f.Encode
			if sat {
				enc = f.EncodeSaturating
			}
			for _, in := range []struct {
				name string
				x    func(i int) float64
				n    int
			}{
				{"32", func(i int) float64 { return float64(x32[i]) }, len(x32)},
				{"64", func(i int) float64 { return x64[i] }, len(x64)},
			} {
				got := patterns(t, filepath.Join(dir, fmt.Sprintf("enc_%v_%d_%s.npy", f, b2i(sat), in.name)))
				ensure.Len(t, got, in.n)
				bad := 0
				for i, g := range got {
					if want := enc(in.x(i)); g != want {
						if bad < 5 {
							t.Errorf("%v saturating=%v: encode(%v = %#x) = %#x; want %#x", f, sat, in.x(i), math.Float64bits(in.x(i)), g, want)
						}
						bad++
					}
				}
				expect.Zero(t, bad, "%v saturating=%v, float%s sample: %d of %d differ", f, sat, in.name, bad, in.n)
			}
		}
		a, err := npy.ReadFile(filepath.Join(dir, fmt.Sprintf("dec_%v.npy", f)))
		ensure.NoError(t, err)
		dec := a.Values.([]float64)
		ensure.Len(t, dec, 1<<f.Width())
		for b, v := range dec {
			want, err := f.Decode(uint64(b))
			ensure.NoError(t, err)
			if math.Float64bits(v) != math.Float64bits(want) && !(math.IsNaN(v) && math.IsNaN(want)) {
				t.Errorf("%v: decode(%#x) = %v; want %v", f, b, v, want)
			}
		}
	}
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// patterns reads a uint16 or uint8 .npy file as bit patterns.
func patterns(t *testing.T, path string) []uint64 {
	t.Helper()
	a, err := npy.ReadFile(path)
	ensure.NoError(t, err)
	var out []uint64
	switch v := a.Values.(type) {
	case []uint16:
		for _, x := range v {
			out = append(out, uint64(x))
		}
	case []uint8:
		for _, x := range v {
			out = append(out, uint64(x))
		}
	default:
		t.Fatalf("%s holds %v; want uint16 or uint8 bit patterns", path, a.DType)
	}
	return out
}

func write(t *testing.T, path string, dt npy.DType, shape []int, values any) {
	t.Helper()
	a, err := npy.New(dt, shape, values)
	ensure.NoError(t, err)
	ensure.NoError(t, npy.WriteFile(path, a))
}

// compileC compiles the test program with the compiler cc (C99, or C++ as
// cxx), warnings as errors, and returns the binary.
func compileC(t *testing.T, cc string, cxx bool) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "test_plumb_npy")
	args := []string{"-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", "-O2", "-I", "c", "c/test_plumb_npy.c", "-o", bin}
	if cxx {
		args = append([]string{"-x", "c++", "-std=c++11"}, args[1:]...)
	}
	out, err := exec.Command(cc, args...).CombinedOutput()
	ensure.NoError(t, err, "%s %s\n%s", cc, strings.Join(args, " "), out)
	return bin
}

// TestCHeader: the files the C program writes are what package npy
// writes for the same arrays, byte for byte; their values are the ones
// the program put in; its bfloat16 and binary16 roundings are compare's
// on the dense sample; and plumb diff and check read them.
func TestCHeader(t *testing.T) {
	cc, err := exec.LookPath("cc")
	need(t, "a C compiler cc (apt-get install gcc)", err)
	bins := map[string]string{"c99": compileC(t, cc, false)}
	if cxx, err := exec.LookPath("c++"); err == nil {
		bins["c++"] = compileC(t, cxx, true) // the header compiles as C++ too
	}
	for lang, bin := range bins {
		t.Run(lang, func(t *testing.T) {
			dir := t.TempDir()
			out, err := exec.Command(bin, dir).CombinedOutput()
			ensure.NoError(t, err, "%s", out)
			checkCFiles(t, dir)
		})
	}
}

func checkCFiles(t *testing.T, dir string) {
	bf16 := func(x float32) uint16 { return uint16(compare.BFloat16.Encode(float64(x))) }
	big := make([]float32, 300*7)
	for i := range big {
		big[i] = float32(i) * 0.5
	}
	for _, c := range []struct {
		file   string
		dt     npy.DType
		shape  []int
		values any
	}{
		{"f64.npy", npy.Float64, []int{2, 3}, []float64{0.1, -0.25, 1e-300, math.Copysign(0, -1), 1.0 / 3.0, 6.02e23}},
		{"f32.npy", npy.Float32, []int{4}, []float32{1.5, float32(math.Copysign(0, -1)), math.MaxFloat32, math.SmallestNonzeroFloat32}},
		{"f16.npy", npy.Float16, []int{3, 2}, []uint16{0x3c00, 0xc000, 0x7bff, 0x0001, 0x7c00, 0x8000}},
		{"bf16.npy", npy.Uint16, []int{2, 2, 2}, []uint16{bf16(1), bf16(-2), bf16(3.14159), bf16(1e-40), bf16(65504), bf16(-1e30), bf16(0.1), bf16(7)}},
		{"fp8.npy", npy.Uint8, []int{5}, []uint8{0x7e, 0x01, 0x80, 0x38, 0xfe}},
		{"scalar.npy", npy.Float32, []int{}, []float32{2.5}},
		{"empty.npy", npy.Float32, []int{0, 3}, []float32{}},
		{"big.npy", npy.Float32, []int{300, 7}, big},
	} {
		t.Run(c.file, func(t *testing.T) {
			gotBytes, err := os.ReadFile(filepath.Join(dir, c.file))
			ensure.NoError(t, err)
			a, err := npy.New(c.dt, c.shape, c.values)
			ensure.NoError(t, err)
			var want bytes.Buffer
			ensure.NoError(t, npy.Write(&want, a))
			expect.Equal(t, want.Bytes(), gotBytes, "the bytes npy.Write (and numpy.save) write")
			expect.Equal(t, 0, (bytes.IndexByte(gotBytes, '\n')+1)%64, "the data start on a multiple of 64 bytes")
			r, err := npy.ReadFile(filepath.Join(dir, c.file))
			ensure.NoError(t, err)
			expect.Equal(t, c.dt, r.DType)
			expect.Equal(t, c.shape, r.Shape)
			expect.Equal(t, c.values, r.Values)
		})
	}

	// numpy.save writes the same bytes, where numpy is at hand.
	if exec.Command(python, "-c", "import numpy").Run() == nil {
		out, err := exec.Command(python, "-c", `
import io, sys
import numpy as np
for f in sys.argv[1:]:
    b = io.BytesIO()
    np.save(b, np.load(f))
    if b.getvalue() != open(f, "rb").read():
        sys.exit(f + ": numpy.save writes other bytes")
`, filepath.Join(dir, "f64.npy"), filepath.Join(dir, "f32.npy"), filepath.Join(dir, "f16.npy"), filepath.Join(dir, "bf16.npy"),
			filepath.Join(dir, "fp8.npy"), filepath.Join(dir, "scalar.npy"), filepath.Join(dir, "empty.npy"), filepath.Join(dir, "big.npy")).CombinedOutput()
		expect.NoError(t, err, "%s", out)
	}

	// The roundings on the dense sample.
	sample := denseFloat32()
	a, err := npy.ReadFile(filepath.Join(dir, "sample_f32.npy"))
	ensure.NoError(t, err)
	x := a.Values.([]float32)
	ensure.Len(t, x, len(sample))
	for i, u := range sample {
		ensure.Equal(t, u, math.Float32bits(x[i]), "sample element %d", i)
	}
	for _, f := range []compare.Format{compare.BFloat16, compare.Binary16} {
		name := map[compare.Format]string{compare.BFloat16: "sample_bf16.npy", compare.Binary16: "sample_f16.npy"}[f]
		got := patterns16(t, filepath.Join(dir, name))
		ensure.Len(t, got, len(x))
		bad := 0
		for i, g := range got {
			if want := f.Encode(float64(x[i])); uint64(g) != want {
				if bad < 5 {
					t.Errorf("%v: plumb_*_from_f32(%#x) = %#x; want %#x", f, sample[i], g, want)
				}
				bad++
			}
		}
		expect.Zero(t, bad, "%v: %d of %d differ", f, bad, len(x))
	}

	// plumb reads them: each file against the values it must hold, exactly.
	for _, c := range []struct {
		file, format string
		shape        []int
		ref          []float64
	}{
		{"f64.npy", "", []int{2, 3}, []float64{0.1, -0.25, 1e-300, math.Copysign(0, -1), 1.0 / 3.0, 6.02e23}},
		{"f32.npy", "", []int{4}, []float64{1.5, 0, math.MaxFloat32, math.SmallestNonzeroFloat32}},
		{"f16.npy", "", []int{3, 2}, []float64{1, -2, 65504, math.Ldexp(1, -24), math.Inf(1), 0}},
		{"bf16.npy", "bfloat16", []int{2, 2, 2}, decodeAll(compare.BFloat16, []float32{1, -2, 3.14159, 1e-40, 65504, -1e30, 0.1, 7})},
		{"fp8.npy", "e4m3", []int{5}, []float64{448, math.Ldexp(1, -9), 0, 1, -448}},
		{"big.npy", "", []int{300, 7}, widen(big)},
	} {
		ref := filepath.Join(dir, "ref_"+c.file)
		write(t, ref, npy.Float64, c.shape, c.ref)
		args := []string{"diff", "-abs", "0", "-quiet"}
		if c.format != "" {
			args = append(args, "-format", c.format)
		}
		o, e, code := runPlumb(t, append(args, ref, filepath.Join(dir, c.file))...)
		expect.Equal(t, 0, code, "plumb %v\n%s%s", args, o, e)
		expect.Contains(t, o, "verdict: PASS", c.file)
		// One value changed fails: the diff can tell.
		wrong := append([]float64(nil), c.ref...)
		wrong[0] = 0.5 + wrong[0]
		write(t, ref, npy.Float64, c.shape, wrong)
		_, _, code = runPlumb(t, append(args, ref, filepath.Join(dir, c.file))...)
		expect.Equal(t, 1, code, "%s against a changed reference", c.file)
	}
	// And as the inputs and the candidate of plumb check: relu of values
	// ≥ 0 is the values.
	cfg := filepath.Join(dir, "relu.json")
	ensure.NoError(t, os.WriteFile(cfg, []byte(`{"version": 1, "function": "relu"}`), 0o644))
	o, e, code := runPlumb(t, "check", "-quiet", "activation", "-config", cfg, "x="+filepath.Join(dir, "big.npy"), "-got", "y="+filepath.Join(dir, "big.npy"))
	expect.Equal(t, 0, code, "%s%s", o, e)
	expect.Contains(t, o, "candidate format float32")
}

func patterns16(t *testing.T, path string) []uint16 {
	a, err := npy.ReadFile(path)
	ensure.NoError(t, err)
	switch v := a.Values.(type) {
	case []uint16:
		return v
	}
	t.Fatalf("%s holds %v; want 16-bit patterns", path, a.DType)
	return nil
}

func decodeAll(f compare.Format, x []float32) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = f.Round(float64(v))
	}
	return out
}

func widen(x []float32) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = float64(v)
	}
	return out
}

// runPlumb runs the built plumb and returns its stdout, stderr and exit
// status.
func runPlumb(t *testing.T, args ...string) (string, string, int) {
	t.Helper()
	cmd := exec.Command(plumbBin, args...)
	var o, e bytes.Buffer
	cmd.Stdout, cmd.Stderr = &o, &e
	err := cmd.Run()
	code := 0
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatalf("running plumb %v: %v", args, err)
	}
	return o.String(), e.String(), code
}

// readmeSection is the section of README.md on the bindings, from its
// marker to the next section, and its fenced blocks by language, in order.
func readmeSection(t *testing.T) map[string][]string {
	t.Helper()
	b, err := os.ReadFile("../README.md")
	ensure.NoError(t, err)
	_, sec, ok := strings.Cut(string(b), "<!-- bindings:")
	ensure.True(t, ok, "README.md has no bindings marker")
	sec, _, _ = strings.Cut(sec, "\n## ")
	blocks := map[string][]string{}
	for _, m := range regexp.MustCompile("(?ms)^```(\\w+)\n(.*?)^```$").FindAllStringSubmatch(sec, -1) {
		blocks[m[1]] = append(blocks[m[1]], m[2])
	}
	return blocks
}

// numbersAsPattern turns text into a regular expression that matches it
// with any number where it has one.
func numbersAsPattern(text string) *regexp.Regexp {
	num := regexp.MustCompile(`[-+]?\d+(\.\d+)?(e[-+]?\d+)?`)
	var b strings.Builder
	last := 0
	for _, loc := range num.FindAllStringIndex(text, -1) {
		b.WriteString(regexp.QuoteMeta(text[last:loc[0]]))
		b.WriteString(`[-+]?\d+(\.\d+)?(e[-+]?\d+)?`)
		last = loc[1]
	}
	b.WriteString(regexp.QuoteMeta(text[last:]))
	return regexp.MustCompile("^" + b.String() + "$")
}

// TestReadmeBindings runs the section of README.md on the bindings: the
// install block (plumb version on the built binary; go install is not
// run, its module path is checked), the NumPy port's tests, the failing
// port against the message shown, the C harness and the checks of its
// files.
func TestReadmeBindings(t *testing.T) {
	blocks := readmeSection(t)
	ensure.Len(t, blocks["sh"], 2)
	ensure.Len(t, blocks["python"], 2)
	ensure.Len(t, blocks["text"], 1)
	ensure.Len(t, blocks["c"], 1)
	mod, err := os.ReadFile("../go.mod")
	ensure.NoError(t, err)
	module := strings.Fields(strings.SplitN(string(mod), "\n", 2)[0])[1]
	dir := t.TempDir()

	// The shell lines, in dir: the plumb of this test for plumb.
	run := func(t *testing.T, line string) {
		line, _, _ = strings.Cut(line, "#")
		f := strings.Fields(line)
		if len(f) == 0 {
			return
		}
		switch f[0] {
		case "go":
			expect.Equal(t, []string{"go", "install", module + "/cmd/plumb@latest"}, f, "the install line")
		case "plumb":
			cmd := exec.Command(plumbBin, f[1:]...)
			cmd.Dir = dir
			out, err := cmd.CombinedOutput()
			ensure.NoError(t, err, "%s\n%s", line, out)
			if f[1] == "check" {
				expect.Contains(t, string(out), "verdict: PASS", line)
			} else {
				expect.True(t, strings.HasPrefix(string(out), "plumb "), "%s", out)
			}
		case "cc":
			cc, err := exec.LookPath("cc")
			need(t, "a C compiler cc (apt-get install gcc)", err)
			abs, err := filepath.Abs("c")
			ensure.NoError(t, err)
			cmd := exec.Command(cc, strings.Fields(strings.ReplaceAll(strings.Join(f[1:], " "), "bindings/c", abs))...)
			cmd.Dir = dir
			out, err := cmd.CombinedOutput()
			ensure.NoError(t, err, "%s\n%s", line, out)
		case "$PWD/harness":
			cmd := exec.Command(filepath.Join(dir, "harness"))
			cmd.Dir = dir
			out, err := cmd.CombinedOutput()
			ensure.NoError(t, err, "%s\n%s", line, out)
		default:
			t.Fatalf("a README line this test cannot run: %q", line)
		}
	}
	t.Run("install", func(t *testing.T) {
		for _, l := range strings.Split(blocks["sh"][0], "\n") {
			run(t, l)
		}
	})
	t.Run("python", func(t *testing.T) {
		needNumpy(t)
		abs, err := filepath.Abs("python")
		ensure.NoError(t, err)
		// The port's tests, each called; then the failing port, whose
		// message must be the one shown.
		script := blocks["python"][0] + `
import sys
tests = [f for n, f in sorted(globals().items()) if n.startswith("test_") and callable(f)]
for f in tests:
    f()
print("ran", len(tests), "tests")
try:
` + indent(blocks["python"][1]) + `
except plumbcheck.CheckFailed as e:
    print(e)
else:
    sys.exit("the failing port passed")
`
		cmd := exec.Command(python, "-c", script)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "PYTHONPATH="+abs, "PLUMBCHECK_BINARY="+plumbBin, "PYTHONDONTWRITEBYTECODE=1")
		out, err := cmd.CombinedOutput()
		ensure.NoError(t, err, "%s", out)
		first, msg, ok := strings.Cut(string(out), "\n")
		ensure.True(t, ok, "%s", out)
		expect.Equal(t, "ran 2 tests", first)
		expect.Regexp(t, numbersAsPattern(strings.TrimSpace(blocks["text"][0])), strings.TrimSpace(msg))
	})
	t.Run("c", func(t *testing.T) {
		ensure.NoError(t, os.WriteFile(filepath.Join(dir, "harness.c"), []byte(blocks["c"][0]), 0o644))
		for _, l := range strings.Split(blocks["sh"][1], "\n") {
			run(t, l)
		}
	})
}

// indent indents every line of s by four spaces.
func indent(s string) string {
	return "    " + strings.ReplaceAll(strings.TrimRight(s, "\n"), "\n", "\n    ")
}
