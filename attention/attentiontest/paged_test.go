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

// pagedEverything declares every option of the paged suite.
var pagedEverything = PagedSupports{
	PoolLayouts: []kvcache.PoolLayout{kvcache.PagesFirst, kvcache.HeadsFirst},
	Layouts:     []attention.Layout{attention.HeadsMajor, attention.SeqMajor},
	Groups:      []attention.GroupMap{attention.GroupBlocks, attention.GroupCycle},
	Chunks:      true,
	LSE:         true,
}

// pagedSlips are the deliberate mistakes the naive paged kernel can make.
type pagedSlips struct {
	ignoreTable bool // reads logical page ⌊t/P⌋ of the pool, not the table's entry
	fullPages   bool // reads only the pages its length fills: ⌊L/P⌋·P positions
	otherLayout bool // reads the pool in the other pool layout
	chunkFull   bool // every query of a chunk sees the whole sequence
}

// naivePaged is a paged kernel written from PagedProblem's formula alone:
// one query row at a time, keys read from the pool page by page, the
// softmax with its maximum subtracted, every product rounded to E.
func naivePaged[E compare.Float](slip pagedSlips) func(q, kPool, vPool []E, p PagedProblem) ([]E, []E, error) {
	return func(q, kPool, vPool []E, p PagedProblem) ([]E, []E, error) {
		pl := p.Pool
		hq, hkv, lq, dk, dv, P := p.HeadsQ, pl.HeadsKV, p.Lq, pl.Dk, pl.Dv, pl.PageSize
		b := len(p.Tables)
		out, lse := make([]E, b*hq*lq*dv), make([]E, b*hq*lq)
		heads := pl.Layout == kvcache.HeadsFirst
		if slip.otherLayout {
			heads = !heads
		}
		slot := func(page, s, g, d int) int {
			if heads {
				return ((page*hkv+g)*P + s) * d
			}
			return ((page*P+s)*hkv + g) * d
		}
		row := func(seq, h, i, d int) int {
			if p.Layout == attention.SeqMajor {
				return ((seq*lq+i)*hq + h) * d
			}
			return ((seq*hq+h)*lq + i) * d
		}
		for seq := range b {
			n := p.Lengths[seq]
			if slip.fullPages {
				n = n / P * P
			}
			for h := range hq {
				g := h / (hq / hkv)
				if p.Group == attention.GroupCycle {
					g = h % hkv
				}
				for i := range lq {
					last := p.Lengths[seq] - lq + i
					if slip.chunkFull {
						last = p.Lengths[seq] - 1
					}
					qr := q[row(seq, h, i, dk):][:dk]
					var s []E
					m := E(math.Inf(-1))
					for t := 0; t <= last && t < n; t++ {
						page := t / P
						if !slip.ignoreTable {
							page = p.Tables[seq][page]
						}
						kr := kPool[slot(page, t%P, g, dk):][:dk]
						var dot E
						for d := range dk {
							dot += E(qr[d] * kr[d])
						}
						x := E(float64(dot) * p.Scale)
						s = append(s, x)
						m = max(m, x)
					}
					var sum E
					o := out[row(seq, h, i, dv):][:dv]
					for t, x := range s {
						e := E(math.Exp(float64(x - m)))
						sum += e
						page := t / P
						if !slip.ignoreTable {
							page = p.Tables[seq][page]
						}
						vr := vPool[slot(page, t%P, g, dv):][:dv]
						for d := range dv {
							o[d] += E(e * vr[d])
						}
					}
					for d := range o {
						o[d] /= sum
					}
					lse[row(seq, h, i, 1)] = m + E(math.Log(float64(sum)))
				}
			}
		}
		return out, lse, nil
	}
}

// The reference and its float32 twin pass every case under every
// convention: the float64 reference at the float64 tolerance, the twin its
// own yardstick.
func TestPagedReference(t *testing.T) {
	RunPaged(t, PagedKernel[float64]{Format: compare.Float64, Supports: pagedEverything,
		Attend: func(q, kp, vp []float64, p PagedProblem) ([]float64, []float64, error) {
			return kvcache.AttendPages(q, kp, vp, p.Pool, p.Tables, p.Lengths, p.HeadsQ, p.Lq, p.options())
		}})
	RunPaged(t, PagedKernel[float32]{Supports: pagedEverything,
		Attend: func(q, kp, vp []float32, p PagedProblem) ([]float32, []float32, error) {
			return kvcache.AttendPages32(q, kp, vp, p.Pool, p.Tables, p.Lengths, p.HeadsQ, p.Lq, p.options())
		}})
}

// A float32 kernel written from the problem's formula alone, with no
// plumb code, passes every case under every convention, in float32 and
// with bfloat16 storage.
func TestPagedNaiveKernel(t *testing.T) {
	RunPaged(t, PagedKernel[float32]{Attend: naivePaged[float32](pagedSlips{}), Supports: pagedEverything})
	RunPaged(t, PagedKernel[float32]{Attend: naivePaged[float32](pagedSlips{}), Supports: pagedEverything, Format: compare.BFloat16})
}

// Each slip of the naive kernel fails the cases that are there to catch
// it, and only those pass that cannot see it.
func TestPagedSlipsCaught(t *testing.T) {
	for _, c := range []struct {
		name   string
		slip   pagedSlips
		fails  []string
		passes []string
	}{
		{"ignores the page table", pagedSlips{ignoreTable: true},
			[]string{"pages_shuffled/pages-first/heads-major/blocks", "shared_prefix/pages-first/heads-major/blocks", "realistic_decode/pages-first/heads-major/blocks"},
			[]string{"pages_in_order/pages-first/heads-major/blocks"}},
		{"reads only full pages", pagedSlips{fullPages: true},
			[]string{"last_page_partial/pages-first/heads-major/blocks", "ragged_batch/pages-first/heads-major/blocks"},
			[]string{"pages_in_order/pages-first/heads-major/blocks", "page_size_one/pages-first/heads-major"}},
		{"reads the other pool layout", pagedSlips{otherLayout: true},
			[]string{"pages_in_order/pages-first/heads-major/blocks", "pages_in_order/heads-first/seq-major/cycle"},
			[]string{"page_size_one/heads-first/heads-major"}}, // one kv head, one slot a page: both layouts are one order
		{"a chunk's queries see the whole sequence", pagedSlips{chunkFull: true},
			[]string{"chunk_of_queries/pages-first/heads-major/blocks"},
			[]string{"realistic_decode/pages-first/heads-major/blocks"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			rec := &conformance.Recorder{}
			RunPaged(rec, PagedKernel[float32]{Attend: naivePaged[float32](c.slip), Supports: pagedEverything})
			for _, name := range c.fails {
				suite.Failed(t, rec, name, "case "+name[:len(name)-len(name[indexSlash(name):])], "output")
			}
			for _, name := range c.passes {
				suite.Passed(t, rec, name)
			}
		})
	}
}

// indexSlash is the index of the first "/" of name.
func indexSlash(name string) int {
	for i, r := range name {
		if r == '/' {
			return i
		}
	}
	return len(name)
}

// A kernel that does not declare Chunks has the chunk case skipped, with a
// message naming the declaration; a nil Attend fails at once.
func TestPagedSkipsAndRefusals(t *testing.T) {
	rec := &conformance.Recorder{}
	RunPaged(rec, PagedKernel[float32]{Attend: naivePaged[float32](pagedSlips{}), Supports: PagedSupports{LSE: true}})
	suite.Skipped(t, rec, "chunk_of_queries/pages-first/heads-major/blocks", "several queries per sequence (Chunks)")
	suite.Passed(t, rec, "pages_shuffled/pages-first/heads-major/blocks")
	expect.False(t, rec.Failed, rec.Text())

	rec = &conformance.Recorder{}
	RunPaged(rec, PagedKernel[float32]{})
	expect.True(t, rec.Failed)
	expect.Contains(t, rec.Text(), "PagedKernel.Attend is nil")
}
