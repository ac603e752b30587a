package attention

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/mask"
)

// Sentinel errors. Every error returned by this package wraps exactly one of
// them (and, for a mask that does not fit or an ALiBi form that is none of
// its words, the mask package's own error as well), so callers can match
// with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "attention: invalid shape: Forward: Shape.HeadsQ = 6; want
// a multiple of HeadsKV = 4", or "… q has 95 elements; want
// Batch·HeadsQ·Lq·Dk = 2·4·3·4 = 96" for a length.
var (
	// ErrShape: a dimension out of range (Dk = 0, a negative length, …),
	// query heads that are not a multiple of the key/value heads, or a
	// tensor beyond MaxElements.
	ErrShape = errors.New("attention: invalid shape")
	// ErrLength: a slice whose length does not match the shape.
	ErrLength = errors.New("attention: length mismatch")
	// ErrOption: an option out of its domain (a scale or cap that is not
	// positive and finite, a layout, group map, policy or ALiBi form that
	// is none of its words, a NaN slope or sink, a block size below one, a
	// decoding position outside the cache).
	ErrOption = errors.New("attention: invalid option")
	// ErrBias: an additive bias whose shape does not broadcast to
	// [Batch, HeadsQ, Lq, Lk].
	ErrBias = errors.New("attention: bias does not broadcast")
	// ErrMask: a mask that cannot be laid on the query and key lengths; the
	// error also wraps the mask package's error.
	ErrMask = errors.New("attention: mask does not fit")
	// ErrOverflow: a logit computed from finite inputs came out NaN or
	// ±Inf: the scale, bias or ALiBi slopes are too large for the inputs'
	// magnitudes (see Magnitudes at Options).
	ErrOverflow = errors.New("attention: logits overflow")
)

// MaxElements is the most elements one tensor of this package may hold,
// 2^28: each of Q, K, V and the output, [Batch, Heads, L, D], and the
// scratch of the fast forms. A Shape beyond it is refused with ErrShape
// before anything is allocated. The products are formed only after each
// factor has been checked (a zero dimension counted as 1, so that Batch
// = 0 or Lk = 0 does not hide a dimension that scratch space is sized
// by), so they cannot wrap around. 2^28 float64 values are 2 GiB, one
// allocation a test machine can make and fill; the output of a shape
// beyond it (a Dv of 2^40 with Lk = 0, which needs no V data) would
// otherwise end the program with an out-of-memory crash no caller can
// recover from. The fast forms hold up to 3·64·Lk values per worker, so
// they also refuse Lk > MaxElements/192 and run no more workers than fit
// MaxElements together (which changes no result: they are bit-identical
// for any number of workers). Every golden, benchmark and test shape of
// the package is far inside the limit (the largest, the decoding
// benchmark's K and V, are 2^26 elements each).
const MaxElements = 1 << 28

// Layout is the memory order of Q, K, V, the output and their gradients.
// The innermost dimension is always the head dimension, so every row of a
// head is contiguous in both layouts.
type Layout int

const (
	// HeadsMajor is [Batch, Heads, Seq, Dim]: each head's rows are
	// contiguous. The log-sum-exp is [Batch, HeadsQ, Lq]. The zero value.
	HeadsMajor Layout = iota
	// SeqMajor is [Batch, Seq, Heads, Dim]: the heads of one position are
	// contiguous, the order a projection produces before any transpose. The
	// log-sum-exp is [Batch, Lq, HeadsQ].
	SeqMajor
)

var layoutWords = vocab.New("attention", "layout", "the memory order of q, k, v, the output and the gradients", ErrOption,
	vocab.W(HeadsMajor, "heads-major", "[batch, heads, positions, dim]: each head's rows are contiguous"),
	vocab.W(SeqMajor, "seq-major", "[batch, positions, heads, dim]: the heads of one position are contiguous"),
)

// String returns l's word ("heads-major").
func (l Layout) String() string { return layoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l Layout) MarshalText() ([]byte, error) { return layoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (l *Layout) UnmarshalText(b []byte) error { return layoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layout) Meaning() string { return layoutWords.Meaning(l) }

// Values lists every Layout, the zero value first.
func (Layout) Values() []Layout { return layoutWords.Values() }

// Check returns nil if l is one of the Layout constants, or an error
// wrapping ErrOption that lists the words.
func (l Layout) Check() error { return layoutWords.Check(l) }

// GroupMap says which key/value head query head h reads when HeadsQ is a
// multiple of HeadsKV (grouped-query attention, Ainslie et al.
// 2023, arXiv 2305.13245, §2.2; multi-query attention is HeadsKV = 1,
// Shazeer 2019, arXiv 1911.02150, §3; multi-head is HeadsKV = HeadsQ).
type GroupMap int

const (
	// GroupBlocks: consecutive query heads share a kv head,
	// kv(h) = ⌊h / (HeadsQ/HeadsKV)⌋, the contiguous grouping drawn in the
	// overview figure of Ainslie et al. 2023. For 8 query heads on 2 kv
	// heads, heads 0–3 read kv head 0 and heads 4–7 kv head 1. The zero
	// value.
	GroupBlocks GroupMap = iota
	// GroupCycle: kv(h) = h mod HeadsKV; for 8 query heads on 2 kv heads the
	// even heads read kv head 0 and the odd heads kv head 1.
	GroupCycle
)

var groupWords = vocab.New("attention", "group map", "which key/value head each query head reads", ErrOption,
	vocab.W(GroupBlocks, "blocks", "consecutive query heads share a kv head: kv(h) = h / (heads_q / heads_kv)"),
	vocab.W(GroupCycle, "cycle", "query head h reads kv head h mod heads_kv"),
)

// String returns g's word ("blocks").
func (g GroupMap) String() string { return groupWords.String(g) }

// MarshalText returns g's word; a value with none is an error wrapping
// ErrOption.
func (g GroupMap) MarshalText() ([]byte, error) { return groupWords.Marshal(g) }

// UnmarshalText sets g from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (g *GroupMap) UnmarshalText(b []byte) error { return groupWords.Unmarshal(g, b) }

// Meaning returns one line saying what g means.
func (g GroupMap) Meaning() string { return groupWords.Meaning(g) }

// Values lists every GroupMap, the zero value first.
func (GroupMap) Values() []GroupMap { return groupWords.Values() }

// Check returns nil if g is one of the GroupMap constants, or an error
// wrapping ErrOption that lists the words.
func (g GroupMap) Check() error { return groupWords.Check(g) }

// EmptyRow is what a query row that sees no key at all produces.
type EmptyRow int

const (
	// EmptyRowZero: the output row is 0 and its log-sum-exp is −Inf, which
	// is what a tiled online-softmax kernel gives (its running sum stays 0)
	// and what makes Merge with an empty part exact. The row contributes
	// nothing to any gradient. The zero value.
	EmptyRowZero EmptyRow = iota
	// EmptyRowNaN: the output row is NaN, which is what a naive softmax over
	// logits that are all −Inf gives (e^{−Inf − (−Inf)} = NaN); its
	// log-sum-exp is −Inf. In Backward the row's probabilities are NaN for
	// every key, so the row's dQ and the dK and dV of its kv head are NaN.
	EmptyRowNaN
)

var emptyRowWords = vocab.New("attention", "empty-row policy", "what a query row that sees no key produces", ErrOption,
	vocab.W(EmptyRowZero, "zero", "output 0 and log-sum-exp −Inf, as a tiled online softmax gives"),
	vocab.W(EmptyRowNaN, "nan", "output NaN, as a naive softmax over logits that are all −Inf gives"),
)

// String returns e's word ("zero").
func (e EmptyRow) String() string { return emptyRowWords.String(e) }

// MarshalText returns e's word; a value with none is an error wrapping
// ErrOption.
func (e EmptyRow) MarshalText() ([]byte, error) { return emptyRowWords.Marshal(e) }

// UnmarshalText sets e from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (e *EmptyRow) UnmarshalText(b []byte) error { return emptyRowWords.Unmarshal(e, b) }

// Meaning returns one line saying what e means.
func (e EmptyRow) Meaning() string { return emptyRowWords.Meaning(e) }

// Values lists every EmptyRow, the zero value first.
func (EmptyRow) Values() []EmptyRow { return emptyRowWords.Values() }

// Check returns nil if e is one of the EmptyRow constants, or an error
// wrapping ErrOption that lists the words.
func (e EmptyRow) Check() error { return emptyRowWords.Check(e) }

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
				parts := make([]string, len(t.dims))
				for k, d := range t.dims {
					parts[k] = strconv.Itoa(d)
				}
				return fmt.Errorf("%w: %s: the size of %s, %s = %s, a zero dimension counted as 1; want at most MaxElements = %d elements",
					ErrShape, fn, t.name, t.names, strings.Join(parts, "·"), MaxElements)
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
	parts := make([]string, len(dims))
	for i, d := range dims {
		want *= d
		parts[i] = strconv.Itoa(d)
	}
	if got == want {
		return nil
	}
	if len(dims) == 1 {
		return fmt.Errorf("%w: %s: %s has %d elements; want %s = %d", sentinel, fn, name, got, names, want)
	}
	return fmt.Errorf("%w: %s: %s has %d elements; want %s = %s = %d", sentinel, fn, name, got, names, strings.Join(parts, "·"), want)
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

// checkConventions checks that the layout, the group map and the
// empty-row policy are among their words.
func (p *plan) checkConventions(fn string, o *Options) error {
	if err := layoutWords.CheckAt(fn+": Options.Layout", o.Layout); err != nil {
		return err
	}
	if err := groupWords.CheckAt(fn+": Options.Group", o.Group); err != nil {
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

// setSlopes checks the ALiBi slopes, one finite value per query head, and
// the form of the distance.
func (p *plan) setSlopes(fn string, o *Options) error {
	if o.Slopes == nil {
		return nil
	}
	if err := checkLen(ErrLength, fn, "Options.Slopes", len(o.Slopes), "HeadsQ", p.s.HeadsQ); err != nil {
		return err
	}
	for h, m := range o.Slopes {
		if math.IsNaN(m) || math.IsInf(m, 0) {
			return fmt.Errorf("%w: %s: Options.Slopes[%d] = %v; want a finite number", ErrOption, fn, h, m)
		}
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
	if err := checkLen(ErrLength, fn, "Options.Sinks", len(o.Sinks), "HeadsQ", p.s.HeadsQ); err != nil {
		return err
	}
	for h, v := range o.Sinks {
		if math.IsNaN(v) || math.IsInf(v, 1) {
			return fmt.Errorf("%w: %s: Options.Sinks[%d] = %v; want a finite number or −Inf", ErrOption, fn, h, v)
		}
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
