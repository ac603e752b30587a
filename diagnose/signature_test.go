package diagnose

import (
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// signatureOf runs the diagnosis of got and returns the signatures of
// output n along the given axis, as text.
func signatureOf(t *testing.T, op, cfg string, in, got ops.Tensors, n, along string) string {
	res, err := Run(op, []byte(cfg), in, got, compare.Float32, Options{MaxCandidates: 1})
	ensure.NoError(t, err)
	var s []string
	for _, g := range res.Signatures {
		if g.Output == n && g.Along == along {
			s = append(s, g.String())
		}
	}
	return strings.Join(s, "\n")
}

// perturbed returns ref's output n with delta(index along axis, flat
// offset) added to every element.
func perturbed(ref ops.Tensor, inner, size int, delta func(i int) float64) ops.Tensor {
	d := append([]float64(nil), ref.Data...)
	for k := range d {
		d[k] += delta((k / inner) % size)
	}
	return ops.Tensor{Shape: ref.Shape, Data: d}
}

func TestSignatures(t *testing.T) {
	const fwd = `{"version":1,"mask":[{"kind":"causal"}]}`
	in := attnInputs(1, 4, 2, 6, 6, 8, 1)

	// A port whose query head h reads kv head h mod 2 of 2 (4 query heads):
	// heads 0 and 3 read the same kv head under both maps (0/2 = 0 mod 2,
	// 3/2 = 3 mod 2 = 1), so exactly they are right.
	a := attnBase(1, 4, 2, 6, 6, 8)
	a.kv = func(h int) int { return h % 2 }
	out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
	got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
	ensure.Contains(t, signatureOf(t, "attention-forward", fwd, in, got, "out", "heads"), "h/2 = h mod 2 (0, 3)")

	ref, err := ops.Run("attention-forward", []byte(fwd), in)
	ensure.NoError(t, err)
	// Positions 3 on off by 1e-3: a step at 3 (out is [1, 4, 6, 8]: the
	// position axis has inner size 8).
	step := ops.Tensors{"out": perturbed(ref["out"], 8, 6, func(p int) float64 {
		if p >= 3 {
			return 1e-3
		}
		return 0
	})}
	ensure.Contains(t, signatureOf(t, "attention-forward", fwd, in, step, "out", "positions"), "a step: exact at positions 0–2, wrong from 3 on")
	// An error of p·1e-3 at position p: exact at 0, linear growth.
	lin := ops.Tensors{"out": perturbed(ref["out"], 8, 6, func(p int) float64 { return float64(p) * 1e-3 })}
	ensure.Contains(t, signatureOf(t, "attention-forward", fwd, in, lin, "out", "positions"), "exact at position 0, the error growing linearly")
	// Only the second half of the dims wrong.
	half := ops.Tensors{"out": perturbed(ref["out"], 1, 8, func(d int) float64 {
		if d >= 4 {
			return 1e-3
		}
		return 0
	})}
	ensure.Contains(t, signatureOf(t, "attention-forward", fwd, in, half, "out", "dims"), "only dims 4–7 (the second half) wrong")
	// Errors equal on (2i, 2i+1) and different between i and i+4.
	pairs := ops.Tensors{"out": perturbed(ref["out"], 1, 8, func(d int) float64 { return 1e-3 * float64(1+d/2) })}
	ensure.Contains(t, signatureOf(t, "attention-forward", fwd, in, pairs, "out", "dims"), "errors equal on the pairs (2i, 2i+1)")

	// An output scaled by 1/2.
	x := ops.Tensors{"x": {Shape: []int{4, 16}, Data: uniform(3, 64, -3, 3)}}
	y, err := ops.Run("activation", []byte(`{"version":1,"function":"silu"}`), x)
	ensure.NoError(t, err)
	halfY := ops.Tensors{"y": perturbed(y["y"], 1, 1, func(int) float64 { return 0 })}
	for i := range halfY["y"].Data {
		halfY["y"].Data[i] /= 2
	}
	ensure.Contains(t, signatureOf(t, "activation", `{"version":1,"function":"silu"}`, x, halfY, "y", "scale"), "c = 0.5 ≈ 1/2")
}
