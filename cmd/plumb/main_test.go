package main

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/testbin"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// binary is the plumb command built once for the end-to-end tests.
var plumbBin string

func TestMain(m *testing.M) { testbin.Main(m, ".", &plumbBin) }

// cli runs the built binary in dir and returns its stdout, stderr and exit
// status.
func cli(t *testing.T, dir string, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	return runCmd(t, exec.Command(plumbBin, args...), dir, args)
}

// runCmd runs cmd in dir and returns its stdout, stderr and exit status;
// a command that cannot be started fails the test.
func runCmd(t *testing.T, cmd *exec.Cmd, dir string, args []string) (stdout, stderr string, code int) {
	t.Helper()
	cmd.Dir = dir
	var o, e bytes.Buffer
	cmd.Stdout, cmd.Stderr = &o, &e
	err := cmd.Run()
	var ee *exec.ExitError
	switch {
	case err == nil:
	case errors.As(err, &ee):
		code = ee.ExitCode()
	default:
		t.Fatalf("running plumb %v: %v", args, err)
	}
	return o.String(), e.String(), code
}

// must runs the binary and requires the exit status.
func must(t *testing.T, dir string, want int, args ...string) (stdout, stderr string) {
	t.Helper()
	o, e, code := cli(t, dir, args...)
	ensure.Equal(t, want, code, "plumb %v\nstdout:\n%s\nstderr:\n%s", args, o, e)
	return o, e
}

func writeNPY(t *testing.T, path string, dt npy.DType, shape []int, values any) {
	t.Helper()
	a, err := npy.New(dt, shape, values)
	ensure.NoError(t, err)
	ensure.NoError(t, npy.WriteFile(path, a))
}

func readNPY(t *testing.T, path string) ops.Tensor {
	t.Helper()
	a, err := npy.ReadFile(path)
	ensure.NoError(t, err)
	x, err := a.Float64s()
	ensure.NoError(t, err)
	return ops.Tensor{Shape: a.Shape, Data: x}
}

// attentionFixture writes q, k, v (plumb gen, seeds 1–3) and a causal
// grouped configuration into a new directory.
func attentionFixture(t *testing.T) string {
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "1,4,6,8", "-seed", "1", "q.npy")
	must(t, dir, 0, "gen", "-shape", "1,2,6,8", "-seed", "2", "k.npy")
	must(t, dir, 0, "gen", "-shape", "1,2,6,8", "-seed", "3", "v.npy")
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "c.json"), []byte(`{"version": 1, "mask": [{"kind": "causal"}]}`), 0o644))
	return dir
}

func fixtureInputs(t *testing.T, dir string) ops.Tensors {
	return ops.Tensors{"q": readNPY(t, filepath.Join(dir, "q.npy")), "k": readNPY(t, filepath.Join(dir, "k.npy")), "v": readNPY(t, filepath.Join(dir, "v.npy"))}
}

const causal = `{"version": 1, "mask": [{"kind": "causal"}]}`

func TestGenFirstValues(t *testing.T) {
	dir := t.TempDir()
	o, e := must(t, dir, 0, "gen", "-shape", "3", "-dist", "uniform", "-low", "0", "-high", "1", "u.npy")
	expect.Empty(t, o, "status lines go to stderr")
	expect.Equal(t, "wrote u.npy: float64 [3], uniform, seed 1\n", e)
	must(t, dir, 0, "gen", "-shape", "3", "n.npy")
	must(t, dir, 0, "gen", "-shape", "3", "-dtype", "float32", "n32.npy")
	// The values stated in the command's help (genAbout).
	expect.Equal(t, []float64{0.5982609488236689, 0.08911177802144832, 0.715356444878812}, readNPY(t, filepath.Join(dir, "u.npy")).Data)
	expect.Equal(t, []float64{0.8588583889475008, 0.5383481862322732, 0.8094635935566922}, readNPY(t, filepath.Join(dir, "n.npy")).Data)
	expect.Equal(t, compare.Float32.RoundSlice(readNPY(t, filepath.Join(dir, "n.npy")).Data), readNPY(t, filepath.Join(dir, "n32.npy")).Data)
	help, _ := must(t, dir, 0, "help", "gen")
	expect.Contains(t, help, "0.5982609488236689, 0.08911177802144832, 0.715356444878812")
	expect.Contains(t, help, "0.8588583889475008, 0.5383481862322732, 0.8094635935566922")

	// Shifted and scaled: mean + std·z and low + (high − low)·u.
	must(t, dir, 0, "gen", "-shape", "3", "-mean", "2", "-std", "0.5", "s.npy")
	for i, z := range readNPY(t, filepath.Join(dir, "n.npy")).Data {
		expect.Equal(t, 2+float64(0.5*z), readNPY(t, filepath.Join(dir, "s.npy")).Data[i])
	}
}

// TestGenIsPackageGen: plumb gen writes, value for value, what package gen
// returns for the same seed and parameters (the float32 files: its values
// rounded by compare.Narrow), so that a Go test and the command share
// inputs.
func TestGenIsPackageGen(t *testing.T) {
	dir := t.TempDir()
	for i, c := range []struct {
		args []string
		want func() ([]float64, error)
	}{
		{[]string{"-shape", "1,8,128,64", "-seed", "1"}, func() ([]float64, error) { return gen.Normal(1, 8*128*64, 0, 1) }},
		{[]string{"-shape", "3,5,7", "-seed", "9", "-mean", "2", "-std", "0.5"}, func() ([]float64, error) { return gen.Normal(9, 105, 2, 0.5) }},
		{[]string{"-shape", "1000", "-seed", "42", "-dist", "uniform", "-low", "-3", "-high", "5"}, func() ([]float64, error) { return gen.Uniform(42, 1000, -3, 5) }},
		{[]string{"-shape", "2,64", "-seed", "5", "-dtype", "float32"}, func() ([]float64, error) {
			z, err := gen.Normal(5, 128, 0, 1)
			return compare.Widen(compare.Narrow(z)), err
		}},
	} {
		name := fmt.Sprintf("g%d.npy", i)
		must(t, dir, 0, append(append([]string{"gen", "-quiet"}, c.args...), name)...)
		want, err := c.want()
		ensure.NoError(t, err)
		expect.Equal(t, want, readNPY(t, filepath.Join(dir, name)).Data, "plumb gen %s", strings.Join(c.args, " "))
	}
}

// TestGenOtherLanguage recomputes the generator from its description in
// Python (testdata/gen_check.py): uniform bit for bit, normal within a few
// units in the last place (ln, cos, sin of another library), the first ones
// and all but a few in a thousand bit for bit (plumb's ln, cos and sin are
// correctly rounded, and so are most of the C library's results).
func TestGenOtherLanguage(t *testing.T) {
	py := "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skip("skipped: /usr/bin/python3 not present")
	}
	const n = 1001
	out, err := exec.Command(py, "testdata/gen_check.py", "12345", fmt.Sprint(n)).Output()
	ensure.NoError(t, err)
	lines := strings.Fields(string(out))
	ensure.Len(t, lines, 2*n)
	u, err := generate(n, "uniform", 12345, 0, 1, 0, 1)
	ensure.NoError(t, err)
	z, err := generate(n, "normal", 12345, 0, 1, 0, 1)
	ensure.NoError(t, err)
	same := 0
	for i := range n {
		var pu, pz float64
		_, err := fmt.Sscan(lines[i], &pu)
		ensure.NoError(t, err)
		_, err = fmt.Sscan(lines[n+i], &pz)
		ensure.NoError(t, err)
		ensure.Equal(t, pu, u[i], "uniform value %d", i)
		if pz == z[i] {
			same++
		}
		if i < 3 {
			// gen's help: the first normal values agree bit for bit.
			ensure.Equal(t, pz, z[i], "normal value %d", i)
		}
		// Within 4 ulps of float64 at the value, or 1e-15 absolute where a
		// value is near zero (r·cos t with t near π/2).
		expect.InDelta(t, pz, z[i], math.Max(4*compare.Float64.ULP(pz), 1e-15), "normal value %d", i)
	}
	// gen's help: a few in a thousand differ in the last place.
	expect.GreaterOrEqual(t, same, n-n/100, "%d of %d normal values agree with Python's bit for bit", same, n)
}

func TestRunWritesTheReference(t *testing.T) {
	dir := attentionFixture(t)
	o, e := must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-out", "ref")
	expect.Empty(t, o, "status lines go to stderr")
	expect.Contains(t, e, "wrote "+filepath.Join("ref", "out.npy")+": float64 [1 4 6 8]\n")
	want, err := ops.Run("attention-forward", []byte(causal), fixtureInputs(t, dir))
	ensure.NoError(t, err)
	for _, n := range []string{"out", "lse"} {
		got := readNPY(t, filepath.Join(dir, "ref", n+".npy"))
		expect.Equal(t, want[n], got, n)
	}
	// No configuration means {"version": 1}.
	must(t, dir, 0, "run", "-out", "full", "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")
	want, err = ops.Run("attention-forward", nil, fixtureInputs(t, dir))
	ensure.NoError(t, err)
	expect.Equal(t, want["out"], readNPY(t, filepath.Join(dir, "full", "out.npy")))
}

func TestDiff(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "out.npy"))

	o, _ := must(t, dir, 0, "diff", "out.npy", "out.npy")
	expect.Contains(t, o, "verdict: PASS")
	expect.Contains(t, o, "default for float64 candidates: rel 1e-10")

	// One element 1e-2 off fails the default float64 tolerance, at its index.
	bad := append([]float64(nil), ref.Data...)
	bad[1*6*8+3*8+5] += 1e-2 // [0 1 3 5]
	writeNPY(t, filepath.Join(dir, "bad.npy"), npy.Float64, ref.Shape, bad)
	o, _ = must(t, dir, 1, "diff", "out.npy", "bad.npy")
	expect.Contains(t, o, "verdict: FAIL: 1 of 192 elements exceed the elementwise tolerance")
	expect.Contains(t, o, "[0 1 3 5]")

	// A tolerance flag replaces the default.
	must(t, dir, 0, "diff", "-abs", "0.011", "out.npy", "bad.npy")
	must(t, dir, 1, "diff", "-abs", "0.011", "-normwise", "1e-4", "out.npy", "bad.npy")
	must(t, dir, 0, "diff", "-ulps", "1000000000000000", "out.npy", "bad.npy")

	// JSON.
	o, _ = must(t, dir, 1, "diff", "-json", "out.npy", "bad.npy")
	var j struct {
		Reference, Candidate string
		Report               struct {
			MaxAbsAt []int `json:"max_abs_error_at"`
			Verdict  struct{ Pass bool }
		}
	}
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	expect.Equal(t, "out.npy", j.Reference)
	expect.Equal(t, []int{0, 1, 3, 5}, j.Report.MaxAbsAt)
	expect.False(t, j.Report.Verdict.Pass)

	// A float32 candidate is judged in float32 by default (√u).
	f32 := make([]float32, len(ref.Data))
	for i, v := range ref.Data {
		f32[i] = float32(v)
	}
	writeNPY(t, filepath.Join(dir, "f32.npy"), npy.Float32, ref.Shape, f32)
	o, _ = must(t, dir, 0, "diff", "out.npy", "f32.npy")
	expect.Contains(t, o, "candidate format float32")

	// bfloat16 bit patterns need -format.
	bits := make([]uint16, len(ref.Data))
	for i, v := range ref.Data {
		bits[i] = uint16(compare.BFloat16.Encode(v))
	}
	writeNPY(t, filepath.Join(dir, "bf16.npy"), npy.Uint16, ref.Shape, bits)
	o, _ = must(t, dir, 0, "diff", "-format", "bf16", "out.npy", "bf16.npy")
	expect.Contains(t, o, "candidate format bfloat16")
}

func TestCheck(t *testing.T) {
	dir := attentionFixture(t)
	in := fixtureInputs(t, dir)
	// A float32 port: plumb's float32 instantiation is one.
	low, err := ops.Run32("attention-forward", []byte(causal), in)
	ensure.NoError(t, err)
	f32 := func(x []float64) []float32 {
		y := make([]float32, len(x))
		for i, v := range x {
			y[i] = float32(v)
		}
		return y
	}
	writeNPY(t, filepath.Join(dir, "port_out.npy"), npy.Float32, low["out"].Shape, f32(low["out"].Data))
	writeNPY(t, filepath.Join(dir, "port_lse.npy"), npy.Float32, low["lse"].Shape, f32(low["lse"].Data))
	o, _ := must(t, dir, 0, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy",
		"-got", "out=port_out.npy", "-got", "lse=port_lse.npy")
	expect.Contains(t, o, "output out")
	expect.Contains(t, o, "output lse")
	expect.Contains(t, o, "basis: yardstick: float32 inputs, float32 arithmetic")
	expect.Equal(t, 2, strings.Count(o, "verdict: PASS"))

	// A port whose head 3 is 1% too large fails the yardstick.
	bad := f32(low["out"].Data)
	for i := 3 * 6 * 8; i < 4*6*8; i++ {
		bad[i] *= 1.01
	}
	writeNPY(t, filepath.Join(dir, "bad_out.npy"), npy.Float32, low["out"].Shape, bad)
	o, _ = must(t, dir, 1, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=bad_out.npy")
	expect.Contains(t, o, "verdict: FAIL")
	// ...which a bfloat16 yardstick (8 significant bits) would let through.
	o, _ = must(t, dir, 0, "check", "-format", "bfloat16", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=bad_out.npy")
	expect.Contains(t, o, "yardstick: bfloat16 inputs")

	// JSON: one entry per candidate, and no diagnosis when every output
	// passes.
	o, _ = must(t, dir, 0, "check", "-json", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "lse=port_lse.npy")
	var j checkJSON
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	ensure.Len(t, j.Outputs, 1)
	expect.Equal(t, "lse", j.Outputs[0].Name)
	expect.True(t, j.Outputs[0].Report.Verdict.Pass)
	expect.Nil(t, j.Diagnosis)
	expect.NotContains(t, o, `"diagnosis"`)

	// A float64 candidate gets the default tolerance; explicit flags win.
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	o, _ = must(t, dir, 0, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=out.npy")
	expect.Contains(t, o, "default for float64 candidates")
	must(t, dir, 1, "check", "-abs", "1e-12", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port_out.npy")
}

// TestCheckSeveralOutputs: check judges every candidate given, so one bad
// output fails the check whichever -got it is and whatever the others.
func TestCheckSeveralOutputs(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	lse := readNPY(t, filepath.Join(dir, "lse.npy"))
	// lse of query row [0 2 4] off by 1e-2: outside the default float64
	// tolerance (rel 1e-10, abs 1e-10·max|ref|; plumb help check).
	lse.Data[2*6+4] += 1e-2
	writeNPY(t, filepath.Join(dir, "bad_lse.npy"), npy.Float64, lse.Shape, lse.Data)
	args := []string{"check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy"}
	for _, c := range []struct {
		name string
		got  []string
	}{
		{"first good, second bad", []string{"-got", "out=out.npy", "-got", "lse=bad_lse.npy"}},
		{"first bad, second good", []string{"-got", "lse=bad_lse.npy", "-got", "out=out.npy"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			o, _ := must(t, dir, 1, append(args, c.got...)...)
			expect.Equal(t, 1, strings.Count(o, "verdict: PASS"), o)
			expect.Equal(t, 1, strings.Count(o, "verdict: FAIL"), o)
			expect.Regexp(t, `(?s)output out\n.*verdict: PASS.*output lse\n.*verdict: FAIL`, o, "reports in the order of the operation's outputs")
			o, _ = must(t, dir, 1, append(append(args, "-json"), c.got...)...)
			var j checkJSON
			ensure.NoError(t, json.Unmarshal([]byte(o), &j))
			ensure.Len(t, j.Outputs, 2)
			expect.Equal(t, []string{"out", "lse"}, []string{j.Outputs[0].Name, j.Outputs[1].Name})
			expect.True(t, j.Outputs[0].Report.Verdict.Pass)
			expect.False(t, j.Outputs[1].Report.Verdict.Pass)
		})
	}
	// Both good: 0, as in TestCheck.
	must(t, dir, 0, append(args, "-got", "out=out.npy", "-got", "lse=lse.npy")...)
}

// TestDiffLastElement: diff takes one pair of files (several outputs are
// several diffs); within it every element counts, the last as well as the
// first, in text and in JSON.
func TestDiffLastElement(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "out.npy"))
	bad := append([]float64(nil), ref.Data...)
	bad[len(bad)-1] += 1e-2 // [0 3 5 7]; 1e-2 is outside the default float64 tolerance
	writeNPY(t, filepath.Join(dir, "bad.npy"), npy.Float64, ref.Shape, bad)
	o, _ := must(t, dir, 1, "diff", "out.npy", "bad.npy")
	expect.Contains(t, o, "verdict: FAIL: 1 of 192 elements exceed the elementwise tolerance")
	expect.Contains(t, o, "[0 3 5 7]")
	o, _ = must(t, dir, 1, "diff", "-json", "out.npy", "bad.npy")
	var j namedReport
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	expect.False(t, j.Report.Verdict.Pass)
}

// TestCheckK: -k reaches the yardstick. The candidate's error is put
// between the tolerances of k = 2 (the default) and k = 4, so it fails the
// first and passes the second.
func TestCheckK(t *testing.T) {
	dir := attentionFixture(t)
	in := fixtureInputs(t, dir)
	ref, err := ops.Run("attention-forward", []byte(causal), in)
	ensure.NoError(t, err)
	// The yardstick check measures for out with -format float32: its error
	// (MaxAbs, Normwise) does not depend on k.
	ys, err := ops.Yardstick("attention-forward", []byte(causal), in, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	y := ys["out"]
	ensure.Greater(t, y.Report.MaxAbs, 0.0, "the float32 yardstick is not exact here")
	// A float32 port that writes its output widened to float64 (-format
	// float32 judges it as float32): the reference with element 0 moved by
	//
	//	E = 3·MaxAbs + FloorAbs,
	//
	// every other element exact. Its elementwise error is E and the
	// yardstick's elementwise tolerance is k·MaxAbs + FloorAbs
	// (compare.Yardstick), so E exceeds k = 2's by MaxAbs and is below
	// k = 4's by MaxAbs. Its normwise error is E/‖ref‖₂ ≤ 3·Normwise + u,
	// below k = 4's k·Normwise + u, since MaxAbs ≤ Normwise·‖ref‖₂ and
	// FloorAbs = u·max|ref| ≤ u·‖ref‖₂ (u = 2⁻²⁴, float32).
	e := 3*y.Report.MaxAbs + y.FloorAbs
	port := append([]float64(nil), ref["out"].Data...)
	port[0] += e
	actual := port[0] - ref["out"].Data[0] // exact (Sterbenz): E after rounding ref[0] + E to float64
	ensure.Greater(t, actual, 2*y.Report.MaxAbs+y.FloorAbs)
	ensure.Less(t, actual, 4*y.Report.MaxAbs+y.FloorAbs)
	writeNPY(t, filepath.Join(dir, "port.npy"), npy.Float64, ref["out"].Shape, port)

	args := []string{"check", "-format", "float32", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port.npy"}
	o, _ := must(t, dir, 1, args...)
	expect.Contains(t, o, "yardstick: float32 inputs, float32 arithmetic, float32 output: 2 ×")
	expect.Contains(t, o, "verdict: FAIL: 1 of 192 elements exceed the elementwise tolerance")
	o, _ = must(t, dir, 0, append(args, "-k", "4")...)
	expect.Contains(t, o, "yardstick: float32 inputs, float32 arithmetic, float32 output: 4 ×")
	expect.Contains(t, o, "verdict: PASS")
}

func TestDemo(t *testing.T) {
	o, e := must(t, t.TempDir(), 0, "demo")
	expect.Empty(t, e, "no progress when stderr is not a terminal")
	expect.Regexp(t, `(?s)1\. The port as written.*2\. What the port did.*3\. The corrected port`, o)
	expect.Equal(t, 1, strings.Count(o, "verdict: FAIL"))
	expect.Equal(t, 1, strings.Count(o, "verdict: PASS"))
	// The search on the rotary step of q, as check prints it: the slip
	// first, passing, and the position signature; then k, and the
	// attention step with nothing to diagnose.
	expect.Regexp(t, `(?s)`+regexp.QuoteMeta(diagnosisTitle)+`\n  as configured, under the float32 yardstick: FAIL.*\n    1\. "pairing": "halves": PASS, normwise error \S+ \(y \S+ ≤ \S+\)\n`, o)
	expect.Contains(t, o, "y along positions: exact at position 0, wrong from position 1 on")
	expect.Regexp(t, `on k, searched the same way:\n  as configured: FAIL.*\n  the first candidate: "pairing": "halves": PASS`, o)
	expect.Regexp(t, `\n  as configured: PASS, normwise error \S+ \(out \S+ ≤ \S+\): nothing to diagnose\n`, o)
	expect.Regexp(t, `the port: +"pairing": "halves" +frequency i rotates dims \(i, i \+ r/2\)`, o)
	expect.Regexp(t, `the block: +"pairing": "adjacent" +frequency i rotates dims \(2i, 2i\+1\)`, o)
}

// TestDemoFindings checks the demo's numbers in process.
func TestDemoFindings(t *testing.T) {
	var out bytes.Buffer
	res, err := runDemo(&out, true, &env{stdout: &out, stderr: &out})
	ensure.NoError(t, err)
	expect.True(t, res.caught())
	expect.False(t, res.buggy.Verdict.Pass)
	expect.True(t, res.fixed.Verdict.Pass)
	// Query 0 sees only key 0: its output is v₀ whatever the pairing.
	expect.Zero(t, res.perPosition[0])
	for p := 1; p < demoLen; p++ {
		expect.Greater(t, res.perPosition[p], 1e-2, "position %d", p)
	}
	// The rotary steps fail as configured and pass under the port's
	// pairing alone, first; the pairing is a fixed permutation of the dims
	// (posenc's doc), so the other one is far off (normwise error of the
	// order of 1, not of rounding).
	for _, step := range []struct {
		name string
		d    *diagnosis
	}{{"q", res.rotaryQ}, {"k", res.rotaryK}} {
		r := step.d.Result
		ensure.NotNil(t, r, "rotary step on %s: %s", step.name, step.d.Error)
		expect.False(t, r.Given.Pass, step.name)
		expect.Greater(t, float64(r.Given.Normwise), 0.1, step.name)
		ensure.NotEmpty(t, r.Candidates, step.name)
		c := r.Candidates[0]
		expect.Equal(t, slip, c.Change, step.name)
		expect.True(t, c.Measured && c.Pass, step.name)
		// Under the port's own pairing only float32 rounding is left:
		// within the yardstick's normwise tolerance.
		expect.LessOrEqual(t, float64(c.Normwise), float64(c.Outputs[0].Tolerance), step.name)
		expect.Empty(t, r.SubProblem, "the demo's problem is searched whole")
	}
	expect.Equal(t, slip, res.named.Change)
	ensure.NotNil(t, res.attention.Result, res.attention.Error)
	expect.True(t, res.attention.Result.Given.Pass, "the port's attention step is right")
	expect.Empty(t, res.attention.Result.Candidates)

	// Deterministic: a second run prints the same, byte for byte.
	var again bytes.Buffer
	_, err = runDemo(&again, true, &env{stdout: &again, stderr: &again})
	ensure.NoError(t, err)
	expect.Equal(t, out.String(), again.String())
}

func TestHelp(t *testing.T) {
	dir := t.TempDir()
	o, _ := must(t, dir, 0, "help")
	for _, c := range order {
		expect.Contains(t, o, "  "+c+" ")
	}
	_, e := must(t, dir, 2)
	expect.Contains(t, e, "usage: plumb COMMAND")
	for _, c := range order {
		o, _ := must(t, dir, 0, "help", c)
		fs, _ := lookup(c).flagSet(&bytes.Buffer{})
		fs.VisitAll(func(f *flag.Flag) {
			expect.Contains(t, o, "-"+f.Name, "plumb help %s does not explain -%s", c, f.Name)
		})
		o2, _ := must(t, dir, 0, c, "-h")
		_ = o2
	}
	o, _ = must(t, dir, 0, "help", "ops")
	for _, n := range ops.Names() {
		expect.Contains(t, o, n)
		oh, _ := must(t, dir, 0, "help", n)
		op, _ := ops.Lookup(n)
		for _, k := range op.Keys() {
			expect.Contains(t, oh, k.Name)
		}
		for _, p := range append(op.Inputs(), op.Outputs()...) {
			expect.Contains(t, oh, p.Name)
		}
		// An operation's note, if any, is printed after its tensors, every
		// line indented.
		if note := op.Note(); note != "" {
			expect.Contains(t, oh, "\nnote:\n  "+strings.ReplaceAll(note, "\n", "\n  ")+"\n", "plumb help %s", n)
		} else {
			expect.NotContains(t, oh, "\nnote:", "plumb help %s", n)
		}
	}
	oh, _ := must(t, dir, 0, "help", "paged-attention")
	expect.Contains(t, oh, "131072 bytes", "plumb help paged-attention gives the cache size of a position")
	// plumb help conventions lists every word of every convention, with
	// its meaning, as the types declare them.
	o, _ = must(t, dir, 0, "help", "conventions")
	all := vocab.All()
	ensure.NotEmpty(t, all)
	for _, c := range all {
		for _, w := range c.Words {
			expect.Regexp(t, `(?m)\b`+regexp.QuoteMeta(w.Text)+`\b.*`+regexp.QuoteMeta(w.Meaning), o, "plumb help conventions: %s word %q", c.Name, w.Text)
		}
	}
	_, e = must(t, dir, 2, "help", "nosuch")
	expect.Contains(t, e, `plumb help: topic = "nosuch"; want a command (gen, run, diff, check, demo, version), ops, conventions, files or an operation`)
}

// TestBadInputs: every usage or input error exits 2 with a message that
// names the file, key or problem.
func TestBadInputs(t *testing.T) {
	dir := attentionFixture(t)
	w := func(name, text string) {
		ensure.NoError(t, os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644))
	}
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, 5, 6})
	writeNPY(t, filepath.Join(dir, "x23.npy"), npy.Float64, []int{3, 2}, []float64{1, 2, 3, 4, 5, 6})
	writeNPY(t, filepath.Join(dir, "bools.npy"), npy.Bool, []int{2, 3}, []bool{true, false, true, false, true, false})
	writeNPY(t, filepath.Join(dir, "bits.npy"), npy.Uint16, []int{2}, []uint16{1, 2})
	writeNPY(t, filepath.Join(dir, "nan.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, math.NaN(), 6})
	writeNPY(t, filepath.Join(dir, "k5.npy"), npy.Float64, []int{1, 2, 6, 5}, make([]float64, 60))
	// A complex128 array: a valid .npy file of a type plumb does not read.
	hdr := "{'descr': '<c16', 'fortran_order': False, 'shape': (1,), }"
	hdr += strings.Repeat(" ", 128-10-len(hdr)-1) + "\n"
	var cbuf bytes.Buffer
	cbuf.WriteString("\x93NUMPY\x01\x00")
	binary.Write(&cbuf, binary.LittleEndian, uint16(len(hdr)))
	cbuf.WriteString(hdr)
	cbuf.Write(make([]byte, 16))
	w("complex.npy", cbuf.String())
	w("broken.npy", "\x93NUMPY\x01\x00garbage")
	w("relu.json", `{"version": 1, "function": "relu"}`)
	w("eps.json", `{"version": 1, "epsilon": 1e-5}`)
	w("malformed.json", `{"version": 1, "function": "relu"`)
	w("unknown_key.json", `{"version": 1, "function": "relu", "slope": 2}`)
	w("v2.json", `{"version": 2, "function": "relu"}`)
	w("noversion.json", `{"function": "relu"}`)
	w("badword.json", `{"version": 1, "function": "softplus"}`)

	for _, c := range []struct {
		name string
		args []string
		says []string
	}{
		{"unknown command", []string{"frobnicate"}, []string{`plumb: command = "frobnicate"; want one of gen, run, diff, check, demo, version, help`}},
		{"unknown flag", []string{"run", "-bogus", "activation"}, []string{"-bogus"}},
		{"missing file", []string{"run", "activation", "-config", "relu.json", "x=nope.npy"}, []string{"nope.npy: no such file"}},
		{"missing config", []string{"run", "activation", "-config", "nope.json", "x=x.npy"}, []string{"nope.json: no such file"}},
		{"bool input", []string{"run", "activation", "-config", "relu.json", "x=bools.npy"}, []string{`bools.npy (input x) holds bool values; want numbers: a mask belongs in the configuration's "mask" key`}},
		{"unsupported dtype", []string{"diff", "x.npy", "complex.npy"}, []string{"complex.npy", "unsupported element type", "<c16"}},
		{"broken file", []string{"diff", "broken.npy", "x.npy"}, []string{"broken.npy", "malformed"}},
		{"bits without format", []string{"diff", "x.npy", "bits.npy"}, []string{"bits.npy holds uint16 values", "-format"}},
		{"bits of the wrong width", []string{"diff", "-format", "e4m3", "x.npy", "bits.npy"}, []string{"bits.npy holds uint16 values; want uint8 values for -format e4m3"}},
		{"mismatched shapes (diff)", []string{"diff", "x.npy", "x23.npy"}, []string{"shapes differ: x23.npy has shape [3 2]; want [2 3], the shape of x.npy"}},
		{"mismatched shapes (run)", []string{"run", "attention-forward", "q=q.npy", "k=k5.npy", "v=v.npy"}, []string{`ops: invalid input: attention-forward: input "k" has head dimension 5; want 8, the head dimension of "q"`}},
		{"mismatched shapes (check)", []string{"check", "activation", "-config", "relu.json", "x=x.npy", "-got", "y=x23.npy"}, []string{"shapes differ: x23.npy has shape [3 2]; want [2 3], the shape of the reference y"}},
		{"malformed JSON", []string{"run", "activation", "-config", "malformed.json", "x=x.npy"}, []string{"malformed.json", "malformed JSON"}},
		{"unknown key", []string{"run", "activation", "-config", "unknown_key.json", "x=x.npy"}, []string{"unknown_key.json", `unknown key "slope"`}},
		{"unknown version", []string{"run", "activation", "-config", "v2.json", "x=x.npy"}, []string{"v2.json", `"version" = 2`}},
		{"missing version", []string{"run", "activation", "-config", "noversion.json", "x=x.npy"}, []string{`"version" is missing`}},
		{"unknown word", []string{"run", "activation", "-config", "badword.json", "x=x.npy"}, []string{`key "function" = "softplus"; want one of relu,`}},
		{"unknown operation", []string{"run", "attention-sideways", "x=x.npy"}, []string{`operation "attention-sideways" is unknown; want one of `, "attention-forward"}},
		{"unknown input", []string{"run", "activation", "-config", "relu.json", "z=x.npy"}, []string{`input "z" is not an input of activation; want one of x (plumb help activation)`}},
		{"missing input", []string{"run", "attention-forward", "q=q.npy", "k=k.npy"}, []string{`input "v" is missing`}},
		{"NaN in inputs", []string{"run", "activation", "-config", "relu.json", "x=nan.npy"}, []string{"nan.npy: element [1 1] = NaN (1 NaN or ±Inf in all); want finite numbers (-allow-nonfinite"}},
		{"NaN in check inputs", []string{"check", "activation", "-config", "relu.json", "x=nan.npy", "-got", "y=x.npy"}, []string{"nan.npy: element [1 1] = NaN"}},
		{"not NAME=FILE", []string{"run", "activation", "x.npy"}, []string{`input argument = "x.npy"; want NAME=FILE`}},
		{"input twice", []string{"run", "activation", "x=x.npy", "x=x23.npy"}, []string{`input "x" is given twice (x.npy, x23.npy); want each name once`}},
		{"no operation", []string{"run"}, []string{"arguments = []; want an OPERATION"}},
		{"check without -got", []string{"check", "activation", "x=x.npy"}, []string{"-got is missing; want one or more -got OUTPUT=FILE.npy"}},
		{"check unknown output", []string{"check", "activation", "-config", "relu.json", "x=x.npy", "-got", "z=x.npy"}, []string{`-got z: output = "z"; want one of the outputs of activation: y`}},
		{"check output not given", []string{"check", "layernorm-backward", "-config", "eps.json", "x=x.npy", "dy=x.npy", "-got", "dweight=x.npy"},
			[]string{`-got dweight: output = "dweight"; want one this configuration gives: dbias, dx`}},
		{"bad k", []string{"check", "-k", "0.5", "activation", "-config", "relu.json", "x=x.npy", "-got", "y=x.npy"}, []string{"-k = 0.5; want a finite number ≥ 1"}},
		{"unknown format", []string{"diff", "-format", "float13", "x.npy", "x.npy"}, []string{"float13"}},
		{"negative tolerance", []string{"diff", "-abs", "-1", "x.npy", "x.npy"}, []string{"plumb diff: tolerance flags: compare: invalid tolerance: ", "Tolerance.Abs = -1; want"}},
		{"diff arguments", []string{"diff", "x.npy"}, []string{`arguments = ["x.npy"]; want REFERENCE CANDIDATE (two tensor files; plumb help files) (plumb help diff)`}},
		{"gen without shape", []string{"gen", "g.npy"}, []string{"-shape is missing"}},
		{"gen bad shape", []string{"gen", "-shape", "2,x", "g.npy"}, []string{`-shape "2,x": dimension = "x"; want a whole number ≥ 0`}},
		{"gen bad dist", []string{"gen", "-shape", "2", "-dist", "cauchy", "g.npy"}, []string{`-dist = "cauchy"; want normal or uniform`}},
		{"gen bad bounds", []string{"gen", "-shape", "2", "-dist", "uniform", "-low", "1", "-high", "0", "g.npy"}, []string{"-low = 1 and -high = 0; want low < high"}},
		{"gen bad std", []string{"gen", "-shape", "2", "-std", "-1", "g.npy"}, []string{"-std = -1; want a number ≥ 0"}},
		{"gen arguments", []string{"gen", "-shape", "2", "a.npy", "b.npy"}, []string{`arguments = ["a.npy" "b.npy"]; want one output: FILE.npy, - (standard output) or FILE.npz:NAME`}},
		{"gen bad dtype", []string{"gen", "-shape", "2", "-dtype", "int8", "g.npy"}, []string{`-dtype = "int8"; want float64, float32 or float16`}},
		{"demo arguments", []string{"demo", "extra"}, []string{`arguments = ["extra"]; want none (plumb help demo)`}},
		{"help two topics", []string{"help", "run", "diff"}, []string{`plumb help: topics = ["run" "diff"]; want one topic at a time`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, e := must(t, dir, 2, c.args...)
			for _, s := range c.says {
				expect.Contains(t, e, s)
			}
			expect.NotEmpty(t, e)
		})
	}
	// -allow-nonfinite passes NaN to the reference, which propagates it.
	must(t, dir, 0, "run", "-allow-nonfinite", "-out", "nanout", "activation", "-config", "relu.json", "x=nan.npy")
	expect.True(t, math.IsNaN(readNPY(t, filepath.Join(dir, "nanout", "y.npy")).Data[4]))
}

// TestReadmeWalkthrough runs the shell block of README.md marked as the
// walkthrough, with the built binary for "go run ./cmd/plumb" and plumb's
// float32 instantiation standing in for the port of step 2.
func TestReadmeWalkthrough(t *testing.T) {
	readme, err := os.ReadFile("../../README.md")
	ensure.NoError(t, err)
	_, after, ok := strings.Cut(string(readme), "<!-- walkthrough:")
	ensure.True(t, ok, "README.md has no walkthrough marker")
	_, block, ok := strings.Cut(after, "```sh\n")
	ensure.True(t, ok)
	block, _, _ = strings.Cut(block, "```")

	dir := t.TempDir()
	ran := 0
	for _, line := range strings.Split(block, "\n") {
		line = strings.TrimSpace(line)
		switch {
		case line == "" || strings.HasPrefix(line, "#"):
		case strings.HasPrefix(line, "echo '"):
			text, file, ok := strings.Cut(strings.TrimPrefix(line, "echo '"), "' > ")
			ensure.True(t, ok, line)
			ensure.NoError(t, os.WriteFile(filepath.Join(dir, file), []byte(text+"\n"), 0o644))
		case strings.HasPrefix(line, "go run ./cmd/plumb "):
			args := strings.Fields(strings.TrimPrefix(line, "go run ./cmd/plumb "))
			if args[0] == "check" {
				// Step 2: the port writes its float32 output.
				cfg, err := os.ReadFile(filepath.Join(dir, "attn.json"))
				ensure.NoError(t, err)
				low, err := ops.Run32("attention-forward", cfg, fixtureInputs(t, dir))
				ensure.NoError(t, err)
				out := make([]float32, len(low["out"].Data))
				for i, v := range low["out"].Data {
					out[i] = float32(v)
				}
				writeNPY(t, filepath.Join(dir, "port_out.npy"), npy.Float32, low["out"].Shape, out)
			}
			o, _ := must(t, dir, 0, args...)
			if args[0] == "check" {
				expect.Contains(t, o, "verdict: PASS")
			}
			ran++
		default:
			t.Fatalf("the walkthrough has a line this test cannot run: %q", line)
		}
	}
	expect.Equal(t, 4, ran)
}
