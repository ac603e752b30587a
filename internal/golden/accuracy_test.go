package golden

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

func TestAccuracyKeepsTheWorst(t *testing.T) {
	a := &Accuracy{Rows: []string{"Forward", "Backward"}, Cols: []string{"out", "lse"}}
	a.Note("Forward", "out", 1e-16)
	a.Note("Forward", "out", 3e-16)
	a.Note("Forward", "out", 2e-16)
	w, ok := a.Worst("Forward", "out")
	require.True(t, ok)
	assert.Equal(t, 3e-16, w)
	_, ok = a.Worst("Backward", "out")
	assert.False(t, ok)

	a.Note("Backward", "lse", math.NaN())
	a.Note("Backward", "lse", 1)
	w, _ = a.Worst("Backward", "lse")
	assert.True(t, math.IsNaN(w), "a NaN error stays the worst")

	a.Note("Decode", "out", 1) // not a row of the table
	assert.Equal(t, []string{"Decode / out"}, a.bad)
}

func TestAccuracyTable(t *testing.T) {
	a := &Accuracy{Rows: []string{"Forward", "ForwardFast", "Merge"}, Cols: []string{"out", "lse"}}
	a.Note("Forward", "out", 9.74e-16)
	a.Note("Forward", "lse", 2.66e-16)
	a.Note("ForwardFast", "out", 0)
	a.Note("Merge", "lse", 7.4e-17)
	want := "//\n" +
		"//\t             out       lse\n" +
		"//\tForward      9.7e-16   2.7e-16\n" +
		"//\tForwardFast  0\n" +
		"//\tMerge                  7.4e-17\n" +
		"//\n"
	assert.Equal(t, want, a.Table())
}

func TestReplaceBlock(t *testing.T) {
	path := filepath.Join(t.TempDir(), "doc.go")
	require.NoError(t, os.WriteFile(path, []byte("a\n// begin\nold\n// end\nz\n"), 0o644))
	require.NoError(t, replaceBlock(path, "// begin", "// end", "old\n", false))
	err := replaceBlock(path, "// begin", "// end", "new\n", false)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "out of date")
	assert.Contains(t, err.Error(), "have: old")
	require.NoError(t, replaceBlock(path, "// begin", "// end", "new\n", true))
	b, err := os.ReadFile(path)
	require.NoError(t, err)
	assert.Equal(t, "a\n// begin\nnew\n// end\nz\n", string(b))
	assert.ErrorContains(t, replaceBlock(path, "// nowhere", "// end", "", false), `no line "// nowhere"`)
	assert.ErrorContains(t, replaceBlock(path, "// begin", "// nowhere", "", false), `no line "// nowhere" after "// begin"`)
}
