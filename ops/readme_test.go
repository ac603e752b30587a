package ops_test

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"regexp"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/ops"
)

// The code of the README's library section lives here, word for word
// (TestReadmeSnippets checks it), so that it compiles and runs.

// q, k and v are the inputs of the README's snippets: 8 query heads on 2
// key/value heads, 128 positions, head dimension 64, standard normal.
var q, k, v = normals(1, 8*128*64), normals(2, 2*128*64), normals(3, 2*128*64)

func normals(seed uint64, n int) []float64 {
	r := rand.New(rand.NewPCG(seed, 0))
	x := make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64()
	}
	return x
}

// myAttention stands for the reader's kernel: here plumb's own float32
// instantiation, causal, widened to float64.
func myAttention(q, k, v []float64) []float64 {
	s := attention.Shape{Batch: 1, HeadsQ: 8, HeadsKV: 2, Lq: 128, Lk: 128, Dk: 64, Dv: 64}
	f32 := func(x []float64) []float32 {
		y := make([]float32, len(x))
		for i, e := range x {
			y[i] = float32(e)
		}
		return y
	}
	out, _, err := attention.Forward32(f32(q), f32(k), f32(v), s, attention.Options{Mask: mask.Causal()})
	if err != nil {
		panic(err)
	}
	return compare.Widen(out)
}

func TestMyAttention(t *testing.T) {
	s := attention.Shape{Batch: 1, HeadsQ: 8, HeadsKV: 2, Lq: 128, Lk: 128, Dk: 64, Dv: 64}
	o := attention.Options{Mask: mask.Causal()}
	want, _, err := attention.Forward(q, k, v, s, o) // the float64 reference
	require.NoError(t, err)

	got := myAttention(q, k, v) // your kernel's output, widened to float64
	compare.Check(t, want, got, []int{1, 8, 128, 64}, compare.Float32,
		compare.Tolerance{Abs: 1e-5, MaxNormwise: 1e-6})
}

func TestReadmeYardstickAndReport(t *testing.T) {
	s := attention.Shape{Batch: 1, HeadsQ: 8, HeadsKV: 2, Lq: 128, Lk: 128, Dk: 64, Dv: 64}
	o := attention.Options{Mask: mask.Causal()}
	shape := []int{1, 8, 128, 64}
	want, _, err := attention.Forward(q, k, v, s, o)
	require.NoError(t, err)
	// A bfloat16 candidate: the float32 kernel's output rounded to bfloat16.
	got := compare.BFloat16.RoundSlice(myAttention(q, k, v))

	y, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{q, k, v}, want, shape, compare.DefaultK,
		func(in [][]float32) ([]float32, error) {
			out, _, err := attention.Forward32(in[0], in[1], in[2], s, o)
			return out, err
		})
	require.NoError(t, err)
	report, err := compare.Diff(want, got, shape, y.Options())
	require.NoError(t, err)

	assert.True(t, report.Verdict.Pass, "%v", report)
	assert.Contains(t, y.Tolerance.Basis, "bfloat16 inputs, float32 arithmetic")

	{
		report, err := compare.Diff(want, got, shape, compare.Options{Format: compare.Float32})
		require.NoError(t, err)
		fmt.Print(report)               // aligned text: errors, ULP histogram, worst elements
		js, err := json.Marshal(report) // the same, as JSON with stable keys
		require.NoError(t, err)

		assert.Contains(t, string(js), `"normwise_rel_error"`)
	}
}

// TestReadmeSnippets checks that every Go block of README.md appears in this
// file word for word (leading tabs aside).
func TestReadmeSnippets(t *testing.T) {
	readme, err := os.ReadFile("../README.md")
	require.NoError(t, err)
	self, err := os.ReadFile("readme_test.go")
	require.NoError(t, err)
	flat := func(s string) string {
		var b strings.Builder
		for _, l := range strings.Split(s, "\n") {
			b.WriteString(strings.TrimLeft(l, "\t"))
			b.WriteByte('\n')
		}
		return b.String()
	}
	blocks := regexp.MustCompile("(?s)```go\n(.*?)```").FindAllStringSubmatch(string(readme), -1)
	require.Len(t, blocks, 3, "README.md has three Go snippets")
	for _, b := range blocks {
		assert.Contains(t, flat(string(self)), flat(b[1]), "README snippet not found in readme_test.go")
	}
}

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
		require.NoError(t, err)
		m := summaryCall.FindStringSubmatch(o.Summary())
		require.NotNil(t, m, "%s: the summary %q does not end in (FUNCTION; float32: …)", n, o.Summary())
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
	require.NoError(t, err)
	flat := strings.Join(strings.Fields(strings.ReplaceAll(string(doc), "//", "")), " ")
	for _, v := range []string{
		"[mpmath]",
		"0.090030573170380458, 0.66524095577482189, 0.24472847105479765",
		"3.4076059644443803",
		"−1.1426396637476533, 1.9220755965441759, 2.9598506679133292, 4.0297995016691611",
	} {
		assert.Contains(t, flat, v, "ops/doc.go, Worked values")
	}
}
