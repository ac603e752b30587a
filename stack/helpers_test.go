package stack_test

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/stack"
)

// demoManifest is the demo model's manifest: 2 layers of width 64, 4 query
// heads on 2 kv heads of dimension 16, a SwiGLU feed-forward layer of 128
// units, a vocabulary of 100 tokens, RMSNorm, rotary encoding, a final
// norm, logits tied to the embedding.
func demoManifest() *stack.Manifest {
	m := &stack.Manifest{Format: stack.ManifestFormat, Weights: "demo.npz",
		Layers: 2, Vocab: 100, Width: 64, Heads: 4, HeadsKV: 2, HeadDim: 16, Hidden: 128,
		Epsilon: 1e-5, Gated: true, FinalNorm: true, Tied: true,
		Rotary:     &stack.ManifestRotary{Base: 10000},
		Names:      map[string]string{"embed": "embed", "final_norm": "final_norm"},
		LayerNames: map[string]string{}}
	m.NormKind = block.RMSNorm
	if err := m.Act.UnmarshalText([]byte("silu")); err != nil {
		panic(err)
	}
	if err := m.Rotary.Pairing.UnmarshalText([]byte("halves")); err != nil {
		panic(err)
	}
	for _, k := range []string{"norm1", "q", "k", "v", "o", "norm2", "ffn_w1", "ffn_v", "ffn_w2"} {
		m.LayerNames[k] = "layers." + stack.LayerMark + "." + k
	}
	return m
}

// demoArrays draws the demo model's weights: each array from its own seed
// (gen.Uniform, in [−s, s) with s = 1/√fan-in for matrices; norm weights
// in [0.5, 1.5); the embedding in [−1, 1)), each rounded to the nearest
// multiple of 2⁻⁸ (exact in float32, with the low 16 bits of every value
// zero, so the stored archive holds few bytes that read as text).
func demoArrays(m *stack.Manifest) (names []string, arrays map[string]*npy.Array) {
	arrays = map[string]*npy.Array{}
	seed := uint64(1)
	add := func(name string, shape []int, low, high float64) {
		n := 1
		for _, v := range shape {
			n *= v
		}
		v, err := gen.Uniform(seed, n, low, high)
		if err != nil {
			panic(err)
		}
		seed++
		f := make([]float32, n)
		for i := range v {
			f[i] = float32(math.Round(v[i]*256) / 256)
		}
		a, err := npy.New(npy.Float32, shape, f)
		if err != nil {
			panic(err)
		}
		names = append(names, name)
		arrays[name] = a
	}
	W, H, nq, nkv := m.Width, m.Hidden, m.Heads*m.HeadDim, m.HeadsKV*m.HeadDim
	add("embed", []int{m.Vocab, W}, -1, 1)
	add("final_norm", []int{W}, 0.5, 1.5)
	s := 1 / math.Sqrt(float64(W))
	for l := range m.Layers {
		p := fmt.Sprintf("layers.%d.", l)
		add(p+"norm1", []int{W}, 0.5, 1.5)
		add(p+"q", []int{W, nq}, -s, s)
		add(p+"k", []int{W, nkv}, -s, s)
		add(p+"v", []int{W, nkv}, -s, s)
		add(p+"o", []int{nq, W}, -s, s)
		add(p+"norm2", []int{W}, 0.5, 1.5)
		add(p+"ffn_w1", []int{W, H}, -s, s)
		add(p+"ffn_v", []int{W, H}, -s, s)
		add(p+"ffn_w2", []int{H, W}, -1/math.Sqrt(float64(H)), 1/math.Sqrt(float64(H)))
	}
	return names, arrays
}

// demoFiles returns the demo model's manifest text and .npz archive.
func demoFiles() (manifest, archive []byte) {
	m := demoManifest()
	j, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		panic(err)
	}
	names, arrays := demoArrays(m)
	var buf bytes.Buffer
	w := npy.NewArchiveWriter(&buf, false)
	for _, n := range names {
		if err := w.Add(n, arrays[n]); err != nil {
			panic(err)
		}
	}
	if err := w.Close(); err != nil {
		panic(err)
	}
	return append(j, '\n'), buf.Bytes()
}
