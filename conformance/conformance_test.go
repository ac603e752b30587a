package conformance

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
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
	assert.True(t, r.Failed)
	a, b, x := r.Find("a"), r.Find("b"), r.Find("a/x")
	require.NotNil(t, a)
	require.NotNil(t, b)
	require.NotNil(t, x)
	assert.True(t, a.Failed)
	assert.False(t, b.Failed)
	assert.True(t, x.Skipped)
	assert.False(t, x.Failed)
	assert.Nil(t, r.Find("a/z"))
	assert.Equal(t, "a/x: skip 1\na/y: bad y\nb: fine\n", r.Text())
}

// Failures lists the failed leaves by full name, in the order they ran;
// Run reports whether the child passed.
func TestFailures(t *testing.T) {
	r := &Recorder{}
	assert.False(t, r.Run("a", func(c *Recorder) {
		c.Run("x", func(c *Recorder) { c.Errorf("1") })
		c.Run("y", func(c *Recorder) {})
		c.Run("z", func(c *Recorder) { c.Errorf("2") })
	}))
	assert.True(t, r.Run("b", func(c *Recorder) { c.Skipf("none") }))
	assert.Equal(t, []string{"a/x", "a/z"}, r.Failures())
	assert.Empty(t, (&Recorder{}).Failures())
}
