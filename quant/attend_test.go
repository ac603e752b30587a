package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
)

func randomValues(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64()
	}
	return x
}

func TestQuantiseCacheWorkedValues(t *testing.T) {
	// Per-token int8, one head, two tokens of two elements:
	// row 0 = (1, −0.5): amax 1, s = 1/127 rounded up to float32;
	// codes 127 for 1 and −63 for −0.5: s is above 1/127, so −0.5/s lies
	// just inside −63.5 and rounds to −63.
	c, err := QuantiseCache([]float64{1, -0.5, 0, 0}, 1, 1, 2, 2, CacheInt8, CachePerToken)
	ensure.NoError(t, err)
	s0, _ := ScaleFloat32.up(quotientUp(1, 127))
	expect.Equal(t, []float64{s0, 1}, c.Scales, "a row of zeros gets scale 1")
	expect.Equal(t, []uint8{127, uint8(0x100 - 63), 0, 0}, c.Codes)
	// E4M3 per-tensor: amax 448 → s = 1, codes are the E4M3 encodings:
	// 448 = 0x7E, 1 = 0x38, 1.0625 halfway between 1 and 1.125 → 1 (even).
	c, err = QuantiseCache([]float64{448, 1, 1.0625}, 1, 1, 1, 3, CacheE4M3, CachePerTensor)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1}, c.Scales)
	expect.Equal(t, []uint8{0x7E, 0x38, 0x38}, c.Codes)
	// A negative element that rounds to zero gets the code of +0 (0x00).
	c, err = QuantiseCache([]float64{448, -1e-10}, 1, 1, 1, 2, CacheE4M3, CachePerTensor)
	ensure.NoError(t, err)
	expect.Equal(t, []uint8{0x7E, 0x00}, c.Codes)
}

func TestQuantiseCacheIsNearest(t *testing.T) {
	r := rand.New(rand.NewPCG(31, 32))
	const b, h, n, d = 2, 3, 4, 5
	x := randomValues(r, b*h*n*d)
	for _, code := range CacheCode(0).Values() {
		for _, sc := range CacheScaling(0).Values() {
			c, err := QuantiseCache(x, b, h, n, d, code, sc)
			ensure.NoError(t, err)
			got, err := DecodeCache(c)
			ensure.NoError(t, err)
			f, qmax := code.format()
			for i := range x {
				bh, tok := i/(n*d), i/d%n
				s := c.Scales[c.scaleIndex(bh, tok)]
				// The code is the nearest: no value of the format (int8:
				// an integer) within qmax is nearer to x/s (checked on the
				// neighbours, exactly).
				cv := got[i] / s
				var nb []float64
				if code == CacheInt8 {
					nb = []float64{cv - 1, cv + 1}
				} else {
					nb = []float64{f.Round(cv - f.ULP(cv)), f.Round(cv + f.ULP(cv)), f.Round(cv - f.ULP(cv)/2), f.Round(cv + f.ULP(cv)/2)}
				}
				dist := func(u float64) *big.Rat { d := new(big.Rat).Sub(rat(u*s), rat(x[i])); return d.Abs(d) }
				for _, u := range nb {
					if math.IsNaN(u) || math.Abs(u) > qmax {
						continue
					}
					expect.True(t, dist(u).Cmp(dist(cv)) >= 0, code, sc, i, u, cv)
				}
			}
			// The scale is the block's amax/qmax rounded upward: the
			// largest element of a block needs at most qmax.
			for bi, s := range c.Scales {
				expect.True(t, s > 0 && float64(float32(s)) == s, bi)
			}
		}
	}
}

func TestAppendCacheKeepsWhatItHolds(t *testing.T) {
	r := rand.New(rand.NewPCG(33, 34))
	const b, h, n, add, d = 2, 2, 3, 2, 4
	for _, code := range CacheCode(0).Values() {
		x := randomValues(r, b*h*n*d)
		y := randomValues(r, b*h*add*d)
		c, err := QuantiseCache(x, b, h, n, d, code, CachePerToken)
		ensure.NoError(t, err)
		got, err := AppendCache(c, y, add)
		ensure.NoError(t, err)
		// The whole cache quantised at once, per token, is the same: every
		// row is quantised on its own.
		all := make([]float64, 0, len(x)+len(y))
		for bh := range b * h {
			all = append(all, x[bh*n*d:][:n*d]...)
			all = append(all, y[bh*add*d:][:add*d]...)
		}
		want, err := QuantiseCache(all, b, h, n+add, d, code, CachePerToken)
		ensure.NoError(t, err)
		expect.Equal(t, want, got, code)
		_, err = AppendCache(CacheTensor{Batch: 1, Heads: 1, Len: 1, Dim: 1, Codes: []uint8{1}, Scales: []float64{1}, Scaling: CachePerHead}, []float64{1}, 1)
		expect.ErrorIs(t, err, ErrOption)
		_, err = AppendCache(c, y[1:], add)
		expect.ErrorIs(t, err, ErrLength)
	}
}

func TestAttendMatchesAttentionOnTheDequantisedCache(t *testing.T) {
	r := rand.New(rand.NewPCG(35, 36))
	const b, hq, hkv, lq, lk, dk, dv = 2, 4, 2, 3, 5, 4, 3
	q := randomValues(r, b*hq*lq*dk)
	for _, code := range CacheCode(0).Values() {
		for _, sc := range CacheScaling(0).Values() {
			k, err := QuantiseCache(randomValues(r, b*hkv*lk*dk), b, hkv, lk, dk, code, sc)
			ensure.NoError(t, err)
			v, err := QuantiseCache(randomValues(r, b*hkv*lk*dv), b, hkv, lk, dv, code, sc)
			ensure.NoError(t, err)
			kd, _ := DecodeCache(k)
			vd, _ := DecodeCache(v)
			vmax := 0.0
			for _, x := range vd {
				vmax = max(vmax, math.Abs(x))
			}
			for _, causal := range []bool{false, true} {
				got, err := Attend(q, hq, lq, k, v, AttendOptions{Causal: causal})
				ensure.NoError(t, err)
				o := attention.Options{}
				if causal {
					o.Mask = mask.Causal()
				}
				want, _, err := attention.Forward(q, kd, vd, attention.Shape{Batch: b, HeadsQ: hq, HeadsKV: hkv, Lq: lq, Lk: lk, Dk: dk, Dv: dv}, o)
				ensure.NoError(t, err)
				for i := range want {
					expect.True(t, math.Abs(got[i]-want[i]) <= 1e-12*vmax, code, sc, causal, i, got[i], want[i])
				}
				got32, err := Attend32(compare.Narrow(q), hq, lq, k, v, AttendOptions{Causal: causal})
				ensure.NoError(t, err)
				for i := range want {
					expect.True(t, math.Abs(float64(got32[i])-want[i]) <= 1e-5*vmax, "float32 yardstick", i)
				}
			}
		}
	}
}

func TestAttendQuantisesTheWeightsAsDefined(t *testing.T) {
	r := rand.New(rand.NewPCG(37, 38))
	const lk, dk, dv = 7, 3, 2
	q := randomValues(r, dk)
	k, _ := QuantiseCache(randomValues(r, lk*dk), 1, 1, lk, dk, CacheE4M3, CachePerToken)
	v, _ := QuantiseCache(randomValues(r, lk*dv), 1, 1, lk, dv, CacheE5M2, CachePerHead)
	kd, _ := DecodeCache(k)
	vd, _ := DecodeCache(v)
	for _, pc := range []struct {
		p ProbCode
		f compare.Format
		q float64
	}{{ProbE4M3, compare.E4M3, 448}, {ProbE5M2, compare.E5M2, 57344}} {
		got, err := Attend(q, 1, 1, k, v, AttendOptions{Prob: pc.p})
		ensure.NoError(t, err)
		// Independent model of the definition: logits and weights in
		// float64, then codes of fl(Q·e), their exact product with V.
		x := make([]float64, lk)
		m := math.Inf(-1)
		for j := range lk {
			var d float64
			for c := range dk {
				d += float64(q[c] * kd[j*dk+c])
			}
			x[j] = d / math.Sqrt(dk)
			m = max(m, x[j])
		}
		var l float64
		codes := make([]float64, lk)
		for j := range lk {
			e := math.Exp(x[j] - m)
			l += e
			codes[j] = pc.f.RoundSaturating(pc.q * e)
		}
		expect.Equal(t, pc.q, codes[argmax(x)], "the row maximum is the largest code")
		for c := range dv {
			s := new(big.Rat)
			for j := range lk {
				s.Add(s, new(big.Rat).Mul(rat(codes[j]), rat(vd[j*dv+c])))
			}
			want, _ := s.Float64()
			want = want / pc.q / l
			expect.True(t, math.Abs(got[c]-want) <= 1e-14*math.Abs(want), pc.p, c, got[c], want)
		}
		exact, _ := Attend(q, 1, 1, k, v, AttendOptions{})
		expect.NotEqual(t, exact, got, "quantising the weights changes the result")
	}
}

func argmax(x []float64) int {
	b := 0
	for i, v := range x {
		if v > x[b] {
			b = i
		}
	}
	return b
}

func TestAttendErrors(t *testing.T) {
	k := CacheTensor{Batch: 1, Heads: 1, Len: 1, Dim: 2, Codes: []uint8{1, 2}, Scales: []float64{1}}
	v := k
	q := []float64{1, 1}
	_, err := Attend(q, 1, 1, k, v, AttendOptions{})
	ensure.NoError(t, err)
	for _, c := range []struct {
		name string
		run  func() error
		want error
	}{
		{"q length", func() error { _, err := Attend(q[:1], 1, 1, k, v, AttendOptions{}); return err }, ErrLength},
		{"heads", func() error { _, err := Attend(q, 0, 1, k, v, AttendOptions{}); return err }, ErrSize},
		{"scale", func() error { _, err := Attend(q, 1, 1, k, v, AttendOptions{Scale: math.NaN()}); return err }, ErrOption},
		{"prob", func() error { _, err := Attend(q, 1, 1, k, v, AttendOptions{Prob: 9}); return err }, ErrOption},
		{"v len", func() error {
			v2 := CacheTensor{Batch: 1, Heads: 1, Len: 2, Dim: 1, Codes: []uint8{1, 2}, Scales: []float64{1}}
			_, err := Attend(q, 1, 1, k, v2, AttendOptions{})
			return err
		}, ErrSize},
		{"code", func() error { k2 := k; k2.Code = 7; _, err := Attend(q, 1, 1, k2, v, AttendOptions{}); return err }, ErrOption},
		{"scales", func() error {
			k2 := k
			k2.Scaling = CachePerToken
			k2.Scales = nil
			_, err := Attend(q, 1, 1, k2, v, AttendOptions{})
			return err
		}, ErrLength},
		{"scale value", func() error {
			k2 := k
			k2.Scales = []float64{0.1}
			_, err := Attend(q, 1, 1, k2, v, AttendOptions{})
			return err
		}, ErrScale},
		{"negative", func() error { k2 := k; k2.Len = -1; _, err := Attend(q, 1, 1, k2, v, AttendOptions{}); return err }, ErrSize},
		{"quantise NaN", func() error {
			_, err := QuantiseCache([]float64{math.NaN()}, 1, 1, 1, 1, CacheInt8, CachePerTensor)
			return err
		}, ErrValue},
		{"quantise length", func() error { _, err := QuantiseCache([]float64{1}, 1, 1, 1, 2, CacheInt8, CachePerTensor); return err }, ErrLength},
		{"quantise huge", func() error {
			_, err := QuantiseCache(nil, 1<<20, 1<<20, 1, 1, CacheInt8, CachePerTensor)
			return err
		}, ErrSize},
	} {
		expect.ErrorIs(t, c.run(), c.want, c.name)
	}
}
