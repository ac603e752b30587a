package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
)

// firstKey is the first key of the JSON object s.
func firstKey(t *testing.T, s string) string {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(s))
	tok, err := dec.Token()
	ensure.NoError(t, err)
	ensure.Equal(t, json.Delim('{'), tok)
	tok, err = dec.Token()
	ensure.NoError(t, err)
	return tok.(string)
}

// diff -json and check -json start with "pass", the verdict the exit
// status gives; check's outputs each carry their own.
func TestJSONPass(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "out.npy"))
	bad := append([]float64(nil), ref.Data...)
	bad[7] += 0.25
	writeNPY(t, filepath.Join(dir, "bad.npy"), npy.Float64, ref.Shape, bad)

	var d struct {
		Pass      *bool  `json:"pass"`
		Candidate string `json:"candidate"`
	}
	o, _ := must(t, dir, 0, "diff", "-json", "out.npy", "out.npy")
	ensure.NoError(t, json.Unmarshal([]byte(o), &d))
	ensure.NotNil(t, d.Pass)
	expect.True(t, *d.Pass)
	expect.Equal(t, "pass", firstKey(t, o))
	expect.Equal(t, "out.npy", d.Candidate, "the other keys are kept")
	o, _ = must(t, dir, 1, "diff", "-json", "out.npy", "bad.npy")
	d.Pass = nil
	ensure.NoError(t, json.Unmarshal([]byte(o), &d))
	ensure.NotNil(t, d.Pass)
	expect.False(t, *d.Pass)

	check := []string{"check", "-json", "-no-diagnosis", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "lse=lse.npy"}
	var c struct {
		Pass    *bool `json:"pass"`
		Outputs []struct {
			Pass   *bool  `json:"pass"`
			Output string `json:"output"`
		} `json:"outputs"`
	}
	o, _ = must(t, dir, 0, append(check, "-got", "out=out.npy")...)
	ensure.NoError(t, json.Unmarshal([]byte(o), &c))
	expect.Equal(t, "pass", firstKey(t, o))
	ensure.NotNil(t, c.Pass)
	expect.True(t, *c.Pass)
	ensure.Len(t, c.Outputs, 2)
	o, _ = must(t, dir, 1, append(check, "-got", "out=bad.npy")...)
	c.Pass = nil
	ensure.NoError(t, json.Unmarshal([]byte(o), &c))
	ensure.NotNil(t, c.Pass)
	expect.False(t, *c.Pass)
	ensure.Len(t, c.Outputs, 2)
	expect.Equal(t, "out", c.Outputs[0].Output)
	expect.False(t, *c.Outputs[0].Pass)
	expect.Equal(t, "lse", c.Outputs[1].Output)
	expect.True(t, *c.Outputs[1].Pass)
	// checkJSON still reads back.
	var j checkJSON
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	expect.False(t, j.Outputs[0].Report.Verdict.Pass)
}

// plumb help diff and help check explain the report: max abs error
// against the ranking of the worst elements, the floor of the relative
// error, "not used", and "pass".
func TestHelpExplainsReport(t *testing.T) {
	for _, cmd := range []string{"diff", "check"} {
		o, _ := must(t, t.TempDir(), 0, "help", cmd)
		expect.Equal(t, 1, strings.Count(o, "Reading the report."), cmd)
		for _, want := range []string{`"max abs error" is the largest |got − ref|`, "ranked by how far each exceeds the\ntolerance",
			`"× tol"`, "floor printed on the line below it", `reads "not used"`, `"pass": true`} {
			expect.Contains(t, o, want, cmd)
		}
	}
	for _, l := range strings.Split(reportAbout, "\n") {
		expect.LessOrEqual(t, utf8.RuneCountInString(l), 76, l)
	}
}

// The report plumb diff prints keeps its lines of words within 100
// characters, the yardstick's basis of check included.
func TestReportLinesFit(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "out.npy"))
	f32 := make([]float32, len(ref.Data))
	for i, v := range ref.Data {
		f32[i] = float32(v) * 1.001
	}
	writeNPY(t, filepath.Join(dir, "f32.npy"), npy.Float32, ref.Shape, f32)
	o, _ := must(t, dir, 1, "check", "-no-diagnosis", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=f32.npy")
	expect.Contains(t, o, "basis: yardstick: float32 inputs, float32 arithmetic")
	expect.Contains(t, o, "ULPs not used")
	for _, l := range strings.Split(o, "\n") {
		expect.LessOrEqual(t, utf8.RuneCountInString(l), 100, l)
	}
}
