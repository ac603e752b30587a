package main

import (
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
)

// This file draws the picture of plumb diff -heatmap with the standard
// library alone: |got − ref| over one 2-D slice of the tensors as a grid of
// coloured cells, a colour bar with its scale and the tolerance marked on
// it, the cell of the largest error boxed, and the few words and numbers
// that make the picture readable on its own, in a 5×7 bitmap font of this
// file.

// heatmapAbout is the paragraph of plumb help diff on the picture; init
// appends it to the help of diff (declared in diff.go, whose init runs
// first: the go command initialises a package's files in name order).
const heatmapAbout = `
The -heatmap picture (PNG) shows |got − ref| over the 2-D slice of the
last two dimensions that holds the largest absolute error (a NaN or Inf
mismatch counting as the largest), and standard error names that slice.
The colour scale is linear while the errors and the tolerance are of one
size, and logarithmic (powers of ten) when a linear one would squeeze the
errors near the tolerance, or most errors, into its bottom; the tolerance
is marked on the colour bar (its least and largest value over the slice
when it grows with |ref|), the cell of the largest error is boxed, NaN and
Inf mismatches are cyan, and a slice too large for the picture is pooled,
each cell showing the largest error of the elements it covers.
`

// heatmapNotes is where writeHeatmap says which slice it drew and on which
// scale (standard error: standard output may be the report's JSON).
var heatmapNotes io.Writer = os.Stderr

// errSlice is |got − ref| over one 2-D slice (the last two dimensions) of
// the tensors: rows × cols cells, row-major, row 0 at the top.
type errSlice struct {
	shape      []int // the tensors' shape
	lead       []int // the leading index of the slice; nil for a tensor of rank ≤ 2
	start      int   // the flat offset of the slice's first element
	rows, cols int
	// err is |got − ref| of each cell: 0 where the pair matches (NaN with
	// NaN, an infinity with the same infinity), +Inf where one value is NaN
	// or ±Inf and the other is not (mismatch says which), and
	// math.MaxFloat64 where the difference of two finite values overflows.
	err      []float64
	mismatch []bool
	// worst is the cell of the largest error (a mismatch counts as larger
	// than any finite error), the first such in row-major order; −1 when
	// every cell matches.
	worst int
	// ref is the reference over the slice, for the tolerance allowed at
	// each cell.
	ref []float64
}

// cellError is the error drawn for the pair (r, g) and whether it is a
// NaN or Inf mismatch.
func cellError(r, g float64) (float64, bool) {
	switch {
	case math.IsNaN(r) && math.IsNaN(g), r == g:
		return 0, false
	case !finite(r) || !finite(g):
		return math.Inf(1), true
	}
	d := math.Abs(g - r)
	if math.IsInf(d, 0) {
		d = math.MaxFloat64
	}
	return d, false
}

// largestError returns the flat offset of the largest error of the
// tensors (a mismatch first, then the largest |got − ref|, the first in
// row-major order), or −1 when every pair matches.
func largestError(ref, got []float64) int {
	at, big, mis := -1, 0.0, false
	for i := range ref {
		d, m := cellError(ref[i], got[i])
		switch {
		case m && !mis:
			at, big, mis = i, d, true
		case !mis && d > big:
			at, big = i, d
		}
	}
	return at
}

// sliceOf returns the 2-D slice over the last two dimensions of shape that
// holds the largest absolute error of the tensors (the first slice when
// every pair matches). A tensor of rank 1 is one row, a scalar one cell.
func sliceOf(ref, got []float64, shape []int) (*errSlice, error) {
	n, err := elementCount(shape)
	switch {
	case err != nil:
		return nil, err
	case len(ref) != n || len(got) != n:
		return nil, fmt.Errorf("the tensors have %d and %d elements; want %d each, the elements of shape %v", len(ref), len(got), n, shape)
	case n == 0:
		return nil, fmt.Errorf("the tensors are empty (shape %v); want at least one element to draw", shape)
	}
	s := &errSlice{shape: append([]int(nil), shape...), rows: 1, cols: 1}
	switch len(shape) {
	case 0:
	case 1:
		s.cols = shape[0]
	default:
		s.rows, s.cols = shape[len(shape)-2], shape[len(shape)-1]
	}
	plane := s.rows * s.cols
	at := largestError(ref, got)
	if at > 0 {
		s.start = at / plane * plane
	}
	if len(shape) > 2 {
		s.lead = num.Unravel(s.start, shape)[:len(shape)-2]
	}
	s.err = make([]float64, plane)
	s.mismatch = make([]bool, plane)
	s.ref = ref[s.start : s.start+plane]
	for i := range s.err {
		s.err[i], s.mismatch[i] = cellError(ref[s.start+i], got[s.start+i])
	}
	s.worst = -1
	if at >= 0 {
		s.worst = at - s.start
	}
	return s, nil
}

// elementCount is the number of elements of shape, refusing a negative
// dimension and a count that overflows an int.
func elementCount(shape []int) (int, error) {
	n := 1
	for k, d := range shape {
		if d < 0 {
			return 0, fmt.Errorf("shape[%d] = %d; want ≥ 0 (shape %v)", k, d, shape)
		}
		if d != 0 && n > math.MaxInt/d {
			return 0, fmt.Errorf("shape %v holds more elements than an int counts", shape)
		}
		n *= d
	}
	return n, nil
}

// where names the slice: "[0 2 : :] of shape [1 8 6 8]", or "the whole
// tensor, shape [6 8]".
func (s *errSlice) where() string {
	if len(s.shape) <= 2 {
		return fmt.Sprintf("the whole tensor, shape %v", s.shape)
	}
	idx := make([]string, 0, len(s.shape))
	for _, i := range s.lead {
		idx = append(idx, strconv.Itoa(i))
	}
	return fmt.Sprintf("[%s : :] of shape %v", strings.Join(idx, " "), s.shape)
}

// worstIndex is the full index of the worst cell.
func (s *errSlice) worstIndex() []int {
	if s.worst < 0 {
		return nil
	}
	return num.Unravel(s.start+s.worst, s.shape)
}

// finiteMax is the largest finite error of the slice and the count of
// mismatches.
func (s *errSlice) finiteMax() (big float64, mismatches int) {
	for i, d := range s.err {
		if s.mismatch[i] {
			mismatches++
		} else if d > big {
			big = d
		}
	}
	return big, mismatches
}

// tolRange is the least and the largest absolute error the tolerance
// allows over the slice's finite reference values: Abs + Rel·|ref|, or
// ULPs steps of the format at ref where that is larger. ok is false
// without a tolerance or when it allows nothing anywhere.
func (s *errSlice) tolRange(t *compare.Tolerance, f compare.Format) (lo, hi float64, ok bool) {
	if t == nil {
		return 0, 0, false
	}
	lo, hi = math.Inf(1), 0
	for _, r := range s.ref {
		if !finite(r) {
			continue
		}
		a := t.Abs + float64(t.Rel*math.Abs(r))
		if t.ULPs > 0 {
			if u := f.ULP(r); finite(u) {
				a = math.Max(a, float64(float64(t.ULPs)*u))
			}
		}
		lo, hi = math.Min(lo, a), math.Max(hi, a)
	}
	if !(hi > 0) || math.IsInf(hi, 0) {
		return 0, 0, false
	}
	return lo, hi, true
}

// colourScale maps an error to a position on the colour bar, 0 (bottom)
// to 1 (top): linear from 0 to hi, or logarithmic from lo to hi (powers of
// ten), errors at or below lo (0 included) at the bottom.
type colourScale struct {
	log    bool
	lo, hi float64
}

// pick chooses the scale for errors up to big, with the tolerance band
// [tlo, thi] (hasTol) and the slice's errors errs. The bar always reaches
// the tolerance. It is logarithmic when a linear bar would squeeze the
// tolerance into its bottom tenth, or half the nonzero errors into its
// bottom hundredth; linear otherwise.
func pickScale(errs []float64, mismatch []bool, big, tlo, thi float64, hasTol bool) colourScale {
	top := big
	if hasTol {
		top = math.Max(top, thi)
	}
	if top == 0 {
		return colourScale{hi: 1}
	}
	var pos []float64
	step := max(1, len(errs)/100000) // a sample is enough for the median
	for i := 0; i < len(errs); i += step {
		if d := errs[i]; d > 0 && !mismatch[i] {
			pos = append(pos, d)
		}
	}
	slices.Sort(pos)
	smallest := top
	median := top
	if len(pos) > 0 {
		smallest, median = pos[0], pos[len(pos)/2]
	}
	useLog := hasTol && tlo < top/10 || median < top/100
	if !useLog {
		return colourScale{hi: niceCeil(top)}
	}
	low := smallest
	if hasTol {
		low = math.Min(low, tlo/10)
	}
	hiD := int(math.Ceil(math.Log10(top)))
	loD := int(math.Floor(math.Log10(low)))
	hiD = min(hiD, 308)
	loD = max(loD, hiD-12, -323)
	if loD >= hiD {
		loD = hiD - 1
	}
	return colourScale{log: true, lo: pow10(loD), hi: pow10(hiD)}
}

// at is the position of the error d on the bar, in [0, 1].
func (c colourScale) at(d float64) float64 {
	var t float64
	if c.log {
		if !(d > c.lo) {
			return 0
		}
		t = (math.Log10(d) - math.Log10(c.lo)) / (math.Log10(c.hi) - math.Log10(c.lo))
	} else {
		t = d / c.hi
	}
	return math.Min(math.Max(t, 0), 1)
}

// ticks are the values labelled on the bar: the powers of ten (every
// second or third when there are many), or five or so even steps.
func (c colourScale) ticks() []float64 {
	var out []float64
	if c.log {
		loD := int(math.Round(math.Log10(c.lo)))
		hiD := int(math.Round(math.Log10(c.hi)))
		every := 1 + (hiD-loD)/7
		for d := hiD; d >= loD; d -= every {
			out = append(out, pow10(d))
		}
		return out
	}
	step := niceCeil(c.hi / 5)
	for k := 0; ; k++ {
		v := float64(k) * step
		if v > c.hi*(1+1e-9) {
			break
		}
		out = append(out, v)
	}
	return out
}

// pow10 is 10^k correctly rounded (math.Pow may miss by a unit in the
// last place), for −323 ≤ k ≤ 308.
func pow10(k int) float64 {
	v, _ := strconv.ParseFloat("1e"+strconv.Itoa(k), 64)
	return v
}

// niceCeil rounds x > 0 up to 1, 2, 2.5 or 5 times a power of ten.
func niceCeil(x float64) float64 {
	if !(x > 0) || math.IsInf(x, 0) {
		return 1
	}
	p := pow10(int(math.Floor(math.Log10(x))))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if v := m * p; v >= x*(1-1e-12) {
			return v
		}
	}
	return 10 * p
}

// ramp is the colour map, dark (small errors) to light (large): anchor
// colours at even steps of the bar, linearly interpolated.
var ramp = []color.RGBA{
	{0, 0, 4, 255}, {31, 12, 72, 255}, {85, 15, 109, 255}, {136, 34, 106, 255}, {186, 54, 85, 255},
	{227, 89, 51, 255}, {249, 140, 10, 255}, {249, 201, 50, 255}, {252, 255, 164, 255},
}

// The colours of the marks: NaN or Inf mismatches, the box of the largest
// error, the tolerance line, the text.
var (
	mismatchColour = color.RGBA{0, 200, 255, 255}
	boxColour      = color.RGBA{0, 230, 0, 255}
	tolColour      = color.RGBA{0, 150, 0, 255}
	inkColour      = color.RGBA{0, 0, 0, 255}
	paperColour    = color.RGBA{255, 255, 255, 255}
)

// rampColour is the colour at position t ∈ [0, 1] of the bar.
func rampColour(t float64) color.RGBA {
	t = math.Min(math.Max(t, 0), 1)
	x := float64(t * float64(len(ramp)-1))
	i := min(int(x), len(ramp)-2)
	f := x - float64(i)
	mix := func(a, b uint8) uint8 {
		return uint8(math.Round(float64(a) + float64((float64(b)-float64(a))*f)))
	}
	a, b := ramp[i], ramp[i+1]
	return color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), 255}
}

// heatmapInfo is what writeHeatmap drew, for its note and for tests.
type heatmapInfo struct {
	path       string
	where      string // the slice, in words
	exact      bool   // every pair matches: no cell is boxed
	worstAt    []int  // the index of the largest error
	worstErr   float64
	mismatch   bool // the largest error is a NaN or Inf mismatch
	scale      colourScale
	tlo, thi   float64
	hasTol     bool
	mismatches int // NaN or Inf mismatches in the slice
	pooled     bool
	gridRows   int // the cells drawn: the slice's, or fewer when pooled
	gridCols   int

	// Where the picture has them, in pixels: the grid, one cell of it,
	// and the colour bar.
	grid         image.Rectangle
	cellW, cellH int
	bar          image.Rectangle
}

// String is the note: which slice, its largest error, and the scale.
func (h *heatmapInfo) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "heatmap %s: |got − ref| over %s, the slice holding the largest absolute error\n", h.path, h.where)
	switch {
	case h.exact:
		b.WriteString("  every pair matches (no cell boxed)")
	case h.mismatch:
		fmt.Fprintf(&b, "  a NaN/Inf mismatch at %v (boxed)", h.worstAt)
	default:
		fmt.Fprintf(&b, "  %.4g at %v (boxed)", h.worstErr, h.worstAt)
	}
	kind := "linear"
	if h.scale.log {
		kind = "log"
	}
	fmt.Fprintf(&b, "; %s colour scale %.3g … %.3g", kind, h.scale.lo, h.scale.hi)
	switch {
	case !h.hasTol:
	case h.tlo == h.thi:
		fmt.Fprintf(&b, "; tolerance %.3g marked on the bar", h.thi)
	default:
		fmt.Fprintf(&b, "; tolerance %.3g … %.3g marked on the bar", h.tlo, h.thi)
	}
	if h.mismatches > 0 {
		fmt.Fprintf(&b, "; %d NaN/Inf mismatches in cyan", h.mismatches)
	}
	if h.pooled {
		fmt.Fprintf(&b, "; each of %d × %d cells shows the largest error of the elements it covers", h.gridRows, h.gridCols)
	}
	b.WriteString("\n")
	return b.String()
}

// writeHeatmap draws |got − ref| over the 2-D slice holding the largest
// absolute error as a PNG at path (written whole or not at all), and says
// on heatmapNotes which slice it drew. rep gives the tolerance marked on
// the colour bar and the format of its ULPs (nil: no tolerance);
// candidate names the candidate in the picture.
func writeHeatmap(path string, ref, got []float64, shape []int, rep *compare.Report, candidate string) error {
	h, err := drawHeatmap(path, ref, got, shape, rep, candidate)
	if err != nil {
		return err
	}
	_, err = io.WriteString(heatmapNotes, h.String())
	return err
}

// drawHeatmap is writeHeatmap without the note.
func drawHeatmap(path string, ref, got []float64, shape []int, rep *compare.Report, candidate string) (*heatmapInfo, error) {
	if shape == nil {
		shape = []int{len(ref)}
	}
	s, err := sliceOf(ref, got, shape)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	img, h := renderHeatmap(s, rep, candidate)
	h.path = path
	err = writeAtomic(path, func(w io.Writer) error { return png.Encode(w, img) })
	if err != nil {
		return nil, err
	}
	return h, nil
}

// Sizes of the picture, in pixels.
const (
	fontScale = 2                        // each font dot is 2×2 pixels
	charW     = (glyphW + 1) * fontScale // advance of one character
	lineH     = (glyphH + 3) * fontScale // advance of one line
	margin    = 14
	maxPlotW  = 720 // the cell grid at most this wide and high; larger slices are pooled
	maxPlotH  = 560
	maxCell   = 48 // the largest cell
	minPlot   = 48 // the grid at least this wide and high
	barW      = 22
	minBarH   = 260
)

// renderHeatmap draws the slice.
func renderHeatmap(s *errSlice, rep *compare.Report, candidate string) (*image.RGBA, *heatmapInfo) {
	var tol *compare.Tolerance
	format := compare.Float64
	if rep != nil {
		tol, format = rep.Tolerance, rep.Format
	}
	big, mism := s.finiteMax()
	tlo, thi, hasTol := s.tolRange(tol, format)
	sc := pickScale(s.err, s.mismatch, big, tlo, thi, hasTol)
	h := &heatmapInfo{where: s.where(), exact: s.worst < 0, worstAt: s.worstIndex(), scale: sc, tlo: tlo, thi: thi, hasTol: hasTol, mismatches: mism}
	if s.worst >= 0 {
		h.worstErr, h.mismatch = s.err[s.worst], s.mismatch[s.worst]
	}

	// The grid: one drawn cell per element, or per block of elements
	// (their largest error) when the slice has more rows or columns than
	// fit.
	gr, gc := min(s.rows, maxPlotH), min(s.cols, maxPlotW)
	h.gridRows, h.gridCols, h.pooled = gr, gc, gr < s.rows || gc < s.cols
	grid := make([]float64, gr*gc)
	gmis := make([]bool, gr*gc)
	for r := 0; r < s.rows; r++ {
		pr := r * gr / s.rows
		for c := 0; c < s.cols; c++ {
			i := pr*gc + c*gc/s.cols
			if s.mismatch[r*s.cols+c] {
				gmis[i] = true
			}
			grid[i] = math.Max(grid[i], s.err[r*s.cols+c])
		}
	}
	cell := max(1, min(maxCell, maxPlotW/gc, maxPlotH/gr))
	cw, ch := cell, cell
	if gc*cw < minPlot {
		cw = (minPlot + gc - 1) / gc
	}
	if gr*ch < minPlot {
		ch = (minPlot + gr - 1) / gr
	}
	pw, ph := gc*cw, gr*ch

	// The words.
	title := []string{
		"ABSOLUTE ERROR |GOT - REF| OVER " + h.where,
		"CANDIDATE " + candidate,
	}
	switch {
	case h.exact:
		title = append(title, "EVERY PAIR MATCHES")
	case h.mismatch:
		title = append(title, fmt.Sprintf("BOXED: LARGEST ERROR, A NAN/INF MISMATCH AT %v", h.worstAt))
	default:
		title = append(title, fmt.Sprintf("BOXED: LARGEST ERROR %s AT %v", numLabel(h.worstErr, 3), h.worstAt))
	}
	scaleWord := "LINEAR SCALE"
	if sc.log {
		scaleWord = "LOG SCALE"
	}
	var rowTicks, colTicks []int
	rowTicks = []int{0, s.rows - 1}
	colTicks = []int{0, s.cols - 1}
	if s.worst >= 0 {
		rowTicks = append(rowTicks, s.worst/s.cols)
		colTicks = append(colTicks, s.worst%s.cols)
	}
	rowLabelW := 0
	for _, r := range rowTicks {
		rowLabelW = max(rowLabelW, textWidth(strconv.Itoa(r)))
	}
	rowLabelW = max(rowLabelW, textWidth("ROW"))
	axes := fmt.Sprintf("COLUMNS: THE LAST DIMENSION, 0-%d. ROWS: DIMENSION %d, 0-%d", s.cols-1, max(len(s.shape)-2, 0), s.rows-1)
	if len(s.shape) < 2 {
		axes = fmt.Sprintf("COLUMNS: THE ELEMENTS, 0-%d. ONE ROW", s.cols-1)
	}
	legend := "BOX: LARGEST ERROR"
	tolWord := ""
	if hasTol {
		tolWord = "TOL: " + numLabel(thi, 3)
		if tlo != thi {
			tolWord = "TOL: " + numLabel(tlo, 3) + " TO " + numLabel(thi, 3) + ", BY |REF|"
		}
	}
	misWord := ""
	if mism > 0 {
		misWord = fmt.Sprintf("NAN/INF MISMATCH (%d)", mism)
	}
	notes := []string{axes}
	if h.pooled {
		notes = append(notes, fmt.Sprintf("EACH CELL: THE LARGEST OF THE ELEMENTS IT COVERS (%dX%d SHOWN AS %dX%d)", s.rows, s.cols, gr, gc))
	}

	// The layout.
	x0 := margin + rowLabelW + 10 // the grid's left edge
	y0 := margin + len(title)*lineH + lineH + 6
	barH := max(ph, minBarH)
	bx := x0 + pw + 44 // the bar's left edge
	by := y0
	tickTexts := sc.ticks()
	labelW := textWidth("TOL HI")
	for _, v := range tickTexts {
		labelW = max(labelW, textWidth(numLabel(v, 2)))
	}
	width := max(bx+barW+8+labelW, bx+textWidth(scaleWord)) + margin
	legendW := 20 + textWidth(legend)
	if tolWord != "" {
		legendW += 24 + 20 + textWidth(tolWord)
	}
	if misWord != "" {
		legendW += 24 + 20 + textWidth(misWord)
	}
	width = max(width, margin+legendW+margin)
	for _, l := range append(slices.Clone(title), notes...) {
		width = max(width, margin+textWidth(l)+margin)
	}
	h.grid, h.cellW, h.cellH = image.Rect(x0, y0, x0+pw, y0+ph), cw, ch
	h.bar = image.Rect(bx, by, bx+barW, by+barH)
	legendY := max(y0+ph+lineH+14, by+barH+lineH+22)
	height := legendY + (1+len(notes))*lineH + margin

	img := image.NewRGBA(image.Rect(0, 0, width, height))
	fill(img, img.Bounds(), paperColour)
	for i, l := range title {
		drawText(img, margin, margin+i*lineH, l, inkColour)
	}
	drawText(img, bx, y0-lineH, scaleWord, inkColour)

	// The cells.
	for i, d := range grid {
		r, c := i/gc, i%gc
		col := rampColour(sc.at(d))
		if gmis[i] {
			col = mismatchColour
		}
		fill(img, image.Rect(x0+c*cw, y0+r*ch, x0+(c+1)*cw, y0+(r+1)*ch), col)
	}
	frame(img, image.Rect(x0-1, y0-1, x0+pw+1, y0+ph+1), inkColour)

	// The axes: the first, the last and the worst row and column.
	wr, wc := -1, -1
	if s.worst >= 0 {
		wr, wc = s.worst/s.cols, s.worst%s.cols
	}
	rowY := func(r int) int { return y0 + (r*gr/s.rows)*ch + ch/2 }
	colX := func(c int) int { return x0 + (c*gc/s.cols)*cw + cw/2 }
	drawText(img, margin, y0-lineH-4, "ROW", inkColour)
	var usedY []int
	for k, r := range slices.Compact(rowTicks) {
		y := rowY(r)
		if k < 2 && wr >= 0 && r != wr && abs(y-rowY(wr)) < lineH {
			continue // the worst row's label wins
		}
		if slices.ContainsFunc(usedY, func(u int) bool { return abs(u-y) < lineH }) {
			continue
		}
		usedY = append(usedY, y)
		t := strconv.Itoa(r)
		ink := inkColour
		if r == wr {
			ink = tolColour
		}
		drawText(img, x0-6-textWidth(t), y-glyphH*fontScale/2, t, ink)
		fill(img, image.Rect(x0-5, y, x0-1, y+1), ink)
	}
	var usedX [][2]int
	for k, c := range slices.Compact(colTicks) {
		x := colX(c)
		t := strconv.Itoa(c)
		lo, hi := x-textWidth(t)/2-4, x+textWidth(t)/2+4
		if k < 2 && wc >= 0 && c != wc {
			wt := strconv.Itoa(wc)
			wx := colX(wc)
			if lo < wx+textWidth(wt)/2+4 && hi > wx-textWidth(wt)/2-4 {
				continue
			}
		}
		if slices.ContainsFunc(usedX, func(u [2]int) bool { return lo < u[1] && hi > u[0] }) {
			continue
		}
		usedX = append(usedX, [2]int{lo, hi})
		ink := inkColour
		if c == wc {
			ink = tolColour
		}
		drawText(img, max(0, x-textWidth(t)/2), y0+ph+6, t, ink)
		fill(img, image.Rect(x, y0+ph+1, x+1, y0+ph+5), ink)
	}

	// The box round the largest error: at least 11 pixels across, so that
	// a cell of one pixel is found too.
	if s.worst >= 0 {
		cx, cy := colX(wc), rowY(wr)
		hw, hh := max(cw/2+2, 5), max(ch/2+2, 5)
		box := image.Rect(cx-hw, cy-hh, cx+hw+1, cy+hh+1)
		frame(img, box.Inset(-1), inkColour)
		frame(img, box, boxColour)
		frame(img, box.Inset(1), boxColour)
		frame(img, box.Inset(2), inkColour)
	}

	// The colour bar, its scale and the tolerance.
	for y := 0; y < barH; y++ {
		t := 1 - float64(y)/float64(barH-1)
		fill(img, image.Rect(bx, by+y, bx+barW, by+y+1), rampColour(t))
	}
	frame(img, image.Rect(bx-1, by-1, bx+barW+1, by+barH+1), inkColour)
	barY := func(d float64) int { return by + int(math.Round(float64(float64(1-sc.at(d))*float64(barH-1)))) }
	var tolYs []int
	tolWords := []string{"TOL"}
	if hasTol {
		tolYs = append(tolYs, barY(thi))
		if tlo != thi {
			tolYs = append(tolYs, barY(tlo))
			tolWords = []string{"TOL HI", "TOL LO"}
			if tolYs[1]-tolYs[0] < lineH {
				tolWords = []string{"TOL", ""} // too close for two words
			}
		}
	}
	for _, v := range tickTexts {
		y := barY(v)
		fill(img, image.Rect(bx+barW, y, bx+barW+5, y+1), inkColour)
		if slices.ContainsFunc(tolYs, func(u int) bool { return abs(u-y) < lineH }) {
			continue // the tolerance's label wins
		}
		drawText(img, bx+barW+8, y-glyphH*fontScale/2, numLabel(v, 2), inkColour)
	}
	for k, y := range tolYs {
		fill(img, image.Rect(bx-8, y-1, bx+barW+8, y+2), tolColour)
		drawText(img, bx+barW+10, y-glyphH*fontScale/2, tolWords[k], tolColour)
	}
	drawText(img, bx, by+barH+12, "|GOT-REF|", inkColour)

	// The legend.
	lx := margin
	swatch := func(c color.RGBA, word string) {
		fill(img, image.Rect(lx, legendY, lx+14, legendY+14), c)
		frame(img, image.Rect(lx, legendY, lx+14, legendY+14), inkColour)
		drawText(img, lx+20, legendY, word, inkColour)
		lx += 20 + textWidth(word) + 24
	}
	swatch(boxColour, legend)
	if tolWord != "" {
		swatch(tolColour, tolWord)
	}
	if misWord != "" {
		swatch(mismatchColour, misWord)
	}
	for i, l := range notes {
		drawText(img, margin, legendY+(i+1)*lineH, l, inkColour)
	}
	return img, h
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// numLabel formats x with digits significant digits, short: 0.25, 1E-5,
// 2.5E3.
func numLabel(x float64, digits int) string {
	if x == 0 {
		return "0"
	}
	s := strconv.FormatFloat(x, 'g', digits, 64)
	mant, exp, ok := strings.Cut(s, "e")
	if !ok {
		return s
	}
	sign := ""
	if exp[0] == '-' {
		sign = "-"
	}
	exp = strings.TrimLeft(exp[1:], "0")
	if exp == "" {
		exp = "0"
	}
	return mant + "E" + sign + exp
}

// fill paints the rectangle r (clipped to the image).
func fill(img *image.RGBA, r image.Rectangle, c color.RGBA) {
	r = r.Intersect(img.Bounds())
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			img.SetRGBA(x, y, c)
		}
	}
}

// frame paints the one-pixel outline of r.
func frame(img *image.RGBA, r image.Rectangle, c color.RGBA) {
	fill(img, image.Rect(r.Min.X, r.Min.Y, r.Max.X, r.Min.Y+1), c)
	fill(img, image.Rect(r.Min.X, r.Max.Y-1, r.Max.X, r.Max.Y), c)
	fill(img, image.Rect(r.Min.X, r.Min.Y, r.Min.X+1, r.Max.Y), c)
	fill(img, image.Rect(r.Max.X-1, r.Min.Y, r.Max.X, r.Max.Y), c)
}

// The font: 5 × 7 dots a character, upper-case letters, digits and the
// symbols the picture uses. Lower-case letters are drawn upper-case, and a
// character the font lacks as '?'.
const (
	glyphW = 5
	glyphH = 7
)

// glyphRows holds each character as 7 rows of 5 dots, '#' ink and '.'
// paper, the rows separated by spaces.
var glyphRows = map[rune]string{
	'A':  ".###. #...# #...# ##### #...# #...# #...#",
	'B':  "####. #...# #...# ####. #...# #...# ####.",
	'C':  ".###. #...# #.... #.... #.... #...# .###.",
	'D':  "####. #...# #...# #...# #...# #...# ####.",
	'E':  "##### #.... #.... ####. #.... #.... #####",
	'F':  "##### #.... #.... ####. #.... #.... #....",
	'G':  ".###. #...# #.... #.### #...# #...# .####",
	'H':  "#...# #...# #...# ##### #...# #...# #...#",
	'I':  ".###. ..#.. ..#.. ..#.. ..#.. ..#.. .###.",
	'J':  "..### ...#. ...#. ...#. ...#. #..#. .##..",
	'K':  "#...# #..#. #.#.. ##... #.#.. #..#. #...#",
	'L':  "#.... #.... #.... #.... #.... #.... #####",
	'M':  "#...# ##.## #.#.# #.#.# #...# #...# #...#",
	'N':  "#...# #...# ##..# #.#.# #..## #...# #...#",
	'O':  ".###. #...# #...# #...# #...# #...# .###.",
	'P':  "####. #...# #...# ####. #.... #.... #....",
	'Q':  ".###. #...# #...# #...# #.#.# #..#. .##.#",
	'R':  "####. #...# #...# ####. #.#.. #..#. #...#",
	'S':  ".#### #.... #.... .###. ....# ....# ####.",
	'T':  "##### ..#.. ..#.. ..#.. ..#.. ..#.. ..#..",
	'U':  "#...# #...# #...# #...# #...# #...# .###.",
	'V':  "#...# #...# #...# #...# #...# .#.#. ..#..",
	'W':  "#...# #...# #...# #.#.# #.#.# #.#.# .#.#.",
	'X':  "#...# #...# .#.#. ..#.. .#.#. #...# #...#",
	'Y':  "#...# #...# .#.#. ..#.. ..#.. ..#.. ..#..",
	'Z':  "##### ....# ...#. ..#.. .#... #.... #####",
	'0':  ".###. #...# #..## #.#.# ##..# #...# .###.",
	'1':  "..#.. .##.. ..#.. ..#.. ..#.. ..#.. .###.",
	'2':  ".###. #...# ....# ...#. ..#.. .#... #####",
	'3':  "##### ...#. ..#.. ...#. ....# #...# .###.",
	'4':  "...#. ..##. .#.#. #..#. ##### ...#. ...#.",
	'5':  "##### #.... ####. ....# ....# #...# .###.",
	'6':  "..##. .#... #.... ####. #...# #...# .###.",
	'7':  "##### ....# ...#. ..#.. .#... .#... .#...",
	'8':  ".###. #...# #...# .###. #...# #...# .###.",
	'9':  ".###. #...# #...# .#### ....# ...#. .##..",
	' ':  "..... ..... ..... ..... ..... ..... .....",
	'.':  "..... ..... ..... ..... ..... .##.. .##..",
	',':  "..... ..... ..... ..... .##.. ..#.. .#...",
	':':  "..... .##.. .##.. ..... .##.. .##.. .....",
	';':  "..... .##.. .##.. ..... .##.. ..#.. .#...",
	'-':  "..... ..... ..... ##### ..... ..... .....",
	'+':  "..... ..#.. ..#.. ##### ..#.. ..#.. .....",
	'_':  "..... ..... ..... ..... ..... ..... #####",
	'/':  "..... ....# ...#. ..#.. .#... #.... .....",
	'|':  "..#.. ..#.. ..#.. ..#.. ..#.. ..#.. ..#..",
	'[':  ".###. .#... .#... .#... .#... .#... .###.",
	']':  ".###. ...#. ...#. ...#. ...#. ...#. .###.",
	'(':  "...#. ..#.. .#... .#... .#... ..#.. ...#.",
	')':  ".#... ..#.. ...#. ...#. ...#. ..#.. .#...",
	'=':  "..... ..... ##### ..... ##### ..... .....",
	'<':  "...#. ..#.. .#... #.... .#... ..#.. ...#.",
	'>':  ".#... ..#.. ...#. ....# ...#. ..#.. .#...",
	'%':  "##... ##..# ...#. ..#.. .#... #..## ...##",
	'*':  "..... ..#.. #.#.# .###. #.#.# ..#.. .....",
	'#':  ".#.#. .#.#. ##### .#.#. ##### .#.#. .#.#.",
	'\'': "..#.. ..#.. .#... ..... ..... ..... .....",
	'!':  "..#.. ..#.. ..#.. ..#.. ..#.. ..... ..#..",
	'?':  ".###. #...# ....# ...#. ..#.. ..... ..#..",
	'~':  "..... ..... .#... #.#.# ...#. ..... .....",
	'×':  "..... #...# .#.#. ..#.. .#.#. #...# .....",
	'≤':  "...#. ..#.. .#... ..#.. ...#. ..... #####",
	'≥':  ".#... ..#.. ...#. ..#.. .#... ..... #####",
}

// glyph is one character's dots, a row a byte, the leftmost dot the
// highest of 5 bits.
type glyph [glyphH]uint8

// font is glyphRows parsed.
var font = parseFont(glyphRows)

// parseFont turns the rows into glyphs; a malformed row is a programming
// error that the font's test reports (the glyph is then left blank here).
func parseFont(rows map[rune]string) map[rune]glyph {
	out := map[rune]glyph{}
	for r, s := range rows {
		var g glyph
		lines := strings.Fields(s)
		if len(lines) != glyphH {
			continue
		}
		ok := true
		for y, l := range lines {
			if len(l) != glyphW {
				ok = false
				break
			}
			for x := 0; x < glyphW; x++ {
				if l[x] == '#' {
					g[y] |= 1 << (glyphW - 1 - x)
				}
			}
		}
		if ok {
			out[r] = g
		}
	}
	return out
}

// glyphOf is the glyph drawn for r.
func glyphOf(r rune) glyph {
	switch r {
	case '−', '–':
		r = '-'
	}
	if g, ok := font[r]; ok {
		return g
	}
	if g, ok := font[[]rune(strings.ToUpper(string(r)))[0]]; ok {
		return g
	}
	return font['?']
}

// textWidth is the width of s drawn, in pixels.
func textWidth(s string) int {
	n := len([]rune(s))
	if n == 0 {
		return 0
	}
	return n*charW - fontScale
}

// drawText draws s with its top-left corner at (x, y).
func drawText(img *image.RGBA, x, y int, s string, c color.RGBA) {
	for _, r := range s {
		g := glyphOf(r)
		for gy := 0; gy < glyphH; gy++ {
			for gx := 0; gx < glyphW; gx++ {
				if g[gy]&(1<<(glyphW-1-gx)) != 0 {
					px, py := x+gx*fontScale, y+gy*fontScale
					fill(img, image.Rect(px, py, px+fontScale, py+fontScale), c)
				}
			}
		}
		x += charW
	}
}
