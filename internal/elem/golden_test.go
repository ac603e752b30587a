package elem

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
)

// goldenCase is one line of a golden file: the arguments and the
// correctly rounded result, from mpmath (testdata/gen/elem.py).
type goldenCase struct {
	args []float64
	want float64
}

// goldenDir is testdata/elem of the repository: relative to the package
// folder, where go test runs the test binary, or else beside this source
// file (a binary built with go test -c and run elsewhere, under qemu).
func goldenDir() string {
	dir := filepath.Join("..", "..", "testdata", "elem")
	if _, err := os.Stat(dir); err == nil {
		return dir
	}
	_, file, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(file), "..", "..", "testdata", "elem")
}

// readGolden reads the golden file of a function (exp.txt, …, in
// testdata/elem): '#' comment lines, then one case a line, each number the
// hexadecimal bit pattern of a float64.
func readGolden(t testing.TB, name string, nargs int) []goldenCase {
	t.Helper()
	f, err := os.Open(filepath.Join(goldenDir(), name+".txt"))
	ensure.NoError(t, err)
	defer f.Close()
	var out []goldenCase
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := sc.Text()
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		fields := strings.Fields(line)
		ensure.Len(t, fields, nargs+1, "%s: %q", name, line)
		vals := make([]float64, len(fields))
		for i, s := range fields {
			b, err := strconv.ParseUint(s, 16, 64)
			ensure.NoError(t, err, "%s: %q", name, line)
			vals[i] = math.Float64frombits(b)
		}
		out = append(out, goldenCase{args: vals[:nargs], want: vals[nargs]})
	}
	ensure.NoError(t, sc.Err())
	ensure.NotEmpty(t, out, name)
	return out
}

// sameFloat reports whether a and b are the same float64: equal bits, or
// both NaN.
func sameFloat(a, b float64) bool {
	if a != a || b != b {
		return a != a && b != b
	}
	return math.Float64bits(a) == math.Float64bits(b)
}

func fmtF(x float64) string {
	return fmt.Sprintf("%v (%#016x)", x, math.Float64bits(x))
}
