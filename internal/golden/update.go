package golden

import (
	"flag"
	"fmt"
	"os"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the generated files, and the generated parts of files, that the tests compare against")

// WholeFile checks that the file at path holds exactly want, a text the test
// generated from the code; with -update it writes want there instead. The
// failure says how to regenerate: go test PACKAGE -run TEST -update.
func WholeFile(tb testing.TB, path, want string) {
	tb.Helper()
	if *update {
		if err := os.WriteFile(path, []byte(want), 0o644); err != nil {
			tb.Fatal(err)
		}
	}
	have, err := os.ReadFile(path)
	if err != nil {
		tb.Fatal(err)
	}
	if string(have) != want {
		tb.Errorf("%s is out of date with the code; regenerate it with go test -run '%s' -update in this package\n%s", path, tb.Name(), firstDifference(string(have), want))
	}
}

// Block checks that the lines of the file at path strictly between the
// line begin and the next line end hold exactly want (a text the test
// generated from the code, ending in a newline); with -update it rewrites
// them. begin and end are whole lines, without their newline.
func Block(tb testing.TB, path, begin, end, want string) {
	tb.Helper()
	if err := replaceBlock(path, begin, end, want, *update); err != nil {
		tb.Errorf("%v; regenerate it with go test -run '%s' -update in this package", err, tb.Name())
	}
}

// replaceBlock checks (or, with write, rewrites) the lines of path between
// the lines begin and end; see Block.
func replaceBlock(path, begin, end, want string, write bool) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	s := string(b)
	i := strings.Index(s, begin+"\n")
	if i < 0 {
		return fmt.Errorf("%s: no line %q", path, begin)
	}
	i += len(begin) + 1
	j := strings.Index(s[i:], end+"\n")
	if j < 0 && strings.HasSuffix(s, end) {
		j = len(s) - i - len(end)
	}
	if j < 0 {
		return fmt.Errorf("%s: no line %q after %q", path, end, begin)
	}
	j += i
	if write {
		return os.WriteFile(path, []byte(s[:i]+want+s[j:]), 0o644)
	}
	if s[i:j] != want {
		return fmt.Errorf("%s: the part after %q is out of date with the code\n%s", path, begin, firstDifference(s[i:j], want))
	}
	return nil
}

// firstDifference shows the first line where have and want differ.
func firstDifference(have, want string) string {
	h, w := strings.Split(have, "\n"), strings.Split(want, "\n")
	for k := 0; k < len(h) || k < len(w); k++ {
		var a, b string
		if k < len(h) {
			a = h[k]
		}
		if k < len(w) {
			b = w[k]
		}
		if a != b {
			return fmt.Sprintf("first difference, line %d:\n  have: %s\n  want: %s", k+1, a, b)
		}
	}
	return ""
}
