package attentiontest

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/kvcache"
)

var servingEverything = ServingSupports{
	Layouts: []attention.Layout{attention.HeadsMajor, attention.SeqMajor},
	Groups:  []attention.GroupMap{attention.GroupBlocks, attention.GroupCycle},
	LSE:     true,
}

// naiveRow is one query row of attention written from its formula, in E:
// out (len dv) and lse over the keys ks and values vs (nil for none: out
// 0, lse −Inf), every product rounded to E.
func naiveRow[E compare.Float](q []E, ks, vs [][]E, scale float64, out []E) (lse E) {
	if len(ks) == 0 {
		return E(math.Inf(-1))
	}
	s := make([]E, len(ks))
	m := E(math.Inf(-1))
	for j, k := range ks {
		var dot E
		for d := range q {
			dot += E(q[d] * k[d])
		}
		s[j] = E(float64(dot) * scale)
		m = max(m, s[j])
	}
	var sum E
	for j, v := range vs {
		e := E(math.Exp(float64(s[j] - m)))
		sum += e
		for d := range out {
			out[d] += E(e * v[d])
		}
	}
	for d := range out {
		out[d] /= sum
	}
	return m + E(math.Log(float64(sum)))
}

// kvOf is kv(h) under the group map.
func kvOf(g attention.GroupMap, h, hq, hkv int) int {
	if g == attention.GroupCycle {
		return h % hkv
	}
	return h / (hq / hkv)
}

// at is the row (b, h, i) of a [B, H, L, D] tensor in the layout.
func at[E compare.Float](x []E, l attention.Layout, b, h, i, H, L, D int) []E {
	return x[rowAt(l, b, h, i, H, L, D):][:D]
}

// naiveRing attends the newest token to the window(N, W) positions
// before it, oldest first, read from their slots; a window other than
// min(N, W) is a slip.
func naiveRing[E compare.Float](window func(n, w int) int) func(q, kr, vr []E, p RingProblem) ([]E, []E, error) {
	return func(q, kr, vr []E, p RingProblem) ([]E, []E, error) {
		s := p.Shape
		w := s.Lk
		out, lse := make([]E, s.Batch*s.HeadsQ*s.Dv), make([]E, s.Batch*s.HeadsQ)
		for b := range s.Batch {
			for h := range s.HeadsQ {
				g := kvOf(p.Group, h, s.HeadsQ, s.HeadsKV)
				var ks, vs [][]E
				n := window(p.N, w)
				for l := range n {
					slot := ((p.N-n+l)%w + w) % w // position N−n+l: oldest first
					ks = append(ks, at(kr, p.Layout, b, g, slot, s.HeadsKV, w, s.Dk))
					vs = append(vs, at(vr, p.Layout, b, g, slot, s.HeadsKV, w, s.Dv))
				}
				lse[b*s.HeadsQ+h] = naiveRow(at(q, p.Layout, b, h, 0, s.HeadsQ, 1, s.Dk), ks, vs, p.Scale, at(out, p.Layout, b, h, 0, s.HeadsQ, 1, s.Dv))
			}
		}
		return out, lse, nil
	}
}

// naiveSplit attends each query at position Pos + i to the keys of
// [Start, End) it sees; inclusive (End read as inclusive) and
// splitPositions (every query placed at the split's last key) are slips.
func naiveSplit[E compare.Float](inclusive, splitPositions bool) func(q, k, v []E, p SplitProblem) ([]E, []E, error) {
	return func(q, k, v []E, p SplitProblem) ([]E, []E, error) {
		s := p.Shape
		out, lse := make([]E, s.Batch*s.HeadsQ*s.Lq*s.Dv), make([]E, s.Batch*s.HeadsQ*s.Lq)
		end := p.End
		if inclusive {
			end = min(p.End+1, s.Lk)
		}
		for b := range s.Batch {
			for h := range s.HeadsQ {
				g := kvOf(p.Group, h, s.HeadsQ, s.HeadsKV)
				for i := range s.Lq {
					pos := p.Pos + i
					if splitPositions {
						pos = p.Start + (end - p.Start - 1) // as if the split's last key were the query's own
					}
					var ks, vs [][]E
					for j := p.Start; j < end && j <= pos; j++ {
						ks = append(ks, at(k, p.Layout, b, g, j, s.HeadsKV, s.Lk, s.Dk))
						vs = append(vs, at(v, p.Layout, b, g, j, s.HeadsKV, s.Lk, s.Dv))
					}
					r := naiveRow(at(q, p.Layout, b, h, i, s.HeadsQ, s.Lq, s.Dk), ks, vs, p.Scale, at(out, p.Layout, b, h, i, s.HeadsQ, s.Lq, s.Dv))
					at(lse, p.Layout, b, h, i, s.HeadsQ, s.Lq, 1)[0] = r
				}
			}
		}
		return out, lse, nil
	}
}

// naivePacked attends each sequence's queries to its keys, aligned at the
// end; alignStart and oneSequence are slips.
func naivePacked[E compare.Float](alignStart, oneSequence bool) func(q, k, v []E, p PackedProblem) ([]E, []E, error) {
	return func(q, k, v []E, p PackedProblem) ([]E, []E, error) {
		n := len(p.QueryOffsets) - 1
		tq := p.QueryOffsets[n]
		out, lse := make([]E, tq*p.HeadsQ*p.Dv), make([]E, tq*p.HeadsQ)
		for b := range n {
			q0, q1, k0, k1 := p.QueryOffsets[b], p.QueryOffsets[b+1], p.KeyOffsets[b], p.KeyOffsets[b+1]
			for i := q0; i < q1; i++ {
				last := k1 - (q1 - i) // the key of query i's own token
				first := k0
				if alignStart {
					last = k0 + (i - q0)
				}
				if oneSequence {
					first = 0
				}
				for h := range p.HeadsQ {
					g := kvOf(p.Group, h, p.HeadsQ, p.HeadsKV)
					var ks, vs [][]E
					for j := first; j <= last; j++ {
						ks = append(ks, k[(j*p.HeadsKV+g)*p.Dk:][:p.Dk])
						vs = append(vs, v[(j*p.HeadsKV+g)*p.Dv:][:p.Dv])
					}
					lse[i*p.HeadsQ+h] = naiveRow(q[(i*p.HeadsQ+h)*p.Dk:][:p.Dk], ks, vs, p.Scale, out[(i*p.HeadsQ+h)*p.Dv:][:p.Dv])
				}
			}
		}
		return out, lse, nil
	}
}

func ringWindow(n, w int) int { return min(n, w) }

// The references pass their own suites at the float64 tolerance and their
// float32 twins at their yardsticks; the kernels written from the
// problems' formulas alone pass in float32 and with bfloat16 storage.
func TestServingReferences(t *testing.T) {
	RunRing(t, RingKernel[float64]{Format: compare.Float64, Supports: servingEverything,
		Attend: func(q, kr, vr []float64, p RingProblem) ([]float64, []float64, error) {
			return kvcache.AttendRing(q, kr, vr, p.Shape, p.N, attention.Options{Layout: p.Layout, Group: p.Group, Scale: p.Scale})
		}})
	RunSplit(t, SplitKernel[float64]{Format: compare.Float64, Supports: servingEverything,
		Attend: func(q, k, v []float64, p SplitProblem) ([]float64, []float64, error) {
			return kvcache.AttendSplit(q, k, v, p.Shape, p.Pos, p.Start, p.End, attention.Options{Layout: p.Layout, Group: p.Group, Scale: p.Scale})
		}})
	RunPacked(t, PackedKernel[float64]{Format: compare.Float64, Supports: servingEverything,
		Attend: func(q, k, v []float64, p PackedProblem) ([]float64, []float64, error) {
			n := len(p.QueryOffsets) - 1
			s := attention.Shape{Batch: n, HeadsQ: p.HeadsQ, HeadsKV: p.HeadsKV, Lq: p.QueryOffsets[n], Lk: p.KeyOffsets[n], Dk: p.Dk, Dv: p.Dv}
			return kvcache.AttendPacked(q, k, v, s, p.QueryOffsets, p.KeyOffsets, attention.Options{Group: p.Group, Scale: p.Scale})
		}})
	for _, f := range []compare.Format{compare.Float32, compare.BFloat16} {
		RunRing(t, RingKernel[float32]{Attend: naiveRing[float32](ringWindow), Format: f, Supports: servingEverything})
		RunSplit(t, SplitKernel[float32]{Attend: naiveSplit[float32](false, false), Format: f, Supports: servingEverything})
		RunPacked(t, PackedKernel[float32]{Attend: naivePacked[float32](false, false), Format: f, Supports: servingEverything})
	}
}

// Each slip fails the cases there to catch it and passes those that
// cannot see it.
func TestServingSlipsCaught(t *testing.T) {
	check := func(t *testing.T, rec *conformance.Recorder, fails, passes []string) {
		t.Helper()
		for _, name := range fails {
			suite.Failed(t, rec, name, "case "+name[:indexSlash(name)])
		}
		for _, name := range passes {
			suite.Passed(t, rec, name)
		}
	}
	t.Run("ring reads every slot", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunRing(rec, RingKernel[float32]{Attend: naiveRing[float32](func(n, w int) int { return w }), Supports: servingEverything})
		check(t, rec, []string{"ring_filling/heads-major/blocks"}, []string{"ring_full/heads-major/blocks", "ring_wrapped/seq-major/cycle"})
	})
	t.Run("ring window one short", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunRing(rec, RingKernel[float32]{Attend: naiveRing[float32](func(n, w int) int { return min(n, w-1) }), Supports: servingEverything})
		check(t, rec, []string{"ring_full/heads-major/blocks", "ring_far_past_wrap/heads-major/blocks"}, []string{"ring_filling/heads-major/blocks"})
	})
	t.Run("split end inclusive", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunSplit(rec, SplitKernel[float32]{Attend: naiveSplit[float32](true, false), Supports: servingEverything})
		check(t, rec, []string{"split_first_half/heads-major/blocks", "split_empty/heads-major/blocks", "split_one_key/heads-major/blocks"},
			[]string{"split_second_half/heads-major/blocks"}) // its end is the cache's
	})
	t.Run("split positions from the split", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunSplit(rec, SplitKernel[float32]{Attend: naiveSplit[float32](false, true), Supports: servingEverything})
		check(t, rec, []string{"split_after_queries/heads-major/blocks", "split_across_queries/heads-major/blocks"},
			[]string{"split_first_half/heads-major/blocks"})
	})
	t.Run("packed aligned at the start", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunPacked(rec, PackedKernel[float32]{Attend: naivePacked[float32](true, false), Supports: servingEverything})
		check(t, rec, []string{"packed_cached_prefixes/token-major/blocks"}, []string{"packed_no_prefix/token-major/blocks"})
	})
	t.Run("packed as one sequence", func(t *testing.T) {
		rec := &conformance.Recorder{}
		RunPacked(rec, PackedKernel[float32]{Attend: naivePacked[float32](false, true), Supports: servingEverything})
		check(t, rec, []string{"packed_no_prefix/token-major/blocks", "packed_single_tokens/token-major"}, nil)
	})
}

// A nil kernel function fails each suite at once, naming the field.
func TestServingNilKernels(t *testing.T) {
	for what, run := range map[string]func(*conformance.Recorder){
		"RingKernel.Attend is nil":   func(r *conformance.Recorder) { RunRing(r, RingKernel[float32]{}) },
		"SplitKernel.Attend is nil":  func(r *conformance.Recorder) { RunSplit(r, SplitKernel[float32]{}) },
		"PackedKernel.Attend is nil": func(r *conformance.Recorder) { RunPacked(r, PackedKernel[float32]{}) },
	} {
		rec := &conformance.Recorder{}
		run(rec)
		expect.True(t, rec.Failed, what)
		expect.Contains(t, rec.Text(), what)
	}
}
