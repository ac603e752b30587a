package ops

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
)

// The tests of the precision idioms through the operations: ports written
// the way a framework writes them, with each idiom, fail the plain
// yardstick and pass the idiom's; ports with a real slip fail both; the
// reference never changes; IdiomCost shows the cost.

// judge reports whether the candidate got passes the yardstick y of an
// output whose reference is ref.
func judge(t *testing.T, ref Tensor, got []float64, y *compare.Yardstick) bool {
	t.Helper()
	rep, err := compare.Diff(ref.Data, got, ref.Shape, y.Options())
	ensure.NoError(t, err)
	return rep.Verdict.Pass
}

// yardsticks returns the plain yardstick and the idiom's of output out:
// the configuration without and with its idiom keys.
func yardsticks(t *testing.T, op, plain, idiom string, in Tensors, f compare.Format, out string) (*compare.Yardstick, *compare.Yardstick) {
	t.Helper()
	p, err := Yardstick(op, []byte(plain), in, f, compare.DefaultK)
	ensure.NoError(t, err)
	i, err := Yardstick(op, []byte(idiom), in, f, compare.DefaultK)
	ensure.NoError(t, err)
	return p[out], i[out]
}

// float32Tensor is a tensor of the shape, uniform in [−scale, scale), its
// values float32 (or, with bf, bfloat16) numbers, so that the reference
// and a float32 port see the same problem.
func float32Tensor(r *rand.Rand, scale float64, bf bool, shape ...int) Tensor {
	t := tensor(r, shape...)
	for i, v := range t.Data {
		t.Data[i] = float64(float32(scale * v))
		if bf {
			t.Data[i] = compare.BFloat16.Round(t.Data[i])
		}
	}
	return t
}

// rotaryPort rotates x [..., L, D] at positions 0 … L−1 with the halves
// pairing as a float32 framework port does [common practice]: inverse
// frequencies 1/base^(2i/D) in float32, positions as float32, the angle
// their float32 product, cos and sin of it rounded to float32, the
// rotation in float32.
func rotaryPort(x []float64, L, D int, base float64) []float64 {
	h := D / 2
	inv := make([]float32, h)
	for i := range inv {
		inv[i] = float32(1) / float32(math.Pow(base, float64(float32(2*i)/float32(D))))
	}
	y := make([]float64, len(x))
	for row := range len(x) / D {
		m := float32(row % L)
		xr, yr := num.Convert[float32](x[row*D:(row+1)*D]), y[row*D:(row+1)*D]
		for i := range h {
			a := m * inv[i]
			c, s := float32(math.Cos(float64(a))), float32(math.Sin(float64(a)))
			yr[i] = float64(float32(xr[i]*c) - float32(xr[i+h]*s))
			yr[i+h] = float64(float32(xr[i+h]*c) + float32(xr[i]*s))
		}
	}
	return y
}

// TestRotaryAnglesPort: a float32 port that forms its angles the framework
// way fails the plain float32 yardstick at 2048 positions (its angle error
// grows with the position) and passes the yardstick of angles =
// float32-angles; the same port with a wrong base (10500 for 10000) fails
// both. IdiomCost shows the error growing along the positions: near
// position 2047 about 32 times that near 64 for the idiom, flat for the
// plain run.
func TestRotaryAnglesPort(t *testing.T) {
	const L, D = 2048, 64
	in := Tensors{"x": float32Tensor(rand.New(rand.NewPCG(51, 52)), 1, false, 2, L, D)}
	plain := `{"version":1,"pairing":"halves"}`
	idiom := `{"version":1,"pairing":"halves","angles":"float32-angles"}`
	ref, err := Run("rotary-apply", []byte(idiom), in)
	ensure.NoError(t, err)
	py, iy := yardsticks(t, "rotary-apply", plain, idiom, in, compare.Float32, "y")
	port := rotaryPort(in["x"].Data, L, D, 10000)
	expect.False(t, judge(t, ref["y"], port, py), "the framework port passes the plain float32 yardstick")
	expect.True(t, judge(t, ref["y"], port, iy), "the framework port fails the yardstick of its idiom:\n%s", iy.Tolerance.Basis)
	slipped := rotaryPort(in["x"].Data, L, D, 10500)
	expect.False(t, judge(t, ref["y"], slipped, py), "base 10500 passes the plain yardstick")
	expect.False(t, judge(t, ref["y"], slipped, iy), "base 10500 passes the idiom's yardstick")
	expect.Contains(t, iy.Tolerance.Basis, "float32 arithmetic with the idiom angles = float32-angles,")
	expect.NotContains(t, py.Tolerance.Basis, "idiom")

	costs, err := IdiomCost("rotary-apply", []byte(idiom), in, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	c := costs["y"]
	ensure.NotNil(t, c)
	expect.Equal(t, "angles = float32-angles", c.Keys)
	expect.Equal(t, iy.Tolerance, c.Idiom.Tolerance, "the idiom's yardstick is Yardstick's")
	expect.Equal(t, py.Tolerance, c.Plain.Tolerance, "the plain yardstick is that of the configuration without the key")
	ensure.Len(t, c.Positions, L)
	for i, p := range c.Positions {
		ensure.Equal(t, i, p.Position)
	}
	window := func(first int) (plain, idiom float64) { // the largest errors of 16 positions
		for _, p := range c.Positions[first : first+16] {
			plain, idiom = max(plain, p.Plain.MaxAbs), max(idiom, p.Idiom.MaxAbs)
		}
		return plain, idiom
	}
	p64, i64 := window(64)
	p2032, i2032 := window(L - 16)
	t.Logf("rotary-apply, D = %d, base 10000, %d positions: normwise error plain %.3g, float32-angles %.3g (×%.0f)", D, L, c.Plain.Report.Normwise, c.Idiom.Report.Normwise, c.Ratio())
	t.Logf("largest error near position 64: plain %.3g, float32-angles %.3g; near %d: plain %.3g, float32-angles %.3g", p64, i64, L-8, p2032, i2032)
	t.Logf("%v", c)
	expect.Greater(t, c.Ratio(), 20.0)
	expect.InDelta(t, 32, i2032/i64, 20, "the idiom's error grows about linearly with the position (2040 / 72 ≈ 28; measured 25)")
	expect.Less(t, p2032/p64, 2.0, "the plain float32 run's error does not grow with the position")
	expect.Equal(t, []int{0, 1023, 2047}, positionsOf(c.Sample(3)))
	expect.True(t, strings.HasPrefix(c.String(), "angles = float32-angles: normwise "), c.String())
	expect.Contains(t, c.String(), "position 0: ")
	expect.Contains(t, c.String(), "position 2047: ")

	// The normwise errors of the whole tensor at 64 and at 2048 positions.
	for _, n := range []int{64, 2048} {
		short := Tensors{"x": {Shape: []int{2, n, D}, Data: slices.Concat(in["x"].Data[:n*D], in["x"].Data[L*D:L*D+n*D])}}
		cs, err := IdiomCost("rotary-apply", []byte(idiom), short, compare.Float32, compare.DefaultK)
		ensure.NoError(t, err)
		t.Logf("%d positions: normwise error of the float32 run %.3g, of float32-angles %.3g (×%.1f)", n, cs["y"].Plain.Report.Normwise, cs["y"].Idiom.Report.Normwise, cs["y"].Ratio())
	}
}

func positionsOf(p []PositionCost) []int {
	var out []int
	for _, x := range p {
		out = append(out, x.Position)
	}
	return out
}

// TestRotaryTablesAngles: rotary-tables' float32 run honours the angles
// key, and its cost is shown by position.
func TestRotaryTablesAngles(t *testing.T) {
	config := []byte(`{"version":1,"dim":16,"positions":[5000,7,100],"angles":"float32-frequencies"}`)
	costs, err := IdiomCost("rotary-tables", config, nil, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	for _, out := range []string{"cos", "sin"} {
		c := costs[out]
		ensure.NotNil(t, c, out)
		expect.Equal(t, []int{7, 100, 5000}, positionsOf(c.Positions), "%s: ascending positions", out)
		expect.Greater(t, c.Positions[2].Idiom.MaxAbs, c.Positions[0].Idiom.MaxAbs, "%s: more error at 5000 than at 7", out)
		expect.Greater(t, c.Idiom.Report.Normwise, c.Plain.Report.Normwise, out)
	}
}

// layerNormPort is LayerNorm over rows of d, ε in the root, no weight or
// bias, as a float32 port with the one-pass variance writes it [common
// practice]; divisor is d for the biased variance, d − 1 for the slip of
// the unbiased one.
func layerNormPort(x []float64, d int, eps float32, divisor int) []float64 {
	y := make([]float64, len(x))
	for lo := 0; lo < len(x); lo += d {
		row := num.Convert[float32](x[lo : lo+d])
		var s1, s2 float32
		for _, v := range row {
			s1 += v
			s2 += float32(v * v)
		}
		mu := s1 / float32(d)
		va := max(s2/float32(divisor)-float32(mu*mu)*float32(d)/float32(divisor), 0)
		r := float32(math.Sqrt(float64(va + eps)))
		for j, v := range row {
			y[lo+j] = float64((v - mu) / r)
		}
	}
	return y
}

// TestLayerNormOnePassPort: on rows of mean 10 and spread 1 (one-pass
// cancellation costs about μ²/σ² = 100 roundings) a one-pass float32 port
// fails the plain yardstick and passes that of variance = one-pass; the
// port with the unbiased variance (d − 1) fails both.
func TestLayerNormOnePassPort(t *testing.T) {
	const d = 64
	x := float32Tensor(rand.New(rand.NewPCG(53, 54)), 1, false, 16, d)
	for i := range x.Data {
		x.Data[i] = float64(float32(10 + x.Data[i]))
	}
	in := Tensors{"x": x}
	plain := `{"version":1,"epsilon":1e-5}`
	idiom := `{"version":1,"epsilon":1e-5,"variance":"one-pass"}`
	ref, err := Run("layernorm-forward", []byte(plain), in)
	ensure.NoError(t, err)
	py, iy := yardsticks(t, "layernorm-forward", plain, idiom, in, compare.Float32, "y")
	port := layerNormPort(x.Data, d, 1e-5, d)
	expect.False(t, judge(t, ref["y"], port, py), "the one-pass port passes the plain float32 yardstick")
	expect.True(t, judge(t, ref["y"], port, iy), "the one-pass port fails the yardstick of its idiom:\n%s", iy.Tolerance.Basis)
	slipped := layerNormPort(x.Data, d, 1e-5, d-1)
	expect.False(t, judge(t, ref["y"], slipped, iy), "the unbiased variance passes the idiom's yardstick")
	t.Logf("layernorm-forward, rows of mean 10, spread 1, d = %d: normwise error plain %.3g, one-pass %.3g", d, py.Report.Normwise, iy.Report.Normwise)
	expect.Contains(t, iy.Tolerance.Basis, "with the idiom variance = one-pass,")
}

// attentionPort is one head of attention (q [lq, dk], k [lk, dk], v [lk,
// dv], scale 1/√dk, no mask) as a port with bfloat16 accumulators computes
// it [common practice]: products in float32, every running sum rounded to
// bfloat16, the dot products in two interleaved partial sums (even and odd
// dims, then added), so that its roundings are not those of the
// yardstick's. keys is how many keys it reads: lk, or lk − 1 for the slip
// of a mask that drops the last key.
func attentionPort(q, k, v []float64, lq, lk, dk, dv, keys int) []float64 {
	add := func(a, b float32) float32 { return float32(num.BFloat16.Add(float64(a), float64(b))) }
	q32, k32, v32 := num.Convert[float32](q), num.Convert[float32](k), num.Convert[float32](v)
	scale := float32(1 / math.Sqrt(float64(dk)))
	out := make([]float64, lq*dv)
	for i := range lq {
		s := make([]float32, keys)
		m := float32(math.Inf(-1))
		for j := range keys {
			var even, odd float32
			for d := 0; d < dk; d += 2 {
				even = add(even, float32(q32[i*dk+d]*k32[j*dk+d]))
				odd = add(odd, float32(q32[i*dk+d+1]*k32[j*dk+d+1]))
			}
			s[j] = scale * add(even, odd)
			m = max(m, s[j])
		}
		var sum float32
		for j := range s {
			s[j] = float32(math.Exp(float64(s[j] - m)))
			sum = add(sum, s[j])
		}
		o := make([]float32, dv)
		for j := range s {
			p := s[j] / sum
			for e := range dv {
				o[e] = add(o[e], float32(p*v32[j*dv+e]))
			}
		}
		for e := range dv {
			out[i*dv+e] = compare.BFloat16.Round(float64(o[e]))
		}
	}
	return out
}

// TestAttentionAccumulationPort: an attention port with bfloat16
// accumulators, on bfloat16 inputs with bfloat16 outputs, fails the plain
// bfloat16 yardstick (whose float32 run sums in float32) and passes that of
// accumulation = bfloat16, although its dot products sum in another order;
// the port that drops the last key fails both.
func TestAttentionAccumulationPort(t *testing.T) {
	const lq, lk, dk, dv = 8, 64, 64, 32
	r := rand.New(rand.NewPCG(55, 56))
	in := Tensors{"q": float32Tensor(r, 1, true, 1, 1, lq, dk), "k": float32Tensor(r, 1, true, 1, 1, lk, dk), "v": float32Tensor(r, 1, true, 1, 1, lk, dv)}
	plain := `{"version":1}`
	idiom := `{"version":1,"accumulation":"bfloat16"}`
	ref, err := Run("attention-forward", []byte(plain), in)
	ensure.NoError(t, err)
	py, iy := yardsticks(t, "attention-forward", plain, idiom, in, compare.BFloat16, "out")
	port := attentionPort(in["q"].Data, in["k"].Data, in["v"].Data, lq, lk, dk, dv, lk)
	expect.False(t, judge(t, ref["out"], port, py), "the bfloat16-accumulating port passes the plain yardstick")
	expect.True(t, judge(t, ref["out"], port, iy), "the bfloat16-accumulating port fails the yardstick of its idiom:\n%s", iy.Tolerance.Basis)
	slipped := attentionPort(in["q"].Data, in["k"].Data, in["v"].Data, lq, lk, dk, dv, lk-1)
	expect.False(t, judge(t, ref["out"], slipped, iy), "the port that drops a key passes the idiom's yardstick")
	rep, err := compare.Diff(ref["out"].Data, port, ref["out"].Shape, compare.Options{Format: compare.BFloat16})
	ensure.NoError(t, err)
	t.Logf("attention-forward, %d queries on %d keys, dim %d: normwise error of the bfloat16 yardstick's float32 run %.3g, of accumulation = bfloat16 %.3g, of the port %.3g",
		lq, lk, dk, py.Report.Normwise, iy.Report.Normwise, rep.Normwise)
}

// ffnPort is a plain ReLU layer [rows, in] · W1 [in, hidden] + b1, then
// · W2 [hidden, out] + b2, as a port with bfloat16 accumulators computes
// it, summing each projection from the last input to the first; with
// bias2 false it forgets b2 (the slip).
func ffnPort(x, w1, b1, w2, b2 []float64, rows, in, hidden, out int, bias2 bool) []float64 {
	add := func(a, b float32) float32 { return float32(num.BFloat16.Add(float64(a), float64(b))) }
	y := make([]float64, rows*out)
	for r := range rows {
		h := make([]float32, hidden)
		for j := range hidden {
			var s float32
			for i := in - 1; i >= 0; i-- {
				s = add(s, float32(float32(x[r*in+i])*float32(w1[i*hidden+j])))
			}
			h[j] = max(add(s, float32(b1[j])), 0)
		}
		for k := range out {
			var s float32
			for j := hidden - 1; j >= 0; j-- {
				s = add(s, float32(h[j]*float32(w2[j*out+k])))
			}
			if bias2 {
				s = add(s, float32(b2[k]))
			}
			y[r*out+k] = compare.BFloat16.Round(float64(s))
		}
	}
	return y
}

// TestFFNAccumulationPort: a feed-forward port with bfloat16 accumulators
// fails the plain bfloat16 yardstick and passes that of accumulation =
// bfloat16; the port that forgets b2 fails both.
func TestFFNAccumulationPort(t *testing.T) {
	const rows, nin, hidden, nout = 8, 64, 128, 32
	r := rand.New(rand.NewPCG(57, 58))
	in := Tensors{"x": float32Tensor(r, 1, true, rows, nin), "w1": float32Tensor(r, 0.2, true, nin, hidden), "b1": float32Tensor(r, 0.2, true, hidden),
		"w2": float32Tensor(r, 0.2, true, hidden, nout), "b2": float32Tensor(r, 0.2, true, nout)}
	plain := `{"version":1,"activation":"relu","layout":"in-by-out"}`
	idiom := `{"version":1,"activation":"relu","layout":"in-by-out","accumulation":"bfloat16"}`
	ref, err := Run("ffn-forward", []byte(plain), in)
	ensure.NoError(t, err)
	py, iy := yardsticks(t, "ffn-forward", plain, idiom, in, compare.BFloat16, "y")
	port := ffnPort(in["x"].Data, in["w1"].Data, in["b1"].Data, in["w2"].Data, in["b2"].Data, rows, nin, hidden, nout, true)
	expect.False(t, judge(t, ref["y"], port, py), "the bfloat16-accumulating port passes the plain yardstick")
	expect.True(t, judge(t, ref["y"], port, iy), "the bfloat16-accumulating port fails the yardstick of its idiom:\n%s", iy.Tolerance.Basis)
	slipped := ffnPort(in["x"].Data, in["w1"].Data, in["b1"].Data, in["w2"].Data, in["b2"].Data, rows, nin, hidden, nout, false)
	expect.False(t, judge(t, ref["y"], slipped, iy), "the port without b2 passes the idiom's yardstick")
	t.Logf("ffn-forward, in %d, hidden %d: normwise error of the plain bfloat16 yardstick %.3g, of accumulation = bfloat16 %.3g", nin, hidden, py.Report.Normwise, iy.Report.Normwise)
}

// TestUnshiftedSoftmaxCost: a softmax without the maximum subtracted and
// with binary16 sums overflows at logits above ln 65504 ≈ 11.09: on rows
// whose largest logit is 12 the idiom's float32 run gives rows of 0, and
// IdiomCost shows an error about 10⁶ times the plain float32 run's; rows
// below the limit cost little.
func TestUnshiftedSoftmaxCost(t *testing.T) {
	config := []byte(`{"version":1,"softmax_shift":"none","accumulation":"binary16"}`)
	for _, c := range []struct {
		top      float64
		overflow bool
	}{{12, true}, {5, false}} {
		x := Tensor{Shape: []int{2, 4}, Data: []float64{c.top, 1, 0, -1, c.top - 2, 2, 1, 0}}
		costs, err := IdiomCost("softmax", config, Tensors{"x": x}, compare.Float32, compare.DefaultK)
		ensure.NoError(t, err)
		cost := costs["y"]
		expect.Equal(t, "accumulation = binary16, softmax_shift = none", cost.Keys, "in the order of the keys")
		expect.Nil(t, cost.Positions, "softmax rows have no positions")
		t.Logf("largest logit %g: %v", c.top, cost)
		if c.overflow {
			expect.Greater(t, cost.Ratio(), 1e5)
			expect.Equal(t, []float64{0, 0, 0, 0}, cost.Idiom.Output[:4], "e^12 > 65504: the binary16 sum is +Inf, the row 0")
		} else {
			expect.Less(t, cost.Idiom.Report.Normwise, 1e-2)
		}
	}
}

// TestIdiomsLeaveRun: for every case of every operation that has idiom
// keys, every word of every idiom key gives Run the bits of the
// configuration without it (the reference describes the mathematics, the
// idioms the port's arithmetic), and the zero word gives Run32 the bits of
// the configuration without it.
func TestIdiomsLeaveRun(t *testing.T) {
	seen := map[string]bool{}
	for _, c := range cases() {
		o, err := Lookup(c.op)
		ensure.NoError(t, err)
		in := c.inputs(rand.New(rand.NewPCG(1, 2)))
		config := c.config
		if config == "" {
			config = `{"version":1}`
		}
		want, err := Run(c.op, []byte(config), in)
		ensure.NoError(t, err)
		want32, err := Run32(c.op, []byte(config), in)
		ensure.NoError(t, err)
		for _, k := range o.Keys() {
			if !k.Idiom {
				continue
			}
			seen[c.op+": "+k.Name] = true
			for i, w := range k.Words {
				with := []byte(strings.TrimSuffix(config, "}") + `,"` + k.Name + `":"` + w.Text + `"}`)
				got, err := Run(c.op, with, in)
				ensure.NoError(t, err, "%s", with)
				expect.Empty(t, bitDiff(want, got), "%s: %s: Run changed", c.name, with)
				if i == 0 {
					got32, err := Run32(c.op, with, in)
					ensure.NoError(t, err, "%s", with)
					expect.Empty(t, bitDiff(want32, got32), "%s: %s: the default word changed Run32", c.name, with)
				}
			}
		}
	}
	expect.Equal(t, []string{
		"attention-forward: accumulation", "attention-forward: softmax_shift", "ffn-forward: accumulation",
		"layernorm-backward: variance", "layernorm-forward: variance", "logsumexp: accumulation", "logsumexp: softmax_shift",
		"rotary-apply: angles", "rotary-tables: angles", "softmax: accumulation", "softmax: softmax_shift",
	}, slices.Sorted(func(yield func(string) bool) {
		for k := range seen {
			if !yield(k) {
				return
			}
		}
	}), "the idiom keys")
}

// TestIdiomCostAPI: IdiomCost has nothing to show without an idiom;
// IdiomCostOf with the reference already computed gives IdiomCost's
// yardsticks; an unknown operation and a reference missing an output are
// refused.
func TestIdiomCostAPI(t *testing.T) {
	in := Tensors{"x": tensor(rand.New(rand.NewPCG(59, 60)), 3, 16)}
	for _, config := range []string{"", `{"version":1,"epsilon":1e-5}`, `{"version":1,"epsilon":1e-5,"variance":"two-pass"}`} {
		op := "layernorm-forward"
		if config == "" {
			op = "softmax"
		}
		costs, err := IdiomCost(op, []byte(config), in, compare.Float32, compare.DefaultK)
		ensure.NoError(t, err, config)
		expect.Nil(t, costs, "%s %s: no idiom, no cost", op, config)
	}
	costs, err := IdiomCost("rmsnorm-forward", []byte(`{"version":1,"epsilon":1e-5}`), in, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	expect.Nil(t, costs, "rmsnorm has no idiom key")
	_, err = IdiomCost("rmsnorm-forward", []byte(`{"version":1,"epsilon":1e-5,"variance":"one-pass"}`), in, compare.Float32, compare.DefaultK)
	expect.ErrorIs(t, err, ErrConfig, "rmsnorm has no mean and no variance key")

	config := []byte(`{"version":1,"epsilon":1e-5,"variance":"one-pass"}`)
	ref, err := Run("layernorm-forward", config, in)
	ensure.NoError(t, err)
	a, err := IdiomCost("layernorm-forward", config, in, compare.BFloat16, compare.DefaultK)
	ensure.NoError(t, err)
	b, err := IdiomCostOf("layernorm-forward", config, in, ref, compare.BFloat16, compare.DefaultK)
	ensure.NoError(t, err)
	ensure.Contains(t, a, "y")
	expect.Equal(t, a["y"].Idiom.Tolerance, b["y"].Idiom.Tolerance)
	expect.Equal(t, a["y"].Plain.Tolerance, b["y"].Plain.Tolerance)
	expect.Equal(t, "variance = one-pass", a["y"].Keys)

	_, err = IdiomCost("no-such-op", nil, nil, compare.Float32, compare.DefaultK)
	expect.ErrorIs(t, err, ErrUnknownOp)
	_, err = IdiomCostOf("layernorm-forward", config, in, Tensors{}, compare.Float32, compare.DefaultK)
	expect.ErrorIs(t, err, ErrInput)
	_, err = IdiomCost("layernorm-forward", config, in, compare.Float64, compare.DefaultK)
	expect.ErrorIs(t, err, compare.ErrFormat)
}
