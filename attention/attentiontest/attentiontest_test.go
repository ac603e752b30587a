package attentiontest

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/posenc"
)

// everything declares every option the suite knows.
var everything = Supports{
	Layouts:        []attention.Layout{attention.HeadsMajor, attention.SeqMajor},
	Groups:         []attention.GroupMap{attention.GroupBlocks, attention.GroupCycle},
	Pairings:       []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves},
	Masks:          []Masking{NoMask, Causal, SlidingWindow},
	AlignStart:     true,
	Offset:         true,
	UnequalLengths: true,
	KeyPadding:     true,
	ValueDim:       true,
	PartialRotary:  true,
	SoftCap:        true,
	LSE:            true,
}

// light declares every feature but one value of each convention list
// (the non-default ones); the tests run under it with -short, to keep the
// race detector's time modest.
var light = func() Supports {
	s := everything
	s.Layouts = []attention.Layout{attention.SeqMajor}
	s.Groups = []attention.GroupMap{attention.GroupCycle}
	s.Pairings = []posenc.Pairing{posenc.PairHalves}
	return s
}()

type forwardFunc[E float32 | float64] func(q, k, v []E, s attention.Shape, o attention.Options) ([]E, []E, error)

// plumbKernel wraps one of the attention package's forms as a kernel.
func plumbKernel(fwd forwardFunc[float64]) func(q, k, v []float64, p Problem) ([]float64, []float64, error) {
	return func(q, k, v []float64, p Problem) ([]float64, []float64, error) {
		return reference(p, q, k, v, posenc.Rotary.Apply, fwd)
	}
}

// The float64 reference, its fast form and its tiled form (blocks of 5
// keys) pass every case, under every convention and both empty-row
// policies, at the float64 kernel tolerance.
func TestReference(t *testing.T) {
	tiled := func(q, k, v []float64, s attention.Shape, o attention.Options) ([]float64, []float64, error) {
		return attention.ForwardTiled(q, k, v, s, 5, o)
	}
	for _, c := range []struct {
		name string
		fwd  forwardFunc[float64]
	}{{"Forward", attention.Forward}, {"ForwardFast", attention.ForwardFast}, {"ForwardTiled", tiled}} {
		for _, empty := range []attention.EmptyRow{attention.EmptyRowZero, attention.EmptyRowNaN} {
			s := everything
			if testing.Short() {
				s = light
			}
			s.EmptyRow = empty
			t.Run(c.name+"/"+empty.String(), func(t *testing.T) {
				Run(t, Kernel[float64]{Forward: plumbKernel(c.fwd), Format: compare.Float64, Supports: s})
			})
		}
	}
}

// The float32 instantiation passes its own yardstick (its error is one
// time the yardstick's, the tolerance two), in float32 and in bfloat16;
// this checks the suite's wiring of formats, not the kernel.
func TestYardstickKernel(t *testing.T) {
	formats, s := []compare.Format{compare.Float32, compare.BFloat16}, everything
	if testing.Short() {
		formats, s = formats[:1], light
	}
	for _, f := range formats {
		t.Run(f.String(), func(t *testing.T) {
			Run(t, Kernel[float32]{Format: f, Supports: s,
				Forward: func(q, k, v []float32, p Problem) ([]float32, []float32, error) {
					out, lse, err := reference(p, q, k, v, posenc.Rotary.Apply32, attention.Forward32)
					for i := range out {
						out[i] = float32(f.Round(float64(out[i])))
					}
					return out, lse, err
				}})
		})
	}
}

// record runs the suite on a recorder and returns it.
func record[E float32 | float64](k Kernel[E]) *conformance.Recorder {
	rec := &conformance.Recorder{}
	Run(rec, k)
	return rec
}

// A kernel that declares nothing but the defaults runs the cases it can
// and skips the others, each with a message naming the case and what it
// needs; no case is dropped without a word.
func TestSkipsNameWhatIsMissing(t *testing.T) {
	rec := record(Kernel[float64]{Forward: plumbKernel(attention.Forward), Format: compare.Float64})
	ensure.False(t, rec.Failed, rec.Text())
	var ran, skipped int
	rec.Walk(func(r *conformance.Recorder) {
		if len(r.Children) > 0 {
			return
		}
		if r.Skipped {
			skipped++
			ensure.Len(t, r.Messages, 1)
			expect.Contains(t, r.Messages[0], "case "+r.Name[:strings.LastIndex(r.Name, "/")])
			expect.Contains(t, r.Messages[0], "which the kernel does not declare")
		} else {
			ran++
		}
	})
	// Without masks, Lq ≠ Lk or Dv ≠ Dk only two cases remain; the cases
	// that rotate are posed without rotary, except those about rotary.
	expect.Equal(t, 2, ran)
	expect.Equal(t, len(Cases())-2, skipped)
	suite.Passed(t, rec, "full_square/heads-major")
	suite.Skipped(t, rec, "causal_square/heads-major", "mask causal (Masks)")
	expect.Contains(t, rec.Find("partial_rotary/heads-major/adjacent").Messages[0], "rotary (Pairings), partial rotary (PartialRotary)")
	expect.Contains(t, rec.Find("no_keys/heads-major").Messages[0], "Lq ≠ Lk (UnequalLengths)")
}

// Each slip is a kernel that gets one convention wrong; the suite must
// fail it, in the cases where the convention shows, with a message naming
// the case, the conventions and the worst element, and a diagnosis line
// naming the convention the kernel used (attention-forward posed with q
// and k rotated by the reference, so a slip of the rotary encoding itself,
// or of the alignment that places the rotary positions, is said to be
// outside the search).
func TestCatchesSlips(t *testing.T) {
	noRotary := everything
	noRotary.Pairings = nil              // the cases that rotate are posed without rotary
	const outside = "outside the search" // the line says no change explains it, the rotary encoding not searched
	slips := []struct {
		name      string
		supports  Supports
		slip      func(p Problem) Problem // what the kernel computes instead
		fails     []string                // variants that must fail
		pass      []string                // variants that must pass
		diagnosis map[string]string       // the diagnosis line of a failing variant, up to its normwise error
	}{
		{"group map", everything, func(p Problem) Problem { p.Group = 1 - p.Group; return p },
			[]string{"causal_grouped/heads-major/blocks/adjacent", "decode_step/seq-major/cycle/halves"},
			[]string{"causal_multi_query/heads-major/adjacent", "causal_square/heads-major/adjacent"},
			map[string]string{
				"causal_grouped/heads-major/blocks/adjacent": `  it matches "group": "cycle" [Problem.Group, Supports.Groups] (normwise `,
				"decode_step/seq-major/cycle/halves":         `  it matches "group": "blocks" [Problem.Group, Supports.Groups] (normwise `,
			}},
		{"rotary pairing", everything, func(p Problem) Problem {
			if p.Rotary != nil {
				r := *p.Rotary
				r.Pairing = 1 - r.Pairing
				p.Rotary = &r
			}
			return p
		}, []string{"causal_square/heads-major/adjacent", "realistic_prefill/seq-major/blocks/halves"},
			[]string{"cross_fewer_queries/heads-major", "one_query_one_key/heads-major/halves"},
			map[string]string{"causal_square/heads-major/adjacent": outside}},
		{"causal alignment", everything, func(p Problem) Problem { p.Align = 1 - p.Align; return p },
			[]string{"chunked_prefill/heads-major/adjacent", "align_start/seq-major/halves", "decode_step/heads-major/blocks/adjacent"},
			[]string{"causal_square/heads-major/adjacent"},
			map[string]string{"chunked_prefill/heads-major/adjacent": outside}},
		{"causal alignment without rotary", noRotary, func(p Problem) Problem { p.Align = 1 - p.Align; return p },
			[]string{"chunked_prefill/heads-major", "align_start/seq-major"},
			[]string{"causal_square/heads-major"},
			map[string]string{
				"chunked_prefill/heads-major": `  it matches "align": "start" [Problem.Align, Supports.AlignStart]`,
				"align_start/seq-major":       `  it matches "align": "end" [Problem.Align, Supports.AlignStart]`,
			}},
		{"window counts one key fewer", everything, func(p Problem) Problem {
			if p.Mask == SlidingWindow && p.Window > 1 {
				p.Window--
			}
			return p
		}, []string{"window_edges/heads-major/adjacent", "window_decode/seq-major/cycle/halves"},
			[]string{"window_wider_than_keys/heads-major/adjacent", "causal_square/heads-major/adjacent"},
			map[string]string{"window_edges/heads-major/adjacent": `  it matches "mask[0].size": 6 [Problem.Window] (normwise `}},
		{"scale 1/Dk", everything, func(p Problem) Problem { p.Scale *= p.Scale; return p },
			[]string{"full_square/heads-major/adjacent", "realistic_decode/heads-major/blocks/adjacent"},
			[]string{"no_keys/heads-major", "no_keys/seq-major"},
			map[string]string{"full_square/heads-major/adjacent": `  it matches "scale": 0.0625 (1/d) [Problem.Scale] (normwise `}},
	}
	if testing.Short() {
		slips = slips[:2]
	}
	for _, s := range slips {
		t.Run(s.name, func(t *testing.T) {
			rec := record(Kernel[float64]{Format: compare.Float64, Supports: s.supports,
				Forward: func(q, k, v []float64, p Problem) ([]float64, []float64, error) {
					return reference(s.slip(p), q, k, v, posenc.Rotary.Apply, attention.Forward)
				}})
			ensure.True(t, rec.Failed, "the suite passed a kernel with a slip in the %s", s.name)
			for _, name := range s.fails {
				msg := suite.Failed(t, rec, name, "differs from the reference", "worst element [batch, ")
				if want, ok := s.diagnosis[name]; ok {
					line := suite.DiagnosisLine(t, msg)
					if want == outside {
						expect.True(t, strings.HasPrefix(line, "  no single change of its conventions explains it ("), msg)
						expect.Contains(t, line, "the rotary encoding, Problem.Rotary and Supports.Pairings, is not searched)", msg)
						continue
					}
					expect.True(t, strings.HasPrefix(line, want), "%s: want a line starting %q in\n%s", name, want, msg)
				}
			}
			for _, name := range s.pass {
				suite.Passed(t, rec, name)
			}
		})
	}
}

// The case list is what the package doc and the report describe: unique
// names, a reason each, and valid problems.
func TestCases(t *testing.T) {
	seen := map[string]bool{}
	for _, c := range Cases() {
		expect.False(t, seen[c.Name], c.Name)
		seen[c.Name] = true
		expect.NotEmpty(t, c.Why, c.Name)
		_, err := c.Problem.Options()
		expect.NoError(t, err, c.Name)
		expect.Contains(t, c.Problem.String(), fmt.Sprintf("Lq %d, Lk %d", c.Problem.Shape.Lq, c.Problem.Shape.Lk))
	}
}

// A kernel without Forward, or with an invalid format, fails at once; a
// kernel error fails its subtest, quoting it.
func TestSpecialCases(t *testing.T) {
	rec := &conformance.Recorder{}
	Run(rec, Kernel[float32]{})
	expect.Equal(t, []string{"attentiontest: Kernel.Forward is nil"}, rec.Messages)
	expect.Empty(t, rec.Children)

	rec = &conformance.Recorder{}
	Run(rec, Kernel[float32]{Format: compare.Format(99), Forward: func(q, k, v []float32, p Problem) ([]float32, []float32, error) { return nil, nil, nil }})
	expect.True(t, rec.Failed)
	expect.Contains(t, rec.Messages[0], "invalid number format")

	rec = &conformance.Recorder{}
	Run(rec, Kernel[float64]{Format: compare.Float64, Forward: func(q, k, v []float64, p Problem) ([]float64, []float64, error) {
		return nil, nil, errors.New("out of shared memory")
	}})
	m := rec.Find("full_square/heads-major").Messages
	ensure.Len(t, m, 1)
	expect.True(t, strings.HasPrefix(m[0], "case full_square (batch 2, 4 query heads on 4 kv heads, Lq 19, Lk 19"), m[0])
	expect.True(t, strings.HasSuffix(m[0], "): the kernel returned an error: out of shared memory"), m[0])

	rec = &conformance.Recorder{}
	Run(rec, Kernel[float64]{Format: compare.Float64, Forward: func(q, k, v []float64, p Problem) ([]float64, []float64, error) {
		return make([]float64, 3), nil, nil
	}})
	expect.Contains(t, rec.Find("full_square/heads-major").Messages[0], "output has 3 elements; want 2432, shape [2 4 19 16] [batch, head, query, dim]")
}
