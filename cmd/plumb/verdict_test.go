package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/npy"
)

// firstKey is the first key of the JSON object s.
func firstKey(t *testing.T, s string) string {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(s))
	tok, err := dec.Token()
	require.NoError(t, err)
	require.Equal(t, json.Delim('{'), tok)
	tok, err = dec.Token()
	require.NoError(t, err)
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
	require.NoError(t, json.Unmarshal([]byte(o), &d))
	require.NotNil(t, d.Pass)
	assert.True(t, *d.Pass)
	assert.Equal(t, "pass", firstKey(t, o))
	assert.Equal(t, "out.npy", d.Candidate, "the other keys are kept")
	o, _ = must(t, dir, 1, "diff", "-json", "out.npy", "bad.npy")
	d.Pass = nil
	require.NoError(t, json.Unmarshal([]byte(o), &d))
	require.NotNil(t, d.Pass)
	assert.False(t, *d.Pass)

	check := []string{"check", "-json", "-no-diagnosis", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "lse=lse.npy"}
	var c struct {
		Pass    *bool `json:"pass"`
		Outputs []struct {
			Pass   *bool  `json:"pass"`
			Output string `json:"output"`
		} `json:"outputs"`
	}
	o, _ = must(t, dir, 0, append(check, "-got", "out=out.npy")...)
	require.NoError(t, json.Unmarshal([]byte(o), &c))
	assert.Equal(t, "pass", firstKey(t, o))
	require.NotNil(t, c.Pass)
	assert.True(t, *c.Pass)
	require.Len(t, c.Outputs, 2)
	o, _ = must(t, dir, 1, append(check, "-got", "out=bad.npy")...)
	c.Pass = nil
	require.NoError(t, json.Unmarshal([]byte(o), &c))
	require.NotNil(t, c.Pass)
	assert.False(t, *c.Pass)
	require.Len(t, c.Outputs, 2)
	assert.Equal(t, "out", c.Outputs[0].Output)
	assert.False(t, *c.Outputs[0].Pass)
	assert.Equal(t, "lse", c.Outputs[1].Output)
	assert.True(t, *c.Outputs[1].Pass)
	// checkJSON still reads back.
	var j checkJSON
	require.NoError(t, json.Unmarshal([]byte(o), &j))
	assert.False(t, j.Outputs[0].Report.Verdict.Pass)
}

// plumb help diff and help check explain the report: max abs error
// against the ranking of the worst elements, the floor of the relative
// error, "not used", and "pass".
func TestHelpExplainsReport(t *testing.T) {
	for _, cmd := range []string{"diff", "check"} {
		o, _ := must(t, t.TempDir(), 0, "help", cmd)
		assert.Equal(t, 1, strings.Count(o, "Reading the report."), cmd)
		for _, want := range []string{`"max abs error" is the largest |got − ref|`, "ranked by how far each exceeds the\ntolerance",
			`"× tol"`, "floor printed on the line below it", `reads "not used"`, `"pass": true`} {
			assert.Contains(t, o, want, cmd)
		}
	}
	for _, l := range strings.Split(reportAbout, "\n") {
		assert.LessOrEqual(t, utf8.RuneCountInString(l), 76, l)
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
	assert.Contains(t, o, "basis: yardstick: float32 inputs, float32 arithmetic")
	assert.Contains(t, o, "ULPs not used")
	for _, l := range strings.Split(o, "\n") {
		assert.LessOrEqual(t, utf8.RuneCountInString(l), 100, l)
	}
}
