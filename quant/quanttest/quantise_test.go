package quanttest_test

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/quant"
	"github.com/plumbref/plumb/quant/quanttest"
)

// naivePack4 is Pack4 written again from its definition: code 2i in the
// low nibble of byte i when low-first, each nibble q mod 16 (two's
// complement) or q + 8 (offset binary).
func naivePack4(codes []int8, p quant.Packing) ([]byte, error) {
	out := make([]byte, (len(codes)+1)/2)
	for i, q := range codes {
		n := byte(int(q)+16) % 16
		if p.Code == quant.OffsetBinary {
			n = byte(int(q) + 8)
		}
		shift := 4 * (i % 2)
		if p.Order == quant.HighFirst {
			shift = 4 - shift
		}
		out[i/2] |= n << shift
	}
	return out, nil
}

// correct is the reference's own functions and the naive packer.
var correct = quanttest.Kernel{Quantise: quant.Quantise, Pack4: naivePack4, QuantiseFP8: quant.QuantiseFP8}

func names() []string {
	var out []string
	for _, c := range quanttest.Cases() {
		out = append(out, c.Name)
	}
	for _, c := range quanttest.FP8Cases() {
		out = append(out, c.Name)
	}
	return out
}

func TestCorrectKernelPasses(t *testing.T) {
	rec := &conformance.Recorder{}
	quanttest.RunQuantise(rec, correct)
	for _, n := range names() {
		suite.Passed(t, rec, n)
	}
	mx := &conformance.Recorder{}
	quanttest.RunMX(mx, quanttest.MXKernel{Encode: quant.EncodeMX, Dot: quant.DotMX})
	for _, c := range quanttest.MXCases() {
		suite.Passed(t, mx, c.Name)
	}
}

func TestRunQuantiseWithTestingT(t *testing.T) {
	quanttest.RunQuantise(t, correct)
	quanttest.RunMX(t, quanttest.MXKernel{Encode: quant.EncodeMX, Dot: quant.DotMX})
}

// with returns k with its Quantise replaced.
func with(q func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error)) quanttest.Kernel {
	k := correct
	k.Quantise = q
	return k
}

func TestSlipsAreCaught(t *testing.T) {
	for _, c := range []struct {
		name string
		k    quanttest.Kernel
		fail string
		says string
	}{
		{"half-away as half-even", with(func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error) {
			s2 := s
			s2.Rounding = quant.HalfEven
			q, err := quant.Quantise(x, rows, cols, s2)
			q.Scheme = s
			return q, err
		}), "ties_half_away", "Codes["},
		{"half-even as half-away", with(func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error) {
			s2 := s
			s2.Rounding = quant.HalfAway
			q, err := quant.Quantise(x, rows, cols, s2)
			q.Scheme = s
			return q, err
		}), "ties_half_even", "Codes["},
		{"−128 allowed in symmetric-clipped", with(func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error) {
			s2 := s
			s2.Range = quant.RangeFull // the scale is the same (amax/127), the clamp is not
			q, err := quant.Quantise(x, rows, cols, s2)
			q.Scheme = s
			return q, err
		}), "clipped_int8", "want -127"},
		{"scale rounded to nearest, not up", with(func(x []float64, rows, cols int, s quant.Scheme) (quant.Tensor, error) {
			q, err := quant.Quantise(x, rows, cols, s)
			if err != nil || s.Scale != quant.ScaleBFloat16 || s.Granularity != quant.PerTensor || s.Symmetry != quant.Symmetric {
				return q, err
			}
			amax := 0.0
			for _, v := range x {
				amax = max(amax, math.Abs(v))
			}
			lo, hi := s.Limits()
			sc := compare.BFloat16.Round(amax / float64(hi))
			q.Scales[0] = sc
			for i, v := range x {
				q.Codes[i] = int8(min(max(math.RoundToEven(v/sc), float64(lo)), float64(hi)))
			}
			return q, nil
		}), "scale_rounded_up", "Scales[0]"},
		{"wrong nibble order", quanttest.Kernel{Quantise: quant.Quantise, Pack4: func(codes []int8, p quant.Packing) ([]byte, error) {
			p.Order = 1 - p.Order
			return naivePack4(codes, p)
		}}, "clipped_int4_pow2", "packed bytes"},
		{"E4M3 overflow saturating instead of NaN", quanttest.Kernel{Quantise: quant.Quantise, QuantiseFP8: func(x []float64, rows, cols int, s quant.FP8Scheme, scales []float64) (quant.FP8Tensor, error) {
			s2 := s
			s2.Overflow = quant.OverflowSaturate
			q, err := quant.QuantiseFP8(x, rows, cols, s2, scales)
			q.Scheme = s
			return q, err
		}}, "fp8_e4m3_overflow_nan", "Codes[2]"},
	} {
		t.Run(c.name, func(t *testing.T) {
			rec := &conformance.Recorder{}
			quanttest.RunQuantise(rec, c.k)
			suite.Failed(t, rec, c.fail, c.says)
		})
	}
}

func TestMXScaleOffByOneIsCaught(t *testing.T) {
	rec := &conformance.Recorder{}
	quanttest.RunMX(rec, quanttest.MXKernel{Encode: func(x []float64, e quant.Element) ([]quant.MXBlock, error) {
		b, err := quant.EncodeMX(x, e)
		for i := range b {
			b[i].Scale++ // ⌊log₂ amax⌋ − emax + 1
		}
		return b, err
	}})
	for _, c := range quanttest.MXCases() {
		suite.Failed(t, rec, c.Name, "scale E8M0")
	}
	dot := &conformance.Recorder{}
	quanttest.RunMX(dot, quanttest.MXKernel{Encode: quant.EncodeMX, Dot: func(a, b []quant.MXBlock) (float64, error) {
		v, err := quant.DotMX(a, b)
		return float64(float32(v)), err // rounded to float32 on the way
	}})
	suite.Failed(t, dot, "mx_e4m3", "dot of the blocks")
}

func TestNilKernelIsAnError(t *testing.T) {
	rec := &conformance.Recorder{}
	quanttest.RunQuantise(rec, quanttest.Kernel{})
	quanttest.RunMX(rec, quanttest.MXKernel{})
	if !rec.Failed || len(rec.Messages) != 2 {
		t.Errorf("a nil kernel: %q; want two failures", rec.Messages)
	}
}
