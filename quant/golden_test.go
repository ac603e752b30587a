package quant

import (
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// The golden files testdata/golden/quant/*.json are written by
// testdata/gen/fam_quant.py: scales, zero points, codes and dequantised
// values computed with exact rationals from the definitions of doc.go
// (Jacob et al. 2018 for the integer model, OFP8 rev 1.0 for the FP8
// elements), and SQNR from exact sums with mpmath's logarithm.
//
// Codes, scales, zero points and dequantised values are exact, so they are
// compared bit for bit: the accuracy table shows 0 for them, and any slip
// (a tie, a scale rounded the wrong way, a nibble order) fails. SQNR is a
// logarithm of exact sums rounded once and carries the bound of its doc,
// a few ulps; sqnrBound is that with margin.
const sqnrBound = 1e-14

// accuracy is the package's accuracy table in doc.go.
var accuracy = &golden.Accuracy{
	Path: "doc.go",
	Rows: []string{"Quantise", "Quantise32", "Dequantise", "Pack4", "Unpack4", "QuantiseFP8", "DequantiseFP8", "SQNR"},
	Cols: []string{"codes", "scales", "zeros", "values"},
}

func TestMain(m *testing.M) { os.Exit(accuracy.Main(m)) }

type quantiseConfig struct {
	Rows        int         `json:"rows"`
	Cols        int         `json:"cols"`
	Symmetry    Symmetry    `json:"symmetry"`
	Granularity Granularity `json:"granularity"`
	Channel     Channel     `json:"channel"`
	Group       int         `json:"group"`
	Width       Width       `json:"width"`
	Range       Range       `json:"range"`
	Rounding    Rounding    `json:"rounding"`
	Scale       ScaleFormat `json:"scale"`
	Rule        ScaleRule   `json:"rule"`
	Percentile  float64     `json:"percentile"`
}

type pack4Config struct {
	Order NibbleOrder `json:"order"`
	Code  NibbleCode  `json:"code"`
	N     int         `json:"n"`
}

type fp8Config struct {
	Rows        int         `json:"rows"`
	Cols        int         `json:"cols"`
	Element     FP8Element  `json:"element"`
	Granularity Granularity `json:"granularity"`
	Channel     Channel     `json:"channel"`
	Group       int         `json:"group"`
	Overflow    Overflow    `json:"overflow"`
	Scale       ScaleFormat `json:"scale"`
	Given       bool        `json:"given"`
}

type sqnrConfig struct {
	N int `json:"n"`
}

var goldenConfigs = map[string]func() any{
	"quantise": func() any { return new(quantiseConfig) },
	"pack4":    func() any { return new(pack4Config) },
	"fp8":      func() any { return new(fp8Config) },
	"sqnr":     func() any { return new(sqnrConfig) },
}

// same notes the error of got against want (0 when every bit agrees, 1
// otherwise, so the table shows a slip) and fails on any difference.
func same(t *testing.T, c *golden.Case, row, col string, got, want []float64) {
	t.Helper()
	e := 0.0
	ok := len(got) == len(want)
	for i := 0; ok && i < len(got); i++ {
		ok = math.Float64bits(got[i]) == math.Float64bits(want[i])
	}
	if !ok {
		e = 1
	}
	accuracy.Note(row, col, e)
	expect.True(t, ok, "%s: %s %s: got %v; want %v (bit for bit)", c, row, col, got, want)
}

func floats(t *testing.T, c *golden.Case, name string) []float64 {
	t.Helper()
	v, _, err := c.Float(name)
	ensure.NoError(t, err)
	return v
}

func ints(t *testing.T, c *golden.Case, name string) []float64 {
	t.Helper()
	v, _, err := c.Ints(name)
	ensure.NoError(t, err)
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

func asFloats[T int8 | uint8](v []T) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

func TestGoldenQuantise(t *testing.T) {
	f := golden.MustLoadFamily(t, "quant", "quantise")
	for _, c := range f.Cases {
		var cfg quantiseConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		s := Scheme{Symmetry: cfg.Symmetry, Granularity: cfg.Granularity, Channel: cfg.Channel, Group: cfg.Group,
			Width: cfg.Width, Range: cfg.Range, Rounding: cfg.Rounding, Scale: cfg.Scale, Rule: cfg.Rule, Percentile: cfg.Percentile}
		x := floats(t, c, "x")
		x32 := make([]float32, len(x))
		exact32 := true
		for i, v := range x {
			x32[i] = float32(v)
			exact32 = exact32 && float64(x32[i]) == v
		}
		for _, fn := range []string{"Quantise", "Quantise32"} {
			var q Tensor
			var err error
			if fn == "Quantise" {
				q, err = Quantise(x, cfg.Rows, cfg.Cols, s)
			} else {
				if !exact32 {
					continue // the twin sees other values
				}
				q, err = Quantise32(x32, cfg.Rows, cfg.Cols, s)
			}
			ensure.NoError(t, err, "%s: %s", c, fn)
			same(t, c, fn, "codes", asFloats(q.Codes), ints(t, c, "codes"))
			same(t, c, fn, "scales", q.Scales, floats(t, c, "scales"))
			switch s.Symmetry {
			case Asymmetric:
				same(t, c, fn, "zeros", asFloats(q.Zeros), ints(t, c, "zeros"))
			case AsymmetricFloat:
				same(t, c, fn, "zeros", q.FloatZeros, floats(t, c, "float_zeros"))
			}
			if fn == "Quantise" {
				xhat, err := Dequantise(q)
				ensure.NoError(t, err)
				same(t, c, "Dequantise", "values", xhat, floats(t, c, "xhat"))
			}
		}
	}
}

func TestGoldenPack4(t *testing.T) {
	f := golden.MustLoadFamily(t, "quant", "pack4")
	for _, c := range f.Cases {
		var cfg pack4Config
		ensure.NoError(t, c.DecodeConfig(&cfg))
		p := Packing{Order: cfg.Order, Code: cfg.Code}
		in := ints(t, c, "codes")
		codes := make([]int8, len(in))
		for i, v := range in {
			codes[i] = int8(v)
		}
		b, err := Pack4(codes, p)
		ensure.NoError(t, err)
		same(t, c, "Pack4", "codes", asFloats(b), ints(t, c, "packed"))
		back, err := Unpack4(b, cfg.N, p)
		ensure.NoError(t, err)
		same(t, c, "Unpack4", "codes", asFloats(back), in)
	}
}

func TestGoldenFP8(t *testing.T) {
	f := golden.MustLoadFamily(t, "quant", "fp8")
	for _, c := range f.Cases {
		var cfg fp8Config
		ensure.NoError(t, c.DecodeConfig(&cfg))
		s := FP8Scheme{Element: cfg.Element, Granularity: cfg.Granularity, Channel: cfg.Channel, Group: cfg.Group, Overflow: cfg.Overflow, Scale: cfg.Scale}
		var given []float64
		if cfg.Given {
			given = floats(t, c, "given_scales")
		}
		q, err := QuantiseFP8(floats(t, c, "x"), cfg.Rows, cfg.Cols, s, given)
		ensure.NoError(t, err, "%s", c)
		same(t, c, "QuantiseFP8", "codes", asFloats(q.Codes), ints(t, c, "codes"))
		same(t, c, "QuantiseFP8", "scales", q.Scales, floats(t, c, "scales"))
		xhat, err := DequantiseFP8(q)
		ensure.NoError(t, err)
		same(t, c, "DequantiseFP8", "values", xhat, floats(t, c, "xhat"))
	}
}

func TestGoldenSQNR(t *testing.T) {
	f := golden.MustLoadFamily(t, "quant", "sqnr")
	for _, c := range f.Cases {
		got, err := SQNR(floats(t, c, "x"), floats(t, c, "xhat"))
		ensure.NoError(t, err)
		want := floats(t, c, "sqnr")
		e := golden.NormwiseRelErr([]float64{got}, want)
		if want[0] == 0 {
			e = math.Abs(got) // 0 dB: the absolute error
		}
		accuracy.Note("SQNR", "values", e)
		expect.True(t, e <= sqnrBound, golden.Describe(c, "sqnr", e, sqnrBound))
	}
}

// TestGoldenWords requires every word of the conventions the families take
// to appear in some golden case.
func TestGoldenWords(t *testing.T) {
	var w golden.Words
	w.NoteFamilies(t, "quant", goldenConfigs)
	w.Require(t, "quant.Symmetry", "quant.Granularity", "quant.Channel", "quant.Width", "quant.Range",
		"quant.Rounding", "quant.ScaleFormat", "quant.ScaleRule", "quant.NibbleOrder", "quant.NibbleCode",
		"quant.FP8Element", "quant.Overflow")
}

// TestGoldenCount guards against a family silently losing its cases, and
// requires every golden file of the package to have a configuration type.
func TestGoldenCount(t *testing.T) {
	want := map[string]int{"quantise": 20, "pack4": 8, "fp8": 9, "sqnr": 3}
	got := map[string]int{}
	for fam := range want {
		got[fam] = len(golden.MustLoadFamily(t, "quant", fam).Cases)
	}
	expect.Equal(t, want, got, "case counts")
	files, err := filepath.Glob(filepath.Join(golden.Dir(), "quant", "*.json"))
	ensure.NoError(t, err)
	for _, f := range files {
		fam := strings.TrimSuffix(filepath.Base(f), ".json")
		_, quantiser := goldenConfigs[fam]
		expect.True(t, quantiser || slices.Contains(productFamilies, fam),
			"golden file %s has a configuration type here or is a family of golden_products_test.go", f)
	}
	expect.Len(t, files, len(goldenConfigs)+len(productFamilies))
}
