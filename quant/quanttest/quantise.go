package quanttest

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/quant"
)

// Kernel is a quantiser under test. Quantise is required; Pack4 and
// QuantiseFP8 are checked when set. Each has the signature of the quant
// function of its name, whose result is the reference.
type Kernel struct {
	Quantise    func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error)
	Pack4       func(codes []int8, p quant.Packing) ([]byte, error)
	QuantiseFP8 func(x []float64, rows, cols int, s quant.FP8Scheme, scales []float64) (quant.FP8Tensor, error)
}

// MXKernel is an MX encoder under test, with the signature of
// quant.EncodeMX; Dot, when set, is checked against quant.DotMX on the
// reference's blocks.
type MXKernel struct {
	Encode func(x []float64, e quant.Element) ([]quant.MXBlock, error)
	Dot    func(a, b []quant.MXBlock) (float64, error)
}

// Case is one case of RunQuantise: x, a [Rows, Cols] tensor, under Scheme.
type Case struct {
	Name, Why  string
	Rows, Cols int
	Scheme     quant.Scheme
	X          []float64
}

// FP8Case is one case of RunQuantise's FP8 part: x under Scheme, with the
// given scales (nil: chosen).
type FP8Case struct {
	Name, Why  string
	Rows, Cols int
	Scheme     quant.FP8Scheme
	Scales     []float64
	X          []float64
}

// MXCase is one case of RunMX: x, whole blocks of 32, as Element.
type MXCase struct {
	Name, Why string
	Element   quant.Element
	X         []float64
}

// ramp returns n values a + i·step.
func ramp(n int, a, step float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = a + float64(float64(i)*step)
	}
	return x
}

// mixed returns n deterministic values of varied sign and magnitude in
// (−amp, amp): a sine table, the same on every platform up to Go's Sin,
// exact here for it is rounded to multiples of 2^−10.
func mixed(n int, amp float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Round(math.Sin(float64(3*i+1))*1024) / 1024 * amp
	}
	return x
}

// Cases returns RunQuantise's integer cases, in the order it runs them.
func Cases() []Case {
	ties := append(ramp(18, -9.0/8, 1.0/8), 127.0/4, -127.0/4) // s = 1/4: every other value a tie
	outlier := mixed(40, 1)
	outlier[7], outlier[31] = 9, -12
	far := ramp(32, 10, 10.0/31)
	return []Case{
		{"ties_half_even", "s = 1/4 and x = k/8: every other x/s a tie, to even", 1, 20, quant.Scheme{}, ties},
		{"ties_half_away", "the same ties, away from zero", 1, 20, quant.Scheme{Rounding: quant.HalfAway}, ties},
		{"clipped_int8", "symmetric-clipped: −127..127, an outlier clipped at −127 not −128", 1, 40, quant.Scheme{Range: quant.RangeClipped, Rule: quant.RulePercentile, Percentile: 90}, outlier},
		{"clipped_int4_pow2", "int4 −7..7 with power-of-two scales", 4, 6, quant.Scheme{Width: quant.Int4, Range: quant.RangeClipped, Scale: quant.ScalePow2}, mixed(24, 3)},
		{"scale_rounded_up", "bfloat16 scales: 1/127 rounds down to nearest, so the scale must round up", 1, 8, quant.Scheme{Scale: quant.ScaleBFloat16}, append(mixed(7, 0.5), 1)},
		{"asymmetric_per_row", "integer zero points, one scale per row", 4, 6, quant.Scheme{Symmetry: quant.Asymmetric, Granularity: quant.PerChannel}, mixed(24, 2)},
		{"groups_down_columns", "groups of 2 down each column, binary16 scales", 4, 6, quant.Scheme{Granularity: quant.PerGroup, Channel: quant.ChannelCols, Group: 2, Scale: quant.ScaleBinary16}, mixed(24, 5)},
		{"zero_block", "a row of zeros beside others: scale 1, codes 0 (asymmetric: the zero point)", 2, 6, quant.Scheme{Symmetry: quant.Asymmetric, Granularity: quant.PerChannel}, append(make([]float64, 6), mixed(6, 1)...)},
		{"subnormal_scale", "magnitudes near 2^−140: float32 scales in the subnormal range", 2, 4, quant.Scheme{}, scaled(mixed(8, 1), -140)},
		{"percentile", "the 90th percentile by nearest rank, two outliers clipped", 1, 40, quant.Scheme{Rule: quant.RulePercentile, Percentile: 90}, outlier},
		{"float_zero_point", "a float zero point in binary16, int4 groups of 8 far from zero", 2, 16, quant.Scheme{Symmetry: quant.AsymmetricFloat, Width: quant.Int4, Granularity: quant.PerGroup, Group: 8, Scale: quant.ScaleBinary16}, far},
	}
}

func scaled(x []float64, e int) []float64 {
	for i := range x {
		x[i] = math.Ldexp(x[i], e)
	}
	return x
}

// FP8Cases returns RunQuantise's FP8 cases (when Kernel.QuantiseFP8 is set).
func FP8Cases() []FP8Case {
	edge := []float64{896, 928, 960, -1000, 1, math.Copysign(0, -1), 0x1p-9, 3 * 0x1p-10}
	return []FP8Case{
		{"fp8_e4m3_chosen", "E4M3, scale up(amax/448) per row", 4, 8, quant.FP8Scheme{Granularity: quant.PerChannel}, nil, mixed(32, 50)},
		{"fp8_e5m2_groups", "E5M2, groups of 4, bfloat16 scales", 4, 8, quant.FP8Scheme{Element: quant.FP8E5M2, Granularity: quant.PerGroup, Group: 4, Scale: quant.ScaleBFloat16}, nil, mixed(32, 50)},
		{"fp8_e4m3_overflow_nan", "a given scale 2: 928/2 ties to 448, 960/2 overflows to NaN (E4M3 has no infinity)", 1, 8, quant.FP8Scheme{}, []float64{2}, edge},
		{"fp8_e4m3_saturate", "the same with saturation: ±448", 1, 8, quant.FP8Scheme{Overflow: quant.OverflowSaturate}, []float64{2}, edge},
		{"fp8_e5m2_overflow_inf", "E5M2 beyond 57344 is ±Inf", 1, 4, quant.FP8Scheme{Element: quant.FP8E5M2}, []float64{1}, []float64{57344, 61440, -1e9, 0x1p-16}},
	}
}

// MXCases returns RunMX's cases.
func MXCases() []MXCase {
	var out []MXCase
	for _, e := range quant.Element(0).Values() {
		out = append(out,
			MXCase{"mx_" + e.String(), "two blocks of mixed values", e, mixed(64, 3)},
			MXCase{"mx_" + e.String() + "_zero_block", "a block of zeros, then one with a power-of-two maximum", e, append(make([]float64, 32), ramp(32, -8, 0.5)...)},
		)
	}
	return out
}

// RunQuantise runs k on every case of Cases (and, when set, Pack4 on the
// int4 cases' codes under every packing and QuantiseFP8 on FP8Cases), each
// a subtest named by the case, and fails a case whose codes, scales or zero
// points differ in any bit from package quant's exact reference.
func RunQuantise[T conformance.TB[T]](t T, k Kernel) {
	t.Helper()
	if k.Quantise == nil {
		t.Errorf("quanttest: Kernel.Quantise is nil")
		return
	}
	for _, c := range Cases() {
		t.Run(c.Name, func(t T) {
			t.Helper()
			runCase(t, k, c)
		})
	}
	if k.QuantiseFP8 == nil {
		return
	}
	for _, c := range FP8Cases() {
		t.Run(c.Name, func(t T) {
			t.Helper()
			runFP8(t, k, c)
		})
	}
}

func runCase[T conformance.TB[T]](t T, k Kernel, c Case) {
	t.Helper()
	conv := fmt.Sprintf("%v %v %v %v %v %v %v", c.Scheme.Symmetry, c.Scheme.Granularity, c.Scheme.Width, c.Scheme.Range, c.Scheme.Rounding, c.Scheme.Scale, c.Scheme.Rule)
	ref, err := quant.Quantise(c.X, c.Rows, c.Cols, c.Scheme)
	if err != nil {
		t.Errorf("case %s (%s): the reference: %v", c.Name, conv, err)
		return
	}
	got, err := k.Quantise(append([]float64(nil), c.X...), c.Rows, c.Cols, c.Scheme)
	if err != nil {
		t.Errorf("case %s (%s): the kernel: %v", c.Name, conv, err)
		return
	}
	ok := same(t, c.Name, conv, "Scales", got.Scales, ref.Scales, nil) &&
		same(t, c.Name, conv, "Zeros", got.Zeros, ref.Zeros, nil) &&
		same(t, c.Name, conv, "FloatZeros", got.FloatZeros, ref.FloatZeros, nil) &&
		same(t, c.Name, conv, "Codes", got.Codes, ref.Codes, c.X)
	if !ok || c.Scheme.Width != quant.Int4 || k.Pack4 == nil {
		return
	}
	for _, p := range packings() {
		want, _ := quant.Pack4(ref.Codes, p) // the reference's codes are int4
		b, err := k.Pack4(append([]int8(nil), ref.Codes...), p)
		if err != nil {
			t.Errorf("case %s (%s): Pack4 under %v %v: %v", c.Name, conv, p.Order, p.Code, err)
			return
		}
		if !same(t, c.Name, fmt.Sprintf("%s, packed %v %v", conv, p.Order, p.Code), "packed bytes", b, want, nil) {
			return
		}
	}
}

func packings() []quant.Packing {
	var out []quant.Packing
	for _, o := range quant.NibbleOrder(0).Values() {
		for _, c := range quant.NibbleCode(0).Values() {
			out = append(out, quant.Packing{Order: o, Code: c})
		}
	}
	return out
}

func runFP8[T conformance.TB[T]](t T, k Kernel, c FP8Case) {
	t.Helper()
	conv := fmt.Sprintf("%v %v %v %v", c.Scheme.Element, c.Scheme.Granularity, c.Scheme.Overflow, c.Scheme.Scale)
	ref, err := quant.QuantiseFP8(c.X, c.Rows, c.Cols, c.Scheme, c.Scales)
	if err != nil {
		t.Errorf("case %s (%s): the reference: %v", c.Name, conv, err)
		return
	}
	got, err := k.QuantiseFP8(append([]float64(nil), c.X...), c.Rows, c.Cols, c.Scheme, append([]float64(nil), c.Scales...))
	if err != nil {
		t.Errorf("case %s (%s): the kernel: %v", c.Name, conv, err)
		return
	}
	_ = same(t, c.Name, conv, "Scales", got.Scales, ref.Scales, nil) &&
		same(t, c.Name, conv, "Codes", got.Codes, ref.Codes, c.X)
}

// RunMX runs k.Encode on every case of MXCases, each a subtest named by
// the case, and fails a case whose blocks (element, scale, element bits)
// differ from quant.EncodeMX's; with k.Dot set, the dot product of the
// reference's blocks with themselves must be quant.DotMX's, bit for bit.
func RunMX[T conformance.TB[T]](t T, k MXKernel) {
	t.Helper()
	if k.Encode == nil {
		t.Errorf("quanttest: MXKernel.Encode is nil")
		return
	}
	for _, c := range MXCases() {
		t.Run(c.Name, func(t T) {
			t.Helper()
			conv := c.Element.String()
			ref, err := quant.EncodeMX(c.X, c.Element)
			if err != nil {
				t.Errorf("case %s (%s): the reference: %v", c.Name, conv, err)
				return
			}
			got, err := k.Encode(append([]float64(nil), c.X...), c.Element)
			if err != nil {
				t.Errorf("case %s (%s): the kernel: %v", c.Name, conv, err)
				return
			}
			if len(got) != len(ref) {
				t.Errorf("case %s (%s): %d blocks; want %d", c.Name, conv, len(got), len(ref))
				return
			}
			for b := range ref {
				if got[b].Scale != ref[b].Scale {
					t.Errorf("case %s (%s): block %d: scale E8M0 %d (2^%d); want %d (2^%d), OCP MX v1.0 §6.3: ⌊log₂ amax⌋ − emax", c.Name, conv, b, got[b].Scale, int(got[b].Scale)-127, ref[b].Scale, int(ref[b].Scale)-127)
					return
				}
				if !same(t, c.Name, conv, fmt.Sprintf("block %d element bits", b), got[b].Bits[:], ref[b].Bits[:], c.X[b*quant.MXBlockSize:]) {
					return
				}
			}
			if k.Dot == nil {
				return
			}
			want, _ := quant.DotMX(ref, ref)
			d, err := k.Dot(ref, ref)
			if err != nil || math.Float64bits(d) != math.Float64bits(want) {
				t.Errorf("case %s (%s): dot of the blocks with themselves = %v (error %v); want %v, the exact sum rounded once", c.Name, conv, d, err, want)
			}
		})
	}
}

// same reports whether got and want agree in every bit, failing t with
// the first difference (and the input there, when x is given) otherwise.
func same[T conformance.TB[T], V int8 | uint8 | float64](t T, name, conv, what string, got, want []V, x []float64) bool {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("case %s (%s): %s has %d values; want %d", name, conv, what, len(got), len(want))
		return false
	}
	for i := range want {
		g, w := float64(got[i]), float64(want[i])
		if math.Float64bits(g) == math.Float64bits(w) || (math.IsNaN(g) && math.IsNaN(w)) {
			continue
		}
		at := ""
		if i < len(x) {
			at = fmt.Sprintf(" (x = %v)", x[i])
		}
		t.Errorf("case %s (%s): %s[%d] = %v; want %v%s, and %d of %d differ", name, conv, what, i, got[i], want[i], at, differing(got, want), len(want))
		return false
	}
	return true
}

func differing[V int8 | uint8 | float64](got, want []V) int {
	n := 0
	for i := range want {
		if math.Float64bits(float64(got[i])) != math.Float64bits(float64(want[i])) {
			n++
		}
	}
	return n
}
