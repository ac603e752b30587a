package norm

import (
	"os"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// goldenConfig is the "config" object of the cases in
// testdata/golden/norm/*.json, written by testdata/gen/fam_norm.py. The
// convention fields hold their words, under the keys of the norm
// operations (ops/norm.go), and json decodes them.
type goldenConfig struct {
	Kind       string           `json:"kind"` // "layer" or "rms"
	D          int              `json:"d"`
	Epsilon    float64          `json:"epsilon"`
	Placement  EpsilonPlacement `json:"epsilon_placement"`
	Weighted   bool             `json:"weighted"` // whether the case has a weight tensor
	WeightForm WeightForm       `json:"weight_form"`
	Bias       bool             `json:"bias"`
}

func (c goldenConfig) options() Options {
	return Options{Epsilon: c.Epsilon, Placement: c.Placement, Weight: c.WeightForm}
}

// goldenFamilies are the files of testdata/golden/norm.
var goldenFamilies = []string{"layernorm", "rmsnorm", "addnorm"}

// decodeConfig decodes a case's config, refusing unknown keys and words.
func decodeConfig(t *testing.T, c *golden.Case) goldenConfig {
	t.Helper()
	var cfg goldenConfig
	ensure.NoError(t, c.DecodeConfig(&cfg))
	ensure.Contains(t, []string{"layer", "rms"}, cfg.Kind, c.String())
	return cfg
}

// TestGoldenWords checks that the golden cases use every word of the
// conventions of the package: a word no case holds is a convention no
// 50-digit value checks.
func TestGoldenWords(t *testing.T) {
	var words golden.Words
	n := 0
	for _, fam := range goldenFamilies {
		for _, c := range golden.MustLoadFamily(t, "norm", fam).Cases {
			words.Note(decodeConfig(t, c))
			n++
		}
	}
	expect.Equal(t, 88, n, "cases in %v (testdata/gen/fam_norm.py)", goldenFamilies)
	words.Require(t, "norm.EpsilonPlacement", "norm.WeightForm")
}

// goldenTol is the bound on the normwise relative error against the
// 50-digit values, for every output. The target of the project is 1e-14;
// the kernels reach a few 1e-16 (see the package documentation), and the
// bound leaves room for the d-term sums of the widest rows (d = 1024:
// about d·2⁻⁵³ ≈ 1e-13 in the worst case, far less in practice).
const goldenTol = 1e-14

// accuracy is the package's accuracy table in doc.go: every golden check
// notes its error there, and TestMain fails when the table is out of date.
var accuracy = &golden.Accuracy{
	Path: "doc.go",
	Rows: []string{"LayerNorm", "LayerNormBackward", "RMSNorm", "RMSNormBackward",
		"AddLayerNorm", "AddLayerNormBackward", "AddRMSNorm", "AddRMSNormBackward"},
	Cols: []string{"y", "sum", "dx", "dweight", "dbias"},
}

func TestMain(m *testing.M) { os.Exit(accuracy.Main(m)) }

func floatOr(t *testing.T, c *golden.Case, name string) []float64 {
	if !c.Has(name) {
		return nil
	}
	v, _, err := c.Float(name)
	ensure.NoError(t, err)
	return v
}

func check(t *testing.T, c *golden.Case, fn, name string, got []float64) {
	t.Helper()
	want, _, err := c.Float(name)
	ensure.NoError(t, err)
	e := golden.NormwiseRelErr(got, want)
	accuracy.Note(fn, name, e)
	if testing.Verbose() {
		t.Logf("%s %s: %.3g", fn, name, e)
	}
	expect.LessOrEqual(t, e, goldenTol, golden.Describe(c, name, e, goldenTol))
}

func TestGolden(t *testing.T) {
	ran := 0
	for _, fam := range goldenFamilies {
		f := golden.MustLoadFamily(t, "norm", fam)
		for _, c := range f.Cases {
			t.Run(fam+"/"+c.Name, func(t *testing.T) {
				ran++
				cfg := decodeConfig(t, c)
				o := cfg.options()
				x := floatOr(t, c, "x")
				weight := floatOr(t, c, "weight")
				bias := floatOr(t, c, "bias")
				dy := floatOr(t, c, "dy")
				ensure.Equal(t, cfg.Weighted, weight != nil, "weight presence")
				if !cfg.Weighted {
					ensure.Equal(t, WeightAsIs, cfg.WeightForm, "a case without a weight has the default weight form")
				}
				ensure.Equal(t, cfg.Bias, bias != nil, "bias presence")
				layer := cfg.Kind == "layer"
				var (
					y, sum []float64
					g      Grads
					err    error
					fn     string
				)
				if c.Has("residual") {
					res := floatOr(t, c, "residual")
					dsum := floatOr(t, c, "dsum")
					if layer {
						fn = "AddLayerNorm"
						y, sum, err = AddLayerNorm(x, res, cfg.D, weight, bias, o)
						ensure.NoError(t, err)
						g, err = AddLayerNormBackward(sum, cfg.D, weight, dy, dsum, o)
					} else {
						fn = "AddRMSNorm"
						y, sum, err = AddRMSNorm(x, res, cfg.D, weight, o)
						ensure.NoError(t, err)
						g, err = AddRMSNormBackward(sum, cfg.D, weight, dy, dsum, o)
					}
					ensure.NoError(t, err)
					check(t, c, fn, "sum", sum)
				} else {
					if layer {
						fn = "LayerNorm"
						y, err = LayerNorm(x, cfg.D, weight, bias, o)
					} else {
						fn = "RMSNorm"
						y, err = RMSNorm(x, cfg.D, weight, o)
					}
					ensure.NoError(t, err)
					if dy != nil {
						if layer {
							g, err = LayerNormBackward(x, cfg.D, weight, dy, o)
						} else {
							g, err = RMSNormBackward(x, cfg.D, weight, dy, o)
						}
						ensure.NoError(t, err)
					}
				}
				check(t, c, fn, "y", y)
				if dy == nil {
					return
				}
				check(t, c, fn+"Backward", "dx", g.X)
				if weight != nil {
					check(t, c, fn+"Backward", "dweight", g.Weight)
				} else {
					expect.Nil(t, g.Weight, "no weight, no weight gradient")
				}
				if layer {
					check(t, c, fn+"Backward", "dbias", g.Bias)
				} else {
					expect.Nil(t, g.Bias, "RMSNorm has no bias gradient")
				}
			})
		}
	}
	ensure.NotZero(t, ran, "no golden case ran")
}
