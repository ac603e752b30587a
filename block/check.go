package block

import (
	"fmt"

	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
)

// check validates a call of fn before anything is allocated.
func check[T num.Float](fn string, x []T, d Dims, w *Weights[T], past Cache[T], o *Options) error {
	if err := checkDims(fn, d); err != nil {
		return err
	}
	if len(x) != d.Tokens*d.Width {
		return fmt.Errorf("%w: %s: x has %d elements; want Tokens·Width = %d·%d = %d", ErrShape, fn, len(x), d.Tokens, d.Width, d.Tokens*d.Width)
	}
	if err := formWords.CheckAt(fn+": Options.Form", o.Form); err != nil {
		return err
	}
	if err := normWords.CheckAt(fn+": Options.NormKind", o.NormKind); err != nil {
		return err
	}
	if err := o.WeightOrder.Check(); err != nil {
		return fmt.Errorf("%w: %s: Options.WeightOrder: %w", ErrOption, fn, err)
	}
	if o.FFN.Layout != ffn.InByOut && o.FFN.Layout != o.WeightOrder {
		return fmt.Errorf("%w: %s: Options.FFN.Layout = %v; want %v (Options.WeightOrder) or the zero value: the block sets it", ErrOption, fn, o.FFN.Layout, o.WeightOrder)
	}
	if o.Attention.Layout != 0 {
		return fmt.Errorf("%w: %s: Options.Attention.Layout = %v; want the zero value: the block lays out Q, K and V as [tokens, heads, dim]", ErrOption, fn, o.Attention.Layout)
	}
	if o.Attention.Offset != 0 {
		return fmt.Errorf("%w: %s: Options.Attention.Offset = %d; want 0: the block places token t at key position Past + t", ErrOption, fn, o.Attention.Offset)
	}
	if r := o.Rotary; r != nil && r.Dim != d.HeadDim {
		return fmt.Errorf("%w: %s: Options.Rotary.Dim = %d; want HeadDim = %d", ErrOption, fn, r.Dim, d.HeadDim)
	}
	for i, s := range o.Keep {
		if s.Shape(d) == nil {
			return fmt.Errorf("%w: %s: Options.Keep[%d] = %q; want one of %v", ErrOption, fn, i, s, stages)
		}
	}
	if err := checkWeights(fn, d, w, o); err != nil {
		return err
	}
	nkv := d.HeadsKV * d.HeadDim
	if len(past.K) != d.Past*nkv {
		return fmt.Errorf("%w: %s: past K has %d elements; want [Past, HeadsKV, HeadDim] = %s", ErrCache, fn, len(past.K), shapeText(d.Past, d.HeadsKV, d.HeadDim))
	}
	if len(past.V) != d.Past*nkv {
		return fmt.Errorf("%w: %s: past V has %d elements; want [Past, HeadsKV, HeadDim] = %s, as past K", ErrCache, fn, len(past.V), shapeText(d.Past, d.HeadsKV, d.HeadDim))
	}
	return nil
}

// checkDims validates the sizes and that every tensor the block makes
// fits MaxElements.
func checkDims(fn string, d Dims) error {
	for _, f := range []struct {
		name string
		v    int
		min  int
	}{{"Tokens", d.Tokens, 0}, {"Width", d.Width, 1}, {"Heads", d.Heads, 1}, {"HeadsKV", d.HeadsKV, 1},
		{"HeadDim", d.HeadDim, 1}, {"Hidden", d.Hidden, 1}, {"Past", d.Past, 0}} {
		if f.v < f.min {
			return fmt.Errorf("%w: %s: Dims.%s = %d; want ≥ %d", ErrShape, fn, f.name, f.v, f.min)
		}
	}
	if d.Past > MaxElements {
		return fmt.Errorf("%w: %s: Dims.Past = %d; want at most MaxElements = %d", ErrShape, fn, d.Past, MaxElements)
	}
	if d.Tokens > MaxElements {
		return fmt.Errorf("%w: %s: Dims.Tokens = %d; want at most MaxElements = %d", ErrShape, fn, d.Tokens, MaxElements)
	}
	if d.Heads%d.HeadsKV != 0 {
		return fmt.Errorf("%w: %s: Dims.Heads = %d; want a multiple of HeadsKV = %d", ErrShape, fn, d.Heads, d.HeadsKV)
	}
	for _, t := range []struct {
		name string
		dims []int
	}{
		{"the hidden states [Tokens, Width]", []int{d.Tokens, d.Width}},
		{"the queries [Tokens, Heads, HeadDim]", []int{d.Tokens, d.Heads, d.HeadDim}},
		{"the present cache [Past + Tokens, HeadsKV, HeadDim]", []int{d.Past + d.Tokens, d.HeadsKV, d.HeadDim}},
		{"the FFN hidden units [Tokens, 2·Hidden]", []int{d.Tokens, 2, d.Hidden}},
		{"W_Q [Width, Heads·HeadDim]", []int{d.Width, d.Heads, d.HeadDim}},
		{"the FFN weights [Width, Hidden]", []int{d.Width, d.Hidden}},
	} {
		if !fits(t.dims) {
			return fmt.Errorf("%w: %s: the size of %s = %s, a zero dimension counted as 1; want at most MaxElements = %d elements",
				ErrShape, fn, t.name, num.Factors(t.dims...), MaxElements)
		}
	}
	return nil
}

// fits reports whether the product of dims, a zero counted as 1, is at most
// MaxElements; each factor is divided out of the room left.
func fits(dims []int) bool {
	room := MaxElements
	for _, v := range dims {
		if v = max(v, 1); v > room {
			return false
		}
		room /= v
	}
	return true
}

// weight is one weight's check: its name, length, logical shape and
// whether the configuration needs it, allows it or forbids it.
type weight struct {
	name   string
	n      int
	shape  []int
	matrix bool // stored as Options.WeightOrder says
	need   use
}

type use int

const (
	required use = iota
	optional
	forbidden
)

func checkWeights[T num.Float](fn string, d Dims, w *Weights[T], o *Options) error {
	nq, nkv := d.Heads*d.HeadDim, d.HeadsKV*d.HeadDim
	normBias, norm2 := optional, optional
	if o.NormKind == RMSNorm {
		normBias = forbidden
	}
	if o.Form == Parallel {
		norm2 = forbidden
	}
	norm2Bias := normBias
	if norm2 == forbidden {
		norm2Bias = forbidden
	}
	for _, c := range []weight{
		{"Norm1", len(w.Norm1), []int{d.Width}, false, optional},
		{"Norm1Bias", len(w.Norm1Bias), []int{d.Width}, false, normBias},
		{"Q", len(w.Q), []int{d.Width, nq}, true, required},
		{"QBias", len(w.QBias), []int{nq}, false, optional},
		{"K", len(w.K), []int{d.Width, nkv}, true, required},
		{"KBias", len(w.KBias), []int{nkv}, false, optional},
		{"V", len(w.V), []int{d.Width, nkv}, true, required},
		{"VBias", len(w.VBias), []int{nkv}, false, optional},
		{"O", len(w.O), []int{nq, d.Width}, true, required},
		{"OBias", len(w.OBias), []int{d.Width}, false, optional},
		{"Norm2", len(w.Norm2), []int{d.Width}, false, norm2},
		{"Norm2Bias", len(w.Norm2Bias), []int{d.Width}, false, norm2Bias},
	} {
		if err := c.check(fn, o.WeightOrder); err != nil {
			return err
		}
	}
	return nil
}

func (c weight) check(fn string, lay ffn.Layout) error {
	shape, order := c.shape, ""
	if c.matrix {
		order = " (" + lay.String() + ")"
		if lay == ffn.OutByIn {
			shape = []int{shape[1], shape[0]}
		}
	}
	want := 1
	for _, v := range shape {
		want *= v
	}
	switch {
	case c.need == forbidden && c.n > 0:
		return fmt.Errorf("%w: %s: Weights.%s has %d elements; want none: this configuration has no use for it", ErrWeight, fn, c.name, c.n)
	case c.need == required && c.n == 0:
		return fmt.Errorf("%w: %s: Weights.%s is missing; want %s%s", ErrWeight, fn, c.name, shapeText(shape...), order)
	case c.n != 0 && c.n != want:
		return fmt.Errorf("%w: %s: Weights.%s has %d elements; want %s%s", ErrWeight, fn, c.name, c.n, shapeText(shape...), order)
	}
	return nil
}
