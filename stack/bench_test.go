package stack_test

import (
	"math"
	"runtime"
	"runtime/metrics"
	"sync"
	"testing"
	"time"

	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
	"github.com/plumbref/plumb/stack"
)

// generated is a Source that draws each layer's weights when asked
// (gen.Uniform, in chunks of chunk values, each chunk from its own seed)
// into one block's storage, which it reuses for every layer: what
// Forward's one-layer-at-a-time contract allows.
type generated struct {
	c     stack.Config
	w     block.Weights[float32]
	g     stack.Globals[float32]
	drawn int // layers drawn
}

const chunk = 1 << 20

// fill draws x from the seeds base, base + 1, … one per chunk, uniform in
// [−s, s).
func fill(x []float32, base uint64, s float64) {
	for i := 0; i < len(x); i += chunk {
		part := x[i:min(i+chunk, len(x))]
		v, err := gen.Uniform(base+uint64(i/chunk), len(part), -s, s)
		if err != nil {
			panic(err)
		}
		for j := range part {
			part[j] = float32(v[j])
		}
	}
}

func newGenerated(c stack.Config) *generated {
	nq, nkv := c.Heads*c.HeadDim, c.HeadsKV*c.HeadDim
	W, H := c.Width, c.Hidden
	g := &generated{c: c}
	g.w = block.Weights[float32]{Norm1: make([]float32, W), Q: make([]float32, W*nq), K: make([]float32, W*nkv),
		V: make([]float32, W*nkv), O: make([]float32, nq*W), Norm2: make([]float32, W)}
	g.w.FFN.W1, g.w.FFN.V, g.w.FFN.W2 = make([]float32, W*H), make([]float32, W*H), make([]float32, H*W)
	g.g.Embed = make([]float32, c.Vocab*W)
	fill(g.g.Embed, 1<<40, 1)
	return g
}

func (g *generated) Globals() (stack.Globals[float32], error) { return g.g, nil }

func (g *generated) Layer(i int) (block.Weights[float32], error) {
	base := uint64(i+1) << 32
	s := 1 / math.Sqrt(float64(g.c.Width))
	for k, x := range [][]float32{g.w.Q, g.w.K, g.w.V, g.w.O, g.w.FFN.W1, g.w.FFN.V, g.w.FFN.W2} {
		fill(x, base+uint64(k)<<24, s)
	}
	for j := range g.w.Norm1 {
		g.w.Norm1[j], g.w.Norm2[j] = 1, 1
	}
	g.drawn++
	return g.w, nil
}

// peak samples the heap every 20 ms until stop is called and returns the
// largest live heap seen (runtime/metrics' /gc/heap/live:bytes, the bytes
// the last collection found reachable) and the largest heap in use
// (runtime.MemStats.HeapInuse, garbage not yet collected included), in
// bytes.
func peak() (stop func() (live, inuse uint64)) {
	var mu sync.Mutex
	var topLive, topInuse uint64
	done := make(chan struct{})
	finished := make(chan struct{})
	sample := func() {
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		m := []metrics.Sample{{Name: "/gc/heap/live:bytes"}}
		metrics.Read(m)
		mu.Lock()
		topInuse = max(topInuse, ms.HeapInuse)
		if m[0].Value.Kind() == metrics.KindUint64 {
			topLive = max(topLive, m[0].Value.Uint64())
		}
		mu.Unlock()
	}
	go func() {
		defer close(finished)
		tick := time.NewTicker(20 * time.Millisecond)
		defer tick.Stop()
		for {
			select {
			case <-done:
				return
			case <-tick.C:
				sample()
			}
		}
	}()
	return func() (uint64, uint64) {
		close(done)
		<-finished
		runtime.GC()
		sample()
		mu.Lock()
		defer mu.Unlock()
		return topLive, topInuse
	}
}

// BenchmarkStreamedLayers runs two blocks of width 8192 (64 query heads on
// 8 kv heads of dimension 128, a gated FFN of 28672 units, RMSNorm,
// rotary, a vocabulary of 256) on 4 tokens in float32, the weights drawn
// layer by layer into one block's storage. It reports the peak live heap
// and the peak heap in use (see peak) beside the bytes of one block's
// weights and of the two blocks': the live heap stays near one block's,
// never two. The heap in use also holds the generator's garbage until a
// collection: run with GOMEMLIMIT (say 4GiB) to have the collector keep
// the process near the live heap.
func BenchmarkStreamedLayers(b *testing.B) {
	c := stack.Config{Layers: 2, Vocab: 256, Width: 8192, Heads: 64, HeadsKV: 8, HeadDim: 128, Hidden: 28672, FinalNorm: true, Tied: true}
	c.Block = block.Options{NormKind: block.RMSNorm, Norm: norm.Options{Epsilon: 1e-5}, Rotary: &posenc.Rotary{Dim: 128}}
	c.Block.Attention.Mask = mask.Causal()
	c.Block.FFN.Gated = true
	if err := c.Block.FFN.Act.UnmarshalText([]byte("silu")); err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	stop := peak()
	src := newGenerated(c)
	ids := []int{1, 2, 3, 4}
	b.ResetTimer()
	for b.Loop() {
		if _, err := stack.ForwardFast32(ids, c, src, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	live, inuse := stop()
	nq, nkv := c.Heads*c.HeadDim, c.HeadsKV*c.HeadDim
	layer := 4 * (2*c.Width*nq + 2*c.Width*nkv + 3*c.Width*c.Hidden + 2*c.Width)
	b.ReportMetric(float64(live)/(1<<20), "peak-live-MiB")
	b.ReportMetric(float64(inuse)/(1<<20), "peak-inuse-MiB")
	b.ReportMetric(float64(layer)/(1<<20), "block-weights-MiB")
	b.ReportMetric(float64(2*layer)/(1<<20), "model-weights-MiB")
	if src.drawn < 2 {
		b.Fatalf("%d layers drawn; want 2", src.drawn)
	}
}
