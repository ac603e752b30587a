package suite

import (
	"errors"
	"math"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/compare"
)

// *testing.T is a TB of itself: this line does not compile otherwise.
var _ TB[*testing.T] = (*testing.T)(nil)

// The recorder records failures, skips and messages per subtest, and a
// failure reaches every parent.
func TestRecorder(t *testing.T) {
	r := &Recorder{}
	r.Run("a", func(c *Recorder) {
		c.Run("x", func(c *Recorder) { c.Skipf("skip %d", 1) })
		c.Run("y", func(c *Recorder) { c.Errorf("bad %s", "y") })
	})
	r.Run("b", func(c *Recorder) { c.Logf("fine") })
	assert.True(t, r.Failed)
	assert.True(t, r.Find("a").Failed)
	assert.False(t, r.Find("b").Failed)
	assert.True(t, r.Find("a/x").Skipped)
	assert.Nil(t, r.Find("a/z"))
	assert.Equal(t, "a/x: skip 1\na/y: bad y\nb: fine\n", r.Text())
}

// A failing output's message names the case, the conventions, the output
// and the worst element before the report; a passing one says nothing.
func TestJudge(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	tol := compare.Tolerance{Abs: 1e-6}
	opt := compare.Options{Format: compare.Float32, Tolerance: &tol}
	r := &Recorder{}
	assert.True(t, Judge(r, "c", "conv", Output{Name: "y", Dims: "[i, j]", Shape: []int{2, 2}, Ref: ref, Got: ref}, opt))
	assert.False(t, r.Failed)
	got := []float64{1, 2, 3.5, 4}
	assert.False(t, Judge(r, "c", "conv", Output{Name: "y", Dims: "[i, j]", Shape: []int{2, 2}, Ref: ref, Got: got}, opt))
	require.Len(t, r.Messages, 1)
	first := strings.SplitN(r.Messages[0], "\n", 2)[0]
	assert.Equal(t, "case c (conv): y differs from the reference: 1 of 4 elements exceed the elementwise tolerance; worst element [i, j][1 0]: got 3.5, want 3 (error 0.5)", first)
	r = &Recorder{}
	assert.False(t, Judge(r, "c", "conv", Output{Name: "y", Shape: []int{4}, Ref: ref, Got: got[:3]}, opt))
	assert.Contains(t, r.Messages[0], "y has 3 elements; want 4")
}

// With two yardsticks each bound is the larger of the two.
func TestToleranceTakesTheLargerBound(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	exact := func(in [][]float32) ([]float32, error) { return in[0], nil }
	off := func(in [][]float32) ([]float32, error) {
		return []float32{1, 2, 3, 4.5}, nil
	}
	one, err := Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, exact)
	require.NoError(t, err)
	two, err := Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, exact, off)
	require.NoError(t, err)
	// exact: 2·0 + u·4; off: 2·0.5 + u·4 (u = 2^−24, the floor of one rounding)
	u := math.Ldexp(1, -24)
	assert.Equal(t, u*4, one.Tolerance.Abs)
	assert.Equal(t, 1+u*4, two.Tolerance.Abs)
	assert.Contains(t, two.Tolerance.Basis, "the larger bounds of 2 yardsticks")
	_, err = Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, func([][]float32) ([]float32, error) { return nil, errors.New("no") })
	assert.ErrorIs(t, err, compare.ErrYardstick)
	f64, err := Tolerance[float64](compare.Float64, nil, ref, nil)
	require.NoError(t, err)
	assert.Equal(t, Float64Tolerance(ref), *f64.Tolerance)
	assert.Equal(t, 4e-12, f64.Tolerance.Abs)
}

// The zero format means float32 for a float32 kernel and float64 for a
// float64 kernel.
func TestInputFormat(t *testing.T) {
	f, err := InputFormat[float32](compare.Float64)
	require.NoError(t, err)
	assert.Equal(t, compare.Float32, f)
	f, err = InputFormat[float32](compare.BFloat16)
	require.NoError(t, err)
	assert.Equal(t, compare.BFloat16, f)
	f, err = InputFormat[float64](compare.Float64)
	require.NoError(t, err)
	assert.Equal(t, compare.Float64, f)
	_, err = InputFormat[float64](compare.Format(42))
	assert.Error(t, err)
}

// The same name gives the same inputs; another name others.
func TestRand(t *testing.T) {
	a, b, c := Normal(Rand("x"), 4, 1), Normal(Rand("x"), 4, 1), Normal(Rand("y"), 4, 1)
	assert.Equal(t, a, b)
	assert.NotEqual(t, a, c)
}

// A case whose line is absent, or whose reason differs, is reported.
func TestMissingDocLines(t *testing.T) {
	path := t.TempDir() + "/doc.go"
	require.NoError(t, os.WriteFile(path, []byte("// Cases:\n//\n//\tone    the first\n//\ttwo the second, changed\npackage x\n"), 0o644))
	missing, err := MissingDocLines(path, []string{"one", "two", "three"}, []string{"the first", "the second", "the third"})
	require.NoError(t, err)
	assert.Equal(t, []string{"two", "three"}, missing)
	_, err = MissingDocLines(path+".none", nil, nil)
	assert.Error(t, err)
}

// Judge never panics, whatever the candidate holds, and fails exactly when
// compare.Diff's verdict does.
func FuzzJudge(f *testing.F) {
	f.Add(1.0, 2.0, 3.0, 0.5)
	f.Add(math.NaN(), math.Inf(1), math.Copysign(0, -1), 1e300)
	f.Fuzz(func(t *testing.T, a, b, c, abs float64) {
		ref := []float64{1, -2, 3}
		got := []float64{a, b, c}
		if math.IsNaN(abs) || abs < 0 || math.IsInf(abs, 0) {
			abs = 0
		}
		tol := compare.Tolerance{Abs: abs}
		opt := compare.Options{Format: compare.Float32, Tolerance: &tol}
		r := &Recorder{}
		pass := Judge(r, "c", "conv", Output{Name: "y", Dims: "[i]", Shape: []int{3}, Ref: ref, Got: got}, opt)
		rep, err := compare.Diff(ref, got, []int{3}, opt)
		require.NoError(t, err)
		assert.Equal(t, rep.Verdict.Pass, pass)
		assert.Equal(t, !pass, r.Failed)
		if !pass {
			assert.True(t, strings.HasPrefix(r.Messages[0], "case c (conv): y differs from the reference: "), r.Messages[0])
		}
	})
}
