package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// piped runs the built binary in dir with stdin as its standard input and
// returns stdout, stderr and the exit status, failing the test instead of
// hanging when it does not end within a minute.
func piped(t *testing.T, dir string, stdin []byte, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, plumbBin, args...)
	cmd.Stdin = bytes.NewReader(stdin)
	stdout, stderr, code = runCmd(t, cmd, dir, args)
	ensure.NoError(t, ctx.Err(), "plumb %v did not end within a minute", args)
	return stdout, stderr, code
}

func readFile(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	ensure.NoError(t, err)
	return b
}

// decodeNPY reads one .npy stream that must be all of b.
func decodeNPY(t *testing.T, b []byte) ops.Tensor {
	t.Helper()
	r := bytes.NewReader(b)
	a, err := npy.Read(r)
	ensure.NoError(t, err)
	ensure.Zero(t, r.Len(), "nothing but the .npy stream")
	x, err := a.Float64s()
	ensure.NoError(t, err)
	return ops.Tensor{Shape: a.Shape, Data: x}
}

// The pipes: - is standard input for an input, a candidate, a reference
// or the configuration, and standard output for gen's file and run's one
// output; data go to stdout and every status line to stderr, which -quiet
// empties.
func TestPipes(t *testing.T) {
	dir := attentionFixture(t)

	// gen to standard output: the .npy stream alone, the status on stderr.
	o, e := must(t, dir, 0, "gen", "-shape", "2,3", "-seed", "5", "-")
	expect.Equal(t, "wrote standard output: float64 [2 3], normal, seed 5\n", e)
	must(t, dir, 0, "gen", "-shape", "2,3", "-seed", "5", "g.npy")
	expect.Equal(t, readFile(t, filepath.Join(dir, "g.npy")), []byte(o), "the same bytes as the file")
	o, e = must(t, dir, 0, "gen", "-quiet", "-shape", "2,3", "-seed", "5", "-")
	expect.Empty(t, e, "-quiet silences gen")
	expect.Equal(t, readFile(t, filepath.Join(dir, "g.npy")), []byte(o))

	// run -out -: the one output on stdout.
	must(t, dir, 0, "run", "-out", "ref", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	refOut := readNPY(t, filepath.Join(dir, "ref", "out.npy"))
	o, e = must(t, dir, 0, "run", "-out", "-", "softmax", "x=q.npy")
	expect.Equal(t, "wrote standard output: y, float64 [1 4 6 8]\n", e)
	want, err := ops.Run("softmax", nil, ops.Tensors{"x": readNPY(t, filepath.Join(dir, "q.npy"))})
	ensure.NoError(t, err)
	expect.Equal(t, want["y"], decodeNPY(t, []byte(o)))
	// Two outputs: refused, naming them and the ways to choose.
	o, e = must(t, dir, 2, "run", "-out", "-", "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")
	expect.Empty(t, o)
	expect.Contains(t, e, "plumb run: -out -: attention-forward gives 2 outputs here (out, lse) and standard output takes one; want -out NAME=- for one of them (-out out=-), or -out FILE.npz for all in one archive")
	// -out NAME=-: that output, and NAME=FILE for another at once.
	o, e = must(t, dir, 0, "run", "-out", "out=-", "-out", "lse=l.npy", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	expect.Equal(t, refOut, decodeNPY(t, []byte(o)))
	expect.Equal(t, readNPY(t, filepath.Join(dir, "ref", "lse.npy")), readNPY(t, filepath.Join(dir, "l.npy")))
	expect.Contains(t, e, "wrote l.npy: float64 [1 4 6]\nwrote standard output: out, float64 [1 4 6 8]\n")
	expect.NoFileExists(t, filepath.Join(dir, "out.npy"), "only the outputs named")
	o, e = must(t, dir, 0, "run", "-quiet", "-out", "out=-", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	expect.Empty(t, e, "-quiet silences run's status lines")
	expect.Equal(t, refOut, decodeNPY(t, []byte(o)))
	for _, c := range []struct {
		args []string
		says string
	}{
		{[]string{"-out", "dx=d.npy"}, `-out dx=d.npy: output "dx" is not an output of attention-forward; want one of out, lse`},
		{[]string{"-out", "out=-", "-out", "lse=-"}, "-out out=- and -out lse=-: standard output takes one output"},
		{[]string{"-out", "ref", "-out", "other"}, `-out = ["ref" "other"]; want one directory, FILE.npz or -, or else NAME=FILE flags alone`},
		{[]string{"-out", "out=a.npy", "-out", "out=b.npy"}, `output "out" is given twice (a.npy, b.npy)`},
	} {
		_, e := must(t, dir, 2, append(append([]string{"run"}, c.args...), "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")...)
		expect.Contains(t, e, c.says)
	}

	// Standard input: a candidate of diff, a -got of check, an input, the
	// configuration; and a pipe end to end (run | diff).
	out := readFile(t, filepath.Join(dir, "ref", "out.npy"))
	o, _, code := piped(t, dir, out, "diff", filepath.Join("ref", "out.npy"), "-")
	expect.Equal(t, 0, code)
	expect.Contains(t, o, "candidate  -\n")
	expect.Contains(t, o, "verdict: PASS")
	o, _, code = piped(t, dir, out, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=-")
	expect.Equal(t, 0, code, o)
	o, e, code = piped(t, dir, readFile(t, filepath.Join(dir, "q.npy")), "run", "-out", "-", "softmax", "x=-")
	expect.Equal(t, 0, code, e)
	expect.Equal(t, want["y"], decodeNPY(t, []byte(o)))
	_, e, code = piped(t, dir, []byte(causal), "run", "-config", "-", "-out", "viastdin", "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")
	expect.Equal(t, 0, code, e)
	expect.Equal(t, refOut, readNPY(t, filepath.Join(dir, "viastdin", "out.npy")))
	if _, err := os.Stat("/bin/sh"); err == nil {
		cmd := exec.Command("/bin/sh", "-c", `"$0" run -quiet -config c.json -out out=- attention-forward q=q.npy k=k.npy v=v.npy | "$0" diff -quiet ref/out.npy -`, plumbBin)
		o, e, code := runCmd(t, cmd, dir, nil)
		expect.Equal(t, 0, code, e)
		expect.Contains(t, o, "verdict: PASS")
		expect.Empty(t, e)
	}
	// Standard input serves one file.
	_, e, code = piped(t, dir, out, "diff", "-", "-")
	expect.Equal(t, 2, code)
	expect.Contains(t, e, "plumb diff: -: standard input is read for - already; want - for one file only")
	_, e, code = piped(t, dir, out, "run", "-config", "-", "softmax", "x=-")
	expect.Equal(t, 2, code)
	expect.Contains(t, e, "standard input is read for -config - already")
	_, e = must(t, dir, 2, "diff", "-heatmap", "-", "q.npy", "q.npy")
	expect.Contains(t, e, "-heatmap -: the report goes to standard output; want a file")
}

// .npz archives: gen adds arrays to one, run takes one as its inputs and
// writes its outputs to one, diff and check read members, and the errors
// list the members.
func TestArchives(t *testing.T) {
	dir := attentionFixture(t)
	// gen FILE.npz:NAME builds an archive member by member, keeping the
	// others; the arrays are those gen writes to .npy.
	for i, n := range []string{"q", "k", "v"} {
		shape := map[string]string{"q": "1,4,6,8", "k": "1,2,6,8", "v": "1,2,6,8"}[n]
		_, e := must(t, dir, 0, "gen", "-shape", shape, "-seed", string(rune('1'+i)), "in.npz:"+n)
		expect.Equal(t, "wrote in.npz:"+n+": float64 ["+strings.ReplaceAll(shape, ",", " ")+"], normal, seed "+string(rune('1'+i))+"\n", e)
	}
	must(t, dir, 0, "gen", "-shape", "3", "in.npz:extra")
	must(t, dir, 0, "gen", "-shape", "1,4,6,8", "-seed", "1", "in.npz:q") // replaced, the others kept
	a, err := npy.OpenArchive(filepath.Join(dir, "in.npz"))
	ensure.NoError(t, err)
	expect.Equal(t, []string{"k", "v", "extra", "q"}, a.Names())
	a.Close()

	// run: the archive alone gives its arrays as inputs (and an array
	// that is no input is refused, naming the archive); NAME=FILE.npz:NAME
	// picks one; -out FILE.npz writes every output.
	_, e := must(t, dir, 2, "run", "attention-forward", "in.npz")
	expect.Contains(t, e, `plumb run: input "extra" (an array of in.npz) is not an input of attention-forward; want one of q, k, v, bias, slopes, sinks`)
	_, e = must(t, dir, 0, "run", "-config", "c.json", "-out", "ref.npz", "attention-forward", "q=in.npz:q", "k=in.npz:k", "v=in.npz:v")
	expect.Equal(t, "wrote ref.npz: out float64 [1 4 6 8], lse float64 [1 4 6]\n", e)
	want, err := ops.Run("attention-forward", []byte(causal), fixtureInputs(t, dir))
	ensure.NoError(t, err)
	out, err := npy.OpenArchive(filepath.Join(dir, "ref.npz"))
	ensure.NoError(t, err)
	defer out.Close()
	expect.Equal(t, []string{"out", "lse"}, out.Names())
	for _, n := range out.Names() {
		arr, err := out.Read(n)
		ensure.NoError(t, err)
		expect.Equal(t, want[n].Data, arr.Values, n)
	}
	// An archive of the inputs alone, as the only argument.
	must(t, dir, 0, "run", "-out", "inputs.npz", "-quiet", "softmax", "x=q.npy") // an archive of one array, y
	must(t, dir, 0, "gen", "-quiet", "-shape", "1,4,6,8", "-seed", "1", "qkv.npz:q")
	must(t, dir, 0, "gen", "-quiet", "-shape", "1,2,6,8", "-seed", "2", "qkv.npz:k")
	must(t, dir, 0, "gen", "-quiet", "-shape", "1,2,6,8", "-seed", "3", "qkv.npz:v")
	must(t, dir, 0, "run", "-config", "c.json", "-out", "byarchive", "attention-forward", "qkv.npz")
	expect.Equal(t, want["out"], readNPY(t, filepath.Join(dir, "byarchive", "out.npy")))

	// diff and check read members; check -got takes an archive of outputs.
	o, _ := must(t, dir, 0, "diff", "ref.npz:out", filepath.Join("byarchive", "out.npy"))
	expect.Contains(t, o, "reference  ref.npz:out\n")
	o, _ = must(t, dir, 0, "check", "-config", "c.json", "attention-forward", "qkv.npz", "-got", "ref.npz")
	expect.Equal(t, 2, strings.Count(o, "verdict: PASS"), o)
	must(t, dir, 0, "check", "-config", "c.json", "attention-forward", "qkv.npz", "-got", "lse=ref.npz:lse")
	// A single-array archive stands for its array.
	o, _ = must(t, dir, 0, "diff", "inputs.npz", "inputs.npz:y")
	expect.Contains(t, o, "verdict: PASS")

	// The errors name the archive and list its arrays.
	for _, c := range []struct {
		args []string
		says string
	}{
		{[]string{"diff", "ref.npz", "ref.npz:out"}, "plumb diff: ref.npz is an .npz archive of 2 arrays (out, lse); want one named: ref.npz:NAME, say ref.npz:out"},
		{[]string{"diff", "ref.npz:outt", "ref.npz:out"}, `plumb diff: ref.npz: the archive has no array "outt"; want one of its 2: out, lse`},
		{[]string{"check", "attention-forward", "qkv.npz", "-got", "in.npz"}, `-got in.npz: its array "extra" is not an output of attention-forward; want arrays named as the outputs, out, lse (or -got OUTPUT=in.npz:NAME for one array)`},
		{[]string{"diff", "q.npy:out", "q.npy"}, "plumb diff: q.npy:out: q.npy is a .npy file, which holds one array; want it named without :out"},
		{[]string{"gen", "-shape", "2", "in.npz"}, "in.npz is an .npz archive, which holds named arrays; want the array's name: in.npz:NAME"},
		{[]string{"gen", "-shape", "2", "in.npz:a-b"}, `in.npz:a-b: array name = "a-b"; want letters, digits and _`},
	} {
		_, e := must(t, dir, 2, c.args...)
		expect.Contains(t, e, c.says)
	}
	// A zip archive under a .npy name is recognised as one.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "zip.npy"), readFile(t, filepath.Join(dir, "ref.npz")), 0o644))
	_, e = must(t, dir, 2, "diff", "zip.npy", "q.npy")
	expect.Contains(t, e, "plumb diff: zip.npy is an .npz archive of 2 arrays (out, lse); want one named: zip.npy:NAME, say zip.npy:out")
	// A damaged archive: the message says so, once with the path.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "cut.npz"), readFile(t, filepath.Join(dir, "ref.npz"))[:100], 0o644))
	_, e = must(t, dir, 2, "diff", "cut.npz:out", "q.npy")
	expect.Contains(t, e, "plumb diff: cut.npz: npy: malformed archive: NewArchive: ")
	expect.Equal(t, 1, strings.Count(e, "cut.npz"), e)
}

// Archives written by NumPy (savez and savez_compressed) are read as
// inputs and candidates, and the archive run writes loads in NumPy.
func TestArchivesOfNumPy(t *testing.T) {
	needNumPy(t)
	dir := attentionFixture(t)
	script := `
import numpy as np
q, k, v = (np.load(n + '.npy') for n in 'qkv')
np.savez_compressed('in.npz', q=q.astype(np.float32), k=k, v=v)
np.savez('pos.npz', q, k, v)
`
	cmd := exec.Command("/usr/bin/python3", "-c", script)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	ensure.NoError(t, err, "%s", out)
	must(t, dir, 0, "run", "-config", "c.json", "-out", "ref.npz", "attention-forward", "in.npz")
	in := fixtureInputs(t, dir)
	in["q"] = ops.Tensor{Shape: in["q"].Shape, Data: compare.Float32.RoundSlice(in["q"].Data)}
	want, err := ops.Run("attention-forward", []byte(causal), in)
	ensure.NoError(t, err)
	must(t, dir, 0, "check", "-config", "c.json", "attention-forward", "in.npz", "-got", "out=ref.npz:out")
	// Positional arrays: arr_0, arr_1, arr_2.
	_, e := must(t, dir, 2, "run", "attention-forward", "q=pos.npz")
	expect.Contains(t, e, "pos.npz is an .npz archive of 3 arrays (arr_0, arr_1, arr_2); want one named: pos.npz:NAME, say pos.npz:arr_0")
	must(t, dir, 0, "run", "-config", "c.json", "-out", "pos", "attention-forward", "q=pos.npz:arr_0", "k=pos.npz:arr_1", "v=pos.npz:arr_2")

	check := `
import numpy as np, sys
z = np.load('ref.npz')
assert z.files == ['out', 'lse'], z.files
print(repr(z['out'].dtype.str), z['out'].shape, float(z['out'].ravel()[5]).hex(), end='')
`
	cmd = exec.Command("/usr/bin/python3", "-c", check)
	cmd.Dir = dir
	got, err := cmd.CombinedOutput()
	ensure.NoError(t, err, "%s", got)
	f := strings.Fields(string(got))
	ensure.Len(t, f, 6, "%s", got)
	expect.Equal(t, "'<f8' (1, 4, 6, 8)", strings.Join(f[:5], " "))
	v, err := strconv.ParseFloat(f[5], 64)
	ensure.NoError(t, err)
	expect.Equal(t, want["out"].Data[5], v, "NumPy reads the value run wrote")
}

// needNumPy fails the test, or skips it outside CI, when /usr/bin/python3
// cannot import numpy.
func needNumPy(t *testing.T) {
	t.Helper()
	out, err := exec.Command("/usr/bin/python3", "-c", "import numpy").CombinedOutput()
	if err == nil {
		return
	}
	msg := "/usr/bin/python3 cannot import numpy (install python3-numpy): " + string(out)
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip("skipped: " + msg)
}

// Raw little-endian binary, FILE:TYPE:DIMS: read by its type and shape, its
// size checked against both, a bit-pattern format judged as that format.
func TestRawBinary(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "-out", "ref", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "ref", "out.npy"))
	// The port's float32 and bfloat16 outputs, as fwrite dumps them.
	var f32, bf16 bytes.Buffer
	for _, v := range ref.Data {
		binary.Write(&f32, binary.LittleEndian, float32(v))
		binary.Write(&bf16, binary.LittleEndian, uint16(compare.BFloat16.Encode(v)))
	}
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "out.bin"), f32.Bytes(), 0o644))
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "out.bf16"), bf16.Bytes(), 0o644))
	o, _ := must(t, dir, 0, "diff", filepath.Join("ref", "out.npy"), "out.bin:float32:1,4,6,8")
	expect.Contains(t, o, "candidate format float32")
	expect.Contains(t, o, "verdict: PASS")
	for _, name := range []string{"bfloat16", "bf16"} {
		o, _ = must(t, dir, 0, "diff", filepath.Join("ref", "out.npy"), "out.bf16:"+name+":1,4,6,8")
		expect.Contains(t, o, "candidate format bfloat16", "no -format needed: the name says it")
	}
	o, _ = must(t, dir, 0, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=out.bin:single:1,4,6,8")
	expect.Contains(t, o, "yardstick: float32 inputs")
	// As an input too, and from standard input.
	var qraw bytes.Buffer
	for _, v := range readNPY(t, filepath.Join(dir, "q.npy")).Data {
		binary.Write(&qraw, binary.LittleEndian, v)
	}
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "q.raw"), qraw.Bytes(), 0o644))
	must(t, dir, 0, "run", "-out", "fromraw", "attention-forward", "-config", "c.json", "q=q.raw:double:1,4,6,8", "k=k.npy", "v=v.npy")
	expect.Equal(t, ref, readNPY(t, filepath.Join(dir, "fromraw", "out.npy")))
	_, e, code := piped(t, dir, qraw.Bytes(), "run", "-out", "fromstdin", "attention-forward", "-config", "c.json", "q=-:fp64:1,4,6,8", "k=k.npy", "v=v.npy")
	expect.Equal(t, 0, code, e)
	expect.Equal(t, ref, readNPY(t, filepath.Join(dir, "fromstdin", "out.npy")))

	// Sizes that do not match: both stated, and what the size would fit.
	for _, c := range []struct {
		spec, says string
	}{
		{"out.bin:float32:1,8,128,64", "out.bin:float32:1,8,128,64: npy: data does not match the header: ReadRaw: the data are 768 bytes; want 262144, the 65536 float32 elements (4 bytes each) of shape [1 8 128 64] (768 bytes are 192 float32 elements)"},
		{"out.bin:float64:1,4,6,8", "the data are 768 bytes; want 1536, the 192 float64 elements (8 bytes each) of shape [1 4 6 8] (768 bytes are that shape in 4-byte elements: float32, int32, uint32?)"},
		{"out.bin:float32:1,4,6", "the data are 768 bytes; want 96"},
		{"out.bin:float13:1,4,6,8", `out.bin:float13:1,4,6,8: element type "float13" is unknown; want one of float64, float32, float16, bfloat16, e4m3, e5m2`},
		{"out.bin:float32", "out.bin:float32: raw binary needs its dims; want out.bin:float32:DIMS"},
		{"out.bin:1,4,6,8", "out.bin:1,4,6,8: raw binary needs its element type; want out.bin:TYPE:1,4,6,8"},
		{"out.bin:float32:1,x", "no such file"},
		{"out.bin", "plumb diff: out.bin is neither a .npy file nor an .npz archive (it starts with "},
		{"none.bin:float32:4", "none.bin: no such file"},
	} {
		_, e := must(t, dir, 2, "diff", filepath.Join("ref", "out.npy"), c.spec)
		expect.Contains(t, e, c.says, c.spec)
	}
	_, e = must(t, dir, 2, "diff", filepath.Join("ref", "out.npy"), "out.bin")
	expect.Contains(t, e, "for raw little-endian binary, name its element type and dims: out.bin:float32:DIMS, say (plumb help files)")
	expect.Equal(t, 2, strings.Count(e, "out.bin"), "the path once, and once in the example: %s", e)
	// A file whose name holds colons is that file.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "a:b.npy"), readFile(t, filepath.Join(dir, "q.npy")), 0o644))
	must(t, dir, 0, "diff", "q.npy", "a:b.npy")
}

// The element types .npy files hold beyond the floats: integers as their
// values, bool refused as an input; and the names of the formats.
func TestElementTypes(t *testing.T) {
	dir := t.TempDir()
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2, 3}, []float64{-3, -1, 0, 1, 2, 100})
	writeNPY(t, filepath.Join(dir, "i8.npy"), npy.Int8, []int{2, 3}, []int8{-3, -1, 0, 1, 2, 100})
	writeNPY(t, filepath.Join(dir, "i16.npy"), npy.Int16, []int{2, 3}, []int16{-3, -1, 0, 1, 2, 100})
	writeNPY(t, filepath.Join(dir, "i32.npy"), npy.Int32, []int{2, 3}, []int32{-3, -1, 0, 1, 2, 100})
	writeNPY(t, filepath.Join(dir, "u32.npy"), npy.Uint32, []int{2, 3}, []uint32{3, 1, 0, 1, 2, 100})
	writeNPY(t, filepath.Join(dir, "b.npy"), npy.Bool, []int{2, 3}, []bool{true, false, false, true, true, true})
	writeNPY(t, filepath.Join(dir, "b01.npy"), npy.Float64, []int{2, 3}, []float64{1, 0, 0, 1, 1, 1})
	for _, f := range []string{"i8.npy", "i16.npy", "i32.npy"} {
		o, _ := must(t, dir, 0, "diff", "x.npy", f)
		expect.Contains(t, o, "verdict: PASS", f)
		must(t, dir, 0, "run", "-out", strings.TrimSuffix(f, ".npy"), "softmax", "x="+f)
		expect.Equal(t, readNPY(t, filepath.Join(dir, "i8", "y.npy")), readNPY(t, filepath.Join(dir, strings.TrimSuffix(f, ".npy"), "y.npy")))
	}
	o, _ := must(t, dir, 1, "diff", "x.npy", "u32.npy")
	expect.Contains(t, o, "verdict: FAIL: 2 of 6 elements")
	o, _ = must(t, dir, 0, "diff", "b01.npy", "b.npy")
	expect.Contains(t, o, "verdict: PASS")
	_, e := must(t, dir, 2, "run", "softmax", "x=b.npy")
	expect.Contains(t, e, "b.npy (input x) holds bool values")

	// Every name of a format, wherever one is named.
	ref := []float64{0.1, -2.5, 3.25, 1e-3, 7, -0.75}
	writeNPY(t, filepath.Join(dir, "ref.npy"), npy.Float64, []int{6}, ref)
	for name, want := range map[string]string{
		"fp16": "binary16", "float16": "binary16", "half": "binary16", "binary16": "binary16",
		"bf16": "bfloat16", "bfloat16": "bfloat16", "e4m3": "e4m3", "e5m2": "e5m2",
		"fp32": "float32", "float32": "float32", "single": "float32",
		"fp64": "float64", "float64": "float64", "double": "float64",
	} {
		f, err := compare.FormatByName(want)
		ensure.NoError(t, err)
		writeNPY(t, filepath.Join(dir, "r.npy"), npy.Float64, []int{6}, f.RoundSlice(ref))
		o, _ := must(t, dir, 0, "diff", "-format", name, "ref.npy", "r.npy")
		expect.Contains(t, o, "candidate format "+want, name)
		// The same names in raw binary's TYPE.
		switch want {
		case "float64", "float32", "binary16":
			o, _ := must(t, dir, 0, "gen", "-quiet", "-dtype", name, "-shape", "4", "-")
			dt := map[string]npy.DType{"float64": npy.Float64, "float32": npy.Float32, "binary16": npy.Float16}[want]
			a, err := npy.Read(strings.NewReader(o))
			ensure.NoError(t, err, name)
			expect.Equal(t, dt, a.DType, name)
		}
	}
	// gen -dtype float16 rounds each value once to binary16.
	must(t, dir, 0, "gen", "-dtype", "half", "-shape", "5", "h.npy")
	must(t, dir, 0, "gen", "-shape", "5", "d.npy")
	expect.Equal(t, compare.Binary16.RoundSlice(readNPY(t, filepath.Join(dir, "d.npy")).Data), readNPY(t, filepath.Join(dir, "h.npy")).Data)
	_, e = must(t, dir, 2, "gen", "-dtype", "bf16", "-shape", "5", "h.npy")
	expect.Contains(t, e, `-dtype = "bf16"; want float64, float32 or float16 (bf16 has no .npy type`)
}

// The messages of the errors a port's first hour meets: each says what is
// wrong and what to do.
func TestMessagesSayWhatToDo(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "-out", "ref", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "ref", "out.npy"))
	// A seq-major output [1, 6, 4, 8] against heads-major [1, 4, 6, 8].
	seq := make([]float64, len(ref.Data))
	for h := range 4 {
		for s := range 6 {
			for d := range 8 {
				seq[(s*4+h)*8+d] = ref.Data[(h*6+s)*8+d]
			}
		}
	}
	writeNPY(t, filepath.Join(dir, "seq.npy"), npy.Float64, []int{1, 6, 4, 8}, seq)
	_, e := must(t, dir, 2, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=seq.npy")
	expect.Contains(t, e, "shapes differ: seq.npy has shape [1 6 4 8]; want [1 4 6 8], the shape of the reference out: the reference's shape with axes 1 and 2 swapped")
	expect.Contains(t, e, "seq-major [batch, seq, heads, dim] against heads-major [batch, heads, seq, dim]")
	expect.Contains(t, e, `say so with the configuration's "layout" key (now "heads-major"; its words: heads-major, seq-major; plumb help attention-forward), otherwise transpose the port's output (in NumPy, a.transpose(0, 2, 1, 3))`)
	// The "layout" key's present value is the one named.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "seq.json"), []byte(`{"version": 1, "layout": "seq-major"}`), 0o644))
	_, e = must(t, dir, 2, "check", "attention-forward", "-config", "seq.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=out.npy")
	expect.NotContains(t, e, `"layout"`, "the inputs do not fit seq-major: an input error, not a candidate's")
	// diff has no operation: it says how to transpose.
	_, e = must(t, dir, 2, "diff", filepath.Join("ref", "out.npy"), "seq.npy")
	expect.Contains(t, e, "axes 1 and 2 swapped, as a port that stores the tensor in another axis order writes it; want it transposed to the reference's order (in NumPy, a.transpose(0, 2, 1, 3))")
	// A permutation of more axes.
	perm := make([]float64, len(ref.Data))
	writeNPY(t, filepath.Join(dir, "perm.npy"), npy.Float64, []int{6, 8, 1, 4}, perm)
	_, e = must(t, dir, 2, "diff", filepath.Join("ref", "out.npy"), "perm.npy")
	expect.Contains(t, e, "the reference's axes in the order (2, 3, 0, 1)")
	expect.Contains(t, e, "a.transpose(2, 3, 0, 1)")
	// A squeezed batch axis, and an extra one.
	writeNPY(t, filepath.Join(dir, "sq.npy"), npy.Float64, []int{4, 6, 8}, ref.Data)
	writeNPY(t, filepath.Join(dir, "ex.npy"), npy.Float64, []int{1, 1, 4, 6, 8}, ref.Data)
	writeNPY(t, filepath.Join(dir, "mid.npy"), npy.Float64, []int{4, 1, 6, 8}, ref.Data)
	for _, c := range []struct{ file, says string }{
		{"sq.npy", "sq.npy has shape [4 6 8]; want [1 4 6 8], the shape of the reference out: the same elements in the same order, but it lacks the reference's leading axis of length 1 (squeezed away); want the file written with shape [1 4 6 8] (in NumPy, a.reshape(1, 4, 6, 8))"},
		{"ex.npy", "it has an extra leading axis of length 1; want the file written with shape [1 4 6 8]"},
		{"mid.npy", "the shapes differ only in axes of length 1"},
	} {
		_, e = must(t, dir, 2, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out="+c.file)
		expect.Contains(t, e, c.says)
	}
	// Shapes that are no such relative: the plain message.
	writeNPY(t, filepath.Join(dir, "other.npy"), npy.Float64, []int{2, 3}, make([]float64, 6))
	_, e = must(t, dir, 2, "diff", filepath.Join("ref", "out.npy"), "other.npy")
	expect.Contains(t, e, "shapes differ: other.npy has shape [2 3]; want [1 4 6 8], the shape of "+filepath.Join("ref", "out.npy")+"\n")

	// A missing input is not put on the configuration's account.
	_, e = must(t, dir, 2, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy")
	expect.Contains(t, e, `plumb run: ops: invalid input: attention-forward: input "v" is missing`)
	expect.NotContains(t, e, "c.json")
	// ...while a configuration error still names its file.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "bad.json"), []byte(`{"version": 1, "layout": "rows"}`), 0o644))
	_, e = must(t, dir, 2, "run", "attention-forward", "-config", "bad.json", "q=q.npy", "k=k.npy", "v=v.npy")
	expect.Contains(t, e, "plumb run: configuration bad.json: ops: invalid configuration: ")

	// A file that is not .npy: its path once.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("hello"), 0o644))
	_, e = must(t, dir, 2, "run", "softmax", "x=notes.txt")
	expect.True(t, strings.HasPrefix(e, "plumb run: notes.txt is neither a .npy file nor an .npz archive (it starts with \"hello\")"), e)
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2}, []float64{1, 2})
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "long.npy"), append(readFile(t, filepath.Join(dir, "x.npy")), 0), 0o644))
	_, e = must(t, dir, 2, "diff", "x.npy", "long.npy")
	expect.Equal(t, 1, strings.Count(e, "long.npy"), e)
	expect.Contains(t, e, "bytes follow the 16 bytes of data that shape [2] of float64 needs")
	_, e = must(t, dir, 2, "diff", "x.npy", "broken.npy")
	expect.Equal(t, "plumb diff: broken.npy: no such file\n", e)

	// A misspelled operation: unknown, with the nearest names, with or
	// without -got.
	for _, args := range [][]string{
		{"check", "attention-forwrd", "q=q.npy"},
		{"check", "attention-forwrd", "q=q.npy", "-got", "out=q.npy"},
		{"run", "attention-forwrd", "q=q.npy"},
	} {
		_, e = must(t, dir, 2, args...)
		expect.Contains(t, e, `operation "attention-forwrd" is unknown; did you mean attention-forward? (plumb help ops lists the`, "%v", args)
		expect.NotContains(t, e, "-got is missing")
	}
	_, e = must(t, dir, 2, "run", "layernorm", "x=q.npy")
	expect.Contains(t, e, `operation "layernorm" is unknown; did you mean layernorm-backward or layernorm-forward?`)
	_, e = must(t, dir, 2, "chek")
	expect.Contains(t, e, `plumb: command = "chek"; want one of gen, run, diff, check, demo`)
	expect.Contains(t, e, "did you mean check?")

	// A bad flag: the message, the one-line usage and where the help is;
	// not the whole help.
	for _, c := range []struct{ cmd, usage string }{
		{"run", "usage: plumb run [flags] OPERATION NAME=FILE ..."},
		{"diff", "usage: plumb diff [flags] REFERENCE CANDIDATE"},
		{"gen", "usage: plumb gen [flags] FILE.npy | - | FILE.npz:NAME"},
		{"check", "usage: plumb check [flags] OPERATION NAME=FILE ... -got OUTPUT=FILE ..."},
	} {
		o, e := must(t, dir, 2, c.cmd, "-bogus")
		expect.Empty(t, o)
		expect.Equal(t, "plumb "+c.cmd+": flag provided but not defined: -bogus\n"+c.usage+"\n(plumb help "+c.cmd+" explains the command and every flag)\n", e)
	}
	_, e = must(t, dir, 2, "gen", "-seed", "x", "-shape", "2", "g.npy")
	expect.Contains(t, e, `plumb gen: invalid value "x" for flag -seed`)
	expect.NotContains(t, e, "flags:")
	// -h still prints the whole help, on stdout.
	o, e := must(t, dir, 0, "run", "-h")
	expect.Empty(t, e)
	expect.Contains(t, o, "usage: plumb run")
	expect.Contains(t, o, "flags:")
}

// plumb help files describes every kind of file and name, and the help of
// the commands points to it.
func TestHelpFiles(t *testing.T) {
	dir := t.TempDir()
	o, _ := must(t, dir, 0, "help", "files")
	for _, s := range []string{"FILE:NAME", "FILE:TYPE:DIMS", "x.bin:float32:1,8,128,64", "standard input", "fp16, half, binary16", "bf16",
		"e4m3 and e5m2", "fp32", "single", "fp64, double", "int8", "int16", "uint32", "bool", "-quiet", "-out FILE.npz", "-out NAME=FILE"} {
		expect.Contains(t, o, s)
	}
	top, _ := must(t, dir, 0, "help")
	expect.Contains(t, top, "plumb help files")
	for _, c := range []string{"run", "diff", "check", "gen"} {
		h, _ := must(t, dir, 0, "help", c)
		expect.Contains(t, h, "plumb help files", c)
	}
	doc := string(readFile(t, "doc.go"))
	for _, s := range []string{"FILE.npz:NAME", "FILE:TYPE:DIMS", "plumb help files", "-quiet", "standard error"} {
		expect.True(t, strings.Contains(doc, s), "doc.go does not say %q", s)
	}
}
