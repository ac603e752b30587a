package block

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// Dims holds the sizes of one block call. The hidden states are
// [Tokens, Width]; the attention has Heads query heads and HeadsKV
// key/value heads of HeadDim values each; the feed-forward layer has
// Hidden units; Past tokens are already in the cache.
type Dims struct {
	Tokens  int // new tokens ≥ 0
	Width   int // model width ≥ 1
	Heads   int // query heads ≥ 1
	HeadsKV int // key/value heads ≥ 1, dividing Heads
	HeadDim int // dimension of one head ≥ 1
	Hidden  int // feed-forward hidden units ≥ 1
	Past    int // tokens in the cache before this call ≥ 0
}

// Weights holds a block's parameters, each a flat row-major slice. The
// projection matrices are stored as Options.WeightOrder says: InByOut
// ([in, out], the papers' x·W) or OutByIn ([out, in], x·Wᵀ). A nil bias is
// no bias; a nil norm weight is a gain of 1.
type Weights[T ~float32 | ~float64] struct {
	Norm1, Norm1Bias []T // the first norm's weight and bias [Width]
	Q, QBias         []T // query projection [Width, Heads·HeadDim], bias [Heads·HeadDim]
	K, KBias         []T // key projection [Width, HeadsKV·HeadDim], bias [HeadsKV·HeadDim]
	V, VBias         []T // value projection [Width, HeadsKV·HeadDim], bias [HeadsKV·HeadDim]
	O, OBias         []T // output projection [Heads·HeadDim, Width], bias [Width]
	Norm2, Norm2Bias []T // the second norm's weight and bias [Width]; none with Parallel
	FFN              ffn.Weights[T]
}

// Cache holds the keys and values of the Past tokens, after the rotary
// encoding, each [Past, HeadsKV, HeadDim] (the heads of one token
// contiguous). The present cache a call returns has the same form, with
// Past + Tokens tokens.
type Cache[T ~float32 | ~float64] struct {
	K, V []T
}

// Options are the block's convention switches. The zero value is a
// pre-norm LayerNorm block with [in, out] weights, no rotary encoding and
// plain attention over every key, but for Norm.Epsilon, which must be set
// (see package norm).
type Options struct {
	// Form places the norms and joins the sublayers.
	Form Form
	// NormKind chooses LayerNorm or RMSNorm for both norms; Norm holds
	// their epsilon, its placement and the weight form (package norm).
	NormKind NormKind
	Norm     norm.Options
	// WeightOrder is the storage of every weight matrix: the Q, K, V, O
	// projections and the feed-forward layer's.
	WeightOrder ffn.Layout
	// Rotary, when not nil, rotates queries and keys (package posenc);
	// Rotary.Dim must be HeadDim. Token t of the call is at position
	// Past + t.
	Rotary *posenc.Rotary
	// Attention holds every attention option (mask, alignment, scale,
	// soft-cap, sinks, ALiBi slopes, bias, head map, empty rows). The
	// block lays out Q, K, V itself: Layout must be the zero value and
	// Offset 0, and the block places query t at key position Past + t
	// (Offset = Past with mask.AlignStart; with mask.AlignEnd the last
	// query is at the last key already). A Bias is [BiasBatch = 1,
	// BiasHeads, Tokens, Past + Tokens].
	Attention attention.Options
	// FFN is the feed-forward layer: plain or gated, its activation; its
	// Layout must be the zero value or WeightOrder, which the block sets.
	FFN ffn.Options
	// Keep lists the stages whose tensors Result.Stages returns; nil
	// keeps none (the least memory).
	Keep []Stage
}

// Result is what a block call returns.
type Result[T ~float32 | ~float64] struct {
	// Out is the block's output hidden states [Tokens, Width].
	Out []T
	// Present is the cache after the call: the past keys and values
	// followed by those of the new tokens, [Past + Tokens, HeadsKV,
	// HeadDim] each.
	Present Cache[T]
	// Stages holds the tensors of the stages Options.Keep names.
	Stages map[Stage][]T
}

// Forward runs one decoder block on the hidden states x [Tokens, Width]
// with the past cache, composing the kernel packages' reference forms:
//
//	PreNorm:   a = N₁(x);  h = x + Attn(a);  f = N₂(h);  y = h + FFN(f)
//	PostNorm:  a = x;      h = N₁(x + Attn(a));  f = h;  y = N₂(h + FFN(f))
//	Parallel:  a = N₁(x);  h = x + Attn(a);  f = a;  y = h + FFN(f)
//
// where N is norm.LayerNorm or norm.RMSNorm (Options.NormKind, Norm), FFN
// is ffn.Forward (Options.FFN), and Attn(a) is
//
//	q = a·W_Q + b_Q,  k = a·W_K + b_K,  v = a·W_V + b_V
//	q, k = RoPE(q), RoPE(k) at positions Past + t     (Options.Rotary)
//	K, V = [past K; k], [past V; v]                  (the present cache)
//	o = attention.Forward(q, K, V)                   (Options.Attention)
//	Attn(a) = o·W_O + b_O
//
// Each projection is the ascending sum of rounded products then the
// bias, as in package ffn:
//
//	s := 0
//	for i := range a {
//		s = float64(a[i]*W[i][j]) + s
//	}
//	s += b[j]
//
// computed by one matrix product (the same bits). The stages, in
// pipeline order with their shapes, are listed by Stages.
//
// Special cases are:
//
//	Tokens = 0                         Out empty, Present = the past cache
//	NaN or ±Inf in x or a weight       propagate as the kernels say
//	a size in Dims out of range        ErrShape
//	a weight missing, unused or of the wrong length  ErrWeight
//	past K or V of the wrong length    ErrCache
//	a convention value not declared    ErrOption
//	an option a kernel refuses         that kernel's sentinel
//
// Accuracy: the package documentation's table, measured on the 50-digit
// golden values.
func Forward(x []float64, d Dims, w Weights[float64], past Cache[float64], o Options) (Result[float64], error) {
	return forward("Forward", x, d, &w, past, o, direct64)
}

// Forward32 is the float32 instantiation of the same body as Forward, on
// the float32 twins of the kernels: the straightforward low-precision
// implementation a yardstick is measured on; not a reference.
func Forward32(x []float32, d Dims, w Weights[float32], past Cache[float32], o Options) (Result[float32], error) {
	return forward("Forward32", x, d, &w, past, o, direct32)
}

// ForwardFast is Forward on the kernels' fast forms, attention.ForwardFast
// and ffn.ForwardFast, which give the bits of the reference forms (their
// packages' tests prove it): ForwardFast gives Forward's bits. No
// tokens × keys tensor is kept for all heads at once.
func ForwardFast(x []float64, d Dims, w Weights[float64], past Cache[float64], o Options) (Result[float64], error) {
	return forward("ForwardFast", x, d, &w, past, o, fast64)
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast.
func ForwardFast32(x []float32, d Dims, w Weights[float32], past Cache[float32], o Options) (Result[float32], error) {
	return forward("ForwardFast32", x, d, &w, past, o, fast32)
}

// kernels are the kernel functions one instantiation calls.
type kernels[T num.Float] struct {
	attend    func(q, k, v []T, s attention.Shape, o attention.Options) ([]T, []T, error)
	ffn       func(x []T, d ffn.Dims, w ffn.Weights[T], o ffn.Options) ([]T, error)
	layerNorm func(x []T, d int, w, b []T, o norm.Options) ([]T, error)
	rmsNorm   func(x []T, d int, w []T, o norm.Options) ([]T, error)
	rotate    func(r posenc.Rotary, x []T, L int, p posenc.Positions) ([]T, error)
}

var (
	direct64 = kernels[float64]{attention.Forward, ffn.Forward, norm.LayerNorm, norm.RMSNorm, posenc.Rotary.Apply}
	direct32 = kernels[float32]{attention.Forward32, ffn.Forward32, norm.LayerNorm32, norm.RMSNorm32, posenc.Rotary.Apply32}
	fast64   = kernels[float64]{attention.ForwardFast, ffn.ForwardFast, norm.LayerNorm, norm.RMSNorm, posenc.Rotary.Apply}
	fast32   = kernels[float32]{attention.ForwardFast32, ffn.ForwardFast32, norm.LayerNorm32, norm.RMSNorm32, posenc.Rotary.Apply32}
)

// call is one validated block call.
type call[T num.Float] struct {
	fn    string
	d     Dims
	w     *Weights[T]
	o     Options
	k     kernels[T]
	keep  map[Stage]bool
	stage map[Stage][]T
}

// note records the tensor of stage s when Options.Keep names it.
func (c *call[T]) note(s Stage, t []T) {
	if c.keep[s] {
		c.stage[s] = t
	}
}

func forward[T num.Float](fn string, x []T, d Dims, w *Weights[T], past Cache[T], o Options, k kernels[T]) (Result[T], error) {
	if err := check(fn, x, d, w, past, &o); err != nil {
		return Result[T]{}, err
	}
	c := &call[T]{fn: fn, d: d, w: w, o: o, k: k, keep: map[Stage]bool{}, stage: map[Stage][]T{}}
	for _, s := range o.Keep {
		c.keep[s] = true
	}
	c.note(StageInput, x)
	var a, h, f, y []T
	var present Cache[T]
	var err error
	if o.Form == PostNorm {
		a = x
	} else if a, err = c.norm(x, w.Norm1, w.Norm1Bias); err != nil {
		return Result[T]{}, err
	}
	c.note(StageAttnIn, a)
	attnOut, present, err := c.attend(a, past)
	if err != nil {
		return Result[T]{}, err
	}
	r1 := add(x, attnOut)
	c.note(StageResid1, r1)
	switch o.Form {
	case PreNorm:
		h = r1
		if f, err = c.norm(h, w.Norm2, w.Norm2Bias); err != nil {
			return Result[T]{}, err
		}
	case PostNorm:
		if h, err = c.norm(r1, w.Norm1, w.Norm1Bias); err != nil {
			return Result[T]{}, err
		}
		f = h
	case Parallel:
		h, f = r1, a
	}
	c.note(StageFFNIn, f)
	fo := o.FFN
	fo.Layout = o.WeightOrder
	g, err := k.ffn(f, ffn.Dims{Rows: d.Tokens, In: d.Width, Hidden: d.Hidden, Out: d.Width}, w.FFN, fo)
	if err != nil {
		return Result[T]{}, err
	}
	c.note(StageFFNOut, g)
	r2 := add(h, g)
	c.note(StageResid2, r2)
	if o.Form == PostNorm {
		if y, err = c.norm(r2, w.Norm2, w.Norm2Bias); err != nil {
			return Result[T]{}, err
		}
	} else {
		y = r2
	}
	c.note(StageOutput, y)
	res := Result[T]{Out: y, Present: present}
	if len(o.Keep) > 0 {
		res.Stages = c.stage
	}
	return res, nil
}

// norm applies the block's norm to the rows of x.
func (c *call[T]) norm(x, w, b []T) ([]T, error) {
	if c.o.NormKind == RMSNorm {
		return c.k.rmsNorm(x, c.d.Width, w, c.o.Norm)
	}
	return c.k.layerNorm(x, c.d.Width, w, b, c.o.Norm)
}

// attend is the attention sublayer: projections, rotary, the cache,
// attention and the output projection.
func (c *call[T]) attend(a []T, past Cache[T]) ([]T, Cache[T], error) {
	d, w, lay := c.d, c.w, c.o.WeightOrder
	nq, nkv := d.Heads*d.HeadDim, d.HeadsKV*d.HeadDim
	q := project(a, d.Tokens, d.Width, nq, w.Q, w.QBias, lay)
	k := project(a, d.Tokens, d.Width, nkv, w.K, w.KBias, lay)
	v := project(a, d.Tokens, d.Width, nkv, w.V, w.VBias, lay)
	c.note(StageQ, q)
	c.note(StageK, k)
	c.note(StageV, v)
	if r := c.o.Rotary; r != nil && d.Tokens > 0 {
		var err error
		if q, err = c.k.rotate(*r, q, d.Tokens, positions(d.Tokens, d.Heads, d.Past)); err != nil {
			return nil, Cache[T]{}, err
		}
		if k, err = c.k.rotate(*r, k, d.Tokens, positions(d.Tokens, d.HeadsKV, d.Past)); err != nil {
			return nil, Cache[T]{}, err
		}
	}
	c.note(StageQRot, q)
	c.note(StageKRot, k)
	present := Cache[T]{K: append(append(make([]T, 0, len(past.K)+len(k)), past.K...), k...),
		V: append(append(make([]T, 0, len(past.V)+len(v)), past.V...), v...)}
	c.note(StagePresentK, present.K)
	c.note(StagePresentV, present.V)
	ao := c.o.Attention
	ao.Layout = attention.SeqMajor
	if ao.Align == mask.AlignStart {
		ao.Offset = d.Past
	}
	s := attention.Shape{Batch: 1, HeadsQ: d.Heads, HeadsKV: d.HeadsKV, Lq: d.Tokens, Lk: d.Past + d.Tokens, Dk: d.HeadDim, Dv: d.HeadDim}
	o, _, err := c.k.attend(q, present.K, present.V, s, ao)
	if err != nil {
		return nil, Cache[T]{}, err
	}
	c.note(StageAttn, o)
	out := project(o, d.Tokens, nq, d.Width, w.O, w.OBias, lay)
	c.note(StageAttnOut, out)
	return out, present, nil
}

// positions are the rotary positions of a [tokens, heads, dim] tensor:
// one per row, token t at past + t.
func positions(tokens, heads, past int) posenc.Positions {
	list := make([]int, tokens*heads)
	for i := range list {
		list[i] = past + i/heads
	}
	return posenc.Positions{List: list}
}

// project returns x·W + b for the rows × in matrix x, W of in × out
// stored as lay says, b of out or nil: each element the ascending sum of
// rounded products, then the bias.
func project[T num.Float](x []T, rows, in, out int, w, b []T, lay ffn.Layout) []T {
	y := make([]T, rows*out)
	if lay == ffn.OutByIn {
		num.MatrixProduct(false, true, rows, out, in, 1, x, in, w, in, 0, y, out)
	} else {
		num.MatrixProduct(false, false, rows, out, in, 1, x, in, w, out, 0, y, out)
	}
	if b != nil {
		for r := range rows {
			row := y[r*out : (r+1)*out]
			for j := range row {
				row[j] += b[j]
			}
		}
	}
	return y
}

// add returns x + y elementwise.
func add[T num.Float](x, y []T) []T {
	z := make([]T, len(x))
	for i := range z {
		z[i] = x[i] + y[i]
	}
	return z
}

// shapeText spells the logical shape of a weight for an error message.
func shapeText(dims ...int) string {
	s := "["
	n := 1
	for i, v := range dims {
		if i > 0 {
			s += ", "
		}
		s += fmt.Sprint(v)
		n *= v
	}
	return fmt.Sprintf("%s] = %d", s, n)
}
