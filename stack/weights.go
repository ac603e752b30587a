package stack

import (
	"fmt"
	"strings"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
)

// The weights of a stack by their manifest keys: what each is, its shape
// and whether a configuration needs it.

// use says whether a configuration needs a weight, allows it or forbids it.
type use int

const (
	required use = iota
	optional
	forbidden
)

// spec is one weight: its manifest key, its stored shape and its use.
type spec struct {
	key   string
	shape []int
	need  use
}

// The manifest keys of the weights outside the blocks.
const (
	keyEmbed    = "embed"
	keyNorm     = "final_norm"
	keyNormBias = "final_norm_bias"
	keyHead     = "head"
)

// matrix is the stored shape of an in × out matrix under the weight order.
func matrix(order ffn.Layout, in, out int) []int {
	if order == ffn.OutByIn {
		return []int{out, in}
	}
	return []int{in, out}
}

// globalSpecs are the weights outside the blocks, in manifest order.
func globalSpecs(c *Config) []spec {
	norm, bias, head := forbidden, forbidden, required
	if c.FinalNorm {
		norm, bias = optional, optional
		if c.Block.NormKind == block.RMSNorm {
			bias = forbidden
		}
	}
	if c.Tied {
		head = forbidden
	}
	return []spec{
		{keyEmbed, []int{c.Vocab, c.Width}, required},
		{keyNorm, []int{c.Width}, norm},
		{keyNormBias, []int{c.Width}, bias},
		{keyHead, matrix(c.Block.WeightOrder, c.Width, c.Vocab), head},
	}
}

// globalSlots maps each global key to its field.
func globalSlots[T num.Float](g *Globals[T]) map[string]*[]T {
	return map[string]*[]T{keyEmbed: &g.Embed, keyNorm: &g.Norm, keyNormBias: &g.NormBias, keyHead: &g.Head}
}

// layerKeys are the manifest keys of one block's weights, in order.
var layerKeys = []string{"norm1", "norm1_bias", "q", "q_bias", "k", "k_bias", "v", "v_bias", "o", "o_bias",
	"norm2", "norm2_bias", "ffn_w1", "ffn_b1", "ffn_v", "ffn_c", "ffn_w2", "ffn_b2"}

// layerSpecs are one block's weights, in the order of layerKeys.
func layerSpecs(c *Config) []spec {
	o := c.Block.WeightOrder
	nq, nkv := c.Heads*c.HeadDim, c.HeadsKV*c.HeadDim
	normBias, norm2 := optional, optional
	if c.Block.NormKind == block.RMSNorm {
		normBias = forbidden
	}
	if c.Block.Form == block.Parallel {
		norm2 = forbidden
	}
	norm2Bias := normBias
	if norm2 == forbidden {
		norm2Bias = forbidden
	}
	gate, gateBias := forbidden, forbidden
	if c.Block.FFN.Gated {
		gate, gateBias = required, optional
	}
	W, H := c.Width, c.Hidden
	return []spec{
		{"norm1", []int{W}, optional}, {"norm1_bias", []int{W}, normBias},
		{"q", matrix(o, W, nq), required}, {"q_bias", []int{nq}, optional},
		{"k", matrix(o, W, nkv), required}, {"k_bias", []int{nkv}, optional},
		{"v", matrix(o, W, nkv), required}, {"v_bias", []int{nkv}, optional},
		{"o", matrix(o, nq, W), required}, {"o_bias", []int{W}, optional},
		{"norm2", []int{W}, norm2}, {"norm2_bias", []int{W}, norm2Bias},
		{"ffn_w1", matrix(o, W, H), required}, {"ffn_b1", []int{H}, optional},
		{"ffn_v", matrix(o, W, H), gate}, {"ffn_c", []int{H}, gateBias},
		{"ffn_w2", matrix(o, H, W), required}, {"ffn_b2", []int{W}, optional},
	}
}

// layerSlots maps each layer key to its field of w.
func layerSlots[T num.Float](w *block.Weights[T]) map[string]*[]T {
	return map[string]*[]T{
		"norm1": &w.Norm1, "norm1_bias": &w.Norm1Bias, "q": &w.Q, "q_bias": &w.QBias, "k": &w.K, "k_bias": &w.KBias,
		"v": &w.V, "v_bias": &w.VBias, "o": &w.O, "o_bias": &w.OBias, "norm2": &w.Norm2, "norm2_bias": &w.Norm2Bias,
		"ffn_w1": &w.FFN.W1, "ffn_b1": &w.FFN.B1, "ffn_v": &w.FFN.V, "ffn_c": &w.FFN.C, "ffn_w2": &w.FFN.W2, "ffn_b2": &w.FFN.B2,
	}
}

// where names a weight's place for a message: "layer 3 weight q" or
// "weight embed".
func where(layer int, key string) string {
	if layer < 0 {
		return "weight " + key
	}
	return fmt.Sprintf("layer %d weight %s", layer, key)
}

// elements is the number of elements of shape.
func elements(shape []int) int {
	n := 1
	for _, v := range shape {
		n *= v
	}
	return n
}

// shapeText spells a shape: "[64, 100]".
func shapeText(shape []int) string {
	s := make([]string, len(shape))
	for i, v := range shape {
		s[i] = fmt.Sprint(v)
	}
	return "[" + strings.Join(s, ", ") + "]"
}

// checkLen checks a weight given as n elements (0: not given).
func (w spec) checkLen(fn string, layer, n int) error {
	switch {
	case w.need == forbidden && n > 0:
		return fmt.Errorf("%w: %s: %s has %d elements; want none: this configuration has no use for it", ErrWeight, fn, where(layer, w.key), n)
	case w.need == required && n == 0:
		return fmt.Errorf("%w: %s: %s is missing; want %s", ErrWeight, fn, where(layer, w.key), shapeText(w.shape))
	case n != 0 && n != elements(w.shape):
		return fmt.Errorf("%w: %s: %s has %d elements; want %s = %d", ErrWeight, fn, where(layer, w.key), n, shapeText(w.shape), elements(w.shape))
	}
	return nil
}
