package posenc

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
)

// The double-double helpers against constants computed with mpmath at 60
// digits ([mpmath]); a double-double result is judged by its error in
// units of 2^−104 of the value (the format carries ~106 bits).
func ddErr(got dd, hi, lo float64) float64 {
	d := ddSub(got, dd{hi, lo})
	return math.Abs(d.hi) / (math.Abs(hi) * 0x1p-104)
}

func TestDoubleDouble(t *testing.T) {
	// e^{ln 2} = 2, ln 2 itself, e^1 and ln 10 ([mpmath], split hi + lo).
	expect.Less(t, ddErr(ddExp(ddLn2), 2, 0), 4.0)
	expect.Less(t, ddErr(ddLog(ddFrom(2)), ddLn2.hi, ddLn2.lo), 4.0)
	expect.Less(t, ddErr(ddExp(ddFrom(1)), 0x1.5bf0a8b145769p+1, 0x1.4d57ee2b1013ap-53), 4.0)
	expect.Less(t, ddErr(ddLog(ddFrom(10)), 0x1.26bb1bbb55516p+1, -0x1.f48ad494ea3e9p-53), 4.0)
	// 1/3 by long division.
	expect.Less(t, ddErr(ddDiv(ddFrom(1), ddFrom(3)), 0x1.5555555555555p-2, 0x1.5555555555555p-56), 2.0)
	// floor and ceil look at the low part when the high part is integral.
	expect.Equal(t, 2.0, ddFloor(dd{3, -0x1p-60}))
	expect.Equal(t, 3.0, ddCeil(dd{3, -0x1p-60}))
	expect.Equal(t, 3.0, ddFloor(dd{3, 0x1p-60}))
	expect.Equal(t, 4.0, ddCeil(dd{3, 0x1p-60}))
	expect.Equal(t, 3.0, ddCeil(ddFrom(3)))
	// Overflow and underflow of exp.
	expect.True(t, math.IsInf(ddExp(ddFrom(800)).hi, 1))
	expect.Equal(t, 0.0, ddExp(ddFrom(-800)).hi)
}
