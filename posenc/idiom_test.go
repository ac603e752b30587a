package posenc

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// The tests of the angle idioms (Rotary.Angles): what the float32
// instantiations compute with each word, and that the reference ignores
// the field.

// tableErr is the largest |Tables32 − Tables| over the cos and sin entries
// of the 16 positions m0 … m0+15.
func tableErr(t *testing.T, r Rotary, m0 int) float64 {
	t.Helper()
	pos := make([]int, 16)
	for i := range pos {
		pos[i] = m0 + i
	}
	c, s, err := r.Tables(pos)
	ensure.NoError(t, err)
	c32, s32, err := r.Tables32(pos)
	ensure.NoError(t, err)
	e := 0.0
	for i := range c {
		e = math.Max(e, math.Max(math.Abs(c[i]-float64(c32[i])), math.Abs(s[i]-float64(s32[i]))))
	}
	return e
}

// TestAnglesErrorGrowsWithPosition: with the default the float32 tables
// are the reference rounded once, within half a float32 ulp of 1 (2⁻²⁵)
// at every position; with a float32 idiom the angle error is
// m·θ·O(2⁻²⁴), so the table error grows linearly with the position:
// positions near 2048 have about 32 times the error of those near 64
// (measured: 35× for float32-angles, 26× for float32-frequencies; the
// bound asks for 16× to 64×). Dimension 64, base 10000.
func TestAnglesErrorGrowsWithPosition(t *testing.T) {
	for _, a := range AnglesFloat64.Values() {
		r := Rotary{Dim: 64, Angles: a}
		near64, near2048 := tableErr(t, r, 64), tableErr(t, r, 2048)
		t.Logf("%v: max table error %.3g near position 64, %.3g near 2048 (×%.1f)", a, near64, near2048, near2048/near64)
		if a == AnglesFloat64 {
			expect.LessOrEqual(t, near64, 0x1p-25, "%v: the reference rounded once", a)
			expect.LessOrEqual(t, near2048, 0x1p-25, "%v: the reference rounded once", a)
			continue
		}
		ratio := near2048 / near64
		expect.True(t, ratio > 16 && ratio < 64, "%v: error ratio 2048 : 64 = %.3g; want about 32 (linear in the position)", a, ratio)
		expect.Greater(t, near64, 10*0x1p-25, "%v: the idiom's error near 64 is well above one float32 rounding", a)
	}
	// float32-angles rounds the product too: more error than rounding θ alone.
	expect.Greater(t, tableErr(t, Rotary{Dim: 64, Angles: AnglesFloat32}, 2048), tableErr(t, Rotary{Dim: 64, Angles: AnglesFloat32Frequencies}, 2048))
}

// TestAnglesFloat32IsTheFrameworkIdiom: Tables32 with AnglesFloat32 is, bit
// for bit, the tables a float32 port computes the usual way [common
// practice], written out here: inverse frequencies in float32, positions
// as float32, their float32 products, cos and sin rounded to float32; and
// Apply32 rotates with those tables. With AnglesFloat32Frequencies the
// angle is the exact product of the position and the float32 frequency.
func TestAnglesFloat32IsTheFrameworkIdiom(t *testing.T) {
	r := Rotary{Dim: 8, Rotated: 6, Base: 500, Pairing: PairHalves, Magnitude: 1.25, Angles: AnglesFloat32}
	freqs, err := r.Frequencies()
	ensure.NoError(t, err)
	pos := []int{0, 1, 7, 100, 5000, 1 << 25, -3}
	c32, s32, err := r.Tables32(pos)
	ensure.NoError(t, err)
	h := 3
	for t0, m := range pos {
		for i, th := range freqs {
			a := float32(m) * float32(th)
			s, c := math.Sincos(float64(a))
			expect.Equal(t, float32(float64(c*1.25)), c32[t0*h+i], "cos, position %d, frequency %d", m, i)
			expect.Equal(t, float32(float64(s*1.25)), s32[t0*h+i], "sin, position %d, frequency %d", m, i)
		}
	}
	x := make([]float32, len(pos)*8)
	for i := range x {
		x[i] = float32(i%11) - 5
	}
	y, err := r.Apply32(x, len(pos), Positions{List: pos})
	ensure.NoError(t, err)
	for t0 := range pos {
		xr, yr := x[t0*8:(t0+1)*8], y[t0*8:(t0+1)*8]
		for i := range h {
			c, s := c32[t0*h+i], s32[t0*h+i]
			expect.Equal(t, float32(xr[i]*c)-float32(xr[i+h]*s), yr[i])
			expect.Equal(t, float32(xr[i]*s)+float32(xr[i+h]*c), yr[i+h])
		}
		expect.Equal(t, xr[6:], yr[6:], "the pass-through dims")
	}

	r.Angles = AnglesFloat32Frequencies
	c32, _, err = r.Tables32(pos)
	ensure.NoError(t, err)
	for t0, m := range pos {
		for i, th := range freqs {
			_, c := sincosDD(angle(m, ddFrom(float64(float32(th)))))
			expect.Equal(t, float32(float64(c*1.25)), c32[t0*h+i], "cos, position %d, frequency %d", m, i)
		}
	}
}

// TestAnglesLeaveTheReference: Apply, ApplyInverse and Tables give the same
// bits whatever Angles says, and so does Apply32 with the default: the
// zero value is today's float32 twin (the reference tables rounded once).
func TestAnglesLeaveTheReference(t *testing.T) {
	x := randVec(rand.New(rand.NewPCG(21, 22)), 5*16)
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
	}
	pos := Positions{Offset: 1000}
	base := Rotary{Dim: 16, Scaling: Scaling{Method: YaRN, Factor: 4, TrainedLength: 64}}
	want, err := base.Apply(x, 5, pos)
	ensure.NoError(t, err)
	wantInv, err := base.ApplyInverse(x, 5, pos)
	ensure.NoError(t, err)
	wantC, wantS, err := base.Tables([]int{3, 900000})
	ensure.NoError(t, err)
	for _, a := range AnglesFloat64.Values() {
		r := base
		r.Angles = a
		got, err := r.Apply(x, 5, pos)
		ensure.NoError(t, err)
		expect.Equal(t, want, got, "%v", a)
		got, err = r.ApplyInverse(x, 5, pos)
		ensure.NoError(t, err)
		expect.Equal(t, wantInv, got, "%v", a)
		c, s, err := r.Tables([]int{3, 900000})
		ensure.NoError(t, err)
		expect.Equal(t, wantC, c, "%v", a)
		expect.Equal(t, wantS, s, "%v", a)
	}
	c32, s32, err := base.Tables32([]int{3, 900000})
	ensure.NoError(t, err)
	for i := range wantC {
		expect.Equal(t, float32(wantC[i]), c32[i])
		expect.Equal(t, float32(wantS[i]), s32[i])
	}

	_, err = Rotary{Dim: 8, Angles: 3}.Apply32(make([]float32, 8), 1, Positions{})
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "posenc: invalid option: Rotary.Apply32: Rotary.Angles = 3; want one of float64, float32-frequencies, float32-angles")
	_, _, err = Rotary{Dim: 8}.Tables32([]int{MaxPosition + 1})
	expect.ErrorIs(t, err, ErrPosition)
}
