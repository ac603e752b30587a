package attentiontest

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/kvcache"
	"github.com/plumbref/plumb/mask"
)

// PagedProblem is one call of a paged attention kernel as RunPaged poses
// it: a batch of sequences whose keys and values live in pages of a pool
// (kvcache.Pool), found through one page table per sequence, each
// sequence's last Lq positions being its new queries' own. The kernel
// computes, for sequence b, query head h and query i at position
// Lengths[b] − Lq + i,
//
//	s_j  = Scale · q[b,h,i] · K_b[kv(h), j]     for j ≤ Lengths[b] − Lq + i
//	out  = Σ_j softmax(s)_j V_b[kv(h), j],  lse = log Σ_j e^{s_j}
//
// with K_b[g, t] the key of head g at slot t mod PageSize of page
// Tables[b][⌊t/PageSize⌋] of the pool (kvcache.Gather); the reference is
// kvcache.AttendPages. q and the output are [len(Tables), HeadsQ, Lq, Dk]
// (HeadsMajor) or [len(Tables), Lq, HeadsQ, Dk] (SeqMajor); the
// log-sum-exp [len(Tables), HeadsQ, Lq] or [len(Tables), Lq, HeadsQ].
// Entries of a table past the pages its length uses may be −1 (padding)
// and must not be read.
type PagedProblem struct {
	Pool    kvcache.Pool
	Tables  [][]int
	Lengths []int
	HeadsQ  int
	Lq      int
	Layout  attention.Layout
	Group   attention.GroupMap
	// Scale multiplies q·k; always set (1/√Dk).
	Scale float64
}

// String lists the problem's shape and conventions, as failure messages
// print them.
func (p PagedProblem) String() string {
	pl := p.Pool
	return fmt.Sprintf("%d sequences of lengths %v, %d queries each, %d query heads on %d kv heads, Dk %d, Dv %d, "+
		"pool of %d pages of %d positions, pool_layout %v, layout %v, group %v, scale %.6g, page tables %v",
		len(p.Tables), p.Lengths, p.Lq, p.HeadsQ, pl.HeadsKV, pl.Dk, pl.Dv, pl.Pages, pl.PageSize, pl.Layout, p.Layout, p.Group, p.Scale, p.Tables)
}

// options are the attention options of p, which kvcache.AttendPages takes.
func (p PagedProblem) options() attention.Options {
	return attention.Options{Layout: p.Layout, Group: p.Group, Scale: p.Scale}
}

// PagedSupports declares what a paged kernel implements. The lists
// multiply the cases as Supports' do; an empty list means the zero value
// alone (kvcache.PagesFirst, attention.HeadsMajor, attention.GroupBlocks).
type PagedSupports struct {
	PoolLayouts []kvcache.PoolLayout
	Layouts     []attention.Layout
	Groups      []attention.GroupMap
	// Chunks: Lq > 1, several new queries per sequence (a chunk of a
	// prefill, or drafted tokens), causal among themselves.
	Chunks bool
	// LSE: the kernel returns the log-sum-exp, which is then checked.
	LSE bool
}

// PagedKernel is a paged attention kernel under test, with float32 or
// float64 inputs and outputs.
type PagedKernel[E compare.Float] struct {
	// Attend computes out (and lse, when Supports.LSE) for p. q, kPool
	// and vPool hold values of Format; they must not be modified.
	Attend func(q, kPool, vPool []E, p PagedProblem) (out, lse []E, err error)
	// Format is as Kernel.Format.
	Format   compare.Format
	Supports PagedSupports
}

// PagedCase is one problem of the paged suite before its conventions
// (pool layout, layout, group map) are filled in.
type PagedCase struct {
	Name    string
	Why     string
	Problem PagedProblem
}

// PagedCases returns the paged suite's cases, with the reason each is
// there, in the order RunPaged runs them.
func PagedCases() []PagedCase {
	pc := func(name, why string, pages, size, hq, hkv, d, lq int, tables [][]int, lengths []int) PagedCase {
		return PagedCase{name, why, PagedProblem{
			Pool:   kvcache.Pool{Pages: pages, PageSize: size, HeadsKV: hkv, Dk: d, Dv: d},
			Tables: tables, Lengths: lengths, HeadsQ: hq, Lq: lq, Scale: 1 / math.Sqrt(float64(d)),
		}}
	}
	return []PagedCase{
		pc("pages_in_order", "one sequence of 12 in pages 0, 1, 2 of 4 positions: the plain layout",
			3, 4, 4, 2, 16, 1, [][]int{{0, 1, 2}}, []int{12}),
		pc("pages_shuffled", "pages 6, 1, 7, 0, 3, 2 of a pool of 8: a kernel that reads page ⌊t/P⌋ instead of the table's entry reads pages 4 and 5",
			8, 4, 4, 2, 16, 1, [][]int{{6, 1, 7, 0, 3, 2}}, []int{24}),
		pc("last_page_partial", "10 positions in pages of 4: the last page's slots 2 and 3 hold values that must not be read",
			3, 4, 4, 2, 16, 1, [][]int{{2, 0, 1}}, []int{10}),
		pc("shared_prefix", "two sequences share their first two pages (a common prefix) and differ after",
			5, 4, 4, 2, 16, 1, [][]int{{3, 0, 1}, {3, 0, 4}}, []int{11, 12}),
		pc("padded_table", "table entries past the pages the length uses are −1: a kernel that reads them fails",
			4, 4, 4, 2, 16, 1, [][]int{{2, 1, -1, -1}, {0, 3, 1, -1}}, []int{5, 9}),
		pc("page_size_one", "pages of one position in reverse order",
			7, 1, 2, 1, 16, 1, [][]int{{6, 5, 4, 3, 2, 1, 0}}, []int{7}),
		pc("ragged_batch", "four sequences of lengths 1, 16, 17 and 40 in pages of 16: one page exactly full, one with a single position",
			8, 16, 4, 2, 16, 1, [][]int{{7}, {2}, {5, 0}, {1, 6, 3}}, []int{1, 16, 17, 40}),
		pc("one_position", "a sequence of one position: the query sees only its own key",
			2, 4, 4, 2, 16, 1, [][]int{{1}}, []int{1}),
		pc("chunk_of_queries", "4 new queries at positions 16 … 19 of a sequence of 20: causal among themselves",
			6, 4, 4, 2, 16, 4, [][]int{{5, 3, 1, 0, 2}}, []int{20}),
		pc("realistic_decode", "8 query heads on 2 kv heads, head dimension 64, 512 positions in 32 of the 48 pages of 16, shuffled",
			48, 16, 8, 2, 64, 1, [][]int{shuffled(48, 9)[:32]}, []int{512}),
	}
}

// shuffled is a permutation of 0 … n−1, the same for the same seed.
func shuffled(n int, seed uint64) []int {
	p := make([]int, n)
	for i := range p {
		p[i] = i
	}
	r := rand.New(rand.NewPCG(seed, 0))
	r.Shuffle(n, func(i, j int) { p[i], p[j] = p[j], p[i] })
	return p
}

// RunPaged runs every case of PagedCases against a paged kernel, each as
// a subtest named case/pool_layout/layout[/group], and judges the output
// (and the log-sum-exp, when declared) against the float64 reference
// kvcache.AttendPages. A float32 kernel is held to the yardstick
// (compare.MeasureYardstick, factor compare.DefaultK) of two float32 forms
// on the same inputs in the kernel's Format, the larger bound of the two:
// kvcache.AttendPages32, and the gathered keys attended block by block
// (attention.ForwardTiled32 over blocks of 16 keys), which sums in another
// order, for the reason Run gives; a float64
// kernel to 1e-12 normwise and 1e-12 times the largest reference
// magnitude per element, as Run does.
//
// Inputs are standard normal, drawn from a generator seeded by the
// subtest's name and rounded to the kernel's Format, every slot of the
// pool included: a slot the kernel must not read holds a value that
// changes the result if it does. Attention without positions is
// invariant to the order of the keys it sees, so a kernel that reads the
// right pages in the wrong order is caught only where order matters
// (the chunk's causal rows); the pools of the shuffled cases hold more
// pages than their sequences use, so that reading a wrong page reads
// other keys.
//
// Special cases are:
//
//	PagedKernel.Attend nil                the test fails at once, saying so
//	an invalid Format                     the test fails at once, saying so
//	a case needing an undeclared option   its subtest is skipped, with a message naming the option
//	the kernel returns an error           that subtest fails, quoting the error
//	an output of the wrong length         that subtest fails, naming both lengths
func RunPaged[T conformance.TB[T], E compare.Float](t T, k PagedKernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "attentiontest paged", k.Attend != nil, "PagedKernel.Attend is nil", k.Format,
		PagedCases(), func(c PagedCase) string { return c.Name }, k.Supports.variants,
		func(t T, f compare.Format, c PagedCase, p PagedProblem, r *rand.Rand) { runPaged(t, k, f, c, p, r) })
}

// variants expands a case into one problem per declared pool layout,
// layout and group map (grouped cases only).
func (s PagedSupports) variants(c PagedCase) []suite.Variant[PagedProblem] {
	pools := s.PoolLayouts
	if len(pools) == 0 {
		pools = []kvcache.PoolLayout{kvcache.PagesFirst}
	}
	layouts := s.Layouts
	if len(layouts) == 0 {
		layouts = []attention.Layout{attention.HeadsMajor}
	}
	grouped := c.Problem.Pool.HeadsKV > 1 && c.Problem.Pool.HeadsKV < c.Problem.HeadsQ
	groups := []attention.GroupMap{attention.GroupBlocks}
	if grouped && len(s.Groups) > 0 {
		groups = s.Groups
	}
	var vs []suite.Variant[PagedProblem]
	for _, pl := range pools {
		for _, l := range layouts {
			for _, g := range groups {
				p := c.Problem
				p.Pool.Layout, p.Layout, p.Group = pl, l, g
				name := pl.String() + "/" + l.String()
				if grouped {
					name += "/" + g.String()
				}
				var missing []string
				if p.Lq > 1 && !s.Chunks {
					missing = append(missing, "several queries per sequence (Chunks)")
				}
				vs = append(vs, suite.Variant[PagedProblem]{Name: name, Problem: p, Missing: missing})
			}
		}
	}
	return vs
}

func runPaged[T conformance.TB[T], E compare.Float](t T, k PagedKernel[E], f compare.Format, c PagedCase, p PagedProblem, rng *rand.Rand) {
	t.Helper()
	pl, b := p.Pool, len(p.Tables)
	inputs := [][]float64{
		f.RoundSlice(suite.Normal(rng, b*p.HeadsQ*p.Lq*pl.Dk, 1)),
		f.RoundSlice(suite.Normal(rng, pl.Pages*pl.PageSize*pl.HeadsKV*pl.Dk, 1)),
		f.RoundSlice(suite.Normal(rng, pl.Pages*pl.PageSize*pl.HeadsKV*pl.Dv, 1)),
	}
	o := p.options()
	sh := attention.Shape{Batch: b, HeadsQ: p.HeadsQ, HeadsKV: pl.HeadsKV, Lq: p.Lq, Dk: pl.Dk, Dv: pl.Dv}
	judgeServing(t, f, c.Name, p.String(), "sequence", servingRun[E]{
		inputs: inputs, shape: sh, layout: p.Layout, lse: k.Supports.LSE,
		ref: func(in [][]float64) ([]float64, []float64, error) {
			return kvcache.AttendPages(in[0], in[1], in[2], pl, p.Tables, p.Lengths, p.HeadsQ, p.Lq, o)
		},
		refs32: []func(in [][]float32) ([]float32, []float32, error){
			func(in [][]float32) ([]float32, []float32, error) {
				return kvcache.AttendPages32(in[0], in[1], in[2], pl, p.Tables, p.Lengths, p.HeadsQ, p.Lq, o)
			},
			func(in [][]float32) ([]float32, []float32, error) { return p.tiled32(in) },
		},
		kernel: func(in [][]E) ([]E, []E, error) { return k.Attend(in[0], in[1], in[2], p) },
	})
}

// tiled32 is the paged problem's second yardstick form: each sequence's
// keys gathered (kvcache.Gather32) and attended by tiled32.
func (p PagedProblem) tiled32(in [][]float32) (out, lse []float32, err error) {
	pl := p.Pool
	n := p.HeadsQ * p.Lq * pl.Dk
	for b, table := range p.Tables {
		k, v, err := kvcache.Gather32(in[1], in[2], pl, table, p.Lengths[b], p.Layout)
		if err != nil {
			return nil, nil, err
		}
		o := p.options()
		o.Mask = mask.Causal()
		s := attention.Shape{Batch: 1, HeadsQ: p.HeadsQ, HeadsKV: pl.HeadsKV, Lq: p.Lq, Lk: p.Lengths[b], Dk: pl.Dk, Dv: pl.Dv}
		ob, lb, err := tiled32(in[0][b*n:(b+1)*n], k, v, s, o)
		if err != nil {
			return nil, nil, err
		}
		out, lse = append(out, ob...), append(lse, lb...)
	}
	return out, lse, nil
}

// servingRun is one subtest of a serving suite: its inputs (rounded to
// the kernel's format), the reference and its float32 twin on them, the
// kernel, and the shape and layout of the output rows.
type servingRun[E compare.Float] struct {
	inputs [][]float64
	ref    func(in [][]float64) (out, lse []float64, err error)
	// refs32 are the float32 yardstick runs: the reference's twin and a
	// form that sums in another order (see tiled32).
	refs32 []func(in [][]float32) (out, lse []float32, err error)
	kernel func(in [][]E) (out, lse []E, err error)
	shape  attention.Shape
	layout attention.Layout
	lse    bool // the kernel returns the log-sum-exp
	// outShape, lseShape and their dims, when set, replace those of shape
	// and layout (packed sequences: [token, head, dim]).
	outShape, lseShape []int
	outDims, lseDims   string
}

// judgeServing runs the reference and the kernel of r and judges the
// output, and the log-sum-exp when declared, with suite.Check: a float32
// kernel against the yardstick of r.ref32 (run once for both), a float64
// kernel at the float64 tolerance. batch names the first dimension of the
// outputs in the failure messages.
func judgeServing[T conformance.TB[T], E compare.Float](t T, f compare.Format, name, conv, batch string, r servingRun[E]) {
	t.Helper()
	out, lse, err := r.ref(r.inputs)
	if err != nil {
		t.Errorf("case %s (%s): the reference refused the problem: %v", name, conv, err)
		return
	}
	in := make([][]E, len(r.inputs))
	for i, x := range r.inputs {
		in[i] = num.Convert[E](x)
	}
	gotOut, gotLSE, err := r.kernel(in)
	if err != nil {
		t.Errorf("case %s (%s): the kernel returned an error: %v", name, conv, err)
		return
	}
	outShape, lseShape, outDims, lseDims := shapes(Problem{Shape: r.shape, Layout: r.layout})
	outDims, lseDims = strings.Replace(outDims, "batch", batch, 1), strings.Replace(lseDims, "batch", batch, 1)
	if r.outShape != nil {
		outShape, lseShape, outDims, lseDims = r.outShape, r.lseShape, r.outDims, r.lseDims
	}
	memo := make([][][]float32, len(r.refs32))
	low := func(which int) []func(in [][]float32) ([]float32, error) {
		var runs []func(in [][]float32) ([]float32, error)
		for form, ref := range r.refs32 {
			runs = append(runs, func(in [][]float32) ([]float32, error) {
				if memo[form] == nil {
					o32, l32, err := ref(in)
					if err != nil {
						return nil, err
					}
					memo[form] = [][]float32{o32, l32}
				}
				return memo[form][which], nil
			})
		}
		return runs
	}
	suite.Check[T, E](t, f, name, conv, suite.Output{Name: "output", Dims: outDims, Shape: outShape, Ref: out, Got: compare.Widen(gotOut)},
		r.inputs, low(0)...)
	if !r.lse {
		return
	}
	lf := f // the log-sum-exp of a float32 kernel is float32 whatever its inputs
	if suite.Is32[E]() {
		lf = compare.Float32
	}
	suite.Check[T, E](t, lf, name, conv, suite.Output{Name: "log-sum-exp", Dims: lseDims, Shape: lseShape, Ref: lse, Got: compare.Widen(gotLSE)},
		r.inputs, low(1)...)
}
