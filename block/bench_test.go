package block_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The benchmark shape: one pre-norm RMSNorm block of width 4096, 32 query
// heads on 8 kv heads of dimension 128, a gated SiLU FFN of 14336 units,
// rotary over the whole head, a causal mask, 512 tokens and no past.
// The weights alone are 218 million values (1.7 GiB of float64).
var benchDims = block.Dims{Tokens: 512, Width: 4096, Heads: 32, HeadsKV: 8, HeadDim: 128, Hidden: 14336}

func benchInputs() ([]float64, block.Weights[float64], block.Options) {
	r := rand.New(rand.NewPCG(4, 4))
	d := benchDims
	u := func(n int, s float64) []float64 { return uniform(r, n, s) }
	nq, nkv := d.Heads*d.HeadDim, d.HeadsKV*d.HeadDim
	w := block.Weights[float64]{Norm1: u(d.Width, 1), Norm2: u(d.Width, 1),
		Q: u(d.Width*nq, 0.02), K: u(d.Width*nkv, 0.02), V: u(d.Width*nkv, 0.02), O: u(nq*d.Width, 0.02),
		FFN: ffn.Weights[float64]{W1: u(d.Width*d.Hidden, 0.02), V: u(d.Width*d.Hidden, 0.02), W2: u(d.Hidden*d.Width, 0.02)}}
	o := block.Options{NormKind: block.RMSNorm, Norm: norm.Options{Epsilon: 1e-5}, Rotary: &posenc.Rotary{Dim: d.HeadDim, Base: 500000},
		FFN: ffn.Options{Act: ffn.ActSiLU, Gated: true}}
	o.Attention.Mask = mask.Causal()
	return u(d.Tokens*d.Width, 1), w, o
}

func BenchmarkForwardFast(b *testing.B) {
	x, w, o := benchInputs()
	for b.Loop() {
		if _, err := block.ForwardFast(x, benchDims, w, block.Cache[float64]{}, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkForwardFast32(b *testing.B) {
	x, w, o := benchInputs()
	w32 := weights32(w)
	x32 := num.Convert[float32](x)
	for b.Loop() {
		if _, err := block.ForwardFast32(x32, benchDims, w32, block.Cache[float32]{}, o); err != nil {
			b.Fatal(err)
		}
	}
}
