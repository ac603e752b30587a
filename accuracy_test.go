package plumb_test

import (
	"fmt"
	"os"
	"strconv"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/golden"
)

// The accuracy figures of README.md and of the overview (doc.go) are
// gathered from the tables of the packages' documentation, which the
// packages' golden tests measure (golden.Accuracy): no figure is written
// twice by hand.

const (
	readmeAccuracyBegin = "<!-- accuracy: gathered from each package's documentation by go test -run TestAccuracySummary -update in the repository root -->"
	readmeAccuracyEnd   = "<!-- end of accuracy -->"
	docAccuracyBegin    = "// Worst normwise relative error over the golden cases, each package's worst first:"
	docAccuracyEnd      = "// Each package's documentation has the table by function and output."
)

// measuredPackages are the packages whose documentation carries a measured
// table, with what they compute.
var measuredPackages = []struct{ dir, what string }{
	{"attention", "attention forward and backward, softmax, log-sum-exp, merge"},
	{"kvcache", "paged, split, ring-buffer and packed caches, draft verification"},
	{"posenc", "rotary and sinusoidal encodings, ALiBi"},
	{"norm", "LayerNorm, RMSNorm, fused residual add, forward and backward"},
	{"ffn", "plain and gated layers, forward and backward (activations: the package's own table)"},
	{"block", "a decoder block with a key/value cache: pre-norm, post-norm, parallel"},
}

// cell is one figure of a package's table.
type cell struct {
	row, col string
	err      float64
}

// readTable parses the table between golden.AccuracyBegin and
// golden.AccuracyEnd in path: a header line of column labels, then one line
// per row, each cell starting at its column label's offset.
func readTable(path string) ([]cell, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	s := string(b)
	i := strings.Index(s, golden.AccuracyBegin+"\n")
	j := -1
	if i >= 0 {
		j = strings.Index(s[i:], golden.AccuracyEnd+"\n")
	}
	if j < 0 {
		return nil, fmt.Errorf("%s: no accuracy table between the lines %q and %q", path, golden.AccuracyBegin, golden.AccuracyEnd)
	}
	var lines [][]rune
	for _, l := range strings.Split(s[i+len(golden.AccuracyBegin)+1:i+j], "\n") {
		if strings.HasPrefix(l, "//\t") {
			lines = append(lines, []rune(strings.TrimPrefix(l, "//\t")))
		}
	}
	return parseTable(path, lines)
}

func parseTable(path string, lines [][]rune) ([]cell, error) {
	if len(lines) < 2 {
		return nil, fmt.Errorf("%s: the accuracy table has no rows", path)
	}
	header := lines[0]
	var cols []string
	var at []int
	for k := 0; k < len(header); k++ {
		if header[k] != ' ' && (k == 0 || header[k-1] == ' ') {
			at = append(at, k)
		}
	}
	for n, k := range at {
		end := len(header)
		if n+1 < len(at) {
			end = at[n+1]
		}
		cols = append(cols, strings.TrimSpace(string(header[k:end])))
	}
	var cells []cell
	for _, l := range lines[1:] {
		row := strings.TrimSpace(string(l[:min(len(l), at[0])]))
		for n, k := range at {
			if k >= len(l) {
				break
			}
			end := len(l)
			if n+1 < len(at) {
				end = min(end, at[n+1])
			}
			f := strings.TrimSpace(string(l[k:end]))
			if f == "" {
				continue
			}
			e, err := strconv.ParseFloat(f, 64)
			if err != nil {
				return nil, fmt.Errorf("%s: row %q, column %s: %q is not a figure", path, row, cols[n], f)
			}
			cells = append(cells, cell{row, cols[n], e})
		}
	}
	return cells, nil
}

// summary returns, per package, its worst figure over the rows of the
// float64 references on well-conditioned cases and, separately, each row
// whose label says in parentheses which cases it covers (those whose error
// is the problem's own conditioning). The float32 twins' rows (a name
// ending in 32) are yardsticks, not references, and are left out.
func summary(t *testing.T) (md, doc string) {
	var m, d strings.Builder
	m.WriteString("| package | what | worst error | where |\n| --- | --- | --- | --- |\n")
	for _, p := range measuredPackages {
		cells, err := readTable(p.dir + "/doc.go")
		if err != nil {
			t.Fatal(err)
		}
		worst, apart := cell{err: -1}, cell{err: -1}
		for _, c := range cells {
			switch {
			case strings.HasSuffix(c.row, "32"):
			case strings.Contains(c.row, "("):
				if c.err > apart.err {
					apart = c
				}
			case c.err > worst.err:
				worst = c
			}
		}
		fmt.Fprintf(&m, "| %s | %s | %s | %s, %s |\n", p.dir, p.what, golden.FormatError(worst.err), worst.row, worst.col)
		fmt.Fprintf(&d, "//\t%-10s %-8s %s, %s\n", p.dir, golden.FormatError(worst.err), worst.row, worst.col)
		if apart.err >= 0 {
			fmt.Fprintf(&m, "| %s | the cases in parentheses | %s | %s, %s |\n", p.dir, golden.FormatError(apart.err), apart.row, apart.col)
			fmt.Fprintf(&d, "//\t%-10s %-8s %s, %s\n", p.dir, golden.FormatError(apart.err), apart.row, apart.col)
		}
	}
	return m.String(), "//\n" + d.String() + "//\n"
}

func TestAccuracySummary(t *testing.T) {
	md, doc := summary(t)
	golden.Block(t, "README.md", readmeAccuracyBegin, readmeAccuracyEnd, md)
	golden.Block(t, "doc.go", docAccuracyBegin, docAccuracyEnd, doc)
}

func TestParseTable(t *testing.T) {
	lines := [][]rune{
		[]rune("                              out       lse"),
		[]rune("Forward                       9.7e-16   2.7e-16"),
		[]rune("Merge                                   7.4e-17"),
		[]rune("Backward (logits near ±1000)  1.0e-13"),
	}
	cells, err := parseTable("x", lines)
	if err != nil {
		t.Fatal(err)
	}
	want := []cell{{"Forward", "out", 9.7e-16}, {"Forward", "lse", 2.7e-16}, {"Merge", "lse", 7.4e-17}, {"Backward (logits near ±1000)", "out", 1.0e-13}}
	if fmt.Sprint(cells) != fmt.Sprint(want) {
		t.Errorf("parseTable = %v; want %v", cells, want)
	}
	if _, err := parseTable("x", append(lines, []rune("Decode                        fast"))); err == nil || !strings.Contains(err.Error(), `"fast" is not a figure`) {
		t.Errorf("a cell that is not a figure gives %v; want an error naming it", err)
	}
	if _, err := parseTable("x", lines[:1]); err == nil {
		t.Error("a table without rows parses")
	}
}
