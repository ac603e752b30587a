package ops

import (
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
)

// formOps are the operations whose kernels have a fast and a direct form.
var formOps = []string{"attention-backward", "attention-forward", "ffn-backward", "ffn-forward"}

// requireSameRuns runs op on config and in with the fast forms (the
// default) and with the direct forms (UseDirectForms), both Run and Run32,
// and requires the same bits; fast are the fast form's outputs of Run when
// the caller has them already (nil: run them).
func requireSameRuns(t *testing.T, label, op string, config []byte, in, fast Tensors) {
	t.Helper()
	var err error
	if fast == nil {
		fast, err = Run(op, config, in)
		ensure.NoError(t, err, label)
	}
	fast32, err := Run32(op, config, in)
	ensure.NoError(t, err, label)
	defer UseDirectForms(UseDirectForms(true))
	slow, err := Run(op, config, in)
	ensure.NoError(t, err, label)
	slow32, err := Run32(op, config, in)
	ensure.NoError(t, err, label)
	for _, run := range []struct {
		name       string
		fast, slow Tensors
	}{{"Run", fast, slow}, {"Run32", fast32, slow32}} {
		ensure.Equal(t, slices.Sorted(maps.Keys(run.slow)), slices.Sorted(maps.Keys(run.fast)), "%s: %s outputs", label, run.name)
		for name, s := range run.slow {
			f := run.fast[name]
			ensure.Equal(t, s.Shape, f.Shape, "%s: %s %q", label, run.name, name)
			for i := range s.Data {
				if math.Float64bits(s.Data[i]) != math.Float64bits(f.Data[i]) {
					t.Fatalf("%s: %s output %q[%d]: the fast form gives %v, the direct form %v", label, run.name, name, i, f.Data[i], s.Data[i])
				}
			}
		}
	}
}

// TestFastFormsAreDirect: the attention and feed-forward operations give
// the same bits with the fast forms (the default) as with the direct forms
// (UseDirectForms), the golden-verified definitions: on every golden case
// (whose outputs TestGoldenThroughOps checks against the 50-digit values
// too), and on random problems of several blocks of rows with the options
// the golden cases vary, float64 and float32 runs alike.
func TestFastFormsAreDirect(t *testing.T) {
	seen := map[string]int{}
	onGoldenRun = func(t *testing.T, op string, config []byte, in, out Tensors) {
		if !slices.Contains(formOps, op) {
			return
		}
		seen[op]++
		requireSameRuns(t, op, op, config, in, out)
	}
	t.Run("golden", TestGoldenThroughOps)
	onGoldenRun = nil
	for _, op := range formOps {
		ensure.Positive(t, seen[op], "golden cases of %s", op)
	}

	r := rand.New(rand.NewPCG(31, 32))
	randn := func(shape ...int) Tensor {
		n := 1
		for _, d := range shape {
			n *= d
		}
		x := make([]float64, n)
		for i := range x {
			x[i] = r.NormFloat64()
		}
		return Tensor{shape, x}
	}
	trials := 6
	if testing.Short() {
		trials = 2
	}
	for trial := range trials {
		b, hkv, lq, d := 1+r.IntN(2), 1+r.IntN(2), 65+r.IntN(140), 8+r.IntN(24)
		hq, lk := hkv*(1+r.IntN(3)), lq+r.IntN(40)
		in := Tensors{"q": randn(b, hq, lq, d), "k": randn(b, hkv, lk, d), "v": randn(b, hkv, lk, d), "dout": randn(b, hq, lq, d)}
		cfg := map[string]any{"version": 1, "group": []string{"blocks", "cycle"}[trial%2]}
		switch trial % 3 {
		case 0:
			cfg["mask"] = []map[string]any{{"kind": "causal"}}
			in["sinks"] = randn(hq)
		case 1:
			cfg["mask"] = []map[string]any{{"kind": "window", "size": 1 + r.IntN(70)}}
			cfg["soft_cap"] = 2.5
		default:
			in["bias"] = randn(1, hq, lq, lk)
		}
		config, err := json.Marshal(cfg)
		ensure.NoError(t, err)
		label := fmt.Sprintf("trial %d: %s, q %v, k %v", trial, config, in["q"].Shape, in["k"].Shape)
		fwd := maps.Clone(in)
		delete(fwd, "dout")
		requireSameRuns(t, "attention-forward "+label, "attention-forward", config, fwd, nil)
		requireSameRuns(t, "attention-backward "+label, "attention-backward", config, in, nil)

		rows, din, hidden, dout := 1+r.IntN(150), 1+r.IntN(200), 1+r.IntN(300), 1+r.IntN(100)
		layout := []string{"in-by-out", "out-by-in"}[trial%2]
		mat := func(i, o int) Tensor {
			if layout == "in-by-out" {
				return randn(i, o)
			}
			return randn(o, i)
		}
		fcfg := map[string]any{"version": 1, "activation": []string{"silu", "gelu", "relu"}[trial%3], "layout": layout, "gated": trial%3 != 2}
		fin := Tensors{"x": randn(rows, din), "w2": mat(hidden, dout), "b2": randn(dout), "dy": randn(rows, dout)}
		switch {
		case trial%3 == 2:
			fin["w1"], fin["b1"] = mat(din, hidden), randn(hidden)
		case trial%2 == 0:
			fcfg["packing"] = "interleaved"
			fin["fused"], fin["fused_bias"] = mat(din, 2*hidden), randn(2*hidden)
		default:
			fin["w1"], fin["v"], fin["c"] = mat(din, hidden), mat(din, hidden), randn(hidden)
		}
		config, err = json.Marshal(fcfg)
		ensure.NoError(t, err)
		label = fmt.Sprintf("trial %d: %s, x %v, hidden %d", trial, config, fin["x"].Shape, hidden)
		fwd = maps.Clone(fin)
		delete(fwd, "dy")
		requireSameRuns(t, "ffn-forward "+label, "ffn-forward", config, fwd, nil)
		requireSameRuns(t, "ffn-backward "+label, "ffn-backward", config, fin, nil)
	}
}

// UseDirectForms returns the previous choice, and the fast forms are the
// default.
func TestUseDirectForms(t *testing.T) {
	ensure.False(t, UseDirectForms(true), "the fast forms are the default")
	ensure.True(t, UseDirectForms(false))
	ensure.False(t, UseDirectForms(false))
}
