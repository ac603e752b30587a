package attention

import (
	"errors"
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
)

// softmaxBound is the normwise bound against the 50-digit values of
// testdata/golden/attention/softmax.json for rows of n: a few units of
// u = 2⁻⁵³ for one exponential and one division per element, plus the
// classical bound (n − 1)·u for a recursive sum of positive terms (Higham
// 2002, "Accuracy and Stability of Numerical Algorithms", §4.2), which the
// division carries into every element.
func softmaxBound(n int) float64 { return float64(8+n) * 0x1p-53 }

// TestGoldenSoftmax checks Softmax and LogSumExp, and their float32
// instantiations with a float32 bound, against testdata/gen/fam_softmax.py.
func TestGoldenSoftmax(t *testing.T) {
	f := golden.MustLoadFamily(t, "attention", "softmax")
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg struct {
				N int `json:"n"`
			}
			ensure.NoError(t, c.DecodeConfig(&cfg))
			x, _, err := c.Float("x")
			ensure.NoError(t, err)
			check := func(row, tensor string, got []float64, bound float64) {
				t.Helper()
				want, _, err := c.Float(tensor)
				ensure.NoError(t, err)
				e := golden.NormwiseRelErr(got, want)
				accuracy.Note(row, map[string]string{"softmax": "out", "lse": "lse"}[tensor], e)
				expect.LessOrEqual(t, e, bound, golden.Describe(c, tensor, e, bound))
			}
			sm, err := Softmax(x, cfg.N)
			ensure.NoError(t, err)
			check("Softmax", "softmax", sm, softmaxBound(cfg.N))
			lse, err := LogSumExp(x, cfg.N)
			ensure.NoError(t, err)
			check("LogSumExp", "lse", lse, softmaxBound(cfg.N))

			if c.Name == "near_plus_1000" || c.Name == "spread_pm_1000" || c.Name == "n1" || c.Name == "tiny_logits" {
				return // float32 cannot hold these inputs; float64 covers them
			}
			// float32: inputs rounded to float32 change the answer by up to
			// 2⁻²⁴·|x| in each logit, so the bound is relative to float32's
			// unit roundoff times the largest |x| in the case (≤ 10), plus
			// the arithmetic; 1e-5 covers it with margin.
			sm32, err := Softmax32(num.Convert[float32](x), cfg.N)
			ensure.NoError(t, err)
			check("Softmax32", "softmax", num.Convert[float64](sm32), 1e-5)
			lse32, err := LogSumExp32(num.Convert[float32](x), cfg.N)
			ensure.NoError(t, err)
			check("LogSumExp32", "lse", num.Convert[float64](lse32), 1e-5)
		})
	}
}

// TestSoftmaxWorked checks the worked values in the documentation of
// Softmax and LogSumExp ([mpmath], 40 digits): x = (1, 3, 2) → lse
// 3.4076059644443803, softmax (0.090030573170380458, 0.66524095577482189,
// 0.24472847105479765).
func TestSoftmaxWorked(t *testing.T) {
	sm, err := Softmax([]float64{1, 3, 2}, 3)
	ensure.NoError(t, err)
	want := []float64{0.090030573170380458, 0.66524095577482189, 0.24472847105479765}
	for j := range want {
		expect.InDelta(t, want[j], sm[j], 2e-16*want[j]+1e-17)
	}
	lse, err := LogSumExp([]float64{1, 3, 2}, 3)
	ensure.NoError(t, err)
	expect.Equal(t, 3.4076059644443803, lse[0], "correctly rounded")
}

func TestSoftmaxSpecialCases(t *testing.T) {
	inf := math.Inf(1)
	sm, err := Softmax([]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1), inf, 1, 2}, 3)
	ensure.NoError(t, err)
	for _, v := range sm {
		expect.True(t, math.IsNaN(v), "a row of −Inf only is 0/0, and +Inf gives Inf − Inf: NaN; got %v", sm)
	}
	lse, err := LogSumExp([]float64{math.Inf(-1), math.Inf(-1), 0, inf, math.NaN(), 1}, 2)
	ensure.NoError(t, err)
	expect.True(t, math.IsInf(lse[0], -1))
	expect.True(t, math.IsInf(lse[1], 1))
	expect.True(t, math.IsNaN(lse[2]))
	sm, err = Softmax(nil, 4)
	ensure.NoError(t, err)
	expect.Empty(t, sm)
	// The input is not modified.
	x := []float64{0, 1}
	_, err = Softmax(x, 2)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0, 1}, x)
}

func TestSoftmaxErrors(t *testing.T) {
	_, err := Softmax([]float64{1, 2, 3}, 2)
	ensure.True(t, errors.Is(err, ErrLength))
	expect.EqualError(t, err, "attention: length mismatch: Softmax: x has 3 elements; want a multiple of the row length n = 2")
	_, err = LogSumExp32([]float32{1}, 0)
	ensure.True(t, errors.Is(err, ErrShape))
	expect.EqualError(t, err, "attention: invalid shape: LogSumExp32: n = 0; want a row length ≥ 1")
	_, err = Softmax32([]float32{1}, -3)
	ensure.True(t, errors.Is(err, ErrShape))
	_, err = LogSumExp([]float64{1, 2, 3}, 2)
	ensure.True(t, errors.Is(err, ErrLength))
}

// TestSoftmaxMatchesForward: the softmax of one logit row equals the
// attention weights Forward applies, seen through an identity V.
func TestSoftmaxMatchesForward(t *testing.T) {
	q := []float64{0.5, -1, 2}
	k := []float64{1, 0, 0, 0, 1, 0, 0, 0, 1, 1, 1, 1}
	v := []float64{1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1}
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 4, Dk: 3, Dv: 4}
	out, lse, err := Forward(q, k, v, s, Options{Scale: 1})
	ensure.NoError(t, err)
	logits := []float64{0.5, -1, 2, 1.5}
	sm, err := Softmax(logits, 4)
	ensure.NoError(t, err)
	for j := range sm {
		expect.InDelta(t, sm[j], out[j], 1e-16)
	}
	l, err := LogSumExp(logits, 4)
	ensure.NoError(t, err)
	expect.InDelta(t, l[0], lse[0], 1e-15)
}
