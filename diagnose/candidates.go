package diagnose

import (
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/ops"
)

// change is one difference from the configuration as given: a key set to
// another value, or the inputs or outputs read another way.
type change struct {
	text  string   // in the configuration's own words, with the note
	edit  Edit     // the same as data
	group string   // the key or mix-up it changes; pairs combine different groups
	same  []string // other descriptions of the same change (the other alignment)
	cfg   func(m map[string]any)
	in    func(in ops.Tensors) ops.Tensors
	out   func(out ops.Tensors) ops.Tensors
}

// generate lists the single changes of the operation's keys and inputs:
// the words of every word key but the precision idioms (Key.Idiom: they
// never change the reference; see idiomChanges), the common values of the
// numeric keys, the tensor mix-ups, and last the query offsets, nearest
// first. in is the problem the candidates run on, full the whole problem
// (whose query and key counts place the offsets).
func generate(o ops.Op, cfg map[string]any, in, full ops.Tensors) [][]change {
	var words, numbers, offsets [][]change
	for _, k := range o.Keys() {
		if list, field, ok := strings.Cut(k.Name, "[]."); ok {
			words = append(words, listChanges(k, list, field, cfg)...)
			continue
		}
		path := strings.Split(k.Name, ".")
		if len(path) > 1 {
			if _, ok := getPath(cfg, path[:len(path)-1]); !ok {
				continue // the object that holds the key is absent
			}
		}
		cur, present := getPath(cfg, path)
		switch k.Type {
		case "word":
			if k.Idiom {
				continue // a precision idiom changes the yardstick, not the reference: see idiomChanges
			}
			curWord := ""
			if present {
				curWord, _ = cur.(string)
			} else if len(k.Words) > 0 {
				curWord = k.Words[0].Text
			}
			for _, w := range k.Words {
				if w.Text != curWord {
					c := set(k.Name, path, w.Text, "")
					c.in = reshape(k.Convention)
					words = append(words, one(c))
				}
			}
		case "bool":
			b, _ := cur.(bool)
			words = append(words, one(set(k.Name, path, !b, "")))
		case "int", "number":
			if path[len(path)-1] == "offset" && isGeometry(o.Name()) {
				offsets = append(offsets, offsetChanges(o.Name(), cfg, full)...)
				continue
			}
			numbers = append(numbers, numericChanges(k, path, cur, present, cfg, in)...)
		}
	}
	return append(append(append(words, numbers...), mixups(o, cfg, in)...), offsets...)
}

func one(c change) []change { return []change{c} }

// set is the change of the key at path to v, described as `"name": v`
// with an optional note in parentheses.
func set(name string, path []string, v any, note string) change {
	b, _ := json.Marshal(v)
	text := fmt.Sprintf("%q: %s", name, b)
	if note != "" {
		text += " (" + note + ")"
	}
	return change{text: text, edit: Edit{Key: name, Value: b, Note: note}, group: name, cfg: func(m map[string]any) { setPath(m, path, v) }}
}

// getPath returns the value at path in a decoded configuration.
func getPath(m map[string]any, path []string) (any, bool) {
	var v any = m
	for _, p := range path {
		o, ok := v.(map[string]any)
		if !ok {
			return nil, false
		}
		if v, ok = o[p]; !ok {
			return nil, false
		}
	}
	return v, true
}

// setPath sets the value at path, making the objects on the way.
func setPath(m map[string]any, path []string, v any) {
	for _, p := range path[:len(path)-1] {
		o, ok := m[p].(map[string]any)
		if !ok {
			o = map[string]any{}
			m[p] = o
		}
		m = o
	}
	m[path[len(path)-1]] = v
}

// number reads a decoded JSON number.
func number(v any) (float64, bool) {
	switch x := v.(type) {
	case json.Number:
		f, err := x.Float64()
		return f, err == nil
	case float64:
		return x, true
	case int:
		return float64(x), true
	}
	return 0, false
}

// current is the value of a numeric key: its value, or its documented
// default when that is a number.
func current(k ops.Key, cur any, present bool) (float64, bool) {
	if present {
		return number(cur)
	}
	f, err := strconv.ParseFloat(strings.Fields(k.Default + " x")[0], 64)
	return f, err == nil
}

// reshape returns, for a storage convention, how the inputs' shapes read
// under the other word: the same data described with the other axes (a
// heads-major [b, h, l, d] tensor read seq-major is a [b, l, h, d] one; an
// in-by-out [in, out] matrix read out-by-in is an [out, in] one). Other
// conventions keep the shapes: nil.
func reshape(convention string) func(ops.Tensors) ops.Tensors {
	var swap func(n string, s []int) []int
	switch convention {
	case "attention.Layout":
		swap = func(n string, s []int) []int {
			if n == "bias" || len(s) < 3 {
				return s
			}
			t := append([]int(nil), s...)
			t[1], t[2] = t[2], t[1]
			return t
		}
	case "ffn.Layout":
		swap = func(n string, s []int) []int {
			if len(s) != 2 || n == "x" || n == "dy" {
				return s
			}
			return []int{s[1], s[0]}
		}
	default:
		return nil
	}
	return func(in ops.Tensors) ops.Tensors {
		m := copyTensors(in)
		for n, t := range m {
			m[n] = ops.Tensor{Shape: swap(n, t.Shape), Data: t.Data}
		}
		return m
	}
}

// listChanges are the changes of field in every object of the list key
// (the masks): its other words, and an integer field ±1 and ±2.
func listChanges(k ops.Key, list, field string, cfg map[string]any) [][]change {
	l, _ := cfg[list].([]any)
	var out [][]change
	for i, e := range l {
		obj, ok := e.(map[string]any)
		if !ok {
			continue
		}
		name := fmt.Sprintf("%s[%d].%s", list, i, field)
		at := func(v any) change {
			b, _ := json.Marshal(v)
			return change{text: fmt.Sprintf("%q: %s", name, b), edit: Edit{Key: name, Value: b}, group: name, cfg: func(m map[string]any) {
				m[list].([]any)[i].(map[string]any)[field] = v
			}}
		}
		cur, present := obj[field]
		if field == "kind" && cur == "causal" {
			// A causal edge one or two keys late: the band with no limit
			// before and that many keys after the query.
			for _, after := range []int{1, 2} {
				band := map[string]any{"kind": "band", "before": -1, "after": after}
				b, _ := json.Marshal(band)
				at := fmt.Sprintf("%s[%d]", list, i)
				out = append(out, one(change{text: fmt.Sprintf("%q: %s", at, b), edit: Edit{Key: at, Value: b}, group: at, cfg: func(m map[string]any) {
					m[list].([]any)[i] = band
				}}))
			}
		}
		switch k.Type {
		case "word":
			if !present && field != "kind" {
				continue
			}
			for _, w := range k.Words {
				if s, _ := cur.(string); w.Text != s {
					out = append(out, one(at(w.Text)))
				}
			}
		case "int":
			v, ok := number(cur)
			if !present || !ok {
				continue
			}
			for _, d := range []float64{-1, 1, -2, 2} {
				out = append(out, one(at(int(v+d))))
			}
		}
	}
	return out
}

// isGeometry reports whether the operation places queries among keys by
// "align" and "offset".
func isGeometry(op string) bool {
	return strings.HasPrefix(op, "attention-") || op == "alibi-bias"
}

// Common values of numeric keys [common practice]: logit scales 1/√d
// (Vaswani et al. 2017, arXiv 1706.03762 §3.2.1), 1/d and 1; epsilon in
// decades; rotary and sinusoidal bases.
var (
	epsilons = []float64{1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10, 1e-11, 1e-12}
	bases    = []float64{10000, 100000, 500000, 1000000, 5000000, 10000000}
)

// numericChanges are the common alternatives of a numeric key.
func numericChanges(k ops.Key, path []string, cur any, present bool, cfg map[string]any, in ops.Tensors) [][]change {
	v, ok := current(k, cur, present)
	leaf := path[len(path)-1]
	var out [][]change
	add := func(x float64, note string) {
		if ok && sameValue(x, v) {
			return
		}
		var val any = x
		if k.Type == "int" {
			val = int(x)
		}
		out = append(out, one(set(k.Name, path, val, note)))
	}
	switch {
	case leaf == "scale":
		d := lastDim(in, "q")
		if d == 0 {
			return nil
		}
		if !present || v == 0 {
			v, ok = 1/math.Sqrt(float64(d)), true
		}
		add(1/math.Sqrt(float64(d)), "1/√d")
		add(1/float64(d), "1/d")
		add(1, "")
	case leaf == "epsilon":
		for _, e := range epsilons {
			add(e, "")
		}
	case leaf == "base":
		for _, b := range bases {
			add(b, "")
		}
	case leaf == "factor" && len(path) == 2 && present && ok && v > 0:
		add(1/v, "1/s")
		add(v*v, "s²")
		add(math.Sqrt(v), "√s")
		parent := path[0]
		out = append(out, one(change{text: fmt.Sprintf("no %q", parent), edit: Edit{Key: parent, Remove: true}, group: k.Name,
			cfg: func(m map[string]any) { delete(m, parent) }}))
	case leaf == "rotated":
		d := lastDim(in, "x")
		if dim, has := number(cfg["dim"]); has {
			d = int(dim)
		}
		if !present || v == 0 {
			v, ok = float64(d), true
		}
		for r := 2; r <= d; r += 2 {
			if d <= 32 || r == d/2 || r == d/4 || r == d/8 || r == d || math.Abs(float64(r)-v) <= 2 {
				add(float64(r), "")
			}
		}
	case leaf == "offset":
		if ok {
			for _, d := range []float64{-1, 1, -2, 2} {
				add(v+d, "")
			}
		}
	case leaf == "magnitude":
		add(1, "")
	case leaf == "soft_cap":
		if ok && v != 0 {
			add(0, "none")
		}
	case leaf == "beta":
		// Swish's β: 1 (SiLU) and 1.702, the sigmoid form of GELU
		// (Hendrycks & Gimpel 2016, arXiv 1606.08415 §2).
		add(1, "")
		add(1.702, "")
	}
	return out
}

// sameValue reports whether two key values are equal to the printed
// digits of a configuration.
func sameValue(a, b float64) bool {
	return a == b || math.Abs(a-b) <= 1e-12*math.Max(math.Abs(a), math.Abs(b))
}

// lastDim is the last dimension of input n, or 0.
func lastDim(in ops.Tensors, n string) int {
	t, ok := in[n]
	if !ok || len(t.Shape) == 0 {
		return 0
	}
	return t.Shape[len(t.Shape)-1]
}

// geometry returns the query and key counts and whether the configuration
// is heads-major, for the operations that place queries among keys; ok is
// false when the offset cannot matter (no mask and no ALiBi slopes).
func geometry(op string, cfg map[string]any, in ops.Tensors) (lq, lk int, ok bool) {
	if op == "alibi-bias" {
		q, _ := number(cfg["queries"])
		k, _ := number(cfg["keys"])
		return int(q), int(k), true
	}
	q, k := in["q"].Shape, in["k"].Shape
	if len(q) != 4 || len(k) != 4 {
		return 0, 0, false
	}
	ax := 2
	if l, _ := cfg["layout"].(string); l == "seq-major" {
		ax = 1
	}
	masks, _ := cfg["mask"].([]any)
	_, slopes := in["slopes"]
	return q[ax], k[ax], len(masks) > 0 || slopes
}

// offsetChanges are every query offset that places the first query
// between −Lq and Lk − 1, nearest the given position first, each described
// under the given alignment and, as the same change, under the other.
func offsetChanges(op string, cfg map[string]any, in ops.Tensors) [][]change {
	lq, lk, ok := geometry(op, cfg, in)
	if !ok {
		return nil
	}
	align, _ := cfg["align"].(string)
	if align == "" {
		align = "end"
	}
	off := 0.0
	if v, has := number(cfg["offset"]); has {
		off = v
	}
	start := func(a string) int { // position of query 0 at offset 0
		if a == "end" {
			return lk - lq
		}
		return 0
	}
	other := map[string]string{"end": "start", "start": "end"}[align]
	p := start(align) + int(off)
	var ps []int
	for q := -lq; q < lk; q++ {
		if q != p {
			ps = append(ps, q)
		}
	}
	sort.SliceStable(ps, func(i, j int) bool { return abs(ps[i]-p) < abs(ps[j]-p) })
	var out [][]change
	for _, q := range ps {
		o := q - start(align)
		c := set("offset", []string{"offset"}, o, "")
		c.group = "offset"
		if other != "" {
			c.same = []string{fmt.Sprintf("%q: %q; %q: %d", "align", other, "offset", q-start(other))}
		}
		out = append(out, one(c))
	}
	return out
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// mixups are the tensor mix-ups the operation's inputs allow.
func mixups(o ops.Op, cfg map[string]any, in ops.Tensors) [][]change {
	var out [][]change
	exchange := func(t ops.Tensors, pairs [][2]string) ops.Tensors {
		m := copyTensors(t)
		for _, p := range pairs {
			x, okX := m[p[0]]
			y, okY := m[p[1]]
			if okX && okY && sameInts(x.Shape, y.Shape) {
				m[p[0]], m[p[1]] = y, x
			}
		}
		return m
	}
	// swap exchanges two inputs; when grads names their gradients, a
	// second candidate also writes each gradient under the other name
	// (the port swapped its reads and wrote back by the tensors it was
	// given).
	swap := func(a, b, text string, also [][2]string, grads [][2]string) {
		ta, okA := in[a]
		tb, okB := in[b]
		if !okA || !okB || !sameInts(ta.Shape, tb.Shape) {
			return
		}
		pairs := append([][2]string{{a, b}}, also...)
		swapIn := func(in ops.Tensors) ops.Tensors { return exchange(in, pairs) }
		out = append(out, one(change{text: text, group: text, in: swapIn}))
		if hasOutputs(o, grads) {
			out = append(out, one(change{text: text + ", gradients written back swapped", group: text, in: swapIn,
				out: func(t ops.Tensors) ops.Tensors { return exchange(t, grads) }}))
		}
	}
	swap("k", "v", "k and v swapped", nil, [][2]string{{"dk", "dv"}})
	swap("w1", "v", "w1 and v swapped (gate and value projections)", [][2]string{{"b1", "c"}}, [][2]string{{"dw1", "dv"}, {"db1", "dc"}})
	swap("weight", "bias", "weight and bias swapped", nil, [][2]string{{"dweight", "dbias"}})
	swap("x", "dy", "x and dy swapped", nil, nil)

	// A weight matrix read in the other storage order.
	for _, n := range []string{"w1", "v", "w2", "fused"} {
		if t, ok := in[n]; ok && len(t.Shape) == 2 {
			out = append(out, one(change{text: n + " read transposed", group: n + " read transposed", in: func(in ops.Tensors) ops.Tensors {
				m := copyTensors(in)
				t := m[n]
				r, c := t.Shape[0], t.Shape[1]
				m[n] = ops.Tensor{Shape: t.Shape, Data: transpose(t.Data, c, r)}
				return m
			}}))
		}
	}

	// An attention tensor read, or an output written, in the other layout.
	if strings.HasPrefix(o.Name(), "attention-") {
		seq := false
		if l, _ := cfg["layout"].(string); l == "seq-major" {
			seq = true
		}
		otherWord := map[bool]string{false: "seq-major", true: "heads-major"}[seq]
		for _, n := range []string{"q", "k", "v", "dout"} {
			if t, ok := in[n]; ok && len(t.Shape) == 4 && t.Shape[1] != 1 && t.Shape[2] != 1 {
				out = append(out, one(change{text: n + " read " + otherWord, group: n + " read " + otherWord, in: func(in ops.Tensors) ops.Tensors {
					m := copyTensors(in)
					t := m[n]
					m[n] = ops.Tensor{Shape: t.Shape, Data: swapAxes12(t.Data, t.Shape, true)}
					return m
				}}))
			}
		}
		for _, p := range o.Outputs() {
			n := p.Name
			if n == "dsinks" || n == "dbias" {
				continue
			}
			out = append(out, one(change{text: n + " written " + otherWord, group: n + " written " + otherWord, out: func(out ops.Tensors) ops.Tensors {
				t, ok := out[n]
				if !ok || len(t.Shape) < 3 || t.Shape[1] == 1 || t.Shape[2] == 1 {
					return out
				}
				m := copyTensors(out)
				m[n] = ops.Tensor{Shape: t.Shape, Data: swapAxes12(t.Data, t.Shape, false)}
				return m
			}}))
		}
	}

	// ALiBi slopes in the reverse head order.
	if t, ok := in["slopes"]; ok && len(t.Data) > 1 {
		out = append(out, one(change{text: "slopes in reverse head order", group: "slopes reversed", in: func(in ops.Tensors) ops.Tensors {
			m := copyTensors(in)
			d := append([]float64(nil), m["slopes"].Data...)
			for i, j := 0, len(d)-1; i < j; i, j = i+1, j-1 {
				d[i], d[j] = d[j], d[i]
			}
			m["slopes"] = ops.Tensor{Shape: m["slopes"].Shape, Data: d}
			return m
		}}))
	}

	// A row-wise operation over the other axis of a matrix, or over rows
	// of the other length.
	if o.Name() == "softmax" || o.Name() == "logsumexp" {
		t, ok := in["x"]
		square := ok && len(t.Shape) >= 2 && t.Shape[len(t.Shape)-1] == t.Shape[len(t.Shape)-2]
		if ok && len(t.Shape) >= 2 && (o.Name() == "softmax" || square) {
			s := t.Shape
			m, n := s[len(s)-2], s[len(s)-1]
			out = append(out, one(change{text: "x reduced over its second-to-last axis", group: "x axis",
				in: func(in ops.Tensors) ops.Tensors {
					c := copyTensors(in)
					x := c["x"]
					c["x"] = ops.Tensor{Shape: withLast2(x.Shape, n, m), Data: transposeBatched(x.Data, m, n)}
					return c
				},
				out: func(out ops.Tensors) ops.Tensors {
					c := copyTensors(out)
					if y, ok := c["y"]; ok {
						c["y"] = ops.Tensor{Shape: withLast2(y.Shape, m, n), Data: transposeBatched(y.Data, n, m)}
					}
					return c
				}}))
			if o.Name() == "softmax" && m != n {
				out = append(out, one(change{text: fmt.Sprintf("x read in rows of %d (the second-to-last size) instead of %d", m, n), group: "x rows",
					in: func(in ops.Tensors) ops.Tensors {
						c := copyTensors(in)
						x := c["x"]
						c["x"] = ops.Tensor{Shape: withLast2(x.Shape, n, m), Data: x.Data}
						return c
					},
					out: func(out ops.Tensors) ops.Tensors {
						c := copyTensors(out)
						if y, ok := c["y"]; ok {
							c["y"] = ops.Tensor{Shape: withLast2(y.Shape, m, n), Data: y.Data}
						}
						return c
					}}))
			}
		}
	}
	return out
}

// hasOutputs reports whether the operation has the first output of the
// first pair.
func hasOutputs(o ops.Op, pairs [][2]string) bool {
	for _, p := range o.Outputs() {
		if len(pairs) > 0 && p.Name == pairs[0][0] {
			return true
		}
	}
	return false
}

func sameInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func copyTensors(in ops.Tensors) ops.Tensors {
	m := make(ops.Tensors, len(in))
	for k, v := range in {
		m[k] = v
	}
	return m
}

// transpose returns the r×c row-major matrix x as its c×r transpose.
func transpose(x []float64, r, c int) []float64 {
	y := make([]float64, len(x))
	for i := range r {
		for j := range c {
			y[j*r+i] = x[i*c+j]
		}
	}
	return y
}

// transposeBatched transposes every r×c matrix of the last two axes.
func transposeBatched(x []float64, r, c int) []float64 {
	y := make([]float64, len(x))
	for b := 0; b+r*c <= len(x); b += r * c {
		copy(y[b:b+r*c], transpose(x[b:b+r*c], r, c))
	}
	return y
}

func withLast2(s []int, a, b int) []int {
	t := append([]int(nil), s...)
	t[len(t)-2], t[len(t)-1] = a, b
	return t
}

// swapAxes12 reads a tensor of shape [A, B, C, …] laid out as [A, C, B, …]
// (read = true: the element the shape's index (a, b, c) names is taken from
// where the other layout keeps it) or writes it so (read = false).
func swapAxes12(x []float64, shape []int, read bool) []float64 {
	a, b, c := shape[0], shape[1], shape[2]
	inner := 1
	for _, d := range shape[3:] {
		inner *= d
	}
	y := make([]float64, len(x))
	for i := range a {
		for j := range b {
			for k := range c {
				mine := ((i*b+j)*c + k) * inner
				theirs := ((i*c+k)*b + j) * inner
				if read {
					copy(y[mine:mine+inner], x[theirs:theirs+inner])
				} else {
					copy(y[theirs:theirs+inner], x[mine:mine+inner])
				}
			}
		}
	}
	return y
}
