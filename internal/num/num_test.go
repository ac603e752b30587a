package num

import (
	"math"
	"slices"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
)

func TestConvert(t *testing.T) {
	expect.Nil(t, Convert[float32, float64](nil))
	expect.Equal(t, []float32{}, Convert[float32](make([]float64, 0)))
	// 1 + 2⁻²⁴ is a tie between float32 neighbours 1 and 1 + 2⁻²³: ties to
	// even give 1 (IEEE 754-2019 §4.3.1); 1 + 3·2⁻²⁵ rounds up.
	got := Convert[float32]([]float64{1 + 0x1p-24, 1 + 3*0x1p-25, math.Inf(-1)})
	expect.Equal(t, []float32{1, 1 + 0x1p-23, float32(math.Inf(-1))}, got)
	// float32 → float64 is exact.
	expect.Equal(t, []float64{0x1.fffffep127, 0x1p-149}, Convert[float64]([]float32{math.MaxFloat32, math.SmallestNonzeroFloat32}))
}

func TestUnravel(t *testing.T) {
	// Row-major order (the order of the NumPy .npy format with
	// fortran_order False): every offset of [2, 3, 4] once, in order, the
	// last index fastest.
	shape := []int{2, 3, 4}
	n := 0
	for i := range 2 {
		for j := range 3 {
			for k := range 4 {
				if got := Unravel(n, shape); !slices.Equal(got, []int{i, j, k}) {
					t.Errorf("Unravel(%d, %v) = %v; want [%d %d %d]", n, shape, got, i, j, k)
				}
				n++
			}
		}
	}
	if got := Unravel(0, nil); len(got) != 0 {
		t.Errorf("Unravel(0, nil) = %v; want []", got)
	}
	if got := Unravel(0, []int{3, 0}); !slices.Equal(got, []int{0, 0}) {
		t.Errorf("Unravel(0, [3 0]) = %v; want [0 0]", got)
	}
}
