package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
)

// rotaryAngles32 is a float32 rotary port of adjacent pairs, base 10000,
// that forms its angles as the usual framework idiom does: θ_i and the
// position m in float32, the angle their float32 product, cos and sin of
// it rounded to float32. x holds rows of d values, l of them a sequence.
func rotaryAngles32(x []float32, l, d int) []float32 {
	y := make([]float32, len(x))
	for row := range len(x) / d {
		m := float32(row % l)
		for i := range d / 2 {
			theta := float32(math.Pow(10000, -2*float64(i)/float64(d)))
			a := m * theta
			c, s := float32(math.Cos(float64(a))), float32(math.Sin(float64(a)))
			x0, x1 := x[row*d+2*i], x[row*d+2*i+1]
			y[row*d+2*i] = float32(x0*c) - float32(x1*s)
			y[row*d+2*i+1] = float32(x0*s) + float32(x1*c)
		}
	}
	return y
}

// A rotary port that forms its angles in float32, over 2048 positions,
// fails the plain check (its error grows with the position, far past the
// float32 rotation's) and passes with "angles": "float32-angles"
// declared; the report then says what the idiom costs against the plain
// float32 run, at the first and the last position too, in a short block
// of lines within 100 characters, and -json carries the same numbers.
// With no idiom declared there is no block.
func TestCheckIdiomCost(t *testing.T) {
	const l, d = 2048, 32
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "1,2,2048,32", "-seed", "4", "x.npy")
	x := readNPY(t, filepath.Join(dir, "x.npy"))
	x32 := make([]float32, len(x.Data))
	for i, v := range x.Data {
		x32[i] = float32(v)
	}
	writeNPY(t, filepath.Join(dir, "port.npy"), npy.Float32, x.Shape, rotaryAngles32(x32, l, d))
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "plain.json"), []byte(`{"version": 1}`), 0o644))
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "idiom.json"), []byte(`{"version": 1, "angles": "float32-angles"}`), 0o644))
	check := func(want int, config string, extra ...string) string {
		o, _ := must(t, dir, want, append([]string{"check", "rotary-apply", "-config", config, "x=x.npy", "-got", "y=port.npy"}, extra...)...)
		return o
	}

	o := check(1, "plain.json", "-no-diagnosis")
	expect.Contains(t, o, "verdict: FAIL")
	expect.NotContains(t, o, idiomCostTitle, "no idiom declared, no cost")
	o = check(1, "plain.json", "-no-diagnosis", "-json")
	expect.NotContains(t, o, `"idiom_cost"`)

	o = check(0, "idiom.json")
	expect.Contains(t, o, "verdict: PASS")
	i := strings.Index(o, idiomCostTitle)
	ensure.GreaterOrEqual(t, i, 0, o)
	block := strings.TrimRight(o[i:], "\n")
	expect.NotContains(t, block, "verdict:", "the block comes after the report")
	lines := strings.Split(block, "\n")
	ensure.Len(t, lines, 4, block)
	for _, line := range lines {
		expect.LessOrEqual(t, utf8.RuneCountInString(line), 100, "%q", line)
	}
	expect.Equal(t, idiomCostTitle+" (angles = float32-angles)", lines[0])
	expect.Equal(t, "  against the plain float32 run (the configuration without it), under the float32 yardstick:", lines[1])
	expect.Regexp(t, `^    y: normwise \S+ \(plain \S+, ×\S+\), max abs \S+ \(plain \S+\)$`, lines[2])
	expect.Regexp(t, `^      max abs at position 0: \S+ \(plain \S+\), at position 2047: \S+ \(plain \S+\)$`, lines[3])
	t.Logf("\n%s", block)

	o = check(0, "idiom.json", "-json")
	var j struct {
		Pass      bool
		IdiomCost *idiomCost `json:"idiom_cost"`
	}
	ensure.NoError(t, json.Unmarshal([]byte(o), &j))
	expect.True(t, j.Pass)
	c := j.IdiomCost
	ensure.NotNil(t, c, o)
	ensure.NotNil(t, c.IdiomCost, c.Error)
	expect.Equal(t, compare.Float32, c.Format)
	expect.Empty(t, c.Note)
	expect.Equal(t, "angles = float32-angles", c.Keys)
	expect.False(t, c.SubProblem, "measured on the check's own inputs")
	ensure.Len(t, c.Outputs, 1)
	y := c.Outputs[0]
	expect.Equal(t, "y", y.Output)
	expect.Greater(t, float64(y.Ratio), 20.0, "the idiom costs many times the plain float32 run's error")
	expect.InDelta(t, float64(y.Normwise)/float64(y.PlainNormwise), float64(y.Ratio), 1e-9*float64(y.Ratio))
	expect.Greater(t, float64(y.MaxAbs), float64(y.PlainMaxAbs))
	ensure.Len(t, y.Positions, 2)
	expect.Equal(t, 0, y.Positions[0].Position)
	expect.Equal(t, l-1, y.Positions[1].Position)
	expect.Greater(t, float64(y.Positions[1].MaxAbs), 100*float64(y.Positions[1].PlainMaxAbs), "the angle error grows with the position")
	expect.Greater(t, float64(y.Positions[1].MaxAbs), 10*float64(y.Positions[0].MaxAbs))
	// The text shows these numbers.
	expect.Contains(t, lines[2], "normwise "+g3(float64(y.Normwise))+" (plain "+g3(float64(y.PlainNormwise))+", ×"+g3(float64(y.Ratio))+")")
	expect.Contains(t, lines[3], "at position 2047: "+g3(float64(y.Positions[1].MaxAbs))+" (plain "+g3(float64(y.Positions[1].PlainMaxAbs))+")")

	// The same port written in float64, which has no yardstick: the cost
	// is measured under the float32 one, and the block says so; so it does
	// when tolerance flags judge the candidate.
	y64 := make([]float64, len(x32))
	for i, v := range rotaryAngles32(x32, l, d) {
		y64[i] = float64(v)
	}
	writeNPY(t, filepath.Join(dir, "port64.npy"), npy.Float64, x.Shape, y64)
	o, _ = must(t, dir, 1, "check", "rotary-apply", "-config", "idiom.json", "x=x.npy", "-got", "y=port64.npy", "-no-diagnosis")
	expect.Contains(t, o, idiomCostTitle+" (angles = float32-angles)\n  (the candidates are float64, which has no yardstick: the cost is measured under the float32 one)\n")
	expect.Contains(t, o, lines[2]+"\n"+lines[3]+"\n", "the same cost")
	o = check(0, "idiom.json", "-abs", "1e-3")
	expect.Contains(t, o, "  (the tolerance flags judged the candidates, not the idiom's yardstick)\n")

	o, _ = must(t, dir, 0, "help", "check")
	expect.Contains(t, o, `"`+idiomCostTitle+`"`)
	expect.Contains(t, o, `"idiom_cost"`)
}

// A cost that could not be measured is said in the block, with its error.
func TestWriteIdiomCostError(t *testing.T) {
	var b strings.Builder
	ensure.NoError(t, writeIdiomCost(&b, &idiomCost{Format: compare.Float32, Error: "ops: invalid input: example"}))
	expect.Equal(t, idiomCostTitle+"\n  the cost could not be measured: ops: invalid input: example\n", b.String())
	js, err := json.Marshal(&idiomCost{Format: compare.Float32, Error: "e"})
	ensure.NoError(t, err)
	expect.JSONEq(t, `{"format": "float32", "error": "e"}`, string(js))
}

func g3(x float64) string { return fmt.Sprintf("%.3g", x) }
