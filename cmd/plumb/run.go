package main

import (
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
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
	config, out string
	allowNaN    bool
	quiet       bool
}

func (o *runOptions) register(fs *flag.FlagSet) {
	fs.StringVar(&o.config, "config", "", "the operation's JSON configuration `file` (default: {\"version\": 1}; plumb help OPERATION lists its keys)")
	fs.BoolVar(&o.allowNaN, "allow-nan", false, "pass NaN in the inputs to the reference instead of refusing them")
	fs.BoolVar(&o.quiet, "quiet", false, "no progress on stderr")
}

// reference reads the configuration and inputs and runs the operation.
func (o *runOptions) reference(e *env, args []string) (name string, config []byte, in, out ops.Tensors, err error) {
	if len(args) == 0 {
		return "", nil, nil, nil, fmt.Errorf("want an OPERATION and its inputs NAME=FILE.npy (plumb help ops)")
	}
	name = args[0]
	if _, err := ops.Lookup(name); err != nil {
		return "", nil, nil, nil, err
	}
	files, err := namedFiles(args[1:], "input")
	if err != nil {
		return "", nil, nil, nil, err
	}
	if config, err = readConfig(o.config); err != nil {
		return "", nil, nil, nil, err
	}
	if in, err = readInputs(files, o.allowNaN); err != nil {
		return "", nil, nil, nil, err
	}
	done := progress(e, o.quiet, "running "+name)
	out, err = ops.Run(name, config, in)
	done()
	if err != nil {
		return "", nil, nil, nil, configError(o.config, err)
	}
	return name, config, in, out, nil
}

func init() {
	commands = append(commands, &command{
		name:    "run",
		usage:   "run [flags] OPERATION NAME=FILE.npy ...",
		summary: "run the float64 reference of an operation on .npy inputs, write .npy outputs",
		about: `
Runs the float64 reference of OPERATION (plumb help ops lists them) with the
configuration of -config on the inputs NAME=FILE.npy (float64, float32 or
float16 files) and writes each output as DIR/NAME.npy in float64, DIR being
-out. plumb help OPERATION lists its configuration keys, inputs and outputs.
NaN in an input is an error unless -allow-nan.
`,
		flags: func(fs *flag.FlagSet) any {
			o := &runOptions{}
			o.register(fs)
			fs.StringVar(&o.out, "out", ".", "`directory` the outputs are written to (created if missing)")
			return o
		},
		run: func(e *env, opts any, args []string) (int, error) {
			o := opts.(*runOptions)
			name, _, _, out, err := o.reference(e, args)
			if err != nil {
				return exitUsage, err
			}
			if err := os.MkdirAll(o.out, 0o755); err != nil {
				return exitUsage, err
			}
			op, _ := ops.Lookup(name)
			for _, p := range op.Outputs() {
				t, ok := out[p.Name]
				if !ok {
					continue
				}
				path := filepath.Join(o.out, p.Name+".npy")
				if err := writeTensor(path, t); err != nil {
					return exitUsage, err
				}
				fmt.Fprintf(e.stdout, "wrote %s: float64 %v\n", path, t.Shape)
			}
			return exitPass, nil
		},
	})

	commands = append(commands, &command{
		name:    "check",
		usage:   "check [flags] OPERATION NAME=FILE.npy ... -got OUTPUT=FILE.npy ...",
		summary: "run the reference and diff a port's outputs against it in one step",
		about: `
Runs OPERATION as plumb run does, then compares each candidate given with
-got OUTPUT=FILE.npy (a port's output, on the same inputs) with the
reference output of that name, as plumb diff does. Exit status 0 when every
candidate is within tolerance, 1 when one is not, 2 for an error.

With the candidate's format (-format, or the candidate file's type when it
is float32 or float16) narrower than float64 and no tolerance flag, the
tolerance comes from the yardstick: the same kernel's float32 instantiation
runs on the inputs rounded to that format, its output is rounded to the
format, and a candidate may be at most -k times as far from the reference
plus one rounding to the format (absolute, and normwise). A float64
candidate gets the default tolerance below.
` + toleranceAbout,
		flags: func(fs *flag.FlagSet) any {
			o := &checkOptions{}
			o.runOptions.register(fs)
			o.judgeFlags.register(fs)
			fs.Float64Var(&o.k, "k", compare.DefaultK, "the yardstick's factor")
			fs.Func("got", "a candidate `OUTPUT=FILE.npy` to judge (repeat for several outputs; at least one)", func(s string) error {
				o.got = append(o.got, s)
				return nil
			})
			return o
		},
		run: runCheck,
	})
}

type checkOptions struct {
	runOptions
	judgeFlags
	k   float64
	got []string
}

func runCheck(e *env, opts any, args []string) (int, error) {
	o := opts.(*checkOptions)
	if !(o.k >= 1) || math.IsInf(o.k, 0) {
		return exitUsage, fmt.Errorf("-k is %v; want a finite number ≥ 1", o.k)
	}
	if len(o.got) == 0 {
		return exitUsage, fmt.Errorf("no candidate: give one or more -got OUTPUT=FILE.npy")
	}
	gotFiles, err := namedFiles(o.got, "candidate")
	if err != nil {
		return exitUsage, err
	}
	if len(args) > 0 {
		if op, err := ops.Lookup(args[0]); err == nil {
			outs := map[string]bool{}
			var names []string
			for _, p := range op.Outputs() {
				outs[p.Name] = true
				names = append(names, p.Name)
			}
			for n := range gotFiles {
				if !outs[n] {
					return exitUsage, fmt.Errorf("-got %s: %s has no output %q; its outputs are %v", n, op.Name(), n, names)
				}
			}
		}
	}
	name, config, in, ref, err := o.reference(e, args)
	if err != nil {
		return exitUsage, err
	}
	op, _ := ops.Lookup(name)
	var reports []namedReport
	var ys map[string]*compare.Yardstick
	for _, p := range op.Outputs() {
		path, ok := gotFiles[p.Name]
		if !ok {
			continue
		}
		r, ok := ref[p.Name]
		if !ok {
			return exitUsage, fmt.Errorf("-got %s: this configuration gives no %q output", p.Name, p.Name)
		}
		got, err := readTensor(path, canonicalBits(o.format))
		if err != nil {
			return exitUsage, err
		}
		if !equalShape(got.tensor.Shape, r.Shape) {
			return exitUsage, fmt.Errorf("shapes differ: %s is %v, the reference %s is %v", got.path, got.tensor.Shape, p.Name, r.Shape)
		}
		f, err := candidateFormat(o.format, got.dtype)
		if err != nil {
			return exitUsage, fmt.Errorf("-format: %w", err)
		}
		var dopt compare.Options
		switch {
		case o.explicit():
			tol, err := o.tolerance()
			if err != nil {
				return exitUsage, err
			}
			dopt = compare.Options{Format: f, Tolerance: &tol}
		case f != compare.Float64:
			if ys == nil {
				done := progress(e, o.quiet, "measuring the "+f.String()+" yardstick")
				ys, err = ops.Yardstick(name, config, in, f, o.k)
				done()
				if err != nil {
					return exitUsage, err
				}
			}
			dopt = ys[p.Name].Options()
		default:
			tol := defaultTolerance(f, r.Data)
			dopt = compare.Options{Format: f, Tolerance: &tol}
		}
		dopt.Worst = o.worst
		rep, err := compare.Diff(r.Data, got.tensor.Data, r.Shape, dopt)
		if err != nil {
			return exitUsage, err
		}
		reports = append(reports, namedReport{Name: p.Name, Reference: "plumb " + name, Candidate: got.path, Report: rep})
	}
	if err := writeReports(e.stdout, o.json, reports); err != nil {
		return exitUsage, err
	}
	var reps []*compare.Report
	for _, r := range reports {
		reps = append(reps, r.Report)
	}
	return verdictStatus(reps...), nil
}
