package kvcache

import (
	"fmt"
	"math"
)

// Footprint is the memory one sequence's key/value cache takes.
type Footprint struct {
	// Bytes = 2·layers·kvHeads·headDim·tokens·bytesPerElement: a key and
	// a value of headDim elements per kv head, layer and token.
	Bytes int
	// Pages = ⌈tokens/pageSize⌉, the pages the sequence's page table
	// holds, and PageBytes the bytes of those pages,
	// 2·layers·kvHeads·headDim·Pages·pageSize·bytesPerElement: Bytes and
	// the unfilled part of the last page.
	Pages, PageBytes int
}

// CacheSize is the memory of one sequence's key/value cache of tokens
// positions, contiguous and in pages of pageSize positions: for each of
// layers layers and kvHeads key/value heads, a key and a value of headDim
// elements of bytesPerElement bytes per position,
//
//	Bytes     = 2 · layers · kvHeads · headDim · tokens · bytesPerElement
//	Pages     = ⌈tokens / pageSize⌉
//	PageBytes = 2 · layers · kvHeads · headDim · Pages · pageSize · bytesPerElement
//
// (common practice; the waste of at most pageSize − 1 positions per
// sequence is that of Kwon et al. 2023, arXiv 2309.06180, §4). For 32
// layers of 8 kv heads of dimension 128 in 2-byte elements a position
// takes 131072 bytes.
//
// Special cases are:
//
//	tokens = 0                    all zero
//	a negative input              error ErrSize
//	pageSize < 1                  error ErrPageSize
//	a size beyond the largest int error ErrSize (every product is checked)
func CacheSize(layers, kvHeads, headDim, tokens, bytesPerElement, pageSize int) (Footprint, error) {
	for _, a := range []struct {
		name string
		v    int
	}{{"layers", layers}, {"kvHeads", kvHeads}, {"headDim", headDim}, {"tokens", tokens}, {"bytesPerElement", bytesPerElement}} {
		if a.v < 0 {
			return Footprint{}, fmt.Errorf("%w: CacheSize: %s = %d; want ≥ 0", ErrSize, a.name, a.v)
		}
	}
	if pageSize < 1 {
		return Footprint{}, fmt.Errorf("%w: CacheSize: pageSize = %d; want ≥ 1", ErrPageSize, pageSize)
	}
	pages := usedPages(tokens, pageSize)
	bytes, ok := product(math.MaxInt, 2, layers, kvHeads, headDim, tokens, bytesPerElement)
	if !ok {
		return Footprint{}, fmt.Errorf("%w: CacheSize: 2·layers·kvHeads·headDim·tokens·bytesPerElement = 2·%d·%d·%d·%d·%d; want ≤ %d", ErrSize, layers, kvHeads, headDim, tokens, bytesPerElement, math.MaxInt)
	}
	paged, ok := product(math.MaxInt, 2, layers, kvHeads, headDim, pages, pageSize, bytesPerElement)
	if !ok {
		return Footprint{}, fmt.Errorf("%w: CacheSize: 2·layers·kvHeads·headDim·Pages·pageSize·bytesPerElement = 2·%d·%d·%d·%d·%d·%d; want ≤ %d", ErrSize, layers, kvHeads, headDim, pages, pageSize, bytesPerElement, math.MaxInt)
	}
	return Footprint{Bytes: bytes, Pages: pages, PageBytes: paged}, nil
}
