package num

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
)

func TestConvert(t *testing.T) {
	assert.Nil(t, Convert[float32, float64](nil))
	assert.Equal(t, []float32{}, Convert[float32](make([]float64, 0)))
	// 1 + 2⁻²⁴ is a tie between float32 neighbours 1 and 1 + 2⁻²³: ties to
	// even give 1 (IEEE 754-2019 §4.3.1); 1 + 3·2⁻²⁵ rounds up.
	got := Convert[float32]([]float64{1 + 0x1p-24, 1 + 3*0x1p-25, math.Inf(-1)})
	assert.Equal(t, []float32{1, 1 + 0x1p-23, float32(math.Inf(-1))}, got)
	// float32 → float64 is exact.
	assert.Equal(t, []float64{0x1.fffffep127, 0x1p-149}, Convert[float64]([]float32{math.MaxFloat32, math.SmallestNonzeroFloat32}))
}
