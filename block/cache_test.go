package block_test

import (
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// cacheBound bounds the normwise distance between the last row of a full
// forward of n+1 tokens and one call on that token against the prefill's
// present cache. Both compute the same projections, rotations and keys
// row by row (the same bits); only attention sums the last query over the
// same keys in a call of another length, which the attention package's
// forms keep within a few ulps: 1e-15 with margin over the project target
// of 1e-14 would hide nothing, so the bound is the tighter 1e-15.
const cacheBound = 1e-15

// A prefill of n tokens, then one call on the next token with the present
// cache, gives the last row of the full forward of n + 1 tokens, and the
// same present cache.
func TestCacheDecodeIsTheFullForwardsLastRow(t *testing.T) {
	for name, v := range variants() {
		t.Run(name, func(t *testing.T) {
			const n = 5
			full := v.make(name, n+1, 3)
			res, err := block.ForwardFast(full.x, full.d, full.w, full.past, full.o)
			ensure.NoError(t, err)

			pre := full
			pre.d.Tokens = n
			pre.x = full.x[:n*full.d.Width]
			p, err := block.ForwardFast(pre.x, pre.d, pre.w, pre.past, pre.o)
			ensure.NoError(t, err)

			one := full
			one.d.Tokens, one.d.Past = 1, full.d.Past+n
			one.x = full.x[n*full.d.Width:]
			r, err := block.ForwardFast(one.x, one.d, one.w, p.Present, one.o)
			ensure.NoError(t, err)

			last := res.Out[n*full.d.Width:]
			e := golden.NormwiseRelErr(r.Out, last)
			expect.True(t, e <= cacheBound, "last row: normwise error %g; want ≤ %g", e, cacheBound)
			expect.True(t, bitsEqual(res.Present.K, r.Present.K), "present K")
			expect.True(t, bitsEqual(res.Present.V, r.Present.V), "present V")
		})
	}
}
