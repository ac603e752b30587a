package num

import (
	"runtime"
	"sync"
	"sync/atomic"
	"unsafe"
)

// plumb's own matrix product, in pure Go: the same bits on every
// architecture and for any number of goroutines.
//
// The method is that of Goto and van de Geijn (2008, "Anatomy of
// high-performance matrix multiplication", ACM TOMS 34(3), article 12,
// §§4–6): C is computed in blocks; for each block, a kc × nc panel of op(B)
// and an mc × kc block of op(A) are copied ("packed") into contiguous
// slivers of gemmNR columns and gemmMR rows, and a micro-kernel computes
// one gemmMR × gemmNR tile of C at a time in local variables (registers),
// reading one sliver of each. The blocking decides which elements are
// computed when and from which copy of the inputs, never how an element is
// summed:
//
//	s = β·c_ij                      (β = 0: 0, C not read; β = 1: c_ij)
//	for p = 0, 1, …, k−1:           ascending, one panel of kc after another
//		s = s + fl(a′_ip · b_pj)    a′_ip = fl(α·op(A)_ip) (α = 1: op(A)_ip)
//	c_ij = s
//
// with every product rounded before it is added (written T(a*b), which Go
// never fuses into a multiply-add). The partial sums between two panels
// wait in C itself. So the result is that of the triple loop above, bit for
// bit, whatever the block sizes, the micro-tile, the machine or GOMAXPROCS;
// the parallel form splits C into independent blocks, never a sum.
//
// Why a separate multiply and add and not math.FMA: first, the direct
// forms of the kernels that use this product (attention, ffn) define their
// sums with every product rounded, and the fast forms must give their bits.
// Second, speed, measured: math.FMA is correctly rounded everywhere too,
// but on amd64 built for the baseline (GOAMD64=v1, plumb's default build)
// the compiler guards each FMA instruction with a CPU-feature test and a
// call to the software fallback, and the call forces the accumulators out
// of registers. On the 2-core x86-64 test machine (CPU time of one thread,
// best of 7, kc = 256, the 2 × 4 kernel below) the micro-kernel reaches
// 3.8 GFLOP/s with math.FMA and 10.8 GFLOP/s with the rounded product and
// add (other tiles from 3 × 3 to 4 × 4 with math.FMA: 4.1–4.9); built
// with GOAMD64=v3 the FMA kernel reaches 13.7 GFLOP/s, but the summation
// must be one for all builds.
//
// The whole product (BenchmarkGemm, medians of 5 runs alternating with
// gonum's Dgemm, GFLOP per second of CPU time on the shared machine, one
// core): 10.3 (gonum 9.5) on a 64-row block of attention scores Q·Kᵀ
// (64 × 1024, k = 128), 9.8 (gonum 10.1) on P·V (64 × 128, k = 1024), 10.2
// (gonum 8.3) on a 512³ product, 9.4 (gonum 7.2) on a feed-forward
// projection (256 × 1024, k = 4096). gonum's SSE2 assembly on amd64 does
// two products per instruction, but as dot products and axpys over
// unpacked rows; on arm64, ppc64le and s390x its Dgemm is pure Go.

// The block sizes. gemmMR × gemmNR is the micro-tile: its 8 accumulators,
// the 2 values of A and 4 of B of one step fit in amd64's 15 usable
// floating-point registers (arm64, ppc64le and s390x have more); larger
// tiles spill (in the whole product, per CPU second: 3 × 4 7.9–8.1
// GFLOP/s, 2 × 5 7.3–8.2, 3 × 3 and 4 × 2 8.3–9.5, 2 × 4 9.1–10.5).
// gemmKC × gemmNC values of B (256 KiB in float64) are packed at once, for
// the second-level cache, and gemmMC × gemmKC of A (128 KiB); a sliver of
// B (gemmKC × gemmNR) is reread from the first-level cache for every
// sliver of A. The speed
// hardly depends on them (kc from 128 to 512, mc from 32 to 128 and nc
// from 128 to 512 measured within 5%), and no result does.
const (
	gemmMR = 2
	gemmNR = 4
	gemmKC = 256
	gemmMC = 64
	gemmNC = 128
)

// gemmParallelMin is the number of multiply-adds m·n·k below which Gemm
// stays on the calling goroutine: starting workers would cost more than
// the product.
const gemmParallelMin = 1 << 18

// Gemm is C = α·op(A)·op(B) + β·C for row-major matrices, op(A) of m × k
// and op(B) of k × n, op transposing when tA (tB) is set, lda, ldb and ldc
// the row strides of the stored A, B and C. Each element is summed as the
// triple loop in the comment above sums it: starting from β·c (β = 0 does
// not read C, so a NaN there is overwritten), the k products fl(fl(α·a)·b)
// added in ascending order, each rounded before it is added. The result is
// the same bits on every architecture and for any GOMAXPROCS: C is split
// into blocks of gemmMC × gemmNC computed in parallel, and no sum is
// split. A float32 instantiation computes in float32 throughout (every
// product and sum rounded to float32); a type whose underlying type is
// float64 or float32 computes as that type.
//
// Accuracy: that of any ordered sum of rounded products, |fl(c) − c| ≤
// γ_{k+1}·(|β·c| + Σ_p |α·a_ip·b_pj|), γ_n = n·u/(1 − n·u) (Higham 2002,
// Accuracy and Stability of Numerical Algorithms, §3.1, Eq. (3.5)), with
// one more rounding for α ∉ {1} and one for β ∉ {0, 1}.
func Gemm[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	if m <= 0 || n <= 0 {
		return
	}
	g := gemmArgs[T]{tA: tA, tB: tB, k: k, alpha: alpha, beta: beta, a: a, lda: lda, b: b, ldb: ldb, c: c, ldc: ldc}
	bm, bn := (m+gemmMC-1)/gemmMC, (n+gemmNC-1)/gemmNC
	tiles := bm * bn
	workers := min(runtime.GOMAXPROCS(0), tiles)
	if workers <= 1 || float64(m)*float64(n)*float64(k) < gemmParallelMin {
		g.block(0, m, 0, n)
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				t := int(next.Add(1) - 1)
				if t >= tiles {
					return
				}
				i0, j0 := t/bn*gemmMC, t%bn*gemmNC
				g.block(i0, min(i0+gemmMC, m), j0, min(j0+gemmNC, n))
			}
		}()
	}
	wg.Wait()
}

// GemmSerial is Gemm computed on the calling goroutine: for a caller that
// is already parallel over independent products, where nested parallelism
// only adds scheduling and cache contention. Its results are Gemm's, bit
// for bit.
func GemmSerial[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	if m <= 0 || n <= 0 {
		return
	}
	g := gemmArgs[T]{tA: tA, tB: tB, k: k, alpha: alpha, beta: beta, a: a, lda: lda, b: b, ldb: ldb, c: c, ldc: ldc}
	g.block(0, m, 0, n)
}

// gemmArgs are the operands of one product.
type gemmArgs[T Float] struct {
	tA, tB      bool
	k           int
	alpha, beta T
	a, b, c     []T
	lda, ldb    int
	ldc         int
}

// block computes the rows i0 … i1−1 and columns j0 … j1−1 of C: β first,
// then the panels of kc in ascending order (Goto and van de Geijn's loops:
// columns of nc, panels of kc, rows of mc, then the micro-tiles).
func (g *gemmArgs[T]) block(i0, i1, j0, j1 int) {
	for i := i0; i < i1; i++ {
		row := g.c[i*g.ldc+j0 : i*g.ldc+j1]
		switch g.beta {
		case 0:
			clear(row)
		case 1:
		default:
			for j, x := range row {
				row[j] = T(g.beta * x)
			}
		}
	}
	if g.k <= 0 {
		return
	}
	ws := getWorkspace[T]()
	defer putWorkspace(ws)
	var tile [gemmMR * gemmNR]T
	for jc := j0; jc < j1; jc += gemmNC {
		nb := min(gemmNC, j1-jc)
		for pc := 0; pc < g.k; pc += gemmKC {
			kb := min(gemmKC, g.k-pc)
			pb := g.packB(ws.b, pc, kb, jc, nb)
			for ic := i0; ic < i1; ic += gemmMC {
				mb := min(gemmMC, i1-ic)
				pa := g.packA(ws.a, ic, mb, pc, kb)
				for jr := 0; jr < nb; jr += gemmNR {
					bs := pb[jr*kb:][:gemmNR*kb]
					for ir := 0; ir < mb; ir += gemmMR {
						as := pa[ir*kb:][:gemmMR*kb]
						ci := (ic+ir)*g.ldc + jc + jr
						if ir+gemmMR <= mb && jr+gemmNR <= nb {
							kernel(kb, as, bs, g.c[ci:], g.ldc)
							continue
						}
						// An edge tile: through a full tile in memory.
						rows, cols := min(gemmMR, mb-ir), min(gemmNR, nb-jr)
						clear(tile[:])
						for r := range rows {
							copy(tile[r*gemmNR:][:cols], g.c[ci+r*g.ldc:][:cols])
						}
						kernel(kb, as, bs, tile[:], gemmNR)
						for r := range rows {
							copy(g.c[ci+r*g.ldc:][:cols], tile[r*gemmNR:][:cols])
						}
					}
				}
			}
		}
	}
}

// packA copies rows i0 … i0+mb−1, columns p0 … p0+kb−1 of α·op(A) into
// dst as slivers of gemmMR rows: sliver s holds, for p = 0 … kb−1, the
// gemmMR values of column p0+p in rows i0+s·gemmMR …, rows past the end
// zero.
func (g *gemmArgs[T]) packA(dst []T, i0, mb, p0, kb int) []T {
	n := (mb + gemmMR - 1) / gemmMR * gemmMR * kb
	dst = dst[:n]
	for s := 0; s*gemmMR < mb; s++ {
		sl := dst[s*gemmMR*kb:][:gemmMR*kb]
		for r := range gemmMR {
			i := i0 + s*gemmMR + r
			if i >= i0+mb {
				for p := range kb {
					sl[p*gemmMR+r] = 0
				}
				continue
			}
			if g.tA { // op(A)[i][p] = A[p][i]
				at := g.a[p0*g.lda+i:]
				for p := range kb {
					sl[p*gemmMR+r] = at[p*g.lda]
				}
			} else {
				row := g.a[i*g.lda+p0:][:kb]
				for p, x := range row {
					sl[p*gemmMR+r] = x
				}
			}
			if g.alpha != 1 {
				for p := range kb {
					sl[p*gemmMR+r] = T(g.alpha * sl[p*gemmMR+r])
				}
			}
		}
	}
	return dst
}

// packB copies rows p0 … p0+kb−1, columns j0 … j0+nb−1 of op(B) into dst
// as slivers of gemmNR columns: sliver s holds, for p = 0 … kb−1, the
// gemmNR values of row p0+p in columns j0+s·gemmNR …, columns past the end
// zero.
func (g *gemmArgs[T]) packB(dst []T, p0, kb, j0, nb int) []T {
	n := (nb + gemmNR - 1) / gemmNR * gemmNR * kb
	dst = dst[:n]
	for s := 0; s*gemmNR < nb; s++ {
		sl := dst[s*gemmNR*kb:][:gemmNR*kb]
		cols := min(gemmNR, nb-s*gemmNR)
		j := j0 + s*gemmNR
		if g.tB { // op(B)[p][j] = B[j][p]
			for cc := range gemmNR {
				if cc >= cols {
					for p := range kb {
						sl[p*gemmNR+cc] = 0
					}
					continue
				}
				col := g.b[(j+cc)*g.ldb+p0:][:kb]
				for p, x := range col {
					sl[p*gemmNR+cc] = x
				}
			}
			continue
		}
		for p := range kb {
			dp := sl[p*gemmNR:][:gemmNR]
			copy(dp, g.b[(p0+p)*g.ldb+j:][:cols])
			clear(dp[cols:])
		}
	}
	return dst
}

// kernel adds to the gemmMR × gemmNR tile of c (row stride ldc) the
// product of the packed slivers a (kc steps of gemmMR values) and b (kc
// steps of gemmNR values), one rounded product and one addition per step
// and element, in ascending order of the steps. The tile lives in local
// variables for the whole loop. The loop walks the slivers by pointer: a
// and b are first cut to their kc steps (which panics if they are
// shorter), so that every access stays inside them, and a pointer is
// advanced only to a step that exists (never past the end, which Go's
// rules for unsafe.Pointer forbid). The shape of the loop matters to the
// compiler's code: the same kernel with the slices advanced step by step
// (s = s[2:]), or with the pointers advanced after the last step as well,
// measured 7.3 GFLOP/s against this loop's 10.8.
func kernel[T Float](kc int, a, b []T, c []T, ldc int) {
	c0, c1 := c[:gemmNR], c[ldc:][:gemmNR]
	c00, c01, c02, c03 := c0[0], c0[1], c0[2], c0[3]
	c10, c11, c12, c13 := c1[0], c1[1], c1[2], c1[3]
	a = a[:gemmMR*kc]
	b = b[:gemmNR*kc]
	if kc > 0 {
		pa, pb := unsafe.Pointer(&a[0]), unsafe.Pointer(&b[0])
		var z T
		sz := unsafe.Sizeof(z)
		for p := 1; ; p++ {
			av := (*[gemmMR]T)(pa)
			bv := (*[gemmNR]T)(pb)
			b0, b1, b2, b3 := bv[0], bv[1], bv[2], bv[3]
			a0 := av[0]
			c00 += T(a0 * b0)
			c01 += T(a0 * b1)
			c02 += T(a0 * b2)
			c03 += T(a0 * b3)
			a1 := av[1]
			c10 += T(a1 * b0)
			c11 += T(a1 * b1)
			c12 += T(a1 * b2)
			c13 += T(a1 * b3)
			if p == kc {
				break // before the pointers would leave the slivers
			}
			pa = unsafe.Add(pa, gemmMR*sz)
			pb = unsafe.Add(pb, gemmNR*sz)
		}
	}
	c0[0], c0[1], c0[2], c0[3] = c00, c01, c02, c03
	c1[0], c1[1], c1[2], c1[3] = c10, c11, c12, c13
}

// workspace is one goroutine's packing space: a block of A and a panel of
// B.
type workspace[T Float] struct{ a, b []T }

// The workspaces are pooled by element size, as raw float64 or float32
// buffers that getWorkspace views as the caller's type.
var workspaces64, workspaces32 sync.Pool

func getWorkspace[T Float]() *workspace[T] {
	const na, nb = (gemmMC + gemmMR - 1) / gemmMR * gemmMR * gemmKC, gemmKC * ((gemmNC + gemmNR - 1) / gemmNR * gemmNR)
	var z T
	if unsafe.Sizeof(z) == 8 {
		buf, _ := workspaces64.Get().(*[na + nb]float64)
		if buf == nil {
			buf = new([na + nb]float64)
		}
		return &workspace[T]{a: as[T](buf[:na]), b: as[T](buf[na:])}
	}
	buf, _ := workspaces32.Get().(*[na + nb]float32)
	if buf == nil {
		buf = new([na + nb]float32)
	}
	return &workspace[T]{a: as[T](buf[:na]), b: as[T](buf[na:])}
}

func putWorkspace[T Float](ws *workspace[T]) {
	const na, nb = (gemmMC + gemmMR - 1) / gemmMR * gemmMR * gemmKC, gemmKC * ((gemmNC + gemmNR - 1) / gemmNR * gemmNR)
	if unsafe.Sizeof(ws.a[0]) == 8 {
		workspaces64.Put((*[na + nb]float64)(unsafe.Pointer(&ws.a[0])))
		return
	}
	workspaces32.Put((*[na + nb]float32)(unsafe.Pointer(&ws.a[0])))
}

// as views a slice of a Float type as a slice of its underlying type U of
// the same size: the same memory, no copy.
func as[U, T Float](x []T) []U {
	if len(x) == 0 {
		return nil
	}
	return unsafe.Slice((*U)(unsafe.Pointer(&x[0])), len(x))
}
