package stack

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/internal/num"
)

// Generation is what a greedy run returns.
type Generation[T ~float32 | ~float64] struct {
	// Tokens are the Steps tokens chosen, in order.
	Tokens []int
	// Logits are [Steps, Vocab]: row s the logits token s is the argmax of.
	Logits []T
	// Present holds each layer's cache after the last block call: the
	// prompt and every chosen token but the last, which no call has read.
	Present []block.Cache[T]
}

// Greedy generates steps tokens after the prompt: one Forward call on the
// whole prompt (the prefill), then, for each further step, one call on the
// token last chosen with the present caches of the call before:
//
//	logits = Forward(prompt, no cache)
//	token₀ = argmax(last row of logits)
//	logits = Forward([token_s], present);  token_{s+1} = argmax(logits)
//
// The argmax is the lowest id among the largest logits (the first maximum
// in id order; −Inf compares as a number). Prefill then k one-token calls
// gives the logits of one Forward call on prompt + tokens within the
// bound the package's tests state (the cache section of the package
// documentation).
//
// Special cases are:
//
//	steps = 0          no tokens, the prefill's caches
//	steps < 0          ErrConfig
//	an empty prompt    ErrToken: the first step has no logits
//	a NaN logit        ErrLogits, naming the step and the id
//	otherwise          the special cases of Forward
func Greedy(prompt []int, steps int, c Config, src Source[float64]) (Generation[float64], error) {
	return greedy("Greedy", prompt, steps, &c, src, block.Forward, kernels64)
}

// Greedy32 is the float32 instantiation of the same body as Greedy, on
// Forward32: the straightforward low-precision implementation; not a
// reference.
func Greedy32(prompt []int, steps int, c Config, src Source[float32]) (Generation[float32], error) {
	return greedy("Greedy32", prompt, steps, &c, src, block.Forward32, kernels32)
}

// GreedyFast is Greedy on ForwardFast: the same bits.
func GreedyFast(prompt []int, steps int, c Config, src Source[float64]) (Generation[float64], error) {
	return greedy("GreedyFast", prompt, steps, &c, src, block.ForwardFast, kernels64)
}

// GreedyFast32 is the float32 instantiation of the same body as
// GreedyFast.
func GreedyFast32(prompt []int, steps int, c Config, src Source[float32]) (Generation[float32], error) {
	return greedy("GreedyFast32", prompt, steps, &c, src, block.ForwardFast32, kernels32)
}

func greedy[T num.Float](fn string, prompt []int, steps int, c *Config, src Source[T], run blockFunc[T], k kernels[T]) (Generation[T], error) {
	if steps < 0 {
		return Generation[T]{}, fmt.Errorf("%w: %s: steps = %d; want ≥ 0", ErrConfig, fn, steps)
	}
	if len(prompt) == 0 {
		return Generation[T]{}, fmt.Errorf("%w: %s: prompt has no tokens; want at least one, whose logits choose the first token", ErrToken, fn)
	}
	if err := c.check(fn); err != nil {
		return Generation[T]{}, err
	}
	if !fits(steps, c.Vocab) {
		return Generation[T]{}, fmt.Errorf("%w: %s: the logits [steps, Vocab] = %s; want at most MaxElements = %d elements", ErrConfig, fn, num.Factors(steps, c.Vocab), MaxElements)
	}
	r, err := forward(fn, prompt, c, src, nil, run, k)
	if err != nil {
		return Generation[T]{}, err
	}
	g := Generation[T]{Tokens: make([]int, 0, steps), Logits: make([]T, 0, steps*c.Vocab)}
	last := r.Logits[(len(prompt)-1)*c.Vocab:]
	for s := range steps {
		if s > 0 {
			if r, err = forward(fn, g.Tokens[s-1:s], c, src, r.Present, run, k); err != nil {
				return Generation[T]{}, fmt.Errorf("step %d: %w", s, err)
			}
			last = r.Logits
		}
		id, err := argmax(last)
		if err != nil {
			return Generation[T]{}, fmt.Errorf("%w: %s: step %d: %w", ErrLogits, fn, s, err)
		}
		g.Tokens = append(g.Tokens, id)
		g.Logits = append(g.Logits, last...)
	}
	g.Present = r.Present
	return g, nil
}

// argmax returns the index of the largest value of x, the lowest index
// among equal largest values; −Inf and +Inf compare as numbers.
//
// Special cases are:
//
//	len(x) = 0   an error
//	a NaN in x   an error naming its index: no value is the largest
func argmax[T num.Float](x []T) (int, error) {
	if len(x) == 0 {
		return 0, fmt.Errorf("argmax: x is empty; want at least one value")
	}
	best := 0
	for i, v := range x {
		if math.IsNaN(float64(v)) {
			return 0, fmt.Errorf("argmax: x[%d] = NaN; want numbers, of which one is the largest", i)
		}
		if v > x[best] {
			best = i
		}
	}
	return best, nil
}

// CacheBytes returns the size in bytes of the key/value cache of c holding
// tokens tokens of bytesPerElement bytes each:
//
//	2 · Layers · HeadsKV · HeadDim · tokens · bytesPerElement
//
// (keys and values, every layer; common practice). Errors wrap ErrConfig:
// a size of c out of range, tokens < 0, bytesPerElement < 1, or a product
// beyond the largest int64.
func CacheBytes(c Config, tokens, bytesPerElement int) (int64, error) {
	if err := c.check("CacheBytes"); err != nil {
		return 0, err
	}
	if tokens < 0 {
		return 0, fmt.Errorf("%w: CacheBytes: tokens = %d; want ≥ 0", ErrConfig, tokens)
	}
	if bytesPerElement < 1 {
		return 0, fmt.Errorf("%w: CacheBytes: bytesPerElement = %d; want ≥ 1", ErrConfig, bytesPerElement)
	}
	n := int64(2)
	for _, f := range []int{c.Layers, c.HeadsKV, c.HeadDim, tokens, bytesPerElement} {
		if f != 0 && n > math.MaxInt64/int64(f) {
			return 0, fmt.Errorf("%w: CacheBytes: 2·%d·%d·%d·%d·%d; want at most %d", ErrConfig, c.Layers, c.HeadsKV, c.HeadDim, tokens, bytesPerElement, int64(math.MaxInt64))
		}
		n *= int64(f)
	}
	return n, nil
}
