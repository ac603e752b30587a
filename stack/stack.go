package stack

import (
	"fmt"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// Config is a decoder stack: Layers blocks of one configuration between an
// embedding of Vocab rows of Width values and the logits.
type Config struct {
	Layers  int // blocks ≥ 1
	Vocab   int // token ids 0 … Vocab − 1, ≥ 1
	Width   int // model width ≥ 1
	Heads   int // query heads ≥ 1
	HeadsKV int // key/value heads ≥ 1, dividing Heads
	HeadDim int // dimension of one head ≥ 1
	Hidden  int // feed-forward hidden units ≥ 1
	// Block holds every block's convention switches (package block);
	// its NormKind and Norm are the final norm's too.
	Block block.Options
	// Sinusoidal, when not nil, is added to the embeddings, token t at
	// position Past + t (posenc.Sinusoidal.Add); its Dim must be Width.
	Sinusoidal *posenc.Sinusoidal
	// FinalNorm applies the block's norm (Block.NormKind, Block.Norm) to
	// the last block's output before the logits, with Globals.Norm and
	// NormBias; false leaves the output as it is (a post-norm stack).
	FinalNorm bool
	// Tied takes the logits from the embedding, h·Eᵀ; false from
	// Globals.Head, stored as Block.WeightOrder says.
	Tied bool
}

// Globals are the weights outside the blocks.
type Globals[T ~float32 | ~float64] struct {
	Embed    []T // the embedding E [Vocab, Width], row t the vector of token t
	Norm     []T // the final norm's weight [Width] (nil: a gain of 1); only with FinalNorm
	NormBias []T // the final norm's bias [Width] or nil; LayerNorm only
	Head     []T // the output head [Width, Vocab] (in-by-out) or [Vocab, Width] (out-by-in); only without Tied
}

// Source gives a stack its weights. Forward asks for the globals once and
// for each layer's weights in order, one layer at a time: it asks for
// layer i + 1 only after block i has returned, and keeps no reference to
// a layer's weights after its block, so a Source may read them from disk
// on demand, generate them, or reuse one layer's storage for the next.
type Source[T ~float32 | ~float64] interface {
	Globals() (Globals[T], error)
	Layer(i int) (block.Weights[T], error)
}

// Memory is a Source over weights held in memory.
type Memory[T ~float32 | ~float64] struct {
	Global Globals[T]
	Layers []block.Weights[T]
}

// Globals returns m.Global.
func (m *Memory[T]) Globals() (Globals[T], error) {
	if m == nil {
		return Globals[T]{}, fmt.Errorf("%w: Memory.Globals: receiver = nil; want a Memory", ErrWeight)
	}
	return m.Global, nil
}

// Layer returns m.Layers[i].
func (m *Memory[T]) Layer(i int) (block.Weights[T], error) {
	if m == nil || i < 0 || i >= len(m.Layers) {
		n := 0
		if m != nil {
			n = len(m.Layers)
		}
		return block.Weights[T]{}, fmt.Errorf("%w: Memory.Layer: i = %d; want a layer 0 … %d of Memory.Layers", ErrWeight, i, n-1)
	}
	return m.Layers[i], nil
}

// Result is what a stack call returns.
type Result[T ~float32 | ~float64] struct {
	// Logits are [Tokens, Vocab], row t the logits after token t.
	Logits []T
	// Present holds each layer's cache after the call, Past + Tokens
	// tokens each.
	Present []block.Cache[T]
}

// Forward runs the stack on the token ids with each layer's past cache
// (nil for none: Past = 0):
//
//	x₀[t] = E[ids[t]] (+ PE(Past + t), Config.Sinusoidal)
//	x_{l+1}, present_l = block.Forward(x_l, past_l)   l = 0 … Layers − 1
//	h = N(x_L) (Config.FinalNorm) or x_L
//	logits = h·Eᵀ (Config.Tied) or h·W_head
//
// Each logit is the ascending sum of rounded products, as block's
// projections (internal/num's MatrixProduct). The weights of one layer
// are held at a time (see Source): memory is bounded by the globals, one
// block's weights, the caches and one block's activations, never every
// layer's weights.
//
// Special cases are:
//
//	len(ids) = 0                 Logits empty, Present = past
//	an id outside [0, Vocab)     ErrToken, naming its position and value
//	a weight missing or of the wrong length  ErrWeight, naming it and its layer
//	past not one cache per layer, or of different lengths  ErrCache
//	a size of Config out of range  ErrConfig
//	a block's refusal            block's sentinel, the layer named
func Forward(ids []int, c Config, src Source[float64], past []block.Cache[float64]) (Result[float64], error) {
	return forward("Forward", ids, &c, src, past, block.Forward, kernels64)
}

// Forward32 is the float32 instantiation of the same body as Forward, on
// block.Forward32 and the kernels' float32 twins: the straightforward
// low-precision implementation a yardstick is measured on; not a
// reference.
func Forward32(ids []int, c Config, src Source[float32], past []block.Cache[float32]) (Result[float32], error) {
	return forward("Forward32", ids, &c, src, past, block.Forward32, kernels32)
}

// ForwardFast is Forward on block.ForwardFast, which gives block.Forward's
// bits: ForwardFast gives Forward's bits.
func ForwardFast(ids []int, c Config, src Source[float64], past []block.Cache[float64]) (Result[float64], error) {
	return forward("ForwardFast", ids, &c, src, past, block.ForwardFast, kernels64)
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast.
func ForwardFast32(ids []int, c Config, src Source[float32], past []block.Cache[float32]) (Result[float32], error) {
	return forward("ForwardFast32", ids, &c, src, past, block.ForwardFast32, kernels32)
}

type blockFunc[T num.Float] func(x []T, d block.Dims, w block.Weights[T], past block.Cache[T], o block.Options) (block.Result[T], error)

// kernels are the functions outside the blocks one instantiation calls.
type kernels[T num.Float] struct {
	layerNorm func(x []T, d int, w, b []T, o norm.Options) ([]T, error)
	rmsNorm   func(x []T, d int, w []T, o norm.Options) ([]T, error)
	encode    func(s posenc.Sinusoidal, x []T, L, offset int) ([]T, error)
}

var (
	kernels64 = kernels[float64]{norm.LayerNorm, norm.RMSNorm, posenc.Sinusoidal.Add}
	kernels32 = kernels[float32]{norm.LayerNorm32, norm.RMSNorm32, posenc.Sinusoidal.Add32}
)

func forward[T num.Float](fn string, ids []int, c *Config, src Source[T], past []block.Cache[T], run blockFunc[T], k kernels[T]) (Result[T], error) {
	if err := c.check(fn); err != nil {
		return Result[T]{}, err
	}
	if src == nil {
		return Result[T]{}, fmt.Errorf("%w: %s: src = nil; want a Source of the weights", ErrWeight, fn)
	}
	if err := checkIDs(fn, ids, c.Vocab); err != nil {
		return Result[T]{}, err
	}
	nPast, err := pastLength(fn, c, past)
	if err != nil {
		return Result[T]{}, err
	}
	d := block.Dims{Tokens: len(ids), Width: c.Width, Heads: c.Heads, HeadsKV: c.HeadsKV, HeadDim: c.HeadDim, Hidden: c.Hidden, Past: nPast}
	if !fits(len(ids), c.Vocab) || !fits(len(ids), c.Width) {
		return Result[T]{}, fmt.Errorf("%w: %s: the logits [Tokens, Vocab] = %s; want at most MaxElements = %d elements",
			ErrConfig, fn, num.Factors(len(ids), max(c.Vocab, c.Width)), MaxElements)
	}
	g, err := src.Globals()
	if err != nil {
		return Result[T]{}, fmt.Errorf("%s: the globals: %w", fn, err)
	}
	if err := checkGlobals(fn, c, &g); err != nil {
		return Result[T]{}, err
	}
	x := make([]T, len(ids)*c.Width)
	for t, id := range ids {
		copy(x[t*c.Width:(t+1)*c.Width], g.Embed[id*c.Width:(id+1)*c.Width])
	}
	if c.Sinusoidal != nil && len(ids) > 0 {
		if x, err = k.encode(*c.Sinusoidal, x, len(ids), nPast); err != nil {
			return Result[T]{}, err
		}
	}
	present := make([]block.Cache[T], c.Layers)
	for l := range c.Layers {
		w, err := src.Layer(l)
		if err != nil {
			return Result[T]{}, fmt.Errorf("%s: layer %d: %w", fn, l, err)
		}
		var p block.Cache[T]
		if past != nil {
			p = past[l]
		}
		r, err := run(x, d, w, p, c.Block)
		if err != nil {
			return Result[T]{}, fmt.Errorf("%s: layer %d: %w", fn, l, err)
		}
		x, present[l] = r.Out, r.Present
	}
	if c.FinalNorm {
		if c.Block.NormKind == block.RMSNorm {
			x, err = k.rmsNorm(x, c.Width, g.Norm, c.Block.Norm)
		} else {
			x, err = k.layerNorm(x, c.Width, g.Norm, g.NormBias, c.Block.Norm)
		}
		if err != nil {
			return Result[T]{}, fmt.Errorf("%s: the final norm: %w", fn, err)
		}
	}
	logits := make([]T, len(ids)*c.Vocab)
	switch {
	case c.Tied:
		num.MatrixProduct(false, true, len(ids), c.Vocab, c.Width, 1, x, c.Width, g.Embed, c.Width, 0, logits, c.Vocab)
	case c.Block.WeightOrder == ffn.OutByIn:
		num.MatrixProduct(false, true, len(ids), c.Vocab, c.Width, 1, x, c.Width, g.Head, c.Width, 0, logits, c.Vocab)
	default:
		num.MatrixProduct(false, false, len(ids), c.Vocab, c.Width, 1, x, c.Width, g.Head, c.Vocab, 0, logits, c.Vocab)
	}
	return Result[T]{Logits: logits, Present: present}, nil
}

// check validates the sizes and the stack's own switches; block checks
// its options on the first layer.
func (c *Config) check(fn string) error {
	for _, f := range []struct {
		name string
		v    int
	}{{"Layers", c.Layers}, {"Vocab", c.Vocab}, {"Width", c.Width}, {"Heads", c.Heads}, {"HeadsKV", c.HeadsKV}, {"HeadDim", c.HeadDim}, {"Hidden", c.Hidden}} {
		if f.v < 1 {
			return fmt.Errorf("%w: %s: Config.%s = %d; want ≥ 1", ErrConfig, fn, f.name, f.v)
		}
	}
	if c.Layers > MaxElements {
		return fmt.Errorf("%w: %s: Config.Layers = %d; want at most MaxElements = %d", ErrConfig, fn, c.Layers, MaxElements)
	}
	if !fits(c.Vocab, c.Width) {
		return fmt.Errorf("%w: %s: the embedding [Vocab, Width] = %s; want at most MaxElements = %d elements", ErrConfig, fn, num.Factors(c.Vocab, c.Width), MaxElements)
	}
	if s := c.Sinusoidal; s != nil && s.Dim != c.Width {
		return fmt.Errorf("%w: %s: Config.Sinusoidal.Dim = %d; want Width = %d", ErrConfig, fn, s.Dim, c.Width)
	}
	if err := c.Block.NormKind.Check(); err != nil {
		return fmt.Errorf("%w: %s: Config.Block.NormKind: %w", ErrConfig, fn, err)
	}
	if err := c.Block.WeightOrder.Check(); err != nil {
		return fmt.Errorf("%w: %s: Config.Block.WeightOrder: %w", ErrConfig, fn, err)
	}
	return nil
}

// checkIDs checks that every id is a token of the vocabulary.
func checkIDs(fn string, ids []int, vocab int) error {
	for p, id := range ids {
		if id < 0 || id >= vocab {
			return fmt.Errorf("%w: %s: ids[%d] = %d; want 0 ≤ id < Vocab = %d", ErrToken, fn, p, id, vocab)
		}
	}
	return nil
}

// pastLength returns the number of tokens the past caches hold.
func pastLength[T num.Float](fn string, c *Config, past []block.Cache[T]) (int, error) {
	if past == nil {
		return 0, nil
	}
	if len(past) != c.Layers {
		return 0, fmt.Errorf("%w: %s: past has %d caches; want one per layer, Layers = %d (or nil for none)", ErrCache, fn, len(past), c.Layers)
	}
	row := c.HeadsKV * c.HeadDim
	n := len(past[0].K) / row
	for l, p := range past {
		if len(p.K) != n*row || len(p.V) != n*row {
			return 0, fmt.Errorf("%w: %s: past[%d] has %d keys and %d values; want [Past, HeadsKV, HeadDim] = [%d, %d, %d] = %d each, as past[0]",
				ErrCache, fn, l, len(p.K), len(p.V), n, c.HeadsKV, c.HeadDim, n*row)
		}
	}
	return n, nil
}

// checkGlobals checks the lengths of the weights outside the blocks.
func checkGlobals[T num.Float](fn string, c *Config, g *Globals[T]) error {
	slots := globalSlots(g)
	for _, w := range globalSpecs(c) {
		if err := w.checkLen(fn, -1, len(*slots[w.key])); err != nil {
			return err
		}
	}
	return nil
}

// fits reports whether a·b is at most MaxElements, a zero counted as 1.
func fits(a, b int) bool {
	a, b = max(a, 1), max(b, 1)
	return a <= MaxElements && b <= MaxElements/a
}
