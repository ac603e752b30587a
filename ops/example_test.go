package ops_test

import (
	"fmt"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// Rotary encoding of x = [1, 2, 3, 4] at position 1, dims paired (2i, 2i+1),
// base 10000 (θ = 1, 0.01): the worked value of the package documentation
// (doc.go, Worked values; [mpmath]: −1.1426396637476533, 1.9220755965441759,
// 2.9598506679133292, 4.0297995016691611). The outputs below are those
// values correctly rounded to float64, except the third: 2.9598506679133294
// is one ulp (4.4e-16) above the nearest float64, 2.959850667913329, an
// error of 0.51 ulp ([mpmath]).
func ExampleRun() {
	out, err := ops.Run("rotary-apply", []byte(`{"version": 1, "offset": 1}`),
		ops.Tensors{"x": {Shape: []int{1, 4}, Data: []float64{1, 2, 3, 4}}})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(out["y"].Shape)
	for _, v := range out["y"].Data {
		fmt.Println(v)
	}
	// Output:
	// [1 4]
	// -1.1426396637476532
	// 1.922075596544176
	// 2.9598506679133294
	// 4.029799501669161
}

// An unknown key is refused, by name.
func ExampleRun_unknownKey() {
	_, err := ops.Run("softmax", []byte(`{"version": 1, "temperature": 2}`),
		ops.Tensors{"x": {Shape: []int{3}, Data: []float64{1, 3, 2}}})
	fmt.Println(err)
	// Output:
	// ops: invalid configuration: softmax: unknown key "temperature"; want one of version, accumulation, softmax_shift (see `plumb help softmax`)
}

// The tolerance for a bfloat16 softmax of the row [1, 3, 2]: the float32
// instantiation on the inputs rounded to bfloat16 (which holds 1, 3 and 2
// exactly), its output rounded to bfloat16, and twice its error plus one
// rounding. By hand: the largest probability, 0.66524…, rounds to 170/256 =
// 0.6640625 in bfloat16 (spacing 2^−8 in [0.5, 1)), an error of 0.00118;
// twice that plus 2^−8 · 0.66524 (one rounding) is 0.00496.
func ExampleYardstick() {
	in := ops.Tensors{"x": {Shape: []int{1, 3}, Data: []float64{1, 3, 2}}}
	ys, err := ops.Yardstick("softmax", nil, in, compare.BFloat16, compare.DefaultK)
	if err != nil {
		fmt.Println(err)
		return
	}
	y := ys["y"]
	fmt.Printf("yardstick error %.3g, tolerance %.3g absolute, %.3g normwise\n",
		y.Report.MaxAbs, y.Tolerance.Abs, y.Tolerance.MaxNormwise)
	// Output:
	// yardstick error 0.00118, tolerance 0.00496 absolute, 0.00742 normwise
}
