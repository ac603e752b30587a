package ffntest

import (
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/suite"
)

var allActs = []ffn.Act{ffn.ActIdentity, ffn.ActReLU, ffn.ActGELU, ffn.ActGELUTanh, ffn.ActGELUSigmoid, ffn.ActSigmoid, ffn.ActSiLU, ffn.ActSwish}

var everything = Supports{
	Acts: allActs, Plain: true, Gated: true,
	Layouts:  []ffn.Layout{ffn.InByOut, ffn.OutByIn},
	Separate: true, Packings: []ffn.Packing{ffn.GateUpStacked, ffn.GateUpInterleaved},
	Bias: true, Rectangular: true,
}

func forward64(fwd func([]float64, ffn.Dims, ffn.Weights[float64], ffn.Options) ([]float64, error)) func([]float64, ffn.Weights[float64], Problem) ([]float64, error) {
	return func(x []float64, w ffn.Weights[float64], p Problem) ([]float64, error) {
		return fwd(x, p.Dims, w, p.Options)
	}
}

func backward64(bwd func([]float64, []float64, ffn.Dims, ffn.Weights[float64], ffn.Options) ([]float64, ffn.Weights[float64], error)) func([]float64, []float64, ffn.Weights[float64], Problem) ([]float64, ffn.Weights[float64], error) {
	return func(x, dy []float64, w ffn.Weights[float64], p Problem) ([]float64, ffn.Weights[float64], error) {
		return bwd(x, dy, p.Dims, w, p.Options)
	}
}

// some declares four activations (one of each kind: piecewise linear,
// erf, sigmoid, with β) and every storage form: the float32 tests run
// under it to keep their time modest (the yardsticks round every weight
// once per output), and so do the float64 ones under -short.
var some = func() Supports {
	s := everything
	s.Acts = []ffn.Act{ffn.ActReLU, ffn.ActGELU, ffn.ActSiLU, ffn.ActSwish}
	return s
}()

// few is some with one layout, for the float32 tests under -short.
var few = func() Supports {
	s := some
	s.Layouts = []ffn.Layout{ffn.OutByIn}
	s.Acts = []ffn.Act{ffn.ActGELU, ffn.ActSwish}
	return s
}()

// The float64 reference and its fast (BLAS) form pass every case, forward
// and backward, under every activation and storage convention.
func TestReference(t *testing.T) {
	s := everything
	if testing.Short() {
		s = few
	}
	t.Run("direct", func(t *testing.T) {
		Run(t, Kernel[float64]{Format: compare.Float64, Supports: s, Forward: forward64(ffn.Forward), Backward: backward64(ffn.Backward)})
	})
	t.Run("fast", func(t *testing.T) {
		Run(t, Kernel[float64]{Format: compare.Float64, Supports: s, Forward: forward64(ffn.ForwardFast), Backward: backward64(ffn.BackwardFast)})
	})
}

// The float32 fast form passes, forward and backward, in float32, and the
// direct form with its output rounded passes in bfloat16. The fast form
// is one of the two yardsticks, so this checks the suite's wiring (formats,
// weight forms, gradients), not the kernel.
func TestFloat32Kernels(t *testing.T) {
	s := some
	backward := func(x, dy []float32, w ffn.Weights[float32], p Problem) ([]float32, ffn.Weights[float32], error) {
		return ffn.BackwardFast32(x, dy, p.Dims, w, p.Options)
	}
	if testing.Short() {
		s, backward = few, nil // ten yardsticks per subtest are slow under the race detector
	}
	Run(t, Kernel[float32]{Supports: s, Backward: backward,
		Forward: func(x []float32, w ffn.Weights[float32], p Problem) ([]float32, error) {
			return ffn.ForwardFast32(x, p.Dims, w, p.Options)
		}})
	t.Run("bfloat16", func(t *testing.T) {
		Run(t, Kernel[float32]{Format: compare.BFloat16, Supports: s,
			Forward: func(x []float32, w ffn.Weights[float32], p Problem) ([]float32, error) {
				y, err := ffn.Forward32(x, p.Dims, w, p.Options)
				for i := range y {
					y[i] = float32(compare.BFloat16.Round(float64(y[i])))
				}
				return y, err
			}})
	})
}

func failures[E float32 | float64](k Kernel[E]) (*conformance.Recorder, []string) {
	rec := &conformance.Recorder{}
	Run(rec, k)
	return rec, rec.Failures()
}

// Each slip is a float64 kernel with one convention wrong; the suite
// fails it where it shows, and names case, conventions and worst element.
func TestCatchesSlips(t *testing.T) {
	for _, s := range []struct {
		name          string
		supports      Supports
		kernel        func([]float64, ffn.Weights[float64], Problem) ([]float64, error)
		fails, passes string
		says          string
		diagnosis     string // the diagnosis line of fails, up to its normwise error
	}{
		{"tanh GELU for exact GELU",
			Supports{Acts: []ffn.Act{ffn.ActGELU, ffn.ActReLU}, Gated: true, Plain: true},
			func(x []float64, w ffn.Weights[float64], p Problem) ([]float64, error) {
				o := p.Options
				if o.Act == ffn.ActGELU {
					o.Act = ffn.ActGELUTanh
				}
				return ffn.Forward(x, p.Dims, w, o)
			}, "small/gelu/gated/in-by-out/separate", "small/relu/plain/in-by-out", "gelu gated, in-by-out, no biases): y differs from the reference",
			`  it matches "activation": "gelu-tanh" [Options.Act, Supports.Acts]`},
		{"activation on the value projection",
			Supports{Acts: []ffn.Act{ffn.ActSiLU}, Gated: true},
			func(x []float64, w ffn.Weights[float64], p Problem) ([]float64, error) {
				w.W1, w.V = w.V, w.W1
				return ffn.Forward(x, p.Dims, w, p.Options)
			}, "realistic/silu/gated/in-by-out/separate", "", "worst element [row, output]",
			"  it matches w1 and v swapped (gate and value projections)"},
		{"packing",
			Supports{Acts: []ffn.Act{ffn.ActSiLU}, Gated: true, Packings: []ffn.Packing{ffn.GateUpStacked, ffn.GateUpInterleaved}},
			func(x []float64, w ffn.Weights[float64], p Problem) ([]float64, error) {
				o := p.Options
				o.Packing = 1 - o.Packing // the other of GateUpStacked (0) and GateUpInterleaved (1)
				return ffn.Forward(x, p.Dims, w, o)
			}, "small/silu/gated/in-by-out/interleaved", "", "fused interleaved",
			`  it matches "packing": "stacked" [Options.Packing, Supports.Packings]`},
		{"layout",
			Supports{Acts: []ffn.Act{ffn.ActReLU}, Layouts: []ffn.Layout{ffn.InByOut, ffn.OutByIn}},
			func(x []float64, w ffn.Weights[float64], p Problem) ([]float64, error) {
				o := p.Options
				o.Layout = ffn.InByOut
				return ffn.Forward(x, p.Dims, w, o)
			}, "small/relu/plain/out-by-in", "small/relu/plain/in-by-out", "relu plain, out-by-in",
			`  it matches "layout": "in-by-out" [Options.Layout, Supports.Layouts]`},
	} {
		t.Run(s.name, func(t *testing.T) {
			rec, _ := failures(Kernel[float64]{Format: compare.Float64, Supports: s.supports, Forward: s.kernel})
			msg := suite.Failed(t, rec, s.fails, s.says)
			expect.True(t, strings.HasPrefix(suite.DiagnosisLine(t, msg), s.diagnosis), msg)
			if s.passes != "" {
				suite.Passed(t, rec, s.passes)
			}
		})
	}
}

// Undeclared needs are skipped with a message.
func TestSkips(t *testing.T) {
	rec, failed := failures(Kernel[float64]{Format: compare.Float64, Forward: forward64(ffn.Forward), Supports: Supports{Acts: []ffn.Act{ffn.ActReLU}}})
	expect.Empty(t, failed)
	suite.Skipped(t, rec, "rectangular/relu/plain/in-by-out", "Out ≠ In (Rectangular)")
	suite.Skipped(t, rec, "biases/relu/plain/in-by-out", "biases (Bias)")
	suite.Passed(t, rec, "realistic/relu/plain/in-by-out")
}

// A backward pass that returns the gradient of W₂ as [in, out] when the
// weights are stored [out, in] fails with a message naming the gradient
// and the worst element in the stored layout.
func TestCatchesBackwardSlip(t *testing.T) {
	k := Kernel[float64]{Format: compare.Float64, Forward: forward64(ffn.Forward),
		Supports: Supports{Acts: []ffn.Act{ffn.ActReLU}, Layouts: []ffn.Layout{ffn.InByOut, ffn.OutByIn}},
		Backward: func(x, dy []float64, w ffn.Weights[float64], p Problem) ([]float64, ffn.Weights[float64], error) {
			dx, g, err := ffn.Backward(x, dy, p.Dims, w, p.Options)
			if err == nil && p.Options.Layout == ffn.OutByIn { // the slip: dW2 left as [hidden, out]
				h, o := p.Dims.Hidden, p.Dims.Out
				t := make([]float64, len(g.W2))
				for i := 0; i < h; i++ {
					for j := 0; j < o; j++ {
						t[i*o+j] = g.W2[j*h+i]
					}
				}
				g.W2 = t
			}
			return dx, g, err
		}}
	rec, _ := failures(k)
	msg := suite.Failed(t, rec, "small/relu/plain/out-by-in", "dW2 differs from the reference", "worst element [output, hidden]")
	suite.Passed(t, rec, "small/relu/plain/in-by-out")
	// ffn-backward is posed, but a gradient written in the other layout
	// is no change the diagnosis searches: it names none.
	expect.Equal(t, "  no single change of its conventions explains it", suite.DiagnosisLine(t, msg), msg)
}
