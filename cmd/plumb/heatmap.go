package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
)

// errGrid is |got − ref| over one 2-D slice: rows × cols values, row-major.
// A NaN or Inf mismatch shows as the largest finite error of the slice.
type errGrid struct {
	rows, cols int
	z          []float64
}

func (g errGrid) Dims() (c, r int)   { return g.cols, g.rows }
func (g errGrid) Z(c, r int) float64 { return g.z[(g.rows-1-r)*g.cols+c] } // row 0 at the top
func (g errGrid) X(c int) float64    { return float64(c) }
func (g errGrid) Y(r int) float64    { return float64(r) }

// worstSlice returns the 2-D slice over the last two dimensions that holds
// the worst element of the report (the first listed, else the max absolute
// error), its leading index, and its errors.
func worstSlice(ref, got []float64, shape []int, rep *compare.Report) (lead []int, g errGrid) {
	rows, cols := 1, 1
	switch len(shape) {
	case 0:
	case 1:
		cols = shape[0]
	default:
		rows, cols = shape[len(shape)-2], shape[len(shape)-1]
	}
	at := 0
	if len(rep.Worst) > 0 {
		at = rep.Worst[0].Offset
	}
	plane := rows * cols
	start := 0
	if plane > 0 {
		start = at / plane * plane
	}
	idx := num.Unravel(start, shape)
	if len(shape) >= 2 {
		lead = idx[:len(shape)-2]
	}
	g = errGrid{rows: rows, cols: cols, z: make([]float64, plane)}
	worstFinite := 0.0
	for i := range g.z {
		d := math.Abs(got[start+i] - ref[start+i])
		if !math.IsNaN(d) && !math.IsInf(d, 0) && d > worstFinite {
			worstFinite = d
		}
		g.z[i] = d
	}
	for i, d := range g.z {
		if math.IsNaN(d) || math.IsInf(d, 0) {
			if math.IsNaN(got[start+i]) && math.IsNaN(ref[start+i]) || got[start+i] == ref[start+i] {
				g.z[i] = 0
			} else {
				g.z[i] = worstFinite
			}
		}
	}
	return lead, g
}

// writeHeatmap draws |got − ref| over the worst 2-D slice as a PNG: the
// element grid with labelled axes, and a labelled colour scale beside it.
func writeHeatmap(path string, ref, got []float64, shape []int, rep *compare.Report, candidate string) error {
	if len(ref) == 0 {
		return fmt.Errorf("%s: the tensors are empty; want at least one element to draw", path)
	}
	lead, g := worstSlice(ref, got, shape, rep)
	lo, hi := 0.0, 0.0
	for _, v := range g.z {
		hi = math.Max(hi, v)
	}
	top := hi
	if hi == lo {
		hi = lo + 1 // a flat map still needs a scale
	}
	cmap := moreland.ExtendedBlackBody()
	cmap.SetMin(lo)
	cmap.SetMax(hi)

	p := plot.New()
	where := "the whole tensor"
	if len(shape) > 2 {
		idx := make([]string, 0, len(shape))
		for _, i := range lead {
			idx = append(idx, fmt.Sprint(i))
		}
		where = fmt.Sprintf("[%s : :] of shape %v", strings.Join(idx, " "), shape)
	}
	worstAt := ""
	if len(rep.Worst) > 0 {
		worstAt = fmt.Sprintf(", the slice of the worst element %v", rep.Worst[0].Index)
	}
	p.Title.Text = fmt.Sprintf("|candidate − reference| over %s%s\ncandidate %s; largest error here %.3g", where, worstAt, candidate, top)
	p.X.Label.Text = fmt.Sprintf("column: index of the last dimension (0 … %d)", g.cols-1)
	p.Y.Label.Text = fmt.Sprintf("row: index of dimension %d (0 at the top)", max(len(shape)-2, 0))
	if len(shape) < 2 {
		p.Y.Label.Text = "(one row)"
	}
	h := plotter.NewHeatMap(g, cmap.Palette(256))
	h.Min, h.Max = lo, hi
	p.Add(h)
	p.Y.Tick.Marker = flippedTicks{rows: g.rows}

	bar := plot.New()
	bar.Title.Text = "colour scale"
	bar.Add(&plotter.ColorBar{ColorMap: cmap, Vertical: true})
	bar.HideX()
	bar.Y.Label.Text = "absolute error |got − ref|"
	bar.Y.Min, bar.Y.Max = lo, hi

	img := vgimg.New(vg.Points(820), vg.Points(560))
	dc := draw.New(img)
	left := draw.Crop(dc, 0, -vg.Points(180), 0, 0)
	right := draw.Crop(dc, vg.Points(660), 0, vg.Points(20), -vg.Points(20))
	p.Draw(left)
	bar.Draw(right)

	return writeAtomic(path, func(w io.Writer) error {
		_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(w)
		return err
	})
}

// flippedTicks labels the heatmap's rows so that row 0 is at the top.
type flippedTicks struct{ rows int }

func (t flippedTicks) Ticks(min, max float64) []plot.Tick {
	var ticks []plot.Tick
	step := max1(t.rows / 8)
	for r := 0; r < t.rows; r += step {
		ticks = append(ticks, plot.Tick{Value: float64(t.rows - 1 - r), Label: fmt.Sprint(r)})
	}
	return ticks
}

func max1(n int) int {
	if n < 1 {
		return 1
	}
	return n
}
