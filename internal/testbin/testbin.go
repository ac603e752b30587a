// Package testbin builds a command once for the tests of a package that run
// it as a user would.
package testbin

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// Main builds the command in the package directory pkg, a path relative to
// the directory of the test's package, into a temporary directory, sets *bin to
// its path, runs the tests and removes the directory: a TestMain's whole
// body. A build that fails ends the test binary with status 2 and the
// compiler's output.
func Main(m *testing.M, pkg string, bin *string) {
	os.Exit(run(m, pkg, bin))
}

func run(m *testing.M, pkg string, bin *string) int {
	dir, err := os.MkdirTemp("", "plumb-test-bin")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 2
	}
	defer os.RemoveAll(dir)
	abs, err := filepath.Abs(pkg)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 2
	}
	*bin = filepath.Join(dir, filepath.Base(abs)) // the command's own name
	if out, err := exec.Command("go", "build", "-o", *bin, pkg).CombinedOutput(); err != nil {
		fmt.Fprintf(os.Stderr, "building %s: %v\n%s", pkg, err, out)
		return 2
	}
	return m.Run()
}
