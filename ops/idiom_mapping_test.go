package ops

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The key tests of the precision idioms (Key.Idiom): every word gives the
// reference of the default word, bit for bit (Run never changes), and
// Run32 is the float32 kernel called directly with the idiom the word
// means, each word's float32 run different from the others'.

// idiomValue is one word of an idiom key: the value as the configuration
// holds it (leftOut for none, which means def), the whole configuration,
// and the kernels called directly with that word's option.
func idiomValue(value, def, config string, in func(string) Tensors, want, want32 func(string, Tensors) (Tensors, error)) keyValue {
	kv := keyValue{value: value, config: config, in: in, want: want, want32: want32}
	if value != def {
		kv.same = def // the reference does not change
	}
	if value == leftOut {
		kv.same32 = def
	}
	return kv
}

// withKey is body with the key set to the word, or body alone for
// leftOut.
func withKey(body, key, word string) string {
	if word == leftOut {
		return cfg(body)
	}
	if body != "" {
		body += ","
	}
	return cfg(body + fmt.Sprintf("%q:%q", key, word))
}

func idiomKeyTests() []keyTest {
	var tests []keyTest

	// rotary: positions 1000 … 1004, where rounding θ to float32 moves
	// the angles by about 1000·θ·2⁻²⁴, far more than a float32 ulp of the
	// tables.
	angles := map[string]posenc.AngleArithmetic{leftOut: 0}
	for _, a := range posenc.AnglesFloat64.Values() {
		angles[a.String()] = a
	}
	order := []string{leftOut, "float64", "float32-frequencies", "float32-angles"}
	pos := posenc.Positions{Offset: 1000}
	for _, op := range []string{"rotary-apply", "rotary-tables"} {
		kt := keyTest{ops: []string{op}, key: "angles", why: "positions 1000 … 1004: a float32 frequency or angle moves the angles by far more than a float32 ulp of the tables"}
		for _, w := range order {
			r := posenc.Rotary{Dim: rotaryDim, Angles: angles[w]}
			if op == "rotary-apply" {
				in := func(string) Tensors { return Tensors{"x": randomTensor(11, 2, rotaryLength, rotaryDim)} }
				kt.values = append(kt.values, idiomValue(w, "float64", withKey(`"offset":1000`, "angles", w), in,
					func(_ string, in Tensors) (Tensors, error) {
						y, err := r.Apply(in["x"].Data, rotaryLength, pos)
						return Tensors{"y": {in["x"].Shape, y}}, err
					},
					func(_ string, in Tensors) (Tensors, error) {
						y, err := r.Apply32(in.f32("x"), rotaryLength, pos)
						return Tensors{"y": {in["x"].Shape, num.Convert[float64](y)}}, err
					}))
				continue
			}
			p := span(1000, rotaryLength)
			tables := func(cos, sin []float64, err error) (Tensors, error) {
				return Tensors{"cos": {[]int{rotaryLength, rotaryDim / 2}, cos}, "sin": {[]int{rotaryLength, rotaryDim / 2}, sin}}, err
			}
			kt.values = append(kt.values, idiomValue(w, "float64", withKey(`"dim":8,"length":5,"offset":1000`, "angles", w),
				func(string) Tensors { return nil },
				func(string, Tensors) (Tensors, error) { return tables(r.Tables(p)) },
				func(string, Tensors) (Tensors, error) {
					c, s, err := r.Tables32(p)
					return tables(num.Convert[float64](c), num.Convert[float64](s), err)
				}))
		}
		tests = append(tests, kt)
	}

	// layernorm: rows of mean 100 and spread 1, where Σx²/d − μ² cancels
	// about 4 of float32's 7 digits.
	normIn := func(op string) Tensors {
		in := normInputs(op)
		for i := range in["x"].Data {
			in["x"].Data[i] = 100 + in["x"].Data[i]
		}
		return in
	}
	for _, op := range []string{"layernorm-forward", "layernorm-backward"} {
		kt := keyTest{ops: []string{op}, key: "variance", why: "rows of mean 100 and spread 1: the one-pass variance loses digits the two-pass one keeps"}
		for _, w := range []string{leftOut, "two-pass", "one-pass"} {
			o := norm.Options{Epsilon: 1e-5}
			if w == "one-pass" {
				o.Variance = norm.VarianceOnePass
			}
			kt.values = append(kt.values, idiomValue(w, "two-pass", withKey(`"epsilon":1e-5`, "variance", w), normIn, normKernel(o),
				func(op string, in Tensors) (Tensors, error) {
					x, wt := in["x"], in.f32("weight")
					if op == "layernorm-forward" {
						y, err := norm.LayerNorm32(in.f32("x"), 8, wt, in.f32("bias"), o)
						return Tensors{"y": {x.Shape, num.Convert[float64](y)}}, err
					}
					g, err := norm.LayerNormBackward32(in.f32("x"), 8, wt, in.f32("dy"), o)
					return Tensors{"dx": {x.Shape, num.Convert[float64](g.X)}, "dweight": {[]int{8}, num.Convert[float64](g.Weight)},
						"dbias": {[]int{8}, num.Convert[float64](g.Bias)}}, err
				}))
		}
		tests = append(tests, kt)
	}

	// softmax, logsumexp and attention-forward: the accumulation format and
	// the shift.
	accumulations := map[string]attention.Accumulation{leftOut: 0}
	for _, a := range attention.AccumulateFloat32.Values() {
		accumulations[a.String()] = a
	}
	shifts := map[string]attention.SoftmaxShift{leftOut: 0}
	for _, s := range attention.ShiftMax.Values() {
		shifts[s.String()] = s
	}
	idiomKeys := []struct {
		key, def, why string
		words         []string
		idiom         func(w string) attention.Idiom
	}{
		{"accumulation", "float32", "sums of 7 exponentials (softmax) and of 4 products and 5 weighted values (attention) lose other bits in float32, bfloat16 and binary16",
			[]string{leftOut, "float32", "bfloat16", "binary16"}, func(w string) attention.Idiom { return attention.Idiom{Accumulation: accumulations[w]} }},
		{"softmax_shift", "max", "e^(x − max) and e^x round differently",
			[]string{leftOut, "max", "none"}, func(w string) attention.Idiom { return attention.Idiom{Shift: shifts[w]} }},
	}
	rowsIn := func(string) Tensors {
		x := randomTensor(31, 2, 3, 7)
		for i := range x.Data {
			x.Data[i] *= 4
		}
		return Tensors{"x": x}
	}
	for _, k := range idiomKeys {
		for _, op := range []string{"softmax", "logsumexp"} {
			kt := keyTest{ops: []string{op}, key: k.key, why: k.why}
			for _, w := range k.words {
				id := k.idiom(w)
				kt.values = append(kt.values, idiomValue(w, k.def, withKey("", k.key, w), rowsIn,
					func(op string, in Tensors) (Tensors, error) {
						if op == "softmax" {
							y, err := attention.Softmax(in["x"].Data, 7)
							return Tensors{"y": {in["x"].Shape, y}}, err
						}
						y, err := attention.LogSumExp(in["x"].Data, 7)
						return Tensors{"lse": {[]int{2, 3}, y}}, err
					},
					func(op string, in Tensors) (Tensors, error) {
						if op == "softmax" {
							y, err := id.Softmax32(in.f32("x"), 7)
							return Tensors{"y": {in["x"].Shape, num.Convert[float64](y)}}, err
						}
						y, err := id.LogSumExp32(in.f32("x"), 7)
						return Tensors{"lse": {[]int{2, 3}, num.Convert[float64](y)}}, err
					}))
			}
			tests = append(tests, kt)
		}
		kt := keyTest{ops: []string{"attention-forward"}, key: k.key, why: k.why}
		for _, w := range k.words {
			o := attention.Options{Idiom: k.idiom(w)}
			s := attnShape
			kt.values = append(kt.values, idiomValue(w, k.def, withKey("", k.key, w), attnInputs(s, attention.HeadsMajor, nil), attnKernel(s, o),
				func(_ string, in Tensors) (Tensors, error) {
					out, lse, err := attention.Forward32(in.f32("q"), in.f32("k"), in.f32("v"), s, o)
					return Tensors{"out": {[]int{s.Batch, s.HeadsQ, s.Lq, s.Dv}, num.Convert[float64](out)},
						"lse": {[]int{s.Batch, s.HeadsQ, s.Lq}, num.Convert[float64](lse)}}, err
				}))
		}
		tests = append(tests, kt)
	}

	// ffn-forward: the sums of 4 and 6 products.
	ffnAcc := map[string]ffn.Accumulation{leftOut: 0}
	for _, a := range ffn.AccumulateFloat32.Values() {
		ffnAcc[a.String()] = a
	}
	kt := keyTest{ops: []string{"ffn-forward"}, key: "accumulation", why: "sums of 4 and 6 products lose other bits in float32, bfloat16 and binary16"}
	for _, w := range []string{leftOut, "float32", "bfloat16", "binary16"} {
		o := ffn.Options{Layout: ffn.InByOut, Accumulation: ffnAcc[w]}
		kt.values = append(kt.values, idiomValue(w, "float32", withKey(`"activation":"relu","layout":"in-by-out"`, "accumulation", w),
			layerInputs(ffn.InByOut, false, false), ffnKernel(o),
			func(_ string, in Tensors) (Tensors, error) {
				d := ffn.Dims{Rows: ffnRows, In: ffnIn, Hidden: ffnHidden, Out: ffnOut}
				y, err := ffn.Forward32(in.f32("x"), d, ffn.Weights[float32]{W1: in.f32("w1"), B1: in.f32("b1"), W2: in.f32("w2"), B2: in.f32("b2")}, o)
				return Tensors{"y": {[]int{ffnRows, ffnOut}, num.Convert[float64](y)}}, err
			}))
	}
	return append(tests, kt)
}
