package main

import (
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// progressDelay is how long a step runs before progress is shown, and
// progressTick how often the line is redrawn.
var progressDelay, progressTick = time.Second, 250 * time.Millisecond

// progress shows "plumb: label … 1.2 s" on stderr, redrawn in place, while a
// step runs longer than progressDelay, when stderr is a terminal and quiet
// is false. The returned function ends the step and clears the line.
func progress(e *env, quiet bool, label string) (done func()) {
	if quiet || !e.terminal {
		return func() {}
	}
	start := time.Now()
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		select {
		case <-stop:
			return
		case <-time.After(progressDelay):
		}
		t := time.NewTicker(progressTick)
		defer t.Stop()
		for {
			fmt.Fprintf(e.stderr, "\rplumb: %s … %.1f s ", label, time.Since(start).Seconds())
			select {
			case <-stop:
				fmt.Fprintf(e.stderr, "\r\033[K")
				return
			case <-t.C:
			}
		}
	}()
	return func() { close(stop); wg.Wait() }
}

type runOptions struct {
	config, out    string
	allowNonFinite bool
	quiet          bool
}

func (o *runOptions) register(fs *flag.FlagSet) {
	fs.StringVar(&o.config, "config", "", fmt.Sprintf("the operation's JSON configuration `file`, at most %d bytes (default: {\"version\": 1};\nplumb help OPERATION lists its keys)", ops.MaxConfigBytes))
	fs.BoolVar(&o.allowNonFinite, "allow-nonfinite", false, "pass NaN and ±Inf in the inputs to the reference, whose special cases then apply,\ninstead of refusing them")
	fs.BoolVar(&o.quiet, "quiet", false, "no progress on stderr")
}

// refRun is an operation run on the inputs of the command line.
type refRun struct {
	op     ops.Op
	config []byte
	in     ops.Tensors
	out    ops.Tensors
}

// reference reads the configuration and inputs and runs the operation.
func (o *runOptions) reference(e *env, args []string) (*refRun, error) {
	if len(args) == 0 {
		return nil, fmt.Errorf("arguments = []; want an OPERATION and its inputs NAME=FILE.npy (plumb help ops)")
	}
	op, err := ops.Lookup(args[0])
	if err != nil {
		return nil, err
	}
	files, err := namedFiles(args[1:], "input")
	if err != nil {
		return nil, err
	}
	r := &refRun{op: op}
	if r.config, err = readConfig(o.config); err != nil {
		return nil, err
	}
	if r.in, err = readInputs(files, o.allowNonFinite); err != nil {
		return nil, err
	}
	done := progress(e, o.quiet, "running "+op.Name())
	r.out, err = op.Run(r.config, r.in)
	done()
	if err != nil {
		return nil, configError(o.config, err)
	}
	return r, nil
}

var runAbout = fmt.Sprintf(`
Runs the float64 reference of OPERATION (plumb help ops lists them) with the
configuration of -config on the inputs NAME=FILE.npy (float64, float32 or
float16 files) and writes each output as DIR/NAME.npy in float64, DIR being
-out. plumb help OPERATION lists its configuration keys, inputs and outputs.

A -config file is one JSON object of at most %d bytes
(ops.MaxConfigBytes); an empty file is an error (the smallest
configuration is {"version":1}), and so is a larger one, which is not
read to its end.

An input holding NaN, +Inf or −Inf is an error that names the file, the
element's index and its value, unless -allow-nonfinite: then the reference
computes with them and the special cases its function documents apply
(the function is named in plumb help ops; for example +Inf in a softmax row
gives NaN in the whole row).

The outputs are written all or none: each to a temporary file beside it,
synced, and renamed over DIR/NAME.npy only when every output has been
written. A failed run leaves the files of an earlier run as they were and
no temporary behind.
`, ops.MaxConfigBytes)

var checkAbout = fmt.Sprintf(`
Runs OPERATION as plumb run does, then compares each candidate given with
-got OUTPUT=FILE.npy (a port's output, on the same inputs) with the
reference output of that name, as plumb diff does. Exit status 0 when every
candidate is within tolerance, 1 when one is not, 2 for an error.

The inputs and -config are read as plumb run reads them: NaN or ±Inf in an
input is an error unless -allow-nonfinite. A candidate may hold NaN and
±Inf: where it matches the reference (NaN for NaN, the same infinity) it
counts as a match, anywhere else as a mismatch that fails.

With the candidate's format (-format, or the candidate file's type when it
is float32 or float16) narrower than float64 and no tolerance flag, the
tolerance comes from the yardstick: the same kernel's float32 instantiation
runs on the inputs rounded to that format, its output is rounded to the
format, and a candidate may be at most -k times as far from the reference
plus one rounding to the format (absolute, and normwise). A float64
candidate gets the default tolerance below.

When an output fails, check searches for what the port may have done and
prints it after the reports, under "`+diagnosisTitle+`" (package
diagnose): every other word of every convention key of the operation, the
common alternatives of its numeric keys (the logit scale, ε, the rotary
base, offsets, window sizes, …), tensors swapped, transposed or read in
the other layout, and pairs of the most promising of these. It names the
changes under which the port passes its yardstick, in the configuration's
own words ("group": "cycle"), simplest first, with their normwise errors
(the nearest when none passes), and the error signatures of the failing
outputs: how the error runs along the positions, the heads and the dims.
The port is judged by the yardstick of the candidates' format (of the
narrowest when they differ; float32 for float64 candidates, which have
none), whatever the tolerance flags, and -k applies. The search runs at
most %d configurations, each on at most %d input values: a larger
problem is cut to a sub-problem (batch entries, query heads with the kv
heads they read, leading queries with the keys they see, or rows), and
the section says which. It never changes the exit status; -no-diagnosis leaves it out.

With -json the output is one object: "outputs", the report of each
candidate in the order of the operation's outputs, and "diagnosis", the
search's result as data (absent when every output passes or with
-no-diagnosis): each candidate has "change" and "changes" in words and
"edits" as data, one object a change: "key", "value" and "note" ("1/d")
for a configuration key, "remove" for a key taken out, "mixup" for a
tensor read or written another way.
`, diagnosisCandidates, diagnosisElements) + toleranceAbout

func init() {
	commands = append(commands, &command{
		name:    "run",
		usage:   "run [flags] OPERATION NAME=FILE.npy ...",
		summary: "run the float64 reference of an operation on .npy inputs, write .npy outputs",
		about:   runAbout,
		flags:   runFlags,
		nargs:   -1,
		run:     runRun,
	}, &command{
		name:    "check",
		usage:   "check [flags] OPERATION NAME=FILE.npy ... -got OUTPUT=FILE.npy ...",
		summary: "run the reference and diff a port's outputs against it in one step",
		about:   checkAbout,
		flags:   checkFlags,
		nargs:   -1,
		run:     runCheck,
	})
}

func runFlags(fs *flag.FlagSet) any {
	o := &runOptions{}
	o.register(fs)
	fs.StringVar(&o.out, "out", ".", "`directory` the outputs are written to (created if missing)")
	return o
}

// runRun is plumb run: the reference's outputs, written as .npy files.
func runRun(e *env, opts any, args []string) (int, error) {
	o := opts.(*runOptions)
	r, err := o.reference(e, args)
	if err != nil {
		return exitUsage, err
	}
	if err := os.MkdirAll(o.out, 0o755); err != nil {
		return exitUsage, err
	}
	var set outputSet
	defer set.abort()
	var wrote []string
	for _, p := range r.op.Outputs() {
		t, ok := r.out[p.Name]
		if !ok {
			continue
		}
		path := filepath.Join(o.out, p.Name+".npy")
		if err := set.add(path, tensorWriter(t)); err != nil {
			return exitUsage, err
		}
		wrote = append(wrote, fmt.Sprintf("wrote %s: float64 %v\n", path, t.Shape))
	}
	if err := set.commit(); err != nil {
		return exitUsage, err
	}
	for _, w := range wrote {
		fmt.Fprint(e.stdout, w)
	}
	return exitPass, nil
}

type checkOptions struct {
	runOptions
	judgeFlags
	k           float64
	got         []string
	noDiagnosis bool
}

func checkFlags(fs *flag.FlagSet) any {
	o := &checkOptions{}
	o.runOptions.register(fs)
	o.judgeFlags.register(fs)
	fs.Float64Var(&o.k, "k", compare.DefaultK, "the yardstick's factor")
	fs.Func("got", "a candidate `OUTPUT=FILE.npy` to judge (repeat for several outputs; at least one)", func(s string) error {
		o.got = append(o.got, s)
		return nil
	})
	fs.BoolVar(&o.noDiagnosis, "no-diagnosis", false, "when an output fails, do not search for the configuration the port may have used\n(the section "+strconv.Quote(diagnosisTitle)+")")
	return o
}

// runCheck is plumb check: the reference, and a report on each candidate.
func runCheck(e *env, opts any, args []string) (int, error) {
	o := opts.(*checkOptions)
	gotFiles, err := o.candidates(args)
	if err != nil {
		return exitUsage, err
	}
	r, err := o.reference(e, args)
	if err != nil {
		return exitUsage, err
	}
	j := &judge{e: e, o: o, r: r}
	var reports []namedReport
	for _, p := range r.op.Outputs() {
		if path, ok := gotFiles[p.Name]; ok {
			rep, err := j.output(p.Name, path)
			if err != nil {
				return exitUsage, err
			}
			reports = append(reports, *rep)
		}
	}
	var reps []*compare.Report
	for _, r := range reports {
		reps = append(reps, r.Report)
	}
	code := verdictStatus(reps...)
	var diag *diagnosis
	if code == exitFail && !o.noDiagnosis {
		done := progress(e, o.quiet, "searching what the port may have done")
		diag = diagnoseCheck(r, reports, o.k)
		done()
	}
	if err := writeCheck(e.stdout, o.json, reports, diag); err != nil {
		return exitUsage, err
	}
	return code, nil
}

// checkJSON is what check -json writes: the report of every candidate, in
// the order of the operation's outputs, and the diagnosis when one ran.
type checkJSON struct {
	Outputs   []namedReport `json:"outputs"`
	Diagnosis *diagnosis    `json:"diagnosis,omitempty"`
}

// writeCheck prints the reports and, when one ran, the diagnosis, as text
// or as one JSON object (checkJSON).
func writeCheck(w io.Writer, asJSON bool, reports []namedReport, diag *diagnosis) error {
	if asJSON {
		return writeJSON(w, checkJSON{Outputs: reports, Diagnosis: diag})
	}
	if err := writeReports(w, reports); err != nil {
		return err
	}
	if diag == nil {
		return nil
	}
	fmt.Fprintln(w)
	return writeDiagnosis(w, diag)
}

// candidates checks -k and the -got flags, and returns the candidate file
// of each output; it refuses an output the operation (args[0], when it is
// one) does not have before any input is read.
func (o *checkOptions) candidates(args []string) (map[string]string, error) {
	if !(o.k >= 1) || math.IsInf(o.k, 0) {
		return nil, fmt.Errorf("-k = %v; want a finite number ≥ 1", o.k)
	}
	if len(o.got) == 0 {
		return nil, fmt.Errorf("-got is missing; want one or more -got OUTPUT=FILE.npy")
	}
	files, err := namedFiles(o.got, "candidate")
	if err != nil {
		return nil, err
	}
	if len(args) == 0 {
		return files, nil
	}
	op, err := ops.Lookup(args[0])
	if err != nil {
		return files, nil // reference says so
	}
	var names []string
	for _, p := range op.Outputs() {
		names = append(names, p.Name)
	}
	for n := range files {
		if !slices.Contains(names, n) {
			return nil, fmt.Errorf("-got %s: output = %q; want one of the outputs of %s: %s", n, n, op.Name(), strings.Join(names, ", "))
		}
	}
	return files, nil
}

// judge judges the candidates of one check.
type judge struct {
	e  *env
	o  *checkOptions
	r  *refRun
	ys map[string]*compare.Yardstick // measured once, for the first candidate that needs them
}

// output reads the candidate for the reference output name from path and
// reports on it.
func (j *judge) output(name, path string) (*namedReport, error) {
	ref, ok := j.r.out[name]
	if !ok {
		return nil, fmt.Errorf("-got %s: output = %q; want one this configuration gives: %s", name, name, outputNames(j.r.out))
	}
	got, err := readTensor(path, canonicalBits(j.o.format))
	if err != nil {
		return nil, err
	}
	if !slices.Equal(got.tensor.Shape, ref.Shape) {
		return nil, fmt.Errorf("shapes differ: %s has shape %v; want %v, the shape of the reference %s", got.path, got.tensor.Shape, ref.Shape, name)
	}
	f, err := candidateFormat(j.o.format, got.dtype)
	if err != nil {
		return nil, fmt.Errorf("-format: %w", err)
	}
	dopt, err := j.options(name, f, ref.Data)
	if err != nil {
		return nil, err
	}
	dopt.Worst = j.o.worst
	rep, err := compare.Diff(ref.Data, got.tensor.Data, ref.Shape, dopt)
	if err != nil {
		return nil, err
	}
	return &namedReport{Name: name, Reference: "plumb " + j.r.op.Name(), Candidate: got.path, Report: rep, got: got.tensor, format: f}, nil
}

// options are the comparison options for a candidate of format f for the
// output name: the tolerance flags, else the yardstick for a format
// narrower than float64, else the default tolerance.
func (j *judge) options(name string, f compare.Format, ref []float64) (compare.Options, error) {
	switch {
	case j.o.explicit():
		tol, err := j.o.tolerance()
		if err != nil {
			return compare.Options{}, err
		}
		return compare.Options{Format: f, Tolerance: &tol}, nil
	case f != compare.Float64:
		if j.ys == nil {
			done := progress(j.e, j.o.quiet, "measuring the "+f.String()+" yardstick")
			ys, err := ops.YardstickOf(j.r.op.Name(), j.r.config, j.r.in, j.r.out, f, j.o.k)
			done()
			if err != nil {
				return compare.Options{}, err
			}
			j.ys = ys
		}
		return j.ys[name].Options(), nil
	}
	tol := defaultTolerance(f, ref)
	return compare.Options{Format: f, Tolerance: &tol}, nil
}

// outputNames lists the outputs of a run, sorted.
func outputNames(out ops.Tensors) string {
	var n []string
	for k := range out {
		n = append(n, k)
	}
	slices.Sort(n)
	return strings.Join(n, ", ")
}
