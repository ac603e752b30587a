package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/npy"
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
	config         string
	out            []string
	allowNonFinite bool
	quiet          bool
	direct         bool
	rows           rowFlags
}

func (o *runOptions) register(fs *flag.FlagSet) {
	fs.StringVar(&o.config, "config", "", fmt.Sprintf("the operation's JSON configuration `file`, at most %d bytes; - reads standard input\n(default: {\"version\": 1}; plumb help OPERATION lists its keys)", ops.MaxConfigBytes))
	fs.BoolVar(&o.allowNonFinite, "allow-nonfinite", false, "pass NaN and ±Inf in the inputs to the reference, whose special cases then apply,\ninstead of refusing them")
	fs.BoolVar(&o.quiet, "quiet", false, "no status lines and no progress on stderr")
	o.rows.register(fs)
	fs.BoolVar(&o.direct, "direct", false, "run the direct forms of attention and the feed-forward layer (attention.Forward, …),\nthe definitions, instead of their fast forms: the same bits, slower")
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
	if o.rows.set {
		sm, err := o.sampleRun(e, args, compare.Float64, 0)
		if err != nil {
			return nil, err
		}
		e.status(o.quiet, "rows: %d of %d, the outputs' rows in the order %v\n", len(sm.rows.Index), sm.rows.Total, sm.rows.Index)
		return &refRun{op: sm.op, config: sm.config, out: sm.ref}, nil
	}
	op, err := operation(args)
	if err != nil {
		return nil, err
	}
	files, err := e.namedFiles(args[1:], "input", true)
	if err != nil {
		return nil, err
	}
	if err := knownInputs(op, files); err != nil {
		return nil, err
	}
	r := &refRun{op: op}
	if r.config, err = e.readConfig(o.config); err != nil {
		return nil, err
	}
	if r.in, err = e.readInputs(files, o.allowNonFinite); err != nil {
		return nil, err
	}
	ops.UseDirectForms(o.direct) // for the yardstick and the diagnosis too
	done := progress(e, o.quiet, "running "+op.Name())
	r.out, err = op.Run(r.config, r.in)
	done()
	if err != nil {
		return nil, configError(o.config, err)
	}
	return r, nil
}

// operation is the operation args[0] names.
func operation(args []string) (ops.Op, error) {
	if len(args) == 0 {
		return nil, fmt.Errorf("arguments = []; want an OPERATION and its inputs NAME=FILE.npy (plumb help ops)")
	}
	return lookupOp(args[0])
}

// knownInputs refuses an input name the operation does not have, before
// any file is read.
func knownInputs(op ops.Op, files map[string]string) error {
	var names []string
	for _, p := range op.Inputs() {
		names = append(names, p.Name)
	}
	for _, n := range slices.Sorted(maps.Keys(files)) {
		if !slices.Contains(names, n) {
			from := ""
			if f := files[n]; strings.HasSuffix(f, ":"+n) {
				from = fmt.Sprintf(" (an array of %s)", strings.TrimSuffix(f, ":"+n))
			}
			return fmt.Errorf("input %q%s is not an input of %s; want one of %s%s (plumb help %s)", n, from, op.Name(), strings.Join(names, ", "), nearestHint(n, names), op.Name())
		}
	}
	return nil
}

var runAbout = fmt.Sprintf(`
Runs the float64 reference of OPERATION (plumb help ops lists them) with the
configuration of -config on the inputs NAME=FILE (float64, float32 or
float16 files, integer files by their values; a FILE may be an .npz
array FILE.npz:NAME, raw binary FILE:TYPE:DIMS or - for standard input:
plumb help files) and writes each output in float64, by default as
DIR/NAME.npy with DIR the -out directory. An .npz archive given alone
supplies its arrays as the inputs of their names. plumb help OPERATION
lists its configuration keys, inputs and outputs.

-out says where the outputs go: a directory (created if missing) of
NAME.npy files; FILE.npz, one archive holding every output as NAME; -, the
one output as a .npy stream on standard output (an error naming the
outputs when there are several); or NAME=FILE, repeated, only the outputs
named, each to its FILE (- for standard output). A status line for each
file written goes to standard error; -quiet leaves them out.

A -config file is one JSON object of at most %d bytes
(ops.MaxConfigBytes); an empty file is an error (the smallest
configuration is {"version":1}), and so is a larger one, which is not
read to its end.

An input holding NaN, +Inf or −Inf is an error that names the file, the
element's index and its value, unless -allow-nonfinite: then the reference
computes with them and the special cases its function documents apply
(the function is named in plumb help ops; for example +Inf in a softmax row
gives NaN in the whole row).

attention-forward, attention-backward, ffn-forward and ffn-backward run the
fast forms of their kernels (attention.ForwardFast, …: blocked matrix
products in parallel), which give the direct forms' results bit for bit;
-direct runs the direct forms, the definitions the golden values verify,
for the same outputs, more slowly.

The outputs are written all or none: each to a temporary file beside it,
synced, and renamed over DIR/NAME.npy only when every output has been
written. A failed run leaves the files of an earlier run as they were and
no temporary behind.
`, ops.MaxConfigBytes) + rowsAbout

var checkAbout = fmt.Sprintf(`
Runs OPERATION as plumb run does, then compares each candidate given with
-got OUTPUT=FILE (a port's output, on the same inputs; any file of
plumb help files) with the reference output of that name, as plumb diff
does; -got FILE.npz alone judges each array of the archive as the output
of its name. Exit status 0 when every
candidate is within tolerance, 1 when one is not, 2 for an error.

The inputs and -config are read as plumb run reads them: NaN or ±Inf in an
input is an error unless -allow-nonfinite, and -direct runs the direct
forms. A candidate may hold NaN and ±Inf: where it matches the reference
(NaN for NaN, the same infinity) it counts as a match, anywhere else as a
mismatch that fails.

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
heads they read, leading queries with the keys they see, rows, or rotary
heads and positions spread over the length at their own positions), and
the section says which. It never changes the exit status; -no-diagnosis leaves it out.

When the configuration declares a precision idiom (a key plumb help
OPERATION calls the port's precision idiom: "angles", "variance",
"accumulation", "softmax_shift"), the yardstick's float32 run computes as
the idiom says and its tolerance widens accordingly; the reference does
not change. The report then says what the idiom costs, under
"`+idiomCostTitle+`", on the check's own
inputs and positions: for each output, the normwise and max abs error of
the idiom's float32 run against the reference beside those of the plain
float32 run (the configuration without its idiom keys), their ratio, and
for the rotary operations the largest error at the first and at the last
position, where an angle idiom costs most. Both yardsticks are measured
in the narrowest of the candidates' formats (float32 for float64
candidates), against the reference the check ran once.

With -json the output is one object: "outputs", the report of each
candidate in the order of the operation's outputs; "idiom_cost", what a
declared idiom costs, as data ("format", "keys", and for each of
"outputs" "normwise_error", "plain_normwise_error", "ratio",
"max_abs_error", "plain_max_abs_error" and, for rotary, "positions";
absent when the configuration declares none); and "diagnosis", the
search's result as data (absent when every output passes or with
-no-diagnosis): each candidate has "change" and "changes" in words and
"edits" as data, one object a change: "key", "value" and "note" ("1/d")
for a configuration key, "remove" for a key taken out, "mixup" for a
tensor read or written another way.
`, diagnosisCandidates, diagnosisElements) + rowsAbout + toleranceAbout + reportAbout

func init() {
	commands = append(commands, &command{
		name:    "run",
		usage:   "run [flags] OPERATION NAME=FILE ...",
		summary: "run the float64 reference of an operation on .npy inputs, write .npy outputs",
		about:   runAbout,
		flags:   runFlags,
		nargs:   -1,
		run:     runRun,
	}, &command{
		name:    "check",
		usage:   "check [flags] OPERATION NAME=FILE ... -got OUTPUT=FILE ...",
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
	fs.Func("out", "where the outputs go: a `directory` of NAME.npy files (default: .), FILE.npz (one archive),\n- (the one output to standard output) or NAME=FILE (that output only; repeat for more)", func(s string) error {
		if s == "" {
			return errors.New("empty; want a directory, FILE.npz, - or NAME=FILE")
		}
		o.out = append(o.out, s)
		return nil
	})
	return o
}

// runTarget is where run writes its outputs (-out).
type runTarget struct {
	dir     string            // a directory of NAME.npy files
	archive string            // one .npz archive
	named   map[string]string // NAME=FILE: only these outputs
	order   []string          // the names of named, in the order given
}

// parseOut reads the -out flags.
func parseOut(outs []string) (*runTarget, error) {
	if len(outs) == 0 {
		return &runTarget{dir: "."}, nil
	}
	t := &runTarget{named: map[string]string{}}
	var plain []string
	for _, s := range outs {
		name, file, ok := strings.Cut(s, "=")
		if ok && nameRE.MatchString(name) && file != "" {
			if first, dup := t.named[name]; dup {
				return nil, fmt.Errorf("-out %s=: output %q is given twice (%s, %s); want each output once", name, name, first, file)
			}
			t.named[name] = file
			t.order = append(t.order, name)
			continue
		}
		plain = append(plain, s)
	}
	switch {
	case len(plain) > 1 || len(plain) == 1 && len(t.named) > 0:
		return nil, fmt.Errorf("-out = %q; want one directory, FILE.npz or -, or else NAME=FILE flags alone", outs)
	case len(plain) == 0:
		return t, nil
	}
	t.named = nil
	switch {
	case plain[0] == "-":
		t.named = nil
		t.order = []string{"-"}
	case strings.HasSuffix(plain[0], ".npz"):
		t.archive = plain[0]
	default:
		t.dir = plain[0]
	}
	return t, nil
}

// runRun is plumb run: the reference's outputs, written as .npy files.
func runRun(e *env, opts any, args []string) (int, error) {
	o := opts.(*runOptions)
	target, err := parseOut(o.out)
	if err != nil {
		return exitUsage, err
	}
	if op, err := operation(args); err == nil {
		for _, n := range target.order {
			if n != "-" && !slices.ContainsFunc(op.Outputs(), func(p ops.Port) bool { return p.Name == n }) {
				return exitUsage, fmt.Errorf("-out %s=%s: output %q is not an output of %s; want one of %s", n, target.named[n], n, op.Name(), portNames(op.Outputs()))
			}
		}
	}
	r, err := o.reference(e, args)
	if err != nil {
		return exitUsage, err
	}
	var names []string // the outputs given, in the operation's order
	for _, p := range r.op.Outputs() {
		if _, ok := r.out[p.Name]; ok {
			names = append(names, p.Name)
		}
	}
	var wrote []string
	switch {
	case len(target.order) == 1 && target.order[0] == "-":
		if len(names) != 1 {
			return exitUsage, fmt.Errorf("-out -: %s gives %d outputs here (%s) and standard output takes one; want -out NAME=- for one of them (-out %s=-), or -out FILE.npz for all in one archive",
				r.op.Name(), len(names), strings.Join(names, ", "), names[0])
		}
		t := r.out[names[0]]
		if err := e.writeOutput("-", tensorWriter(t)); err != nil {
			return exitUsage, err
		}
		wrote = append(wrote, fmt.Sprintf("wrote standard output: %s, float64 %v\n", names[0], t.Shape))
	case target.archive != "":
		err := writeAtomic(target.archive, func(w io.Writer) error {
			aw := npy.NewArchiveWriter(w, false)
			for _, n := range names {
				a, err := tensorArray(r.out[n])
				if err == nil {
					err = aw.Add(n, a)
				}
				if err != nil {
					return err
				}
			}
			return aw.Close()
		})
		if err != nil {
			return exitUsage, err
		}
		var parts []string
		for _, n := range names {
			parts = append(parts, fmt.Sprintf("%s float64 %v", n, r.out[n].Shape))
		}
		wrote = append(wrote, fmt.Sprintf("wrote %s: %s\n", target.archive, strings.Join(parts, ", ")))
	default:
		var set outputSet
		defer set.abort()
		stdout := ""
		paths := map[string]string{}
		for _, n := range names {
			paths[n] = filepath.Join(target.dir, n+".npy")
		}
		if target.named != nil {
			paths = map[string]string{}
			for _, n := range target.order {
				if _, ok := r.out[n]; !ok {
					return exitUsage, fmt.Errorf("-out %s=%s: output = %q; want one this configuration gives: %s", n, target.named[n], n, strings.Join(names, ", "))
				}
				paths[n] = target.named[n]
				if paths[n] == "-" {
					if stdout != "" {
						return exitUsage, fmt.Errorf("-out %s=- and -out %s=-: standard output takes one output; want a file for the other", stdout, n)
					}
					stdout = n
				}
			}
		} else if err := os.MkdirAll(target.dir, 0o755); err != nil {
			return exitUsage, err
		}
		for _, n := range names {
			path, ok := paths[n]
			if !ok || path == "-" {
				continue
			}
			if err := set.add(path, tensorWriter(r.out[n])); err != nil {
				return exitUsage, err
			}
			wrote = append(wrote, fmt.Sprintf("wrote %s: float64 %v\n", path, r.out[n].Shape))
		}
		if err := set.commit(); err != nil {
			return exitUsage, err
		}
		if stdout != "" {
			if err := e.writeOutput("-", tensorWriter(r.out[stdout])); err != nil {
				return exitUsage, err
			}
			wrote = append(wrote, fmt.Sprintf("wrote standard output: %s, float64 %v\n", stdout, r.out[stdout].Shape))
		}
	}
	for _, w := range wrote {
		e.status(o.quiet, "%s", w)
	}
	return exitPass, nil
}

// portNames lists the names of ports.
func portNames(ps []ops.Port) string {
	var n []string
	for _, p := range ps {
		n = append(n, p.Name)
	}
	return strings.Join(n, ", ")
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
	fs.Func("got", "a candidate `OUTPUT=FILE` to judge (repeat for several outputs; at least one), or an .npz archive\nwhose arrays are named as the outputs", func(s string) error {
		o.got = append(o.got, s)
		return nil
	})
	fs.BoolVar(&o.noDiagnosis, "no-diagnosis", false, "when an output fails, do not search for the configuration the port may have used\n(the section "+strconv.Quote(diagnosisTitle)+")")
	return o
}

// runCheck is plumb check: the reference, and a report on each candidate.
func runCheck(e *env, opts any, args []string) (int, error) {
	o := opts.(*checkOptions)
	if _, err := operation(args); err != nil {
		return exitUsage, err
	}
	gotFiles, err := o.candidates(e, args)
	if err != nil {
		return exitUsage, err
	}
	if o.rows.set {
		return checkRows(e, o, args, gotFiles)
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
	cost := j.idiomCost(reports)
	var diag *diagnosis
	if code == exitFail && !o.noDiagnosis {
		done := progress(e, o.quiet, "searching what the port may have done")
		diag = diagnoseCheck(r, reports, o.k)
		done()
	}
	if err := writeCheck(e.stdout, o.json, reports, cost, diag); err != nil {
		return exitUsage, err
	}
	return code, nil
}

// checkJSON is what check -json writes: the report of every candidate, in
// the order of the operation's outputs, what the precision idiom the
// configuration declares costs when it declares one, and the diagnosis
// when one ran.
type checkJSON struct {
	Outputs   []namedReport `json:"outputs"`
	IdiomCost *idiomCost    `json:"idiom_cost,omitempty"`
	Diagnosis *diagnosis    `json:"diagnosis,omitempty"`
}

// writeCheck prints the reports, what the declared idiom costs when the
// configuration declares one, and the diagnosis when one ran, as text or
// as one JSON object (checkJSON).
func writeCheck(w io.Writer, asJSON bool, reports []namedReport, cost *idiomCost, diag *diagnosis) error {
	if asJSON {
		return writeJSON(w, checkJSON{Outputs: reports, IdiomCost: cost, Diagnosis: diag})
	}
	if err := writeReports(w, reports); err != nil {
		return err
	}
	if cost != nil {
		fmt.Fprintln(w)
		if err := writeIdiomCost(w, cost); err != nil {
			return err
		}
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
func (o *checkOptions) candidates(e *env, args []string) (map[string]string, error) {
	if !(o.k >= 1) || math.IsInf(o.k, 0) {
		return nil, fmt.Errorf("-k = %v; want a finite number ≥ 1", o.k)
	}
	if len(o.got) == 0 {
		return nil, fmt.Errorf("-got is missing; want one or more -got OUTPUT=FILE.npy")
	}
	files, err := e.namedFiles(o.got, "candidate", true)
	if err != nil {
		return nil, err
	}
	op, err := operation(args)
	if err != nil {
		return nil, err
	}
	var names []string
	for _, p := range op.Outputs() {
		names = append(names, p.Name)
	}
	for _, n := range slices.Sorted(maps.Keys(files)) {
		if slices.Contains(names, n) {
			continue
		}
		if arc, ok := strings.CutSuffix(files[n], ":"+n); ok && slices.Contains(o.got, arc) {
			return nil, fmt.Errorf("-got %s: its array %q is not an output of %s; want arrays named as the outputs, %s (or -got OUTPUT=%s:NAME for one array)", arc, n, op.Name(), strings.Join(names, ", "), arc)
		}
		return nil, fmt.Errorf("-got %s: output = %q; want one of the outputs of %s: %s", n, n, op.Name(), strings.Join(names, ", "))
	}
	return files, nil
}

// judge judges the candidates of one check.
type judge struct {
	e     *env
	o     *checkOptions
	r     *refRun
	ys    map[string]*compare.Yardstick // measured once, for the first candidate that needs them
	costs map[compare.Format]costRun    // what the declared idiom costs, by format (idiomCosts)
}

// output reads the candidate for the reference output name from path and
// reports on it.
func (j *judge) output(name, path string) (*namedReport, error) {
	ref, ok := j.r.out[name]
	if !ok {
		return nil, fmt.Errorf("-got %s: output = %q; want one this configuration gives: %s", name, name, outputNames(j.r.out))
	}
	got, err := j.e.readTensor(path, canonicalBits(j.o.format))
	if err != nil {
		return nil, err
	}
	if !slices.Equal(got.tensor.Shape, ref.Shape) {
		return nil, fmt.Errorf("shapes differ: %s has shape %v; want %v, the shape of the reference %s%s", got.path, got.tensor.Shape, ref.Shape, name,
			shapeHint(got.tensor.Shape, ref.Shape, j.r.op, j.r.config))
	}
	f, err := candidateFormat(j.o.format, got)
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
			ys, err := j.yardsticks(f)
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

// yardsticks measures the yardstick of every output in format f against
// the reference already run. When the configuration declares a precision
// idiom they are those of the idiom's cost (ops.Cost.Idiom, what
// ops.YardstickOf measures), so that the idiom's float32 run is not run
// twice.
func (j *judge) yardsticks(f compare.Format) (map[string]*compare.Yardstick, error) {
	if costs, err := j.idiomCosts(f); err == nil && costs != nil {
		ys := map[string]*compare.Yardstick{}
		for n, c := range costs {
			ys[n] = c.Idiom
		}
		return ys, nil
	}
	done := progress(j.e, j.o.quiet, "measuring the "+f.String()+" yardstick")
	defer done()
	return ops.YardstickOf(j.r.op.Name(), j.r.config, j.r.in, j.r.out, f, j.o.k)
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
