package posenctest

import (
	"math"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/posenc"
)

var everything = Supports{
	Pairings:      []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves},
	PartialRotary: true,
	Methods:       []posenc.Method{posenc.Interpolation, posenc.NTKAware, posenc.YaRN, posenc.PerFrequency},
	Ramps:         []posenc.Ramp{posenc.RampRatio, posenc.RampDims},
	Dynamic:       true,
	Magnitude:     true,
	Unordered:     true,
}

func list(p Problem) posenc.Positions { return posenc.Positions{List: p.Positions} }

// The float64 reference passes every case, forward and inverse.
func TestReference(t *testing.T) {
	Run(t, Kernel[float64]{Format: compare.Float64, Supports: everything,
		Apply:   func(x []float64, p Problem) ([]float64, error) { return p.Rotary.Apply(x, 1, list(p)) },
		Inverse: func(x []float64, p Problem) ([]float64, error) { return p.Rotary.ApplyInverse(x, 1, list(p)) },
	})
}

// The float32 instantiation passes its own yardstick in float32 and
// bfloat16: the suite's wiring of formats.
func TestYardstickKernel(t *testing.T) {
	for _, f := range []compare.Format{compare.Float32, compare.BFloat16} {
		t.Run(f.String(), func(t *testing.T) {
			round := func(x []float32, err error) ([]float32, error) {
				for i := range x {
					x[i] = float32(f.Round(float64(x[i])))
				}
				return x, err
			}
			Run(t, Kernel[float32]{Format: f, Supports: everything,
				Apply:   func(x []float32, p Problem) ([]float32, error) { return round(p.Rotary.Apply32(x, 1, list(p))) },
				Inverse: func(x []float32, p Problem) ([]float32, error) { return round(p.Rotary.ApplyInverse32(x, 1, list(p))) },
			})
		})
	}
}

// plain is a float32 rotary kernel without scaling as one is first
// written: θ_i = base^{−2i/r}, the angle m·θ_i formed in float64 (or in
// float32, when angle32), cos and sin rounded to float32, the rotation in
// float32. swap pairs the dims the other way (a slip).
func plain(angle32, swap bool) func(x []float32, p Problem) ([]float32, error) {
	return func(x []float32, p Problem) ([]float32, error) {
		r, d := p.Rotary.Rotated, p.Rotary.Dim
		halves := (p.Rotary.Pairing == posenc.PairHalves) != swap
		y := append([]float32(nil), x...)
		for row := 0; row < p.Rows; row++ {
			m := p.Positions[row]
			v := y[row*d : (row+1)*d]
			for i := 0; i < r/2; i++ {
				theta := math.Pow(p.Rotary.Base, -2*float64(i)/float64(r))
				angle := float64(m) * theta
				if angle32 {
					angle = float64(float32(m) * float32(theta))
				}
				s, c := math.Sincos(angle)
				a, b := 2*i, 2*i+1
				if halves {
					a, b = i, i+r/2
				}
				xa, xb := v[a], v[b]
				v[a] = xa*float32(c) - xb*float32(s)
				v[b] = xa*float32(s) + xb*float32(c)
			}
		}
		return y, nil
	}
}

// failures runs the suite on a recorder and lists the failed subtests.
func failures(k Kernel[float32]) (*conformance.Recorder, []string) {
	rec := &conformance.Recorder{}
	Run(rec, k)
	return rec, rec.Failures()
}

var plainSupports = Supports{Pairings: []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves}, PartialRotary: true, Unordered: true}

// A plain float32 kernel with float64 angles passes every case it
// supports; the scaling cases are skipped with messages.
func TestPlainFloat32(t *testing.T) {
	rec, failed := failures(Kernel[float32]{Apply: plain(false, false), Supports: plainSupports})
	expect.Empty(t, failed, rec.Text())
	suite.Skipped(t, rec, "ntk_aware_8/halves", "scaling method ntk-aware (Methods)")
}

// Angles formed in float32 are off by about m·2^−24 radians: the suite
// fails them wherever positions reach the thousands.
func TestCatchesFloat32Angles(t *testing.T) {
	rec, failed := failures(Kernel[float32]{Apply: plain(true, false), Supports: plainSupports})
	t.Logf("failed: %v", failed)
	for _, name := range []string{"positions_to_4096/adjacent", "positions_near_1e6/halves"} {
		suite.Failed(t, rec, name, "rotated x differs from the reference")
	}
	suite.Passed(t, rec, "position_zero/adjacent")
}

// Pairing dims the other way is caught in every case that rotates.
func TestCatchesPairingSlip(t *testing.T) {
	rec, _ := failures(Kernel[float32]{Apply: plain(false, true), Supports: plainSupports})
	msg := suite.Failed(t, rec, "small/adjacent", "worst element [row, dim]")
	expect.True(t, strings.HasPrefix(msg, "case small (8 rows of 8, pairing adjacent, rotated 8 of 8 dims, base 10000, positions 0 … 7): rotated x differs from the reference"), msg)
	suite.Passed(t, rec, "position_zero/adjacent")
	// The diagnosis (rotary-apply posed with every setting of the case)
	// names the pairing the kernel used, in the suite's words too; its
	// line comes before the one naming the report's file.
	line := suite.DiagnosisLine(t, msg)
	expect.True(t, strings.HasPrefix(line, `  it matches "pairing": "halves" [Rotary.Pairing, Supports.Pairings] (normwise `), msg)
	expect.True(t, strings.HasSuffix(line, ", passes)"), msg)
	halves := rec.Find("head_dim_128/halves").Messages[0]
	expect.Contains(t, halves, `it matches "pairing": "adjacent" [Rotary.Pairing, Supports.Pairings]`)
}
