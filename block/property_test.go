package block_test

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// rowStats are the mean and the mean square about the mean of each row.
func rowStats(x []float64, w int) (mean, ms []float64) {
	for r := 0; r < len(x)/w; r++ {
		row := x[r*w : (r+1)*w]
		var m, s float64
		for _, v := range row {
			m += v
		}
		m /= float64(w)
		for _, v := range row {
			s += (v - m) * (v - m)
		}
		mean, ms = append(mean, m), append(ms, s/float64(w))
	}
	return mean, ms
}

// Pre-norm and post-norm differ as their formulas say, on the same
// inputs and weights (LayerNorm with gain 1 and no bias): post-norm's
// attention reads x itself and its output is a LayerNorm output, each
// row of mean 0 and variance σ²/(σ² + ε) (Ba et al. 2016, Eq. (3)–(4));
// pre-norm's attention reads N₁(x) and its output is the residual
// stream h + FFN(N₂(h)), which is no normalised row.
func TestPreAndPostNorm(t *testing.T) {
	s := variants()["pre-layer"].make("pre-layer", 4, 8)
	s.w.Norm1, s.w.Norm1Bias, s.w.Norm2, s.w.Norm2Bias = nil, nil, nil, nil
	s.o.Keep = block.Stages()
	pre, err := block.Forward(s.x, s.d, s.w, s.past, s.o)
	ensure.NoError(t, err)
	s.o.Form = block.PostNorm
	post, err := block.Forward(s.x, s.d, s.w, s.past, s.o)
	ensure.NoError(t, err)

	expect.True(t, bitsEqual(post.Stages[block.StageAttnIn], s.x), "post-norm: attention reads x")
	expect.False(t, bitsEqual(pre.Stages[block.StageAttnIn], s.x), "pre-norm: attention reads N1(x)")
	expect.True(t, bitsEqual(pre.Out, pre.Stages[block.StageResid2]), "pre-norm: the output is the residual stream")

	_, preNormIn := rowStats(pre.Stages[block.StageAttnIn], s.d.Width)
	mean, ms := rowStats(post.Out, s.d.Width)
	_, preMS := rowStats(pre.Out, s.d.Width)
	_, resid := rowStats(post.Stages[block.StageResid2], s.d.Width)
	for r := range mean {
		eps := 1e-5
		want := resid[r] / (resid[r] + eps)
		expect.True(t, math.Abs(mean[r]) <= 1e-15, "post-norm row %d: mean %g; want 0", r, mean[r])
		expect.True(t, math.Abs(ms[r]-want) <= 1e-14, "post-norm row %d: variance %g; want %g", r, ms[r], want)
		expect.True(t, math.Abs(preNormIn[r]-1) <= 1e-3, "pre-norm row %d: N1(x) has variance %g; want about 1", r, preNormIn[r])
		expect.True(t, math.Abs(preMS[r]-1) > 1e-2, "pre-norm row %d: output variance %g, as if normalised", r, preMS[r])
	}
}
