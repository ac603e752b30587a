package golden

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

func TestAccuracyKeepsTheWorst(t *testing.T) {
	a := &Accuracy{Rows: []string{"Forward", "Backward"}, Cols: []string{"out", "lse"}}
	a.Note("Forward", "out", 1e-16)
	a.Note("Forward", "out", 3e-16)
	a.Note("Forward", "out", 2e-16)
	w, ok := a.Worst("Forward", "out")
	ensure.True(t, ok)
	expect.Equal(t, 3e-16, w)
	_, ok = a.Worst("Backward", "out")
	expect.False(t, ok)

	a.Note("Backward", "lse", math.NaN())
	a.Note("Backward", "lse", 1)
	w, _ = a.Worst("Backward", "lse")
	expect.True(t, math.IsNaN(w), "a NaN error stays the worst")

	a.Note("Decode", "out", 1) // not a row of the table
	expect.Equal(t, []string{"Decode / out"}, a.bad)
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
	expect.Equal(t, want, a.Table())
}

func TestReplaceBlock(t *testing.T) {
	path := filepath.Join(t.TempDir(), "doc.go")
	ensure.NoError(t, os.WriteFile(path, []byte("a\n// begin\nold\n// end\nz\n"), 0o644))
	ensure.NoError(t, replaceBlock(path, "// begin", "// end", "old\n", false))
	err := replaceBlock(path, "// begin", "// end", "new\n", false)
	ensure.Error(t, err)
	expect.Contains(t, err.Error(), "out of date")
	expect.Contains(t, err.Error(), "have: old")
	ensure.NoError(t, replaceBlock(path, "// begin", "// end", "new\n", true))
	b, err := os.ReadFile(path)
	ensure.NoError(t, err)
	expect.Equal(t, "a\n// begin\nnew\n// end\nz\n", string(b))
	expect.ErrorContains(t, replaceBlock(path, "// nowhere", "// end", "", false), `no line "// nowhere"`)
	expect.ErrorContains(t, replaceBlock(path, "// begin", "// nowhere", "", false), `no line "// nowhere" after "// begin"`)
}
