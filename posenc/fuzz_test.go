package posenc

import (
	"errors"
	"math"
	"testing"

	"github.com/plumbref/plumb/mask"
)

// sentinels are every error the package may return.
var sentinels = []error{ErrDim, ErrBase, ErrFactor, ErrLength, ErrPosition, ErrHeads, ErrShape, ErrOption}

func checkSentinel(t *testing.T, err error) {
	t.Helper()
	for _, s := range sentinels {
		if errors.Is(err, s) {
			return
		}
	}
	t.Fatalf("error %q wraps no sentinel", err)
}

// FuzzRotary drives the rotary, scaling and sinusoidal entry points with
// arbitrary configurations: no panic, an error that wraps a sentinel, or a
// result of the right length with finite values for finite input.
func FuzzRotary(f *testing.F) {
	f.Add(8, 0, 10000.0, uint8(0), uint8(0), 0.0, 0, 0, 0.0, 0.0, 2, 3, false)
	f.Add(13, 6, 500.0, uint8(1), uint8(3), 8.0, 4096, 0, 1.0, 32.0, 1, 999999, true)
	f.Add(16, 16, 1e6, uint8(0), uint8(2), 4.0, 2048, 9000, 0.0, 0.0, 4, -7, false)
	f.Add(7, 9, 1.0, uint8(9), uint8(7), math.NaN(), -1, -1, 3.0, 2.0, 0, math.MaxInt, true)
	f.Fuzz(func(t *testing.T, dim, rotated int, base float64, pairing, method uint8, factor float64,
		trained, current int, alpha, beta float64, L, offset int, dims bool) {
		if dim > 64 || L > 16 || rotated > 64 {
			return // keep allocations small; larger sizes exercise nothing new
		}
		r := Rotary{Dim: dim, Rotated: rotated, Base: base, Pairing: Pairing(pairing % 3),
			Scaling: Scaling{Method: Method(method % 6), Factor: factor, TrainedLength: trained,
				CurrentLength: current, Alpha: alpha, Beta: beta}}
		if dims {
			r.Scaling.Ramp = RampDims
		}
		if r.Scaling.Method == PerFrequency && dim > 0 {
			r.Scaling.Factors = make([]float64, max(rotated, 0)/2)
			for i := range r.Scaling.Factors {
				r.Scaling.Factors[i] = 1 + float64(i)
			}
		}
		n := 2 * max(L, 1) * max(dim, 1)
		x := make([]float64, n)
		for i := range x {
			x[i] = float64(i%7) - 3
		}
		y, err := r.Apply(x, L, Positions{Offset: offset})
		if err != nil {
			checkSentinel(t, err)
		} else {
			if len(y) != len(x) {
				t.Fatalf("len(y) = %d, len(x) = %d", len(y), len(x))
			}
			for i, v := range y {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("y[%d] = %v from finite input, config %+v", i, v, r)
				}
			}
		}
		th, err := r.Frequencies()
		if err != nil {
			checkSentinel(t, err)
		} else {
			rot := rotated
			if rot == 0 {
				rot = dim
			}
			if len(th) != rot/2 {
				t.Fatalf("%d frequencies for r = %d", len(th), rot)
			}
		}
		if _, err := (Sinusoidal{Dim: dim, Base: base, Layout: Layout(pairing % 3)}).Table(L, offset); err != nil {
			checkSentinel(t, err)
		}
		if _, err := NTKBase(base, factor, rotated); err != nil {
			checkSentinel(t, err)
		}
		if _, err := YaRNMagnitude(factor); err != nil {
			checkSentinel(t, err)
		}
	})
}

// FuzzALiBi: slopes and bias for arbitrary heads and geometries.
func FuzzALiBi(f *testing.F) {
	f.Add(8, 4, 4, false, 0, uint8(0), 0.5)
	f.Add(12, 1, 9, true, 3, uint8(1), -0.25)
	f.Add(0, -1, 3, false, -5, uint8(2), math.Inf(1))
	f.Fuzz(func(t *testing.T, heads, lq, lk int, start bool, offset int, form uint8, slope float64) {
		if heads > 64 || lq > 32 || lk > 32 {
			return
		}
		s, err := ALiBiSlopes(heads)
		if err != nil {
			checkSentinel(t, err)
			s = []float64{slope}
		} else if len(s) != heads {
			t.Fatalf("%d slopes for %d heads", len(s), heads)
		}
		g := mask.Geometry{Batch: 1, Lq: lq, Lk: lk, Offset: offset}
		if start {
			g.Align = mask.AlignStart
		}
		b, err := ALiBiBias(s, g, mask.ALiBiForm(form%4)) // 3 forms and one invalid value
		if err != nil {
			checkSentinel(t, err)
			return
		}
		if len(b) != len(s)*lq*lk {
			t.Fatalf("len(bias) = %d, want %d·%d·%d", len(b), len(s), lq, lk)
		}
	})
}
