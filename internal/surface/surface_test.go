package surface

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

func TestTwins(t *testing.T) {
	dir := t.TempDir()
	src := `package k

func Good(x []float64) []float64   { return x }
func Good32(x []float32) []float32 { return x }
func Lonely(x []float64) []float64 { return x }
func Wrong(x []float64) []float64  { return x }
func Wrong32(x []float64) []float32 { return nil }
func Orphan32(x []float32)          {}
func Scalar(n int) int              { return n }
`
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "k.go"), []byte(src), 0o644))
	twinned, problems, err := Twins(dir, strings.NewReplacer("float64", "float32"))
	ensure.NoError(t, err)
	expect.Equal(t, []string{"Good", "Lonely", "Wrong"}, twinned)
	expect.Equal(t, []string{
		"Lonely takes or returns tensors: its twin Lonely32 must exist with the signature func(x []float32) []float32 (found \"\")",
		"Orphan32 is a float32 twin of nothing",
		"Wrong takes or returns tensors: its twin Wrong32 must exist with the signature func(x []float32) []float32 (found \"func(x []float64) []float32\")",
	}, problems)
	_, _, err = Twins(filepath.Join(dir, "none"), strings.NewReplacer())
	expect.Error(t, err)
}
