package ops

import (
	"errors"
	"fmt"
	"maps"
	"reflect"
	"slices"
	"sort"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
)

// ConfigVersion is the version of the configuration schema this package
// reads. Every configuration must say "version": 1.
const ConfigVersion = 1

// Sentinel errors. Every error this package returns wraps one of them, or
// the error of the kernel package that refused the call (attention.ErrShape,
// norm.ErrEpsilon, …), and names the operation and the key or tensor at
// fault, in the form "<sentinel>: <operation>: <what> = <value>; want
// <expectation>".
var (
	// ErrUnknownOp: no operation has that name.
	ErrUnknownOp = errors.New("ops: unknown operation")
	// ErrConfig: a configuration that is not one JSON object, has an
	// unknown key, a missing or unsupported version, a value of the wrong
	// type, an enumerated value that is not one of its words, a mask
	// description the mask package refuses, or sizes whose output would
	// hold more than MaxElements values.
	ErrConfig = errors.New("ops: invalid configuration")
	// ErrInput: an input that the operation does not take, a required input
	// that is missing, a tensor whose data do not fill its shape, shapes
	// that do not fit together, or shapes that give an output of more than
	// MaxElements values.
	ErrInput = errors.New("ops: invalid input")
)

// Tensor is a row-major float64 tensor and its shape. An empty Shape is a
// scalar (one element).
type Tensor struct {
	Shape []int
	Data  []float64
}

// Tensors are named tensors: the inputs or the outputs of an operation.
type Tensors map[string]Tensor

// Port describes one input or output of an operation.
type Port struct {
	Name     string
	Optional bool   // an input that may be left out; an output present only sometimes
	Doc      string // its shape and meaning
}

// Key describes one configuration key. The keys of an operation are read
// from its configuration type, so the documentation cannot drift from what
// the decoder accepts; a key whose value is a word of one of plumb's
// conventions lists every word with its meaning, from the convention
// itself.
type Key struct {
	// Name is the key, or a dotted path to a key inside an object
	// ("scaling.method") or inside the objects of a list ("mask[].kind").
	Name string
	// Type is "int", "number", "bool", "word", "[int]", "[[int]]" (a list
	// of lists), "[number]", "object" or "[object]".
	Type string
	// Default is the value used when the key is absent, "required" when it
	// must be given, or a condition under which it is required.
	Default string
	Doc     string
	// Convention, for a word, is the Go type whose words the key takes
	// ("attention.GroupMap"); Words lists them, the default first.
	Convention string
	Words      []Word
	// Idiom marks a key that names a port's precision idiom: how the port
	// computes (its angle arithmetic, variance form, accumulation format,
	// softmax shift), not what. It changes Run32, and so the yardstick,
	// and never Run; see IdiomCost.
	Idiom bool

	decodes bool // its values are objects that decode themselves (mask.Spec)
}

// Word is one value a word key takes, and its meaning.
type Word struct {
	Text, Meaning string
}

// Op is one operation: a kernel of a plumb package behind a uniform
// interface of a JSON configuration and named tensors.
type Op interface {
	// Name is the operation's name, e.g. "attention-forward".
	Name() string
	// Summary is one line: what it computes and the function it calls.
	Summary() string
	// Keys documents the configuration keys besides "version".
	Keys() []Key
	// Inputs and Outputs document the tensors, in a fixed order.
	Inputs() []Port
	Outputs() []Port
	// Note is a paragraph about the operation beyond its keys and tensors
	// (the memory a key/value cache of its shapes takes), which plumb help
	// prints after them; "" for none.
	Note() string
	// Run decodes config and runs the float64 reference.
	Run(config []byte, in Tensors) (Tensors, error)
	// Run32 runs the float32 instantiation of the same kernel body on the
	// inputs rounded to float32, and returns its outputs widened (exactly)
	// to float64. It is the straightforward low-precision implementation,
	// not a reference; with an idiom key set (Key.Idiom) it computes as a
	// port of that idiom does. Operations that take no float input (tables,
	// slopes) have no float32 arithmetic to instantiate; their Run32 is the
	// reference rounded to float32 (rotary-tables: the tables as the
	// angles key forms them).
	Run32(config []byte, in Tensors) (Tensors, error)
}

// op is the one implementation of Op: a configuration type C and a run
// function called with single = false (float64 reference) or true (float32
// instantiation, inputs already rounded to float32).
type op[C any] struct {
	name, summary   string
	note            string
	inputs, outputs []Port
	run             func(c *C, in Tensors, single bool) (Tensors, error)
	keys            []Key // from C, at registration
	// rows, for an operation whose outputs are rows at positions (rotary),
	// gives the position of every row of every output; see IdiomCost.
	rows func(c *C, in Tensors) ([]int, error)
}

func (o *op[C]) Name() string    { return o.name }
func (o *op[C]) Summary() string { return o.summary }
func (o *op[C]) Keys() []Key     { return o.keys }
func (o *op[C]) Inputs() []Port  { return o.inputs }
func (o *op[C]) Outputs() []Port { return o.outputs }
func (o *op[C]) Note() string    { return o.note }

func (o *op[C]) Run(config []byte, in Tensors) (Tensors, error) {
	return o.exec(config, in, false)
}

func (o *op[C]) Run32(config []byte, in Tensors) (Tensors, error) {
	return o.exec(config, round32(in), true)
}

func (o *op[C]) exec(config []byte, in Tensors, single bool) (Tensors, error) {
	c := new(C)
	if err := decodeConfig(o.name, config, c, o.keys); err != nil {
		return nil, err
	}
	if err := checkInputs(o.name, o.inputs, in); err != nil {
		return nil, err
	}
	out, err := o.run(c, in, single)
	if err != nil {
		return nil, within(err, o.name)
	}
	return out, nil
}

var registry = map[string]Op{}

func register[C any](o *op[C]) {
	if _, dup := registry[o.Name()]; dup {
		panic("ops: operation registered twice: " + o.Name())
	}
	o.keys = keysOf(reflect.TypeFor[C](), "")
	registry[o.Name()] = o
}

// Names returns the names of every operation, sorted.
func Names() []string {
	return slices.Sorted(maps.Keys(registry))
}

// Lookup returns the operation called name, or an error wrapping
// ErrUnknownOp that lists the known names.
func Lookup(name string) (Op, error) { return lookup("Lookup", name) }

// lookup is Lookup for the exported function fn.
func lookup(fn, name string) (Op, error) {
	if o, ok := registry[name]; ok {
		return o, nil
	}
	return nil, fmt.Errorf("%w: %s: name = %q; want one of %s", ErrUnknownOp, fn, name, strings.Join(Names(), ", "))
}

// Run looks up the operation called name and runs its float64 reference.
func Run(name string, config []byte, in Tensors) (Tensors, error) {
	o, err := lookup("Run", name)
	if err != nil {
		return nil, err
	}
	return o.Run(config, in)
}

// Run32 looks up the operation called name and runs its float32
// instantiation (see Op.Run32).
func Run32(name string, config []byte, in Tensors) (Tensors, error) {
	o, err := lookup("Run32", name)
	if err != nil {
		return nil, err
	}
	return o.Run32(config, in)
}

// Yardstick measures, for every output of the operation called name, the
// error of its straightforward low-precision implementation in format f and
// the tolerance that follows (compare.MeasureYardstick, one yardstick per
// output): every float input is rounded to f, the float32 instantiation of
// the kernel runs on the rounded values (float32 arithmetic), each output is
// rounded to f and compared with the float64 reference, and the tolerance
// is k times that error plus one rounding to f. k = compare.DefaultK = 2 is
// common practice.
//
// The result maps each output name to its yardstick; y.Options() gives the
// compare.Diff options that judge a candidate for that output. f must be
// Float32 or narrower (BFloat16, Binary16, E4M3, E5M2): a Float64 candidate
// has no lower-precision implementation to measure, and is refused with
// compare.ErrFormat.
//
// Inputs are rounded to f once each, so the float32 kernel runs once;
// integer arguments (positions, mask, sizes) live in the configuration and
// are not rounded.
//
// A configuration that declares a precision idiom (a key with Key.Idiom:
// "angles", "variance", "accumulation", "softmax_shift") gets the
// yardstick of that idiom: the float32 run computes as a port of the idiom
// does, so that a port which states its idiom is judged against what the
// idiom can do, and the tolerance's Basis names the idiom. The reference
// is the same with and without the keys; IdiomCost compares the idiom's
// yardstick with the plain one.
func Yardstick(name string, config []byte, in Tensors, f compare.Format, k float64) (map[string]*compare.Yardstick, error) {
	o, err := lookup("Yardstick", name)
	if err != nil {
		return nil, err
	}
	ref, err := o.Run(config, in)
	if err != nil {
		return nil, err
	}
	return yardstick(o, config, in, ref, f, k)
}

// YardstickOf is Yardstick for a caller that has already run the float64
// reference: ref must be what Run(name, config, in) returned (the outputs
// are not recomputed, and not checked beyond their names), so
// that a check runs the reference once.
func YardstickOf(name string, config []byte, in, ref Tensors, f compare.Format, k float64) (map[string]*compare.Yardstick, error) {
	o, err := lookup("YardstickOf", name)
	if err != nil {
		return nil, err
	}
	if err := refHasOutputs("YardstickOf", o, ref); err != nil {
		return nil, err
	}
	return yardstick(o, config, in, ref, f, k)
}

// refHasOutputs checks, for the exported function fn, that ref holds
// every output of o that Run always returns.
func refHasOutputs(fn string, o Op, ref Tensors) error {
	for _, p := range o.Outputs() {
		if _, ok := ref[p.Name]; !ok && !p.Optional {
			return fmt.Errorf("%w: %s: %s: ref has no output %q; want the outputs Run returned", ErrInput, fn, o.Name(), p.Name)
		}
	}
	return nil
}

// yardstick measures the yardstick of every output of o against ref; the
// Basis of each names the idiom the configuration declares, if any.
func yardstick(o Op, config []byte, in, ref Tensors, f compare.Format, k float64) (map[string]*compare.Yardstick, error) {
	return yardstickWith(o, config, in, ref, f, k, func(rounded Tensors) (Tensors, error) { return o.Run32(config, rounded) })
}

// yardstickWith is yardstick with the float32 run run32 (given the inputs
// rounded to f).
func yardstickWith(o Op, config []byte, in, ref Tensors, f compare.Format, k float64, run32 func(Tensors) (Tensors, error)) (map[string]*compare.Yardstick, error) {
	name := o.Name()
	idioms, err := idiomsOf(o, config)
	if err != nil {
		return nil, err
	}
	var names []string
	var inputs [][]float64
	for _, p := range o.Inputs() {
		if t, ok := in[p.Name]; ok {
			names = append(names, p.Name)
			inputs = append(inputs, t.Data)
		}
	}
	var low Tensors // the float32 run, computed once
	run := func(out string) func(in32 [][]float32) ([]float32, error) {
		return func(in32 [][]float32) ([]float32, error) {
			if low == nil {
				rounded := Tensors{}
				for i, n := range names {
					rounded[n] = Tensor{Shape: in[n].Shape, Data: compare.Widen(in32[i])}
				}
				var err error
				if low, err = run32(rounded); err != nil {
					return nil, err
				}
			}
			return num.Convert[float32](low[out].Data), nil
		}
	}
	ys := map[string]*compare.Yardstick{}
	for _, p := range o.Outputs() {
		r, ok := ref[p.Name]
		if !ok {
			continue
		}
		y, err := compare.MeasureYardstick(f, inputs, r.Data, r.Shape, k, run(p.Name))
		if err != nil {
			return nil, within(err, fmt.Sprintf("%s: output %q", name, p.Name))
		}
		if idioms != nil {
			y.Tolerance.Basis = idiomBasis(y.Tolerance.Basis, y.Arithmetic, idioms)
		}
		ys[p.Name] = y
	}
	return ys, nil
}

// header is embedded in every configuration.
type header struct {
	Version int `json:"version"`
}

func (h header) version() int { return h.Version }

type versioned interface{ version() int }

// checkInputs refuses unknown and missing inputs and tensors whose data do
// not fill their shape.
func checkInputs(name string, ports []Port, in Tensors) error {
	known := map[string]bool{}
	var all []string
	for _, p := range ports {
		known[p.Name] = true
		all = append(all, p.Name)
	}
	var extra []string
	for n := range in {
		if !known[n] {
			extra = append(extra, n)
		}
	}
	if len(extra) > 0 {
		sort.Strings(extra)
		takes := "none: the operation takes no input"
		if len(all) > 0 {
			takes = "one of " + strings.Join(all, ", ")
		}
		return fmt.Errorf("%w: %s: input name = %q; want %s", ErrInput, name, extra[0], takes)
	}
	for _, p := range ports {
		t, ok := in[p.Name]
		if !ok {
			if !p.Optional {
				return fmt.Errorf("%w: %s: input %q is missing; want %s", ErrInput, name, p.Name, p.Doc)
			}
			continue
		}
		n := 1
		for _, d := range t.Shape {
			if d < 0 {
				return fmt.Errorf("%w: %s: input %q has shape %v; want every dimension ≥ 0", ErrInput, name, p.Name, t.Shape)
			}
			n *= d
		}
		if n != len(t.Data) {
			return fmt.Errorf("%w: %s: input %q has %d elements; want %d for its shape %v", ErrInput, name, p.Name, len(t.Data), n, t.Shape)
		}
	}
	return nil
}

// round32 returns the tensors with every value rounded to float32.
func round32(in Tensors) Tensors {
	out := make(Tensors, len(in))
	for n, t := range in {
		out[n] = Tensor{Shape: t.Shape, Data: compare.Widen(num.Convert[float32](t.Data))}
	}
	return out
}

// rank checks that input n has the given number of dimensions, described
// by dims (e.g. "[batch, heads, queries, dim]").
func rank(in Tensors, n string, want int, dims string) ([]int, error) {
	s := in[n].Shape
	if len(s) != want {
		return nil, fmt.Errorf("%w: input %q has shape %v; want %d dimensions %s", ErrInput, n, s, want, dims)
	}
	return s, nil
}

// lastDim returns the last dimension of input n, which must have at least
// one dimension of size ≥ 1.
func lastDim(in Tensors, n string) (int, error) {
	s := in[n].Shape
	if len(s) == 0 || s[len(s)-1] < 1 {
		return 0, fmt.Errorf("%w: input %q has shape %v; want at least one dimension, the last ≥ 1", ErrInput, n, s)
	}
	return s[len(s)-1], nil
}

// sameShape checks that input n has the shape want.
func sameShape(in Tensors, n string, want []int, what string) error {
	if !slices.Equal(in[n].Shape, want) {
		return fmt.Errorf("%w: input %q has shape %v; want %v (%s)", ErrInput, n, in[n].Shape, want, what)
	}
	return nil
}

// f32 returns the data of input n rounded to float32, or nil when it is
// absent.
func (in Tensors) f32(n string) []float32 { return num.Convert[float32](in.data(n)) }

// pick runs the float32 instantiation f32 when single, its result widened
// (exactly) to float64, and the float64 reference f64 otherwise.
func pick(single bool, f64 func() ([]float64, error), f32 func() ([]float32, error)) ([]float64, error) {
	if single {
		y, err := f32()
		return num.Convert[float64](y), err
	}
	return f64()
}

// has reports whether input n was given.
func (in Tensors) has(n string) bool { _, ok := in[n]; return ok }

// data returns the data of input n, or nil when it is absent.
func (in Tensors) data(n string) []float64 {
	if t, ok := in[n]; ok {
		return t.Data
	}
	return nil
}
