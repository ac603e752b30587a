package kvcache_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/kvcache"
)

// The benchmark shape: one decoding step of batch 1, 32 query heads on 8
// kv heads of dimension 128, against 65536 cached positions, in pages of
// 16 positions (4096 pages, assigned in a random order) or contiguous.
// The paged step gathers the pages into a contiguous cache, one pass over
// K and V, and then runs the same attention.Decode. Each benchmark makes
// one call before it starts the clock, so that both time steady-state
// decoding: the paged call's gather buffer is then memory the process has
// touched (see the scratch buffers in paged.go), as it is from the second
// step of a serving loop on.
const (
	benchHeadsQ, benchHeadsKV, benchDim = 32, 8, 128
	benchLength, benchPageSize          = 65536, 16
)

var benchShape = attention.Shape{Batch: 1, HeadsQ: benchHeadsQ, HeadsKV: benchHeadsKV, Lq: 1, Lk: benchLength, Dk: benchDim, Dv: benchDim}

func BenchmarkDecodeContiguous(b *testing.B) {
	r := rand.New(rand.NewPCG(9, 1))
	q := uniform(r, benchHeadsQ*benchDim)
	k, v := uniform(r, benchHeadsKV*benchLength*benchDim), uniform(r, benchHeadsKV*benchLength*benchDim)
	if _, _, err := attention.Decode(q, k, v, benchShape, benchLength-1, attention.Options{}); err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, _, err := attention.Decode(q, k, v, benchShape, benchLength-1, attention.Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodePaged(b *testing.B) {
	r := rand.New(rand.NewPCG(9, 1))
	q := uniform(r, benchHeadsQ*benchDim)
	p := kvcache.Pool{Pages: benchLength / benchPageSize, PageSize: benchPageSize, HeadsKV: benchHeadsKV, Dk: benchDim, Dv: benchDim}
	kPool, vPool := uniform(r, benchHeadsKV*benchLength*benchDim), uniform(r, benchHeadsKV*benchLength*benchDim)
	tables := [][]int{r.Perm(p.Pages)}
	lengths := []int{benchLength}
	if _, _, err := kvcache.AttendPages(q, kPool, vPool, p, tables, lengths, benchHeadsQ, 1, attention.Options{}); err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, _, err := kvcache.AttendPages(q, kPool, vPool, p, tables, lengths, benchHeadsQ, 1, attention.Options{}); err != nil {
			b.Fatal(err)
		}
	}
}
