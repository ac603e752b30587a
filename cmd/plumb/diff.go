package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// judgeFlags are the flags diff and check share: the tolerance, the
// candidate's format and the report's form.
type judgeFlags struct {
	abs, rel, normwise float64
	ulps               uint64
	format             string
	worst              int
	json               bool
	heatmap            string

	fs *flag.FlagSet // to tell which flags were given
}

func (j *judgeFlags) register(fs *flag.FlagSet) {
	j.fs = fs
	fs.Float64Var(&j.abs, "abs", 0, "absolute tolerance: an element passes when |got − ref| ≤ abs + rel·|ref|")
	fs.Float64Var(&j.rel, "rel", 0, "relative tolerance (see -abs)")
	fs.Uint64Var(&j.ulps, "ulps", 0, "an element within this many ULPs of the candidate's format passes too (0: not used)")
	fs.Float64Var(&j.normwise, "normwise", 0, "largest normwise relative error ‖got − ref‖₂/‖ref‖₂ allowed (0: not checked)")
	fs.StringVar(&j.format, "format", "", "the candidate's number `format`: float64, float32, binary16, bfloat16, e4m3, e5m2, or another\nname of one (fp64, double, fp32, single, fp16, float16, half, bf16; default: the candidate file's type;\nuint16/uint8 .npy files need it to be read as bit patterns)")
	fs.IntVar(&j.worst, "worst", compare.DefaultWorst, "how many of the worst elements the report lists")
	fs.BoolVar(&j.json, "json", false, "write the report as JSON instead of text")
}

// explicit reports whether a tolerance flag was given.
func (j *judgeFlags) explicit() bool {
	set := false
	j.fs.Visit(func(f *flag.Flag) {
		switch f.Name {
		case "abs", "rel", "ulps", "normwise":
			set = true
		}
	})
	return set
}

func (j *judgeFlags) tolerance() (compare.Tolerance, error) {
	t := compare.Tolerance{Abs: j.abs, Rel: j.rel, ULPs: j.ulps, MaxNormwise: j.normwise, Basis: "explicit (flags)"}
	if err := t.Validate(); err != nil {
		return t, fmt.Errorf("tolerance flags: %w", err)
	}
	return t, nil
}

// defaultRel is the relative tolerance diff and check use when no tolerance
// flag is given and no yardstick applies: 1e-10 for float64 candidates, and
// √u (half the format's significant bits) for narrower formats.
func defaultRel(f compare.Format) float64 {
	if f == compare.Float64 {
		return 1e-10
	}
	return math.Sqrt(f.UnitRoundoff())
}

// defaultTolerance is Rel = defaultRel(f), Abs = Rel·max|ref| (1 when the
// reference is all zero).
func defaultTolerance(f compare.Format, ref []float64) compare.Tolerance {
	r := defaultRel(f)
	big := 0.0
	for _, v := range ref {
		if a := math.Abs(v); a > big && !math.IsInf(a, 0) {
			big = a
		}
	}
	if big == 0 {
		big = 1
	}
	return compare.Tolerance{Rel: r, Abs: r * big,
		Basis: fmt.Sprintf("default for %v candidates: rel %.3g, abs %.3g × max|ref|", f, r, r)}
}

const toleranceAbout = `
Tolerance. With -abs, -rel, -ulps or -normwise the tolerance is what they
say: an element passes when |got − ref| ≤ abs + rel·|ref|, or (with -ulps)
when it is within that many steps of the candidate's format; -normwise also
bounds ‖got − ref‖₂/‖ref‖₂. Without them the default is rel = r and
abs = r·max|ref| with r = 1e-10 for float64 candidates (tight: a float64 port
that sums in another order is within about 1e-13, values 1e-2 apart fail, and
so does a single float32 rounding, 6e-8) and r = √u for a narrower format of
unit roundoff u (float32 2.4e-4, binary16 2.2e-2, bfloat16 6.2e-2, e4m3 0.25,
e5m2 0.35: a loose guess; plumb check measures the right one).
`

type diffOptions struct {
	judgeFlags
	quiet bool
}

func init() {
	commands = append(commands, &command{
		name:    "diff",
		usage:   "diff [flags] REFERENCE CANDIDATE",
		summary: "compare a candidate tensor with the reference: report, verdict, heatmap",
		about: `
Compares the candidate (a port's output) with the reference elementwise and
prints the report: max absolute and relative error (relative to
max(|ref|, 2^−10·max|ref|)), RMS error, mean signed error (a bias
detector), normwise relative error, SQNR in dB (10·log₁₀(Σ ref² /
Σ (got − ref)²), common practice), the distribution of ULP distances in
the candidate's format, NaN and Inf mismatches, the worst elements with
their index, and the verdict under the tolerance. The two files must have
the same shape. Exit status 0 within tolerance, 1 outside, 2 for an error.

REFERENCE and CANDIDATE are tensor files of any kind plumb help files
lists: .npy, an array of an .npz archive (FILE.npz:NAME), raw binary
(FILE:TYPE:DIMS), or - for standard input (one of the two). A candidate
whose shape is the reference's with its axes in another order, or with
axes of length 1 added or dropped, is refused with a message that says
so and how to write it.

NaN and ±Inf in either file are compared, never refused (a reference may
hold them by its special cases, say −Inf log-sum-exp of a row that sees no
key): a NaN against a NaN, or an infinity against the same infinity, is a
match; a NaN or an infinity against anything else is a mismatch that
fails. The -heatmap file is written to a temporary beside it and renamed
into place once complete.
` + toleranceAbout + heatmapAbout + reportAbout,
		flags: func(fs *flag.FlagSet) any {
			o := &diffOptions{}
			o.register(fs)
			fs.BoolVar(&o.quiet, "quiet", false, "no status lines and no progress on stderr")
			fs.StringVar(&o.heatmap, "heatmap", "", "also draw |got − ref| over the 2-D slice (last two dimensions) holding the largest\nabsolute error, as a PNG `file` (plumb help diff describes it)")
			return o
		},
		nargs: 2,
		args:  "REFERENCE CANDIDATE (two tensor files; plumb help files)",
		run:   runDiff,
	})
}

// runDiff is plumb diff: the report on one candidate file.
func runDiff(e *env, opts any, args []string) (int, error) {
	o := opts.(*diffOptions)
	if o.heatmap == "-" {
		return exitUsage, fmt.Errorf("-heatmap -: the report goes to standard output; want a file for the heatmap (-heatmap h.png)")
	}
	ref, err := e.readTensor(args[0], "")
	if err != nil {
		return exitUsage, err
	}
	got, err := e.readTensor(args[1], canonicalBits(o.format))
	if err != nil {
		return exitUsage, err
	}
	if !slices.Equal(ref.tensor.Shape, got.tensor.Shape) {
		return exitUsage, fmt.Errorf("shapes differ: %s has shape %v; want %v, the shape of %s%s", got.path, got.tensor.Shape, ref.tensor.Shape, ref.path,
			shapeHint(got.tensor.Shape, ref.tensor.Shape, nil, nil))
	}
	f, err := candidateFormat(o.format, got)
	if err != nil {
		return exitUsage, fmt.Errorf("-format: %w", err)
	}
	tol := defaultTolerance(f, ref.tensor.Data)
	if o.explicit() {
		if tol, err = o.tolerance(); err != nil {
			return exitUsage, err
		}
	}
	done := progress(e, o.quiet, "comparing")
	rep, err := compare.Diff(ref.tensor.Data, got.tensor.Data, ref.tensor.Shape, compare.Options{Format: f, Tolerance: &tol, Worst: o.worst})
	done()
	if err != nil {
		return exitUsage, err
	}
	nr := namedReport{Reference: ref.path, Candidate: got.path, Report: rep}
	if o.json {
		err = writeJSON(e.stdout, nr)
	} else {
		err = writeReports(e.stdout, []namedReport{nr})
	}
	if err != nil {
		return exitUsage, err
	}
	if o.heatmap != "" {
		done := progress(e, o.quiet, "drawing "+o.heatmap)
		err := writeHeatmap(o.heatmap, ref.tensor.Data, got.tensor.Data, ref.tensor.Shape, rep, got.path)
		done()
		if err != nil {
			return exitUsage, fmt.Errorf("-heatmap: %w", err)
		}
	}
	return verdictStatus(rep), nil
}

func verdictStatus(reps ...*compare.Report) int {
	for _, r := range reps {
		if r.Verdict == nil || !r.Verdict.Pass {
			return exitFail
		}
	}
	return exitPass
}

// namedReport is one comparison as diff and check print it.
type namedReport struct {
	Name      string          `json:"output,omitempty"`
	Reference string          `json:"reference"`
	Candidate string          `json:"candidate"`
	Report    *compare.Report `json:"report"`

	got    ops.Tensor     // check: the candidate as read
	format compare.Format // check: its format
}

// writeJSON writes v as indented JSON.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// writeReports prints the reports as text.
func writeReports(w io.Writer, reps []namedReport) error {
	for i, r := range reps {
		if i > 0 {
			fmt.Fprintln(w)
		}
		if r.Name != "" {
			fmt.Fprintf(w, "output %s\n", r.Name)
		}
		fmt.Fprintf(w, "reference  %s\ncandidate  %s\n", r.Reference, r.Candidate)
		if err := r.Report.WriteText(w); err != nil {
			return err
		}
	}
	return nil
}

// shapeHint says how got, a candidate's shape, relates to ref, the
// reference's, when it holds the same elements: ref with axes of length 1
// added or dropped, or ref's axes in another order; and what to do. For a
// permutation and an operation with a "layout" key (op and config, nil for
// diff), it names the key, its words and its value in config. It is "" for
// any other pair.
func shapeHint(got, ref []int, op ops.Op, config []byte) string {
	if slices.Equal(withoutOnes(got), withoutOnes(ref)) {
		var what string
		switch {
		case len(got)+1 == len(ref) && ref[0] == 1 && slices.Equal(got, ref[1:]):
			what = "it lacks the reference's leading axis of length 1 (squeezed away)"
		case len(got) == len(ref)+1 && got[0] == 1 && slices.Equal(got[1:], ref):
			what = "it has an extra leading axis of length 1"
		default:
			what = "the shapes differ only in axes of length 1"
		}
		return fmt.Sprintf(": the same elements in the same order, but %s; want the file written with shape %v (in NumPy, a.reshape(%s))", what, ref, joinInts(ref))
	}
	perm := permutation(got, ref)
	if perm == nil {
		return ""
	}
	var moved []int
	for i, p := range perm {
		if p != i {
			moved = append(moved, i)
		}
	}
	desc := fmt.Sprintf("the reference's axes in the order (%s)", joinInts(perm))
	if len(moved) == 2 {
		desc = fmt.Sprintf("axes %d and %d swapped", moved[0], moved[1])
	}
	// axes[i] is the candidate's axis that becomes the reference's axis i.
	axes := make([]int, len(perm))
	for i, p := range perm {
		axes[p] = i
	}
	hint := fmt.Sprintf(": the reference's shape with %s, as a port that stores the tensor in another axis order writes it", desc)
	if key, ok := layoutKey(op); ok {
		if len(got) == 4 && len(moved) == 2 && moved[0] == 1 && moved[1] == 2 && slices.ContainsFunc(key.Words, func(w ops.Word) bool { return w.Text == "seq-major" }) {
			hint += " (seq-major [batch, seq, heads, dim] against heads-major [batch, heads, seq, dim], or the other way)"
		}
		var words []string
		for _, w := range key.Words {
			words = append(words, w.Text)
		}
		hint += fmt.Sprintf(`; if that is the port's layout, say so with the configuration's "layout" key (now %q; its words: %s; plumb help %s), otherwise transpose the port's output (in NumPy, a.transpose(%s))`,
			currentWord(config, "layout", key), strings.Join(words, ", "), op.Name(), joinInts(axes))
		return hint
	}
	return hint + fmt.Sprintf("; want it transposed to the reference's order (in NumPy, a.transpose(%s))", joinInts(axes))
}

// layoutKey is the operation's "layout" key, if it has one.
func layoutKey(op ops.Op) (ops.Key, bool) {
	if op == nil {
		return ops.Key{}, false
	}
	for _, k := range op.Keys() {
		if k.Name == "layout" && len(k.Words) > 0 {
			return k, true
		}
	}
	return ops.Key{}, false
}

// currentWord is the word config gives the key, or the key's default (its
// first word) when config does not set it.
func currentWord(config []byte, name string, key ops.Key) string {
	var m map[string]json.RawMessage
	if json.Unmarshal(config, &m) == nil {
		var w string
		if raw, ok := m[name]; ok && json.Unmarshal(raw, &w) == nil {
			return w
		}
	}
	return key.Words[0].Text
}

// withoutOnes is shape without its axes of length 1.
func withoutOnes(shape []int) []int {
	out := []int{}
	for _, d := range shape {
		if d != 1 {
			out = append(out, d)
		}
	}
	return out
}

// permutation returns p with got[i] = ref[p[i]], p not the identity, when
// got is a reordering of ref's axes (nil otherwise). Among equal lengths
// each axis of got takes the nearest unused axis of ref, itself first.
func permutation(got, ref []int) []int {
	if len(got) != len(ref) || slices.Equal(got, ref) {
		return nil
	}
	used := make([]bool, len(ref))
	p := make([]int, len(got))
	for i, d := range got {
		best := -1
		for j, r := range ref {
			if r == d && !used[j] && (best < 0 || absInt(j-i) < absInt(best-i)) {
				best = j
			}
		}
		if best < 0 {
			return nil
		}
		used[best], p[i] = true, best
	}
	return p
}

func absInt(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// joinInts is "1, 8, 128, 64".
func joinInts(v []int) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmt.Sprint(x)
	}
	return strings.Join(s, ", ")
}
