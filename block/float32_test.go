package block_test

import (
	"strings"
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/surface"
)

// TestFloat32Surface holds the package to its float32 rule.
func TestFloat32Surface(t *testing.T) {
	twinned, problems, err := surface.Twins(".", strings.NewReplacer("float64", "float32"))
	ensure.NoError(t, err)
	expect.Empty(t, problems)
	expect.Equal(t, []string{"Forward", "ForwardFast"}, twinned)
}

// float32Bound bounds the normwise distance of the float32 twin from the
// float64 reference on the same (float32-representable) inputs: the
// golden test's golden32Bound, a few float32 ulps (2⁻²⁴ ≈ 6e-8) times
// the depth of the block, with margin.
const float32Bound = 2e-5

func weights32(w block.Weights[float64]) block.Weights[float32] {
	c := num.Convert[float32, float64]
	return block.Weights[float32]{Norm1: c(w.Norm1), Norm1Bias: c(w.Norm1Bias), Q: c(w.Q), QBias: c(w.QBias), K: c(w.K), KBias: c(w.KBias),
		V: c(w.V), VBias: c(w.VBias), O: c(w.O), OBias: c(w.OBias), Norm2: c(w.Norm2), Norm2Bias: c(w.Norm2Bias),
		FFN: ffn.Weights[float32]{W1: c(w.FFN.W1), B1: c(w.FFN.B1), V: c(w.FFN.V), C: c(w.FFN.C), W2: c(w.FFN.W2), B2: c(w.FFN.B2)}}
}

// The float32 twins are close to the float64 reference on every variant
// and every stage, and the fast twin gives the direct twin's bits.
func TestFloat32Twins(t *testing.T) {
	for name, v := range variants() {
		t.Run(name, func(t *testing.T) {
			s := v.make(name, 4, 6)
			w32 := weights32(s.w)
			o := s.o
			o.Keep = block.Stages()
			x32 := num.Convert[float32](s.x)
			p32 := block.Cache[float32]{K: num.Convert[float32](s.past.K), V: num.Convert[float32](s.past.V)}
			// the reference on the same inputs, widened exactly
			ref, err := block.Forward(num.Convert[float64](x32), s.d, widen(w32), block.Cache[float64]{K: num.Convert[float64](p32.K), V: num.Convert[float64](p32.V)}, o)
			ensure.NoError(t, err)
			a, err := block.Forward32(x32, s.d, w32, p32, o)
			ensure.NoError(t, err)
			b, err := block.ForwardFast32(x32, s.d, w32, p32, o)
			ensure.NoError(t, err)
			for _, st := range block.Stages() {
				e := golden.NormwiseRelErr(num.Convert[float64](a.Stages[st]), ref.Stages[st])
				expect.True(t, e <= float32Bound, "stage %s: normwise %g; want ≤ %g", st, e, float32Bound)
				expect.Equal(t, a.Stages[st], b.Stages[st], "stage %s: ForwardFast32 and Forward32 differ", st)
			}
		})
	}
}

func widen(w block.Weights[float32]) block.Weights[float64] {
	c := num.Convert[float64, float32]
	return block.Weights[float64]{Norm1: c(w.Norm1), Norm1Bias: c(w.Norm1Bias), Q: c(w.Q), QBias: c(w.QBias), K: c(w.K), KBias: c(w.KBias),
		V: c(w.V), VBias: c(w.VBias), O: c(w.O), OBias: c(w.OBias), Norm2: c(w.Norm2), Norm2Bias: c(w.Norm2Bias),
		FFN: ffn.Weights[float64]{W1: c(w.FFN.W1), B1: c(w.FFN.B1), V: c(w.FFN.V), C: c(w.FFN.C), W2: c(w.FFN.W2), B2: c(w.FFN.B2)}}
}
