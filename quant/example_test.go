package quant_test

import (
	"fmt"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/quant"
)

// The scale is rounded to its format before the elements are quantised:
// in bfloat16, 1/127 rounds up to s = 130·2^−14, and 1 then becomes the
// code 126, not 127 (126·s = 0.999755859375).
func ExampleQuantise() {
	q, err := quant.Quantise([]float64{1, -0.5, 0.25}, 1, 3, quant.Scheme{Scale: quant.ScaleBFloat16})
	if err != nil {
		fmt.Println(err)
		return
	}
	x, _ := quant.Dequantise(q)
	fmt.Println(q.Codes, q.Scales[0]*16384)
	fmt.Println(x)
	// Output:
	// [126 -63 32] 130
	// [0.999755859375 -0.4998779296875 0.25390625]
}

// FP4 E2M1 elements: the block's largest value, 0.7, gives the shared
// exponent ⌊log₂ 0.7⌋ − 2 = −3, and 0.7·8 = 5.6 rounds to 6.
func ExampleEncodeMX() {
	x := make([]float64, quant.MXBlockSize)
	x[0], x[1], x[2] = 0.7, 0.3, -0.1
	b, _ := quant.EncodeMX(x, quant.ElemE2M1)
	v, _ := quant.DecodeMX(b)
	fmt.Println(int(b[0].Scale)-127, v[:3])
	// Output:
	// -3 [0.75 0.25 -0.125]
}

func ExamplePack4() {
	b, _ := quant.Pack4([]int8{-1, 7, -8}, quant.Packing{Order: quant.LowFirst, Code: quant.TwosComplement})
	fmt.Printf("% x\n", b)
	// Output:
	// 7f 08
}

func ExampleMatMulInt8() {
	a := quant.Tensor{Rows: 1, Cols: 2, Codes: []int8{3, -4}, Scales: []float64{0.5}}
	b := quant.Tensor{Rows: 2, Cols: 1, Codes: []int8{10, 5}, Scales: []float64{0.25}}
	acc, out, _ := quant.MatMulInt8(a, b)
	fmt.Println(acc, out)
	// Output:
	// [10] [1.25]
}

func ExampleWeightOnly() {
	w := quant.Tensor{Rows: 2, Cols: 1, Codes: []int8{3, -1}, Scales: []float64{0.5}}
	y, _ := quant.WeightOnly([]float64{0.1, 0.2}, 1, w, compare.BFloat16)
	// 0.1·1.5 − 0.2·0.5 = 0.05; bfloat16 has the spacing 2^−12 in [2^−5, 2^−4),
	// and 0.05·2^12 = 204.8 rounds to 205: 205·2^−12.
	fmt.Println(y)
	// Output:
	// [0.050048828125]
}

func ExampleSQNR() {
	db, _ := quant.SQNR([]float64{1, 2, 3, 4}, []float64{1, 2, 3, 5})
	fmt.Printf("%.4f dB\n", db)
	// Output:
	// 14.7712 dB
}
