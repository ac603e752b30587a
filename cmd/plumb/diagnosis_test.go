package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// slippedPort writes, as name in dir, output out of the operation op run
// by the library under config, which differs from the configuration the
// check is given by one key: the port the check is to diagnose. float32
// ports are plumb's float32 instantiation (ops.Run32), the straightforward
// port of that configuration; float64 ports its float64 reference.
func slippedPort(t *testing.T, dir, name, op, config string, in ops.Tensors, out string, dt npy.DType) {
	t.Helper()
	run := ops.Run32
	if dt == npy.Float64 {
		run = ops.Run
	}
	got, err := run(op, []byte(config), in)
	ensure.NoError(t, err)
	g := got[out]
	if dt == npy.Float64 {
		writeNPY(t, filepath.Join(dir, name), npy.Float64, g.Shape, g.Data)
		return
	}
	f := make([]float32, len(g.Data))
	for i, v := range g.Data {
		f[i] = float32(v) // exact: Run32's values are float32 values
	}
	writeNPY(t, filepath.Join(dir, name), npy.Float32, g.Shape, f)
}

// section returns the diagnosis section of a check's text output, or ""
// when there is none; it must come after every report.
func section(t *testing.T, o string) string {
	t.Helper()
	i := strings.Index(o, diagnosisTitle+"\n")
	if i < 0 {
		return ""
	}
	expect.NotContains(t, o[i:], "verdict:", "the section comes after the reports")
	return o[i:]
}

// firstListed is the change of the first candidate the section lists.
func firstListed(s string) string {
	for _, l := range strings.Split(s, "\n") {
		if rest, ok := strings.CutPrefix(l, "    1. "); ok {
			return rest
		}
	}
	return ""
}

// attentionCheck is the check of port.npy against the attention
// fixture's configuration c.json, with the flags extra.
func attentionCheck(extra ...string) []string {
	return append([]string{"check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port.npy"}, extra...)
}

// checkCyclePort writes, as port.npy in dir beside the attention inputs
// and c.json (the causal configuration), the port in storage dt that reads
// kv head h mod Hkv ("group": "cycle"), checks it, which must fail (exit
// status 1), and returns the output and its diagnosis section, which must
// be there.
func checkCyclePort(t *testing.T, dir string, dt npy.DType) (o, s string) {
	t.Helper()
	slippedPort(t, dir, "port.npy", "attention-forward", `{"version": 1, "mask": [{"kind": "causal"}], "group": "cycle"}`,
		fixtureInputs(t, dir), "out", dt)
	o, _ = must(t, dir, 1, attentionCheck()...)
	s = section(t, o)
	ensure.NotEmpty(t, s, o)
	return o, s
}

// A float32 attention port that reads kv head h mod Hkv where the
// configuration says consecutive query heads share one (4 query heads on
// 2 kv heads: blocks reads 0 0 1 1, cycle 0 1 0 1) fails its check, and
// the section names "group": "cycle" first, passing. -no-diagnosis removes
// the section and -json carries it; the exit status is 1 either way.
func TestCheckDiagnosisGroupMap(t *testing.T) {
	dir := attentionFixture(t)
	o, s := checkCyclePort(t, dir, npy.Float32)
	expect.Contains(t, o, "verdict: FAIL")
	expect.Contains(t, s, "as configured, under the float32 yardstick: FAIL")
	expect.Contains(t, s, "on the whole problem\n", "192 + 2·96 input values are searched whole")
	expect.Contains(t, s, "the port passes under")
	expect.Regexp(t, `^"group": "cycle": PASS, normwise error \S+ \(out \S+ ≤ \S+\)$`, firstListed(s))
	// The heads signature: the two maps agree on heads 0 and 3 alone
	// (0/2 = 0 mod 2 = 0, 3/2 = 3 mod 2 = 1), so only they are exact.
	expect.Contains(t, s, "error signatures of the failing outputs, on the whole problem:\n    out along heads: exact exactly at the heads h where h/2 = h mod 2 (0, 3)")

	o2, _ := must(t, dir, 1, attentionCheck("-no-diagnosis")...)
	expect.Empty(t, section(t, o2))
	expect.Equal(t, o2, o[:strings.Index(o, "\n"+diagnosisTitle)], "without the section, the reports are as they were")

	o, _ = must(t, dir, 1, attentionCheck("-json")...)
	var j checkJSON
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	ensure.Len(t, j.Outputs, 1)
	expect.False(t, j.Outputs[0].Report.Verdict.Pass)
	ensure.NotNil(t, j.Diagnosis)
	ensure.NotNil(t, j.Diagnosis.Result, j.Diagnosis.Error)
	d := j.Diagnosis.Result
	expect.Equal(t, "attention-forward", d.Op)
	expect.False(t, d.Given.Pass)
	ensure.NotEmpty(t, d.Candidates)
	expect.Equal(t, `"group": "cycle"`, d.Candidates[0].Change)
	expect.True(t, d.Candidates[0].Measured && d.Candidates[0].Pass)
	expect.NotEmpty(t, d.Signatures)
	expect.Empty(t, j.Diagnosis.Note)

	o, _ = must(t, dir, 1, attentionCheck("-json", "-no-diagnosis")...)
	expect.NotContains(t, o, `"diagnosis"`)
}

// A float32 rotary port that pairs dims (i, i + d/2) where the
// configuration says (2i, 2i+1) gets "pairing": "halves" first.
func TestCheckDiagnosisRotaryPairing(t *testing.T) {
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "1,2,6,8", "-seed", "1", "x.npy")
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "r.json"), []byte(`{"version": 1, "base": 10000}`), 0o644))
	in := ops.Tensors{"x": readNPY(t, filepath.Join(dir, "x.npy"))}
	slippedPort(t, dir, "port.npy", "rotary-apply", `{"version": 1, "base": 10000, "pairing": "halves"}`, in, "y", npy.Float32)
	o, _ := must(t, dir, 1, "check", "rotary-apply", "-config", "r.json", "x=x.npy", "-got", "y=port.npy")
	s := section(t, o)
	ensure.NotEmpty(t, s, o)
	expect.Regexp(t, `^"pairing": "halves": PASS, normwise error \S+ \(y \S+ ≤ \S+\)$`, firstListed(s))
	// Position 0 is not rotated (angle 0·θ = 0) whatever the pairing.
	expect.Contains(t, s, "y along positions: exact at position 0, wrong from position 1 on")
}

// A correct port gets no section; one that fails only tolerance flags
// tighter than its yardstick gets a section that says there is no change
// to name.
func TestCheckDiagnosisCorrectPort(t *testing.T) {
	dir := attentionFixture(t)
	slippedPort(t, dir, "port.npy", "attention-forward", causal, fixtureInputs(t, dir), "out", npy.Float32)
	o, _ := must(t, dir, 0, attentionCheck()...)
	expect.NotContains(t, o, diagnosisTitle)
	o, _ = must(t, dir, 0, attentionCheck("-json")...)
	expect.NotContains(t, o, `"diagnosis"`)

	// -abs 1e-12 is far below a float32 rounding of these values (of
	// order 1: unit roundoff 2⁻²⁴ ≈ 6e-8), so the float32 port fails it.
	o, _ = must(t, dir, 1, attentionCheck("-abs", "1e-12")...)
	s := section(t, o)
	ensure.NotEmpty(t, s, o)
	expect.Contains(t, s, "as configured, under the float32 yardstick: PASS")
	expect.Contains(t, s, "there is no change to name")
	expect.Empty(t, firstListed(s))
}

// A float64 port with the other group map is searched under the float32
// yardstick, and the section says so.
func TestCheckDiagnosisFloat64(t *testing.T) {
	_, s := checkCyclePort(t, attentionFixture(t), npy.Float64)
	expect.Contains(t, s, "(the candidates are float64, which has no yardstick: they are judged by the float32 one")
	expect.Regexp(t, `^"group": "cycle": PASS`, firstListed(s))
}

// A problem larger than the search's bound is searched on its first batch
// entries, and the section says which: q [4, 4, 64, 16] and k, v
// [4, 2, 64, 16] hold 16384 + 2·8192 = 32768 input values; the bound
// diagnosisElements = 16384 keeps 4·16384/32768 = 2 of the 4 entries
// (diagnose.Options.MaxElements).
func TestCheckDiagnosisSubProblem(t *testing.T) {
	ensure.Equal(t, 16384, diagnosisElements, "the derivation above")
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "4,4,64,16", "-seed", "1", "q.npy")
	must(t, dir, 0, "gen", "-shape", "4,2,64,16", "-seed", "2", "k.npy")
	must(t, dir, 0, "gen", "-shape", "4,2,64,16", "-seed", "3", "v.npy")
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "c.json"), []byte(causal), 0o644))
	_, s := checkCyclePort(t, dir, npy.Float32)
	expect.Contains(t, s, "on a sub-problem, batch entries 0–1 of 4 (16384 of 32768 input values)\n")
	expect.Regexp(t, `^"group": "cycle": PASS`, firstListed(s))
	// The signatures are of the whole problem.
	expect.Contains(t, s, "error signatures of the failing outputs, on the whole problem:")
}

// The bounds and the title that cmd/plumb's package documentation states
// are the code's.
func TestDiagnosisDocumented(t *testing.T) {
	doc, err := os.ReadFile("doc.go")
	ensure.NoError(t, err)
	expect.Contains(t, string(doc), fmt.Sprintf("(at most %d configurations, each on at most %d input values", diagnosisCandidates, diagnosisElements))
	expect.Contains(t, string(doc), `"`+diagnosisTitle+`"`)
	expect.Contains(t, string(doc), "-no-diagnosis")
	o, _ := must(t, t.TempDir(), 0, "help", "check")
	expect.Contains(t, o, `"`+diagnosisTitle+`"`)
	expect.Contains(t, o, fmt.Sprintf("most %d configurations, each on at most %d input values", diagnosisCandidates, diagnosisElements))
}

// A search that could not run is said in the section, with its error.
func TestWriteDiagnosisError(t *testing.T) {
	var b strings.Builder
	ensure.NoError(t, writeDiagnosis(&b, &diagnosis{Error: "ops: invalid input: example"}))
	expect.Equal(t, diagnosisTitle+"\n  the search could not run: ops: invalid input: example\n", b.String())
	js, err := json.Marshal(&diagnosis{Error: "e"})
	ensure.NoError(t, err)
	expect.JSONEq(t, `{"error": "e"}`, string(js))
}
