package ops

import (
	"math"
	"slices"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
)

// The key tests of the kvcache operations, as those of attention: every
// value of every key against the kvcache function called directly with
// the options and integers written out here by hand.

// kvGeometry is one kvcache operation of the key tests: its inputs in a
// layout, the keys it requires, and its function called directly with
// the options o (the optional inputs put in by hand) and the integers of
// the configuration.
type kvGeometry struct {
	op       string
	required string // the required keys, as a configuration holds them
	in       func(layout attention.Layout) Tensors
	kernel   func(o attention.Options, in Tensors) (Tensors, error)
}

// kvDims is the shape [b, h, l, d] in the layout.
func kvDims(layout attention.Layout, b, h, l, d int) []int {
	if layout == attention.SeqMajor {
		return []int{b, l, h, d}
	}
	return []int{b, h, l, d}
}

// kvOut gives out and lse their shapes for b entries of 4 query heads, lq
// queries and value dimension 3 in the layout.
func kvOut(layout attention.Layout, b, lq int, out, lse []float64, err error) (Tensors, error) {
	os := kvDims(layout, b, 4, lq, 3)
	return Tensors{"out": {os, out}, "lse": {os[:3], lse}}, err
}

// The geometries: 4 query heads on 2 kv heads, head dimension 4, value
// dimension 3, and more than one query where the layout of q matters.
var (
	pagedTables  = [][]int{{2, 0, 1}, {3, 1}}
	pagedLengths = []int{5, 3}
	pagedPool    = kvcache.Pool{Pages: 4, PageSize: 2, HeadsKV: 2, Dk: 4, Dv: 3}
)

func pagedGeometry(tables [][]int, lengths []int, pool kvcache.PoolLayout) kvGeometry {
	return kvGeometry{op: "paged-attention", required: `"page_tables":[[2,0,1],[3,1]],"lengths":[5,3]`,
		in: func(layout attention.Layout) Tensors {
			// [4 pages, 2, 2, d]: the same shape in either pool layout
			return Tensors{"q": randomTensor(1, kvDims(layout, 2, 4, 2, 4)...),
				"k_pool": randomTensor(2, 4, 2, 2, 4), "v_pool": randomTensor(3, 4, 2, 2, 3)}
		},
		kernel: func(o attention.Options, in Tensors) (Tensors, error) {
			p := pagedPool
			p.Layout = pool
			out, lse, err := kvcache.AttendPages(in["q"].Data, in["k_pool"].Data, in["v_pool"].Data, p, tables, lengths, 4, 2, o)
			return kvOut(o.Layout, 2, 2, out, lse, err)
		}}
}

func splitGeometry(pos, start, end int) kvGeometry {
	return kvGeometry{op: "split-attention", required: `"position":4,"start":1,"end":6`,
		in: func(layout attention.Layout) Tensors {
			return Tensors{"q": randomTensor(1, kvDims(layout, 1, 4, 2, 4)...),
				"k": randomTensor(2, kvDims(layout, 1, 2, 6, 4)...), "v": randomTensor(3, kvDims(layout, 1, 2, 6, 3)...)}
		},
		kernel: func(o attention.Options, in Tensors) (Tensors, error) {
			s := attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 2, Lk: 6, Dk: 4, Dv: 3}
			out, lse, err := kvcache.AttendSplit(in["q"].Data, in["k"].Data, in["v"].Data, s, pos, start, end, o)
			return kvOut(o.Layout, 1, 2, out, lse, err)
		}}
}

func ringGeometry(tokens int) kvGeometry {
	return kvGeometry{op: "ring-attention", required: `"tokens":6`,
		in: func(layout attention.Layout) Tensors {
			return Tensors{"q": randomTensor(1, kvDims(layout, 1, 4, 1, 4)...),
				"k_ring": randomTensor(2, kvDims(layout, 1, 2, 4, 4)...), "v_ring": randomTensor(3, kvDims(layout, 1, 2, 4, 3)...)}
		},
		kernel: func(o attention.Options, in Tensors) (Tensors, error) {
			s := attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 1, Lk: 4, Dk: 4, Dv: 3}
			out, lse, err := kvcache.AttendRing(in["q"].Data, in["k_ring"].Data, in["v_ring"].Data, s, tokens, o)
			return kvOut(o.Layout, 1, 1, out, lse, err)
		}}
}

func draftGeometry() kvGeometry {
	return kvGeometry{op: "draft-attention",
		in: func(layout attention.Layout) Tensors {
			return Tensors{"q": randomTensor(1, kvDims(layout, 1, 4, 2, 4)...),
				"k_cache": randomTensor(2, kvDims(layout, 1, 2, 4, 4)...), "v_cache": randomTensor(3, kvDims(layout, 1, 2, 4, 3)...),
				"k_draft": randomTensor(4, kvDims(layout, 1, 2, 2, 4)...), "v_draft": randomTensor(5, kvDims(layout, 1, 2, 2, 3)...)}
		},
		kernel: func(o attention.Options, in Tensors) (Tensors, error) {
			s := attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 2, Lk: 4, Dk: 4, Dv: 3}
			out, lse, err := kvcache.VerifyDraft(in["q"].Data, in["k_cache"].Data, in["v_cache"].Data, in["k_draft"].Data, in["v_draft"].Data, s, o)
			return kvOut(o.Layout, 1, 2, out, lse, err)
		}}
}

func packedGeometry(queryOffsets, keyOffsets []int) kvGeometry {
	return kvGeometry{op: "packed-attention", required: `"query_offsets":[0,2,5],"key_offsets":[0,3,8]`,
		in: func(attention.Layout) Tensors {
			return Tensors{"q": randomTensor(1, 5, 4, 4), "k": randomTensor(2, 8, 2, 4), "v": randomTensor(3, 8, 2, 3)}
		},
		kernel: func(o attention.Options, in Tensors) (Tensors, error) {
			s := attention.Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 5, Lk: 8, Dk: 4, Dv: 3}
			out, lse, err := kvcache.AttendPacked(in["q"].Data, in["k"].Data, in["v"].Data, s, queryOffsets, keyOffsets, o)
			return Tensors{"out": {[]int{5, 4, 3}, out}, "lse": {[]int{5, 4}, lse}}, err
		}}
}

// kvValue is one value of a kvcache key on geometry g: body holds the
// keys besides the required ones, o the options.
func kvValue(g kvGeometry, value, same, body string, o attention.Options) keyValue {
	keys := g.required
	if keys != "" && body != "" {
		keys += ","
	}
	keys += body
	return keyValue{value: value, same: same, config: cfg(keys),
		in:   func(string) Tensors { return g.in(o.Layout) },
		want: func(_ string, in Tensors) (Tensors, error) { return g.kernel(o, in) }}
}

// kvRefused is a value the operation refuses under ErrConfig.
func kvRefused(g kvGeometry, value, body string) keyValue {
	return keyValue{value: value, config: cfg(body), in: func(string) Tensors { return g.in(attention.HeadsMajor) }, refuse: ErrConfig}
}

func kvcacheKeyTests() []keyTest {
	all := []kvGeometry{pagedGeometry(pagedTables, pagedLengths, kvcache.PagesFirst), splitGeometry(4, 1, 6), ringGeometry(6), draftGeometry(),
		packedGeometry([]int{0, 2, 5}, []int{0, 3, 8})}
	var tests []keyTest
	for _, g := range all {
		shared := []struct {
			key, why string
			values   []attnKeyValue
		}{
			{key: "group", why: "4 query heads on 2 kv heads: blocks and cycle give heads 1 and 2 other keys",
				values: groupValues},
			{key: "scale", why: "the default 1/√4 = 0.5, 0.25 and 2 scale nonzero logits differently",
				values: scaleValues},
			{key: "soft_cap", why: "logits of random unit-range vectors of 4: caps of 0.5 and 2 bend them by different amounts, no cap leaves them",
				values: softCapValues},
		}
		if g.op != "packed-attention" {
			shared = append(shared, struct {
				key, why string
				values   []attnKeyValue
			}{key: "layout", why: "the same data read heads-major or seq-major gives each head other rows of q (2 queries, or 2 kv heads of the ring)",
				values: []attnKeyValue{
					{value: leftOut, same: "heads-major"},
					{value: "heads-major", body: `"layout":"heads-major"`, o: attention.Options{Layout: attention.HeadsMajor}},
					{value: "seq-major", body: `"layout":"seq-major"`, o: attention.Options{Layout: attention.SeqMajor}},
				}})
		}
		for _, k := range shared {
			kt := keyTest{ops: []string{g.op}, key: k.key, why: k.why}
			for _, v := range k.values {
				kt.values = append(kt.values, kvValue(g, v.value, v.same, v.body, v.o))
			}
			tests = append(tests, kt)
		}
	}

	paged, split := pagedGeometry(pagedTables, pagedLengths, kvcache.PagesFirst), splitGeometry(4, 1, 6)
	// exactly is a value of geometry g whose configuration is body alone.
	exactly := func(g kvGeometry, value, body string) keyValue {
		g.required = ""
		return kvValue(g, value, "", body, attention.Options{})
	}
	pagedWith := func(value, body string, tables [][]int, lengths []int) keyValue {
		return exactly(pagedGeometry(tables, lengths, kvcache.PagesFirst), value, body)
	}
	splitWith := func(value, body string, pos, start, end int) keyValue {
		return exactly(splitGeometry(pos, start, end), value, body)
	}
	packedWith := func(value, body string, q, k []int) keyValue {
		return exactly(packedGeometry(q, k), value, body)
	}
	tests = append(tests,
		keyTest{ops: []string{"paged-attention"}, key: "pool_layout", why: "pools of 4 pages of 2 positions of 2 heads: the same data read as [pages, page size, heads, dim] or [pages, heads, page size, dim] puts other keys at each position",
			values: []keyValue{
				kvValue(paged, leftOut, "pages-first", "", attention.Options{}),
				kvValue(paged, "pages-first", "", `"pool_layout":"pages-first"`, attention.Options{}),
				kvValue(pagedGeometry(pagedTables, pagedLengths, kvcache.HeadsFirst), "heads-first", "", `"pool_layout":"heads-first"`, attention.Options{}),
			}},
		keyTest{ops: []string{"paged-attention"}, key: "page_tables", why: "the sequences read other pages, or the same pages in another order",
			values: []keyValue{
				kvRefused(paged, leftOut, `"lengths":[5,3]`),
				pagedWith("[[2,0,1],[3,1]]", `"page_tables":[[2,0,1],[3,1]],"lengths":[5,3]`, [][]int{{2, 0, 1}, {3, 1}}, pagedLengths),
				pagedWith("[[0,2,1],[3,1]]", `"page_tables":[[0,2,1],[3,1]],"lengths":[5,3]`, [][]int{{0, 2, 1}, {3, 1}}, pagedLengths),
				pagedWith("[[2,0,1],[1,3]]", `"page_tables":[[2,0,1],[1,3]],"lengths":[5,3]`, [][]int{{2, 0, 1}, {1, 3}}, pagedLengths),
			}},
		keyTest{ops: []string{"paged-attention"}, key: "lengths", why: "other lengths put the queries, the last 2 positions of their sequence, at other positions with other keys",
			values: []keyValue{
				kvRefused(paged, leftOut, `"page_tables":[[2,0,1],[3,1]]`),
				pagedWith("[5,3]", `"page_tables":[[2,0,1],[3,1]],"lengths":[5,3]`, pagedTables, []int{5, 3}),
				pagedWith("[6,4]", `"page_tables":[[2,0,1],[3,1]],"lengths":[6,4]`, pagedTables, []int{6, 4}),
				pagedWith("[4,2]", `"page_tables":[[2,0,1],[3,1]],"lengths":[4,2]`, pagedTables, []int{4, 2}),
			}},
		keyTest{ops: []string{"split-attention"}, key: "position", why: "the split [1, 6) of 6 keys: queries at 2, 3 or 4 (and the next) see different keys of it",
			values: []keyValue{
				kvRefused(split, leftOut, `"start":1,"end":6`),
				splitWith("2", `"position":2,"start":1,"end":6`, 2, 1, 6),
				splitWith("3", `"position":3,"start":1,"end":6`, 3, 1, 6),
				splitWith("4", `"position":4,"start":1,"end":6`, 4, 1, 6),
			}},
		keyTest{ops: []string{"split-attention"}, key: "start", why: "queries at 4 and 5: splits from 0, 1 or 2 to 6 hold different keys they see",
			values: []keyValue{
				kvRefused(split, leftOut, `"position":4,"end":6`),
				splitWith("0", `"position":4,"start":0,"end":6`, 4, 0, 6),
				splitWith("1", `"position":4,"start":1,"end":6`, 4, 1, 6),
				splitWith("2", `"position":4,"start":2,"end":6`, 4, 2, 6),
			}},
		keyTest{ops: []string{"split-attention"}, key: "end", why: "queries at 4 and 5: splits from 1 to 4, 5 or 6 hold different keys they see (key 4 the first query's own, key 5 the second's)",
			values: []keyValue{
				kvRefused(split, leftOut, `"position":4,"start":1`),
				splitWith("4", `"position":4,"start":1,"end":4`, 4, 1, 4),
				splitWith("5", `"position":4,"start":1,"end":5`, 4, 1, 5),
				splitWith("6", `"position":4,"start":1,"end":6`, 4, 1, 6),
			}},
		keyTest{ops: []string{"ring-attention"}, key: "tokens", why: "a ring of 4 slots after 3, 6 or 9 tokens: the query sees 3 or 4 slots, unrolled from other starting slots",
			values: []keyValue{
				kvRefused(ringGeometry(6), leftOut, ""),
				exactly(ringGeometry(3), "3", `"tokens":3`),
				exactly(ringGeometry(6), "6", `"tokens":6`),
				exactly(ringGeometry(9), "9", `"tokens":9`),
			}},
		keyTest{ops: []string{"packed-attention"}, key: "query_offsets", why: "5 queries on keys [0, 3) and [3, 8): split 2+3, 1+4 or 3+2 the queries sit at other positions of other sequences",
			values: []keyValue{
				kvRefused(packedGeometry(nil, nil), leftOut, `"key_offsets":[0,3,8]`),
				packedWith("[0,2,5]", `"query_offsets":[0,2,5],"key_offsets":[0,3,8]`, []int{0, 2, 5}, []int{0, 3, 8}),
				packedWith("[0,1,5]", `"query_offsets":[0,1,5],"key_offsets":[0,3,8]`, []int{0, 1, 5}, []int{0, 3, 8}),
				packedWith("[0,3,5]", `"query_offsets":[0,3,5],"key_offsets":[0,3,8]`, []int{0, 3, 5}, []int{0, 3, 8}),
			}},
		keyTest{ops: []string{"packed-attention"}, key: "key_offsets", why: "queries split 2+3 on 8 keys split 3+5, 2+6 or 4+4: other keys belong to each sequence",
			values: []keyValue{
				kvRefused(packedGeometry(nil, nil), leftOut, `"query_offsets":[0,2,5]`),
				packedWith("[0,3,8]", `"query_offsets":[0,2,5],"key_offsets":[0,3,8]`, []int{0, 2, 5}, []int{0, 3, 8}),
				packedWith("[0,2,8]", `"query_offsets":[0,2,5],"key_offsets":[0,2,8]`, []int{0, 2, 5}, []int{0, 2, 8}),
				packedWith("[0,4,8]", `"query_offsets":[0,2,5],"key_offsets":[0,4,8]`, []int{0, 2, 5}, []int{0, 4, 8}),
			}},
		mergeKeyTest(),
	)
	return tests
}

// mergeInputs are the partial results of 2 splits over 2 rows of value
// dimension 3, the second row seen by neither (lse −Inf, output 0).
func mergeInputs(string) Tensors {
	out := randomTensor(6, 2, 2, 3)
	for _, i := range []int{3, 4, 5, 9, 10, 11} {
		out.Data[i] = 0
	}
	return Tensors{"partial_out": out, "partial_lse": {[]int{2, 2}, []float64{0.5, math.Inf(-1), -0.25, math.Inf(-1)}}}
}

func mergeKeyTest() keyTest {
	value := func(value, same, body string, empty attention.EmptyRow) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: mergeInputs,
			want: func(_ string, in Tensors) (Tensors, error) {
				x, l := in["partial_out"].Data, in["partial_lse"].Data
				out, lse, err := kvcache.MergeSplits([][]float64{x[:6], x[6:]}, [][]float64{l[:2], l[2:]}, 3, empty)
				return Tensors{"out": {[]int{2, 3}, out}, "lse": {[]int{2}, lse}}, err
			}}
	}
	return keyTest{ops: []string{"merge-splits"}, key: "empty_row", why: "the second row has lse −Inf in both splits: zero leaves its output 0, nan makes it NaN",
		values: []keyValue{
			value(leftOut, "zero", "", attention.EmptyRowZero),
			value("zero", "", `"empty_row":"zero"`, attention.EmptyRowZero),
			value("nan", "", `"empty_row":"nan"`, attention.EmptyRowNaN),
		}}
}

// TestKVCacheInputErrors: shapes that do not fit are refused with an
// error that names the input or key and says what is wanted.
func TestKVCacheInputErrors(t *testing.T) {
	paged := pagedGeometry(pagedTables, pagedLengths, kvcache.PagesFirst).in(attention.HeadsMajor)
	cases := []struct {
		op, config string
		in         Tensors
		change     func(in Tensors)
		err        error
		says       string
	}{
		{"paged-attention", `"page_tables":[[2,0,1]],"lengths":[5,3]`, paged, nil, ErrConfig,
			`key "page_tables" holds 1 tables; want 2, one per sequence of input "q"`},
		{"paged-attention", `"page_tables":[[2,0,1],[3,1]],"lengths":[5]`, paged, nil, ErrConfig,
			`key "lengths" holds 1 lengths; want 2, one per sequence of input "q"`},
		{"paged-attention", `"page_tables":[[2,0,1],[3,1]],"lengths":[5,3]`, paged,
			func(in Tensors) { in["v_pool"] = randomTensor(3, 4, 1, 2, 3) }, ErrInput, `input "v_pool" has shape [4 1 2 3]; want the pages, page size and heads of "k_pool"`},
		{"paged-attention", `"page_tables":[[2,0,9],[3,1]],"lengths":[5,3]`, paged, nil, kvcache.ErrPageIndex, "paged-attention"},
		{"ring-attention", `"tokens":6`, ringGeometry(6).in(attention.HeadsMajor),
			func(in Tensors) { in["q"] = randomTensor(1, 1, 4, 2, 4) }, ErrInput, `input "q" has 2 queries`},
		{"ring-attention", `"tokens":6`, ringGeometry(6).in(attention.HeadsMajor),
			func(in Tensors) { in["k_ring"] = randomTensor(1, 1, 2, 4, 3) }, ErrInput, `input "k_ring" has head dimension 3; want 4, the head dimension of "q"`},
		{"draft-attention", "", draftGeometry().in(attention.HeadsMajor),
			func(in Tensors) { in["k_draft"] = randomTensor(4, 1, 2, 3, 4) }, ErrInput, `input "k_draft" has shape [1 2 3 4]; want [1 2 2 4]`},
		{"packed-attention", `"query_offsets":[],"key_offsets":[0,3,8]`, packedGeometry(nil, nil).in(0), nil, ErrConfig, `key "query_offsets" is empty`},
		{"packed-attention", `"query_offsets":[0,2,6],"key_offsets":[0,3,8]`, packedGeometry(nil, nil).in(0), nil, kvcache.ErrOffsets, "packed-attention"},
		{"split-attention", `"position":4,"start":3,"end":9`, splitGeometry(4, 3, 9).in(attention.HeadsMajor), nil, kvcache.ErrSplit, "split-attention"},
		{"merge-splits", "", mergeInputs(""), func(in Tensors) { in["partial_lse"] = Tensor{[]int{2, 3}, make([]float64, 6)} }, ErrInput,
			`input "partial_lse" has shape [2 3]; want [2 2]`},
		{"merge-splits", "", mergeInputs(""), func(in Tensors) { in["partial_out"] = Tensor{[]int{3}, make([]float64, 3)} }, ErrInput,
			`input "partial_out" has shape [3]; want [splits, …, dim_v]`},
	}
	for _, c := range cases {
		in := Tensors{}
		for n, x := range c.in {
			in[n] = Tensor{slices.Clone(x.Shape), slices.Clone(x.Data)}
		}
		if c.change != nil {
			c.change(in)
		}
		for _, run := range []func(string, []byte, Tensors) (Tensors, error){Run, Run32} {
			_, err := run(c.op, []byte(cfg(c.config)), in)
			if expect.ErrorIs(t, err, c.err, "%s %s", c.op, c.config) {
				expect.Contains(t, err.Error(), c.says)
				expect.Contains(t, err.Error(), c.op)
			}
		}
	}
}

var kvcacheOps = []string{"paged-attention", "split-attention", "merge-splits", "ring-attention", "packed-attention", "draft-attention"}

// TestKVCacheNotes: the help note of every kvcache operation gives the
// cache size of its worked example as kvcache.CacheSize computes it.
func TestKVCacheNotes(t *testing.T) {
	f, err := kvcache.CacheSize(32, 8, 128, 8192, 2, 16)
	ensure.NoError(t, err)
	expect.Equal(t, 1<<30, f.Bytes)
	for _, n := range append(slices.Clone(kvcacheOps), "block-forward") {
		o, err := Lookup(n)
		ensure.NoError(t, err)
		expect.Contains(t, o.Note(), "2 · layers · heads_kv · dim · tokens · bytes per", n)
		expect.Contains(t, o.Note(), "131072 bytes", n)
		expect.Contains(t, o.Note(), "1073741824 bytes", n)
	}
	o, err := Lookup("paged-attention")
	ensure.NoError(t, err)
	expect.Contains(t, o.Note(), "513 pages")
	for _, n := range Names() {
		if o, _ := Lookup(n); !slices.Contains(kvcacheOps, n) && n != "block-forward" {
			expect.Empty(t, o.Note(), "%s has a note", n)
		}
	}
}
