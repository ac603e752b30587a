package golden

import (
	"flag"
	"fmt"
	"math"
	"os"
	"strings"
	"sync"
	"testing"
)

// The lines around a package's accuracy table in its documentation.
const (
	AccuracyBegin = "// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:"
	AccuracyEnd   = "// The golden tests of this package measure the table and fail when it is out of date."
)

// Accuracy collects the worst normwise relative error of each function and
// output over a package's golden cases, and keeps the table of them in the
// package documentation true: the one tracker every golden test uses.
// It is safe for concurrent use.
//
// A package declares one Accuracy, its golden tests Note every error they
// measure, and TestMain ends with Accuracy.Main, which compares the table
// in the documentation with the measured one when every test ran.
type Accuracy struct {
	// Path is the file holding the table, between the lines AccuracyBegin
	// and AccuracyEnd: the package's doc.go.
	Path string
	// Heading, when set, replaces AccuracyBegin as the line before the
	// table, for a second table in the same file ("// Worst … of the
	// activations:"); it must be a whole comment line.
	Heading string
	// Rows and Cols are the table's row and column labels, in order. A
	// Note outside them is an error of the test (the table would not show
	// it).
	Rows, Cols []string

	mu    sync.Mutex
	worst map[[2]string]float64
	bad   []string
}

// Note records e, the normwise relative error of output col of function
// row on one golden case. NaN counts as the worst of all.
func (a *Accuracy) Note(row, col string, e float64) {
	a.mu.Lock()
	defer a.mu.Unlock()
	if indexOf(a.Rows, row) < 0 || indexOf(a.Cols, col) < 0 {
		a.bad = append(a.bad, row+" / "+col)
		return
	}
	if a.worst == nil {
		a.worst = map[[2]string]float64{}
	}
	k := [2]string{row, col}
	if w, ok := a.worst[k]; !ok || e > w || math.IsNaN(e) {
		a.worst[k] = e
	}
}

// Worst returns the largest error noted for row and col, and whether any was.
func (a *Accuracy) Worst(row, col string) (float64, bool) {
	a.mu.Lock()
	defer a.mu.Unlock()
	w, ok := a.worst[[2]string{row, col}]
	return w, ok
}

// Table renders the measured table as the lines of a Go doc comment's code
// block, between two "//" lines: "//\t" and the row label, then one column of 10 characters per
// output, the error with two significant digits ("9.7e-16"), "0" for an
// exact result, blank where the function has no such output.
func (a *Accuracy) Table() string {
	a.mu.Lock()
	defer a.mu.Unlock()
	width := 0
	for _, r := range a.Rows {
		width = max(width, len([]rune(r)))
	}
	var b strings.Builder
	b.WriteString("//\n")
	line := func(label string, cells []string) {
		s := label + strings.Repeat(" ", width+2-len([]rune(label)))
		for _, c := range cells {
			s += c + strings.Repeat(" ", max(1, 10-len([]rune(c))))
		}
		fmt.Fprintf(&b, "//\t%s\n", strings.TrimRight(s, " "))
	}
	line("", a.Cols)
	for _, r := range a.Rows {
		cells := make([]string, len(a.Cols))
		for i, c := range a.Cols {
			if w, ok := a.worst[[2]string{r, c}]; ok {
				cells[i] = FormatError(w)
			}
		}
		line(r, cells)
	}
	b.WriteString("//\n")
	return b.String()
}

// FormatError writes an error figure as the documentation shows it: two
// significant digits, "0" for an exact result.
func FormatError(e float64) string {
	if e == 0 {
		return "0"
	}
	return fmt.Sprintf("%.1e", e)
}

// Main runs the package's tests and then, when they passed, none was left
// out by -run, -skip or -short, and the build is the one the tables are
// measured on (amd64, GOAMD64=v1; see tablesMeasuredHere), checks that the table between
// AccuracyBegin and AccuracyEnd in Path is Table() (with -update it writes it there). It
// returns the exit code for os.Exit.
func (a *Accuracy) Main(m *testing.M) int { return Main(m, a) }

// Main runs the package's tests and then checks every table as
// Accuracy.Main does; for a package with more than one table.
func Main(m *testing.M, tables ...*Accuracy) int {
	code := m.Run()
	if code != 0 || !everyTestRan() {
		return code
	}
	if !tablesMeasuredHere {
		fmt.Fprintln(os.Stderr, "golden accuracy: the tables are measured on amd64 built for GOAMD64=v1; not compared on this build")
		return code
	}
	for _, a := range tables {
		if err := a.check(); err != nil {
			fmt.Fprintf(os.Stderr, "golden accuracy: %v\n", err)
			code = 1
		}
	}
	return code
}

// check compares (with -update, writes) the table in a.Path.
func (a *Accuracy) check() error {
	a.mu.Lock()
	bad := a.bad
	a.mu.Unlock()
	if len(bad) > 0 {
		return fmt.Errorf("errors noted for rows or columns the table of %s does not have: %s", a.Path, strings.Join(bad, ", "))
	}
	begin := AccuracyBegin
	if a.Heading != "" {
		begin = a.Heading
	}
	if err := replaceBlock(a.Path, begin, AccuracyEnd, a.Table(), *update); err != nil {
		return fmt.Errorf("%v\nThe table states the worst error the golden tests measure; regenerate it with go test -update in this package", err)
	}
	return nil
}

// everyTestRan reports whether the test binary ran without -run, -skip or
// -short, so that every golden test has noted its errors.
func everyTestRan() bool {
	for _, name := range []string{"test.run", "test.skip"} {
		if f := flag.Lookup(name); f != nil && f.Value.String() != "" {
			return false
		}
	}
	return !testing.Short()
}

func indexOf(list []string, s string) int {
	for i, x := range list {
		if x == s {
			return i
		}
	}
	return -1
}
