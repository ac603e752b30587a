package num

import (
	"unsafe"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/blas/blas64"
)

// Tile sizes of GemmTiled: gonum's Dgemm computes a product of up to
// 64 × 192 of C serially (it starts goroutines of its own from 4 blocks of
// 64 × 64 up).
const (
	gemmTileRows = 64
	gemmTileCols = 3 * 64
)

// Gemm is C = alpha·op(A)·op(B) + beta·C for row-major matrices, op(A) of
// m × k and op(B) of k × n, op transposing when tA (tB) is set, in one call
// of gonum's BLAS: blas64's Dgemm for float64 and blas32's Sgemm for
// float32 (so that a float32 instantiation stays a float32 computation), or
// whatever implementation the program installed with blas64.Use or
// blas32.Use. A type whose underlying type is float64 or float32 is passed
// as that type. gonum's own implementation splits a large product into
// fixed blocks that it may compute in parallel; the blocks do not depend on
// GOMAXPROCS, so neither does the result.
func Gemm[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	ta, tb := blas.NoTrans, blas.NoTrans
	if tA {
		ta = blas.Trans
	}
	if tB {
		tb = blas.Trans
	}
	if unsafe.Sizeof(alpha) == 8 {
		blas64.Implementation().Dgemm(ta, tb, m, n, k, float64(alpha), as[float64](a), lda, as[float64](b), ldb, float64(beta), as[float64](c), ldc)
		return
	}
	blas32.Implementation().Sgemm(ta, tb, m, n, k, float32(alpha), as[float32](a), lda, as[float32](b), ldb, float32(beta), as[float32](c), ldc)
}

// GemmTiled is Gemm computed one tile of C of at most 64 × 192 at a time,
// so that every call takes the implementation's serial path: for a caller
// that is already parallel over independent products, where nested
// parallelism only adds scheduling and cache contention. The tiling
// depends on the sizes alone.
func GemmTiled[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	for i := 0; i < m; i += gemmTileRows {
		var ai []T
		if tA {
			ai = a[i:] // row i of op(A) = column i of A
		} else {
			ai = a[i*lda:]
		}
		for j := 0; j < n; j += gemmTileCols {
			var bj []T
			if tB {
				bj = b[j*ldb:] // column j of op(B) = row j of B
			} else {
				bj = b[j:]
			}
			Gemm(tA, tB, min(gemmTileRows, m-i), min(gemmTileCols, n-j), k, alpha, ai, lda, bj, ldb, beta, c[i*ldc+j:], ldc)
		}
	}
}

// as views a slice of a Float type as a slice of its underlying type U of
// the same size: the same memory, no copy.
func as[U, T Float](x []T) []U {
	if len(x) == 0 {
		return nil
	}
	return unsafe.Slice((*U)(unsafe.Pointer(&x[0])), len(x))
}
