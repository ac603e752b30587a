package kvcache

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// The golden files testdata/golden/kvcache/*.json are written by
// testdata/gen/fam_kvcache.py: it lays keys and values out as pages, a
// ring or packed sequences by the definitions of doc.go, and computes
// attention over the logical keys from its published definition in mpmath
// at 50 significant digits (fam_attention's), each output rounded once to
// float64.

// goldenBound is the project target, as attention/golden_test.go's: every
// function here makes attention's own calls, which measure below 1e-15 on
// cases of this size, so the bound fails on any real error (a wrong page,
// slot or offset moves whole rows).
const goldenBound = 1e-14

// golden32Bound is attention/golden_test.go's float32 bound: a few float32
// ulps times the longest sum, with margin; it checks that the twin
// computes the same function.
const golden32Bound = 2e-5

// accuracy is the package's accuracy table in doc.go.
var accuracy = &golden.Accuracy{
	Path: "doc.go",
	Rows: []string{"AttendPages", "AttendSplit", "MergeSplits", "AttendRing", "AttendPacked", "VerifyDraft",
		"AttendPages32", "AttendSplit32", "MergeSplits32", "AttendRing32", "AttendPacked32", "VerifyDraft32"},
	Cols: []string{"out", "lse"},
}

func TestMain(m *testing.M) { os.Exit(accuracy.Main(m)) }

// The configurations of the golden families, in the generator's keys.
type pagesConfig struct {
	Pages      int                `json:"pages"`
	PageSize   int                `json:"page_size"`
	HeadsKV    int                `json:"heads_kv"`
	Dk         int                `json:"dk"`
	Dv         int                `json:"dv"`
	PoolLayout PoolLayout         `json:"pool_layout"`
	HeadsQ     int                `json:"heads_q"`
	Lq         int                `json:"lq"`
	Tables     [][]int            `json:"tables"`
	Lengths    []int              `json:"lengths"`
	Layout     attention.Layout   `json:"layout"`
	Group      attention.GroupMap `json:"group"`
}

type splitsConfig struct {
	HeadsQ  int      `json:"heads_q"`
	HeadsKV int      `json:"heads_kv"`
	Lq      int      `json:"lq"`
	Lk      int      `json:"lk"`
	Dk      int      `json:"dk"`
	Dv      int      `json:"dv"`
	Pos     int      `json:"pos"`
	Splits  [][2]int `json:"splits"`
}

type ringConfig struct {
	HeadsQ  int              `json:"heads_q"`
	HeadsKV int              `json:"heads_kv"`
	Dk      int              `json:"dk"`
	Dv      int              `json:"dv"`
	Slots   int              `json:"slots"`
	N       int              `json:"n"`
	Layout  attention.Layout `json:"layout"`
}

type packedConfig struct {
	HeadsQ       int   `json:"heads_q"`
	HeadsKV      int   `json:"heads_kv"`
	Dk           int   `json:"dk"`
	Dv           int   `json:"dv"`
	QueryOffsets []int `json:"query_offsets"`
	KeyOffsets   []int `json:"key_offsets"`
}

type draftConfig struct {
	Batch   int              `json:"batch"`
	HeadsQ  int              `json:"heads_q"`
	HeadsKV int              `json:"heads_kv"`
	Dk      int              `json:"dk"`
	Dv      int              `json:"dv"`
	Lq      int              `json:"lq"`
	Lk      int              `json:"lk"`
	Layout  attention.Layout `json:"layout"`
}

// goldenRun runs fn on every case of the family at float64 and at float32
// (the inputs rounded to float32), and checks the outputs fn returns by
// name against the golden ones: fn's name goes in the accuracy table, with
// the suffix 32 for the twin.
func goldenRun(t *testing.T, family, fn string, run func(t *testing.T, c *golden.Case, single bool) map[string][]float64) {
	f := golden.MustLoadFamily(t, "kvcache", family)
	ensure.NotEmpty(t, f.Cases)
	for _, c := range f.Cases {
		for _, single := range []bool{false, true} {
			name, bound := fn, goldenBound
			if single {
				name, bound = fn+"32", golden32Bound
			}
			t.Run(name+"/"+c.Name, func(t *testing.T) {
				for out, got := range run(t, c, single) {
					want, _, err := c.Float(out)
					ensure.NoError(t, err)
					e := golden.NormwiseRelErr(got, want)
					accuracy.Note(name, out, e)
					expect.True(t, e <= bound, golden.Describe(c, out, e, bound))
				}
			})
		}
	}
}

// in reads a float input of c.
func in(t *testing.T, c *golden.Case, name string) []float64 {
	t.Helper()
	x, _, err := c.Float(name)
	ensure.NoError(t, err)
	return x
}

// call runs f64 on the inputs, or f32 on them rounded to float32, and
// returns out and lse as float64.
func call(t *testing.T, single bool, ins [][]float64,
	f64 func(x [][]float64) ([]float64, []float64, error),
	f32 func(x [][]float32) ([]float32, []float32, error)) map[string][]float64 {
	t.Helper()
	if !single {
		out, lse, err := f64(ins)
		ensure.NoError(t, err)
		return map[string][]float64{"out": out, "lse": lse}
	}
	x := make([][]float32, len(ins))
	for i, v := range ins {
		x[i] = num.Convert[float32](v)
	}
	out, lse, err := f32(x)
	ensure.NoError(t, err)
	return map[string][]float64{"out": num.Convert[float64](out), "lse": num.Convert[float64](lse)}
}

func TestGoldenPages(t *testing.T) {
	goldenRun(t, "pages", "AttendPages", func(t *testing.T, c *golden.Case, single bool) map[string][]float64 {
		var cfg pagesConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		p := Pool{Pages: cfg.Pages, PageSize: cfg.PageSize, HeadsKV: cfg.HeadsKV, Dk: cfg.Dk, Dv: cfg.Dv, Layout: cfg.PoolLayout}
		o := attention.Options{Layout: cfg.Layout, Group: cfg.Group}
		return call(t, single, [][]float64{in(t, c, "q"), in(t, c, "k_pool"), in(t, c, "v_pool")},
			func(x [][]float64) ([]float64, []float64, error) {
				return AttendPages(x[0], x[1], x[2], p, cfg.Tables, cfg.Lengths, cfg.HeadsQ, cfg.Lq, o)
			},
			func(x [][]float32) ([]float32, []float32, error) {
				return AttendPages32(x[0], x[1], x[2], p, cfg.Tables, cfg.Lengths, cfg.HeadsQ, cfg.Lq, o)
			})
	})
}

// TestGoldenSplits checks each split's partial result against its golden
// partial, and their merge against the golden whole decoding step.
func TestGoldenSplits(t *testing.T) {
	goldenRun(t, "splits", "MergeSplits", func(t *testing.T, c *golden.Case, single bool) map[string][]float64 {
		var cfg splitsConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		s := attention.Shape{Batch: 1, HeadsQ: cfg.HeadsQ, HeadsKV: cfg.HeadsKV, Lq: cfg.Lq, Lk: cfg.Lk, Dk: cfg.Dk, Dv: cfg.Dv}
		var sinks []float64
		if c.Has("sinks") {
			sinks = in(t, c, "sinks")
		}
		q, k, v := in(t, c, "q"), in(t, c, "k"), in(t, c, "v")
		row, bound := "AttendSplit", goldenBound
		if single {
			row, bound = "AttendSplit32", golden32Bound
		}
		var outs, lses [][]float64
		for n, sp := range cfg.Splits {
			o := attention.Options{}
			if n == 0 {
				o.Sinks = sinks // a sink belongs to one split
			}
			got := call(t, single, [][]float64{q, k, v},
				func(x [][]float64) ([]float64, []float64, error) {
					return AttendSplit(x[0], x[1], x[2], s, cfg.Pos, sp[0], sp[1], o)
				},
				func(x [][]float32) ([]float32, []float32, error) {
					return AttendSplit32(x[0], x[1], x[2], s, cfg.Pos, sp[0], sp[1], o)
				})
			for _, name := range []string{"out", "lse"} {
				want, _, err := c.Float(fmt.Sprintf("%s_%d", name, n))
				ensure.NoError(t, err)
				if sp[0] == sp[1] {
					// an empty split: exactly 0 and −Inf, which a normwise
					// error cannot measure
					expect.Equal(t, want, got[name], "%s of the empty split %d", name, n)
					continue
				}
				e := golden.NormwiseRelErr(got[name], want)
				accuracy.Note(row, name, e)
				expect.True(t, e <= bound, golden.Describe(c, fmt.Sprintf("%s_%d", name, n), e, bound))
			}
			outs, lses = append(outs, got["out"]), append(lses, got["lse"])
		}
		if !single {
			out, lse, err := MergeSplits(outs, lses, cfg.Dv, attention.EmptyRowZero)
			ensure.NoError(t, err)
			return map[string][]float64{"out": out, "lse": lse}
		}
		o32, l32 := make([][]float32, len(outs)), make([][]float32, len(lses))
		for i := range outs {
			o32[i], l32[i] = num.Convert[float32](outs[i]), num.Convert[float32](lses[i])
		}
		out, lse, err := MergeSplits32(o32, l32, cfg.Dv, attention.EmptyRowZero)
		ensure.NoError(t, err)
		return map[string][]float64{"out": num.Convert[float64](out), "lse": num.Convert[float64](lse)}
	})
}

func TestGoldenRing(t *testing.T) {
	goldenRun(t, "ring", "AttendRing", func(t *testing.T, c *golden.Case, single bool) map[string][]float64 {
		var cfg ringConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		s := attention.Shape{Batch: 1, HeadsQ: cfg.HeadsQ, HeadsKV: cfg.HeadsKV, Lq: 1, Lk: cfg.Slots, Dk: cfg.Dk, Dv: cfg.Dv}
		o := attention.Options{Layout: cfg.Layout}
		return call(t, single, [][]float64{in(t, c, "q"), in(t, c, "k_ring"), in(t, c, "v_ring")},
			func(x [][]float64) ([]float64, []float64, error) { return AttendRing(x[0], x[1], x[2], s, cfg.N, o) },
			func(x [][]float32) ([]float32, []float32, error) { return AttendRing32(x[0], x[1], x[2], s, cfg.N, o) })
	})
}

func TestGoldenPacked(t *testing.T) {
	goldenRun(t, "packed", "AttendPacked", func(t *testing.T, c *golden.Case, single bool) map[string][]float64 {
		var cfg packedConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		n := len(cfg.QueryOffsets) - 1
		s := attention.Shape{Batch: n, HeadsQ: cfg.HeadsQ, HeadsKV: cfg.HeadsKV,
			Lq: cfg.QueryOffsets[n], Lk: cfg.KeyOffsets[n], Dk: cfg.Dk, Dv: cfg.Dv}
		o := attention.Options{Mask: mask.Full()}
		return call(t, single, [][]float64{in(t, c, "q"), in(t, c, "k"), in(t, c, "v")},
			func(x [][]float64) ([]float64, []float64, error) {
				return AttendPacked(x[0], x[1], x[2], s, cfg.QueryOffsets, cfg.KeyOffsets, o)
			},
			func(x [][]float32) ([]float32, []float32, error) {
				return AttendPacked32(x[0], x[1], x[2], s, cfg.QueryOffsets, cfg.KeyOffsets, o)
			})
	})
}

func TestGoldenDraft(t *testing.T) {
	goldenRun(t, "draft", "VerifyDraft", func(t *testing.T, c *golden.Case, single bool) map[string][]float64 {
		var cfg draftConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		s := attention.Shape{Batch: cfg.Batch, HeadsQ: cfg.HeadsQ, HeadsKV: cfg.HeadsKV, Lq: cfg.Lq, Lk: cfg.Lk, Dk: cfg.Dk, Dv: cfg.Dv}
		o := attention.Options{Layout: cfg.Layout}
		return call(t, single, [][]float64{in(t, c, "q"), in(t, c, "k_cache"), in(t, c, "v_cache"), in(t, c, "k_draft"), in(t, c, "v_draft")},
			func(x [][]float64) ([]float64, []float64, error) {
				return VerifyDraft(x[0], x[1], x[2], x[3], x[4], s, o)
			},
			func(x [][]float32) ([]float32, []float32, error) {
				return VerifyDraft32(x[0], x[1], x[2], x[3], x[4], s, o)
			})
	})
}

// goldenConfigs are the configuration types of the families.
var goldenConfigs = map[string]func() any{
	"pages":  func() any { return new(pagesConfig) },
	"splits": func() any { return new(splitsConfig) },
	"ring":   func() any { return new(ringConfig) },
	"packed": func() any { return new(packedConfig) },
	"draft":  func() any { return new(draftConfig) },
}

// TestGoldenWords requires every word of the conventions the families take
// to appear in some golden case: a word added to one of them fails here
// until testdata/gen/fam_kvcache.py writes a case for it.
func TestGoldenWords(t *testing.T) {
	var w golden.Words
	w.NoteFamilies(t, "kvcache", goldenConfigs)
	w.Require(t, "kvcache.PoolLayout", "attention.Layout", "attention.GroupMap")
}

// TestGoldenCount guards against a family silently losing its cases, and
// requires every golden file of the package to have a configuration type.
func TestGoldenCount(t *testing.T) {
	want := map[string]int{"pages": 6, "splits": 4, "ring": 5, "packed": 3, "draft": 3}
	got := map[string]int{}
	for fam := range want {
		got[fam] = len(golden.MustLoadFamily(t, "kvcache", fam).Cases)
	}
	expect.Equal(t, want, got, "case counts")
	files, err := filepath.Glob(filepath.Join(golden.Dir(), "kvcache", "*.json"))
	ensure.NoError(t, err)
	for _, f := range files {
		fam := strings.TrimSuffix(filepath.Base(f), ".json")
		expect.Contains(t, goldenConfigs, fam, "golden file %s has a configuration type", f)
	}
	expect.Len(t, files, len(goldenConfigs))
}
