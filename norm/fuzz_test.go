package norm

import (
	"encoding/binary"
	"errors"
	"math"
	"testing"
)

// FuzzNorm feeds arbitrary bytes to every entry point: the first bytes
// choose d, the options and whether weight and bias are present, the rest
// are float64 values (any bit pattern: NaN, ±Inf, subnormals). It asserts
// that nothing panics, that every error wraps a sentinel, that outputs
// have the shapes of their inputs, and that a finite row gives finite
// outputs with |x̂_j| ≤ √d.
func FuzzNorm(f *testing.F) {
	seed := func(d, flags byte, eps float64, vals ...float64) []byte {
		b := []byte{d, flags}
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(eps))
		for _, v := range vals {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
		return b
	}
	f.Add(seed(4, 0, 1e-5, 1, 2, 3, 4))
	f.Add(seed(2, 0xff, 1e-310, 3e-300, 4e-300, 1e200, -1e200))
	f.Add(seed(3, 0x05, 0, 1, 1, 1))
	f.Add(seed(1, 0x02, math.NaN(), math.Inf(1), math.NaN()))
	f.Add(seed(0, 0, 1, 1))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) < 10 {
			return
		}
		d := int(data[0]%9) - 1 // −1 … 7: also the invalid d ≤ 0
		flags := data[1]
		o := Options{
			Epsilon:   math.Float64frombits(binary.LittleEndian.Uint64(data[2:10])),
			Placement: EpsilonPlacement((flags & 3) % 3), // 2 is invalid
			Weight:    WeightForm((flags >> 2 & 3) % 3),  // 2 is invalid
		}
		var vals []float64
		for p := 10; p+8 <= len(data); p += 8 {
			vals = append(vals, math.Float64frombits(binary.LittleEndian.Uint64(data[p:])))
		}
		take := func(n int) []float64 {
			n = min(n, len(vals))
			v := vals[:n]
			vals = vals[n:]
			return v
		}
		var w, b []float64
		if flags&0x10 != 0 && d > 0 {
			w = take(d)
		}
		if flags&0x20 != 0 && d > 0 {
			b = take(d)
		}
		x := vals
		checkErr := func(err error) bool {
			if err == nil {
				return true
			}
			if !errors.Is(err, ErrShape) && !errors.Is(err, ErrEpsilon) && !errors.Is(err, ErrOption) {
				t.Fatalf("error %q wraps no sentinel", err)
			}
			return false
		}
		checkRowsOut := func(name string, y []float64) {
			if len(y) != len(x) {
				t.Fatalf("%s: %d outputs for %d inputs", name, len(y), len(x))
			}
			if w != nil || b != nil {
				return // the affine part may overflow
			}
			for lo := 0; lo < len(x); lo += d {
				finite := true
				for _, v := range x[lo : lo+d] {
					finite = finite && !math.IsNaN(v) && !math.IsInf(v, 0)
				}
				for _, v := range y[lo : lo+d] {
					if finite && !(math.Abs(v) <= math.Sqrt(float64(d))*(1+1e-14)) {
						t.Fatalf("%s: finite row %v gave %v", name, x[lo:lo+d], y[lo:lo+d])
					}
				}
			}
		}
		y, err := LayerNorm(x, d, w, b, o)
		if checkErr(err) {
			checkRowsOut("LayerNorm", y)
		}
		y, err = RMSNorm(x, d, w, o)
		if checkErr(err) {
			checkRowsOut("RMSNorm", y)
		}
		g, err := LayerNormBackward(x, d, w, x, o)
		if checkErr(err) && (len(g.X) != len(x) || len(g.Bias) != d || (w != nil) != (g.Weight != nil)) {
			t.Fatalf("LayerNormBackward shapes: %d %d %d", len(g.X), len(g.Weight), len(g.Bias))
		}
		g, err = RMSNormBackward(x, d, w, x, o)
		if checkErr(err) && (len(g.X) != len(x) || g.Bias != nil || (w != nil) != (g.Weight != nil)) {
			t.Fatalf("RMSNormBackward shapes: %d %d", len(g.X), len(g.Weight))
		}
		y, s, err := AddLayerNorm(x, x, d, w, b, o)
		if checkErr(err) && (len(y) != len(x) || len(s) != len(x)) {
			t.Fatalf("AddLayerNorm shapes: %d %d", len(y), len(s))
		}
		y, s, err = AddRMSNorm(x, x, d, w, o)
		if checkErr(err) && (len(y) != len(x) || len(s) != len(x)) {
			t.Fatalf("AddRMSNorm shapes: %d %d", len(y), len(s))
		}
		x32 := make([]float32, len(x))
		for i, v := range x {
			x32[i] = float32(v)
		}
		y32, err := RMSNorm32(x32, d, nil, o)
		if checkErr(err) && len(y32) != len(x) {
			t.Fatalf("RMSNorm32: %d outputs for %d inputs", len(y32), len(x))
		}
		y32, err = LayerNorm32(x32, d, nil, nil, o)
		if checkErr(err) && len(y32) != len(x) {
			t.Fatalf("LayerNorm32: %d outputs for %d inputs", len(y32), len(x))
		}
		y32, s32, err := AddLayerNorm32(x32, x32, d, nil, nil, o)
		if checkErr(err) && (len(y32) != len(x) || len(s32) != len(x)) {
			t.Fatalf("AddLayerNorm32 shapes: %d %d", len(y32), len(s32))
		}
		g32, err := AddRMSNormBackward32(x32, d, nil, x32, x32, o)
		if checkErr(err) && (len(g32.X) != len(x) || g32.Bias != nil) {
			t.Fatalf("AddRMSNormBackward32 shapes: %d", len(g32.X))
		}
	})
}
