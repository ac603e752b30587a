package main

import (
	"bytes"
	"encoding/json"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
)

// readPNG decodes the PNG at path.
func readPNG(t *testing.T, path string) image.Image {
	t.Helper()
	f, err := os.Open(path)
	ensure.NoError(t, err)
	defer f.Close()
	img, err := png.Decode(f)
	ensure.NoError(t, err)
	return img
}

// rgba is the colour of the pixel (x, y).
func rgba(img image.Image, x, y int) color.RGBA {
	return color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
}

// cellCentre is the centre pixel of the grid cell (r, c) of an unpooled
// picture.
func cellCentre(h *heatmapInfo, r, c int) (x, y int) {
	return h.grid.Min.X + c*h.cellW + h.cellW/2, h.grid.Min.Y + r*h.cellH + h.cellH/2
}

// drawn renders the heatmap of ref and got into a temporary file and
// returns what it drew and the decoded picture.
func drawn(t *testing.T, ref, got []float64, shape []int, tol *compare.Tolerance) (*heatmapInfo, image.Image) {
	t.Helper()
	rep, err := compare.Diff(ref, got, shape, compare.Options{Tolerance: tol})
	ensure.NoError(t, err)
	path := filepath.Join(t.TempDir(), "h.png")
	h, err := drawHeatmap(path, ref, got, shape, rep, "got.npy")
	ensure.NoError(t, err)
	return h, readPNG(t, path)
}

// The slice drawn is the one holding the largest absolute error, not the
// one of the report's first worst element (ranked by how far it exceeds
// the tolerance); its cell is boxed and coloured by its error.
func TestHeatmapSliceOfLargestError(t *testing.T) {
	shape := []int{3, 2, 4}
	ref := make([]float64, 24)
	for i := range ref {
		ref[i] = 1
	}
	got := append([]float64(nil), ref...)
	ref[1*8+1*4+2], got[1*8+1*4+2] = 100, 105 // abs error 5, within rel 0.1 of 100
	ref[2*8+3], got[2*8+3] = 0.01, 0.02       // abs error 0.01, ten times its allowed 0.001
	tol := &compare.Tolerance{Rel: 0.1}
	rep, err := compare.Diff(ref, got, shape, compare.Options{Tolerance: tol})
	ensure.NoError(t, err)
	ensure.Equal(t, []int{2, 0, 3}, rep.Worst[0].Index, "the report ranks the small element first")

	h, img := drawn(t, ref, got, shape, tol)
	expect.Equal(t, "[1 : :] of shape [3 2 4]", h.where)
	expect.Equal(t, []int{1, 1, 2}, h.worstAt)
	expect.Equal(t, 5.0, h.worstErr)
	expect.False(t, h.pooled)

	// The cell is painted its error's colour, the others (exact) the
	// bottom colour.
	x, y := cellCentre(h, 0, 0)
	expect.Equal(t, rampColour(0), rgba(img, x, y))
	x, y = cellCentre(h, 1, 2)
	expect.Equal(t, rampColour(h.scale.at(5)), rgba(img, x, y))
	// The box round it: its colour just outside the cell's edge.
	left := h.grid.Min.X + 2*h.cellW
	expect.Equal(t, boxColour, rgba(img, left-2, y), "the box's left side")
	// Nothing is boxed elsewhere on the grid.
	box := image.Rect(left-3, y-h.cellH/2-3, left+h.cellW+3, y+h.cellH/2+3)
	for py := h.grid.Min.Y - 4; py < h.grid.Max.Y+4; py++ {
		for px := h.grid.Min.X - 4; px < h.grid.Max.X+4; px++ {
			if rgba(img, px, py) == boxColour && !image.Pt(px, py).In(box) {
				t.Fatalf("box colour at (%d, %d), outside the box %v", px, py, box)
			}
		}
	}
}

// The tolerance is marked on the colour bar at its value: one line for an
// absolute tolerance, two (the least and the largest allowed over the
// slice) when it is relative.
func TestHeatmapToleranceMark(t *testing.T) {
	ref := []float64{1, 2, 3, 4, 5, 6}
	got := []float64{1.001, 2, 3.002, 4, 5, 6.0005}
	for _, tc := range []struct {
		name     string
		tol      compare.Tolerance
		lo, hi   float64
		nMarks   int
		logScale bool
	}{
		{"absolute", compare.Tolerance{Abs: 0.0015}, 0.0015, 0.0015, 1, false},
		{"relative", compare.Tolerance{Rel: 0.0005}, 0.0005, 0.003, 2, false},
		{"far below the errors", compare.Tolerance{Abs: 1e-6}, 1e-6, 1e-6, 1, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			h, img := drawn(t, ref, got, []int{2, 3}, &tc.tol)
			ensure.True(t, h.hasTol)
			expect.InDelta(t, tc.lo, h.tlo, 1e-15)
			expect.InDelta(t, tc.hi, h.thi, 1e-15)
			expect.Equal(t, tc.logScale, h.scale.log)
			// Beside the bar, at the height of each bound, the line.
			marks := 0
			for y := h.bar.Min.Y; y < h.bar.Max.Y; y++ {
				if rgba(img, h.bar.Min.X-4, y) == tolColour && rgba(img, h.bar.Min.X-4, y-1) != tolColour {
					marks++
				}
			}
			expect.Equal(t, tc.nMarks, marks)
			want := h.bar.Min.Y + int(math.Round((1-h.scale.at(h.thi))*float64(h.bar.Dy()-1)))
			expect.Equal(t, tolColour, rgba(img, h.bar.Min.X-4, want))
			// The tolerance stays visible: neither squeezed to the bottom
			// of the bar nor off its top.
			expect.Greater(t, h.scale.at(h.tlo), 0.05)
			expect.LessOrEqual(t, h.scale.at(h.thi), 1.0)
		})
	}
}

// The scale: linear while the errors and the tolerance are of one size,
// logarithmic when a linear bar would hide the errors near the tolerance
// (one error a thousand times larger) or most errors.
func TestHeatmapScale(t *testing.T) {
	errs := func(v ...float64) ([]float64, []bool) { return v, make([]bool, len(v)) }
	e, m := errs(1e-3, 2e-3, 3e-3, 1.5e-3)
	expect.False(t, pickScale(e, m, 3e-3, 2e-3, 2e-3, true).log)
	e, m = errs(1e-3, 2e-3, 3e-3, 1.5)
	s := pickScale(e, m, 1.5, 2e-3, 2e-3, true)
	ensure.True(t, s.log)
	expect.Equal(t, 1e-4, s.lo, "a decade below the tolerance")
	expect.Equal(t, 10.0, s.hi)
	expect.InDelta(t, (math.Log10(2e-3)+4)/5, s.at(2e-3), 1e-12, "an error at the tolerance is in the bar's middle")
	expect.Equal(t, 0.0, s.at(0), "exact cells at the bottom")
	// Without a tolerance, by the errors alone.
	e, m = errs(1e-9, 2e-9, 1e-9, 1)
	expect.True(t, pickScale(e, m, 1, 0, 0, false).log)
	e, m = errs(0.5, 0.7, 0.2, 1)
	s = pickScale(e, m, 1, 0, 0, false)
	expect.False(t, s.log)
	expect.InDeltaSlice(t, []float64{0, 0.2, 0.4, 0.6, 0.8, 1}, s.ticks(), 1e-15)
	// All exact: a linear bar from 0 to 1.
	e, m = errs(0, 0)
	expect.Equal(t, colourScale{hi: 1}, pickScale(e, m, 0, 0, 0, false))
	// Many decades are labelled every few.
	s = colourScale{log: true, lo: 1e-16, hi: 1}
	expect.Equal(t, []float64{1, 1e-3, 1e-6, 1e-9, 1e-12, 1e-15}, s.ticks())
}

// A NaN where the reference has a number is the largest error: its slice
// is drawn, its cell in the mismatch colour and boxed; matching NaNs are
// exact.
func TestHeatmapNaN(t *testing.T) {
	ref := []float64{1, 2, math.NaN(), 4, 5, 6, 1, 1, 1, 1, 1, 1}
	got := []float64{1, 2, math.NaN(), 4.5, 5, 6, 1, 1, math.NaN(), 1, 1, 1}
	h, img := drawn(t, ref, got, []int{2, 2, 3}, nil)
	expect.Equal(t, "[1 : :] of shape [2 2 3]", h.where)
	expect.True(t, h.mismatch)
	expect.Equal(t, []int{1, 0, 2}, h.worstAt)
	expect.Equal(t, 1, h.mismatches)
	x, y := cellCentre(h, 0, 2)
	expect.Equal(t, mismatchColour, rgba(img, x, y))

	s, err := sliceOf(ref, got, []int{2, 2, 3})
	ensure.NoError(t, err)
	expect.Equal(t, []int{1}, s.lead)
	expect.Equal(t, []float64{0, 0, math.Inf(1), 0, 0, 0}, s.err)
	s, err = sliceOf(ref[:6], got[:6], []int{2, 3})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0, 0, 0, 0.5, 0, 0}, s.err, "NaN against NaN matches")
	expect.Nil(t, s.lead)
}

// A slice larger than the picture is pooled: each drawn cell shows the
// largest error of the elements it covers, so one bad element among
// millions still shows, boxed.
func TestHeatmapPooled(t *testing.T) {
	rows, cols := 1500, 2000
	ref := make([]float64, rows*cols)
	got := make([]float64, rows*cols)
	for i := range got {
		got[i] = 1e-9 * float64(i%7)
	}
	got[777*cols+1234] = 0.5
	h, img := drawn(t, ref, got, []int{rows, cols}, &compare.Tolerance{Abs: 1e-3})
	ensure.True(t, h.pooled)
	expect.LessOrEqual(t, img.Bounds().Dx(), 1200)
	expect.LessOrEqual(t, img.Bounds().Dy(), 900)
	expect.Equal(t, []int{777, 1234}, h.worstAt)
	pr, pc := 777*h.gridRows/rows, 1234*h.gridCols/cols
	x := h.grid.Min.X + pc*h.cellW + h.cellW/2
	y := h.grid.Min.Y + pr*h.cellH + h.cellH/2
	expect.Equal(t, rampColour(h.scale.at(0.5)), rgba(img, x, y))
	expect.Contains(t, h.String(), "each of 560 × 720 cells shows the largest error of the elements it covers")
}

// Rank 0 and 1 tensors are drawn as one row; the picture keeps a readable
// size.
func TestHeatmapSmallRanks(t *testing.T) {
	h, img := drawn(t, []float64{2}, []float64{2.5}, []int{}, nil)
	expect.Equal(t, "the whole tensor, shape []", h.where)
	expect.Equal(t, []int{}, h.worstAt)
	expect.GreaterOrEqual(t, h.grid.Dx(), minPlot)
	expect.Greater(t, img.Bounds().Dx(), 300)

	h, _ = drawn(t, []float64{1, 2, 3}, []float64{1, 2, 3}, []int{3}, nil)
	expect.True(t, h.exact, "every pair matches")
	expect.Contains(t, h.String(), "every pair matches")
	expect.GreaterOrEqual(t, h.grid.Dy(), minPlot)
}

// Bad input is an error naming the file, never a panic.
func TestHeatmapErrors(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "h.png")
	for _, tc := range []struct {
		name     string
		ref, got []float64
		shape    []int
		says     string
	}{
		{"empty", nil, nil, []int{0, 3}, "the tensors are empty (shape [0 3])"},
		{"lengths", []float64{1, 2}, []float64{1}, []int{2}, "the tensors have 2 and 1 elements; want 2 each"},
		{"shape", []float64{1, 2}, []float64{1, 2}, []int{3}, "want 3 each, the elements of shape [3]"},
		{"negative", []float64{1}, []float64{1}, []int{-1}, "shape[0] = -1; want ≥ 0"},
		{"overflow", []float64{1}, []float64{1}, []int{math.MaxInt / 2, 4}, "holds more elements than an int counts"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := drawHeatmap(p, tc.ref, tc.got, tc.shape, nil, "c")
			ensure.Error(t, err)
			expect.Contains(t, err.Error(), p+": ")
			expect.Contains(t, err.Error(), tc.says)
		})
	}
	_, err := drawHeatmap(dir, []float64{1}, []float64{2}, nil, nil, "c")
	expect.ErrorContains(t, err, "is a directory")
	_, err = os.Stat(p)
	expect.True(t, os.IsNotExist(err), "no picture is left behind")
}

// Every glyph of the font is 7 rows of 5 dots, has ink (but the space),
// and differs from every other; every character the picture writes is in
// the font, lower case as upper case.
func TestHeatmapFont(t *testing.T) {
	seen := map[glyph]rune{}
	for r, rows := range glyphRows {
		lines := strings.Fields(rows)
		ensure.Len(t, lines, glyphH, "%q", r)
		for _, l := range lines {
			ensure.Len(t, l, glyphW, "%q", r)
			ensure.Equal(t, "", strings.Trim(l, ".#"), "%q", r)
		}
		g, ok := font[r]
		ensure.True(t, ok, "%q", r)
		if r != ' ' {
			expect.NotEqual(t, glyph{}, g, "%q has no ink", r)
		}
		if o, dup := seen[g]; dup {
			t.Errorf("%q and %q are drawn alike", r, o)
		}
		seen[g] = r
	}
	for _, r := range "abcdefghijklmnopqrstuvwxyz" {
		expect.Equal(t, font[r-'a'+'A'], glyphOf(r))
	}
	expect.Equal(t, font['-'], glyphOf('−'))
	expect.Equal(t, font['?'], glyphOf('€'))
	// What the picture writes: every rune is in the font.
	for _, s := range []string{
		"ABSOLUTE ERROR |GOT - REF| OVER [0 2 : :] OF SHAPE [1 8 6 8]", "CANDIDATE port_out.npy",
		"BOXED: LARGEST ERROR 0.5 AT [0 2 4 1]", "A NAN/INF MISMATCH", "LOG SCALE", "LINEAR SCALE", "TOL HI", "TOL LO",
		"1E-5", "2.5E3", "COLUMNS: THE LAST DIMENSION, 0-7. ROWS: DIMENSION 2, 0-5", "(6000X8000 SHOWN AS 560X720)",
	} {
		for _, r := range strings.ToUpper(s) {
			_, ok := font[r]
			expect.True(t, ok, "%q of %q", r, s)
		}
	}
	// Text is drawn: "0" and "O" differ on the picture.
	a := image.NewRGBA(image.Rect(0, 0, 20, 20))
	b := image.NewRGBA(image.Rect(0, 0, 20, 20))
	drawText(a, 0, 0, "0", inkColour)
	drawText(b, 0, 0, "O", inkColour)
	expect.NotEqual(t, a.Pix, b.Pix)
	expect.Equal(t, 2*charW-fontScale, textWidth("ab"))
}

func TestNumLabel(t *testing.T) {
	for x, want := range map[float64]string{0: "0", 1: "1", 0.25: "0.25", 1e-5: "1E-5", 2500: "2.5E3", 1e100: "1E100", -3e-7: "-3E-7", 10: "10"} {
		expect.Equal(t, want, numLabel(x, 2), "%g", x)
	}
}

// plumb diff -heatmap: the picture, and a note on standard error naming
// the slice (the largest absolute error's); with -json, standard output
// stays one JSON object.
func TestDiffHeatmap(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy")
	ref := readNPY(t, filepath.Join(dir, "out.npy"))
	bad := append([]float64(nil), ref.Data...)
	bad[2*6*8+4*8+1] -= 0.5
	writeNPY(t, filepath.Join(dir, "bad.npy"), npy.Float64, ref.Shape, bad)
	o, e := must(t, dir, 1, "diff", "-json", "-heatmap", "h.png", "out.npy", "bad.npy")
	expect.True(t, json.Valid([]byte(o)), o)
	expect.Contains(t, e, "heatmap h.png: |got − ref| over [0 2 : :] of shape [1 4 6 8], the slice holding the largest absolute error")
	expect.Contains(t, e, "0.5 at [0 2 4 1] (boxed)")
	img := readPNG(t, filepath.Join(dir, "h.png"))
	expect.Greater(t, img.Bounds().Dx(), 500)

	// The picture is the one drawHeatmap draws.
	tol := defaultTolerance(compare.Float64, ref.Data)
	rep, err := compare.Diff(ref.Data, bad, ref.Shape, compare.Options{Tolerance: &tol})
	ensure.NoError(t, err)
	var notes bytes.Buffer
	heatmapNotes = &notes
	defer func() { heatmapNotes = os.Stderr }()
	ensure.NoError(t, writeHeatmap(filepath.Join(dir, "h2.png"), ref.Data, bad, ref.Shape, rep, "bad.npy"))
	expect.Contains(t, notes.String(), "over [0 2 : :] of shape [1 4 6 8]")
	b1, err := os.ReadFile(filepath.Join(dir, "h.png"))
	ensure.NoError(t, err)
	b2, err := os.ReadFile(filepath.Join(dir, "h2.png"))
	ensure.NoError(t, err)
	expect.Equal(t, b1, b2)
}

// plumb help diff describes the picture.
func TestHelpDescribesHeatmap(t *testing.T) {
	o, _ := must(t, t.TempDir(), 0, "help", "diff")
	expect.Equal(t, 1, strings.Count(o, "The -heatmap picture"))
	expect.Contains(t, o, "holds the largest absolute error")
	expect.Contains(t, o, "the tolerance\nis marked on the colour bar")
}
