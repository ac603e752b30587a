package ops

import (
	"fmt"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/kvcache"
)

// The operations of package kvcache: attention against keys and values
// stored as a serving program stores them. The integers that say where
// the keys are (page tables, lengths, positions, offsets) are
// configuration keys, as the positions of rotary and the valid counts of a
// key-padding mask are: they are not rounded with the float inputs, and a
// port dumps them with its configuration, not as tensors.

// kvLayout is the layout key of the kvcache operations whose keys and
// values are contiguous attention tensors.
type kvLayout struct {
	Layout attention.Layout `json:"layout" doc:"memory order of q, the contiguous keys and values, out and lse (batch first, head dimension last)"`
}

// pagedConfig is the configuration of paged-attention.
type pagedConfig struct {
	header
	Layout attention.Layout `json:"layout" doc:"memory order of q, out and lse (sequences first, head dimension last)"`
	scoring
	PoolLayout kvcache.PoolLayout `json:"pool_layout" doc:"memory order of a page of k_pool and v_pool"`
	PageTables [][]int            `json:"page_tables" doc:"one list per sequence: entry i is the page of the pool holding the sequence's positions i·page_size … (i+1)·page_size − 1" default:"required"`
	Lengths    []int              `json:"lengths" doc:"one per sequence: the positions it holds, its queries' own the last" default:"required"`
}

// splitConfig is the configuration of split-attention.
type splitConfig struct {
	header
	kvLayout
	scoring
	Position int `json:"position" doc:"key position of the first query, the others following it" default:"required"`
	Start    int `json:"start" doc:"first key of the split" default:"required"`
	End      int `json:"end" doc:"one past the last key of the split" default:"required"`
}

// mergeConfig is the configuration of merge-splits.
type mergeConfig struct {
	header
	EmptyRow attention.EmptyRow `json:"empty_row" doc:"output of a row that no split gives a key"`
}

// ringConfig is the configuration of ring-attention.
type ringConfig struct {
	header
	kvLayout
	scoring
	Tokens int `json:"tokens" doc:"positions written to the ring so far, the query's own the last (position tokens − 1)" default:"required"`
}

// packedConfig is the configuration of packed-attention.
type packedConfig struct {
	header
	scoring
	QueryOffsets []int `json:"query_offsets" doc:"running totals of the queries of the sequences, from 0 to the tokens of q" default:"required"`
	KeyOffsets   []int `json:"key_offsets" doc:"running totals of the keys of the sequences, from 0 to the tokens of k" default:"required"`
}

// draftConfig is the configuration of draft-attention.
type draftConfig struct {
	header
	kvLayout
	scoring
}

func (c scoring) options(layout attention.Layout) attention.Options {
	return attention.Options{Layout: layout, Group: c.Group, Scale: c.Scale, SoftCap: c.SoftCap}
}

var perHeadInputs = []Port{
	{Name: "slopes", Optional: true, Doc: "ALiBi slopes, one per query head [heads_q]"},
	{Name: "sinks", Optional: true, Doc: "sink logits, one per query head [heads_q]"},
}

// withPerHead appends the optional per-head inputs to ports.
func withPerHead(ports ...Port) []Port { return append(ports, perHeadInputs...) }

// kvOutputs are the outputs of the decoding operations, first is the
// name of their first dimension ("batch", "sequences").
func kvOutputs(first string) []Port {
	return []Port{
		{Name: "out", Doc: fmt.Sprintf("output, [%s, heads_q, queries, dim_v] or [%[1]s, queries, heads_q, dim_v]", first)},
		{Name: "lse", Doc: fmt.Sprintf("natural log-sum-exp of each row, [%s, heads_q, queries] or [%[1]s, queries, heads_q]", first)},
	}
}

// cacheNote is the note of the kvcache operations: the memory of a
// key/value cache (kvcache.CacheSize), with a worked value.
func cacheNote(extra string) string {
	const layers, heads, dim, bytes, tokens, page = 32, 8, 128, 2, 8192, 16
	one, err1 := kvcache.CacheSize(layers, heads, dim, 1, bytes, page)
	all, err2 := kvcache.CacheSize(layers, heads, dim, tokens, bytes, page)
	if err1 != nil || err2 != nil {
		panic(fmt.Sprint("ops: the cache size of the note: ", err1, err2))
	}
	lines := []string{
		"The key/value cache of one sequence takes 2 · layers · heads_kv · dim · tokens · bytes per",
		"element (a key and a value per kv head, layer and position; kvcache.CacheSize, common",
		fmt.Sprintf("practice): %d layers of %d kv heads of dimension %d in %d-byte elements take %d bytes", layers, heads, dim, bytes, one.Bytes),
		fmt.Sprintf("a position, %d bytes (%d MiB) for %d positions.", all.Bytes, all.Bytes>>20, tokens),
	}
	if extra != "" {
		lines = append(lines, extra)
	}
	return strings.Join(lines, "\n")
}

func init() {
	pages, _ := kvcache.CacheSize(32, 8, 128, 8193, 2, 16)
	register(&op[pagedConfig]{
		name:    "paged-attention",
		summary: "decoding against keys and values in pages of a pool (kvcache.AttendPages; float32: kvcache.AttendPages32)",
		note: cacheNote(fmt.Sprintf("In pages of page_size positions a sequence holds ⌈tokens / page_size⌉ pages: 8193 positions in\n"+
			"pages of 16 take %d pages, %d bytes with the unfilled part of the last.", pages.Pages, pages.PageBytes)),
		inputs: withPerHead(
			Port{Name: "q", Doc: "queries, [sequences, heads_q, queries, dim] (heads-major) or [sequences, queries, heads_q, dim] (seq-major), at the last positions of their sequence"},
			Port{Name: "k_pool", Doc: "key pages, [pages, page_size, heads_kv, dim] (pages-first) or [pages, heads_kv, page_size, dim] (heads-first)"},
			Port{Name: "v_pool", Doc: "value pages, [pages, page_size, heads_kv, dim_v] or [pages, heads_kv, page_size, dim_v]"}),
		outputs: kvOutputs("sequences"),
		run:     runPaged,
	})
	register(&op[splitConfig]{
		name:    "split-attention",
		summary: "one split's partial decoding over the keys [start, end) (kvcache.AttendSplit; float32: kvcache.AttendSplit32)",
		note:    cacheNote("A split's rows that see no key give lse −Inf and output 0 whatever the empty-row policy; give sinks to one split only."),
		inputs: withPerHead(
			Port{Name: "q", Doc: "queries, [batch, heads_q, queries, dim] (heads-major) or [batch, queries, heads_q, dim] (seq-major)"},
			Port{Name: "k", Doc: "the whole cache's keys, [batch, heads_kv, keys, dim] or [batch, keys, heads_kv, dim]"},
			Port{Name: "v", Doc: "the whole cache's values, [batch, heads_kv, keys, dim_v] or [batch, keys, heads_kv, dim_v]"}),
		outputs: kvOutputs("batch"),
		run:     runSplit,
	})
	register(&op[mergeConfig]{
		name:    "merge-splits",
		summary: "the merge of partial results over disjoint keys, split 0 first (kvcache.MergeSplits; float32: kvcache.MergeSplits32)",
		note:    cacheNote(""),
		inputs: []Port{
			{Name: "partial_out", Doc: "the splits' outputs stacked, [splits, …, dim_v] (each split's out of any shape, dim_v last)"},
			{Name: "partial_lse", Doc: "the splits' log-sum-exps stacked, [splits, …]: the shape of partial_out without dim_v"},
		},
		outputs: []Port{
			{Name: "out", Doc: "merged output, the shape of partial_out without its first dimension"},
			{Name: "lse", Doc: "merged log-sum-exp, the shape of partial_lse without its first dimension"},
		},
		run: runMerge,
	})
	register(&op[ringConfig]{
		name:    "ring-attention",
		summary: "one decoding step against a ring buffer of the last positions, a sliding window (kvcache.AttendRing; float32: kvcache.AttendRing32)",
		note:    cacheNote("A ring of slots positions holds position p in slot p mod slots; it takes the cache size of slots positions."),
		inputs: withPerHead(
			Port{Name: "q", Doc: "the newest position's queries, [batch, heads_q, 1, dim] (heads-major) or [batch, 1, heads_q, dim] (seq-major)"},
			Port{Name: "k_ring", Doc: "the ring's keys, [batch, heads_kv, slots, dim] or [batch, slots, heads_kv, dim], position p in slot p mod slots"},
			Port{Name: "v_ring", Doc: "the ring's values, [batch, heads_kv, slots, dim_v] or [batch, slots, heads_kv, dim_v]"}),
		outputs: kvOutputs("batch"),
		run:     runRing,
	})
	register(&op[packedConfig]{
		name:    "packed-attention",
		summary: "causal prefill of sequences packed one after another, each with a cached prefix (kvcache.AttendPacked; float32: kvcache.AttendPacked32)",
		note:    cacheNote(""),
		inputs: withPerHead(
			Port{Name: "q", Doc: "queries of every sequence, token-major [tokens_q, heads_q, dim]"},
			Port{Name: "k", Doc: "keys of every sequence, [tokens_k, heads_kv, dim]; a sequence's keys beyond its queries are its cached prefix"},
			Port{Name: "v", Doc: "values of every sequence, [tokens_k, heads_kv, dim_v]"}),
		outputs: []Port{
			{Name: "out", Doc: "output, [tokens_q, heads_q, dim_v]"},
			{Name: "lse", Doc: "natural log-sum-exp of each row, [tokens_q, heads_q]"},
		},
		run: runPacked,
	})
	register(&op[draftConfig]{
		name:    "draft-attention",
		summary: "draft tokens scored in one pass after the cache, causal among themselves (kvcache.VerifyDraft; float32: kvcache.VerifyDraft32)",
		note:    cacheNote("The drafts' keys and values join the cache: it holds keys + queries positions while they are scored."),
		inputs: withPerHead(
			Port{Name: "q", Doc: "the drafts' queries, [batch, heads_q, drafts, dim] (heads-major) or [batch, drafts, heads_q, dim] (seq-major)"},
			Port{Name: "k_cache", Doc: "cached keys, [batch, heads_kv, keys, dim] or [batch, keys, heads_kv, dim]"},
			Port{Name: "v_cache", Doc: "cached values, [batch, heads_kv, keys, dim_v] or [batch, keys, heads_kv, dim_v]"},
			Port{Name: "k_draft", Doc: "the drafts' keys, [batch, heads_kv, drafts, dim] or [batch, drafts, heads_kv, dim]"},
			Port{Name: "v_draft", Doc: "the drafts' values, [batch, heads_kv, drafts, dim_v] or [batch, drafts, heads_kv, dim_v]"}),
		outputs: kvOutputs("batch"),
		run:     runDraft,
	})
}

// attended runs a kvcache function at float64, or at float32 on the
// inputs rounded, and returns out and lse with their shapes.
func attended(single bool, outShape, lseShape []int,
	f64 func() ([]float64, []float64, error), f32 func() ([]float32, []float32, error)) (Tensors, error) {
	var out, lse []float64
	if single {
		o, l, err := f32()
		if err != nil {
			return nil, err
		}
		out, lse = num.Convert[float64](o), num.Convert[float64](l)
	} else {
		var err error
		if out, lse, err = f64(); err != nil {
			return nil, err
		}
	}
	return Tensors{"out": {outShape, out}, "lse": {lseShape, lse}}, nil
}

// fitsOut refuses an output of batch · heads · queries · dim_v beyond
// MaxElements, the inputs named by what gives each size.
func fitsOut(s attention.Shape, q, v string) error {
	return fits(ErrInput, `output "out"`, size{fmt.Sprintf("batch (input %q)", q), s.Batch}, size{fmt.Sprintf("heads_q (input %q)", q), s.HeadsQ},
		size{fmt.Sprintf("queries (input %q)", q), s.Lq}, size{fmt.Sprintf("dim_v (input %q)", v), s.Dv})
}

func runPaged(c *pagedConfig, in Tensors, single bool) (Tensors, error) {
	o := c.options(c.Layout)
	dims := "[sequences, heads, queries, dim]"
	hd, ld := 1, 2
	if c.Layout == attention.SeqMajor {
		dims, hd, ld = "[sequences, queries, heads, dim]", 2, 1
	}
	q, err := rank(in, "q", 4, dims)
	if err != nil {
		return nil, err
	}
	pool := "[pages, page_size, heads_kv, dim]"
	ph, pp := 2, 1
	if c.PoolLayout == kvcache.HeadsFirst {
		pool, ph, pp = "[pages, heads_kv, page_size, dim]", 1, 2
	}
	k, err := rank(in, "k_pool", 4, pool)
	if err != nil {
		return nil, err
	}
	v, err := rank(in, "v_pool", 4, pool)
	if err != nil {
		return nil, err
	}
	switch {
	case k[3] != q[3]:
		return nil, fmt.Errorf("%w: input \"k_pool\" has head dimension %d; want %d, the head dimension of \"q\"", ErrInput, k[3], q[3])
	case v[0] != k[0] || v[1] != k[1] || v[2] != k[2]:
		return nil, fmt.Errorf("%w: input \"v_pool\" has shape %v; want the pages, page size and heads of \"k_pool\" %v", ErrInput, v, k)
	case len(c.PageTables) != q[0]:
		return nil, fmt.Errorf("%w: key \"page_tables\" holds %d tables; want %d, one per sequence of input \"q\"", ErrConfig, len(c.PageTables), q[0])
	case len(c.Lengths) != q[0]:
		return nil, fmt.Errorf("%w: key \"lengths\" holds %d lengths; want %d, one per sequence of input \"q\"", ErrConfig, len(c.Lengths), q[0])
	}
	s := attention.Shape{Batch: q[0], HeadsQ: q[hd], HeadsKV: k[ph], Lq: q[ld], Dk: q[3], Dv: v[3]}
	if err := perHead(in, s, &o); err != nil {
		return nil, err
	}
	if err := fitsOut(s, "q", "v_pool"); err != nil {
		return nil, err
	}
	p := kvcache.Pool{Pages: k[0], PageSize: k[pp], HeadsKV: k[ph], Dk: k[3], Dv: v[3], Layout: c.PoolLayout}
	os, ls := attentionShapes(s, o)
	return attended(single, os, ls,
		func() ([]float64, []float64, error) {
			return kvcache.AttendPages(in.data("q"), in.data("k_pool"), in.data("v_pool"), p, c.PageTables, c.Lengths, s.HeadsQ, s.Lq, o)
		},
		func() ([]float32, []float32, error) {
			return kvcache.AttendPages32(in.f32("q"), in.f32("k_pool"), in.f32("v_pool"), p, c.PageTables, c.Lengths, s.HeadsQ, s.Lq, o)
		})
}

// contiguous derives the shape and options of a kvcache operation whose
// queries, keys and values are attention tensors named q, k and v.
func contiguous(sc scoring, layout attention.Layout, in Tensors, q, k, v string) (attention.Shape, attention.Options, error) {
	o := sc.options(layout)
	s, err := shapeOf(in, layout, q, k, v)
	if err == nil {
		err = perHead(in, s, &o)
	}
	if err == nil {
		err = fitsOut(s, q, v)
	}
	return s, o, err
}

func runSplit(c *splitConfig, in Tensors, single bool) (Tensors, error) {
	s, o, err := contiguous(c.scoring, c.Layout, in, "q", "k", "v")
	if err != nil {
		return nil, err
	}
	os, ls := attentionShapes(s, o)
	return attended(single, os, ls,
		func() ([]float64, []float64, error) {
			return kvcache.AttendSplit(in.data("q"), in.data("k"), in.data("v"), s, c.Position, c.Start, c.End, o)
		},
		func() ([]float32, []float32, error) {
			return kvcache.AttendSplit32(in.f32("q"), in.f32("k"), in.f32("v"), s, c.Position, c.Start, c.End, o)
		})
}

func runRing(c *ringConfig, in Tensors, single bool) (Tensors, error) {
	s, o, err := contiguous(c.scoring, c.Layout, in, "q", "k_ring", "v_ring")
	if err != nil {
		return nil, err
	}
	if s.Lq != 1 {
		return nil, fmt.Errorf("%w: input \"q\" has %d queries (shape %v); want 1, the newest position's", ErrInput, s.Lq, in["q"].Shape)
	}
	os, ls := attentionShapes(s, o)
	return attended(single, os, ls,
		func() ([]float64, []float64, error) {
			return kvcache.AttendRing(in.data("q"), in.data("k_ring"), in.data("v_ring"), s, c.Tokens, o)
		},
		func() ([]float32, []float32, error) {
			return kvcache.AttendRing32(in.f32("q"), in.f32("k_ring"), in.f32("v_ring"), s, c.Tokens, o)
		})
}

func runDraft(c *draftConfig, in Tensors, single bool) (Tensors, error) {
	s, o, err := contiguous(c.scoring, c.Layout, in, "q", "k_cache", "v_cache")
	if err != nil {
		return nil, err
	}
	want := func(d int) []int {
		if c.Layout == attention.SeqMajor {
			return []int{s.Batch, s.Lq, s.HeadsKV, d}
		}
		return []int{s.Batch, s.HeadsKV, s.Lq, d}
	}
	if err := sameShape(in, "k_draft", want(s.Dk), "one key per draft, as the queries of \"q\" and the heads of \"k_cache\""); err != nil {
		return nil, err
	}
	if err := sameShape(in, "v_draft", want(s.Dv), "one value per draft, as the queries of \"q\" and the heads of \"v_cache\""); err != nil {
		return nil, err
	}
	os, ls := attentionShapes(s, o)
	return attended(single, os, ls,
		func() ([]float64, []float64, error) {
			return kvcache.VerifyDraft(in.data("q"), in.data("k_cache"), in.data("v_cache"), in.data("k_draft"), in.data("v_draft"), s, o)
		},
		func() ([]float32, []float32, error) {
			return kvcache.VerifyDraft32(in.f32("q"), in.f32("k_cache"), in.f32("v_cache"), in.f32("k_draft"), in.f32("v_draft"), s, o)
		})
}

func runPacked(c *packedConfig, in Tensors, single bool) (Tensors, error) {
	dims := "[tokens, heads, dim]"
	q, err := rank(in, "q", 3, dims)
	if err != nil {
		return nil, err
	}
	k, err := rank(in, "k", 3, dims)
	if err != nil {
		return nil, err
	}
	v, err := rank(in, "v", 3, dims)
	if err != nil {
		return nil, err
	}
	switch {
	case k[2] != q[2]:
		return nil, fmt.Errorf("%w: input \"k\" has head dimension %d; want %d, the head dimension of \"q\"", ErrInput, k[2], q[2])
	case v[0] != k[0] || v[1] != k[1]:
		return nil, fmt.Errorf("%w: input \"v\" has shape %v; want %d tokens and %d heads, as \"k\" %v has", ErrInput, v, k[0], k[1], k)
	case len(c.QueryOffsets) == 0:
		return nil, fmt.Errorf("%w: key \"query_offsets\" is empty; want the running totals of the sequences' queries, from 0 to %d", ErrConfig, q[0])
	}
	s := attention.Shape{Batch: len(c.QueryOffsets) - 1, HeadsQ: q[1], HeadsKV: k[1], Lq: q[0], Lk: k[0], Dk: q[2], Dv: v[2]}
	o := c.options(attention.SeqMajor)
	if err := perHead(in, s, &o); err != nil {
		return nil, err
	}
	if err := fits(ErrInput, `output "out"`, size{`tokens_q (input "q")`, s.Lq}, size{`heads_q (input "q")`, s.HeadsQ},
		size{`dim_v (input "v")`, s.Dv}); err != nil {
		return nil, err
	}
	return attended(single, []int{s.Lq, s.HeadsQ, s.Dv}, []int{s.Lq, s.HeadsQ},
		func() ([]float64, []float64, error) {
			return kvcache.AttendPacked(in.data("q"), in.data("k"), in.data("v"), s, c.QueryOffsets, c.KeyOffsets, o)
		},
		func() ([]float32, []float32, error) {
			return kvcache.AttendPacked32(in.f32("q"), in.f32("k"), in.f32("v"), s, c.QueryOffsets, c.KeyOffsets, o)
		})
}

func runMerge(c *mergeConfig, in Tensors, single bool) (Tensors, error) {
	os := in["partial_out"].Shape
	if len(os) < 2 || os[0] < 1 {
		return nil, fmt.Errorf("%w: input \"partial_out\" has shape %v; want [splits, …, dim_v] with at least one split", ErrInput, os)
	}
	dv, err := lastDim(in, "partial_out")
	if err != nil {
		return nil, err
	}
	if err := sameShape(in, "partial_lse", os[:len(os)-1], "the shape of \"partial_out\" without dim_v"); err != nil {
		return nil, err
	}
	parts := func(n string, rows int) [][]float64 {
		x := in.data(n)
		p := make([][]float64, os[0])
		for i := range p {
			p[i] = x[i*rows : (i+1)*rows]
		}
		return p
	}
	ol := len(in.data("partial_out")) / os[0]
	ll := ol / dv
	outs, lses := parts("partial_out", ol), parts("partial_lse", ll)
	return attended(single, os[1:], os[1:len(os)-1],
		func() ([]float64, []float64, error) { return kvcache.MergeSplits(outs, lses, dv, c.EmptyRow) },
		func() ([]float32, []float32, error) {
			o32, l32 := make([][]float32, len(outs)), make([][]float32, len(lses))
			for i := range outs {
				o32[i], l32[i] = num.Convert[float32](outs[i]), num.Convert[float32](lses[i])
			}
			return kvcache.MergeSplits32(o32, l32, dv, c.EmptyRow)
		})
}
