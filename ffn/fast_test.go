package ffn

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
)

// randomStorage turns InByOut separate weights into the storage form the
// trial asks for.
func randomStorage(w Weights[float64], d Dims, layout Layout, p Packing) Weights[float64] {
	if p != 0 {
		f := Weights[float64]{Fused: fuse(w.W1, w.V, d.In, d.Hidden, p), W2: w.W2, B2: w.B2}
		if w.B1 != nil {
			f.FusedBias = fuse(w.B1, w.C, 1, d.Hidden, p)
		}
		w = f
	}
	if layout == OutByIn {
		w = toOutByIn(w, d, p != 0)
	}
	return w
}

// TestFastIsDirect: the fast forms are the direct forms bit for bit
// (ForwardFast's and BackwardFast's documentation), float64 and float32,
// on random layers of up to 256 inputs and hidden units in every storage
// form, every activation, with and without biases.
func TestFastIsDirect(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	trials := 24
	if testing.Short() {
		trials = 6
	}
	acts := []Act{ActIdentity, ActReLU, ActGELU, ActGELUTanh, ActGELUSigmoid, ActSigmoid, ActSiLU, ActSwish}
	for trial := range trials {
		d := Dims{Rows: 1 + r.IntN(5), In: 1 + r.IntN(256), Hidden: 1 + r.IntN(256), Out: 1 + r.IntN(96)}
		if trial%5 == 4 {
			d.Rows = 70 + r.IntN(70) // more than one block of rows
		}
		o := Options{Act: acts[trial%len(acts)], Gated: trial%2 == 1, Layout: InByOut}
		if o.Act == ActSwish {
			o.Beta = 0.9
		}
		if trial%3 == 2 {
			o.Layout = OutByIn
		}
		if o.Gated {
			o.Packing = []Packing{0, GateUpStacked, GateUpInterleaved}[trial%3]
		}
		x, w := randLayer(r, d, o.Gated, trial%4 != 0)
		w = randomStorage(w, d, o.Layout, o.Packing)
		dy := make([]float64, d.Rows*d.Out)
		for i := range dy {
			dy[i] = r.NormFloat64()
		}
		want := layerOutputs(t, Forward, Backward, x, dy, d, w, o)
		got := layerOutputs(t, ForwardFast, BackwardFast, x, dy, d, w, o)
		x32, dy32, w32 := num.Convert[float32](x), num.Convert[float32](dy), weights32(w)
		want32 := layerOutputs(t, Forward32, Backward32, x32, dy32, d, w32, o)
		got32 := layerOutputs(t, ForwardFast32, BackwardFast32, x32, dy32, d, w32, o)
		ensure.Len(t, got, len(want))
		bits := cmp.Comparer(func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) })
		for name := range want {
			if diff := cmp.Diff(want[name], got[name], bits); diff != "" {
				t.Fatalf("trial %d %+v %+v: the fast form's %s is not the direct form's (-direct +fast):\n%s", trial, d, o, name, diff)
			}
			if diff := cmp.Diff(want32[name], got32[name], bits); diff != "" {
				t.Fatalf("trial %d %+v %+v: the float32 fast form's %s is not the direct form's (-direct +fast):\n%s", trial, d, o, name, diff)
			}
		}
	}
}

// The fast form is bit-identical for any GOMAXPROCS, at a size where the
// matrix product runs in parallel.
func TestFastIndependentOfGOMAXPROCS(t *testing.T) {
	if testing.Short() {
		t.Skip("a 160×200×320 layer")
	}
	r := rand.New(rand.NewPCG(15, 16))
	d := Dims{Rows: 160, In: 200, Hidden: 320, Out: 200}
	x, w := randLayer(r, d, true, true)
	o := Options{Act: ActSiLU, Gated: true, Layout: OutByIn}
	dy := make([]float64, d.Rows*d.Out)
	for i := range dy {
		dy[i] = r.NormFloat64()
	}
	run := func(procs int) ([]float64, []float64, Weights[float64]) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		y, err := ForwardFast(x, d, w, o)
		ensure.NoError(t, err)
		dx, g, err := BackwardFast(x, dy, d, w, o)
		ensure.NoError(t, err)
		return y, dx, g
	}
	y1, dx1, g1 := run(1)
	y4, dx4, g4 := run(4)
	bits := cmp.Comparer(func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) })
	expect.Empty(t, cmp.Diff(y1, y4, bits))
	expect.Empty(t, cmp.Diff(dx1, dx4, bits))
	expect.Empty(t, cmp.Diff(g1, g4, bits))
}

func TestFastErrorsAndEmpty(t *testing.T) {
	d := Dims{Rows: 0, In: 2, Hidden: 3, Out: 1}
	w := Weights[float64]{W1: make([]float64, 6), V: make([]float64, 6), W2: make([]float64, 3)}
	o := Options{Act: ActReLU, Gated: true, Layout: OutByIn}
	y, err := ForwardFast(nil, d, w, o)
	ensure.NoError(t, err)
	expect.Empty(t, y)
	dx, g, err := BackwardFast(nil, nil, d, w, o)
	ensure.NoError(t, err)
	expect.Empty(t, dx)
	expect.Equal(t, make([]float64, 6), g.V)

	d.Rows = 1
	_, err = ForwardFast([]float64{1}, d, w, o)
	expect.ErrorIs(t, err, ErrShape)
	_, _, err = BackwardFast([]float64{1, 2}, []float64{}, d, w, o)
	expect.ErrorIs(t, err, ErrShape)
	_, err = ForwardFast32([]float32{1, 2}, d, Weights[float32]{}, o)
	expect.ErrorIs(t, err, ErrWeightLen)
	_, _, err = BackwardFast32([]float32{1, 2}, []float32{1}, d, Weights[float32]{W1: make([]float32, 6)}, Options{Act: ActSwish, Beta: math.NaN(), Layout: InByOut})
	expect.ErrorIs(t, err, ErrBeta)
}

// Benchmarks at a realistic shape: 16 rows, model width 1024, hidden width
// HiddenSize(1024, 256) = 2816, SwiGLU, [out, in] weights.
func benchLayer(b *testing.B) ([]float64, []float64, Dims, Weights[float64], Options) {
	r := rand.New(rand.NewPCG(17, 18))
	h, err := HiddenSize(1024, 256)
	ensure.NoError(b, err)
	d := Dims{Rows: 16, In: 1024, Hidden: h, Out: 1024}
	x, w := randLayer(r, d, true, false)
	dy := make([]float64, d.Rows*d.Out)
	for i := range dy {
		dy[i] = r.NormFloat64()
	}
	return x, dy, d, toOutByIn(w, d, false), Options{Act: ActSiLU, Gated: true, Layout: OutByIn}
}

func BenchmarkForward(b *testing.B) {
	x, _, d, w, o := benchLayer(b)
	for b.Loop() {
		if _, err := Forward(x, d, w, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkForwardFast(b *testing.B) {
	x, _, d, w, o := benchLayer(b)
	for b.Loop() {
		if _, err := ForwardFast(x, d, w, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkBackwardFast(b *testing.B) {
	x, dy, d, w, o := benchLayer(b)
	for b.Loop() {
		if _, _, err := BackwardFast(x, dy, d, w, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkGELU(b *testing.B) {
	s := 0.0
	for i := 0; b.Loop(); i++ {
		s += GELU(float64(i%64) - 32)
	}
	_ = s
}
