package main

import (
	"encoding/binary"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// rowFlags are the flags of a row sample (run and check).
type rowFlags struct {
	n    int
	seed uint64
	list string
	set  bool // -rows or -rows-list given
}

func (r *rowFlags) register(fs *flag.FlagSet) {
	fs.Func("rows", "judge (check) or compute (run) a row sample of `N` rows drawn with -rows-seed, besides the edge rows\n(first, last, and every mask edge), which a sample always holds; see plumb help check", func(s string) error {
		n, err := strconv.Atoi(s)
		if err != nil || n < 0 {
			return fmt.Errorf("-rows = %q; want a count ≥ 0", s)
		}
		r.n, r.set = n, true
		return nil
	})
	fs.Uint64Var(&r.seed, "rows-seed", 1, "the `seed` of the -rows draw (plumb's generator, as plumb gen)")
	fs.Func("rows-list", "the row sample as a comma-separated `LIST` of rows (distinct, from 0), instead of -rows", func(s string) error {
		r.list, r.set = s, true
		return nil
	})
}

// sample is the row sample the flags ask for, of total rows with edges.
func (r *rowFlags) sample(total int, edges []int) (ops.Rows, error) {
	if r.list == "" {
		return ops.DrawRows("-rows", total, r.n, r.seed, edges)
	}
	var list []int
	for _, f := range strings.Split(r.list, ",") {
		v, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil {
			return ops.Rows{}, fmt.Errorf("%w: -rows-list = %q: %q is not a row; want integers separated by commas", ops.ErrRows, r.list, f)
		}
		list = append(list, v)
	}
	return ops.RowsOf(fmt.Sprintf("-rows-list = %q", r.list), total, list)
}

// rowFile is a .npy file read by rows, at the rows' offsets.
type rowFile struct {
	path  string
	f     *os.File
	h     npy.Header
	data  int64 // offset of the data
	width int   // bytes an element
}

type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// openRows opens path for reading by rows: a .npy file of float64 or
// float32, C order, little-endian; anything else is refused, naming the
// file and what -rows reads.
func openRows(path string) (*rowFile, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("-rows: %w", err)
	}
	c := &countingReader{r: f}
	h, err := npy.ReadHeader(c)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("-rows: %s: %w (with -rows, every tensor is a .npy file read by rows)", path, err)
	}
	w := 0
	switch h.DType {
	case npy.Float64:
		w = 8
	case npy.Float32:
		w = 4
	}
	if w == 0 || h.FortranOrder || h.ByteOrder != npy.LittleEndian {
		f.Close()
		return nil, fmt.Errorf("-rows: %s holds %v, fortran order %v, %v; want float64 or float32, C order, little-endian (with -rows, files are read by rows; convert the file or drop -rows)",
			path, h.DType, h.FortranOrder, h.ByteOrder)
	}
	return &rowFile{path: path, f: f, h: h, data: c.n, width: w}, nil
}

func (r *rowFile) Close() error { return r.f.Close() }

// rows reads, for each i of idx, the inner elements from element i·inner,
// as float64.
func (r *rowFile) rows(inner int, idx []int) ([]float64, error) {
	out := make([]float64, 0, inner*len(idx))
	buf := make([]byte, inner*r.width)
	for _, i := range idx {
		at := r.data + int64(i)*int64(inner)*int64(r.width)
		if _, err := r.f.ReadAt(buf, at); err != nil {
			return nil, fmt.Errorf("-rows: %s: reading %d elements at element %d: %w", r.path, inner, i*inner, err)
		}
		for j := 0; j < inner; j++ {
			if r.width == 8 {
				out = append(out, math.Float64frombits(binary.LittleEndian.Uint64(buf[8*j:])))
			} else {
				out = append(out, float64(math.Float32frombits(binary.LittleEndian.Uint32(buf[4*j:]))))
			}
		}
	}
	return out, nil
}

// axisRows reads the entries idx of the file's tensor along axis ax (the
// shape shape, a view of the file's).
func (r *rowFile) axisRows(shape []int, ax int, idx []int) (ops.Tensor, error) {
	outer, inner := 1, 1
	for _, d := range shape[:ax] {
		outer *= d
	}
	for _, d := range shape[ax+1:] {
		inner *= d
	}
	at := make([]int, 0, outer*len(idx))
	for o := 0; o < outer; o++ {
		for _, i := range idx {
			at = append(at, o*shape[ax]+i)
		}
	}
	data, err := r.rows(inner, at)
	if err != nil {
		return ops.Tensor{}, err
	}
	s := append([]int(nil), shape...)
	s[ax] = len(idx)
	return ops.Tensor{Shape: s, Data: data}, nil
}

// whole reads all of the file.
func (r *rowFile) whole() (ops.Tensor, error) {
	n := max(r.h.Len(), 0)
	data, err := r.rows(n, []int{0})
	return ops.Tensor{Shape: r.h.Shape, Data: data}, err
}

// flatRows is shape viewed as [rows, last] for the row-wise operations.
func flatRows(shape []int) []int {
	if len(shape) == 0 {
		return []int{1, 1}
	}
	last := shape[len(shape)-1]
	return []int{max(r0(shape), 0) / max(last, 1), last}
}

func r0(shape []int) int {
	n := 1
	for _, d := range shape {
		n *= d
	}
	return n
}

// sampled is an operation run on a row sample: the reference's rows, and
// the float32 run's when a yardstick is wanted.
type sampled struct {
	op     ops.Op
	config []byte
	rows   ops.Rows
	ref    ops.Tensors
	outAx  map[string]int
	// yardstick of each output in format f, measured when asked
	ys map[string]*compare.Yardstick
}

// sampleRun reads the inputs by rows, draws or takes the sample, and runs
// the reference on it; with f narrower than float64 it also measures the
// yardsticks on the same rows. attention-forward in heads-major layout
// runs one query head at a time, reading its kv head's k and v alone.
func (o *runOptions) sampleRun(e *env, args []string, f compare.Format, k float64) (*sampled, error) {
	op, err := operation(args)
	if err != nil {
		return nil, err
	}
	files, err := e.namedFiles(args[1:], "input", false)
	if err != nil {
		return nil, err
	}
	if err := knownInputs(op, files); err != nil {
		return nil, err
	}
	config, err := e.readConfig(o.config)
	if err != nil {
		return nil, err
	}
	rf := map[string]*rowFile{}
	defer func() {
		for _, r := range rf {
			r.Close()
		}
	}()
	shapes := ops.Tensors{}
	for n, p := range files {
		r, err := openRows(p)
		if err != nil {
			return nil, err
		}
		rf[n] = r
		shapes[n] = ops.Tensor{Shape: rf[n].h.Shape}
	}
	total, edges, err := ops.RowCount(op.Name(), config, shapes)
	if err != nil {
		return nil, configError(o.config, err)
	}
	s, err := o.rows.sample(total, edges)
	if err != nil {
		return nil, err
	}
	inAx, outAx, _, err := ops.RowAxes(op.Name(), config, shapes)
	if err != nil {
		return nil, err
	}
	ops.UseDirectForms(o.direct)
	sm := &sampled{op: op, config: config, rows: s, outAx: outAx}
	done := progress(e, o.quiet, fmt.Sprintf("running %s on %d of %d rows", op.Name(), len(s.Index), s.Total))
	defer done()
	if op.Name() == "attention-forward" && inAx["q"] == 2 { // heads-major
		return sm, sm.byHead(rf, f, k)
	}
	in := ops.Tensors{}
	for n, r := range rf {
		var t ops.Tensor
		if ax, ok := inAx[n]; ok {
			shape := r.h.Shape
			if op.Name() != "attention-forward" {
				shape = flatRows(shape)
			}
			t, err = r.axisRows(shape, ax, s.Index)
		} else {
			t, err = r.whole()
		}
		if err != nil {
			return nil, err
		}
		in[n] = t
	}
	if !o.allowNonFinite {
		if err := finiteInputs(in, files); err != nil {
			return nil, err
		}
	}
	if sm.ref, err = ops.RunRows(op.Name(), config, in, s); err != nil {
		return nil, configError(o.config, err)
	}
	if f != compare.Float64 {
		if sm.ys, err = ops.YardstickRows(op.Name(), config, in, sm.ref, s, f, k); err != nil {
			return nil, err
		}
	}
	return sm, nil
}

// finiteInputs refuses a NaN or infinite input value, naming the file.
func finiteInputs(in ops.Tensors, files map[string]string) error {
	for n, t := range in {
		for i, v := range t.Data {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("input %s (%s): value %d of the rows read is %v; want finite inputs (or -allow-nonfinite)", n, files[n], i, v)
			}
		}
	}
	return nil
}

// byHead runs heads-major attention-forward one query head at a time: the
// sampled rows of its queries, its kv head's keys and values whole (read
// once for consecutive query heads that share them), the per-head inputs
// cut to the head, and a key-padding mask cut to the batch entry.
func (sm *sampled) byHead(rf map[string]*rowFile, f compare.Format, k float64) error {
	qs, ks, vs := rf["q"].h.Shape, rf["k"].h.Shape, rf["v"].h.Shape
	if len(qs) != 4 || len(ks) != 4 || len(vs) != 4 {
		return fmt.Errorf("-rows: attention-forward: q %v, k %v, v %v; want [batch, heads, length, dim] each", qs, ks, vs)
	}
	B, H, Lq, D := qs[0], qs[1], qs[2], qs[3]
	HKV, Lk, Dv := ks[1], ks[2], vs[3]
	var cfg map[string]any
	if len(sm.config) > 0 {
		if err := json.Unmarshal(sm.config, &cfg); err != nil {
			return fmt.Errorf("-rows: configuration: %w", err)
		}
	}
	if cfg == nil {
		cfg = map[string]any{"version": 1}
	}
	cycle := cfg["group"] == "cycle"
	perHead := map[string]ops.Tensor{}
	for _, n := range []string{"slopes", "sinks"} {
		if r, ok := rf[n]; ok {
			t, err := r.whole()
			if err != nil {
				return err
			}
			perHead[n] = t
		}
	}
	n := len(sm.rows.Index)
	out := ops.Tensor{Shape: []int{B, H, n, Dv}, Data: make([]float64, B*H*n*Dv)}
	lse := ops.Tensor{Shape: []int{B, H, n}, Data: make([]float64, B*H*n)}
	var low32 ops.Tensors
	if f != compare.Float64 {
		low32 = ops.Tensors{"out": {Shape: out.Shape, Data: make([]float64, len(out.Data))}, "lse": {Shape: lse.Shape, Data: make([]float64, len(lse.Data))}}
	}
	kvAt := -1
	var kt, vt ops.Tensor
	for b := 0; b < B; b++ {
		c := headConfig(cfg, b)
		cj, err := json.Marshal(c)
		if err != nil {
			return err
		}
		for h := 0; h < H; h++ {
			kv := h / max(H/max(HKV, 1), 1)
			if cycle {
				kv = h % HKV
			}
			if at := b*HKV + kv; at != kvAt {
				kt, vt = ops.Tensor{}, ops.Tensor{} // let the previous head's go first
				if kt, err = rf["k"].axisRows([]int{B * HKV, Lk * D}, 0, []int{at}); err != nil {
					return err
				}
				if vt, err = rf["v"].axisRows([]int{B * HKV, Lk * Dv}, 0, []int{at}); err != nil {
					return err
				}
				kt.Shape, vt.Shape = []int{1, 1, Lk, D}, []int{1, 1, Lk, Dv}
				kvAt = at
			}
			qh, err := rf["q"].axisRows([]int{B * H * Lq, D}, 0, headRows(b*H+h, Lq, sm.rows.Index))
			if err != nil {
				return err
			}
			qh.Shape = []int{1, 1, n, D}
			in := ops.Tensors{"q": qh, "k": kt, "v": vt}
			if r, ok := rf["bias"]; ok {
				bs := r.h.Shape
				blk := min(b, bs[0]-1)*bs[1] + min(h, bs[1]-1)
				t, err := r.axisRows([]int{bs[0] * bs[1] * Lq, Lk}, 0, headRows(blk, Lq, sm.rows.Index))
				if err != nil {
					return err
				}
				t.Shape = []int{1, 1, n, Lk}
				in["bias"] = t
			}
			for name, t := range perHead {
				in[name] = ops.Tensor{Shape: []int{1}, Data: []float64{t.Data[h]}}
			}
			got, err := ops.RunRows("attention-forward", cj, in, sm.rows)
			if err != nil {
				return fmt.Errorf("batch %d, head %d: %w", b, h, err)
			}
			copy(out.Data[(b*H+h)*n*Dv:], got["out"].Data)
			copy(lse.Data[(b*H+h)*n:], got["lse"].Data)
			if low32 != nil {
				rounded := ops.Tensors{}
				for name, t := range in {
					rounded[name] = ops.Tensor{Shape: t.Shape, Data: f.RoundSlice(t.Data)}
				}
				lo, err := ops.RunRows32("attention-forward", cj, rounded, sm.rows)
				if err != nil {
					return fmt.Errorf("batch %d, head %d: %w", b, h, err)
				}
				copy(low32["out"].Data[(b*H+h)*n*Dv:], lo["out"].Data)
				copy(low32["lse"].Data[(b*H+h)*n:], lo["lse"].Data)
			}
		}
	}
	sm.ref = ops.Tensors{"out": out, "lse": lse}
	if low32 == nil {
		return nil
	}
	sm.ys = map[string]*compare.Yardstick{}
	for name, r := range sm.ref {
		lo := low32[name].Data
		y, err := compare.MeasureYardstick(f, nil, r.Data, r.Shape, k, func([][]float32) ([]float32, error) {
			return compare.Narrow(lo), nil
		})
		if err != nil {
			return fmt.Errorf("output %q: %w", name, err)
		}
		sm.ys[name] = y
	}
	return nil
}

// headRows are the rows of block blk (a batch entry and head) of Lq rows.
func headRows(blk, lq int, idx []int) []int {
	at := make([]int, len(idx))
	for i, r := range idx {
		at[i] = blk*lq + r
	}
	return at
}

// headConfig is cfg for batch entry b alone: a key-padding mask keeps the
// valid count of b.
func headConfig(cfg map[string]any, b int) map[string]any {
	c := map[string]any{}
	for k, v := range cfg {
		c[k] = v
	}
	if ms, ok := cfg["mask"].([]any); ok {
		var cut []any
		for _, m := range ms {
			mm, ok := m.(map[string]any)
			if valid, isList := mm["valid"].([]any); ok && isList && b < len(valid) {
				c2 := map[string]any{}
				for k, v := range mm {
					c2[k] = v
				}
				c2["valid"] = []any{valid[b]}
				m = c2
			}
			cut = append(cut, m)
		}
		c["mask"] = cut
	}
	return c
}

// missFractions are the fractions of rows for which a report gives the
// probability that a slip confined to them goes unseen.
var missFractions = []float64{0.1, 0.01, 0.001}

// rowsJSON is the row sample in check -json.
type rowsJSON struct {
	Judged int        `json:"judged"`
	Total  int        `json:"total"`
	Edges  int        `json:"edges"`
	Drawn  bool       `json:"drawn"`
	Seed   uint64     `json:"seed,omitempty"`
	Index  []int      `json:"index"`
	Miss   []missJSON `json:"miss,omitempty"`
}

type missJSON struct {
	Fraction    float64 `json:"fraction"`
	Probability float64 `json:"probability"`
}

func rowsReport(s ops.Rows, seed uint64) rowsJSON {
	r := rowsJSON{Judged: len(s.Index), Total: s.Total, Edges: s.Edges, Drawn: s.Drawn, Index: s.Index}
	if s.Drawn {
		r.Seed = seed
		for _, f := range missFractions {
			r.Miss = append(r.Miss, missJSON{Fraction: f, Probability: s.SlipMiss(f)})
		}
	}
	return r
}

// writeRows prints the sample: how many rows of how many were judged and,
// for a drawn sample, how likely a slip confined to a fraction f of the
// rows is to be missed.
func writeRows(w io.Writer, r rowsJSON) {
	fmt.Fprintf(w, "rows judged: %d of %d (in every batch entry and head)", r.Judged, r.Total)
	if !r.Drawn {
		fmt.Fprintf(w, ", the rows of -rows-list\n")
		return
	}
	fmt.Fprintf(w, ": %d edge rows and %d drawn with seed %d\n", r.Edges, r.Judged-r.Edges, r.Seed)
	fmt.Fprintf(w, "a slip confined to a fraction f of the rows, none of them an edge row, is missed by the\n"+
		"n = %d rows drawn uniformly without replacement from the R' = %d others with probability\n"+
		"C(R' - ceil(f*R), n) / C(R', n), about (1 - f)^n (the count of n-subsets that avoid the slip over all of them):\n",
		r.Judged-r.Edges, r.Total-r.Edges)
	for _, m := range r.Miss {
		fmt.Fprintf(w, "  f = %-6s %.3g\n", strconv.FormatFloat(100*m.Fraction, 'g', -1, 64)+"%:", m.Probability)
	}
}

// checkRowsJSON is what check -json writes with a row sample.
type checkRowsJSON struct {
	Outputs []namedReport `json:"outputs"`
	Rows    rowsJSON      `json:"rows"`
}

// checkRows is plumb check on a row sample: the reference and, for a
// candidate narrower than float64 without tolerance flags, the yardstick
// on the sampled rows; each candidate read on those rows alone.
func checkRows(e *env, o *checkOptions, args []string, gotFiles map[string]string) (int, error) {
	op, err := operation(args)
	if err != nil {
		return exitUsage, err
	}
	got := map[string]*rowFile{}
	defer func() {
		for _, r := range got {
			r.Close()
		}
	}()
	f := compare.Float64
	if o.format != "" {
		if f, err = compare.FormatByName(o.format); err != nil {
			return exitUsage, fmt.Errorf("-format: %w", err)
		}
	}
	for n, p := range gotFiles {
		r, err := openRows(p)
		if err != nil {
			return exitUsage, err
		}
		got[n] = r
		if o.format == "" && got[n].h.DType == npy.Float32 {
			f = compare.Float32
		}
	}
	fy := compare.Float64
	if !o.explicit() {
		fy = f
	}
	sm, err := o.runOptions.sampleRun(e, args, fy, o.k)
	if err != nil {
		return exitUsage, err
	}
	var reports []namedReport
	for _, p := range op.Outputs() {
		g, ok := got[p.Name]
		if !ok {
			continue
		}
		ref, ok := sm.ref[p.Name]
		if !ok {
			return exitUsage, fmt.Errorf("-got %s: output = %q; want one this configuration gives", p.Name, p.Name)
		}
		shape, ax := g.h.Shape, sm.outAx[p.Name]
		if op.Name() != "attention-forward" {
			shape = flatRows(shape)
		}
		if len(shape) <= ax || shape[ax] != sm.rows.Total {
			return exitUsage, fmt.Errorf("shapes differ: %s has shape %v; want %d rows along axis %d, as the reference %s has", g.path, g.h.Shape, sm.rows.Total, ax, p.Name)
		}
		t, err := g.axisRows(shape, ax, sm.rows.Index)
		if err != nil {
			return exitUsage, err
		}
		if len(t.Data) != len(ref.Data) {
			return exitUsage, fmt.Errorf("shapes differ: %s has shape %v: %d values on the sampled rows; want %d, as the reference %s has (shape %v on the rows)", g.path, g.h.Shape, len(t.Data), len(ref.Data), p.Name, ref.Shape)
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
			dopt = sm.ys[p.Name].Options()
		default:
			tol := defaultTolerance(f, ref.Data)
			dopt = compare.Options{Format: f, Tolerance: &tol}
		}
		dopt.Worst = o.worst
		rep, err := compare.Diff(ref.Data, t.Data, ref.Shape, dopt)
		if err != nil {
			return exitUsage, err
		}
		reports = append(reports, namedReport{Name: p.Name, Reference: fmt.Sprintf("plumb %s on %d of %d rows", op.Name(), len(sm.rows.Index), sm.rows.Total),
			Candidate: g.path + " (the same rows)", Report: rep, got: t, format: f})
	}
	var reps []*compare.Report
	for _, r := range reports {
		reps = append(reps, r.Report)
	}
	rj := rowsReport(sm.rows, o.rows.seed)
	if o.json {
		if err := writeJSON(e.stdout, checkRowsJSON{Outputs: reports, Rows: rj}); err != nil {
			return exitUsage, err
		}
	} else {
		if err := writeReports(e.stdout, reports); err != nil {
			return exitUsage, err
		}
		fmt.Fprintln(e.stdout)
		writeRows(e.stdout, rj)
	}
	return verdictStatus(reps...), nil
}

// rowsAbout is the part of plumb help run and plumb help check about row
// samples.
const rowsAbout = `
Row samples (-rows N, -rows-seed S, -rows-list LIST): for attention-forward
and the row-wise operations (softmax, logsumexp, rmsnorm-forward,
layernorm-forward, activation, ffn-forward; a row is one query position of
every batch entry and head, or one row of the last dimension of x), run
computes, and check judges, only the rows of a sample: LIST (distinct rows
from 0, comma-separated; a row out of range, a row listed twice or an empty
list is an error naming the flag and its value), or N rows drawn with seed S
(default 1) by plumb's generator besides the edge rows, which a drawn sample
always holds: the first and last rows and, for attention, the rows at and
beside the causal diagonal's ends, a band's ends, a window's first full row,
a prefix's end and every packed sequence start, at the rows' true positions
(ops.RowCount). The sampled rows are the same bits as those of the full
reference, and check's yardstick is measured on the same rows. Every file is
then a .npy file of float64 or float32, C order, little-endian, read by rows
at their offsets: the row-indexed inputs (q and bias, x) and the candidates
only on the sampled rows, and for heads-major attention k and v one kv head
at a time, so that memory stays O(keys × dim) for one head. run writes the
outputs' sampled rows (the row axis of length the sample's size) and names
the rows on standard error. check's report says how many rows of how many
it judged and, for a drawn sample, how likely a slip confined to a fraction
f of the rows (none an edge row) is to be missed by the n drawn rows among
the R' rows that are not edges: C(R' - ceil(f*R), n) / C(R', n), about
(1 - f)^n, the count of n-subsets that avoid the slip over all of them
(elementary combinatorics), for f = 10%, 1% and 0.1%; -json adds "rows"
("judged", "total", "edges", "drawn", "seed", "index", "miss"). The
diagnosis and the idiom's cost are not computed on a sample.
`
