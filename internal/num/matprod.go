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
// slivers of tileCols columns and tileRows rows, and a micro-kernel computes
// one tileRows × tileCols tile of C at a time in local variables (registers),
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
// The whole product (BenchmarkMatrixProduct, medians of 5 runs alternating with
// gonum's matrix product, GFLOP per second of CPU time on the shared machine, one
// core): 10.3 (gonum 9.5) on a 64-row block of attention scores Q·Kᵀ
// (64 × 1024, k = 128), 9.8 (gonum 10.1) on P·V (64 × 128, k = 1024), 10.2
// (gonum 8.3) on a 512³ product, 9.4 (gonum 7.2) on a feed-forward
// projection (256 × 1024, k = 4096). gonum's SSE2 assembly on amd64 does
// two products per instruction, but as dot products and axpys over
// unpacked rows; on arm64, ppc64le and s390x its matrix product is pure Go.

// The block sizes. tileRows × tileCols is the micro-tile: its 8 accumulators,
// the 2 values of A and 4 of B of one step fit in amd64's 15 usable
// floating-point registers (arm64, ppc64le and s390x have more); larger
// tiles spill (in the whole product, per CPU second: 3 × 4 7.9–8.1
// GFLOP/s, 2 × 5 7.3–8.2, 3 × 3 and 4 × 2 8.3–9.5, 2 × 4 9.1–10.5).
// panelDepth × panelCols values of B (256 KiB in float64) are packed at once, for
// the second-level cache, and panelRows × panelDepth of A (128 KiB); a sliver of
// B (panelDepth × tileCols) is reread from the first-level cache for every
// sliver of A. The speed
// hardly depends on them (kc from 128 to 512, mc from 32 to 128 and nc
// from 128 to 512 measured within 5%), and no result does. kernel and the
// full slivers of packA and packB are written out for tileRows = 2 and
// tileCols = 4.
const (
	tileRows   = 2
	tileCols   = 4
	panelDepth = 256
	panelRows  = 64
	panelCols  = 128
)

// fewRows is the number of rows of a block of C below which it is
// computed without packing (see unpacked).
const fewRows = 4

// parallelMin is the number of multiply-adds m·n·k below which MatrixProduct
// stays on the calling goroutine: starting workers would cost more than
// the product.
const parallelMin = 1 << 18

// MatrixProduct is C = α·op(A)·op(B) + β·C for row-major matrices, op(A) of m × k
// and op(B) of k × n, op transposing when tA (tB) is set, lda, ldb and ldc
// the row strides of the stored A, B and C. Each element is summed as the
// triple loop in the comment above sums it: starting from β·c (β = 0 does
// not read C, so a NaN there is overwritten), the k products fl(fl(α·a)·b)
// added in ascending order, each rounded before it is added. The result is
// the same bits on every architecture and for any GOMAXPROCS: C is split
// into blocks of panelRows × panelCols computed in parallel, and no sum is
// split. A float32 instantiation computes in float32 throughout (every
// product and sum rounded to float32); a type whose underlying type is
// float64 or float32 computes as that type.
//
// Accuracy: that of any ordered sum of rounded products, |fl(c) − c| ≤
// γ_{k+1}·(|β·c| + Σ_p |α·a_ip·b_pj|), γ_n = n·u/(1 − n·u) (Higham 2002,
// Accuracy and Stability of Numerical Algorithms, §3.1, Eq. (3.5)), with
// one more rounding for α ∉ {1} and one for β ∉ {0, 1}.
func MatrixProduct[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	if m <= 0 || n <= 0 {
		return
	}
	g := productArgs[T]{tA: tA, tB: tB, k: k, alpha: alpha, beta: beta, a: a, lda: lda, b: b, ldb: ldb, c: c, ldc: ldc}
	bm, bn := (m+panelRows-1)/panelRows, (n+panelCols-1)/panelCols
	tiles := bm * bn
	workers := min(runtime.GOMAXPROCS(0), tiles)
	if workers <= 1 || float64(m)*float64(n)*float64(k) < parallelMin {
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
				i0, j0 := t/bn*panelRows, t%bn*panelCols
				g.block(i0, min(i0+panelRows, m), j0, min(j0+panelCols, n))
			}
		}()
	}
	wg.Wait()
}

// MatrixProductSerial is MatrixProduct computed on the calling goroutine: for a caller that
// is already parallel over independent products, where nested parallelism
// only adds scheduling and cache contention. Its results are MatrixProduct's, bit
// for bit.
func MatrixProductSerial[T Float](tA, tB bool, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	if m <= 0 || n <= 0 {
		return
	}
	g := productArgs[T]{tA: tA, tB: tB, k: k, alpha: alpha, beta: beta, a: a, lda: lda, b: b, ldb: ldb, c: c, ldc: ldc}
	g.block(0, m, 0, n)
}

// productArgs are the operands of one product.
type productArgs[T Float] struct {
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
func (g *productArgs[T]) block(i0, i1, j0, j1 int) {
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
	if i1-i0 < fewRows {
		g.unpacked(i0, i1, j0, j1)
		return
	}
	ws := getWorkspace[T]()
	defer putWorkspace(ws)
	var tile [tileRows * tileCols]T
	for jc := j0; jc < j1; jc += panelCols {
		nb := min(panelCols, j1-jc)
		for pc := 0; pc < g.k; pc += panelDepth {
			kb := min(panelDepth, g.k-pc)
			pb := g.packB(ws.b, pc, kb, jc, nb)
			for ic := i0; ic < i1; ic += panelRows {
				mb := min(panelRows, i1-ic)
				pa := g.packA(ws.a, ic, mb, pc, kb)
				for jr := 0; jr < nb; jr += tileCols {
					bs := pb[jr*kb:][:tileCols*kb]
					for ir := 0; ir < mb; ir += tileRows {
						as := pa[ir*kb:][:tileRows*kb]
						ci := (ic+ir)*g.ldc + jc + jr
						if ir+tileRows <= mb && jr+tileCols <= nb {
							kernel(kb, as, bs, g.c[ci:], g.ldc)
							continue
						}
						// An edge tile: through a full tile in memory.
						rows, cols := min(tileRows, mb-ir), min(tileCols, nb-jr)
						clear(tile[:])
						for r := range rows {
							copy(tile[r*tileCols:][:cols], g.c[ci+r*g.ldc:][:cols])
						}
						kernel(kb, as, bs, tile[:], tileCols)
						for r := range rows {
							copy(g.c[ci+r*g.ldc:][:cols], tile[r*tileCols:][:cols])
						}
					}
				}
			}
		}
	}
}

// unpacked computes the rows i0 … i1−1 and columns j0 … j1−1 of C (β
// applied already) without packing, reading A and B where they lie: for a
// product of fewer than fewRows rows each element of B is used by fewer
// than fewRows products, and copying it would cost about as much as
// using it (one query row of attention against a long key cache). Each
// element's sum is in the same order as block's: with B transposed, eight
// dot products at a time along rows of B; otherwise row p of B added to
// the row of C, p ascending, so that B is read once, row by row.
func (g *productArgs[T]) unpacked(i0, i1, j0, j1 int) {
	k, alpha := g.k, g.alpha
	for i := i0; i < i1; i++ {
		at := func(p int) T { // α·op(A)[i][p]
			var x T
			if g.tA {
				x = g.a[p*g.lda+i]
			} else {
				x = g.a[i*g.lda+p]
			}
			if alpha != 1 {
				x = T(alpha * x)
			}
			return x
		}
		crow := g.c[i*g.ldc+j0 : i*g.ldc+j1]
		if !g.tB {
			for p := range k {
				x := at(p)
				brow := g.b[p*g.ldb+j0:][:len(crow)]
				for j, y := range brow {
					crow[j] += T(x * y)
				}
			}
			continue
		}
		j := 0
		for ; j+8 <= len(crow); j += 8 { // op(B)[p][j] = B[j][p]: eight rows of B side by side
			jb := j0 + j
			b0, b1, b2, b3 := g.b[jb*g.ldb:][:k], g.b[(jb+1)*g.ldb:][:k], g.b[(jb+2)*g.ldb:][:k], g.b[(jb+3)*g.ldb:][:k]
			b4, b5, b6, b7 := g.b[(jb+4)*g.ldb:][:k], g.b[(jb+5)*g.ldb:][:k], g.b[(jb+6)*g.ldb:][:k], g.b[(jb+7)*g.ldb:][:k]
			c := (*[8]T)(crow[j:])
			c0, c1, c2, c3, c4, c5, c6, c7 := c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]
			for p := range k {
				x := at(p)
				c0 += T(x * b0[p])
				c1 += T(x * b1[p])
				c2 += T(x * b2[p])
				c3 += T(x * b3[p])
				c4 += T(x * b4[p])
				c5 += T(x * b5[p])
				c6 += T(x * b6[p])
				c7 += T(x * b7[p])
			}
			c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7] = c0, c1, c2, c3, c4, c5, c6, c7
		}
		for ; j < len(crow); j++ {
			s, bj := crow[j], g.b[(j0+j)*g.ldb:][:k]
			for p, y := range bj {
				s += T(at(p) * y)
			}
			crow[j] = s
		}
	}
}

// packA copies rows i0 … i0+mb−1, columns p0 … p0+kb−1 of α·op(A) into
// dst as slivers of tileRows rows: sliver s holds, for p = 0 … kb−1, the
// tileRows values of column p0+p in rows i0+s·tileRows …, rows past the end
// zero.
func (g *productArgs[T]) packA(dst []T, i0, mb, p0, kb int) []T {
	n := (mb + tileRows - 1) / tileRows * tileRows * kb
	dst = dst[:n]
	for s := 0; s*tileRows < mb; s++ {
		sl := dst[s*tileRows*kb:][:tileRows*kb]
		if i := i0 + s*tileRows; i+tileRows <= i0+mb { // a full sliver: both rows in one pass
			alpha := g.alpha
			for p := range kb {
				var x0, x1 T
				if g.tA { // op(A)[i][p] = A[p][i]: two neighbours in a row of A
					r := (*[tileRows]T)(g.a[(p0+p)*g.lda+i:])
					x0, x1 = r[0], r[1]
				} else {
					x0, x1 = g.a[i*g.lda+p0+p], g.a[(i+1)*g.lda+p0+p]
				}
				if alpha != 1 {
					x0, x1 = T(alpha*x0), T(alpha*x1)
				}
				d := (*[tileRows]T)(sl[p*tileRows:])
				d[0], d[1] = x0, x1
			}
			continue
		}
		for r := range tileRows { // the last sliver, rows past the end zero
			i := i0 + s*tileRows + r
			if i >= i0+mb {
				for p := range kb {
					sl[p*tileRows+r] = 0
				}
				continue
			}
			if g.tA { // op(A)[i][p] = A[p][i]
				at := g.a[p0*g.lda+i:]
				for p := range kb {
					sl[p*tileRows+r] = at[p*g.lda]
				}
			} else {
				row := g.a[i*g.lda+p0:][:kb]
				for p, x := range row {
					sl[p*tileRows+r] = x
				}
			}
			if g.alpha != 1 {
				for p := range kb {
					sl[p*tileRows+r] = T(g.alpha * sl[p*tileRows+r])
				}
			}
		}
	}
	return dst
}

// packB copies rows p0 … p0+kb−1, columns j0 … j0+nb−1 of op(B) into dst
// as slivers of tileCols columns: sliver s holds, for p = 0 … kb−1, the
// tileCols values of row p0+p in columns j0+s·tileCols …, columns past the end
// zero.
func (g *productArgs[T]) packB(dst []T, p0, kb, j0, nb int) []T {
	n := (nb + tileCols - 1) / tileCols * tileCols * kb
	dst = dst[:n]
	for s := 0; s*tileCols < nb; s++ {
		sl := dst[s*tileCols*kb:][:tileCols*kb]
		cols := min(tileCols, nb-s*tileCols)
		j := j0 + s*tileCols
		switch {
		case cols == tileCols && g.tB: // op(B)[p][j] = B[j][p]: four rows of B side by side
			r0, r1 := g.b[j*g.ldb+p0:][:kb], g.b[(j+1)*g.ldb+p0:][:kb]
			r2, r3 := g.b[(j+2)*g.ldb+p0:][:kb], g.b[(j+3)*g.ldb+p0:][:kb]
			for p := range kb {
				d := (*[tileCols]T)(sl[p*tileCols:])
				d[0], d[1], d[2], d[3] = r0[p], r1[p], r2[p], r3[p]
			}
			continue
		case cols == tileCols:
			for p := range kb {
				b := (*[tileCols]T)(g.b[(p0+p)*g.ldb+j:])
				d := (*[tileCols]T)(sl[p*tileCols:])
				d[0], d[1], d[2], d[3] = b[0], b[1], b[2], b[3]
			}
			continue
		case g.tB:
			for cc := range tileCols {
				if cc >= cols {
					for p := range kb {
						sl[p*tileCols+cc] = 0
					}
					continue
				}
				col := g.b[(j+cc)*g.ldb+p0:][:kb]
				for p, x := range col {
					sl[p*tileCols+cc] = x
				}
			}
			continue
		}
		for p := range kb { // a last sliver of fewer than tileCols columns
			dp := sl[p*tileCols:][:tileCols]
			copy(dp, g.b[(p0+p)*g.ldb+j:][:cols])
			clear(dp[cols:])
		}
	}
	return dst
}

// kernel adds to the tileRows × tileCols tile of c (row stride ldc) the
// product of the packed slivers a (kc steps of tileRows values) and b (kc
// steps of tileCols values), one rounded product and one addition per step
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
	c0, c1 := c[:tileCols], c[ldc:][:tileCols]
	c00, c01, c02, c03 := c0[0], c0[1], c0[2], c0[3]
	c10, c11, c12, c13 := c1[0], c1[1], c1[2], c1[3]
	a = a[:tileRows*kc]
	b = b[:tileCols*kc]
	if kc > 0 {
		pa, pb := unsafe.Pointer(&a[0]), unsafe.Pointer(&b[0])
		var z T
		sz := unsafe.Sizeof(z)
		for p := 1; ; p++ {
			av := (*[tileRows]T)(pa)
			bv := (*[tileCols]T)(pb)
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
			pa = unsafe.Add(pa, tileRows*sz)
			pb = unsafe.Add(pb, tileCols*sz)
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
	const na, nb = (panelRows + tileRows - 1) / tileRows * tileRows * panelDepth, panelDepth * ((panelCols + tileCols - 1) / tileCols * tileCols)
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
	const na, nb = (panelRows + tileRows - 1) / tileRows * tileRows * panelDepth, panelDepth * ((panelCols + tileCols - 1) / tileCols * tileCols)
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
