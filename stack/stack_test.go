package stack_test

import (
	"math"
	"path/filepath"
	"testing"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/posenc"
	"github.com/plumbref/plumb/stack"
)

// The shipped demo files are what demoFiles writes (go test ./stack -run
// TestDemoFiles -update rewrites them).
func TestDemoFiles(t *testing.T) {
	m, z := demoFiles()
	golden.WholeFile(t, "testdata/demo/manifest.json", string(m))
	golden.WholeFile(t, "testdata/demo/demo.npz", string(z))
}

// demo loads the shipped demo model into memory.
func demo(t *testing.T) (stack.Config, *stack.Memory[float64], *stack.Files[float64]) {
	t.Helper()
	m, err := stack.ReadManifest("testdata/demo/manifest.json")
	ensure.NoError(t, err)
	c, err := m.Config()
	ensure.NoError(t, err)
	f, err := stack.NewFiles[float64](m)
	ensure.NoError(t, err)
	mem := &stack.Memory[float64]{}
	mem.Global, err = f.Globals()
	ensure.NoError(t, err)
	for l := range c.Layers {
		w, err := f.Layer(l)
		ensure.NoError(t, err)
		mem.Layers = append(mem.Layers, w)
	}
	return c, mem, f
}

var prompt = []int{3, 14, 15, 92, 65, 35}

// Forward is the embedding rows, the blocks in order, the final norm and
// the tied product written out here as loops (the ascending sum of
// rounded products of package block's projections), bit for bit.
func TestForwardIsTheComposition(t *testing.T) {
	c, mem, _ := demo(t)
	got, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	W := c.Width
	x := make([]float64, 0, len(prompt)*W)
	for _, id := range prompt {
		x = append(x, mem.Global.Embed[id*W:(id+1)*W]...)
	}
	d := block.Dims{Tokens: len(prompt), Width: W, Heads: c.Heads, HeadsKV: c.HeadsKV, HeadDim: c.HeadDim, Hidden: c.Hidden}
	for l := range c.Layers {
		r, err := block.Forward(x, d, mem.Layers[l], block.Cache[float64]{}, c.Block)
		ensure.NoError(t, err)
		x = r.Out
		expect.True(t, bitsEqual(r.Present.K, got.Present[l].K), "layer %d present K", l)
	}
	h, err := norm.RMSNorm(x, W, mem.Global.Norm, c.Block.Norm)
	ensure.NoError(t, err)
	for tk := range prompt {
		for v := range c.Vocab {
			s := 0.0
			for i := range W {
				s = float64(h[tk*W+i]*mem.Global.Embed[v*W+i]) + s
			}
			if g := got.Logits[tk*c.Vocab+v]; math.Float64bits(g) != math.Float64bits(s) {
				t.Fatalf("logit [%d, %d] = %v; want %v", tk, v, g, s)
			}
		}
	}
}

// The fast forms give the direct forms' bits; the float32 twins are
// within float32 accuracy.
func TestForms(t *testing.T) {
	c, mem, _ := demo(t)
	a, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	b, err := stack.ForwardFast(prompt, c, mem, nil)
	ensure.NoError(t, err)
	expect.True(t, bitsEqual(a.Logits, b.Logits), "ForwardFast's logits are not Forward's bits")
	m32 := narrow(mem)
	for name, f := range map[string]func([]int, stack.Config, stack.Source[float32], []block.Cache[float32]) (stack.Result[float32], error){
		"Forward32": stack.Forward32, "ForwardFast32": stack.ForwardFast32} {
		r, err := f(prompt, c, m32, nil)
		ensure.NoError(t, err)
		e := golden.NormwiseRelErr(widen(r.Logits), a.Logits)
		// float32 rounding: a few ulps of 2^-24 per operation over two blocks; 1e-5 is the float32 scale with margin.
		expect.True(t, e < 1e-5, "%s: normwise error %g; want < 1e-5", name, e)
	}
	g, err := stack.Greedy(prompt, 4, c, mem)
	ensure.NoError(t, err)
	gf, err := stack.GreedyFast(prompt, 4, c, mem)
	ensure.NoError(t, err)
	expect.Equal(t, g.Tokens, gf.Tokens)
	expect.True(t, bitsEqual(g.Logits, gf.Logits), "GreedyFast's logits are not Greedy's bits")
	g32, err := stack.Greedy32(prompt, 4, c, m32)
	ensure.NoError(t, err)
	expect.Len(t, g32.Tokens, 4)
	gf32, err := stack.GreedyFast32(prompt, 4, c, m32)
	ensure.NoError(t, err)
	expect.Equal(t, g32.Tokens, gf32.Tokens)
}

// decodeBound bounds the normwise distance between the logits of a
// greedy step through the cache and the same row of one full forward of
// the prompt and the chosen tokens. Every projection, rotation and cached
// key is the same bits row by row in both (package block's cache test);
// attention sums one query over the same keys in a call of another
// length, which package block bounds by 1e-15 per block, and the two
// blocks, the norm and the logits carry that through a few more
// roundings: 1e-14, the project's target, is the bound. Measured on the
// demo model (12 greedy steps; chunks of 1 to 4 tokens; Forward and
// ForwardFast): 0, the same bits.
const decodeBound = 1e-14

// Prefill then k one-token steps through the cache gives the logits of one
// forward of prompt + the chosen tokens, and the tokens are the argmax,
// lowest id first, of those rows.
func TestGreedyIsTheFullForward(t *testing.T) {
	c, mem, _ := demo(t)
	const k = 5
	g, err := stack.Greedy(prompt, k, c, mem)
	ensure.NoError(t, err)
	all := append(append([]int(nil), prompt...), g.Tokens[:k-1]...)
	full, err := stack.Forward(all, c, mem, nil)
	ensure.NoError(t, err)
	V := c.Vocab
	for s := range k {
		row := full.Logits[(len(prompt)-1+s)*V : (len(prompt)+s)*V]
		e := golden.NormwiseRelErr(g.Logits[s*V:(s+1)*V], row)
		expect.True(t, e <= decodeBound, "step %d: normwise error %g; want ≤ %g", s, e, decodeBound)
		best := 0
		for i, v := range row {
			if v > row[best] {
				best = i
			}
		}
		expect.Equal(t, best, g.Tokens[s], "step %d", s)
	}
	for l := range c.Layers {
		e := golden.NormwiseRelErr(g.Present[l].K, full.Present[l].K)
		expect.True(t, e == 0, "layer %d: the present keys differ from the full forward's by %g", l, e)
	}
}

// Chunked prefill, chunks of c tokens each through the caches of the one
// before, gives the whole prefill's logits and caches within the decode
// bound.
func TestChunkedPrefill(t *testing.T) {
	c, mem, _ := demo(t)
	whole, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	for _, n := range []int{1, 2, 4} {
		var past []block.Cache[float64]
		var logits []float64
		for i := 0; i < len(prompt); i += n {
			r, err := stack.ForwardFast(prompt[i:min(i+n, len(prompt))], c, mem, past)
			ensure.NoError(t, err)
			logits, past = append(logits, r.Logits...), r.Present
		}
		e := golden.NormwiseRelErr(logits, whole.Logits)
		expect.True(t, e <= decodeBound, "chunks of %d: normwise error %g; want ≤ %g", n, e, decodeBound)
		for l := range c.Layers {
			expect.True(t, bitsEqual(past[l].V, whole.Present[l].V), "chunks of %d: layer %d values", n, l)
		}
	}
}

// argmax ties go to the lowest id: with a separate head of zeros every
// logit is exactly 0 and the first token is id 0; with columns 40 and 70
// of the head equal, those two logits are the same bits and, being the
// largest, give id 40.
func TestGreedyTieRule(t *testing.T) {
	c, mem, _ := demo(t)
	c.Tied = false
	m := &stack.Memory[float64]{Global: mem.Global, Layers: mem.Layers}
	m.Global.Head = make([]float64, c.Width*c.Vocab)
	g, err := stack.Greedy(prompt, 2, c, m)
	ensure.NoError(t, err)
	expect.Equal(t, []int{0, 0}, g.Tokens, "every logit 0: the lowest id")
	// column j of the head [Width, Vocab] is the embedding row of the
	// token the tied model prefers, so h·column is the largest logit of
	// the tied model's last row.
	tied, err := stack.Greedy(prompt, 1, func() stack.Config { d := c; d.Tied = true; return d }(), mem)
	ensure.NoError(t, err)
	best := tied.Tokens[0]
	for _, j := range []int{70, 40} {
		for i := range c.Width {
			m.Global.Head[i*c.Vocab+j] = mem.Global.Embed[best*c.Width+i]
		}
	}
	g, err = stack.Greedy(prompt, 1, c, m)
	ensure.NoError(t, err)
	ensure.Equal(t, g.Logits[40], g.Logits[70], "the two columns tie")
	ensure.True(t, g.Logits[40] > 0, "the tied columns' logit %g; want > 0, the others' value", g.Logits[40])
	expect.Equal(t, []int{40}, g.Tokens, "the lower of two tied ids")
}

// The cache size of a configuration: 2 · layers · kv heads · head dim ·
// tokens · bytes (common practice), worked by hand for 32 layers, 8 kv
// heads of dimension 128, 4096 tokens of 2 bytes: 2·32·8·128·4096·2 =
// 536870912 (512 MiB).
func TestCacheBytes(t *testing.T) {
	c := stack.Config{Layers: 32, Vocab: 1, Width: 4096, Heads: 32, HeadsKV: 8, HeadDim: 128, Hidden: 14336}
	n, err := stack.CacheBytes(c, 4096, 2)
	ensure.NoError(t, err)
	expect.Equal(t, int64(536870912), n)
	dm, _, _ := demo(t)
	n, err = stack.CacheBytes(dm, 10, 8)
	ensure.NoError(t, err)
	expect.Equal(t, int64(2*2*2*16*10*8), n, "demo model, 10 tokens of float64")
	_, err = stack.CacheBytes(c, -1, 2)
	expect.ErrorIs(t, err, stack.ErrConfig)
	_, err = stack.CacheBytes(c, math.MaxInt64/4, 2)
	expect.ErrorIs(t, err, stack.ErrConfig)
}

// The weights read from a directory of .npy files are those of the .npz
// archive, and give the same logits.
func TestDirectoryOfFiles(t *testing.T) {
	c, mem, _ := demo(t)
	dir := t.TempDir()
	m := demoManifest()
	names, arrays := demoArrays(m)
	for _, n := range names {
		ensure.NoError(t, npy.WriteFile(filepath.Join(dir, n+".npy"), arrays[n]))
	}
	m.Weights = dir
	f, err := stack.NewFiles[float64](m)
	ensure.NoError(t, err)
	a, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	b, err := stack.Forward(prompt, c, f, nil)
	ensure.NoError(t, err)
	expect.True(t, bitsEqual(a.Logits, b.Logits), "directory and archive differ")
}

// Token ids from an integer .npy array; a float array is refused.
func TestIDs(t *testing.T) {
	a, err := npy.New(npy.Int64, []int{3}, []int64{5, 0, 99})
	ensure.NoError(t, err)
	ids, err := stack.IDs(a)
	ensure.NoError(t, err)
	expect.Equal(t, []int{5, 0, 99}, ids)
	u, err := npy.New(npy.Uint16, []int{2}, []uint16{1, 2})
	ensure.NoError(t, err)
	ids, err = stack.IDs(u)
	ensure.NoError(t, err)
	expect.Equal(t, []int{1, 2}, ids)
	f, err := npy.New(npy.Float32, []int{2}, []float32{1, 2})
	ensure.NoError(t, err)
	_, err = stack.IDs(f)
	expect.ErrorIs(t, err, stack.ErrToken)
	expect.ErrorContains(t, err, "float32")
	h, err := npy.New(npy.Float16, []int{1}, []uint16{0x3c00})
	ensure.NoError(t, err)
	_, err = stack.IDs(h)
	expect.ErrorIs(t, err, stack.ErrToken)
}

// A sinusoidal encoding adds the table at positions Past + t: a prefill
// and a one-token step through the cache agree with the full forward.
func TestSinusoidal(t *testing.T) {
	c, mem, _ := demo(t)
	c.Sinusoidal = &posenc.Sinusoidal{Dim: c.Width}
	full, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	pre, err := stack.Forward(prompt[:5], c, mem, nil)
	ensure.NoError(t, err)
	one, err := stack.Forward(prompt[5:], c, mem, pre.Present)
	ensure.NoError(t, err)
	e := golden.NormwiseRelErr(one.Logits, full.Logits[5*c.Vocab:])
	expect.True(t, e <= decodeBound, "normwise error %g; want ≤ %g", e, decodeBound)
	plain, _, _ := demo(t)
	p, err := stack.Forward(prompt, plain, mem, nil)
	ensure.NoError(t, err)
	expect.False(t, bitsEqual(p.Logits, full.Logits), "the encoding changed nothing")
	c.Sinusoidal.Dim = 8
	_, err = stack.Forward(prompt, c, mem, nil)
	expect.ErrorIs(t, err, stack.ErrConfig)
}

func TestErrors(t *testing.T) {
	c, mem, _ := demo(t)
	_, err := stack.Forward([]int{1, 100}, c, mem, nil)
	expect.ErrorIs(t, err, stack.ErrToken)
	expect.ErrorContains(t, err, "ids[1] = 100; want 0 ≤ id < Vocab = 100")
	_, err = stack.Forward([]int{-1}, c, mem, nil)
	expect.ErrorIs(t, err, stack.ErrToken)
	_, err = stack.Greedy(nil, 1, c, mem)
	expect.ErrorIs(t, err, stack.ErrToken)
	_, err = stack.Greedy(prompt, -1, c, mem)
	expect.ErrorIs(t, err, stack.ErrConfig)
	_, err = stack.Forward(prompt, c, mem, make([]block.Cache[float64], 1))
	expect.ErrorIs(t, err, stack.ErrCache)
	r, err := stack.Forward(prompt[:2], c, mem, nil)
	ensure.NoError(t, err)
	r.Present[1].K = r.Present[1].K[:32]
	_, err = stack.Forward(prompt[:1], c, mem, r.Present)
	expect.ErrorIs(t, err, stack.ErrCache)

	bad := &stack.Memory[float64]{Global: mem.Global, Layers: append([]block.Weights[float64](nil), mem.Layers...)}
	bad.Layers[1].K = bad.Layers[1].K[:10]
	_, err = stack.Forward(prompt, c, bad, nil)
	expect.ErrorIs(t, err, block.ErrWeight)
	expect.ErrorContains(t, err, "layer 1")
	bad.Layers = mem.Layers
	bad.Global.Head = []float64{1}
	_, err = stack.Forward(prompt, c, bad, nil)
	expect.ErrorIs(t, err, stack.ErrWeight)
	expect.ErrorContains(t, err, "weight head")
	c0 := c
	c0.Layers = 0
	_, err = stack.Forward(prompt, c0, mem, nil)
	expect.ErrorIs(t, err, stack.ErrConfig)
	_, err = stack.Forward(prompt, c, nil, nil)
	expect.ErrorIs(t, err, stack.ErrWeight)
	nan := &stack.Memory[float64]{Global: mem.Global, Layers: mem.Layers}
	nan.Global.Embed = append([]float64(nil), mem.Global.Embed...)
	nan.Global.Embed[3*c.Width] = math.NaN()
	_, err = stack.Greedy([]int{3}, 1, c, nan)
	expect.ErrorIs(t, err, stack.ErrLogits)
}

// Manifests and weight files at fault: the error names the weight, its
// layer, the shapes, the key.
func TestManifestErrors(t *testing.T) {
	text, _ := demoFiles()
	for _, tc := range []struct {
		name, from, to string
		want           error
		part           string
	}{
		{"unknown key", `"layers": 2`, `"layers": 2, "layer": 3`, stack.ErrManifest, `unknown field "layer"`},
		{"format", stack.ManifestFormat, "other/1", stack.ErrManifest, "format"},
		{"names key", `"embed": "embed"`, `"embedding": "embed"`, stack.ErrManifest, `"embedding"`},
		{"layer key", `"ffn_v":`, `"ffn_u":`, stack.ErrManifest, `"ffn_u"`},
		{"no mark", `"layers.{layer}.q"`, `"layers.q"`, stack.ErrManifest, "{layer}"},
		{"word", `"rms-norm"`, `"rms"`, block.ErrOption, "rms"},
		{"size", `"vocab": 100`, `"vocab": 0`, stack.ErrConfig, "Vocab = 0"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := string(text)
			ensure.Contains(t, s, tc.from)
			_, err := stack.ParseManifest([]byte(replaceOnce(s, tc.from, tc.to)))
			expect.ErrorIs(t, err, tc.want)
			expect.ErrorContains(t, err, tc.part)
		})
	}
	m := demoManifest()
	names, arrays := demoArrays(m)
	dir := t.TempDir()
	for _, n := range names {
		a := arrays[n]
		switch n {
		case "layers.1.ffn_v":
			continue // missing
		case "layers.0.k":
			a, _ = npy.New(npy.Float32, []int{32, 64}, a.Values) // transposed shape
		}
		ensure.NoError(t, npy.WriteFile(filepath.Join(dir, n+".npy"), a))
	}
	m.Weights = dir
	f, err := stack.NewFiles[float64](m)
	ensure.NoError(t, err)
	_, err = f.Layer(0)
	expect.ErrorIs(t, err, stack.ErrWeight)
	expect.ErrorContains(t, err, `layer 0 weight k, the array "layers.0.k", has shape [32, 64]; want [64, 32]`)
	_, err = f.Layer(1)
	expect.ErrorIs(t, err, stack.ErrWeight)
	expect.ErrorContains(t, err, `layer 1 weight ffn_v, the array "layers.1.ffn_v", is missing`)
	delete(m.LayerNames, "q")
	_, err = f.Layer(1)
	expect.ErrorIs(t, err, stack.ErrWeight)
	expect.ErrorContains(t, err, "layer 1 weight q is missing")
	m.LayerNames["q"] = "layers.{layer}.q"
	m.Names["head"] = "embed"
	_, err = f.Globals()
	expect.ErrorIs(t, err, stack.ErrWeight)
	expect.ErrorContains(t, err, "weight head is named")
}

func replaceOnce(s, from, to string) string {
	for i := 0; i+len(from) <= len(s); i++ {
		if s[i:i+len(from)] == from {
			return s[:i] + to + s[i+len(from):]
		}
	}
	return s
}

func bitsEqual[T float32 | float64](a, b []T) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(float64(a[i])) != math.Float64bits(float64(b[i])) {
			return false
		}
	}
	return true
}

func narrow(m *stack.Memory[float64]) *stack.Memory[float32] {
	f := func(x []float64) []float32 {
		if x == nil {
			return nil
		}
		y := make([]float32, len(x))
		for i, v := range x {
			y[i] = float32(v)
		}
		return y
	}
	out := &stack.Memory[float32]{Global: stack.Globals[float32]{Embed: f(m.Global.Embed), Norm: f(m.Global.Norm), NormBias: f(m.Global.NormBias), Head: f(m.Global.Head)}}
	for _, w := range m.Layers {
		v := block.Weights[float32]{Norm1: f(w.Norm1), Norm1Bias: f(w.Norm1Bias), Q: f(w.Q), QBias: f(w.QBias), K: f(w.K), KBias: f(w.KBias),
			V: f(w.V), VBias: f(w.VBias), O: f(w.O), OBias: f(w.OBias), Norm2: f(w.Norm2), Norm2Bias: f(w.Norm2Bias)}
		v.FFN.W1, v.FFN.B1, v.FFN.V, v.FFN.C, v.FFN.W2, v.FFN.B2 = f(w.FFN.W1), f(w.FFN.B1), f(w.FFN.V), f(w.FFN.C), f(w.FFN.W2), f(w.FFN.B2)
		out.Layers = append(out.Layers, v)
	}
	return out
}

func widen(x []float32) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = float64(v)
	}
	return y
}

// transpose returns the [cols, rows] transpose of the rows × cols matrix x.
func transpose(x []float64, rows, cols int) []float64 {
	y := make([]float64, len(x))
	for i := range rows {
		for j := range cols {
			y[j*rows+i] = x[i*cols+j]
		}
	}
	return y
}

// A separate head equal to the embedding gives the tied logits, stored
// in-by-out ([Width, Vocab], Eᵀ) or out-by-in ([Vocab, Width], E, every
// block matrix transposed with it), the same bits.
func TestSeparateHead(t *testing.T) {
	c, mem, _ := demo(t)
	tied, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	c.Tied = false
	in := &stack.Memory[float64]{Global: mem.Global, Layers: mem.Layers}
	in.Global.Head = transpose(mem.Global.Embed, c.Vocab, c.Width)
	r, err := stack.Forward(prompt, c, in, nil)
	ensure.NoError(t, err)
	expect.True(t, bitsEqual(tied.Logits, r.Logits), "in-by-out head")

	c.Block.WeightOrder = ffn.OutByIn
	out := &stack.Memory[float64]{Global: mem.Global}
	out.Global.Head = mem.Global.Embed
	W, H, nq, nkv := c.Width, c.Hidden, c.Heads*c.HeadDim, c.HeadsKV*c.HeadDim
	for _, w := range mem.Layers {
		v := w
		v.Q, v.K, v.V, v.O = transpose(w.Q, W, nq), transpose(w.K, W, nkv), transpose(w.V, W, nkv), transpose(w.O, nq, W)
		v.FFN.W1, v.FFN.V, v.FFN.W2 = transpose(w.FFN.W1, W, H), transpose(w.FFN.V, W, H), transpose(w.FFN.W2, H, W)
		out.Layers = append(out.Layers, v)
	}
	r, err = stack.Forward(prompt, c, out, nil)
	ensure.NoError(t, err)
	expect.True(t, bitsEqual(tied.Logits, r.Logits), "out-by-in head")
}

// reusing copies each layer's weights into one block's storage, which it
// overwrites at every call, and records the calls.
type reusing struct {
	from  *stack.Memory[float64]
	buf   block.Weights[float64]
	calls []int // -1 for Globals
}

func (r *reusing) Globals() (stack.Globals[float64], error) {
	r.calls = append(r.calls, -1)
	return r.from.Global, nil
}

func (r *reusing) Layer(i int) (block.Weights[float64], error) {
	r.calls = append(r.calls, i)
	w := r.from.Layers[i]
	cp := func(dst *[]float64, src []float64) {
		if src == nil {
			*dst = nil
			return
		}
		*dst = append((*dst)[:0], src...)
	}
	b := &r.buf
	cp(&b.Norm1, w.Norm1)
	cp(&b.Q, w.Q)
	cp(&b.K, w.K)
	cp(&b.V, w.V)
	cp(&b.O, w.O)
	cp(&b.Norm2, w.Norm2)
	cp(&b.FFN.W1, w.FFN.W1)
	cp(&b.FFN.V, w.FFN.V)
	cp(&b.FFN.W2, w.FFN.W2)
	return *b, nil
}

// Forward asks for the globals once and for the layers in order, and
// reads no layer's weights after asking for the next: a Source that
// overwrites one block's storage at each call gives the same bits as the
// weights held whole.
func TestOneLayerAtATime(t *testing.T) {
	c, mem, _ := demo(t)
	whole, err := stack.Forward(prompt, c, mem, nil)
	ensure.NoError(t, err)
	r := &reusing{from: mem}
	got, err := stack.ForwardFast(prompt, c, r, nil)
	ensure.NoError(t, err)
	expect.True(t, bitsEqual(whole.Logits, got.Logits), "one block's storage reused")
	expect.Equal(t, []int{-1, 0, 1}, r.calls)
}
