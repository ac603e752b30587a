package main

import (
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/npy"
)

// generate returns n values of the distribution: package gen's, which
// states the algorithm as genAbout does.
func generate(n int, dist string, seed uint64, mean, std, low, high float64) ([]float64, error) {
	switch dist {
	case "normal":
		return gen.Normal(seed, n, mean, std)
	case "uniform":
		return gen.Uniform(seed, n, low, high)
	}
	return nil, fmt.Errorf("-dist = %q; want normal or uniform", dist)
}

const genAbout = `
Writes a .npy file of the given shape holding deterministic pseudo-random
numbers, so that a port and plumb can share inputs (or a port in another
language can regenerate them).

The generator, exactly:

  Source: PCG with 128-bit state, 128-bit LCG step and DXSM output (O'Neill
  2014, "PCG: A Family of Simple Fast Space-Efficient Statistically Good
  Algorithms for Random Number Generation", HMC-CS-2014-0905; the DXSM
  output function of the PCG reference code), as Go's math/rand/v2 PCG
  implements it. The state is hi = seed, lo = 0. Each 64-bit output:
    state = state · M + A  (mod 2^128),
      M = 0x2360ed051fc65da44385df649fccf645, A = 0x5851f42d4c957f2d14057b7ef767814f
    h = state >> 64, l = state mod 2^64 (the new state)
    h ^= h >> 32;  h *= 0xda942042e4dd58b5;  h ^= h >> 48;  h *= (l | 1)
    output h  (all products mod 2^64)
  Uniform: u = (x >> 11) · 2^−53 in [0, 1) for each output x;
    value = low + (high − low)·u, each operation rounded to float64.
  Normal (Box–Muller, Box & Muller 1958, Ann. Math. Statist. 29(2)): two
    outputs x1, x2 per pair of values; u1 = ((x1 >> 11) + 1) · 2^−53 in (0, 1],
    u2 = (x2 >> 11) · 2^−53; r = √(−2 ln u1), t = 2π·u2 (2π rounded to float64);
    z0 = r·cos t, z1 = r·sin t; elements 2i and 2i+1 are mean + std·z0 and
    mean + std·z1 (a last odd element takes z0 and drops z1).
  Values fill the tensor in row-major order. With -dtype float32 or float16
  each value is then rounded to that format (nearest, ties to even).

The uniform values are bit-exact in any language with 64-bit integers and
IEEE float64. The normal values use ln, cos and sin correctly rounded
(plumb's own functions, the same bits on every machine): they are
bit-exact where another library's ln, cos and sin are correctly rounded
too, and otherwise within a few units in the last place.

First values, seed 1:
  -dist uniform -low 0 -high 1:  0.5982609488236689, 0.08911177802144832, 0.715356444878812
  -dist normal:                  0.8588583889475008, 0.5383481862322732, 0.8094635935566922
(cmd/plumb/testdata/gen_check.py, in the repository, recomputes them from
this description alone with Python's integers and math module: the
uniform values agree bit for bit, and so do these first normal values;
further on, a few normal values in a thousand differ in the last place,
where the C library's ln, cos or sin is not correctly rounded.)

Use a different seed for each tensor: the same seed gives the same numbers.
The file is written to a temporary file beside it and renamed into place
once complete, so a failed gen leaves an earlier FILE.npy as it was.

The output is FILE.npy; - writes the .npy stream to standard output
(plumb gen -shape 4,4 - > x.npy); FILE.npz:NAME adds the array NAME to the
archive FILE.npz (created if missing), or replaces it there, keeping the
other arrays, so that one archive can carry every input of a run
(plumb run OPERATION FILE.npz). The line "wrote ..." goes to standard
error; -quiet leaves it out. plumb help files describes every kind of file.
`

type genOptions struct {
	shape, dist, dtype string
	seed               uint64
	mean, std          float64
	low, high          float64
	quiet              bool
}

func init() {
	commands = append(commands, &command{
		name:    "gen",
		usage:   "gen [flags] FILE.npy | - | FILE.npz:NAME",
		summary: "write deterministic pseudo-random inputs of a given shape as .npy",
		about:   genAbout,
		flags: func(fs *flag.FlagSet) any {
			o := &genOptions{}
			fs.StringVar(&o.shape, "shape", "", "the `dims` of the tensor, comma-separated, e.g. 1,8,128,64 (required)")
			fs.StringVar(&o.dist, "dist", "normal", "distribution: normal or uniform")
			fs.Uint64Var(&o.seed, "seed", 1, "seed of the generator (an unsigned 64-bit integer)")
			fs.Float64Var(&o.mean, "mean", 0, "mean of the normal distribution")
			fs.Float64Var(&o.std, "std", 1, "standard deviation of the normal distribution")
			fs.Float64Var(&o.low, "low", -1, "lower bound of the uniform distribution (included)")
			fs.Float64Var(&o.high, "high", 1, "upper bound of the uniform distribution (excluded, up to rounding)")
			fs.StringVar(&o.dtype, "dtype", "float64", "element type of the file: float64, float32 or float16 (also fp64, double, fp32, single,\nfp16, half, binary16)")
			fs.BoolVar(&o.quiet, "quiet", false, "no status line on stderr")
			return o
		},
		nargs: 1,
		args:  "one output: FILE.npy, - (standard output) or FILE.npz:NAME",
		run:   runGen,
	})
}

// runGen is plumb gen: one file of generated values.
func runGen(e *env, opts any, args []string) (int, error) {
	o := opts.(*genOptions)
	shape, err := parseShape(o.shape)
	if err != nil {
		return exitUsage, err
	}
	if err := o.check(); err != nil {
		return exitUsage, err
	}
	target, member, err := genTarget(args[0])
	if err != nil {
		return exitUsage, err
	}
	dt, err := genDType(o.dtype)
	if err != nil {
		return exitUsage, err
	}
	n := 1
	for _, d := range shape {
		n *= d
	}
	x, err := generate(n, o.dist, o.seed, o.mean, o.std, o.low, o.high)
	if err != nil {
		return exitUsage, err
	}
	var a *npy.Array
	switch dt {
	case npy.Float64:
		a, err = npy.New(npy.Float64, shape, x)
	case npy.Float32:
		a, err = npy.New(npy.Float32, shape, compare.Narrow(x))
	case npy.Float16:
		h := make([]uint16, len(x))
		for i, v := range x {
			h[i] = uint16(compare.Binary16.Encode(v))
		}
		a, err = npy.New(npy.Float16, shape, h)
	}
	if err == nil {
		if member != "" {
			err = addToArchive(target, member, a)
		} else {
			err = e.writeOutput(target, func(w io.Writer) error { return npy.Write(w, a) })
		}
	}
	if err != nil {
		return exitUsage, err
	}
	e.status(o.quiet, "wrote %s: %s %v, %s, seed %d\n", displayPath(args[0]), dt, shape, o.dist, o.seed)
	return exitPass, nil
}

// genDType reads -dtype: a floating-point type a .npy file holds.
func genDType(name string) (npy.DType, error) {
	rt, err := rawTypeByName(name)
	if err == nil && (rt.dtype == npy.Float64 || rt.dtype == npy.Float32 || rt.dtype == npy.Float16) && rt.format == nil {
		return rt.dtype, nil
	}
	why := ""
	if err == nil && rt.format != nil {
		why = fmt.Sprintf(" (%s has no .npy type: its files are bit patterns, which a port makes by rounding float32 values)", name)
	}
	return 0, fmt.Errorf("-dtype = %q; want float64, float32 or float16%s", name, why)
}

// genTarget reads gen's output argument: a file, "-", or FILE.npz:NAME (an
// array of an archive).
func genTarget(arg string) (path, member string, err error) {
	if arg == "-" || exists(arg) && !isArchiveFile(arg) {
		return arg, "", nil
	}
	if i := strings.LastIndexByte(arg, ':'); i > 0 && !exists(arg) {
		path, member = arg[:i], arg[i+1:]
		if strings.HasSuffix(path, ".npz") || exists(path) && isArchiveFile(path) {
			if !nameRE.MatchString(member) {
				return "", "", fmt.Errorf("%s: array name = %q; want letters, digits and _ (the member is written as NAME.npy)", arg, member)
			}
			return path, member, nil
		}
	}
	if strings.HasSuffix(arg, ".npz") || exists(arg) && isArchiveFile(arg) {
		return "", "", fmt.Errorf("%s is an .npz archive, which holds named arrays; want the array's name: %s:NAME (added to the archive, or replaced in it)", arg, arg)
	}
	return arg, "", nil
}

// addToArchive writes a as the array member of the archive at path: a new
// archive, or the old one with member added or replaced and every other
// array kept as it was. The archive is replaced atomically.
func addToArchive(path, member string, a *npy.Array) error {
	var old *npy.Archive
	if exists(path) {
		f, err := os.Open(path)
		if err != nil {
			return fmt.Errorf("%s: %w", path, trimPath(err, path))
		}
		defer f.Close()
		fi, err := f.Stat()
		if err != nil {
			return fmt.Errorf("%s: %w", path, trimPath(err, path))
		}
		if old, err = npy.NewArchive(f, fi.Size()); err != nil {
			return fmt.Errorf("%s: %w; want an .npz archive to add %s to (or a new file)", path, err, member)
		}
	}
	return writeAtomic(path, func(w io.Writer) error {
		aw := npy.NewArchiveWriter(w, false)
		for _, n := range old.Names() {
			if n != member {
				if err := aw.Copy(old, n); err != nil {
					return err
				}
			}
		}
		if err := aw.Add(member, a); err != nil {
			return err
		}
		return aw.Close()
	})
}

// check refuses parameters of the distributions that are not finite or
// not in order.
func (o *genOptions) check() error {
	for _, f := range []struct {
		flag string
		v    float64
	}{{"-mean", o.mean}, {"-std", o.std}, {"-low", o.low}, {"-high", o.high}} {
		if !finite(f.v) {
			return fmt.Errorf("%s = %v; want a finite number", f.flag, f.v)
		}
	}
	switch {
	case o.std < 0:
		return fmt.Errorf("-std = %v; want a number ≥ 0", o.std)
	case !(o.low < o.high) || !finite(o.high-o.low):
		return fmt.Errorf("-low = %v and -high = %v; want low < high, with high − low finite", o.low, o.high)
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// parseShape reads -shape: comma-separated dimensions.
func parseShape(s string) ([]int, error) {
	if s == "" {
		return nil, fmt.Errorf("-shape is missing; want the dims, comma-separated (e.g. -shape 2,64)")
	}
	shape, err := parseDims(s)
	if err != nil {
		return nil, fmt.Errorf("-shape %w", err)
	}
	return shape, nil
}

// parseDims reads comma-separated dimensions of at most 2^28 elements in
// all (npy.MaxElements).
func parseDims(s string) ([]int, error) {
	var shape []int
	n := 1
	for _, f := range strings.Split(s, ",") {
		d, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil || d < 0 {
			return nil, fmt.Errorf("%q: dimension = %q; want a whole number ≥ 0", s, f)
		}
		if d > 0 && n > (1<<28)/d {
			return nil, fmt.Errorf("%q holds more than 2^28 elements; want at most 2^28 = %d", s, 1<<28)
		}
		n *= d
		shape = append(shape, d)
	}
	return shape, nil
}
