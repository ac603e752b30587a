package attention

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/mask"
)

// Shape gives the sizes of one attention call: Q is [Batch, HeadsQ, Lq, Dk],
// K is [Batch, HeadsKV, Lk, Dk], V is [Batch, HeadsKV, Lk, Dv] and the
// output is [Batch, HeadsQ, Lq, Dv], in the order the Layout says.
type Shape struct {
	Batch   int // B ≥ 0
	HeadsQ  int // query heads ≥ 1
	HeadsKV int // key/value heads ≥ 1, dividing HeadsQ
	Lq      int // queries ≥ 0
	Lk      int // keys ≥ 0
	Dk      int // query/key head dimension ≥ 1
	Dv      int // value head dimension ≥ 1
}

// Sizes of the tensors of s.
func (s Shape) qLen() int   { return s.Batch * s.HeadsQ * s.Lq * s.Dk }
func (s Shape) kLen() int   { return s.Batch * s.HeadsKV * s.Lk * s.Dk }
func (s Shape) vLen() int   { return s.Batch * s.HeadsKV * s.Lk * s.Dv }
func (s Shape) oLen() int   { return s.Batch * s.HeadsQ * s.Lq * s.Dv }
func (s Shape) lseLen() int { return s.Batch * s.HeadsQ * s.Lq }

// Options are the conventions and extras of one attention call. The zero
// value is plain scaled dot-product attention over every key, HeadsMajor,
// GroupBlocks, EmptyRowZero.
//
// The logit of query i and key j, for query head h in batch entry b, is
// built in this order:
//
//	t = Scale · (q_i · k_j)             scale (default 1/√Dk)
//	t = SoftCap · tanh(t / SoftCap)     soft-cap, when SoftCap > 0
//	t = t + Bias[b, h, i, j]            additive bias, broadcast
//	t = t − Slopes[h]·(p(i) − j)        ALiBi, causal form (or |p(i) − j|)
//	t = −Inf unless Mask shows key j    mask
//
// The cap comes before the bias so that a bias (ALiBi, a mask written as
// −1e9) is not squashed by the tanh; the mask comes last so that hidden
// keys are hidden whatever the other terms are.
//
// Magnitudes: every visible logit computed from finite values (the q and k
// rows, the bias entry and the slope, all finite) must itself be finite in
// the arithmetic of the call, float64 (largest value MaxFloat64 ≈ 1.8e308)
// or float32 for the twins named …32 (MaxFloat32 ≈ 3.4e38; Scale is
// rounded to float32 there, so a Scale above MaxFloat32 is +Inf). A call
// in which one is NaN or ±Inf — a Scale of 1e308 on inputs near 1, a bias
// or a slope·distance near the limit — has overflowed, and fails with
// ErrOverflow, naming the first such logit in the order (batch, head,
// query, key), instead of returning the NaN rows the overflow makes. The
// rule is checked on the logits as they are computed, so it refuses
// exactly the calls that overflow, whatever the inputs' magnitudes. A
// scaled product t that overflows before a soft cap is not an overflow of
// the logit: c·tanh(±Inf/c) = ±c is the cap's limit, and the logit is
// finite. A NaN or infinite input is not an overflow either: its logits
// follow the special cases of Forward.
type Options struct {
	// Layout of Q, K, V, the output and the gradients.
	Layout Layout
	// Scale multiplies q·k; 0 means the default 1/√Dk (Vaswani et al. 2017,
	// §3.2.1). Otherwise it must be positive and finite, and such that no
	// logit overflows (see Magnitudes above).
	Scale float64
	// Mask says which keys each query sees; the zero Mask means mask.Full().
	// It is laid on mask.Geometry{Batch, Lq, Lk, Align, Offset}.
	Mask mask.Mask
	// Align and Offset place query i at key position p(i) (see
	// mask.Geometry); p(i) is also the position ALiBi uses.
	Align  mask.Align
	Offset int
	// Bias is an additive bias of shape [BiasBatch, BiasHeads, Lq, Lk]
	// (always this order, whatever Layout says), broadcast over batch
	// when BiasBatch = 1 and over query heads when BiasHeads = 1. When Bias
	// is nil there is none and BiasBatch, BiasHeads are ignored. A −Inf
	// entry hides its key like the mask.
	Bias                 []float64
	BiasBatch, BiasHeads int
	// Slopes, when not nil, holds one ALiBi slope per query head (the caller
	// computes them, e.g. 2^{−8k/H}); ALiBi chooses the distance, the bias
	// being −Slopes[h]·ALiBi.Distance(p(i), j) (mask.ALiBiForm). ALiBi needs
	// every query at a key position, 0 ≤ p(i) < Lk, as a causal mask does.
	Slopes []float64
	ALiBi  mask.ALiBiForm
	// SoftCap c > 0 replaces the scaled logit t by c·tanh(t/c) (Bello et al.
	// 2016, arXiv 1611.09940, Appendix A); 0 means no cap.
	SoftCap float64
	// Sinks, when not nil, holds one sink logit σ_h per query head: e^{σ_h}
	// joins every softmax denominator of head h and carries no value, so
	// the weights of the keys sum to less than 1. −Inf turns a head's sink
	// off.
	Sinks []float64
	// Group maps query heads to kv heads.
	Group GroupMap
	// EmptyRow is the policy for rows that see no key.
	EmptyRow EmptyRow
	// Idiom is a float32 port's precision idiom (its accumulation format
	// and softmax shift): Forward32 and Decode32 honour it, every other
	// function ignores it (see Idiom). The zero value is the
	// straightforward float32 arithmetic.
	Idiom Idiom
}

// plan is a validated call: the options resolved to numbers and the mask
// laid out as booleans.
type plan struct {
	s        Shape
	layout   Layout
	scale    float64
	softCap  float64
	geom     mask.Geometry
	runLo    []int  // [Batch, Lq]: row r sees keys runLo[r] ≤ j < runHi[r]
	runHi    []int  //   (when vis is nil)
	vis      []bool // [Batch, Lq, Lk], only for a mask that is not one run per row
	bias     []float64
	biasB    bool // bias varies over batch
	biasH    bool // bias varies over heads
	slopes   []float64
	alibi    mask.ALiBiForm
	sinks    []float64
	group    GroupMap
	emptyNaN bool
	idiom    Idiom        // the direct form's float32 idiom; zero but for Forward32 and Decode32
	overflow overflowNote // the first logit of finite inputs that overflowed
}

// checkShape validates the sizes alone, for the exported function fn (and
// the scratch of a fast form, whose name holds "Fast").
func checkShape(fn string, s Shape) error {
	switch {
	case s.Batch < 0:
		return fmt.Errorf("%w: %s: Shape.Batch = %d; want ≥ 0", ErrShape, fn, s.Batch)
	case s.HeadsQ < 1:
		return fmt.Errorf("%w: %s: Shape.HeadsQ = %d; want ≥ 1", ErrShape, fn, s.HeadsQ)
	case s.HeadsKV < 1:
		return fmt.Errorf("%w: %s: Shape.HeadsKV = %d; want ≥ 1", ErrShape, fn, s.HeadsKV)
	case s.HeadsQ%s.HeadsKV != 0:
		return fmt.Errorf("%w: %s: Shape.HeadsQ = %d; want a multiple of HeadsKV = %d", ErrShape, fn, s.HeadsQ, s.HeadsKV)
	case s.Lq < 0:
		return fmt.Errorf("%w: %s: Shape.Lq = %d; want ≥ 0", ErrShape, fn, s.Lq)
	case s.Lk < 0:
		return fmt.Errorf("%w: %s: Shape.Lk = %d; want ≥ 0", ErrShape, fn, s.Lk)
	case s.Dk < 1:
		return fmt.Errorf("%w: %s: Shape.Dk = %d; want ≥ 1", ErrShape, fn, s.Dk)
	case s.Dv < 1:
		return fmt.Errorf("%w: %s: Shape.Dv = %d; want ≥ 1", ErrShape, fn, s.Dv)
	}
	// Every tensor must hold at most MaxElements, a zero dimension counted
	// as 1; each factor is divided out of the room left, so no product
	// is formed before it is known to fit.
	for _, t := range []struct {
		name, names string
		dims        []int
	}{
		{"q", "Batch·HeadsQ·Lq·Dk", []int{s.Batch, s.HeadsQ, s.Lq, s.Dk}},
		{"k", "Batch·HeadsKV·Lk·Dk", []int{s.Batch, s.HeadsKV, s.Lk, s.Dk}},
		{"v", "Batch·HeadsKV·Lk·Dv", []int{s.Batch, s.HeadsKV, s.Lk, s.Dv}},
		{"the output", "Batch·HeadsQ·Lq·Dv", []int{s.Batch, s.HeadsQ, s.Lq, s.Dv}},
	} {
		room := MaxElements
		for _, d := range t.dims {
			if d = max(d, 1); d > room {
				return fmt.Errorf("%w: %s: the size of %s, %s = %s, a zero dimension counted as 1; want at most MaxElements = %d elements",
					ErrShape, fn, t.name, t.names, num.Factors(t.dims...), MaxElements)
			}
			room /= d
		}
	}
	if strings.Contains(fn, "Fast") {
		return checkFastScratch(fn, s)
	}
	return nil
}

// checkFastScratch checks, for a call of the fast form fn, that the
// scratch of one worker, at most 3 blocks of 64 rows by Lk keys, fits
// MaxElements.
func checkFastScratch(fn string, s Shape) error {
	if s.Lk > MaxElements/(3*rowBlock) {
		return fmt.Errorf("%w: %s: Shape.Lk = %d; want at most MaxElements/(3·%d) = %d keys, so that a worker's scratch of 3·%d·Lk values fits MaxElements",
			ErrShape, fn, s.Lk, rowBlock, MaxElements/(3*rowBlock), rowBlock)
	}
	return nil
}

// fastWorkers is how many workers a fast form runs when each holds
// perWorker values: GOMAXPROCS, or fewer so that their scratch together
// stays within MaxElements; never fewer than one.
func fastWorkers(perWorker int) int {
	return max(1, min(runtime.GOMAXPROCS(0), MaxElements/max(perWorker, 1)))
}

// checkLen validates that a tensor of function fn, called name, has as
// many elements as the product of dims, which names spells out
// ("Batch·HeadsQ·Lq·Dk"); a mismatch wraps sentinel.
func checkLen(sentinel error, fn, name string, got int, names string, dims ...int) error {
	want := 1
	for _, d := range dims {
		want *= d
	}
	if got == want {
		return nil
	}
	return fmt.Errorf("%w: %s: %s has %d elements; want %s", sentinel, fn, name, got, num.Product(names, dims...))
}

// kvNames are the names fn gives its key and value arguments.
func kvNames(fn string) (k, v string) {
	if strings.HasPrefix(fn, "Decode") {
		return "kCache", "vCache"
	}
	return "k", "v"
}

// checkInputs validates the lengths of q, k and v, the slices every form
// takes.
func checkInputs(fn string, qn, kn, vn int, s Shape) error {
	kName, vName := kvNames(fn)
	if err := checkLen(ErrLength, fn, "q", qn, "Batch·HeadsQ·Lq·Dk", s.Batch, s.HeadsQ, s.Lq, s.Dk); err != nil {
		return err
	}
	if err := checkLen(ErrLength, fn, kName, kn, "Batch·HeadsKV·Lk·Dk", s.Batch, s.HeadsKV, s.Lk, s.Dk); err != nil {
		return err
	}
	return checkLen(ErrLength, fn, vName, vn, "Batch·HeadsKV·Lk·Dv", s.Batch, s.HeadsKV, s.Lk, s.Dv)
}

// newPlan validates the shape, the slices that every form takes, and the
// options of a call of the exported function fn, and resolves them. Its
// steps run in this order, and the first error is returned.
func newPlan(fn string, qn, kn, vn int, s Shape, o *Options) (*plan, error) {
	if err := checkShape(fn, s); err != nil {
		return nil, err
	}
	if err := checkInputs(fn, qn, kn, vn, s); err != nil {
		return nil, err
	}
	p := &plan{s: s, layout: o.Layout, group: o.Group, emptyNaN: o.EmptyRow == EmptyRowNaN}
	for _, step := range []func(fn string, o *Options) error{
		p.checkConventions, p.setScale, p.setSlopes, p.setSinks, p.setBias, p.setMask,
	} {
		if err := step(fn, o); err != nil {
			return nil, err
		}
	}
	return p, nil
}

// checkConventions checks that the layout, the group map, the idiom and
// the empty-row policy are among their words.
func (p *plan) checkConventions(fn string, o *Options) error {
	if err := layoutWords.CheckAt(fn+": Options.Layout", o.Layout); err != nil {
		return err
	}
	if err := groupWords.CheckAt(fn+": Options.Group", o.Group); err != nil {
		return err
	}
	if err := o.Idiom.check(fn + ": Options.Idiom"); err != nil {
		return err
	}
	return emptyRowWords.CheckAt(fn+": Options.EmptyRow", o.EmptyRow)
}

// setScale resolves the scale (0: 1/√Dk) and checks the soft-cap.
func (p *plan) setScale(fn string, o *Options) error {
	switch {
	case o.Scale == 0:
		p.scale = 1 / math.Sqrt(float64(p.s.Dk))
	case !(o.Scale > 0) || math.IsInf(o.Scale, 1):
		return fmt.Errorf("%w: %s: Options.Scale = %v; want a positive finite number, or 0 for 1/√Dk", ErrOption, fn, o.Scale)
	default:
		p.scale = o.Scale
	}
	if o.SoftCap != 0 && (!(o.SoftCap > 0) || math.IsInf(o.SoftCap, 1)) {
		return fmt.Errorf("%w: %s: Options.SoftCap = %v; want a positive finite number, or 0 for no cap", ErrOption, fn, o.SoftCap)
	}
	p.softCap = o.SoftCap
	return nil
}

// checkPerHead checks an option of one value per query head, called name:
// its length, and that each value is finite, or, with negInf, finite or
// −Inf.
func (p *plan) checkPerHead(fn, name string, v []float64, negInf bool) error {
	if err := checkLen(ErrLength, fn, name, len(v), "HeadsQ", p.s.HeadsQ); err != nil {
		return err
	}
	want := "a finite number"
	if negInf {
		want += " or −Inf"
	}
	for h, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 1) || (math.IsInf(x, -1) && !negInf) {
			return fmt.Errorf("%w: %s: %s[%d] = %v; want %s", ErrOption, fn, name, h, x, want)
		}
	}
	return nil
}

// setSlopes checks the ALiBi slopes, one finite value per query head, and
// the form of the distance.
func (p *plan) setSlopes(fn string, o *Options) error {
	if o.Slopes == nil {
		return nil
	}
	if err := p.checkPerHead(fn, "Options.Slopes", o.Slopes, false); err != nil {
		return err
	}
	if err := o.ALiBi.Check(); err != nil {
		return vocab.At(err, ErrOption, fn+": Options.ALiBi")
	}
	p.slopes, p.alibi = o.Slopes, o.ALiBi
	return nil
}

// setSinks checks the sink logits, one per query head, each finite or −Inf.
func (p *plan) setSinks(fn string, o *Options) error {
	if o.Sinks == nil {
		return nil
	}
	if err := p.checkPerHead(fn, "Options.Sinks", o.Sinks, true); err != nil {
		return err
	}
	p.sinks = o.Sinks
	return nil
}

// setBias checks that the bias broadcasts to [Batch, HeadsQ, Lq, Lk].
func (p *plan) setBias(fn string, o *Options) error {
	if o.Bias == nil {
		return nil
	}
	s := p.s
	if o.BiasBatch != 1 && o.BiasBatch != s.Batch {
		return fmt.Errorf("%w: %s: Options.BiasBatch = %d; want 1 or Batch = %d", ErrBias, fn, o.BiasBatch, s.Batch)
	}
	if o.BiasHeads != 1 && o.BiasHeads != s.HeadsQ {
		return fmt.Errorf("%w: %s: Options.BiasHeads = %d; want 1 or HeadsQ = %d", ErrBias, fn, o.BiasHeads, s.HeadsQ)
	}
	if err := checkLen(ErrBias, fn, "Options.Bias", len(o.Bias), "BiasBatch·BiasHeads·Lq·Lk", o.BiasBatch, o.BiasHeads, s.Lq, s.Lk); err != nil {
		return err
	}
	p.bias = o.Bias
	p.biasB = o.BiasBatch > 1
	p.biasH = o.BiasHeads > 1
	return nil
}

// setMask lays the mask (the zero Mask: Full) on the queries and keys,
// checks that ALiBi's query positions are key positions, and records
// which keys each row sees.
func (p *plan) setMask(fn string, o *Options) error {
	s := p.s
	p.geom = mask.Geometry{Batch: s.Batch, Lq: s.Lq, Lk: s.Lk, Align: o.Align, Offset: o.Offset}
	m := o.Mask
	if isZeroMask(m) {
		m = mask.Full() // the documented default: every key visible
	}
	if err := m.Check(p.geom); err != nil {
		return fmt.Errorf("%w: %s: Options.Mask = %v; want a mask that fits Batch = %d, Lq = %d, Lk = %d, Align = %v, Offset = %d (%w)",
			ErrMask, fn, m, s.Batch, s.Lq, s.Lk, o.Align, o.Offset, err)
	}
	if p.slopes != nil && !m.UsesPositions() && s.Lq > 0 {
		// ALiBi uses positions even when the mask does not.
		if first, last := p.geom.Pos(0), p.geom.Pos(s.Lq-1); first < 0 || last >= s.Lk {
			return fmt.Errorf("%w: %s: Options.Offset = %d (queries at key positions %d … %d with Align = %v, Lq = %d, Lk = %d); want every query at a key position 0 … %d, as ALiBi needs",
				ErrOption, fn, o.Offset, first, last, o.Align, s.Lq, s.Lk, s.Lk-1)
		}
	}
	if err := p.layMask(m); err != nil {
		return fmt.Errorf("%w: %s: Options.Mask = %v; want a mask that can be laid out on Batch = %d, Lq = %d, Lk = %d (%w)",
			ErrMask, fn, m, s.Batch, s.Lq, s.Lk, err)
	}
	return nil
}

// layMask records which keys each row sees. Every mask kind of the mask
// package shows each row one run of consecutive keys (or none), so the
// plan keeps the run's ends per row, 2·Batch·Lq ints; should a row ever see
// keys that are not consecutive, it keeps the whole Batch·Lq·Lk booleans
// instead, an error of the mask package if that is more than
// mask.MaxElements. m must have passed Check on p.geom.
func (p *plan) layMask(m mask.Mask) error {
	s := p.s
	p.runLo, p.runHi = make([]int, s.Batch*s.Lq), make([]int, s.Batch*s.Lq)
	runs := true
	err := m.Rows(p.geom, func(b, i int, row []bool) {
		first, last := -1, -1
		for j, v := range row {
			if v {
				if first < 0 {
					first = j
				}
				last = j
			}
		}
		for j := first + 1; j < last && runs; j++ {
			runs = row[j]
		}
		p.runLo[b*s.Lq+i], p.runHi[b*s.Lq+i] = max(first, 0), last+1
	})
	if err == nil && !runs {
		p.vis, err = m.Visible(p.geom)
	}
	return err
}

// visible reports whether key j is visible to row i of batch entry b.
func (p *plan) visible(b, i, j int) bool {
	r := b*p.s.Lq + i
	if p.vis != nil {
		return p.vis[r*p.s.Lk+j]
	}
	return p.runLo[r] <= j && j < p.runHi[r]
}

// kvHead is the kv head that query head h reads.
func (p *plan) kvHead(h int) int {
	if p.group == GroupCycle {
		return h % p.s.HeadsKV
	}
	return h / (p.s.HeadsQ / p.s.HeadsKV)
}

// off is the offset of row (b, h, i) of a tensor with H heads, L rows per
// head and D elements per row, in layout l.
func off(l Layout, b, h, i, H, L, D int) int {
	if l == SeqMajor {
		return ((b*L+i)*H + h) * D
	}
	return ((b*H+h)*L + i) * D
}

// stride is the distance between rows i and i+1 of one head.
func stride(l Layout, H, D int) int {
	if l == SeqMajor {
		return H * D
	}
	return D
}

func (p *plan) qOff(b, h, i int) int { return off(p.layout, b, h, i, p.s.HeadsQ, p.s.Lq, p.s.Dk) }
func (p *plan) kOff(b, h, j int) int { return off(p.layout, b, h, j, p.s.HeadsKV, p.s.Lk, p.s.Dk) }
func (p *plan) vOff(b, h, j int) int { return off(p.layout, b, h, j, p.s.HeadsKV, p.s.Lk, p.s.Dv) }
func (p *plan) oOff(b, h, i int) int { return off(p.layout, b, h, i, p.s.HeadsQ, p.s.Lq, p.s.Dv) }
func (p *plan) lOff(b, h, i int) int { return off(p.layout, b, h, i, p.s.HeadsQ, p.s.Lq, 1) }

// biasRow is the offset of the bias row of (b, h, i), or −1 for no bias.
func (p *plan) biasRow(b, h, i int) int {
	if p.bias == nil {
		return -1
	}
	bb, bh, nh := 0, 0, 1
	if p.biasB {
		bb = b
	}
	if p.biasH {
		bh, nh = h, p.s.HeadsQ
	}
	return ((bb*nh+bh)*p.s.Lq + i) * p.s.Lk
}

// overflowNote records the first logit, in the order (b, h, i, j), that
// came out NaN or ±Inf although its q row, k row and bias entry are
// finite: the arithmetic overflowed. The forms note such logits as they
// compute them (the test is one comparison per logit, and the rest runs
// only for a non-finite logit); the call then fails with ErrOverflow.
type overflowNote struct {
	mu         sync.Mutex
	seen       bool
	b, h, i, j int
	value      float64
}

// note records the logit t of key j in row (b, h, i) if it comes before
// the one recorded.
func (n *overflowNote) note(b, h, i, j int, t float64) {
	n.mu.Lock()
	defer n.mu.Unlock()
	if n.seen && slices.Compare([]int{b, h, i, j}, []int{n.b, n.h, n.i, n.j}) >= 0 {
		return
	}
	n.seen, n.b, n.h, n.i, n.j, n.value = true, b, h, i, j, t
}

// checkLogit notes the logit t of key j in row (b, h, i), read from kv
// head kv, when it is not finite although everything it is computed from
// is: the q and k rows, the bias entry (the slopes are finite, checked).
// A NaN or infinite input is not an overflow: it follows the special
// cases of Forward.
func checkLogit[T num.Float](p *plan, q, k []T, t T, b, h, kv, i, j int) {
	if t-t == 0 {
		return // finite
	}
	for _, x := range q[p.qOff(b, h, i):][:p.s.Dk] {
		if x-x != 0 {
			return
		}
	}
	for _, x := range k[p.kOff(b, kv, j):][:p.s.Dk] {
		if x-x != 0 {
			return
		}
	}
	if r := p.biasRow(b, h, i); r >= 0 && p.bias[r+j]-p.bias[r+j] != 0 {
		return
	}
	p.overflow.note(b, h, i, j, float64(t))
}

// overflowErr is the error of a call of fn that noted an overflowing
// logit, or nil; T is the arithmetic of the call, named by bits.
func (p *plan) overflowErr(fn string, bits int) error {
	n := &p.overflow
	if !n.seen {
		return nil
	}
	top := math.MaxFloat64
	if bits == 32 {
		top = math.MaxFloat32
	}
	return fmt.Errorf("%w: %s: the logit of batch entry %d, query head %d, query %d, key %d = %v from finite q, k and bias; "+
		"want Options.Scale (%v), SoftCap (%v), Bias and Slopes such that every logit of finite inputs stays within ±%.4g, the float%d range",
		ErrOverflow, fn, n.b, n.h, n.i, n.j, n.value, p.scale, p.softCap, top, bits)
}
