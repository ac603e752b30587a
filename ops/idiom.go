package ops

import (
	"bytes"
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"reflect"
	"slices"
	"strings"

	"github.com/plumbref/plumb/compare"
)

// This file holds the precision idioms of the operations: configuration
// keys (Key.Idiom) that say how a port computes in float32 where it departs
// on purpose from the straightforward float32 implementation. Run ignores
// them; Run32, and so Yardstick, computes as the idiom says; IdiomCost
// shows what the idiom costs against the plain float32 run.

// Cost is what a port's precision idiom costs on one output: the yardstick
// of the plain float32 run and that of the idiom's float32 run, measured
// on the same inputs, in the same format, with the same k.
type Cost struct {
	// Keys are the idiom keys the configuration sets to other than their
	// default, as "key = word", joined by ", " ("angles = float32-angles").
	Keys string
	// Plain is the yardstick of the straightforward float32 run: the
	// configuration with its idiom keys left out.
	Plain *compare.Yardstick
	// Idiom is the yardstick of the idiom's float32 run: what Yardstick
	// measures for the configuration as given.
	Idiom *compare.Yardstick
	// Positions, for an output whose rows sit at positions (rotary-apply's
	// y, rotary-tables' cos and sin), holds the errors of the rows at each
	// distinct position, in ascending order of position; nil for other
	// outputs. Along them an idiom's error can be seen to grow.
	Positions []PositionCost
}

// PositionCost is the error of the rows of one output at one position.
type PositionCost struct {
	Position     int
	Plain, Idiom Errors // of the plain float32 run and of the idiom's
}

// Errors are the two measures of a yardstick's error that its tolerance is
// made of, over some elements: as compare.Report's MaxAbs and Normwise.
type Errors struct {
	MaxAbs   float64 // the largest |run − reference|
	Normwise float64 // ‖run − reference‖₂ / ‖reference‖₂
}

// Ratio is the idiom's normwise error over the plain float32 run's: how
// many times the plain yardstick's error the idiom costs. It is +Inf when
// the plain run is exact and the idiom's is not, 1 when both are exact,
// and NaN when either error is NaN.
func (c *Cost) Ratio() float64 {
	p, i := c.Plain.Report.Normwise, c.Idiom.Report.Normwise
	if p == 0 && i == 0 {
		return 1
	}
	return i / p
}

// Sample returns at most n of the positions, evenly spread over
// Positions, the first and the last included (n ≥ 2; all of them when
// there are no more than n); nil when the output has no positions.
func (c *Cost) Sample(n int) []PositionCost {
	p := c.Positions
	if len(p) <= max(n, 2) {
		return p
	}
	n = max(n, 2)
	out := make([]PositionCost, n)
	for i := range out {
		out[i] = p[i*(len(p)-1)/(n-1)]
	}
	return out
}

// String is one line: the idiom, its normwise and max abs error against
// the plain float32 run's, and, for an output with positions, the largest
// errors at its first and last position, for instance
//
//	angles = float32-angles: normwise 6.99e-06 (plain 4.11e-08, ×170), max abs 8.93e-05 (plain 1.51e-07); position 0: 0 (plain 0), position 2047: 2.22e-05 (plain 7.68e-08)
func (c *Cost) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: normwise %.3g (plain %.3g, ×%.3g), max abs %.3g (plain %.3g)", c.Keys,
		c.Idiom.Report.Normwise, c.Plain.Report.Normwise, c.Ratio(), c.Idiom.Report.MaxAbs, c.Plain.Report.MaxAbs)
	for i, p := range c.Sample(2) {
		sep := "; "
		if i > 0 {
			sep = ", "
		}
		fmt.Fprintf(&b, "%sposition %d: %.3g (plain %.3g)", sep, p.Position, p.Idiom.MaxAbs, p.Plain.MaxAbs)
	}
	return b.String()
}

// IdiomCost measures what the precision idiom a configuration declares
// costs: for every output of the operation called name, the yardstick of
// the idiom's float32 run (Yardstick with the configuration as given) and
// that of the plain float32 run (the configuration with its idiom keys
// left out), in format f with factor k, on the same inputs, and for the
// rotary operations the errors of both runs position by position. The
// reference runs once.
//
// A configuration that sets no idiom key to other than its default (or an
// operation that has none) has no cost to show: IdiomCost returns nil and
// no error. Errors are those of Yardstick.
func IdiomCost(name string, config []byte, in Tensors, f compare.Format, k float64) (map[string]*Cost, error) {
	o, err := lookup("IdiomCost", name)
	if err != nil {
		return nil, err
	}
	keys, err := idiomsOf(o, config)
	if err != nil || keys == nil {
		return nil, err
	}
	ref, err := o.Run(config, in)
	if err != nil {
		return nil, err
	}
	return idiomCost(o, config, keys, in, ref, f, k)
}

// IdiomCostOf is IdiomCost for a caller that has already run the float64
// reference: ref must be what Run(name, config, in) returned, as for
// YardstickOf.
func IdiomCostOf(name string, config []byte, in, ref Tensors, f compare.Format, k float64) (map[string]*Cost, error) {
	o, err := lookup("IdiomCostOf", name)
	if err != nil {
		return nil, err
	}
	if err := refHasOutputs("IdiomCostOf", o, ref); err != nil {
		return nil, err
	}
	keys, err := idiomsOf(o, config)
	if err != nil || keys == nil {
		return nil, err
	}
	return idiomCost(o, config, keys, in, ref, f, k)
}

// idiomCost measures both yardsticks of every output against ref, and the
// errors by position where the operation places its rows.
func idiomCost(o Op, config []byte, keys []string, in, ref Tensors, f compare.Format, k float64) (map[string]*Cost, error) {
	plainConfig, err := withoutIdioms(o, config)
	if err != nil {
		return nil, err
	}
	idiom, err := yardstick(o, config, in, ref, f, k)
	if err != nil {
		return nil, err
	}
	plain, err := yardstick(o, plainConfig, in, ref, f, k)
	if err != nil {
		return nil, err
	}
	var pos []int
	if io, ok := o.(idiomOp); ok {
		if pos, err = io.rowPositions(config, in); err != nil {
			return nil, within(err, o.Name())
		}
	}
	costs := map[string]*Cost{}
	for n, y := range idiom {
		c := &Cost{Keys: strings.Join(keys, ", "), Plain: plain[n], Idiom: y}
		if pos != nil {
			if c.Positions, err = byPosition(pos, ref[n].Data, c.Plain.Output, y.Output, f); err != nil {
				return nil, within(err, fmt.Sprintf("%s: output %q", o.Name(), n))
			}
		}
		costs[n] = c
	}
	return costs, nil
}

// byPosition gathers the rows of ref and of the two runs at each distinct
// position (pos holds one position per row; the rows are equally long) and
// measures both runs' errors there, as compare.Diff does in format f.
func byPosition(pos []int, ref, plain, idiom []float64, f compare.Format) ([]PositionCost, error) {
	if len(pos) == 0 || len(ref)%len(pos) != 0 {
		return nil, nil
	}
	w := len(ref) / len(pos)
	rows := map[int][]int{}
	for r, m := range pos {
		rows[m] = append(rows[m], r)
	}
	var out []PositionCost
	for _, m := range slices.Sorted(maps.Keys(rows)) {
		var r, p, q []float64
		for _, row := range rows[m] {
			r = append(r, ref[row*w:(row+1)*w]...)
			p = append(p, plain[row*w:(row+1)*w]...)
			q = append(q, idiom[row*w:(row+1)*w]...)
		}
		pc := PositionCost{Position: m}
		for _, e := range []struct {
			got []float64
			to  *Errors
		}{{p, &pc.Plain}, {q, &pc.Idiom}} {
			rep, err := compare.Diff(r, e.got, nil, compare.Options{Format: f})
			if err != nil {
				return nil, err
			}
			*e.to = Errors{MaxAbs: rep.MaxAbs, Normwise: rep.Normwise}
			if n := rep.NaNMismatches + rep.InfMismatches; n > 0 {
				*e.to = Errors{MaxAbs: math.Inf(1), Normwise: math.Inf(1)}
			}
		}
		out = append(out, pc)
	}
	return out, nil
}

// idiomOp is what op[C] knows of its idiom keys beyond the Op interface.
type idiomOp interface {
	// idioms returns "key = word" for every idiom key config sets to other
	// than its default, in the order of the keys; nil for none.
	idioms(config []byte) ([]string, error)
	// rowPositions returns the position of every row of every output, or
	// nil when the operation's rows have no positions.
	rowPositions(config []byte, in Tensors) ([]int, error)
}

// idiomsOf is o's idioms(config), nil for an Op of another kind.
func idiomsOf(o Op, config []byte) ([]string, error) {
	if io, ok := o.(idiomOp); ok {
		return io.idioms(config)
	}
	return nil, nil
}

func (o *op[C]) idioms(config []byte) ([]string, error) {
	c := new(C)
	if err := decodeConfig(o.name, config, c, o.keys); err != nil {
		return nil, err
	}
	return idiomWords(reflect.ValueOf(c).Elem()), nil
}

func (o *op[C]) rowPositions(config []byte, in Tensors) ([]int, error) {
	if o.rows == nil {
		return nil, nil
	}
	c := new(C)
	if err := decodeConfig(o.name, config, c, o.keys); err != nil {
		return nil, err
	}
	return o.rows(c, in)
}

// idiomWords lists "key = word" for the fields of the configuration struct
// v tagged idiom:"true" that hold other than their zero value, embedded
// structs included.
func idiomWords(v reflect.Value) []string {
	var out []string
	for i := range v.NumField() {
		f, fv := v.Type().Field(i), v.Field(i)
		if f.Anonymous {
			out = append(out, idiomWords(fv)...)
			continue
		}
		if f.Tag.Get("idiom") != "true" || fv.IsZero() {
			continue
		}
		// A copy of the value that can be asked for its word (fv itself may
		// be reached through an unexported embedded struct).
		w := reflect.New(f.Type).Elem()
		switch fv.Kind() {
		case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
			w.SetInt(fv.Int())
		case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
			w.SetUint(fv.Uint())
		default:
			panic("ops: idiom key " + f.Name + " is not a convention type")
		}
		out = append(out, fmt.Sprintf("%s = %v", strings.Split(f.Tag.Get("json"), ",")[0], w.Interface()))
	}
	return out
}

// withoutIdioms returns config with o's idiom keys left out: the
// configuration of the plain float32 run. The other keys are kept as they
// are written.
func withoutIdioms(o Op, config []byte) ([]byte, error) {
	if len(bytes.TrimSpace(config)) == 0 {
		return config, nil
	}
	var m map[string]json.RawMessage
	if err := json.Unmarshal(config, &m); err != nil {
		return nil, fmt.Errorf("%w: %s: configuration is not one JSON object (%v)", ErrConfig, o.Name(), err)
	}
	for _, k := range o.Keys() {
		if k.Idiom {
			delete(m, k.Name)
		}
	}
	return json.Marshal(m)
}

// idiomBasis is the Basis of a yardstick measured on an idiom's float32
// run: the yardstick's own, with the idiom named after its arithmetic.
func idiomBasis(basis, arithmetic string, keys []string) string {
	idiom := "the idiom " + strings.Join(keys, ", ")
	at := arithmetic + " arithmetic,"
	if strings.Contains(basis, at) {
		return strings.Replace(basis, at, arithmetic+" arithmetic with "+idiom+",", 1)
	}
	return basis + "; " + idiom
}
