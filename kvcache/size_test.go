package kvcache_test

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
)

// TestCacheSizeIsTheFormula: CacheSize against the formula evaluated in
// exact integer arithmetic (math/big): the same numbers where they fit an
// int, ErrSize where they do not.
func TestCacheSizeIsTheFormula(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 1))
	fits, overflows := 0, 0
	for trial := range 2000 {
		draw := func() int {
			if trial%4 == 0 {
				return r.IntN(1 << 31) // some products beyond an int
			}
			return r.IntN(1 << 12)
		}
		layers, heads, dim, tokens, bpe, page := draw(), draw(), draw(), r.IntN(1<<20), 1+r.IntN(8), 1+r.IntN(64)
		pages := (tokens + page - 1) / page
		bytes := new(big.Int).SetInt64(2)
		for _, f := range []int{layers, heads, dim} {
			bytes.Mul(bytes, big.NewInt(int64(f)))
		}
		paged := new(big.Int).Mul(bytes, big.NewInt(int64(pages*page*bpe)))
		bytes.Mul(bytes, big.NewInt(int64(tokens*bpe)))
		got, err := kvcache.CacheSize(layers, heads, dim, tokens, bpe, page)
		if !bytes.IsInt64() || !paged.IsInt64() {
			overflows++
			expect.ErrorIs(t, err, kvcache.ErrSize, "trial %d", trial)
			continue
		}
		fits++
		ensure.NoError(t, err)
		expect.Equal(t, kvcache.Footprint{Bytes: int(bytes.Int64()), Pages: pages, PageBytes: int(paged.Int64())}, got, "trial %d", trial)
	}
	expect.Greater(t, fits, 1000)
	expect.Greater(t, overflows, 50)
	_, err := kvcache.CacheSize(math.MaxInt, 1, 1, 1, 1, 1)
	expect.ErrorIs(t, err, kvcache.ErrSize, "2·MaxInt")
	f, err := kvcache.CacheSize(0, 0, 0, 0, 0, 1)
	ensure.NoError(t, err)
	expect.Equal(t, kvcache.Footprint{}, f)
}
