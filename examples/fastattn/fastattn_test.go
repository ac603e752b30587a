package fastattn

import (
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/attention/attentiontest"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/posenc"
)

// TestConformance is the whole correctness test of the kernel: one call to
// the suite. Cases that need what the kernel lacks (key padding, Dv ≠ Dk,
// soft-capping, the GroupCycle head map) are skipped with a message.
func TestConformance(t *testing.T) {
	attentiontest.Run(t, suiteKernel(Forward))
}

// suiteKernel presents a function with Forward's signature to the suite:
// it translates the suite's Problem into Params, and declares what the
// kernel supports.
func suiteKernel(f func(q, k, v []float32, p Params) ([]float32, []float32, error)) attentiontest.Kernel[float32] {
	return attentiontest.Kernel[float32]{
		Forward: func(q, k, v []float32, pr attentiontest.Problem) ([]float32, []float32, error) {
			s := pr.Shape
			p := Params{Batch: s.Batch, HeadsQ: s.HeadsQ, HeadsKV: s.HeadsKV, Lq: s.Lq, Lk: s.Lk, HeadDim: s.Dk,
				SeqMajor: pr.Layout == attention.SeqMajor, StartPos: pr.QueryPosition(0),
				Causal: pr.Mask != attentiontest.NoMask, Scale: float32(pr.Scale)}
			if pr.Mask == attentiontest.SlidingWindow {
				p.Window = pr.Window
			}
			if r := pr.Rotary; r != nil {
				p.RopeBase, p.RopeDims, p.RopeHalves = r.Base, r.Rotated, r.Pairing == posenc.PairHalves
			}
			return f(q, k, v, p)
		},
		Supports: attentiontest.Supports{
			Layouts:        []attention.Layout{attention.HeadsMajor, attention.SeqMajor},
			Groups:         []attention.GroupMap{attention.GroupBlocks},
			Pairings:       []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves},
			Masks:          []attentiontest.Masking{attentiontest.NoMask, attentiontest.Causal, attentiontest.SlidingWindow},
			AlignStart:     true,
			Offset:         true,
			UnequalLengths: true,
			PartialRotary:  true,
			LSE:            true,
			EmptyRow:       attention.EmptyRowZero,
		},
	}
}

// Each slip is this kernel with one convention wrong, as ports get them
// wrong. The suite must fail it where the convention shows and say which
// case, under which conventions, and where.
func TestSuiteCatchesSlips(t *testing.T) {
	cycle := func(h, hq, hkv int) int { return h % hkv } // the cycle map where the blocks map is declared
	swapped := func(i, r int, halves bool) (int, int) { return pairOf(i, r, !halves) }
	for _, s := range []struct {
		name   string
		kernel func(q, k, v []float32, p Params) ([]float32, []float32, error)
		fails  string // a subtest that must fail
		passes string // one where the slip cannot show
		says   string // what its message must contain
	}{
		{"kv head of a query head", func(q, k, v []float32, p Params) ([]float32, []float32, error) {
			return forward(q, k, v, p, cycle, pairOf)
		}, "causal_grouped/seq-major/blocks/halves", "causal_multi_query/heads-major/adjacent",
			"case causal_grouped (batch 1, 8 query heads on 2 kv heads, Lq 40, Lk 40, Dk 16, Dv 16, layout seq-major, group blocks, mask causal, align end, offset 0, scale 0.25, pairing halves, rotated 16 of 16 dims, base 10000, empty_row zero): output differs from the reference"},
		{"rotary pairing", func(q, k, v []float32, p Params) ([]float32, []float32, error) {
			return forward(q, k, v, p, kvHeadOf, swapped)
		}, "causal_square/heads-major/adjacent", "cross_fewer_queries/heads-major",
			"pairing adjacent, rotated 32 of 32 dims"},
		{"causal alignment", func(q, k, v []float32, p Params) ([]float32, []float32, error) {
			p.StartPos = 0 // queries placed at the first keys, not the last
			return Forward(q, k, v, p)
		}, "decode_step/heads-major/blocks/adjacent", "causal_square/seq-major/halves",
			"case decode_step (batch 2, 4 query heads on 2 kv heads, Lq 1, Lk 77"},
	} {
		if testing.Short() && s.name != "kv head of a query head" {
			continue // each slip runs the whole suite: one is enough under -short
		}
		t.Run(s.name, func(t *testing.T) {
			rec := &conformance.Recorder{}
			attentiontest.Run(rec, suiteKernel(s.kernel))
			ensure.True(t, rec.Failed, "the suite passed a kernel with a slip in the %s", s.name)
			bad := rec.Find(s.fails)
			ensure.NotNil(t, bad)
			ensure.True(t, bad.Failed)
			msg := strings.Join(bad.Messages, "\n")
			expect.Contains(t, msg, s.says)
			expect.Contains(t, msg, "worst element [batch, ")
			t.Logf("the suite says, on %s:\n%s", s.fails, msg)
			good := rec.Find(s.passes)
			ensure.NotNil(t, good)
			expect.False(t, good.Failed, strings.Join(good.Messages, "\n"))
		})
	}
}

// TestParamErrors: parameters that describe no problem, and inputs of the
// wrong length, are refused with ErrParams and a message naming the field.
func TestParamErrors(t *testing.T) {
	ok := Params{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 3, Lk: 5, HeadDim: 8, StartPos: 2, Causal: true}
	for _, c := range []struct {
		name   string
		change func(p *Params)
		says   string
	}{
		{"heads", func(p *Params) { p.HeadsQ = 3 }, "Params.HeadsQ = 3; want a multiple of HeadsKV = 2"},
		{"no kv heads", func(p *Params) { p.HeadsKV = 0 }, "Params.HeadsKV = 0; want ≥ 1"},
		{"head dim", func(p *Params) { p.HeadDim = 0 }, "Params.HeadDim = 0; want ≥ 1"},
		{"window without causal", func(p *Params) { p.Causal, p.Window = false, 2 }, "Params.Window = 2 without Causal"},
		{"negative window", func(p *Params) { p.Window = -1 }, "Params.Window = -1; want ≥ 0"},
		{"odd rotary", func(p *Params) { p.RopeDims = 3 }, "Params.RopeDims = 3; want an even number from 0 to HeadDim = 8"},
		// every dim of an odd head rotated: pairs cannot cover it (the
		// reference, posenc.Rotary, refuses an odd count too)
		{"odd head all rotated", func(p *Params) { p.HeadDim, p.RopeBase = 5, 10000 }, "Params.RopeDims = 0 rotates all HeadDim = 5 dims; want an even number of rotated dims: set RopeDims"},
		{"queries past the keys", func(p *Params) { p.StartPos = 3 }, "Params.StartPos = 3; want 0 … Lk − Lq = 2"},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := ok
			c.change(&p)
			q := make([]float32, max(p.Batch*p.HeadsQ*p.Lq*p.HeadDim, 0))
			kv := make([]float32, max(p.Batch*p.HeadsKV*p.Lk*p.HeadDim, 0))
			_, _, err := Forward(q, kv, kv, p)
			ensure.ErrorIs(t, err, ErrParams)
			expect.Contains(t, err.Error(), "fastattn: invalid parameters: Forward: "+c.says)
		})
	}
	// Lengths: q for 1·4·3·8 = 96 elements, k and v for 1·2·5·8 = 80.
	q, kv := make([]float32, 96), make([]float32, 80)
	_, _, err := Forward(q[:95], kv, kv, ok)
	ensure.ErrorIs(t, err, ErrParams)
	expect.Contains(t, err.Error(), "q has 95 elements; want Batch·HeadsQ·Lq·HeadDim = 1·4·3·8 = 96")
	_, _, err = Forward(q, kv, kv[:79], ok)
	ensure.ErrorIs(t, err, ErrParams)
	expect.Contains(t, err.Error(), "v has 79 elements; want Batch·HeadsKV·Lk·HeadDim = 1·2·5·8 = 80")
	_, _, err = Forward(q, kv, kv, ok)
	ensure.NoError(t, err)
}
