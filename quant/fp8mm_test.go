package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// randomFP8 returns a [rows, cols] matrix of finite codes of f with random
// float32 scales placed by g and c.
func randomFP8(r *rand.Rand, rows, cols int, f compare.Format, g Granularity, c Channel) FP8Matrix {
	m := FP8Matrix{Rows: rows, Cols: cols, Format: f, Granularity: g, Channel: c, Codes: make([]uint8, rows*cols)}
	for i := range m.Codes {
		for {
			b := uint8(r.IntN(256))
			if v, _ := f.Decode(uint64(b)); !math.IsNaN(v) && !math.IsInf(v, 0) {
				m.Codes[i] = b
				break
			}
		}
	}
	n := 1
	if g == PerChannel && c == ChannelRows {
		n = rows
	} else if g == PerChannel {
		n = cols
	}
	for range n {
		m.Scales = append(m.Scales, float64(float32(math.Ldexp(1+r.Float64(), r.IntN(20)-15))))
	}
	return m
}

func TestDecodeFP8WorkedValues(t *testing.T) {
	// OFP8 rev 1.0 bit layouts, derived by hand: E4M3 0x38 = 0.0111.000 =
	// 2^(7−7) = 1; 0xC4 = 1.1000.100 = −2^(8−7)·1.5 = −3; 0x7E = 448, the
	// largest. E5M2 0x3C = 0.01111.00 = 1; 0x7B = 57344, the largest.
	m := FP8Matrix{Rows: 1, Cols: 3, Format: compare.E4M3, Codes: []uint8{0x38, 0xC4, 0x7E}, Scales: []float64{0.5}}
	v, err := DecodeFP8(m)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0.5, -1.5, 224}, v)
	m = FP8Matrix{Rows: 2, Cols: 1, Format: compare.E5M2, Granularity: PerChannel, Codes: []uint8{0x3C, 0x7B}, Scales: []float64{2, 0.25}}
	v, err = DecodeFP8(m)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{2, 14336}, v)
}

func TestMatMulFP8IsTheExactProductRoundedOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	const m, k, n = 4, 19, 3
	for _, fa := range []compare.Format{compare.E4M3, compare.E5M2} {
		for _, fb := range []compare.Format{compare.E4M3, compare.E5M2} {
			for _, ga := range []Granularity{PerTensor, PerChannel} {
				for _, gb := range []Granularity{PerTensor, PerChannel} {
					a := randomFP8(r, m, k, fa, ga, ChannelRows)
					b := randomFP8(r, k, n, fb, gb, ChannelCols)
					da, _ := DecodeFP8(a)
					db, _ := DecodeFP8(b)
					for _, out := range []compare.Format{compare.Float64, compare.Float32, compare.Binary16, compare.BFloat16} {
						y, err := MatMulFP8(a, b, out)
						ensure.NoError(t, err)
						for i := range m {
							for j := range n {
								e := new(big.Rat)
								for p := range k {
									e.Add(e, new(big.Rat).Mul(rat(da[i*k+p]), rat(db[p*n+j])))
								}
								expect.Equal(t, nearestIn(out, e), y[i*n+j], fa, fb, ga, gb, out, i, j)
							}
						}
					}
				}
			}
		}
	}
}

func TestMatMulFP8ScalesFollowTheirAxis(t *testing.T) {
	// a = [[1, 1], [1, 1]] in E4M3 (0x38) with row scales 2 and 3; b the
	// identity (0x38, 0x00) with column scales 5 and 7: out[i, j] = sa[i]·sb[j].
	a := FP8Matrix{Rows: 2, Cols: 2, Format: compare.E4M3, Granularity: PerChannel, Channel: ChannelRows, Codes: []uint8{0x38, 0x38, 0x38, 0x38}, Scales: []float64{2, 3}}
	b := FP8Matrix{Rows: 2, Cols: 2, Format: compare.E4M3, Granularity: PerChannel, Channel: ChannelCols, Codes: []uint8{0x38, 0, 0, 0x38}, Scales: []float64{5, 7}}
	y, err := MatMulFP8(a, b, compare.Float64)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{10, 14, 15, 21}, y)
}

func TestMatMulFP8Errors(t *testing.T) {
	a := FP8Matrix{Rows: 1, Cols: 2, Format: compare.E4M3, Codes: []uint8{0x38, 0x38}, Scales: []float64{1}}
	b := FP8Matrix{Rows: 2, Cols: 1, Format: compare.E5M2, Codes: []uint8{0x3C, 0x3C}, Scales: []float64{1}}
	_, err := MatMulFP8(a, b, compare.Float64)
	ensure.NoError(t, err)
	for _, c := range []struct {
		name string
		edit func(a, b *FP8Matrix) compare.Format
		want error
	}{
		{"format", func(a, _ *FP8Matrix) compare.Format { a.Format = compare.Binary16; return compare.Float64 }, ErrOption},
		{"out", func(_, _ *FP8Matrix) compare.Format { return compare.Format(-1) }, ErrOption},
		{"inner", func(_, b *FP8Matrix) compare.Format { b.Rows, b.Codes = 1, b.Codes[:1]; return compare.Float64 }, ErrSize},
		{"codes", func(a, _ *FP8Matrix) compare.Format { a.Codes = a.Codes[:1]; return compare.Float64 }, ErrLength},
		{"scales", func(a, _ *FP8Matrix) compare.Format { a.Scales = nil; return compare.Float64 }, ErrLength},
		{"scale zero", func(a, _ *FP8Matrix) compare.Format { a.Scales = []float64{0}; return compare.Float64 }, ErrScale},
		{"scale not float32", func(a, _ *FP8Matrix) compare.Format { a.Scales = []float64{0.1}; return compare.Float64 }, ErrScale},
		{"per-column a", func(a, _ *FP8Matrix) compare.Format {
			a.Granularity, a.Channel, a.Scales = PerChannel, ChannelCols, []float64{1, 1}
			return compare.Float64
		}, ErrOption},
		{"per-group", func(a, _ *FP8Matrix) compare.Format { a.Granularity = PerGroup; return compare.Float64 }, ErrOption},
		{"negative", func(a, _ *FP8Matrix) compare.Format { a.Rows = -1; return compare.Float64 }, ErrSize},
	} {
		a2, b2 := a, b
		a2.Codes, b2.Codes = append([]uint8(nil), a.Codes...), append([]uint8(nil), b.Codes...)
		out := c.edit(&a2, &b2)
		_, err := MatMulFP8(a2, b2, out)
		expect.ErrorIs(t, err, c.want, c.name)
	}
}

func TestMatMulInt8ToRoundsOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(23, 24))
	const m, k, n = 3, 40, 5
	for _, sa := range []Scheme{{}, {Granularity: PerChannel, Symmetry: Asymmetric}} {
		for _, sb := range []Scheme{{}, {Granularity: PerChannel, Channel: ChannelCols, Scale: ScaleBinary16}} {
			a, b := randomCodes(r, m, k, sa), randomCodes(r, k, n, sb)
			acc0, y0, err := MatMulInt8(a, b)
			ensure.NoError(t, err)
			ga, _ := newGrid("", m, k, sa)
			gb, _ := newGrid("", k, n, sb)
			for _, out := range []compare.Format{compare.Float64, compare.Float32, compare.Binary16, compare.BFloat16} {
				acc, y, err := MatMulInt8To(a, b, out)
				ensure.NoError(t, err)
				expect.Equal(t, acc0, acc)
				for i := range m {
					for j := range n {
						e := new(big.Rat).Mul(rat(a.Scales[ga.block(i, 0)]), rat(b.Scales[gb.block(0, j)]))
						e.Mul(e, new(big.Rat).SetInt64(int64(acc[i*n+j])))
						expect.Equal(t, nearestIn(out, e), y[i*n+j], out)
						if out == compare.Float64 {
							expect.Equal(t, y0[i*n+j], y[i*n+j])
						}
					}
				}
			}
		}
	}
	_, _, err := MatMulInt8To(Tensor{}, Tensor{}, compare.Format(99))
	expect.ErrorIs(t, err, ErrOption)
}
