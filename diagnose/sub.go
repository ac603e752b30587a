package diagnose

import (
	"encoding/json"
	"fmt"
	"slices"
	"sort"
	"strings"

	"github.com/plumbref/plumb/ops"
)

// subProblem is the part of a problem the candidates run on.
type subProblem struct {
	in, got ops.Tensors
	note    string   // what was kept; empty: the whole problem
	cuts    []string // the axes cut: "batch", "heads", "queries", "rows", "leading axis", "positions"
	// config, when not nil, turns a configuration of the whole problem
	// into that of the sub-problem (the same query positions, the same
	// rotary positions).
	config func([]byte) ([]byte, error)
}

// whole is the problem uncut.
func whole(in, got ops.Tensors) subProblem { return subProblem{in: in, got: got} }

// run returns the configuration the sub-problem runs a configuration of
// the whole problem under.
func (s subProblem) run(cfg []byte) ([]byte, error) {
	if s.config == nil {
		return cfg, nil
	}
	return s.config(cfg)
}

var rowOps = []string{"activation", "activation-grad", "softmax", "logsumexp", "layernorm-forward", "rmsnorm-forward",
	"ffn-forward", "layernorm-backward", "rmsnorm-backward", "ffn-backward"}

// Outputs of the row-wise operations that sum over the rows.
var rowSums = []string{"dweight", "dbias", "dw1", "db1", "dv", "dc", "dfused", "dfused_bias", "dw2", "db2"}

// cut returns the sub-problem the candidates run on: the whole problem
// when its inputs hold at most maxElements values, else a part that fits
// where the operation's outputs allow one: attention is cut to its first
// batch entries, then to query heads with the kv heads they read, then to
// its first queries with the keys they see; the row-wise operations to
// their first rows; rotary-apply to the first entries of its leading
// axes (heads last), then to positions spread over its length.
func cut(op string, cfg map[string]any, in, got ops.Tensors, maxElements int) subProblem {
	total := elements(in)
	if total <= maxElements {
		return whole(in, got)
	}
	switch {
	case strings.HasPrefix(op, "attention-"):
		return attentionCut(cfg, in, got, total, maxElements)
	case op == "rotary-apply":
		return rotaryCut(cfg, in, got, total, maxElements)
	case contains(rowOps, op):
		x := in["x"].Shape
		if len(x) == 0 || len(x) < 2 && !strings.HasPrefix(op, "activation") {
			return whole(in, got) // a single row
		}
		return rowCut(in, got, total, maxElements)
	}
	return whole(in, got)
}

func elements(in ops.Tensors) int {
	n := 0
	for _, t := range in {
		n += len(t.Data)
	}
	return n
}

// minPositions is the fewest positions a rotary cut keeps, however long
// the rows: enough, spread over the length, for an error that grows with
// the position (a base or an angle idiom) to show as it does on the whole.
const minPositions = 16

// rotaryCut cuts rotary-apply, whose rows of x [..., length, dim] are
// independent given their positions: to the first entries of its leading
// axes that fit (whole entries of the first axis, else entry 0 of it and
// the first entries of the next, the heads last), and when one sequence
// (length × dim values) is still too large, to positions spread evenly
// over the length, the first and the last included (at least
// minPositions). The
// rows kept sit at their positions in the whole problem: the
// configuration gives them explicitly ("positions", one per token kept,
// or one per row kept when the whole problem has one per row).
func rotaryCut(cfg map[string]any, in, got ops.Tensors, total, maxElements int) subProblem {
	x := in["x"]
	s := x.Shape
	if len(s) < 2 {
		return whole(in, got)
	}
	L, D := s[len(s)-2], s[len(s)-1]
	if L < 1 || D < 1 || len(x.Data)%(L*D) != 0 {
		return whole(in, got)
	}
	lead := s[:len(s)-2]
	seqs := len(x.Data) / (L * D) // sequences of L rows
	fixed := total - len(x.Data)
	budget := max(maxElements-fixed, 1)

	// The leading axes: kept[a] entries of axis a, the axes before it at
	// entry 0 and those after it whole.
	kept := slices.Clone(lead)
	keep := seqs
	for a := range lead {
		inner := 1
		for _, d := range lead[a+1:] {
			inner *= d
		}
		if keep*L*D <= budget {
			break
		}
		for i := range a {
			kept[i] = 1
		}
		k := max(1, budget/(inner*L*D))
		kept[a] = min(k, lead[a])
		keep = kept[a] * inner
	}
	var tokens []int // the tokens of the length axis kept; nil: all
	if keep*L*D > budget {
		if p := max(minPositions, budget/(keep*D)); p < L {
			tokens = make([]int, p)
			for i := range tokens {
				tokens[i] = i * (L - 1) / (p - 1)
			}
		}
	}
	if keep == seqs && tokens == nil {
		return whole(in, got)
	}
	pos, _ := cfg["positions"].([]any)
	perRow := len(pos) == seqs*L && seqs > 1
	sub := subProblem{in: copyTensors(in), got: ops.Tensors{}}
	shape := append(append([]int(nil), kept...), L, D)
	if tokens != nil {
		shape[len(shape)-2] = len(tokens)
	}
	sub.in["x"] = ops.Tensor{Shape: shape, Data: keepRows(x.Data, keep, L, D, tokens)}
	for k, t := range got {
		if len(t.Data) == len(x.Data) {
			sub.got[k] = ops.Tensor{Data: keepRows(t.Data, keep, L, D, tokens)}
		}
	}
	var parts []string
	for a, d := range lead {
		if kept[a] == d {
			continue
		}
		one, many, what, cut := "entry 0", "entries", " of the leading axis", "leading axis"
		switch {
		case a == len(lead)-1 && a > 0:
			one, many, what, cut = "head 0", "heads", "", "heads"
		case a > 0:
			what = fmt.Sprintf(" of leading axis %d", a)
		}
		sub.cuts = appendNew(sub.cuts, cut)
		if kept[a] == 1 {
			parts = append(parts, fmt.Sprintf("%s of %d%s", one, d, what))
		} else {
			parts = append(parts, fmt.Sprintf("%s 0–%d of %d%s", many, kept[a]-1, d, what))
		}
	}
	if tokens != nil {
		sub.cuts = append(sub.cuts, "positions")
		parts = append(parts, fmt.Sprintf("%d of %d tokens spread over the length (%s), at their positions in the whole problem", len(tokens), L, spread(tokens)))
	}
	if tokens != nil || perRow {
		sub.config = func(b []byte) ([]byte, error) { return rotaryPositions(b, seqs, keep, L, tokens) }
	}
	sub.note = fmt.Sprintf("%s (%d of %d input values)", strings.Join(parts, "; "), elements(sub.in), total)
	return sub
}

// keepRows returns the rows of data ([seqs, L, D] row-major) of the first
// keep sequences at the tokens listed (nil: all of them).
func keepRows(data []float64, keep, L, D int, tokens []int) []float64 {
	if tokens == nil {
		return data[:keep*L*D]
	}
	out := make([]float64, 0, keep*len(tokens)*D)
	for q := range keep {
		for _, l := range tokens {
			o := (q*L + l) * D
			out = append(out, data[o:o+D]...)
		}
	}
	return out
}

// rotaryPositions rewrites the configuration of a rotary-apply problem of
// seqs sequences of L tokens for its first keep sequences at the tokens
// listed (nil: all): the same positions, given explicitly, one per token
// kept, or one per row kept when the configuration gives one per row.
// A configuration whose positions the whole problem refuses is an error.
func rotaryPositions(b []byte, seqs, keep, L int, tokens []int) ([]byte, error) {
	var m map[string]any
	if err := decode(b, &m); err != nil {
		return nil, err
	}
	if tokens == nil {
		tokens = upTo(L)
	}
	off := 0
	if v, ok := m["offset"]; ok {
		f, ok := number(v)
		if !ok || f != float64(int(f)) {
			return nil, fmt.Errorf("offset = %v; want an integer", v)
		}
		off = int(f)
	}
	var list []int
	if v, ok := m["positions"]; ok && v != nil {
		l, ok := v.([]any)
		if !ok {
			return nil, fmt.Errorf("positions = %v; want a list", v)
		}
		if off != 0 {
			return b, nil // the operation refuses an offset with positions, here as on the whole problem
		}
		list = make([]int, 0, len(l))
		for _, e := range l {
			f, ok := number(e)
			if !ok || f != float64(int(f)) {
				return nil, fmt.Errorf("positions holds %v; want integers", e)
			}
			list = append(list, int(f))
		}
		if len(list) != L && len(list) != seqs*L {
			return nil, fmt.Errorf("%d positions for %d sequences of %d tokens", len(list), seqs, L)
		}
	}
	var pos []int
	switch {
	case list == nil:
		for _, l := range tokens {
			pos = append(pos, off+l)
		}
	case len(list) == L:
		for _, l := range tokens {
			pos = append(pos, list[l])
		}
	default: // one per row
		for q := range keep {
			for _, l := range tokens {
				pos = append(pos, list[q*L+l])
			}
		}
	}
	delete(m, "offset")
	m["positions"] = pos
	return json.Marshal(m)
}

// spread is "0, 8, 16, …, 2047" for tokens spread evenly, all of them
// when there are at most 4.
func spread(tokens []int) string {
	if len(tokens) <= 4 {
		return intList(tokens)
	}
	return fmt.Sprintf("%d, %d, %d, …, %d", tokens[0], tokens[1], tokens[2], tokens[len(tokens)-1])
}

// appendNew appends s to list unless it is there.
func appendNew(list []string, s string) []string {
	if slices.Contains(list, s) {
		return list
	}
	return append(list, s)
}

// rowCut keeps the first rows of x and dy (every axis but the last
// counts rows) that fit; the outputs that sum over the rows are left out.
func rowCut(in, got ops.Tensors, total, maxElements int) subProblem {
	x := in["x"].Shape
	width := 1
	if len(x) > 1 {
		width = x[len(x)-1]
	}
	rows := len(in["x"].Data) / max(width, 1)
	cutPart := 0
	for _, k := range []string{"x", "dy"} {
		cutPart += len(in[k].Data)
	}
	fixed := total - cutPart
	r := 1
	if maxElements > fixed && cutPart > 0 {
		r = max(1, rows*(maxElements-fixed)/cutPart)
	}
	if r >= rows || rows == 0 {
		return whole(in, got)
	}
	// The rows kept, in the shape of x: whole entries of the leading axis
	// when they are, else [1, …, 1, r, width].
	shape := make([]int, len(x))
	inner := rows / max(x[0], 1)
	switch {
	case len(x) == 1:
		shape[0] = r
	case r%inner == 0:
		copy(shape, x)
		shape[0] = r / inner
	default:
		for i := range shape {
			shape[i] = 1
		}
		shape[len(x)-2], shape[len(x)-1] = r, width
	}
	sub := subProblem{in: copyTensors(in), got: ops.Tensors{}, cuts: []string{"rows"}}
	for _, k := range []string{"x", "dy"} {
		if t, ok := in[k]; ok && len(t.Data) == len(in["x"].Data) {
			sub.in[k] = ops.Tensor{Shape: shape, Data: t.Data[:r*width]}
		}
	}
	var dropped []string
	for k, t := range got {
		if contains(rowSums, k) {
			dropped = append(dropped, k)
			continue
		}
		sub.got[k] = ops.Tensor{Data: t.Data[:len(t.Data)/rows*r]}
	}
	if len(sub.got) == 0 {
		return whole(in, got)
	}
	sub.note = fmt.Sprintf("rows 0–%d of %d (%d of %d input values)", r-1, rows, elements(sub.in), total)
	sub.note += droppedNote(dropped, "sum over the rows")
	return sub
}

func droppedNote(dropped []string, why string) string {
	if len(dropped) == 0 {
		return ""
	}
	sort.Strings(dropped)
	return fmt.Sprintf("; outputs %s, which %s, not compared", strings.Join(dropped, ", "), why)
}

// attnCut is what an attention cut keeps: the first nb batch entries, the
// query heads qh with the kv heads kvh, the first nq queries and the first
// nk keys.
type attnCut struct {
	nb, nq, nk int
	qh, kvh    []int
}

// attnGeom is the geometry of an attention problem.
type attnGeom struct {
	seq                  bool // seq-major
	b, h, hkv, lq, lk, d int
	dv                   int
	biasB, biasH         int // 0: no bias
}

func attnGeometry(cfg map[string]any, in ops.Tensors) (attnGeom, bool) {
	q, k, v := in["q"].Shape, in["k"].Shape, in["v"].Shape
	if len(q) != 4 || len(k) != 4 || len(v) != 4 {
		return attnGeom{}, false
	}
	g := attnGeom{}
	hd, ld := 1, 2
	if l, _ := cfg["layout"].(string); l == "seq-major" {
		g.seq, hd, ld = true, 2, 1
	}
	g.b, g.h, g.hkv, g.lq, g.lk, g.d, g.dv = q[0], q[hd], k[hd], q[ld], k[ld], q[3], v[3]
	if b, ok := in["bias"]; ok {
		if len(b.Shape) != 4 {
			return g, false
		}
		g.biasB, g.biasH = b.Shape[0], b.Shape[1]
	}
	if g.b < 1 || g.h < 1 || g.hkv < 1 || g.h%g.hkv != 0 || g.lq < 1 || g.lk < 1 {
		return g, false
	}
	return g, true
}

// elements is the number of input values the cut keeps.
func (g attnGeom) elements(c attnCut, in ops.Tensors) int {
	h, hkv := len(c.qh), len(c.kvh)
	n := c.nb * h * c.nq * g.d    // q
	n += c.nb * hkv * c.nk * g.d  // k
	n += c.nb * hkv * c.nk * g.dv // v
	if _, ok := in["dout"]; ok {
		n += c.nb * h * c.nq * g.dv
	}
	if _, ok := in["dlse"]; ok {
		n += c.nb * h * c.nq
	}
	if g.biasB > 0 {
		bb, bh := 1, 1
		if g.biasB > 1 {
			bb = c.nb
		}
		if g.biasH > 1 {
			bh = h
		}
		n += bb * bh * c.nq * c.nk
	}
	for _, k := range []string{"slopes", "sinks"} {
		if _, ok := in[k]; ok {
			n += h
		}
	}
	return n
}

// attentionCut cuts an attention problem to its first batch entries, then
// (when that is not enough) to query heads with the kv heads they read,
// then to its first queries with the keys they see.
func attentionCut(cfg map[string]any, in, got ops.Tensors, total, maxElements int) subProblem {
	masks, _ := cfg["mask"].([]any)
	for _, m := range masks {
		if o, ok := m.(map[string]any); ok {
			if _, ok := o["valid"]; ok {
				return whole(in, got) // the key-padding lengths are per batch entry
			}
		}
	}
	g, ok := attnGeometry(cfg, in)
	if !ok {
		return whole(in, got)
	}
	c := attnCut{nb: g.b, nq: g.lq, nk: g.lk, qh: upTo(g.h), kvh: upTo(g.hkv)}
	var cuts []string
	if g.b > 1 {
		c.nb = max(1, g.b*maxElements/total)
		if c.nb < g.b {
			cuts = append(cuts, "batch")
		}
	}
	_, slopes := in["slopes"]
	if g.elements(c, in) > maxElements && !slopes {
		// With ALiBi slopes the heads stay: their order is a mix-up tested.
		if qh, kvh, ok := headCut(g.h, g.hkv); ok {
			c.qh, c.kvh = qh, kvh
			cuts = append(cuts, "heads")
		}
	}
	const minQueries = 8
	queries := false
	if g.elements(c, in) > maxElements && g.lq > minQueries {
		if last, ok := lastKeySeen(cfg, g); ok {
			nq := g.lq - 1
			for ; nq > minQueries; nq-- {
				if g.elements(attnCut{nb: c.nb, nq: nq, nk: keysFor(last, nq, g.lk), qh: c.qh, kvh: c.kvh}, in) <= maxElements {
					break
				}
			}
			c.nq, c.nk = nq, keysFor(last, nq, g.lk)
			cuts, queries = append(cuts, "queries"), true
		}
	}
	if len(cuts) == 0 {
		return whole(in, got)
	}
	sub := subProblem{in: copyTensors(in), got: ops.Tensors{}, cuts: cuts}
	qSel, kSel, rowSel := g.selectors(c)
	for _, k := range []string{"q", "dout"} {
		if t, ok := in[k]; ok {
			sub.in[k] = gather(t, qSel)
		}
	}
	for _, k := range []string{"k", "v"} {
		sub.in[k] = gather(in[k], kSel)
	}
	if t, ok := in["dlse"]; ok {
		sub.in["dlse"] = gather(t, rowSel)
	}
	bSel := g.biasSelector(c)
	if t, ok := in["bias"]; ok {
		sub.in["bias"] = gather(t, bSel)
	}
	for _, k := range []string{"slopes", "sinks"} {
		if t, ok := in[k]; ok {
			sub.in[k] = gather(t, [][]int{c.qh})
		}
	}
	onlyBatch := len(cuts) == 1 && cuts[0] == "batch"
	var dropped []string
	for k, t := range got {
		shaped := func(s []int) ops.Tensor { return ops.Tensor{Shape: s, Data: t.Data} }
		switch k {
		case "out", "dq":
			sub.got[k] = ops.Tensor{Data: gather(shaped(g.outShape(k)), qSel).Data}
		case "lse":
			sub.got[k] = ops.Tensor{Data: gather(shaped(g.rowShape()), rowSel).Data}
		case "dk", "dv":
			if onlyBatch {
				sub.got[k] = ops.Tensor{Data: gather(shaped(in[k[1:]].Shape), kSel).Data}
			} else {
				dropped = append(dropped, k)
			}
		case "dbias":
			b := in["bias"].Shape
			sums := (g.biasB == 1 && c.nb < g.b) || (g.biasH == 1 && len(c.qh) < g.h)
			if len(b) != 4 || sums {
				dropped = append(dropped, k)
			} else {
				sub.got[k] = ops.Tensor{Data: gather(shaped(b), bSel).Data}
			}
		case "dsinks":
			dropped = append(dropped, k)
		default:
			sub.got[k] = t
		}
	}
	if len(sub.got) == 0 {
		return whole(in, got)
	}
	var parts []string
	if c.nb < g.b {
		parts = append(parts, fmt.Sprintf("batch entries 0–%d of %d", c.nb-1, g.b))
	}
	if len(c.qh) < g.h {
		parts = append(parts, fmt.Sprintf("query heads %s of %d with kv heads %s of %d", intList(c.qh), g.h, intList(c.kvh), g.hkv))
	}
	if queries {
		parts = append(parts, fmt.Sprintf("queries 0–%d of %d with keys 0–%d of %d, at their positions in the whole problem", c.nq-1, g.lq, c.nk-1, g.lk))
		lq, lk := g.lq, g.lk
		sub.config = func(b []byte) ([]byte, error) { return prefixPositions(b, lq, lk) }
	}
	sub.note = fmt.Sprintf("%s (%d of %d input values)", strings.Join(parts, "; "), elements(sub.in), total)
	sub.note += droppedNote(dropped, "sum over what was cut")
	return sub
}

// prefixPositions rewrites the configuration of a problem of lq queries
// and lk keys for its first queries and keys: the same query positions,
// described as "align": "start" with the offset of query 0 (mask.Geometry:
// query i sits at lk − lq + offset + i under "end", offset + i under
// "start").
func prefixPositions(b []byte, lq, lk int) ([]byte, error) {
	var m map[string]any
	if err := decode(b, &m); err != nil {
		return nil, err
	}
	off := 0.0
	if v, ok := m["offset"]; ok {
		f, ok := number(v)
		if !ok || f != float64(int(f)) {
			return b, nil // the operation refuses it as it is
		}
		off = f
	}
	first := int(off)
	switch a, _ := m["align"].(string); a {
	case "", "end":
		first += lk - lq
	case "start":
	default:
		return b, nil
	}
	m["align"], m["offset"] = "start", first
	return json.Marshal(m)
}

// lastKeySeen returns, for query i, the last key the masks let it see at
// its position p (at most lk − 1): a causal edge, a window or a band bound
// the keys after p, a prefix of length l the keys after max(p, l − 1);
// the other kinds are not cut along the queries.
func lastKeySeen(cfg map[string]any, g attnGeom) (func(i int) int, bool) {
	p0 := 0 // position of query 0 (mask.Geometry)
	if v, ok := cfg["offset"]; ok {
		f, ok := number(v)
		if !ok {
			return nil, false
		}
		p0 = int(f)
	}
	switch a, _ := cfg["align"].(string); a {
	case "", "end":
		p0 += g.lk - g.lq
	case "start":
	default:
		return nil, false
	}
	masks, _ := cfg["mask"].([]any)
	type bound struct {
		after  int
		length int
		all    bool
	}
	var bounds []bound
	for _, m := range masks {
		o, ok := m.(map[string]any)
		if !ok {
			return nil, false
		}
		kind, _ := o["kind"].(string)
		switch kind {
		case "full":
			bounds = append(bounds, bound{all: true})
		case "causal", "window":
			bounds = append(bounds, bound{})
		case "band":
			a, ok := number(o["after"])
			if !ok {
				return nil, false
			}
			if a < 0 {
				bounds = append(bounds, bound{all: true})
			} else {
				bounds = append(bounds, bound{after: int(a)})
			}
		case "prefix":
			l, ok := number(o["length"])
			if !ok {
				return nil, false
			}
			bounds = append(bounds, bound{length: int(l)})
		default:
			return nil, false
		}
	}
	return func(i int) int {
		p := p0 + i
		last := g.lk - 1
		for _, b := range bounds {
			switch {
			case b.all:
			case b.length > 0:
				last = min(last, max(p, b.length-1))
			default:
				last = min(last, p+b.after)
			}
		}
		return last
	}, true
}

// keysFor is the number of keys kept for the first nq queries: those the
// last of them sees, and two more, so that an edge one or two keys late
// is still seen.
func keysFor(last func(i int) int, nq, lk int) int {
	return min(lk, max(1, last(nq-1)+1+2))
}

func upTo(n int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = i
	}
	return s
}

// headCut returns two kv heads and four query heads, two reading each,
// such that both group maps of the sub-problem are those of the whole
// problem on the heads kept: query head j of the sub-problem reads kv head
// j/2 under "blocks" and j mod 2 under "cycle", and its head qh[j] reads
// kvh[j/2] under blocks (h/g, g = h/hkv) and kvh[j mod 2] under cycle
// (h mod hkv) in the whole problem. With one kv head (or one query head
// per kv head) the two maps agree and two heads are kept. ok is false when
// no such heads exist or the cut keeps every head.
func headCut(h, hkv int) (qh, kvh []int, ok bool) {
	g := h / hkv
	switch {
	case hkv == 1:
		qh, kvh = upTo(min(2, h)), []int{0}
	case g == 1:
		qh, kvh = []int{0, 1}, []int{0, 1}
	default:
		for s0 := 0; s0 < hkv && qh == nil; s0++ {
			for s1 := s0 + 1; s1 < hkv && qh == nil; s1++ {
				var heads []int
				for _, s := range []int{s0, s1} {
					r0, r1 := -1, -1
					for r := range g {
						switch c := (s*g + r) % hkv; {
						case r0 < 0 && c == s0:
							r0 = r
						case r0 >= 0 && r1 < 0 && c == s1:
							r1 = r
						}
					}
					if r1 < 0 {
						heads = nil
						break
					}
					heads = append(heads, s*g+r0, s*g+r1)
				}
				if len(heads) == 4 {
					qh, kvh = heads, []int{s0, s1}
				}
			}
		}
	}
	return qh, kvh, qh != nil && len(qh) < h
}

// selectors return the indices kept along each axis of q (and out, dq,
// dout), of k and v, and of lse (and dlse).
func (g attnGeom) selectors(c attnCut) (q, k, row [][]int) {
	b, nq, nk := upTo(c.nb), upTo(c.nq), upTo(c.nk)
	if g.seq {
		return [][]int{b, nq, c.qh, nil}, [][]int{b, nk, c.kvh, nil}, [][]int{b, nq, c.qh}
	}
	return [][]int{b, c.qh, nq, nil}, [][]int{b, c.kvh, nk, nil}, [][]int{b, c.qh, nq}
}

// biasSelector returns the indices kept along each axis of the bias
// [batch or 1, heads or 1, queries, keys].
func (g attnGeom) biasSelector(c attnCut) [][]int {
	s := [][]int{nil, nil, upTo(c.nq), upTo(c.nk)}
	if g.biasB > 1 {
		s[0] = upTo(c.nb)
	}
	if g.biasH > 1 {
		s[1] = c.qh
	}
	return s
}

// outShape is the shape of out (dim_v) or dq (dim).
func (g attnGeom) outShape(name string) []int {
	d := g.dv
	if name == "dq" {
		d = g.d
	}
	if g.seq {
		return []int{g.b, g.lq, g.h, d}
	}
	return []int{g.b, g.h, g.lq, d}
}

// rowShape is the shape of lse.
func (g attnGeom) rowShape() []int {
	if g.seq {
		return []int{g.b, g.lq, g.h}
	}
	return []int{g.b, g.h, g.lq}
}

// gather returns the elements of t at the indices sel lists along each
// axis (nil: every index), in order.
func gather(t ops.Tensor, sel [][]int) ops.Tensor {
	shape := make([]int, len(t.Shape))
	for i, n := range t.Shape {
		shape[i] = n
		if i < len(sel) && sel[i] != nil {
			shape[i] = len(sel[i])
		}
	}
	n := 1
	for _, d := range shape {
		n *= d
	}
	out := make([]float64, 0, n)
	var walk func(axis, base int)
	walk = func(axis, base int) {
		if axis == len(t.Shape) {
			out = append(out, t.Data[base])
			return
		}
		if axis < len(sel) && sel[axis] != nil {
			for _, i := range sel[axis] {
				walk(axis+1, base*t.Shape[axis]+i)
			}
			return
		}
		if axis == len(t.Shape)-1 { // a whole innermost run
			o := base * t.Shape[axis]
			out = append(out, t.Data[o:o+t.Shape[axis]]...)
			return
		}
		for i := range t.Shape[axis] {
			walk(axis+1, base*t.Shape[axis]+i)
		}
	}
	if len(t.Data) > 0 {
		walk(0, 0)
	}
	return ops.Tensor{Shape: shape, Data: out}
}

// intList is "0, 1, 4, 5".
func intList(s []int) string {
	t := make([]string, len(s))
	for i, v := range s {
		t[i] = fmt.Sprint(v)
	}
	return strings.Join(t, ", ")
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
