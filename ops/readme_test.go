package ops_test

import (
	"fmt"
	"os"
	"regexp"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/ops"
)

// The conventions tables of the README and of the overview (doc.go) are
// generated from the convention types (ops.Conventions); TestConventionsTable
// keeps them so. Regenerate with go test ./ops -run TestConventionsTable
// -update.
const (
	readmeTableBegin = "<!-- conventions: generated from the code by go test ./ops -run TestConventionsTable -update -->"
	readmeTableEnd   = "<!-- end of conventions -->"
	docTableBegin    = "//\tconvention and its words (the first is the default)   meaning"
	docTableEnd      = "//"
)

func TestConventionsTable(t *testing.T) {
	var md, doc strings.Builder
	md.WriteString("| convention | Go type | words (the first is the default) | configuration keys |\n| --- | --- | --- | --- |\n")
	for _, c := range ops.Conventions() {
		var words []string
		for _, w := range c.Words {
			words = append(words, fmt.Sprintf("`%s` %s", w.Text, strings.ReplaceAll(w.Meaning, "|", `\|`)))
		}
		fmt.Fprintf(&md, "| %s | `%s` | %s | %s |\n", c.Question, c.Name, strings.Join(words, "; "), keyList(c.Keys))
		fmt.Fprintf(&doc, "//\t%s: %s\n", c.Name, c.Question)
		for _, w := range c.Words {
			fmt.Fprintf(&doc, "//\t  %-15s %s\n", w.Text, w.Meaning)
		}
	}
	golden.Block(t, "../README.md", readmeTableBegin, readmeTableEnd, md.String())
	golden.Block(t, "../doc.go", docTableBegin, docTableEnd, doc.String())
}

// keyList groups "operation: key" entries by key: "`group` (attention-forward, attention-backward)".
func keyList(keys []string) string {
	var order []string
	ops := map[string][]string{}
	for _, k := range keys {
		op, key, _ := strings.Cut(k, ": ")
		if ops[key] == nil {
			order = append(order, key)
		}
		ops[key] = append(ops[key], op)
	}
	if len(order) == 0 {
		return "— (library and flags only)"
	}
	var out []string
	for _, key := range order {
		out = append(out, fmt.Sprintf("`%s` (%s)", key, strings.Join(ops[key], ", ")))
	}
	return strings.Join(out, "; ")
}

// The list of operations in the package documentation (doc.go) is
// generated from the registered operations; TestOperationsList keeps it so.
// Regenerate with go test ./ops -run TestOperationsList -update.
var (
	opsListBegin = fmt.Sprintf("//\t%-20s%-36s%s", "operation", "calls", "outputs (the optional ones in parentheses)")
	opsListEnd   = "//"
)

// summaryCall is the end of every summary: the function the operation
// calls and what its float32 run is, "(attention.Forward; float32:
// attention.Forward32)".
var summaryCall = regexp.MustCompile(`\(([^;()]+); float32: [^;()]+\)$`)

// TestOperationsList: the operations of doc.go are the registered ones, in
// the order plumb help ops lists them (ops.Names), each with the function
// of its summary and its outputs.
func TestOperationsList(t *testing.T) {
	var b strings.Builder
	for _, n := range ops.Names() {
		o, err := ops.Lookup(n)
		ensure.NoError(t, err)
		m := summaryCall.FindStringSubmatch(o.Summary())
		ensure.NotNil(t, m, "%s: the summary %q does not end in (FUNCTION; float32: …)", n, o.Summary())
		var always, sometimes []string
		for _, p := range o.Outputs() {
			if p.Optional {
				sometimes = append(sometimes, p.Name)
			} else {
				always = append(always, p.Name)
			}
		}
		outs := strings.Join(always, ", ")
		if len(sometimes) > 0 {
			outs += " (" + strings.Join(sometimes, ", ") + ")"
		}
		fmt.Fprintf(&b, "%s\n", strings.TrimRight(fmt.Sprintf("//\t%-20s%-36s%s", n, m[1], outs), " "))
	}
	golden.Block(t, "doc.go", opsListBegin, opsListEnd, b.String())
}

// TestWorkedValuesDocumented: the worked values the tests and examples
// check are the ones the package documentation states with their source.
func TestWorkedValuesDocumented(t *testing.T) {
	doc, err := os.ReadFile("doc.go")
	ensure.NoError(t, err)
	flat := strings.Join(strings.Fields(strings.ReplaceAll(string(doc), "//", "")), " ")
	for _, v := range []string{
		"[mpmath]",
		"0.090030573170380458, 0.66524095577482189, 0.24472847105479765",
		"3.4076059644443803",
		"−1.1426396637476533, 1.9220755965441759, 2.9598506679133292, 4.0297995016691611",
	} {
		expect.Contains(t, flat, v, "ops/doc.go, Worked values")
	}
}
