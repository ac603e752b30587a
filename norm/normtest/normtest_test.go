package normtest

import (
	"math"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/norm"
)

var everything = Supports{
	Layers:     []Layer{LayerNorm, RMSNorm},
	Placements: []norm.EpsilonPlacement{norm.EpsilonInRoot, norm.EpsilonAddedToRoot},
	Weights:    []norm.WeightForm{norm.WeightAsIs, norm.WeightOnePlus},
	Bias:       true,
	Unweighted: true,
	Residual:   true,
}

func plumbForward(x, res, w, b []float64, p Problem) ([]float64, []float64, error) {
	return forward(p, x, res, w, b, norm.LayerNorm, norm.RMSNorm)
}

func plumbBackward(x, w, dy []float64, p Problem) ([]float64, []float64, []float64, error) {
	return backward(p, x, w, dy, norm.LayerNormBackward, norm.RMSNormBackward, grads)
}

// The float64 reference passes every case under every convention, forward
// and backward, at the float64 kernel tolerance.
func TestReference(t *testing.T) {
	Run(t, Kernel[float64]{Forward: plumbForward, Backward: plumbBackward, Format: compare.Float64, Supports: everything})
}

// The float32 instantiation passes its own yardstick, in float32 and in
// bfloat16 (the output rounded to the format): the suite's wiring of
// formats.
func TestYardstickKernel(t *testing.T) {
	formats := []compare.Format{compare.Float32, compare.BFloat16}
	if testing.Short() {
		formats = formats[:1]
	}
	for _, f := range formats {
		t.Run(f.String(), func(t *testing.T) {
			round := func(x []float32) []float32 {
				for i := range x {
					x[i] = float32(f.Round(float64(x[i])))
				}
				return x
			}
			Run(t, Kernel[float32]{Format: f, Supports: everything,
				Forward: func(x, res, w, b []float32, p Problem) ([]float32, []float32, error) {
					y, s, err := forward(p, x, res, w, b, norm.LayerNorm32, norm.RMSNorm32)
					return round(y), round(s), err
				},
				Backward: func(x, w, dy []float32, p Problem) ([]float32, []float32, []float32, error) {
					dx, dw, db, err := backward(p, x, w, dy, norm.LayerNormBackward32, norm.RMSNormBackward32, grads32)
					return round(dx), round(dw), round(db), err
				}})
		})
	}
}

// naive is a float32 LayerNorm/RMSNorm as often first written: one pass,
// variance as mean(x²) − mean(x)², float32 sums. slip changes one
// convention.
func naive(slip string) func(x, res, w, b []float32, p Problem) ([]float32, []float32, error) {
	return func(x, res, w, b []float32, p Problem) ([]float32, []float32, error) {
		var sum []float32
		if p.Residual {
			sum = make([]float32, len(x))
			for i := range x {
				sum[i] = x[i] + res[i]
			}
			x = sum
		}
		y := make([]float32, len(x))
		d := p.Dim
		for r := 0; r < p.Rows; r++ {
			row := x[r*d : (r+1)*d]
			var s, s2 float32
			for _, v := range row {
				s += v
				s2 += float32(v * v) // every product rounded: the same port on every build
			}
			mu := s / float32(d)
			v := s2/float32(d) - float32(mu*mu)
			if p.Layer == RMSNorm {
				mu, v = 0, s2/float32(d)
			} else if slip != "one pass" {
				v = 0
				for _, x := range row {
					v += float32((x - mu) * (x - mu))
				}
				v /= float32(d)
			}
			eps := float32(p.Epsilon)
			den := float32(math.Sqrt(float64(v + eps)))
			if (p.Placement == norm.EpsilonAddedToRoot) != (slip == "epsilon placement") {
				den = float32(math.Sqrt(float64(v))) + eps
			}
			for j, xv := range row {
				g := float32(1)
				if w != nil {
					g = w[j]
					if (p.Weight == norm.WeightOnePlus) != (slip == "weight form") {
						g = 1 + w[j]
					}
				}
				y[r*d+j] = g * (xv - mu) / den
				if b != nil {
					y[r*d+j] += b[j]
				}
			}
		}
		return y, sum, nil
	}
}

// The suite fails each slip where it shows and names case, conventions and
// worst element.
func TestCatchesSlips(t *testing.T) {
	for _, s := range []struct {
		slip, fails, passes string
		diagnosis           string // the line of the diagnosis, up to its normwise error
	}{
		{"epsilon placement", "epsilon_matters/rmsnorm/in-root/as-is", "large_values/layernorm/in-root/as-is",
			`  it matches "epsilon_placement": "added-to-root" [Problem.Placement, Supports.Placements]`},
		{"weight form", "small_rows/layernorm/in-root/one-plus", "no_weight/rmsnorm/added-to-root",
			`  it matches "weight_form": "as-is" [Problem.Weight, Supports.Weights]`},
		// An error of accuracy, not of a convention: the diagnosis names
		// the precision idiom the kernel computes (the one-pass variance
		// mean(x²) − mean(x)²), which changes the tolerance, not the
		// reference; the suite still fails the kernel.
		{"one pass", "offset_rows/layernorm/in-root/as-is", "offset_rows/rmsnorm/in-root/as-is",
			`  it matches the precision idiom "variance": "one-pass" (normwise `},
	} {
		t.Run(s.slip, func(t *testing.T) {
			rec := &conformance.Recorder{}
			Run(rec, Kernel[float32]{Forward: naive(s.slip), Supports: everything})
			msg := suite.Failed(t, rec, s.fails, "y differs from the reference", "worst element [row, column]")
			expect.True(t, strings.HasPrefix(suite.DiagnosisLine(t, msg), s.diagnosis), msg)
			suite.Passed(t, rec, s.passes)
		})
	}
}

// A plain float32 kernel, two passes with sequential float32 sums, passes
// every case but LayerNorm on rows near 1000 with spread 1: the running
// sum of a row reaches 2.6e5, where the float32 spacing is 2^−6, so the
// 256 roundings leave the mean off by a few 1e-4, and every output with
// it (measured: 2e-4 normwise), a thousand times the error of the
// two-pass compensated body the yardstick runs. That is a real error of the kernel (a pairwise or compensated sum,
// or float64 accumulation, removes it), and the suite must report it.
func TestPlainFloat32(t *testing.T) {
	rec := &conformance.Recorder{}
	Run(rec, Kernel[float32]{Forward: naive(""), Supports: everything})
	expect.Equal(t, []string{
		"offset_rows/layernorm/in-root/as-is", "offset_rows/layernorm/in-root/one-plus",
		"offset_rows/layernorm/added-to-root/as-is", "offset_rows/layernorm/added-to-root/one-plus",
	}, rec.Failures())
}

// A kernel that declares only RMSNorm without the fused add skips the
// fused case and the unweighted case with messages naming them.
func TestSkips(t *testing.T) {
	rec := &conformance.Recorder{}
	Run(rec, Kernel[float64]{Forward: plumbForward, Format: compare.Float64, Supports: Supports{Layers: []Layer{RMSNorm}}})
	ensure.False(t, rec.Failed, rec.Text())
	suite.Skipped(t, rec, "residual_add/rmsnorm/in-root/as-is", "the fused residual add (Residual)")
	suite.Skipped(t, rec, "no_weight/rmsnorm/in-root", "a nil weight (Unweighted)")
	suite.Passed(t, rec, "realistic/rmsnorm/in-root/as-is")
}

// A LayerNorm backward that forgets the −mean(g)/r term of ∂L/∂x (the
// path through μ; g = dy∘γ) fails on dx, and names it.
func TestCatchesBackwardSlip(t *testing.T) {
	rec := &conformance.Recorder{}
	Run(rec, Kernel[float64]{Format: compare.Float64, Forward: plumbForward, Supports: Supports{Bias: true},
		Backward: func(x, w, dy []float64, p Problem) ([]float64, []float64, []float64, error) {
			dx, dw, db, err := plumbBackward(x, w, dy, p)
			d := p.Dim
			for r := 0; r < p.Rows; r++ {
				row := x[r*d : (r+1)*d]
				var mu, v, mg float64
				for j, xv := range row {
					mu += xv / float64(d)
					mg += dy[r*d+j] * w[j] / float64(d)
				}
				for _, xv := range row {
					v += (xv - mu) * (xv - mu) / float64(d)
				}
				for j := range row {
					dx[r*d+j] += mg / math.Sqrt(v+p.Epsilon) // the slip
				}
			}
			return dx, dw, db, err
		}})
	const name = "small_rows/layernorm/in-root/as-is"
	msg := suite.Failed(t, rec, name, "dx differs from the reference", "worst element [row, column]")
	expect.Len(t, rec.Find(name).Messages, 1, "dx alone fails")
	// A term left out is no convention: the diagnosis (layernorm-backward
	// posed) names none.
	expect.Equal(t, "  no single change of its conventions explains it", suite.DiagnosisLine(t, msg), msg)
}
