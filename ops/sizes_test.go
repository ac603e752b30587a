package ops

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/posenc"
)

// sizeCase is a configuration, or inputs, whose output the operation
// cannot hold: it must be refused, before anything of that size is
// allocated (an allocation of that size would take the test down), with
// the error of the one style.
type sizeCase struct {
	name, op, config string
	in               Tensors
	want             error
	says             string
}

// shaped is a tensor of the shape holding zeros: the size checks look at
// shapes only.
func shaped(shape ...int) Tensor {
	n := 1
	for _, d := range shape {
		n *= d
	}
	return Tensor{Shape: shape, Data: make([]float64, n)}
}

// Sizes above MaxElements = 2^28 = 268435456 by a product (2^14·(2^14+1)
// = 268451840) or by one key (2^28 + 1 = 268435457, 10^12).
func sizeCases() []sizeCase {
	return []sizeCase{
		{"heads", "alibi-slopes", `{"version":1,"heads":1000000000000}`, nil, ErrConfig,
			`key "heads" = 1000000000000; want at most MaxElements = 268435456, the most values output "slopes" may hold`},
		{"heads just over", "alibi-slopes", `{"version":1,"heads":268435457}`, nil, ErrConfig,
			`key "heads" = 268435457; want at most MaxElements = 268435456`},
		{"queries", "alibi-bias", `{"version":1,"queries":1000000000000,"keys":1}`, Tensors{"slopes": shaped(1)}, ErrConfig,
			`heads (input "slopes") · key "queries" · key "keys" = 1 · 1000000000000 · 1 = 1000000000000; want at most MaxElements = 268435456, the most values output "bias" may hold`},
		{"keys", "alibi-bias", `{"version":1,"queries":1,"keys":1000000000000}`, Tensors{"slopes": shaped(1)}, ErrConfig,
			`key "keys" = 1 · 1 · 1000000000000 = 1000000000000; want at most MaxElements`},
		{"bias product", "alibi-bias", `{"version":1,"queries":16384,"keys":16385}`, Tensors{"slopes": shaped(1)}, ErrConfig,
			`= 1 · 16384 · 16385 = 268451840; want at most MaxElements = 268435456`},
		{"slope heads", "alibi-bias", `{"version":1,"queries":16384,"keys":16384}`, Tensors{"slopes": shaped(2)}, ErrConfig,
			`= 2 · 16384 · 16384 = 536870912; want at most MaxElements`},
		{"queries of no keys", "alibi-bias", `{"version":1,"queries":268435457,"keys":0}`, Tensors{"slopes": shaped(1)}, ErrConfig,
			`key "queries" = 268435457; want at most MaxElements = 268435456, as a size of output "bias"`},
		{"sinusoidal length", "sinusoidal-table", `{"version":1,"dim":2,"length":1000000000000}`, nil, ErrConfig,
			`key "length" · key "dim" = 1000000000000 · 2 = 2000000000000; want at most MaxElements = 268435456, the most values output "table" may hold`},
		{"sinusoidal dim", "sinusoidal-table", `{"version":1,"dim":1000000000000,"length":1}`, nil, ErrConfig,
			`key "length" · key "dim" = 1 · 1000000000000 = 1000000000000; want at most MaxElements`},
		{"sinusoidal product", "sinusoidal-table", `{"version":1,"dim":16384,"length":16385}`, nil, ErrConfig,
			`= 16385 · 16384 = 268451840; want at most MaxElements`},
		{"sinusoidal length of no dims", "sinusoidal-table", `{"version":1,"dim":0,"length":268435457}`, nil, ErrConfig,
			`key "length" = 268435457; want at most MaxElements = 268435456, as a size of output "table"`},
		{"rotary length", "rotary-tables", `{"version":1,"dim":8,"length":1000000000000}`, nil, ErrConfig,
			`key "length" · key "dim" = 1000000000000 · 8 = 8000000000000; want at most MaxElements = 268435456, the most values outputs "cos" and "sin" together`},
		{"rotary dim", "rotary-tables", `{"version":1,"dim":1000000000000,"length":1}`, nil, ErrConfig,
			`key "length" · key "dim" = 1 · 1000000000000 = 1000000000000; want at most MaxElements`},
		// The positions are made before the tables: a length with dim 0
		// would allocate them.
		{"rotary length of no dims", "rotary-tables", `{"version":1,"dim":0,"length":1000000000000000}`, nil, ErrConfig,
			`key "length" = 1000000000000000; want at most MaxElements = 268435456, as a size of outputs "cos" and "sin"`},
		{"rotary positions", "rotary-tables", `{"version":1,"dim":268435456,"positions":[0,1]}`, nil, ErrConfig,
			`count of key "positions" · key "dim" = 2 · 268435456 = 536870912; want at most MaxElements`},
		// out is [batch, heads_q, queries, dim_v]: q gives the first three
		// (2^7 heads of 2^7 queries with a head dimension of 1), v the
		// last (2^15): 2^29 values from inputs of 2^14 and 2^15.
		{"attention out", "attention-forward", `{"version":1}`,
			Tensors{"q": shaped(1, 1<<7, 1<<7, 1), "k": shaped(1, 1, 1, 1), "v": shaped(1, 1, 1, 1<<15)}, ErrInput,
			`batch (input "q") · heads_q (input "q") · queries (input "q") · dim_v (input "v") = 1 · 128 · 128 · 32768 = 536870912; want at most MaxElements = 268435456, the most values output "out" may hold`},
		// The kvcache operations take out's sizes as attention-forward
		// does: 2^29 values from inputs of 2^14 and 2^15.
		{"paged out", "paged-attention", `{"version":1,"page_tables":[[0]],"lengths":[1]}`,
			Tensors{"q": shaped(1, 1<<7, 1<<7, 1), "k_pool": shaped(1, 1, 1, 1), "v_pool": shaped(1, 1, 1, 1<<15)}, ErrInput,
			`batch (input "q") · heads_q (input "q") · queries (input "q") · dim_v (input "v_pool") = 1 · 128 · 128 · 32768 = 536870912; want at most MaxElements`},
		{"split out", "split-attention", `{"version":1,"position":0,"start":0,"end":1}`,
			Tensors{"q": shaped(1, 1<<7, 1<<7, 1), "k": shaped(1, 1, 1, 1), "v": shaped(1, 1, 1, 1<<15)}, ErrInput,
			`dim_v (input "v") = 1 · 128 · 128 · 32768 = 536870912; want at most MaxElements`},
		// block-forward's queries are [tokens, heads, head_dim]: 2^14
		// tokens of width 1 on a query projection of 2^15 units give 2^29
		// values from inputs of 2^14 and 2^15; the block refuses them
		// before it allocates.
		{"block queries", "block-forward", `{"version":1,"epsilon":1e-5,"heads":1}`,
			Tensors{"x": shaped(1<<14, 1), "wq": shaped(1, 1<<15), "wk": shaped(1, 1<<15), "wv": shaped(1, 1<<15), "wo": shaped(1<<15, 1),
				"w1": shaped(1, 1), "w2": shaped(1, 1)}, block.ErrShape,
			`the size of the queries [Tokens, Heads, HeadDim] = 16384·1·32768, a zero dimension counted as 1; want at most MaxElements = 268435456`},
		{"ring out", "ring-attention", `{"version":1,"tokens":1}`,
			Tensors{"q": shaped(1, 1<<14, 1, 1), "k_ring": shaped(1, 1, 1, 1), "v_ring": shaped(1, 1, 1, 1<<15)}, ErrInput,
			`dim_v (input "v_ring") = 1 · 16384 · 1 · 32768 = 536870912; want at most MaxElements`},
		{"draft out", "draft-attention", `{"version":1}`,
			Tensors{"q": shaped(1, 1<<7, 1<<7, 1), "k_cache": shaped(1, 1, 1, 1), "v_cache": shaped(1, 1, 1, 1<<15),
				"k_draft": shaped(1, 1, 1<<7, 1), "v_draft": shaped(1, 1, 1<<7, 1<<15)}, ErrInput,
			`dim_v (input "v_cache") = 1 · 128 · 128 · 32768 = 536870912; want at most MaxElements`},
		{"packed out", "packed-attention", `{"version":1,"query_offsets":[0,16384],"key_offsets":[0,16384]}`,
			Tensors{"q": shaped(1<<14, 1, 1), "k": shaped(1, 1, 1), "v": shaped(1, 1, 1<<15)}, ErrInput,
			`tokens_q (input "q") · heads_q (input "q") · dim_v (input "v") = 16384 · 1 · 32768 = 536870912; want at most MaxElements`},
		// y is [rows, out]: x gives the rows (2^14 of 1 value), w2 the out
		// (2^15): 2^29 values from inputs of 2^14 and 2^15.
		{"ffn y", "ffn-forward", `{"version":1,"activation":"relu","layout":"in-by-out"}`,
			Tensors{"x": shaped(1<<14, 1), "w1": shaped(1, 1), "w2": shaped(1, 1<<15)}, ErrInput,
			`rows (input "x") · out (input "w2") = 16384 · 32768 = 536870912; want at most MaxElements = 268435456, the most values output "y" may hold`},
	}
}

// TestSizeLimits refuses every size above MaxElements, each named, in the
// one style.
func TestSizeLimits(t *testing.T) {
	for _, c := range sizeCases() {
		t.Run(c.name, func(t *testing.T) {
			for _, run := range []func(string, []byte, Tensors) (Tensors, error){Run, Run32} {
				_, err := run(c.op, []byte(c.config), c.in)
				ensure.Error(t, err)
				expect.True(t, errors.Is(err, c.want), "%v does not wrap %v", err, c.want)
				expect.True(t, strings.HasPrefix(err.Error(), c.want.Error()+": "+c.op+": "), "%q does not start with %q", err, c.want.Error()+": "+c.op+": ")
				expect.Contains(t, err.Error(), c.says)
			}
		})
	}
}

// TestEveryOpHasASizeRule: every operation either checks the sizes of its
// outputs (a case of sizeCases) or gives outputs no larger than an input,
// with the reason.
func TestEveryOpHasASizeRule(t *testing.T) {
	bounded := map[string]string{
		"activation":         "y has the shape of x",
		"activation-grad":    "dx has the shape of x",
		"softmax":            "y has the shape of x",
		"logsumexp":          "lse is x without its last dimension",
		"rotary-apply":       "y has the shape of x",
		"layernorm-forward":  "y has the shape of x",
		"rmsnorm-forward":    "y has the shape of x",
		"layernorm-backward": "dx has the shape of x, dweight and dbias that of a row of x",
		"rmsnorm-backward":   "dx has the shape of x, dweight that of a row of x",
		"attention-backward": "each gradient has the shape of its input (dsinks that of sinks, dbias that of bias)",
		"merge-splits":       "out and lse are partial_out and partial_lse without their first dimension",
		"ffn-backward":       "dx has the shape of x, each weight gradient that of its weight, db1 and db2 that of a row of w2",
	}
	checked := map[string]bool{}
	for _, c := range sizeCases() {
		checked[c.op] = true
	}
	for _, n := range Names() {
		_, b := bounded[n]
		expect.True(t, checked[n] != b, "operation %s: its output sizes are checked (sizeCases) or bounded by an input (bounded), and not both", n)
	}
}

// TestFitsAtTheLimit: MaxElements values fit and one more does not, by
// one key and by a product; a product that overflows int64 is refused,
// not wrapped around.
func TestFitsAtTheLimit(t *testing.T) {
	ensure.NoError(t, fits(ErrConfig, `output "x"`, size{`key "n"`, MaxElements}))
	ensure.NoError(t, fits(ErrConfig, `output "x"`, size{`key "a"`, 1 << 14}, size{`key "b"`, 1 << 14}))
	ensure.NoError(t, fits(ErrConfig, `output "x"`, size{`key "a"`, MaxElements}, size{`key "b"`, 0}))
	ensure.ErrorIs(t, fits(ErrConfig, `output "x"`, size{`key "n"`, MaxElements + 1}), ErrConfig)
	ensure.ErrorIs(t, fits(ErrInput, `output "x"`, size{`key "a"`, 1 << 14}, size{`key "b"`, 1<<14 + 1}), ErrInput)
	// 2^32 · 2^32 = 2^64 wraps to 0 in int64; the check must see 2^64.
	err := fits(ErrConfig, `output "x"`, size{`key "a"`, 1 << 32}, size{`key "b"`, 1 << 32})
	ensure.ErrorIs(t, err, ErrConfig)
	expect.Contains(t, err.Error(), fmt.Sprintf("= 4294967296 · 4294967296 = 18446744073709551616; want at most MaxElements = %d", MaxElements))
}

// TestSizeChecksComeFirst: a size the kernel would refuse too is refused
// by the operation's own check, before the kernel is called, under the
// operation's sentinel; a size within MaxElements that the kernel refuses
// keeps the kernel's error.
func TestSizeChecksComeFirst(t *testing.T) {
	_, err := Run("sinusoidal-table", []byte(`{"version":1,"dim":1000000000000,"length":1}`), nil)
	ensure.ErrorIs(t, err, ErrConfig)
	expect.False(t, errors.Is(err, posenc.ErrDim), "the kernel was called: %v", err)
	// 2^21 > posenc.MaxDim = 2^20, within MaxElements: the kernel's error.
	_, err = Run("sinusoidal-table", []byte(`{"version":1,"dim":2097152,"length":1}`), nil)
	ensure.ErrorIs(t, err, posenc.ErrDim)
	_, err = Run("alibi-slopes", []byte(`{"version":1,"heads":0}`), nil)
	ensure.ErrorIs(t, err, posenc.ErrHeads)
}
