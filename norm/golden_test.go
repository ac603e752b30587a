package norm

import (
	"sort"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/internal/golden"
)

// goldenConfig is the "config" object of the cases in
// testdata/golden/norm/*.json, written by testdata/gen/fam_norm.py.
type goldenConfig struct {
	Kind      string  `json:"kind"` // "layer" or "rms"
	D         int     `json:"d"`
	Epsilon   float64 `json:"epsilon"`
	Placement string  `json:"placement"` // "in_root" or "added_to_root"
	Weight    string  `json:"weight"`    // "none", "as_is" or "one_plus"
	Bias      bool    `json:"bias"`
}

func (c goldenConfig) options(t *testing.T) Options {
	o := Options{Epsilon: c.Epsilon}
	switch c.Placement {
	case "in_root":
		o.Placement = EpsilonInRoot
	case "added_to_root":
		o.Placement = EpsilonAddedToRoot
	default:
		t.Fatalf("unknown placement %q", c.Placement)
	}
	switch c.Weight {
	case "none", "as_is":
		o.Weight = WeightAsIs
	case "one_plus":
		o.Weight = WeightOnePlus
	default:
		t.Fatalf("unknown weight form %q", c.Weight)
	}
	return o
}

// goldenTol is the bound on the normwise relative error against the
// 50-digit values, for every output. The target of the project is 1e-14;
// the kernels reach a few 1e-16 (see the package documentation), and the
// bound leaves room for the d-term sums of the widest rows (d = 1024:
// about d·2⁻⁵³ ≈ 1e-13 in the worst case, far less in practice).
const goldenTol = 1e-14

// worst collects the largest error seen per function and output.
type worst map[string]float64

func (w worst) note(key string, e float64) {
	w[key] = max(w[key], e)
}

func (w worst) log(t *testing.T) {
	keys := make([]string, 0, len(w))
	for k := range w {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		t.Logf("worst normwise relative error %-28s %.3g", k, w[k])
	}
}

func floatOr(t *testing.T, c *golden.Case, name string) []float64 {
	if !c.Has(name) {
		return nil
	}
	v, _, err := c.Float(name)
	require.NoError(t, err)
	return v
}

func check(t *testing.T, w worst, c *golden.Case, fn, name string, got []float64) {
	t.Helper()
	want, _, err := c.Float(name)
	require.NoError(t, err)
	e := golden.NormwiseRelErr(got, want)
	w.note(fn+" "+name, e)
	if testing.Verbose() {
		t.Logf("%s %s: %.3g", fn, name, e)
	}
	assert.LessOrEqual(t, e, goldenTol, golden.Describe(c, name, e, goldenTol))
}

func TestGolden(t *testing.T) {
	w := worst{}
	for _, fam := range []string{"layernorm", "rmsnorm", "addnorm"} {
		f := golden.MustLoadFamily(t, "norm", fam)
		for _, c := range f.Cases {
			t.Run(fam+"/"+c.Name, func(t *testing.T) {
				var cfg goldenConfig
				require.NoError(t, c.DecodeConfig(&cfg))
				o := cfg.options(t)
				x := floatOr(t, c, "x")
				weight := floatOr(t, c, "weight")
				bias := floatOr(t, c, "bias")
				dy := floatOr(t, c, "dy")
				require.Equal(t, cfg.Weight != "none", weight != nil, "weight presence")
				require.Equal(t, cfg.Bias, bias != nil, "bias presence")
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
						require.NoError(t, err)
						g, err = AddLayerNormBackward(sum, cfg.D, weight, dy, dsum, o)
					} else {
						fn = "AddRMSNorm"
						y, sum, err = AddRMSNorm(x, res, cfg.D, weight, o)
						require.NoError(t, err)
						g, err = AddRMSNormBackward(sum, cfg.D, weight, dy, dsum, o)
					}
					require.NoError(t, err)
					check(t, w, c, fn, "sum", sum)
				} else {
					if layer {
						fn = "LayerNorm"
						y, err = LayerNorm(x, cfg.D, weight, bias, o)
					} else {
						fn = "RMSNorm"
						y, err = RMSNorm(x, cfg.D, weight, o)
					}
					require.NoError(t, err)
					if dy != nil {
						if layer {
							g, err = LayerNormBackward(x, cfg.D, weight, dy, o)
						} else {
							g, err = RMSNormBackward(x, cfg.D, weight, dy, o)
						}
						require.NoError(t, err)
					}
				}
				check(t, w, c, fn, "y", y)
				if dy == nil {
					return
				}
				check(t, w, c, fn+"Backward", "dx", g.X)
				if weight != nil {
					check(t, w, c, fn+"Backward", "dweight", g.Weight)
				} else {
					assert.Nil(t, g.Weight, "no weight, no weight gradient")
				}
				if layer {
					check(t, w, c, fn+"Backward", "dbias", g.Bias)
				} else {
					assert.Nil(t, g.Bias, "RMSNorm has no bias gradient")
				}
			})
		}
	}
	w.log(t)
	require.NotEmpty(t, w, "no golden case ran")
}
