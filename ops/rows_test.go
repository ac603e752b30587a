package ops

import (
	"errors"
	"fmt"
	"math"
	"math/big"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/gen"
)

func uniformTensor(t *testing.T, seed uint64, shape ...int) Tensor {
	t.Helper()
	n := 1
	for _, d := range shape {
		n *= d
	}
	v, err := gen.Uniform(seed, n, -1, 1)
	if err != nil {
		t.Fatal(err)
	}
	return Tensor{Shape: shape, Data: v}
}

// TestRunRowsSameBits: the rows RunRows returns are the bits of those rows
// of Run on the whole problem, for attention under every mask kind and
// both alignments and layouts, and for the row-wise operations.
func TestRunRowsSameBits(t *testing.T) {
	type tc struct {
		name, config string
		in           Tensors
	}
	hm := Tensors{"q": uniformTensor(t, 1, 2, 4, 9, 8), "k": uniformTensor(t, 2, 2, 2, 12, 8), "v": uniformTensor(t, 3, 2, 2, 12, 8)}
	sm := Tensors{"q": uniformTensor(t, 1, 2, 9, 4, 8), "k": uniformTensor(t, 2, 2, 12, 2, 8), "v": uniformTensor(t, 3, 2, 12, 2, 8)}
	withBias := Tensors{"bias": uniformTensor(t, 4, 1, 4, 9, 12)}
	for n, v := range hm {
		withBias[n] = v
	}
	cases := []tc{
		{"attention-forward", `{"version": 1, "mask": [{"kind": "causal"}]}`, hm},
		{"attention-forward", `{"version": 1, "mask": [{"kind": "causal"}], "align": "start", "offset": 2}`, hm},
		{"attention-forward", `{"version": 1, "layout": "seq-major", "mask": [{"kind": "window", "size": 3}], "group": "cycle"}`, sm},
		{"attention-forward", `{"version": 1, "mask": [{"kind": "band", "before": 2, "after": 1}]}`, hm},
		{"attention-forward", `{"version": 1, "mask": [{"kind": "prefix", "length": 5}]}`, hm},
		{"attention-forward", `{"version": 1, "mask": [{"kind": "packed", "offsets": [0, 4, 7, 12], "block": "causal"}]}`, hm},
		{"attention-forward", `{"version": 1, "mask": [{"kind": "key-padding", "valid": [12, 7]}], "soft_cap": 2}`, withBias},
		{"softmax", `{"version": 1}`, Tensors{"x": uniformTensor(t, 5, 3, 5, 7)}},
		{"logsumexp", `{"version": 1}`, Tensors{"x": uniformTensor(t, 5, 3, 5, 7)}},
		{"rmsnorm-forward", `{"version": 1, "epsilon": 1e-6}`, Tensors{"x": uniformTensor(t, 6, 15, 8), "weight": uniformTensor(t, 7, 8)}},
		{"layernorm-forward", `{"version": 1, "epsilon": 1e-5}`, Tensors{"x": uniformTensor(t, 6, 15, 8)}},
		{"activation", `{"version": 1, "function": "gelu-tanh"}`, Tensors{"x": uniformTensor(t, 8, 4, 6)}},
	}
	for _, c := range cases {
		t.Run(c.name+c.config, func(t *testing.T) {
			full, err := Run(c.name, []byte(c.config), c.in)
			if err != nil {
				t.Fatal(err)
			}
			total, edges, err := RowCount(c.name, []byte(c.config), c.in)
			if err != nil {
				t.Fatal(err)
			}
			s, err := DrawRows("-rows", total, 3, 7, edges)
			if err != nil {
				t.Fatal(err)
			}
			got, err := RunRows(c.name, []byte(c.config), c.in, s)
			if err != nil {
				t.Fatal(err)
			}
			_, outAx, _, _ := RowAxes(c.name, []byte(c.config), c.in)
			for n, want := range full {
				ax := outAx[n]
				w := want
				if _, rowWiseOp := rowWise[c.name]; rowWiseOp {
					w = Tensor{Shape: []int{total, len(want.Data) / total}, Data: want.Data}
				}
				cut := GatherAxis(w, ax, s.Index)
				g := got[n]
				if len(g.Data) != len(cut.Data) {
					t.Fatalf("output %q: %d values; want %d", n, len(g.Data), len(cut.Data))
				}
				for i := range cut.Data {
					if math.Float64bits(g.Data[i]) != math.Float64bits(cut.Data[i]) && !(math.IsNaN(g.Data[i]) && math.IsNaN(cut.Data[i])) {
						t.Fatalf("output %q value %d: %v; want %v, the full run's (rows %v)", n, i, g.Data[i], cut.Data[i], s.Index)
					}
				}
			}
			// the float32 run too
			full32, err := Run32(c.name, []byte(c.config), c.in)
			if err != nil {
				t.Fatal(err)
			}
			got32, err := RunRows32(c.name, []byte(c.config), c.in, s)
			if err != nil {
				t.Fatal(err)
			}
			for n, want := range full32 {
				w := want
				if _, rowWiseOp := rowWise[c.name]; rowWiseOp {
					w = Tensor{Shape: []int{total, len(want.Data) / total}, Data: want.Data}
				}
				cut := GatherAxis(w, outAx[n], s.Index)
				if !slices.Equal(got32[n].Data, cut.Data) {
					t.Fatalf("float32 output %q: %v; want %v", n, got32[n].Data, cut.Data)
				}
			}
		})
	}
}

// TestRowEdges: a drawn sample holds the first and last rows and the rows
// at every mask edge, at the rows' true positions.
func TestRowEdges(t *testing.T) {
	in := Tensors{"q": uniformTensor(t, 1, 1, 1, 16, 4), "k": uniformTensor(t, 2, 1, 1, 20, 4), "v": uniformTensor(t, 3, 1, 1, 20, 4)}
	cases := []struct {
		config string
		want   []int // rows that must be in the edges
	}{
		// align end: query i at key position 4 + i; last key 19 is row 15
		{`{"version": 1, "mask": [{"kind": "causal"}]}`, []int{0, 15}},
		// window 6: first full window at position 5, row 1
		{`{"version": 1, "mask": [{"kind": "window", "size": 6}]}`, []int{0, 1, 2, 15}},
		// packed starts 10, 14 at rows 6, 10
		{`{"version": 1, "mask": [{"kind": "packed", "offsets": [0, 10, 14, 20], "block": "causal"}]}`, []int{5, 6, 9, 10}},
		// prefix 8 at row 4; align start with offset 2: position 8 is row 6
		{`{"version": 1, "mask": [{"kind": "prefix", "length": 8}]}`, []int{3, 4, 5}},
		{`{"version": 1, "mask": [{"kind": "prefix", "length": 8}], "align": "start", "offset": 2}`, []int{5, 6, 7}},
	}
	for _, c := range cases {
		total, edges, err := RowCount("attention-forward", []byte(c.config), in)
		if err != nil {
			t.Fatal(err)
		}
		s, err := DrawRows("-rows", total, 2, 1, edges)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range c.want {
			if !slices.Contains(s.Index, r) {
				t.Errorf("%s: sample %v lacks edge row %d", c.config, s.Index, r)
			}
		}
		if len(s.Index) != s.Edges+2 || s.Edges != len(edges) {
			t.Errorf("%s: %d rows, %d edges; want %d edges and 2 drawn", c.config, len(s.Index), s.Edges, len(edges))
		}
	}
}

// TestDrawRowsDeterministic: the same seed draws the same rows, distinct
// and in range; another seed draws others; n beyond the rows takes all.
func TestDrawRowsDeterministic(t *testing.T) {
	a, _ := DrawRows("-rows", 1000, 20, 5, []int{0, 999})
	b, _ := DrawRows("-rows", 1000, 20, 5, []int{0, 999})
	c, _ := DrawRows("-rows", 1000, 20, 6, []int{0, 999})
	if !slices.Equal(a.Index, b.Index) || slices.Equal(a.Index, c.Index) || len(a.Index) != 22 {
		t.Fatalf("seed 5: %v and %v; seed 6: %v", a.Index, b.Index, c.Index)
	}
	for i := 1; i < len(a.Index); i++ {
		if a.Index[i] <= a.Index[i-1] || a.Index[i] >= 1000 {
			t.Fatalf("not ascending distinct in range: %v", a.Index)
		}
	}
	all, _ := DrawRows("-rows", 10, 50, 1, []int{3})
	if len(all.Index) != 10 {
		t.Fatalf("n > rows: %v; want all 10", all.Index)
	}
}

// TestDrawRowsUniform: over many seeds every non-edge row of 10 is drawn
// about as often (3 of 8 each time: expected 3/8 of the seeds).
func TestDrawRowsUniform(t *testing.T) {
	count := make([]int, 10)
	const seeds = 4000
	for seed := uint64(0); seed < seeds; seed++ {
		s, _ := DrawRows("-rows", 10, 3, seed, []int{0, 9})
		for _, r := range s.Index {
			count[r]++
		}
	}
	for r := 1; r < 9; r++ {
		// binomial(4000, 3/8): σ ≈ 30.6; 5σ
		if d := math.Abs(float64(count[r]) - seeds*3.0/8); d > 153 {
			t.Errorf("row %d drawn %d times; want %v ± 153", r, count[r], seeds*3.0/8)
		}
	}
}

// TestMissProbabilityEnumeration checks the formula against counting the
// n-subsets of r rows that avoid bad rows, by enumeration, and against
// C(r−bad, n)/C(r, n) in exact integers (math/big).
func TestMissProbabilityEnumeration(t *testing.T) {
	for r := 1; r <= 12; r++ {
		for n := 1; n <= r; n++ {
			for bad := 0; bad <= r; bad++ {
				miss, all := 0, 0
				for set := 0; set < 1<<r; set++ {
					if popcount(set) != n {
						continue
					}
					all++
					if set&(1<<bad-1) == 0 { // bad rows are 0 … bad−1
						miss++
					}
				}
				want := float64(miss) / float64(all)
				if got := MissProbability(r, n, bad); math.Abs(got-want) > 1e-14 {
					t.Fatalf("MissProbability(%d, %d, %d) = %v; enumeration %d/%d = %v", r, n, bad, got, miss, all, want)
				}
			}
		}
	}
	// a large case against exact binomials
	num := new(big.Int).Binomial(1<<20-1<<10, 256)
	den := new(big.Int).Binomial(1<<20, 256)
	want, _ := new(big.Rat).SetFrac(num, den).Float64()
	if got := MissProbability(1<<20, 256, 1<<10); math.Abs(got-want) > 1e-12*want {
		t.Fatalf("MissProbability(2^20, 256, 2^10) = %v; exact %v", got, want)
	}
}

func popcount(x int) int {
	n := 0
	for ; x != 0; x &= x - 1 {
		n++
	}
	return n
}

// TestRowsErrors: bad samples are errors that name the argument and value.
func TestRowsErrors(t *testing.T) {
	cases := []struct {
		err  error
		want string
	}{
		{func() error { _, err := RowsOf("-rows-list", 10, []int{3, 10}); return err }(), "-rows-list holds row 10"},
		{func() error { _, err := RowsOf("-rows-list", 10, []int{-1}); return err }(), "-rows-list holds row -1"},
		{func() error { _, err := RowsOf("-rows-list", 10, nil); return err }(), "-rows-list is empty"},
		{func() error { _, err := RowsOf("-rows-list", 10, []int{4, 2, 4}); return err }(), "-rows-list holds row 4 twice"},
		{func() error { _, err := DrawRows("-rows", 10, -2, 1, nil); return err }(), "-rows = -2"},
		{func() error {
			_, err := RunRows("softmax", nil, Tensors{"x": {Shape: []int{2, 3}, Data: make([]float64, 6)}}, Rows{Total: 5, Index: []int{1}})
			return err
		}(), "of 5 rows; the operation has 2"},
		{func() error { _, _, err := RowCount("rotary-tables", nil, Tensors{}); return err }(), `"rotary-tables" has no row form`},
	}
	for _, c := range cases {
		if !errors.Is(c.err, ErrRows) || !strings.Contains(fmt.Sprint(c.err), c.want) {
			t.Errorf("error %v; want ErrRows and %q", c.err, c.want)
		}
	}
}

// TestYardstickRows: the yardstick of a sample is that of the same rows:
// the reference's rows rounded to bfloat16 pass it, a row 10% off fails.
func TestYardstickRows(t *testing.T) {
	in := Tensors{"q": uniformTensor(t, 1, 1, 2, 40, 8), "k": uniformTensor(t, 2, 1, 2, 40, 8), "v": uniformTensor(t, 3, 1, 2, 40, 8)}
	cfg := []byte(`{"version": 1, "mask": [{"kind": "causal"}]}`)
	s, err := RowsOf("-rows-list", 40, []int{0, 17, 39})
	if err != nil {
		t.Fatal(err)
	}
	ref, err := RunRows("attention-forward", cfg, in, s)
	if err != nil {
		t.Fatal(err)
	}
	ys, err := YardstickRows("attention-forward", cfg, in, ref, s, compare.BFloat16, 2)
	if err != nil {
		t.Fatal(err)
	}
	r := ref["out"]
	rep, err := compare.Diff(r.Data, compare.BFloat16.RoundSlice(r.Data), r.Shape, ys["out"].Options())
	if err != nil || !rep.Verdict.Pass {
		t.Fatalf("rounded reference rows: %v %v; want a pass", rep, err)
	}
	bad := compare.BFloat16.RoundSlice(r.Data)
	big := 0
	for i, v := range r.Data {
		if math.Abs(v) > math.Abs(r.Data[big]) {
			big = i
		}
	}
	bad[big] *= 1.1
	if rep, err := compare.Diff(r.Data, bad, r.Shape, ys["out"].Options()); err != nil || rep.Verdict.Pass {
		t.Fatalf("a value 10%% off: %v %v; want a failure", rep, err)
	}
}
