package diagnose

import (
	"fmt"
	"math"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// Signature is one pattern of a failing output's error, and what it
// suggests.
type Signature struct {
	Output   string `json:"output"`
	Along    string `json:"along"`    // "positions", "heads", "dims", "scale" or "non-finite"
	Finding  string `json:"finding"`  // what the error does
	Suggests string `json:"suggests"` // the slip it points to
}

// String is the signature in one line.
func (s Signature) String() string {
	return fmt.Sprintf("%s along %s: %s; suggests %s", s.Output, s.Along, s.Finding, s.Suggests)
}

// axes are the axes of an output that signatures read: -1 when absent.
type axes struct{ pos, heads, dims int }

// axesOf returns where positions, heads and dims lie in output n of op.
func axesOf(op string, cfg map[string]any, n string, rank int) axes {
	a := axes{-1, -1, -1}
	switch {
	case strings.HasPrefix(op, "attention-"):
		seq := false
		if l, _ := cfg["layout"].(string); l == "seq-major" {
			seq = true
		}
		if rank >= 3 {
			a.heads, a.pos = 1, 2
			if seq {
				a.heads, a.pos = 2, 1
			}
		}
		if rank == 4 {
			a.dims = 3
		}
	case op == "alibi-bias":
		a.heads, a.pos = 0, 1
	case op == "sinusoidal-table" || op == "rotary-tables":
		a.pos, a.dims = 0, 1
	case op == "rotary-apply":
		a.pos, a.dims = rank-2, rank-1
		if rank >= 3 {
			a.heads = rank - 3
		}
	case op == "logsumexp":
		a.pos = rank - 1
	default:
		if rank >= 2 {
			a.pos = rank - 2
		}
		if rank >= 1 {
			a.dims = rank - 1
		}
	}
	return a
}

// profile is the largest error along one axis: p[i] is the largest
// |got − ref| over the elements whose index on the axis is i (+Inf for a
// NaN or Inf mismatch).
func profile(e []float64, shape []int, axis int) []float64 {
	inner := 1
	for _, d := range shape[axis+1:] {
		inner *= d
	}
	n := shape[axis]
	p := make([]float64, n)
	for i, v := range e {
		j := (i / inner) % n
		if v > p[j] || math.IsNaN(v) {
			p[j] = v
		}
	}
	return p
}

// signatures computes the error signatures of output n.
func signatures(op string, cfg map[string]any, in ops.Tensors, n string, r, g ops.Tensor, y *compare.Yardstick) []Signature {
	e := make([]float64, len(r.Data))
	for i, x := range r.Data {
		v := g.Data[i]
		switch {
		case finite(x) && finite(v):
			e[i] = math.Abs(v - x)
		case (math.IsNaN(x) && math.IsNaN(v)) || x == v:
		default:
			e[i] = math.Inf(1)
		}
	}
	thr := 0.0
	if y != nil {
		thr = y.Tolerance.Abs
	}
	a := axesOf(op, cfg, n, len(r.Shape))
	var out []Signature
	add := func(along, finding, suggests string) {
		out = append(out, Signature{Output: n, Along: along, Finding: finding, Suggests: suggests})
	}
	if a.pos >= 0 && r.Shape[a.pos] > 1 {
		if f, s := positionPattern(profile(e, r.Shape, a.pos), thr); f != "" {
			add("positions", f, s)
		}
	}
	if a.heads >= 0 && r.Shape[a.heads] > 1 {
		hkv := 0
		if k, ok := in["k"]; ok && len(k.Shape) == 4 {
			hkv = k.Shape[a.heads]
		}
		if f, s := headPattern(profile(e, r.Shape, a.heads), thr, hkv, n); f != "" {
			add("heads", f, s)
		}
	}
	if a.dims >= 0 && r.Shape[a.dims] >= 4 && r.Shape[a.dims]%2 == 0 {
		if f, s := dimPattern(profile(e, r.Shape, a.dims), thr); f != "" {
			add("dims", f, s)
		}
	}
	if f, s := scalePattern(r.Data, g.Data, r.Shape, a); f != "" {
		add("scale", f, s)
	}
	if f, s := nonFinitePattern(r.Data, g.Data, r.Shape); f != "" {
		add("non-finite", f, s)
	}
	return out
}

// positionPattern reads the largest error at each position p.
func positionPattern(p []float64, thr float64) (string, string) {
	var bad []int
	for i, v := range p {
		if !(v <= thr) {
			bad = append(bad, i)
		}
	}
	if len(bad) == 0 {
		return "", ""
	}
	contiguous := bad[len(bad)-1]-bad[0]+1 == len(bad)
	switch {
	case contiguous && bad[0] > 0 && bad[len(bad)-1] == len(p)-1:
		if bad[0] == 1 {
			if r := correlation(p[1:]); r > 0.9 {
				return fmt.Sprintf("exact at position 0, the error growing linearly with position from 1 on (correlation %.2f)", r),
					"an angle that drifts with the position: a rotary base, frequency or scaling factor, or positions off by a constant"
			}
			return "exact at position 0, wrong from position 1 on",
				"something that depends on the position: a rotary setting, a position offset or a mask edge"
		}
		return fmt.Sprintf("a step: exact at positions 0–%d, wrong from %d on", bad[0]-1, bad[0]),
			"a mask edge, window size or query offset"
	case contiguous && bad[0] > 0 || contiguous && bad[len(bad)-1] < len(p)-1:
		return fmt.Sprintf("wrong only at positions %d–%d of %d", bad[0], bad[len(bad)-1], len(p)),
			"a mask edge or query offset that changes which keys those positions see"
	case len(bad) == len(p):
		if r := correlation(p); r > 0.9 {
			return fmt.Sprintf("wrong at every position, the error growing linearly with position (correlation %.2f)", r),
				"an angle that drifts with the position: a rotary base, frequency or scaling factor"
		}
		return "", "" // no pattern along the positions
	}
	return fmt.Sprintf("wrong at %d of %d positions (first %d)", len(bad), len(p), bad[0]),
		"a mask or position slip at those positions"
}

// correlation is Pearson's correlation of p with its index.
func correlation(p []float64) float64 {
	n := float64(len(p))
	if len(p) < 3 {
		return 0
	}
	var sx, sy, sxx, syy, sxy float64
	for i, v := range p {
		if !finite(v) {
			return 0
		}
		x := float64(i)
		sx, sy, sxx, syy, sxy = sx+x, sy+v, sxx+float64(x*x), syy+float64(v*v), sxy+float64(x*v)
	}
	cov := sxy - sx*sy/n
	vx, vy := sxx-sx*sx/n, syy-sy*sy/n
	if vx <= 0 || vy <= 0 {
		return 0
	}
	return cov / math.Sqrt(vx*vy)
}

// headPattern reads the largest error of each head h; hkv > 0 is the
// number of kv heads, which names the group-map pattern.
func headPattern(p []float64, thr float64, hkv int, out string) (string, string) {
	var bad, good []int
	for i, v := range p {
		if v <= thr {
			good = append(good, i)
		} else {
			bad = append(bad, i)
		}
	}
	if len(bad) == 0 || len(good) == 0 {
		return "", ""
	}
	h := len(p)
	if hkv > 0 && hkv < h && h%hkv == 0 && out != "dk" && out != "dv" {
		g := h / hkv
		same := true
		for i := range p {
			if (i/g == i%hkv) != (p[i] <= thr) {
				same = false
				break
			}
		}
		if same {
			return fmt.Sprintf("exact exactly at the heads h where h/%d = h mod %d (%s), wrong at the others", g, hkv, list(good)),
				"the group map: the two maps agree on those heads alone (\"group\": blocks vs cycle)"
		}
	}
	return fmt.Sprintf("wrong at heads %s of %d, exact at %s", list(bad), h, list(good)),
		"a per-head slip: the heads' slopes, their order, or which kv head they read"
}

func list(x []int) string {
	var s []string
	for i, v := range x {
		if i == 8 {
			s = append(s, fmt.Sprintf("… (%d in all)", len(x)))
			break
		}
		s = append(s, fmt.Sprint(v))
	}
	return strings.Join(s, ", ")
}

// dimPattern reads the largest error of each dim.
func dimPattern(p []float64, thr float64) (string, string) {
	d := len(p)
	badAt := func(lo, hi int) (some, all bool) {
		all = true
		for _, v := range p[lo:hi] {
			if v <= thr {
				all = false
			} else {
				some = true
			}
		}
		return some, all
	}
	loAny, _ := badAt(0, d/2)
	hiAny, _ := badAt(d/2, d)
	switch {
	case !loAny && hiAny:
		return fmt.Sprintf("only dims %d–%d (the second half) wrong", d/2, d-1),
			"the rotated dims or the pairing (\"rotated\", \"pairing\"): a slip confined to one half"
	case loAny && !hiAny:
		last := 0
		for i, v := range p {
			if v > thr {
				last = i
			}
		}
		return fmt.Sprintf("only dims 0–%d wrong, dims %d–%d exact", last, last+1, d-1),
			"the rotated dims (\"rotated\"): dims past a count pass through in one of the two"
	}
	var adj, halves, sum float64
	for i := 0; i < d/2; i++ {
		if !finite(p[2*i]) || !finite(p[i]) || !finite(p[i+d/2]) || !finite(p[2*i+1]) {
			return "", ""
		}
		adj += math.Abs(p[2*i] - p[2*i+1])
		halves += math.Abs(p[i] - p[i+d/2])
		sum += p[2*i] + p[2*i+1]
	}
	if sum == 0 {
		return "", ""
	}
	switch {
	case adj < 0.25*halves:
		return fmt.Sprintf("errors equal on the pairs (2i, 2i+1) (mismatch %.2g of the total, (i, i+d/2): %.2g)", adj/sum, halves/sum),
			"a slip inside rotations of adjacent pairs (\"pairing\": interleaved)"
	case halves < 0.25*adj:
		return fmt.Sprintf("errors equal on the pairs (i, i+d/2) (mismatch %.2g of the total, (2i, 2i+1): %.2g)", halves/sum, adj/sum),
			"a slip inside rotations of the two halves (\"pairing\": halves)"
	}
	return "", ""
}

// scalePattern fits got ≈ c·ref by least squares and reports c when the
// fit explains the error.
func scalePattern(ref, got []float64, shape []int, a axes) (string, string) {
	var rr, rg float64
	for i, x := range ref {
		if finite(x) && finite(got[i]) {
			rr += float64(x * x)
			rg += float64(x * got[i])
		}
	}
	if rr == 0 {
		return "", ""
	}
	c := rg / rr
	var res, dif scaledNorm
	for i, x := range ref {
		if finite(x) && finite(got[i]) {
			res.add(got[i] - float64(c*x))
			dif.add(got[i] - x)
		}
	}
	if dif.value() == 0 || !(res.value() < 0.05*dif.value()) || math.Abs(c-1) < 1e-6 {
		return "", ""
	}
	name := ""
	d := 0
	if a.dims >= 0 {
		d = shape[a.dims]
	}
	for _, k := range []struct {
		v    float64
		text string
	}{{2, "2"}, {0.5, "1/2"}, {math.Sqrt2, "√2"}, {1 / math.Sqrt2, "1/√2"}, {math.Ln2, "ln 2"}, {1 / math.Ln2, "1/ln 2"},
		{-1, "−1"}, {math.Sqrt(float64(d)), fmt.Sprintf("√%d", d)}, {1 / math.Sqrt(float64(d)), fmt.Sprintf("1/√%d", d)}} {
		if d == 0 && strings.Contains(k.text, "√0") {
			continue
		}
		if math.Abs(c-k.v) <= 1e-3*math.Abs(k.v) {
			name = " ≈ " + k.text
			break
		}
	}
	return fmt.Sprintf("got ≈ c·ref with c = %.6g%s (the fit leaves %.2g of the error)", c, name, res.value()/dif.value()),
		"a constant factor: a scale, magnitude or gain key, or a factor missing or added (a logarithm's base)"
}

// nonFinitePattern counts the rows (of the last axis) where got is NaN or
// infinite and the reference is not, and the converse.
func nonFinitePattern(ref, got []float64, shape []int) (string, string) {
	n := 1
	if len(shape) > 0 && shape[len(shape)-1] > 0 {
		n = shape[len(shape)-1]
	}
	rows := len(ref) / n
	gotBad, refBad, first := 0, 0, -1
	for r := range rows {
		g, f := false, false
		for i := r * n; i < (r+1)*n; i++ {
			if finite(ref[i]) && !finite(got[i]) {
				g = true
			}
			if !finite(ref[i]) && finite(got[i]) {
				f = true
			}
		}
		if g {
			gotBad++
			if first < 0 {
				first = r
			}
		}
		if f {
			refBad++
		}
	}
	switch {
	case gotBad > 0:
		return fmt.Sprintf("NaN or Inf in %d of %d rows (first row %d) where the reference is finite", gotBad, rows, first),
			"an overflow (a maximum not subtracted before exp) or 0/0 (an empty row, ε left out)"
	case refBad > 0:
		return fmt.Sprintf("finite in %d of %d rows where the reference is NaN or Inf", refBad, rows),
			"the empty-row policy (\"empty_row\") or a mask that leaves rows empty"
	}
	return "", ""
}
