package ops

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// ErrRows: a row sample that does not fit the operation (a row out of
// range, an empty or duplicated list, more rows than there are), or an
// operation whose rows cannot be sampled.
var ErrRows = errors.New("ops: invalid row sample")

// Rows is a row sample of an operation: the indices, ascending and
// distinct, of the rows of its outputs a check judges, among Total.
// Edges of them were forced in (the first and last rows and those at
// every mask edge, see RowEdges); the others were drawn uniformly without
// replacement from the Total − Edges remaining rows, or, when Drawn is
// false, given by the caller.
type Rows struct {
	Total int
	Index []int
	Edges int
	Drawn bool
}

// RowsOf is the sample of the rows list among total, sorted. A row out of
// [0, total), an empty list or a row listed twice is an error wrapping
// ErrRows; the argument is named where, as the caller spells it (a flag).
func RowsOf(where string, total int, list []int) (Rows, error) {
	if len(list) == 0 {
		return Rows{}, fmt.Errorf("%w: %s is empty; want at least one row in [0, %d)", ErrRows, where, total)
	}
	idx := slices.Clone(list)
	for _, r := range idx {
		if r < 0 || r >= total {
			return Rows{}, fmt.Errorf("%w: %s holds row %d; want rows in [0, %d)", ErrRows, where, r, total)
		}
	}
	slices.Sort(idx)
	for i := 1; i < len(idx); i++ {
		if idx[i] == idx[i-1] {
			return Rows{}, fmt.Errorf("%w: %s holds row %d twice; want each row once", ErrRows, where, idx[i])
		}
	}
	return Rows{Total: total, Index: idx}, nil
}

// DrawRows draws a sample of total rows: every row of edges (rows outside
// [0, total) are dropped, duplicates merged), and n more drawn uniformly
// without replacement from the others with plumb's generator
// (gen.Uniform(seed, n, 0, 1), one value a row, by Floyd's algorithm: for
// j = m−n … m−1, t = ⌊u·(j+1)⌋, take t, or j when t is taken; m the number
// of rows that are not edges). n larger than m takes them all; n < 0 is an
// error wrapping ErrRows, named where.
func DrawRows(where string, total, n int, seed uint64, edges []int) (Rows, error) {
	if n < 0 {
		return Rows{}, fmt.Errorf("%w: %s = %d; want a count ≥ 0", ErrRows, where, n)
	}
	if total <= 0 {
		return Rows{}, fmt.Errorf("%w: %s: the operation has %d rows; want at least one", ErrRows, where, total)
	}
	var e []int
	for _, r := range edges {
		if r >= 0 && r < total {
			e = append(e, r)
		}
	}
	slices.Sort(e)
	e = slices.Compact(e)
	m := total - len(e)
	n = min(n, m)
	u, err := gen.Uniform(seed, n, 0, 1)
	if err != nil {
		return Rows{}, fmt.Errorf("%w: %s = %d (%w)", ErrRows, where, n, err)
	}
	taken := make(map[int]bool, n)
	for i, j := 0, m-n; j < m; i, j = i+1, j+1 {
		t := min(int(u[i]*float64(j+1)), j)
		if taken[t] {
			t = j
		}
		taken[t] = true
	}
	idx := slices.Clone(e)
	for t := range taken {
		// the t-th row (from 0) that is not an edge
		x := t
		for _, r := range e {
			if r <= x {
				x++
			}
		}
		idx = append(idx, x)
	}
	slices.Sort(idx)
	return Rows{Total: total, Index: idx, Edges: len(e), Drawn: true}, nil
}

// MissProbability is the probability that n rows drawn uniformly without
// replacement from r miss every one of bad rows: C(r − bad, n) / C(r, n),
// computed as the product ∏_{j<n} (r − bad − j)/(r − j) (elementary
// combinatorics: the number of n-subsets avoiding the bad rows over the
// number of all n-subsets), 0 when n > r − bad.
func MissProbability(r, n, bad int) float64 {
	if bad <= 0 || n <= 0 {
		return 1
	}
	if n > r-bad {
		return 0
	}
	// log form of the product, summed, so that no factor underflows first
	s := 0.0
	for j := 0; j < n; j++ {
		s += math.Log1p(-float64(bad) / float64(r-j))
	}
	return math.Exp(s)
}

// SlipMiss is, for the sample s, the probability that a slip confined to
// a fraction f of its rows (⌈f·Total⌉ rows, none of them an edge row) is
// missed by the drawn rows: MissProbability(Total − Edges, drawn,
// ⌈f·Total⌉). It is NaN for a sample that was not drawn.
func (s Rows) SlipMiss(f float64) float64 {
	if !s.Drawn {
		return math.NaN()
	}
	bad := int(math.Ceil(f * float64(s.Total)))
	return MissProbability(s.Total-s.Edges, len(s.Index)-s.Edges, bad)
}

// rowForm says how an operation's outputs split into rows: the rows of
// its row-indexed inputs and outputs lie along one axis (axis of the
// shapes as given); the other inputs are whole.
type rowForm struct {
	total int
	// in and out name the row axis of each row-indexed tensor.
	in, out map[string]int
	// perRow: each row runs as a problem of its own (attention, at its
	// true position); otherwise the sample runs as one problem.
	perRow bool
	// edges are the rows the configuration makes edges.
	edges []int
}

// rowWise are the operations every row of whose outputs is a function of
// the same row of x alone (along the last dimension).
var rowWise = map[string][]string{
	"softmax":           {"y"},
	"logsumexp":         {"lse"},
	"rmsnorm-forward":   {"y"},
	"layernorm-forward": {"y"},
	"activation":        {"y"},
	"ffn-forward":       {"y"},
}

// RowOperations lists the operations that take a row sample.
func RowOperations() []string {
	names := []string{"attention-forward"}
	for n := range rowWise {
		names = append(names, n)
	}
	slices.Sort(names)
	return names
}

// formOf is the row form of the operation on in; s, when not nil, is the
// sample, and a row-indexed input whose row axis has its length is taken
// as already cut to it (the geometry is then that of s.Total rows).
func formOf(fn, name string, config []byte, in Tensors, s *Rows) (*rowForm, error) {
	cutTo := func(rows int) int {
		if s != nil && rows != s.Total && rows == len(s.Index) {
			return s.Total
		}
		return rows
	}
	if outs, ok := rowWise[name]; ok {
		x, ok := in["x"]
		if !ok || len(x.Shape) == 0 {
			return nil, fmt.Errorf("%w: %s: %s: input \"x\" is missing or a scalar; want rows [..., n]", ErrRows, fn, name)
		}
		// x viewed as [rows, last]
		rows := 1
		for _, d := range x.Shape[:len(x.Shape)-1] {
			rows *= d
		}
		rows = cutTo(rows)
		f := &rowForm{total: rows, in: map[string]int{"x": 0}, out: map[string]int{}}
		for _, o := range outs {
			f.out[o] = 0
		}
		f.edges = []int{0, rows - 1}
		return f, nil
	}
	if name != "attention-forward" {
		return nil, fmt.Errorf("%w: %s: operation %q has no row form; want one of %v", ErrRows, fn, name, RowOperations())
	}
	c := new(attentionForwardConfig)
	o, _ := lookup(fn, name)
	if err := decodeConfig(name, config, c, o.Keys()); err != nil {
		return nil, err
	}
	sh, err := shapeOf(in, c.Layout, "q", "k", "v")
	if err != nil {
		return nil, within(err, name)
	}
	sh.Lq = cutTo(sh.Lq)
	ax := 2
	if c.Layout == attention.SeqMajor {
		ax = 1
	}
	f := &rowForm{total: sh.Lq, in: map[string]int{"q": ax}, out: map[string]int{"out": ax, "lse": ax}}
	if in.has("bias") {
		f.in["bias"] = 2
	}
	g := mask.Geometry{Lq: sh.Lq, Lk: sh.Lk, Align: c.Align, Offset: c.Offset}
	base := g.Pos(0)
	f.perRow = true
	f.edges = attentionEdges(c.Mask, sh.Lq, sh.Lk, base)
	return f, nil
}

// attentionEdges are the query rows at the edges the masks imply: the
// first and last rows, and the rows whose key position p = base + i is at
// or beside a boundary: p = 0 and p = Lk − 1 (causal diagonal), the band's
// ends, the window's first full row, the prefix's end, every packed
// sequence start.
func attentionEdges(specs []mask.Spec, lq, lk, base int) []int {
	pos := []int{0, lk - 1}
	for _, m := range specs {
		switch m.Kind {
		case mask.KindBand:
			if m.Before >= 0 {
				pos = append(pos, m.Before)
			}
			if m.After >= 0 {
				pos = append(pos, lk-1-m.After)
			}
		case mask.KindWindow:
			pos = append(pos, m.Size-1)
		case mask.KindPrefix:
			pos = append(pos, m.Length)
		case mask.KindPacked:
			pos = append(pos, m.Offsets...)
		}
	}
	edges := []int{0, lq - 1}
	for _, p := range pos {
		for _, q := range []int{p - 1, p, p + 1} {
			if i := q - base; i >= 0 && i < lq {
				edges = append(edges, i)
			}
		}
	}
	slices.Sort(edges)
	return slices.Compact(edges)
}

// RowCount is the number of rows of the operation name on the inputs in
// (their shapes alone are read), and RowEdges the rows its configuration
// makes edges, which a drawn sample always includes: the first and last
// rows; for attention-forward, the query rows at and beside the causal
// diagonal's ends (key positions 0 and Lk − 1), a band's ends, a window's
// first full row (position size − 1), a prefix's end and every packed
// sequence start, each at the rows' true positions (align, offset).
func RowCount(name string, config []byte, in Tensors) (int, []int, error) {
	f, err := formOf("RowCount", name, config, in, nil)
	if err != nil {
		return 0, nil, err
	}
	return f.total, f.edges, nil
}

// RunRows runs the float64 reference of the operation name on the rows
// of s alone and returns those rows of its outputs: each row-indexed
// output has the length of the sample, len(s.Index), on its row axis
// (attention's query axis; the first axis of the others, which the
// outputs take as [n, ...] with the row dimensions flattened). in holds
// the whole inputs, or the row-indexed inputs already cut to the sample
// (RowInputs: a row axis of length len(s.Index) ≠ s.Total), which is all a
// caller short of memory needs to read of them. The rows are the same bits as those of Run on the whole
// problem (TestRunRowsSameBits): attention runs each query row alone at
// its true position (the configuration's align and offset rewritten to
// put it there), and the row-wise operations run on the sampled rows.
func RunRows(name string, config []byte, in Tensors, s Rows) (Tensors, error) {
	return runRows("RunRows", name, config, in, s, false)
}

// RunRows32 is RunRows for Run32: the float32 instantiation on the rows.
func RunRows32(name string, config []byte, in Tensors, s Rows) (Tensors, error) {
	return runRows("RunRows32", name, config, in, s, true)
}

// RowInputs cuts the row-indexed inputs of in to the rows of s (the other
// inputs stay whole): the inputs RunRows needs, and what a caller short of
// memory reads alone.
func RowInputs(name string, config []byte, in Tensors, s Rows) (Tensors, error) {
	f, err := formOf("RowInputs", name, config, in, &s)
	if err != nil {
		return nil, err
	}
	if err := sampleFits("RowInputs", f, s); err != nil {
		return nil, err
	}
	return cutInputs(f, in, s), nil
}

// RowAxes returns, for the operation, the row axis of each row-indexed
// input and output, and the number of rows.
func RowAxes(name string, config []byte, in Tensors) (inputs, outputs map[string]int, total int, err error) {
	f, err := formOf("RowAxes", name, config, in, nil)
	if err != nil {
		return nil, nil, 0, err
	}
	return f.in, f.out, f.total, nil
}

func sampleFits(fn string, f *rowForm, s Rows) error {
	if s.Total != f.total {
		return fmt.Errorf("%w: %s: the sample is of %d rows; the operation has %d", ErrRows, fn, s.Total, f.total)
	}
	if len(s.Index) == 0 {
		return fmt.Errorf("%w: %s: the sample is empty; want at least one row", ErrRows, fn)
	}
	for i, r := range s.Index {
		if r < 0 || r >= s.Total || (i > 0 && r <= s.Index[i-1]) {
			return fmt.Errorf("%w: %s: the sample's row %d is %d; want ascending distinct rows in [0, %d)", ErrRows, fn, i, r, s.Total)
		}
	}
	return nil
}

// cutInputs cuts the row-indexed inputs of in to the sample (rows flattened
// for the row-wise operations); an input already cut is kept.
func cutInputs(f *rowForm, in Tensors, s Rows) Tensors {
	cut := Tensors{}
	for n, t := range in {
		ax, ok := f.in[n]
		if !ok {
			cut[n] = t
			continue
		}
		shape := t.Shape
		if !f.perRow {
			shape = []int{len(t.Data) / max(t.Shape[len(t.Shape)-1], 1), t.Shape[len(t.Shape)-1]}
		}
		if shape[ax] == len(s.Index) && shape[ax] != s.Total {
			cut[n] = Tensor{Shape: shape, Data: t.Data}
			continue
		}
		cut[n] = GatherAxis(Tensor{Shape: shape, Data: t.Data}, ax, s.Index)
	}
	return cut
}

// GatherAxis returns the entries idx of t along axis ax.
func GatherAxis(t Tensor, ax int, idx []int) Tensor {
	outer, inner := 1, 1
	for _, d := range t.Shape[:ax] {
		outer *= d
	}
	for _, d := range t.Shape[ax+1:] {
		inner *= d
	}
	n := t.Shape[ax]
	shape := slices.Clone(t.Shape)
	shape[ax] = len(idx)
	data := make([]float64, 0, outer*len(idx)*inner)
	for o := 0; o < outer; o++ {
		for _, r := range idx {
			at := (o*n + r) * inner
			data = append(data, t.Data[at:at+inner]...)
		}
	}
	return Tensor{Shape: shape, Data: data}
}

// placeAxis copies piece (t's shape with 1 on axis ax) to index r of t.
func placeAxis(t Tensor, ax int, piece []float64, r int) {
	outer, inner := 1, 1
	for _, d := range t.Shape[:ax] {
		outer *= d
	}
	for _, d := range t.Shape[ax+1:] {
		inner *= d
	}
	n := t.Shape[ax]
	for o := 0; o < outer; o++ {
		copy(t.Data[(o*n+r)*inner:(o*n+r+1)*inner], piece[o*inner:(o+1)*inner])
	}
}

func runRows(fn, name string, config []byte, in Tensors, s Rows, single bool) (Tensors, error) {
	f, err := formOf(fn, name, config, in, &s)
	if err != nil {
		return nil, err
	}
	if err := sampleFits(fn, f, s); err != nil {
		return nil, err
	}
	o, _ := lookup(fn, name)
	run := o.Run
	if single {
		run = o.Run32
	}
	cut := cutInputs(f, in, s)
	if !f.perRow {
		return run(config, cut)
	}
	return attentionRows(fn, o, config, cut, f, s, single)
}

// YardstickRows is Yardstick on the rows of s: the float32 run on those
// rows (RunRows32) against ref, the reference's rows (RunRows), measured
// by compare.MeasureYardstick on the sampled inputs (RowInputs), so that
// the tolerance of a sample is that of the same rows.
func YardstickRows(name string, config []byte, in, ref Tensors, s Rows, f compare.Format, k float64) (map[string]*compare.Yardstick, error) {
	o, err := lookup("YardstickRows", name)
	if err != nil {
		return nil, err
	}
	cut, err := RowInputs(name, config, in, s)
	if err != nil {
		return nil, err
	}
	return yardstickWith(o, config, cut, ref, f, k, func(rounded Tensors) (Tensors, error) {
		return RunRows32(name, config, rounded, s)
	})
}

// attentionRows runs attention-forward on the sampled query rows of cut
// (q and bias cut to the sample), each row alone at its true position
// (align start, offset its key position) with the direct form, which
// gives the fast form's bits (TestFastFormsAreDirect): k and v are
// converted to float32 once for all rows, and the rows are spread over
// GOMAXPROCS workers, each row's result independent of the others.
func attentionRows(fn string, op Op, config []byte, cut Tensors, f *rowForm, s Rows, single bool) (Tensors, error) {
	name := op.Name()
	c := new(attentionForwardConfig)
	if err := decodeConfig(name, config, c, op.Keys()); err != nil {
		return nil, err
	}
	if err := checkInputs(name, op.Inputs(), cut); err != nil {
		return nil, err
	}
	g := mask.Geometry{Lq: f.total, Lk: cut["k"].Shape[2-boolInt(c.Layout == attention.SeqMajor)], Align: c.Align, Offset: c.Offset}
	base := g.Pos(0)
	var k32, v32 []float32
	if single {
		k32, v32 = cut.f32("k"), cut.f32("v")
		for n, t := range cut {
			if n != "k" && n != "v" {
				cut[n] = Tensor{Shape: t.Shape, Data: compare.Widen(num.Convert[float32](t.Data))}
			}
		}
	}
	n := len(s.Index)
	outs := make([]Tensors, n)
	errs := make([]error, n)
	next := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(runtime.GOMAXPROCS(0), n); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				outs[i], errs[i] = attentionRow(c, cut, f, s.Index[i], i, base+s.Index[i], k32, v32, single)
			}
		}()
	}
	for i := range n {
		next <- i
	}
	close(next)
	wg.Wait()
	out := Tensors{}
	for i, got := range outs {
		if errs[i] != nil {
			return nil, within(errs[i], fmt.Sprintf("%s: %s: row %d", fn, name, s.Index[i]))
		}
		for m, t := range got {
			ax := f.out[m]
			w, ok := out[m]
			if !ok {
				shape := slices.Clone(t.Shape)
				shape[ax] = n
				w = Tensor{Shape: shape, Data: make([]float64, len(t.Data)*n)}
				out[m] = w
			}
			placeAxis(w, ax, t.Data, i)
		}
	}
	return out, nil
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// attentionRow is row r (the i-th of the sample) alone, at key position p.
func attentionRow(c *attentionForwardConfig, cut Tensors, f *rowForm, r, i, p int, k32, v32 []float32, single bool) (Tensors, error) {
	one := Tensors{}
	for n, t := range cut {
		if ax, ok := f.in[n]; ok {
			one[n] = GatherAxis(t, ax, []int{i})
		} else {
			one[n] = t
		}
	}
	cc := *c
	cc.Align, cc.Offset = mask.AlignStart, p
	sh, o, err := cc.setup(one)
	if err != nil {
		return nil, err
	}
	o.Idiom = c.idiom()
	var out, lse []float64
	if single {
		o32, l32, err := attention.Forward32(one.f32("q"), k32, v32, sh, o)
		if err != nil {
			return nil, err
		}
		out, lse = num.Convert[float64](o32), num.Convert[float64](l32)
	} else if out, lse, err = attention.Forward(one.data("q"), one.data("k"), one.data("v"), sh, o); err != nil {
		return nil, err
	}
	os, ls := attentionShapes(sh, o)
	return Tensors{"out": {os, out}, "lse": {ls, lse}}, nil
}
