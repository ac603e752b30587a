package diagnose

import (
	"bytes"
	"encoding/json"
	"fmt"
	"hash/fnv"
	"maps"
	"math"
	"slices"
	"sort"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// Defaults of Options.
const (
	DefaultMaxCandidates = 96      // candidates run, single changes and pairs together
	DefaultMaxElements   = 1 << 14 // input elements of the problem the search runs on
	DefaultPairs         = 5       // most promising single changes combined two at a time
	DefaultConfirm       = 8       // best candidates whose own yardstick is measured
)

// Options bound the cost of a search. The zero Options is the defaults.
type Options struct {
	// MaxCandidates bounds the number of candidate configurations run,
	// single changes and pairs together; 0 means DefaultMaxCandidates.
	// Candidates past it are counted in Result.LeftOut, never run.
	MaxCandidates int
	// MaxElements bounds the problem the candidates run on, counted in
	// input elements. A larger problem is cut to a part that fits where
	// the operation allows (batch entries, heads, queries, rows,
	// positions; see the package documentation); Result.Cuts and
	// Result.SubProblem say what was kept. 0 means DefaultMaxElements.
	MaxElements int
	// Pairs is the number of most promising single changes (the best of
	// each key or mix-up, lowest normwise error first) that are combined
	// two at a time; 0 means DefaultPairs, a negative value no pairs.
	Pairs int
	// Confirm is the number of best candidates, by normwise error, whose
	// own yardstick is measured to decide whether the port passes them; 0
	// means DefaultConfirm.
	Confirm int
	// K is the yardstick factor; 0 means compare.DefaultK.
	K float64
}

func (o Options) withDefaults() (Options, error) {
	const fn = "Run"
	for _, c := range []struct {
		name string
		v    int
	}{{"MaxCandidates", o.MaxCandidates}, {"MaxElements", o.MaxElements}, {"Confirm", o.Confirm}} {
		if c.v < 0 {
			return o, fmt.Errorf("%w: %s: Options.%s = %d; want ≥ 0 (0: the default)", ErrOptions, fn, c.name, c.v)
		}
	}
	if o.K != 0 && (math.IsNaN(o.K) || math.IsInf(o.K, 0) || o.K < 1) {
		return o, fmt.Errorf("%w: %s: Options.K = %v; want 0 (the default) or a finite value ≥ 1", ErrOptions, fn, o.K)
	}
	if o.MaxCandidates == 0 {
		o.MaxCandidates = DefaultMaxCandidates
	}
	if o.MaxElements == 0 {
		o.MaxElements = DefaultMaxElements
	}
	if o.Pairs == 0 {
		o.Pairs = DefaultPairs
	}
	if o.Confirm == 0 {
		o.Confirm = DefaultConfirm
	}
	if o.K == 0 {
		o.K = compare.DefaultK
	}
	return o, nil
}

// Result is what a search found.
type Result struct {
	Op     string          `json:"operation"`
	Format compare.Format  `json:"format"`
	Config json.RawMessage `json:"configuration"`
	// Given is the port judged by the yardstick of the configuration as
	// given, on the whole problem. When it passes there is nothing to
	// diagnose: Candidates and Signatures are empty.
	Given Verdict `json:"as_given"`
	// SubProblem, when not empty, says which part of the problem the
	// candidates ran on ("batch entries 0–0 of 8"); empty: the whole.
	SubProblem string `json:"sub_problem,omitempty"`
	// Cuts names the axes the sub-problem was cut along, in the order
	// cut: "batch", "heads" (query heads with the kv heads they read),
	// "queries" (the first queries with the keys they see, at their
	// positions in the whole problem), "rows", "leading axis" and, for
	// rotary-apply, "heads" and "positions" (positions spread over the
	// length, each row at its position in the whole problem); empty: the
	// whole problem.
	Cuts       []string    `json:"cuts,omitempty"`
	Run        int         `json:"candidates_run"`            // candidate configurations run
	NoEffect   int         `json:"candidates_without_effect"` // they gave the reference of the configuration as given
	Refused    int         `json:"candidates_refused"`        // the operation refused them, or their outputs had another size
	LeftOut    int         `json:"candidates_left_out"`       // past Options.MaxCandidates, not run
	Idioms     int         `json:"idioms_judged"`             // precision-idiom alternatives judged by their own yardstick
	Candidates []Candidate `json:"candidates"`                // ranked: passing conventions, passing idioms, then by normwise error
	Signatures []Signature `json:"signatures"`                // of every failing output, on the whole problem
}

// Verdict is a port judged against one configuration.
type Verdict struct {
	Pass     bool            `json:"passes"`
	Normwise Number          `json:"normwise_error"` // the largest over the outputs
	Outputs  []OutputVerdict `json:"outputs"`
}

// OutputVerdict is one output judged against one configuration.
type OutputVerdict struct {
	Output   string `json:"output"`
	Normwise Number `json:"normwise_error"`
	// Tolerance is the normwise tolerance of the yardstick, and Pass its
	// verdict (elementwise and normwise); both absent when the yardstick
	// was not measured.
	Tolerance Number `json:"normwise_tolerance,omitempty"`
	Pass      *bool  `json:"passes,omitempty"`
}

// Candidate is one configuration (and tensor reading) the port may have
// used, described by its differences from the configuration as given.
type Candidate struct {
	// Change lists the changes in the configuration's own words, joined
	// by "; ": `"group": "cycle"`, `"offset": 2`, `k and v swapped`.
	Change  string   `json:"change"`
	Changes []string `json:"changes"`
	// Edits are the same changes as data, one for each of Changes.
	Edits []Edit `json:"edits"`
	// Same lists other changes that gave the identical reference on this
	// problem (the same query positions under the other alignment).
	Same     []string        `json:"same_as,omitempty"`
	Config   json.RawMessage `json:"configuration"`
	Normwise Number          `json:"normwise_error"` // the largest over the outputs
	// Measured says whether the candidate's own yardstick was measured
	// (the Options.Confirm best are); Pass is its verdict, false when not
	// measured.
	Measured bool            `json:"yardstick_measured"`
	Pass     bool            `json:"passes"`
	Outputs  []OutputVerdict `json:"outputs"`
	// IdiomCost, for a candidate that declares a precision idiom (an Edit
	// with Idiom set), is what the idiom costs against the plain float32
	// run, on the problem the candidates ran on; nil for the others.
	IdiomCost *IdiomCost `json:"idiom_cost,omitempty"`
}

// IdiomCost is what a precision idiom costs, output by output: the errors
// of the idiom's float32 run and of the plain float32 run (the
// configuration without its idiom keys) against the reference, as
// ops.IdiomCostOf measures them, in the format of the search.
type IdiomCost struct {
	// Keys are the idiom keys the candidate's configuration sets, as
	// "key = word" ("angles = float32-angles").
	Keys string `json:"keys"`
	// SubProblem says that the cost was measured on the sub-problem the
	// candidates ran on (Result.SubProblem), not on the whole problem.
	SubProblem bool         `json:"on_sub_problem,omitempty"`
	Outputs    []OutputCost `json:"outputs"`
}

// OutputCost is what an idiom costs on one output.
type OutputCost struct {
	Output string `json:"output"`
	// Normwise and MaxAbs are the errors of the idiom's float32 run,
	// PlainNormwise and PlainMaxAbs those of the plain float32 run, and
	// Ratio is Normwise over PlainNormwise (ops.Cost.Ratio).
	Normwise      Number `json:"normwise_error"`
	PlainNormwise Number `json:"plain_normwise_error"`
	Ratio         Number `json:"ratio"`
	MaxAbs        Number `json:"max_abs_error"`
	PlainMaxAbs   Number `json:"plain_max_abs_error"`
	// Positions, for an output whose rows sit at positions (rotary-apply's
	// y, rotary-tables' cos and sin), holds the errors at the first and at
	// the last position, where an angle idiom's error grows; absent for
	// other outputs.
	Positions []PositionCost `json:"positions,omitempty"`
}

// PositionCost is what an idiom costs on the rows of one position.
type PositionCost struct {
	Position      int    `json:"position"`
	MaxAbs        Number `json:"max_abs_error"`
	PlainMaxAbs   Number `json:"plain_max_abs_error"`
	Normwise      Number `json:"normwise_error"`
	PlainNormwise Number `json:"plain_normwise_error"`
}

// Edit is one change as data. A change of a configuration key has Key
// (its name as the operation lists it, "scale" or "scaling.factor"),
// Value (the new value as JSON; absent when the change removes the key)
// and, for a common alternative with a name, Note ("1/d", "1/s"). A
// change of how the port read or wrote its tensors ("k and v swapped",
// "w1 read transposed") has only Mixup, in words. A precision idiom
// (Key.Idiom: "angles", "variance", "accumulation", "softmax_shift") has
// Key, Value, Idiom set and a Note saying that the port may declare it:
// it changes the tolerance, not the reference.
type Edit struct {
	Key    string          `json:"key,omitempty"`
	Value  json.RawMessage `json:"value,omitempty"`
	Remove bool            `json:"remove,omitempty"`
	Note   string          `json:"note,omitempty"`
	Mixup  string          `json:"mixup,omitempty"`
	Idiom  bool            `json:"idiom,omitempty"`
}

// Names reports whether the candidate is described by change, as its own
// description or as one of the changes that gave the same reference.
func (c Candidate) Names(change string) bool {
	return c.Change == change || slices.Contains(c.Same, change)
}

// Passing returns the candidates the port passes, best first.
func (r *Result) Passing() []Candidate {
	var p []Candidate
	for _, c := range r.Candidates {
		if c.Pass {
			p = append(p, c)
		}
	}
	return p
}

// Number is a float64 that encodes in JSON as a number when finite and as
// the string "NaN", "+Inf" or "-Inf" otherwise.
type Number float64

// MarshalJSON encodes n.
func (n Number) MarshalJSON() ([]byte, error) {
	f := float64(n)
	switch {
	case math.IsNaN(f):
		return []byte(`"NaN"`), nil
	case math.IsInf(f, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(f, -1):
		return []byte(`"-Inf"`), nil
	}
	return json.Marshal(f)
}

// UnmarshalJSON decodes a number or one of the strings MarshalJSON writes.
func (n *Number) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case `"NaN"`:
		*n = Number(math.NaN())
		return nil
	case `"+Inf"`:
		*n = Number(math.Inf(1))
		return nil
	case `"-Inf"`:
		*n = Number(math.Inf(-1))
		return nil
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return fmt.Errorf("%w: Number.UnmarshalJSON: value = %s; want a number, \"NaN\", \"+Inf\" or \"-Inf\"", ErrOutputs, b)
	}
	*n = Number(f)
	return nil
}

// Run judges got, the outputs of a port of the operation called op in
// number format f, against the yardstick of config; when it fails, it
// searches for the configurations and tensor mix-ups under which it would
// pass, always changing config as given: every word of every convention
// key of the operation (one at a time), the common alternatives of its
// numeric keys, tensors swapped, transposed or read in the other layout,
// and pairs of the most promising single changes; and it judges got by the
// yardstick of each precision idiom of the operation (Key.Idiom), which
// keeps the reference and widens the tolerance, alone and with the best
// convention change. The search runs on a sub-problem when the problem is
// larger than Options.MaxElements, and computes error signatures of every
// failing output on the whole problem.
//
// got may hold any non-empty subset of the operation's outputs; only those
// are compared. Errors: an unknown operation, a configuration or inputs the
// operation refuses, or a format without a yardstick give the error of
// package ops or compare; an output that is not the operation's, absent
// from its reference or of another length wraps ErrOutputs; an invalid
// Options field wraps ErrOptions.
func Run(op string, config []byte, in ops.Tensors, got ops.Tensors, f compare.Format, opt Options) (*Result, error) {
	const fn = "Run"
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, err
	}
	o, err := ops.Lookup(op)
	if err != nil {
		return nil, err
	}
	if len(bytes.TrimSpace(config)) == 0 {
		config = []byte(`{"version":1}`)
	}
	ref, err := o.Run(config, in)
	if err != nil {
		return nil, err
	}
	if err := checkGot(fn, o, ref, got); err != nil {
		return nil, err
	}
	res := &Result{Op: op, Format: f, Config: json.RawMessage(compact(config)), Candidates: []Candidate{}, Signatures: []Signature{}}
	ys, err := ops.YardstickOf(op, config, in, ref, f, opt.K)
	if err != nil {
		return nil, err
	}
	res.Given, err = judge(ref, got, ys)
	if err != nil {
		return nil, err
	}
	if res.Given.Pass {
		return res, nil
	}
	var cfg map[string]any
	if err := decode(config, &cfg); err != nil {
		return nil, fmt.Errorf("%w: %s: config is not a JSON object (%v); want the operation's configuration", ops.ErrConfig, fn, err)
	}
	for _, v := range res.Given.Outputs {
		if v.Pass != nil && !*v.Pass {
			res.Signatures = append(res.Signatures, signatures(op, cfg, in, v.Output, ref[v.Output], got[v.Output], ys[v.Output])...)
		}
	}

	sp := cut(op, cfg, in, got, opt.MaxElements)
	base, err := runSub(o, sp, config)
	if err != nil {
		// The operation refuses the configuration on the sub-problem (a
		// mask that names positions past its keys): the whole problem.
		sp = whole(in, got)
		if base, err = o.Run(config, in); err != nil {
			return nil, err
		}
	}
	res.SubProblem, res.Cuts = sp.note, sp.cuts
	s := &search{op: o, opt: opt, f: f, cfg: cfg, in: sp.in, got: sp.got, sub: sp, seen: map[uint64]int{}, tried: map[string]bool{},
		full: in, fullGot: got, fullRef: ref, baseRef: base, given: res.Given, isCut: elements(sp.in) < elements(in)}
	s.baseHash = hashOutputs(base, sp.got)
	singles := generate(o, cfg, sp.in, in)
	s.baseNW = map[string]float64{}
	for n, t := range sp.got {
		s.baseNW[n] = normwise(base[n].Data, t.Data)
	}
	// Single changes may take all but the budget of the pairs.
	p := max(s.opt.Pairs, 0)
	pairBudget := min(p*(p-1)/2+(2*2+3*2)*8, s.opt.MaxCandidates/3)
	s.run(singles, s.opt.MaxCandidates-pairBudget)
	s.run(s.pairs(), s.opt.MaxCandidates)
	s.run(s.refine(), s.opt.MaxCandidates)
	if err := s.confirm(); err != nil {
		return nil, err
	}
	s.rank()
	if err := s.idioms(idiomChanges(o, cfg)); err != nil {
		return nil, err
	}
	res.Signatures = append(res.Signatures, s.idiomSignatures...)
	res.Run, res.NoEffect, res.Refused, res.LeftOut, res.Idioms = s.ran, s.noEffect, s.refused, s.leftOut, s.idiomsJudged
	for _, c := range s.cands {
		res.Candidates = append(res.Candidates, c.Candidate)
	}
	return res, nil
}

// runSub runs the operation on the sub-problem under the configuration
// of the whole problem.
func runSub(o ops.Op, sp subProblem, config []byte) (ops.Tensors, error) {
	c, err := sp.run(config)
	if err != nil {
		return nil, err
	}
	return o.Run(c, sp.in)
}

// compact returns config without insignificant space, or as given when it
// is not JSON (the operation accepted it, so it is).
func compact(config []byte) []byte {
	var b bytes.Buffer
	if json.Compact(&b, config) != nil {
		return config
	}
	return b.Bytes()
}

// decode reads one JSON object, numbers kept as json.Number.
func decode(b []byte, v any) error {
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	return d.Decode(v)
}

// checkGot refuses outputs the operation does not give and outputs of the
// wrong length.
func checkGot(fn string, o ops.Op, ref, got ops.Tensors) error {
	if len(got) == 0 {
		var names []string
		for _, p := range o.Outputs() {
			names = append(names, p.Name)
		}
		return fmt.Errorf("%w: %s: got has no output; want at least one of %s", ErrOutputs, fn, strings.Join(names, ", "))
	}
	for _, n := range sortedNames(got) {
		r, ok := ref[n]
		if !ok {
			return fmt.Errorf("%w: %s: got[%q] is not an output of %s here; want one of %s", ErrOutputs, fn, n, o.Name(), strings.Join(sortedNames(ref), ", "))
		}
		if len(got[n].Data) != len(r.Data) {
			return fmt.Errorf("%w: %s: got[%q] has %d elements; want %d, the size of the reference's output %v", ErrOutputs, fn, n, len(got[n].Data), len(r.Data), r.Shape)
		}
	}
	return nil
}

func sortedNames(t ops.Tensors) []string {
	return slices.Sorted(maps.Keys(t))
}

// judge compares got with ref output by output under the yardsticks ys.
func judge(ref, got ops.Tensors, ys map[string]*compare.Yardstick) (Verdict, error) {
	v := Verdict{Pass: true}
	for _, n := range sortedNames(got) {
		r := ref[n]
		ov := OutputVerdict{Output: n}
		y, ok := ys[n]
		if !ok {
			ov.Normwise = Number(normwise(r.Data, got[n].Data))
			v.Outputs = append(v.Outputs, ov)
			continue
		}
		rep, err := compare.Diff(r.Data, got[n].Data, r.Shape, y.Options())
		if err != nil {
			return v, err
		}
		pass := rep.Verdict.Pass
		ov.Normwise = Number(normwise(r.Data, got[n].Data))
		ov.Tolerance, ov.Pass = Number(y.Tolerance.MaxNormwise), &pass
		v.Pass = v.Pass && pass
		v.Normwise = max(v.Normwise, ov.Normwise)
		v.Outputs = append(v.Outputs, ov)
	}
	return v, nil
}

// normwise is ‖got − ref‖₂ / ‖ref‖₂ (the absolute ‖got − ref‖₂ when
// ‖ref‖₂ = 0), the measure of compare.Report.Normwise, with +Inf when the
// two disagree on a NaN or an infinity. Norms are accumulated scaled, so
// that large values do not overflow.
func normwise(ref, got []float64) float64 {
	var d, r scaledNorm
	for i, x := range ref {
		y := got[i]
		if !finite(x) || !finite(y) {
			if (math.IsNaN(x) && math.IsNaN(y)) || x == y {
				continue
			}
			return math.Inf(1)
		}
		d.add(y - x)
		r.add(x)
	}
	if r.value() == 0 {
		return d.value()
	}
	return d.value() / r.value()
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// scaledNorm accumulates a Euclidean norm as scale·√ssq.
type scaledNorm struct{ scale, ssq float64 }

func (n *scaledNorm) add(v float64) {
	a := math.Abs(v)
	if a == 0 {
		return
	}
	if n.ssq == 0 {
		n.scale, n.ssq = a, 1
		return
	}
	if a > n.scale {
		n.ssq = 1 + float64(n.ssq*(n.scale/a)*(n.scale/a))
		n.scale = a
	} else {
		n.ssq += float64((a / n.scale) * (a / n.scale))
	}
}

func (n *scaledNorm) value() float64 { return n.scale * math.Sqrt(n.ssq) }

// hashOutputs hashes the bits of the outputs named in got.
func hashOutputs(out, got ops.Tensors) uint64 {
	h := fnv.New64a()
	var b [8]byte
	for _, n := range sortedNames(got) {
		h.Write([]byte(n))
		for _, v := range out[n].Data {
			u := math.Float64bits(v)
			for i := range b {
				b[i] = byte(u >> (8 * i))
			}
			h.Write(b[:])
		}
	}
	return h.Sum64()
}

// search holds the candidates of one Run.
type search struct {
	op       ops.Op
	opt      Options
	f        compare.Format
	cfg      map[string]any
	in, got  ops.Tensors
	sub      subProblem // turns a candidate's configuration into the one it runs on
	isCut    bool       // the sub-problem is smaller than the whole
	baseRef  ops.Tensors
	baseHash uint64
	baseNW   map[string]float64 // normwise error of the configuration as given, per output
	tried    map[string]bool    // pairs already listed
	seen     map[uint64]int     // reference hash → index into cands
	cands    []*cand
	ran      int
	noEffect int
	refused  int
	leftOut  int

	// The whole problem, the port's outputs on it, the reference of the
	// configuration as given and the port's verdict under its yardstick,
	// for the precision idioms.
	full, fullGot, fullRef ops.Tensors
	given                  Verdict
	idiomsJudged           int
	idiomSignatures        []Signature
}

// cand is a candidate and what it takes to run it again.
type cand struct {
	Candidate
	changes []change
	in      ops.Tensors
	runCfg  []byte      // the configuration on the sub-problem
	raw     ops.Tensors // the reference the operation gave, before the output transforms
	ref     ops.Tensors // after the output transforms

	// For a precision idiom: fit and close order the candidates (see
	// place), and cost says where to measure what the idiom costs.
	idiom      bool
	loose      bool
	fit, close float64
	cost       costAt
}

// apply returns the configuration and inputs of the changes cs.
func (s *search) apply(cs []change) ([]byte, ops.Tensors, error) {
	m := deepCopy(s.cfg).(map[string]any)
	in := s.in
	for _, c := range cs {
		if c.cfg != nil {
			c.cfg(m)
		}
		if c.in != nil {
			in = c.in(in)
		}
	}
	b, err := json.Marshal(m)
	return b, in, err
}

// run evaluates the candidates cs while fewer than limit have run.
func (s *search) run(cs [][]change, limit int) {
	for _, c := range cs {
		if s.ran >= limit {
			s.leftOut++
			continue
		}
		s.ran++
		s.eval(c)
	}
}

func (s *search) eval(cs []change) {
	cfg, in, err := s.apply(cs)
	if err != nil {
		s.refused++
		return
	}
	runCfg, err := s.sub.run(cfg)
	if err != nil {
		s.refused++
		return
	}
	out, err := s.op.Run(runCfg, in)
	if err != nil {
		s.refused++
		return
	}
	raw := out
	for _, c := range cs {
		if c.out != nil {
			out = c.out(out)
		}
	}
	var names []string
	var edits []Edit
	for _, c := range cs {
		names = append(names, c.text)
		e := c.edit
		if e.Key == "" {
			e.Mixup = c.text // a change of how the tensors were read or written
		}
		edits = append(edits, e)
	}
	c := &cand{Candidate: Candidate{Change: strings.Join(names, "; "), Changes: names, Edits: edits, Config: cfg}, changes: cs, in: in, runCfg: runCfg, raw: raw, ref: out}
	for _, n := range sortedNames(s.got) {
		r, ok := out[n]
		if !ok || len(r.Data) != len(s.got[n].Data) {
			s.refused++
			return
		}
		nw := Number(normwise(r.Data, s.got[n].Data))
		c.Outputs = append(c.Outputs, OutputVerdict{Output: n, Normwise: nw})
		c.Normwise = max(c.Normwise, nw)
	}
	h := hashOutputs(out, s.got)
	if h == s.baseHash {
		s.noEffect++
		return
	}
	if i, ok := s.seen[h]; ok {
		s.cands[i].Same = append(s.cands[i].Same, c.Change)
		return
	}
	for _, ch := range cs {
		c.Same = append(c.Same, ch.same...)
	}
	s.seen[h] = len(s.cands)
	s.cands = append(s.cands, c)
}

// promise is how much a candidate improves on the configuration as given,
// output by output: the mean over the outputs of its normwise error over
// that of the configuration as given (1: no better; 0.5 with two outputs:
// one of them put right). A change that puts right one output of several
// is promising even when another keeps the largest error.
func (s *search) promise(c *cand) float64 {
	var sum float64
	for _, o := range c.Outputs {
		b := s.baseNW[o.Output]
		switch {
		case b == 0 || math.IsInf(b, 1) && math.IsInf(float64(o.Normwise), 1):
			sum++
		case math.IsInf(b, 1):
			sum += 0
		default:
			sum += math.Min(float64(o.Normwise)/b, 10)
		}
	}
	return sum / float64(max(len(c.Outputs), 1))
}

// groups returns the keys and mix-ups of the single candidates, most
// promising first, each with its single candidates, best first.
func (s *search) groups() ([]string, map[string][]*cand) {
	members := map[string][]*cand{}
	var order []string
	for _, c := range s.cands {
		if len(c.changes) != 1 {
			continue
		}
		g := c.changes[0].group
		if members[g] == nil {
			order = append(order, g)
		}
		members[g] = append(members[g], c)
	}
	for _, m := range members {
		sort.SliceStable(m, func(i, j int) bool { return s.promise(m[i]) < s.promise(m[j]) })
	}
	sort.SliceStable(order, func(i, j int) bool { return s.promise(members[order[i]][0]) < s.promise(members[order[j]][0]) })
	return order, members
}

// pairs combines the best single change of each of the Options.Pairs most
// promising keys or mix-ups two at a time.
func (s *search) pairs() [][]change {
	if s.opt.Pairs < 0 {
		return nil
	}
	order, members := s.groups()
	if len(order) > s.opt.Pairs {
		order = order[:s.opt.Pairs]
	}
	var out [][]change
	for i := range order {
		for j := i + 1; j < len(order); j++ {
			p := []change{members[order[i]][0].changes[0], members[order[j]][0].changes[0]}
			s.tried[pairKey(p)] = true
			out = append(out, p)
		}
	}
	return out
}

// refine replaces each change of the two best pairs by every other value
// of its key or mix-up, and pairs the best change of each of the three
// most promising keys or mix-ups with every value of each of the other
// two (up to eight values of a key, best first): the best value of a key
// alone need not be the one that completes a pair.
func (s *search) refine() [][]change {
	if s.opt.Pairs < 0 {
		return nil
	}
	order, members := s.groups()
	if len(order) > 3 {
		order = order[:3]
	}
	var out [][]change
	add := func(p []change) {
		if !s.tried[pairKey(p)] {
			s.tried[pairKey(p)] = true
			out = append(out, p)
		}
	}
	// The two best pairs, each change replaced by the other values of its
	// key or mix-up.
	var best []*cand
	for _, c := range s.cands {
		if len(c.changes) == 2 {
			best = append(best, c)
		}
	}
	sort.SliceStable(best, func(i, j int) bool { return best[i].Normwise < best[j].Normwise })
	for i, c := range best {
		if i == 2 {
			break
		}
		for k := range 2 {
			for m, alt := range members[c.changes[k].group] {
				if m == 8 {
					break
				}
				add([]change{c.changes[1-k], alt.changes[0]})
			}
		}
	}
	for i, gi := range order {
		for j, gj := range order {
			if i == j {
				continue
			}
			for k, alt := range members[gj] {
				if k == 8 {
					break
				}
				add([]change{members[gi][0].changes[0], alt.changes[0]})
			}
		}
	}
	return out
}

// pairKey identifies a set of changes whatever their order.
func pairKey(cs []change) string {
	t := make([]string, len(cs))
	for i, c := range cs {
		t[i] = c.text
	}
	sort.Strings(t)
	return strings.Join(t, "\n")
}

// confirm measures the yardstick of the Options.Confirm best candidates
// against the reference each already has, and judges the port by it.
func (s *search) confirm() error {
	order := slices.Clone(s.cands)
	sort.SliceStable(order, func(i, j int) bool { return order[i].Normwise < order[j].Normwise })
	for i, c := range order {
		if i >= s.opt.Confirm {
			break
		}
		ys, err := ops.YardstickOf(s.op.Name(), c.runCfg, c.in, c.raw, s.f, s.opt.K)
		if err != nil {
			continue // the candidate has no yardstick in this format; left unmeasured
		}
		v, err := judge(c.ref, s.got, ys)
		if err != nil {
			return err
		}
		c.Measured, c.Pass, c.Outputs = true, v.Pass, v.Outputs
	}
	return nil
}

// rank orders the candidates: those the port passes first, the fewest
// changes first among them (the simplest explanation), then by normwise
// error; the others by normwise error.
func (s *search) rank() {
	sort.SliceStable(s.cands, func(i, j int) bool {
		a, b := s.cands[i], s.cands[j]
		if a.Pass != b.Pass {
			return a.Pass
		}
		if a.Pass && len(a.changes) != len(b.changes) {
			return len(a.changes) < len(b.changes)
		}
		return a.Normwise < b.Normwise
	})
}

// deepCopy copies a decoded JSON value.
func deepCopy(v any) any {
	switch x := v.(type) {
	case map[string]any:
		m := make(map[string]any, len(x))
		for k, e := range x {
			m[k] = deepCopy(e)
		}
		return m
	case []any:
		l := make([]any, len(x))
		for i, e := range x {
			l[i] = deepCopy(e)
		}
		return l
	}
	return v
}
