package golden

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

const good = `{
  "schema": 1, "package": "demo", "family": "tiny", "generator": "testdata/gen/fam_demo.py",
  "cases": [
    {"name": "one", "source": "a paper, Eq. (1)", "digits": 50,
     "config": {"scale": 2},
     "inputs": {"x": {"dtype": "float64", "shape": [2], "data": ["0x1.8p+0", "-inf"], "decimal": ["1.5", "-inf"]}},
     "outputs": {"y": {"dtype": "float64", "shape": [1, 2], "data": ["0x1.0p-1074", "nan"]},
                 "v": {"dtype": "bool", "shape": [2], "data": [true, false]},
                 "n": {"dtype": "int", "shape": [0, 2], "data": []}}}
  ]
}`

func TestParseGood(t *testing.T) {
	f, err := Parse("good.json", []byte(good))
	ensure.NoError(t, err)
	ensure.Len(t, f.Cases, 1)
	c := f.Cases[0]
	expect.Equal(t, "one", c.Name)
	expect.Equal(t, 50, c.Digits)
	x, shape, err := c.Float("x")
	ensure.NoError(t, err)
	expect.Equal(t, []int{2}, shape)
	expect.Equal(t, 1.5, x[0])
	expect.True(t, math.IsInf(x[1], -1))
	y, _, err := c.Float("y")
	ensure.NoError(t, err)
	expect.Equal(t, math.SmallestNonzeroFloat64, y[0], "hex floats are read exactly, subnormals included")
	expect.True(t, math.IsNaN(y[1]))
	v, _, err := c.Bools("v")
	ensure.NoError(t, err)
	expect.Equal(t, []bool{true, false}, v)
	n, shape, err := c.Ints("n")
	ensure.NoError(t, err)
	expect.Empty(t, n)
	expect.Equal(t, []int{0, 2}, shape)
	expect.True(t, c.Has("x"))
	expect.False(t, c.Has("z"))

	var cfg struct {
		Scale int `json:"scale"`
	}
	ensure.NoError(t, c.DecodeConfig(&cfg))
	expect.Equal(t, 2, cfg.Scale)
	var narrow struct{}
	err = c.DecodeConfig(&narrow)
	ensure.ErrorIs(t, err, ErrMalformed)
	expect.Contains(t, err.Error(), `good.json: case "one": config`)

	_, _, err = c.Float("v")
	ensure.ErrorIs(t, err, ErrMalformed)
	expect.Contains(t, err.Error(), `tensor "v" is bool, want float64`)
	_, _, err = c.Float("z")
	expect.Contains(t, err.Error(), `good.json: case "one": no tensor "z"`)
}

// TestParseMalformed: every malformed file gives an error that wraps
// ErrMalformed and names the file and, where there is one, the case.
func TestParseMalformed(t *testing.T) {
	edit := func(old, new string) string {
		ensure.Contains(t, good, old)
		return strings.Replace(good, old, new, 1)
	}
	tests := []struct {
		name, text, want string
	}{
		{"not json", "{", "bad.json: unexpected EOF"},
		{"trailing data", good + "{}", "bad.json: trailing data"},
		{"unknown key", edit(`"schema": 1,`, `"schema": 1, "extra": 0,`), `bad.json: json: unknown field "extra"`},
		{"wrong schema", edit(`"schema": 1`, `"schema": 2`), "bad.json: schema is 2"},
		{"no family", edit(`"family": "tiny"`, `"family": ""`), "bad.json: package, family and generator"},
		{"no cases", `{"schema":1,"package":"p","family":"f","generator":"g","cases":[]}`, "bad.json: no cases"},
		{"no name", edit(`"name": "one"`, `"name": ""`), "bad.json: case #0: missing name"},
		{"no source", edit(`"source": "a paper, Eq. (1)"`, `"source": ""`), `bad.json: case "one": missing source`},
		{"low precision", edit(`"digits": 50`, `"digits": 17`), `bad.json: case "one": digits is 17, want at least 50`},
		{"shape mismatch", edit(`"shape": [2], "data": ["0x1.8p+0"`, `"shape": [3], "data": ["0x1.8p+0"`), `bad.json: case "one": input "x": shape [3] holds 3 elements, data has 2`},
		{"negative dim", edit(`"shape": [0, 2]`, `"shape": [-1, 2]`), `case "one": output "n": negative dimension -1`},
		{"decimal spelling", edit(`"0x1.8p+0"`, `"1.5"`), `case "one": input "x": element 0: "1.5" is not a hex float`},
		{"bad hex", edit(`"0x1.8p+0"`, `"0x1.8q+0"`), `case "one": input "x": element 0: "0x1.8q+0" is not a hex float`},
		{"number not string", edit(`"0x1.8p+0"`, `1.5`), `case "one": input "x": element 0: want a hex-float string, got 1.5`},
		{"bad bool", edit(`[true, false]`, `[true, 0]`), `case "one": output "v": element 1: want true or false`},
		{"bad int", edit(`"data": []`, `"data": [1.5, 2]`), `case "one": output "n"`},
		{"bad dtype", edit(`"dtype": "bool"`, `"dtype": "complex"`), `case "one": output "v": unknown dtype "complex"`},
		{"decimal copy length", edit(`"decimal": ["1.5", "-inf"]`, `"decimal": ["1.5"]`), `case "one": input "x": decimal copy has 1 elements, data has 2`},
		{"unknown case key", edit(`"outputs": {"y"`, `"outputs": {}, "unused": {"y"`), `bad.json: json: unknown field "unused"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Parse("bad.json", []byte(tc.text))
			ensure.Error(t, err)
			expect.True(t, errors.Is(err, ErrMalformed), "%v does not wrap ErrMalformed", err)
			expect.Contains(t, err.Error(), tc.want)
		})
	}
}

func TestDuplicateAndEmptyOutputs(t *testing.T) {
	dup := `{"schema":1,"package":"p","family":"f","generator":"g","cases":[
	  {"name":"a","source":"s","digits":50,"outputs":{"y":{"dtype":"int","shape":[],"data":[1]}}},
	  {"name":"a","source":"s","digits":50,"outputs":{"y":{"dtype":"int","shape":[],"data":[1]}}}]}`
	_, err := Parse("dup.json", []byte(dup))
	ensure.ErrorIs(t, err, ErrMalformed)
	expect.Contains(t, err.Error(), `dup.json: case "a": duplicate name`)

	none := `{"schema":1,"package":"p","family":"f","generator":"g","cases":[
	  {"name":"a","source":"s","digits":50,"outputs":{}}]}`
	_, err = Parse("none.json", []byte(none))
	ensure.ErrorIs(t, err, ErrMalformed)
	expect.Contains(t, err.Error(), `none.json: case "a": no outputs`)
}

func TestLoadMissingFile(t *testing.T) {
	_, err := Load(filepath.Join(t.TempDir(), "absent.json"))
	ensure.ErrorIs(t, err, os.ErrNotExist)
	expect.Contains(t, err.Error(), "absent.json")
}

// TestEveryGoldenFileLoads parses every file under testdata/golden, so a
// malformed file is caught here even before the package that uses it.
func TestEveryGoldenFileLoads(t *testing.T) {
	paths, err := filepath.Glob(filepath.Join(Dir(), "*", "*.json"))
	ensure.NoError(t, err)
	ensure.NotEmpty(t, paths, "no golden files under %s", Dir())
	for _, p := range paths {
		f, err := Load(p)
		ensure.NoError(t, err)
		expect.Equal(t, filepath.Base(filepath.Dir(p)), f.Package, "%s: package field", p)
		expect.Equal(t, strings.TrimSuffix(filepath.Base(p), ".json"), f.Family, "%s: family field", p)
	}
}

func TestNormwiseRelErr(t *testing.T) {
	// ‖(0.03, 0.04)‖₂ / ‖(3, 4)‖₂ = 0.05 / 5 = 0.01 (arithmetic).
	expect.InDelta(t, 0.01, NormwiseRelErr([]float64{3.03, 4.04}, []float64{3, 4}), 1e-15)
	expect.Equal(t, 0.0, NormwiseRelErr([]float64{1, math.NaN(), math.Inf(-1)}, []float64{1, math.NaN(), math.Inf(-1)}))
	expect.True(t, math.IsInf(NormwiseRelErr([]float64{1, 2}, []float64{1, math.NaN()}), 1), "NaN expected, finite got")
	expect.True(t, math.IsInf(NormwiseRelErr([]float64{math.NaN()}, []float64{1}), 1), "finite expected, NaN got")
	expect.True(t, math.IsInf(NormwiseRelErr([]float64{math.Inf(1)}, []float64{math.Inf(-1)}), 1), "infinities of opposite sign")
	expect.True(t, math.IsInf(NormwiseRelErr([]float64{1}, []float64{1, 2}), 1), "length mismatch")
	// Zero reference: the absolute norm.
	expect.Equal(t, 5.0, NormwiseRelErr([]float64{3, 4}, []float64{0, 0}))
	// Near the overflow threshold the scaled norm still gives the ratio:
	// ‖(1e300, 1e300)·1e-8‖ / ‖(1e300, 1e300)‖ = 1e-8.
	expect.InDelta(t, 1e-8, NormwiseRelErr([]float64{1e300 * (1 + 1e-8), 1e300 * (1 + 1e-8)}, []float64{1e300, 1e300}), 1e-15)
	// And near the underflow threshold.
	expect.InDelta(t, 0.5, NormwiseRelErr([]float64{1.5e-310}, []float64{1e-310}), 1e-6)
}

func TestDescribe(t *testing.T) {
	f, err := Parse("good.json", []byte(good))
	ensure.NoError(t, err)
	expect.Equal(t, `good.json: one: y: normwise relative error 2e-13 exceeds 1e-14`, Describe(f.Cases[0], "y", 2e-13, 1e-14))
}
