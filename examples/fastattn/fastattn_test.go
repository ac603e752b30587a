package fastattn

import (
	"github.com/plumbref/plumb/conformance"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/attention/attentiontest"
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
			require.True(t, rec.Failed, "the suite passed a kernel with a slip in the %s", s.name)
			bad := rec.Find(s.fails)
			require.NotNil(t, bad)
			require.True(t, bad.Failed)
			msg := strings.Join(bad.Messages, "\n")
			assert.Contains(t, msg, s.says)
			assert.Contains(t, msg, "worst element [batch, ")
			t.Logf("the suite says, on %s:\n%s", s.fails, msg)
			good := rec.Find(s.passes)
			require.NotNil(t, good)
			assert.False(t, good.Failed, strings.Join(good.Messages, "\n"))
		})
	}
}
