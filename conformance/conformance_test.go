package conformance

import (
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// *testing.T is a TB of itself: this line does not compile otherwise.
var _ TB[*testing.T] = (*testing.T)(nil)

// A Recorder is a TB of itself.
var _ TB[*Recorder] = (*Recorder)(nil)

// The recorder records failures, skips and messages per subtest, and a
// failure reaches every parent.
func TestRecorder(t *testing.T) {
	r := &Recorder{}
	r.Run("a", func(c *Recorder) {
		c.Run("x", func(c *Recorder) { c.Skipf("skip %d", 1) })
		c.Run("y", func(c *Recorder) { c.Errorf("bad %s", "y") })
	})
	r.Run("b", func(c *Recorder) { c.Logf("fine") })
	expect.True(t, r.Failed)
	a, b, x := r.Find("a"), r.Find("b"), r.Find("a/x")
	ensure.NotNil(t, a)
	ensure.NotNil(t, b)
	ensure.NotNil(t, x)
	expect.True(t, a.Failed)
	expect.False(t, b.Failed)
	expect.True(t, x.Skipped)
	expect.False(t, x.Failed)
	expect.Nil(t, r.Find("a/z"))
	expect.Equal(t, "a/x: skip 1\na/y: bad y\nb: fine\n", r.Text())
}

// Failures lists the failed leaves by full name, in the order they ran;
// Run reports whether the child passed.
func TestFailures(t *testing.T) {
	r := &Recorder{}
	expect.False(t, r.Run("a", func(c *Recorder) {
		c.Run("x", func(c *Recorder) { c.Errorf("1") })
		c.Run("y", func(c *Recorder) {})
		c.Run("z", func(c *Recorder) { c.Errorf("2") })
	}))
	expect.True(t, r.Run("b", func(c *Recorder) { c.Skipf("none") }))
	expect.Equal(t, []string{"a/x", "a/z"}, r.Failures())
	expect.Empty(t, (&Recorder{}).Failures())
}
