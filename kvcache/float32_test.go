package kvcache_test

import (
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/surface"
	"github.com/plumbref/plumb/kvcache"
	"github.com/plumbref/plumb/mask"
)

// TestFloat32Surface holds the package to its float32 rule: every
// exported function whose signature has a tensor has a twin named with
// the suffix 32 whose signature is the same in float32.
func TestFloat32Surface(t *testing.T) {
	twinned, problems, err := surface.Twins(".", strings.NewReplacer("float64", "float32"))
	ensure.NoError(t, err)
	expect.Empty(t, problems)
	expect.Equal(t, []string{"AttendPacked", "AttendPages", "AttendRing", "AttendSplit", "Gather", "MergeSplits", "RingWrite", "VerifyDraft"}, twinned)
}

// TestFloat32Twins: each twin on float32 inputs gives the bits of the
// float32 attention functions on the same problem laid out as the float64
// tests lay it out, so the twins run the same bodies.
func TestFloat32Twins(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 1))
	s := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 7, Dk: 3, Dv: 2}
	o := attention.Options{Slopes: []float64{0.5, 0.25}, Sinks: []float64{0.1, -0.3}}
	q, k, v := to32(uniform(r, 12)), to32(uniform(r, 21)), to32(uniform(r, 14))
	wantOut, wantLSE, err := attention.Decode32(q, k, v, s, 5, o)
	ensure.NoError(t, err)

	// Pages of 3 positions, the sequence's pages in the order 2, 0, 1.
	p := kvcache.Pool{Pages: 3, PageSize: 3, HeadsKV: 1, Dk: 3, Dv: 2, Layout: kvcache.HeadsFirst}
	kPool, vPool := make([]float32, 27), make([]float32, 18)
	table := []int{2, 0, 1}
	for pos := range 7 {
		page, slot := table[pos/3], pos%3
		copy(kPool[(page*3+slot)*3:][:3], k[pos*3:][:3])
		copy(vPool[(page*3+slot)*2:][:2], v[pos*2:][:2])
	}
	gk, gv, err := kvcache.Gather32(kPool, vPool, p, table, 7, attention.HeadsMajor)
	ensure.NoError(t, err)
	expect.Equal(t, k, gk)
	expect.Equal(t, v, gv)
	out, lse, err := kvcache.AttendPages32(q, kPool, vPool, p, [][]int{table}, []int{7}, 2, 2, o)
	ensure.NoError(t, err)
	expect.Equal(t, wantOut, out, "AttendPages32")
	expect.Equal(t, wantLSE, lse, "AttendPages32")

	out, lse, err = kvcache.VerifyDraft32(q, k[:15], v[:10], k[15:], v[10:], attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 5, Dk: 3, Dv: 2}, o)
	ensure.NoError(t, err)
	expect.Equal(t, wantOut, out, "VerifyDraft32")
	expect.Equal(t, wantLSE, lse, "VerifyDraft32")

	oa, la, err := kvcache.AttendSplit32(q, k, v, s, 5, 0, 4, o)
	ensure.NoError(t, err)
	ob, lb, err := kvcache.AttendSplit32(q, k, v, s, 5, 4, 7, attention.Options{Slopes: o.Slopes})
	ensure.NoError(t, err)
	mo, ml, err := kvcache.MergeSplits32([][]float32{oa, ob}, [][]float32{la, lb}, 2, attention.EmptyRowZero)
	ensure.NoError(t, err)
	wo, wl, err := attention.Merge32(oa, la, ob, lb, 2)
	ensure.NoError(t, err)
	expect.Equal(t, wo, mo, "MergeSplits32")
	expect.Equal(t, wl, ml, "MergeSplits32")

	// The packed prefill of one sequence is Forward32 in SeqMajor.
	sp := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 7, Dk: 3, Dv: 2}
	po, pl, err := kvcache.AttendPacked32(q, k, v, sp, []int{0, 2}, []int{0, 7}, attention.Options{})
	ensure.NoError(t, err)
	fo, fl, err := attention.Forward32(q, k, v, sp, attention.Options{Layout: attention.SeqMajor, Mask: mask.Causal()})
	ensure.NoError(t, err)
	expect.Equal(t, fo, po, "AttendPacked32")
	expect.Equal(t, fl, pl, "AttendPacked32")

	// A ring of 4 slots after 7 tokens, against Decode32 with Window(4).
	rs := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 1, Lk: 4, Dk: 3, Dv: 2}
	kRing, vRing := make([]float32, 12), make([]float32, 8)
	for pos := range 7 {
		ensure.NoError(t, kvcache.RingWrite32(kRing, vRing, k[pos*3:][:3], v[pos*2:][:2], rs, pos, attention.HeadsMajor))
	}
	ro, rl, err := kvcache.AttendRing32(q[:6], kRing, vRing, rs, 7, attention.Options{})
	ensure.NoError(t, err)
	win, _ := mask.Window(4)
	full := rs
	full.Lk = 7
	wo, wl, err = attention.Decode32(q[:6], k, v, full, 6, attention.Options{Mask: win})
	ensure.NoError(t, err)
	expect.Equal(t, wo, ro, "AttendRing32")
	expect.Equal(t, wl, rl, "AttendRing32")
}

// TestPoolLayoutWords: the convention's words round-trip, the zero value
// is PagesFirst, and other values are refused with ErrOption.
func TestPoolLayoutWords(t *testing.T) {
	var zero kvcache.PoolLayout
	expect.Equal(t, kvcache.PagesFirst, zero)
	expect.Equal(t, []kvcache.PoolLayout{kvcache.PagesFirst, kvcache.HeadsFirst}, zero.Values())
	for _, l := range zero.Values() {
		b, err := l.MarshalText()
		ensure.NoError(t, err)
		var back kvcache.PoolLayout
		ensure.NoError(t, back.UnmarshalText(b))
		expect.Equal(t, l, back)
		expect.NotEmpty(t, l.Meaning())
		expect.NoError(t, l.Check())
	}
	expect.Equal(t, "heads-first", kvcache.HeadsFirst.String())
	expect.ErrorIs(t, kvcache.PoolLayout(5).Check(), kvcache.ErrOption)
	var l kvcache.PoolLayout
	expect.ErrorIs(t, l.UnmarshalText([]byte("rows-first")), kvcache.ErrOption)
	expect.ErrorIs(t, (*kvcache.PoolLayout)(nil).UnmarshalText([]byte("pages-first")), kvcache.ErrOption)
}
