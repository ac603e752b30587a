package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"slices"

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
	fs.StringVar(&j.format, "format", "", "the candidate's number `format`: float64, float32, binary16, bfloat16, e4m3, e5m2\n(default: the candidate file's type; uint16/uint8 files need it to be read as bit patterns)")
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
		usage:   "diff [flags] REFERENCE.npy CANDIDATE.npy",
		summary: "compare a candidate tensor with the reference: report, verdict, heatmap",
		about: `
Compares the candidate (a port's output) with the reference elementwise and
prints the report: max absolute and relative error (relative to
max(|ref|, 2^−10·max|ref|)), RMS error, mean signed error (a bias
detector), normwise relative error, the distribution of ULP distances in
the candidate's format, NaN and Inf mismatches, the worst elements with
their index, and the verdict under the tolerance. The two files must have
the same shape. Exit status 0 within tolerance, 1 outside, 2 for an error.

NaN and ±Inf in either file are compared, never refused (a reference may
hold them by its special cases, say −Inf log-sum-exp of a row that sees no
key): a NaN against a NaN, or an infinity against the same infinity, is a
match; a NaN or an infinity against anything else is a mismatch that
fails. The -heatmap file is written to a temporary beside it and renamed
into place once complete.
` + toleranceAbout,
		flags: func(fs *flag.FlagSet) any {
			o := &diffOptions{}
			o.register(fs)
			fs.BoolVar(&o.quiet, "quiet", false, "no progress on stderr")
			fs.StringVar(&o.heatmap, "heatmap", "", "also draw |got − ref| over the 2-D slice (last two dimensions) holding the worst\nelement, as a PNG `file`")
			return o
		},
		nargs: 2,
		args:  "REFERENCE.npy CANDIDATE.npy",
		run:   runDiff,
	})
}

// runDiff is plumb diff: the report on one candidate file.
func runDiff(e *env, opts any, args []string) (int, error) {
	o := opts.(*diffOptions)
	ref, err := readTensor(args[0], "")
	if err != nil {
		return exitUsage, err
	}
	got, err := readTensor(args[1], canonicalBits(o.format))
	if err != nil {
		return exitUsage, err
	}
	if !slices.Equal(ref.tensor.Shape, got.tensor.Shape) {
		return exitUsage, fmt.Errorf("shapes differ: %s has shape %v; want %v, the shape of %s", got.path, got.tensor.Shape, ref.tensor.Shape, ref.path)
	}
	f, err := candidateFormat(o.format, got.dtype)
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
