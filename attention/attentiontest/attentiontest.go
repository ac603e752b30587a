package attentiontest

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/ops"
	"github.com/plumbref/plumb/posenc"
)

// Masking is the visibility pattern of a case.
type Masking int

const (
	// NoMask: every query sees every key (the zero value).
	NoMask Masking = iota
	// Causal: query i sees key j iff j ≤ p(i).
	Causal
	// SlidingWindow: query i sees the Window keys ending at itself,
	// p(i) − Window < j ≤ p(i) (mask.Window; the query counts).
	SlidingWindow
)

var maskingWords = vocab.New("attentiontest", "masking", "the visibility pattern of a suite case", nil,
	vocab.W(NoMask, "none", "every query sees every key"),
	vocab.W(Causal, "causal", "query i sees keys j ≤ p(i)"),
	vocab.W(SlidingWindow, "window", "query i sees the Window keys ending at itself"),
)

// String returns m's word ("none").
func (m Masking) String() string { return maskingWords.String(m) }

// MarshalText returns m's word; a value with none is an error.
func (m Masking) MarshalText() ([]byte, error) { return maskingWords.Marshal(m) }

// UnmarshalText sets m from its word; any other text is an error that lists the words.
func (m *Masking) UnmarshalText(b []byte) error { return maskingWords.Unmarshal(m, b) }

// Meaning returns one line saying what m means.
func (m Masking) Meaning() string { return maskingWords.Meaning(m) }

// Values lists every Masking, the zero value first.
func (Masking) Values() []Masking { return maskingWords.Values() }

// Check returns nil if m is one of the Masking constants, or an error
// that lists the words.
func (m Masking) Check() error { return maskingWords.Check(m) }

// Problem is one attention call as the suite poses it to a kernel: the
// shape, every convention, and what the kernel must do to q and k before
// the dot product.
//
// The kernel computes, for query head h of batch entry b and query i,
//
//	q′ = rotary(q[b,h,i], p(i)),  k′_j = rotary(k[b,kv(h),j], j)   (when Rotary is set)
//	s_j = Scale · q′·k′_j,  then SoftCap·tanh(s_j/SoftCap) when SoftCap > 0
//	hidden keys (Masking, KeyLengths) get −Inf
//	out = Σ_j softmax(s)_j v[b,kv(h),j],  lse = log Σ_j e^{s_j}
//
// with p(i) = a + Offset + i, a = Lk − Lq (mask.AlignEnd) or 0
// (mask.AlignStart): see QueryPosition. Rows that see no key follow
// EmptyRow. Q, K, V and the output are laid out as Layout says, the
// log-sum-exp as [Batch, HeadsQ, Lq] (HeadsMajor) or [Batch, Lq, HeadsQ]
// (SeqMajor), as attention.Forward returns them.
type Problem struct {
	Shape  attention.Shape
	Layout attention.Layout
	Group  attention.GroupMap
	Mask   Masking
	// Window is the number of keys a query sees under SlidingWindow.
	Window int
	// KeyLengths, when not nil, hides keys j ≥ KeyLengths[b] in batch
	// entry b (padding); a length of 0 leaves the entry's rows empty.
	KeyLengths []int
	Align      mask.Align
	Offset     int
	// Scale multiplies q·k; always set (1/√Dk unless a case says otherwise).
	Scale   float64
	SoftCap float64
	// Rotary, when not nil, is the rotary encoding to apply to q (at
	// query positions p(i)) and k (at key positions j) inside the kernel;
	// Rotary.Dim is Dk. The kernel computes its own tables.
	Rotary   *posenc.Rotary
	EmptyRow attention.EmptyRow
}

// QueryPosition is p(i), the key position of query i, used by the mask
// and by the rotary encoding of q.
func (p Problem) QueryPosition(i int) int {
	return mask.Geometry{Batch: p.Shape.Batch, Lq: p.Shape.Lq, Lk: p.Shape.Lk, Align: p.Align, Offset: p.Offset}.Pos(i)
}

// String lists the problem's shape and then each convention by its key
// and word, as failure messages print them:
//
//	batch 1, 8 query heads on 2 kv heads, Lq 40, Lk 40, Dk 16, Dv 16,
//	layout seq-major, group blocks, mask window of 7 keys, align end,
//	offset 0, scale 0.25, pairing halves, rotated 16 of 16 dims,
//	base 10000, empty_row zero
//
// (one line); key lengths and soft_cap appear when set, "no rotary" when
// Rotary is nil.
func (p Problem) String() string {
	s := p.Shape
	parts := []string{
		fmt.Sprintf("batch %d, %d query heads on %d kv heads, Lq %d, Lk %d, Dk %d, Dv %d", s.Batch, s.HeadsQ, s.HeadsKV, s.Lq, s.Lk, s.Dk, s.Dv),
		"layout " + p.Layout.String(), "group " + p.Group.String(), "mask " + p.Mask.String(),
	}
	if p.Mask == SlidingWindow {
		parts[len(parts)-1] += fmt.Sprintf(" of %d keys", p.Window)
	}
	if p.KeyLengths != nil {
		parts = append(parts, fmt.Sprintf("key lengths %v", p.KeyLengths))
	}
	parts = append(parts, "align "+p.Align.String(), fmt.Sprintf("offset %d", p.Offset), fmt.Sprintf("scale %.6g", p.Scale))
	if p.SoftCap > 0 {
		parts = append(parts, fmt.Sprintf("soft_cap %g", p.SoftCap))
	}
	if r := p.Rotary; r != nil {
		parts = append(parts, fmt.Sprintf("pairing %v, rotated %d of %d dims, base %g", r.Pairing, r.Rotated, r.Dim, r.Base))
	} else {
		parts = append(parts, "no rotary")
	}
	return strings.Join(append(parts, "empty_row "+p.EmptyRow.String()), ", ")
}

// Supports declares what a kernel implements. The convention lists
// (Layouts, Groups, Pairings) multiply the cases: every case runs once for
// each declared layout, each declared group map (cases with grouped heads)
// and each declared pairing (cases that rotate). An empty list means the
// zero value alone (HeadsMajor, GroupBlocks) and, for Pairings, a kernel
// without rotary: the cases that rotate are then posed without it, except
// those about rotary itself, which are skipped.
// A case that needs something else not declared is skipped with a message
// naming it.
type Supports struct {
	Layouts  []attention.Layout
	Groups   []attention.GroupMap
	Pairings []posenc.Pairing
	// Masks lists the masks supported; empty means NoMask alone.
	Masks []Masking
	// AlignStart: the kernel places queries with mask.AlignStart as well
	// as mask.AlignEnd (always required).
	AlignStart bool
	// Offset: a query position offset other than 0.
	Offset bool
	// UnequalLengths: Lq ≠ Lk (decode, chunked prefill, cross attention).
	UnequalLengths bool
	// KeyPadding: Problem.KeyLengths.
	KeyPadding bool
	// ValueDim: Dv ≠ Dk.
	ValueDim bool
	// PartialRotary: Rotary.Rotated < Dim.
	PartialRotary bool
	// RotaryRequired: the kernel always rotates; cases without rotary are
	// skipped.
	RotaryRequired bool
	// SoftCap: logit soft-capping.
	SoftCap bool
	// LSE: the kernel returns the log-sum-exp, which is then checked.
	LSE bool
	// EmptyRow is what the kernel gives for a row that sees no key.
	EmptyRow attention.EmptyRow
}

// Kernel is an attention kernel under test, with float32 (E = float32)
// or float64 (E = float64) inputs and outputs.
type Kernel[E compare.Float] struct {
	// Forward computes out (and lse, when Supports.LSE) for p. q, k and v
	// hold values of Format; they must not be modified.
	Forward func(q, k, v []E, p Problem) (out, lse []E, err error)
	// Format is the number format the kernel stores its inputs and output
	// in: Float32 (what the zero value means for a float32 kernel),
	// BFloat16, Binary16, E4M3 or E5M2 for a float32 kernel, Float64 for
	// a float64 kernel. A float32 kernel's output is judged with the
	// yardstick in this format, its log-sum-exp in Float32.
	Format   compare.Format
	Supports Supports
}

// missing lists what p needs that s does not declare.
func (s Supports) missing(p Problem) []string {
	var m []string
	need := func(ok bool, what string) {
		if !ok {
			m = append(m, what)
		}
	}
	need(p.Mask == NoMask || slices.Contains(s.Masks, p.Mask), fmt.Sprintf("mask %v (Masks)", p.Mask))
	need(p.Align == mask.AlignEnd || s.AlignStart, "align start (AlignStart)")
	need(p.Offset == 0 || s.Offset, "a query position offset (Offset)")
	need(p.Shape.Lq == p.Shape.Lk || s.UnequalLengths, "Lq ≠ Lk (UnequalLengths)")
	need(p.KeyLengths == nil || s.KeyPadding, "key padding (KeyPadding)")
	need(p.Shape.Dv == p.Shape.Dk || s.ValueDim, "Dv ≠ Dk (ValueDim)")
	need(p.SoftCap == 0 || s.SoftCap, "soft-capping (SoftCap)")
	if p.Rotary != nil {
		need(len(s.Pairings) > 0, "rotary (Pairings)")
		need(p.Rotary.Rotated == p.Rotary.Dim || s.PartialRotary, "partial rotary (PartialRotary)")
	} else {
		need(!s.RotaryRequired, "attention without rotary (RotaryRequired is set)")
	}
	return m
}

// Run runs every case of Cases against the kernel, each as a subtest
// named case/layout[/group][/pairing], and judges the output (and the
// log-sum-exp, when declared) against plumb's float64 reference:
// posenc.Rotary.Apply on q and k, then attention.Forward.
//
// A float32 kernel is held to the yardstick of compare.MeasureYardstick
// with factor compare.DefaultK = 2, measured on each case by
// attention.Forward32 and by attention.ForwardFast32 (after
// posenc.Rotary.Apply32) on the same inputs in the kernel's Format, the
// larger bound of the two. A float64 kernel is held to an explicit tolerance:
// 1e-12 normwise and 1e-12 times the largest reference magnitude per
// element. A failure names the case, the problem's conventions, the output
// and its worst elements, and names the file holding compare.Diff's whole
// report (see the package documentation). Cases the
// kernel does not support are skipped with a message naming what they need.
//
// Inputs are standard normal unless a case says otherwise, drawn from a
// generator seeded by the subtest's name, rounded to the kernel's Format;
// the reference is computed on the rounded values.
//
// Special cases are:
//
//	Kernel.Forward nil                    the test fails at once, saying so
//	an invalid Format                     the test fails at once, saying so
//	a case needing an undeclared option   its subtest is skipped, with a message naming the option
//	the kernel returns an error           that subtest fails, quoting the error
//	an output of the wrong length         that subtest fails, naming both lengths
//	NaN or ±Inf in the reference          the kernel must give the same (NaN for NaN, the same infinity)
func Run[T conformance.TB[T], E compare.Float](t T, k Kernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "attentiontest", k.Forward != nil, "Kernel.Forward is nil", k.Format,
		Cases(), func(c Case) string { return c.Name }, k.Supports.variants,
		func(t T, f compare.Format, c Case, p Problem, r *rand.Rand) { runCase(t, k, f, c, p, r) })
}

// variants expands a case into one problem per declared layout, group map
// (grouped cases only) and pairing (rotating cases only), each named by
// their words: layout[/group][/pairing].
func (s Supports) variants(c Case) []suite.Variant[Problem] {
	or := func(xs []attention.Layout) []attention.Layout {
		if len(xs) == 0 {
			return []attention.Layout{attention.HeadsMajor}
		}
		return xs
	}
	groups := []attention.GroupMap{attention.GroupBlocks}
	if sh := c.Problem.Shape; sh.HeadsKV > 1 && sh.HeadsKV < sh.HeadsQ && len(s.Groups) > 0 {
		groups = s.Groups
	}
	pairings := []posenc.Pairing{-1} // no rotary
	if c.Problem.Rotary != nil {
		switch {
		case len(s.Pairings) > 0:
			pairings = s.Pairings
		case c.rotaryOnly:
			pairings = []posenc.Pairing{posenc.PairAdjacent} // skipped: the kernel has no rotary
		}
	}
	var vs []suite.Variant[Problem]
	for _, l := range or(s.Layouts) {
		for _, g := range groups {
			for _, pr := range pairings {
				p := c.Problem
				p.Layout, p.Group, p.EmptyRow = l, g, s.EmptyRow
				name := l.String()
				if sh := p.Shape; sh.HeadsKV > 1 && sh.HeadsKV < sh.HeadsQ {
					name += "/" + g.String()
				}
				if pr < 0 {
					p.Rotary = nil
				}
				if p.Rotary != nil {
					r := *p.Rotary
					r.Pairing = pr
					p.Rotary = &r
					name += "/" + pr.String()
				}
				vs = append(vs, suite.Variant[Problem]{Name: name, Problem: p, Missing: s.missing(p)})
			}
		}
	}
	return vs
}

func runCase[T conformance.TB[T], E compare.Float](t T, k Kernel[E], f compare.Format, c Case, p Problem, rng *rand.Rand) {
	t.Helper()
	q, kk, vv := c.draw(rng, p)
	q, kk, vv = f.RoundSlice(q), f.RoundSlice(kk), f.RoundSlice(vv)

	out, lse, err := reference(p, q, kk, vv, posenc.Rotary.Apply, attention.Forward)
	if err != nil {
		t.Errorf("case %s (%s): the reference refused the problem: %v", c.Name, p, err)
		return
	}
	gotOut, gotLSE, err := k.Forward(num.Convert[E](q), num.Convert[E](kk), num.Convert[E](vv), p)
	if err != nil {
		t.Errorf("case %s (%s): the kernel returned an error: %v", c.Name, p, err)
		return
	}
	outShape, lseShape, outDims, lseDims := shapes(p)
	inputs := [][]float64{q, kk, vv}
	// The yardsticks: the direct and the blocked float32 forms, each run
	// once per subtest (the output's and the log-sum-exp's yardsticks see
	// the same inputs).
	type result struct {
		out, lse []float32
		err      error
	}
	forms := []func(q, k, v []float32, s attention.Shape, o attention.Options) ([]float32, []float32, error){attention.Forward32, attention.ForwardFast32}
	memo := map[int]*result{}
	low := func(form int, lse bool) func(in [][]float32) ([]float32, error) {
		return func(in [][]float32) ([]float32, error) {
			r := memo[form]
			if r == nil {
				r = &result{}
				r.out, r.lse, r.err = reference(p, in[0], in[1], in[2], posenc.Rotary.Apply32, forms[form])
				memo[form] = r
			}
			if lse {
				return r.lse, r.err
			}
			return r.out, r.err
		}
	}
	conv := p.String()
	pose := suite.Once(func() *suite.Pose {
		got := ops.Tensors{"out": suite.Tensor(compare.Widen(gotOut), outShape...)}
		if k.Supports.LSE {
			got["lse"] = suite.Tensor(compare.Widen(gotLSE), lseShape...)
		}
		return p.pose(q, kk, vv, got)
	})
	suite.Check[T, E](t, f, c.Name, conv, suite.Output{Name: "output", Dims: outDims, Shape: outShape, Ref: out, Got: compare.Widen(gotOut), Pose: pose},
		inputs, low(0, false), low(1, false))
	if !k.Supports.LSE {
		return
	}
	lf := f // the log-sum-exp of a float32 kernel is float32 whatever its inputs
	if suite.Is32[E]() {
		lf = compare.Float32
	}
	suite.Check[T, E](t, lf, c.Name, conv, suite.Output{Name: "log-sum-exp", Dims: lseDims, Shape: lseShape, Ref: lse, Got: compare.Widen(gotLSE), Pose: pose},
		inputs, low(0, true), low(1, true))
}

// shapes returns the shapes of the output and the log-sum-exp in p's
// layout, and the names of their dimensions.
func shapes(p Problem) (out, lse []int, outDims, lseDims string) {
	s := p.Shape
	if p.Layout == attention.SeqMajor {
		return []int{s.Batch, s.Lq, s.HeadsQ, s.Dv}, []int{s.Batch, s.Lq, s.HeadsQ},
			"[batch, query, head, dim]", "[batch, query, head]"
	}
	return []int{s.Batch, s.HeadsQ, s.Lq, s.Dv}, []int{s.Batch, s.HeadsQ, s.Lq},
		"[batch, head, query, dim]", "[batch, head, query]"
}

// Options returns the attention.Options of p (without the rotary
// encoding, which the reference applies to q and k before
// attention.Forward), or the mask package's error for a Window below 1 or
// bad KeyLengths.
func (p Problem) Options() (attention.Options, error) {
	m, err := mask.Full(), error(nil)
	switch p.Mask {
	case Causal:
		m = mask.Causal()
	case SlidingWindow:
		m, err = mask.Window(p.Window)
	}
	if err == nil && p.KeyLengths != nil {
		var pad mask.Mask
		if pad, err = mask.KeyPadding(p.KeyLengths); err == nil {
			m, err = mask.Intersect(m, pad)
		}
	}
	return attention.Options{Layout: p.Layout, Group: p.Group, Mask: m, Align: p.Align, Offset: p.Offset,
		Scale: p.Scale, SoftCap: p.SoftCap, EmptyRow: p.EmptyRow}, err
}

// pose returns p as the operation attention-forward of package ops, with
// got the kernel's outputs ("out", and "lse" when judged), for the diagnosis of a failing
// kernel: every convention of p by its key, q and k rotated by the
// reference when p has a rotary encoding (attention-forward has none, so
// the encoding itself is not searched). It returns nil when the reference
// rotary encoding refuses q or k.
func (p Problem) pose(q, k, v []float64, got ops.Tensors) *suite.Pose {
	s := p.Shape
	words := map[string]string{
		"layout": "Problem.Layout, Supports.Layouts", "group": "Problem.Group, Supports.Groups",
		"align": "Problem.Align, Supports.AlignStart", "offset": "Problem.Offset", "scale": "Problem.Scale",
		"soft_cap": "Problem.SoftCap", "empty_row": "Supports.EmptyRow",
	}
	var masks []any
	switch p.Mask {
	case Causal:
		masks = append(masks, map[string]any{"kind": "causal"})
	case SlidingWindow:
		masks = append(masks, map[string]any{"kind": "window", "size": p.Window})
		words["mask[0].size"] = "Problem.Window"
	}
	if len(masks) > 0 {
		words["mask[0]"], words["mask[0].kind"] = "Problem.Mask, Supports.Masks", "Problem.Mask, Supports.Masks"
	}
	if p.KeyLengths != nil {
		words[fmt.Sprintf("mask[%d].valid", len(masks))] = "Problem.KeyLengths"
		masks = append(masks, map[string]any{"kind": "key-padding", "valid": p.KeyLengths})
	}
	cfg := map[string]any{"layout": p.Layout.String(), "group": p.Group.String(), "align": p.Align.String(),
		"offset": p.Offset, "scale": p.Scale, "empty_row": p.EmptyRow.String()}
	if masks != nil {
		cfg["mask"] = masks
	}
	if p.SoftCap > 0 {
		cfg["soft_cap"] = p.SoftCap
	}
	unsearched := ""
	if r := p.Rotary; r != nil {
		var err error
		if q, err = posenc.Rotary.Apply(*r, q, 1, posenc.Positions{List: rowPositions(p, true)}); err != nil {
			return nil
		}
		if k, err = posenc.Rotary.Apply(*r, k, 1, posenc.Positions{List: rowPositions(p, false)}); err != nil {
			return nil
		}
		unsearched = "q and k were posed rotated by the reference: the rotary encoding, Problem.Rotary and Supports.Pairings, is not searched"
	}
	part := ""
	if len(q)+len(k)+len(v) > poseElements {
		var cut Problem
		cut, q, k, v, got, part = p.cut(q, k, v, got)
		if cut.KeyLengths != nil {
			words[fmt.Sprintf("mask[%d].valid", len(masks)-1)] = "Problem.KeyLengths"
			masks[len(masks)-1] = map[string]any{"kind": "key-padding", "valid": cut.KeyLengths}
		}
		s = cut.Shape
	}
	shape := func(h, l, d int) []int {
		if p.Layout == attention.SeqMajor {
			return []int{s.Batch, l, h, d}
		}
		return []int{s.Batch, h, l, d}
	}
	in := ops.Tensors{"q": suite.Tensor(q, shape(s.HeadsQ, s.Lq, s.Dk)...), "k": suite.Tensor(k, shape(s.HeadsKV, s.Lk, s.Dk)...),
		"v": suite.Tensor(v, shape(s.HeadsKV, s.Lk, s.Dv)...)}
	ps := suite.NewPose("attention-forward", cfg, in, got, words)
	if ps != nil {
		ps.Unsearched, ps.Part = unsearched, part
	}
	return ps
}

// poseElements and poseQueries bound the problem a diagnosis is posed:
// a problem of more input elements is posed on its first batch entry and
// at most poseQueries of its queries, so that the search, which runs each
// candidate on what it is given, costs a few checks of a small case.
const poseElements, poseQueries = 1 << 14, 16

// cut returns p, its rotated q and k, v and the kernel's outputs got cut
// to the first batch entry and the last poseQueries queries (AlignEnd; the
// first under AlignStart): the cut queries keep their positions, so the
// configuration is unchanged, and the outputs are the kernel's rows for
// them. part says what was kept.
func (p Problem) cut(q, k, v []float64, got ops.Tensors) (Problem, []float64, []float64, []float64, ops.Tensors, string) {
	s := p.Shape
	n, first := min(s.Lq, poseQueries), 0
	if p.Align == mask.AlignEnd {
		first = s.Lq - n
	}
	c := p
	c.Shape.Batch, c.Shape.Lq = 1, n
	if p.KeyLengths != nil {
		c.KeyLengths = p.KeyLengths[:1]
	}
	// rows returns the rows of x (of width w per head) of batch entry 0
	// and queries first … first+n−1, each row holding heads·w values.
	rows := func(x []float64, heads, L, w int) []float64 {
		var out []float64
		if p.Layout == attention.SeqMajor {
			return append(out, x[first*heads*w:(first+n)*heads*w]...)
		}
		for h := 0; h < heads; h++ {
			out = append(out, x[(h*L+first)*w:(h*L+first+n)*w]...)
		}
		return out
	}
	out, lse, _, _ := shapes(c)
	cutGot := ops.Tensors{}
	for name, t := range got {
		if name == "lse" {
			cutGot[name] = suite.Tensor(rows(t.Data, s.HeadsQ, s.Lq, 1), lse...)
		} else {
			cutGot[name] = suite.Tensor(rows(t.Data, s.HeadsQ, s.Lq, s.Dv), out...)
		}
	}
	kv := func(x []float64) []float64 { return x[:len(x)/s.Batch] }
	part := fmt.Sprintf("batch entry 0 of %d, queries %d–%d of %d", s.Batch, first, first+n-1, s.Lq)
	return c, rows(q, s.HeadsQ, s.Lq, s.Dk), kv(k), kv(v), cutGot, part
}

// rowPositions returns the position of every row of Dk values of q
// (queries) or k in p's layout.
func rowPositions(p Problem, queries bool) []int {
	s := p.Shape
	heads, L := s.HeadsKV, s.Lk
	if queries {
		heads, L = s.HeadsQ, s.Lq
	}
	pos := make([]int, s.Batch*heads*L)
	for r := range pos {
		l := r % L
		if p.Layout == attention.SeqMajor {
			l = (r / heads) % L
		}
		if queries {
			l = p.QueryPosition(l)
		}
		pos[r] = l
	}
	return pos
}

// reference computes p in the arithmetic E: the rotary encoding, then
// attention. With posenc.Rotary.Apply and attention.Forward it is the
// reference; with Apply32 and Forward32 the yardstick.
func reference[E float32 | float64](p Problem, q, k, v []E,
	apply func(posenc.Rotary, []E, int, posenc.Positions) ([]E, error),
	forward func(q, k, v []E, s attention.Shape, o attention.Options) ([]E, []E, error)) (out, lse []E, err error) {
	if p.Rotary != nil && len(q) > 0 {
		if q, err = apply(*p.Rotary, q, 1, posenc.Positions{List: rowPositions(p, true)}); err != nil {
			return nil, nil, err
		}
	}
	if p.Rotary != nil && len(k) > 0 {
		if k, err = apply(*p.Rotary, k, 1, posenc.Positions{List: rowPositions(p, false)}); err != nil {
			return nil, nil, err
		}
	}
	o, err := p.Options()
	if err != nil {
		return nil, nil, err
	}
	out, lse, err = forward(q, k, v, p.Shape, o)
	return out, lse, err
}

// sqrt is math.Sqrt.
func sqrt(x float64) float64 { return math.Sqrt(x) }

// defaultScale is 1/√d.
func defaultScale(d int) float64 { return 1 / math.Sqrt(float64(d)) }
