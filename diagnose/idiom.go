package diagnose

import (
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ops"
)

// This file holds the precision idioms of the search: word keys with
// Key.Idiom, which change the yardstick (the float32 run) and never the
// reference, so that the search judges the port by the yardstick of each
// of their words instead of running it as a convention.

// idiomNote is the Note of an idiom's Edit.
const idiomNote = "a precision idiom the port may declare: it changes the tolerance, not the reference"

// nearIdiom is how many times the tolerance of an idiom's yardstick the
// port's error may be for a failing idiom to be listed, when no convention
// change comes nearer than the configuration as given.
const nearIdiom = 10

// vacuous is the normwise tolerance above which an idiom's yardstick no
// longer bounds the error of a computation of the operation (its own
// float32 run is more than 5% off: an unshifted softmax whose sums
// overflow gives rows of 0). Under such a yardstick the port passes only
// if it also reproduces the idiom's own run (see reproduces).
const vacuous = 0.1

// idiomShare is how many times smaller than the error of an idiom's own
// float32 run the port's error may be, on an output that fails without
// the idiom, for the idiom to explain it: a port that computes as the
// idiom does has about the idiom's error, and a port several times more
// accurate than the idiom fails for another reason, which the idiom's
// wider tolerance would only hide.
const idiomShare = 4

// idiomChanges are the idiom alternatives of the operation: every word of
// every idiom key other than the key's default and the configuration's
// own, one at a time, described in the configuration's words
// (`"angles": "float32-angles"`).
func idiomChanges(o ops.Op, cfg map[string]any) []change {
	var out []change
	for _, k := range o.Keys() {
		if !k.Idiom || k.Type != "word" || len(k.Words) == 0 {
			continue
		}
		path := strings.Split(k.Name, ".")
		def := k.Words[0].Text
		cur := def
		if v, ok := getPath(cfg, path); ok {
			cur, _ = v.(string)
		}
		for _, w := range k.Words {
			if w.Text == def || w.Text == cur {
				continue
			}
			v := w.Text
			b, _ := json.Marshal(v)
			out = append(out, change{text: fmt.Sprintf("%q: %s", k.Name, b), edit: Edit{Key: k.Name, Value: b, Note: idiomNote, Idiom: true},
				group: k.Name, cfg: func(m map[string]any) { setPath(m, path, v) }})
		}
	}
	return out
}

// costAt is where an idiom candidate's cost is measured, the problem the
// candidates run on: the configuration, the inputs and the reference the
// operation gave there (before any output transform).
type costAt struct {
	config  []byte
	in, ref ops.Tensors
	sub     bool // a sub-problem
}

// idioms judges the port by the yardstick of each idiom alternative alts
// of the configuration as given, and, when neither a convention change nor
// an idiom alone passes, of each with the best convention change; it then
// merges the idiom candidates into the ranked list (see place).
func (s *search) idioms(alts []change) error {
	if len(alts) == 0 {
		return nil
	}
	passes := func(l []*cand) bool {
		for _, c := range l {
			if c.Pass {
				return true
			}
		}
		return false
	}
	var found []*cand
	// An idiom passes a port whose error is above vacuous only with a
	// vacuous yardstick, and then only if the port reproduces the idiom's
	// own run; when a convention change already passes (a reference the
	// port reproduces), that is not worth the idiom's float32 runs.
	if !passes(s.cands) || float64(s.given.Normwise) <= vacuous {
		for _, a := range alts {
			c, err := s.idiomAlone(a)
			if err != nil {
				return err
			}
			if c != nil {
				found = append(found, c)
			}
		}
	}
	if !passes(s.cands) && !passes(found) && len(s.cands) > 0 && s.cands[0].Measured && s.promise(s.cands[0]) < 1 {
		best := s.cands[0]
		for _, a := range alts {
			c, err := s.idiomWith(best, a)
			if err != nil {
				return err
			}
			if c != nil && c.Pass {
				found = append(found, c)
			}
		}
	}
	s.place(found)
	for _, c := range s.cands {
		if c.idiom {
			s.measureCost(c)
		}
	}
	return nil
}

// idiomAlone judges the port by the yardstick of the configuration as
// given with the idiom a, against the reference of the configuration as
// given (an idiom does not change it): on the sub-problem first when the
// problem was cut, and on the whole problem when it passes there (or the
// port has NaN or Inf where the reference is finite, to read the idiom's
// own run there). It returns nil when the operation refuses the idiom.
func (s *search) idiomAlone(a change) (*cand, error) {
	m := deepCopy(s.cfg).(map[string]any)
	a.cfg(m)
	config, err := json.Marshal(m)
	if err != nil {
		return nil, nil
	}
	name := s.op.Name()
	var v Verdict
	var ys map[string]*compare.Yardstick
	at := costAt{}
	if s.isCut {
		runCfg, err := s.sub.run(config)
		if err != nil {
			return nil, nil
		}
		if ys, err = ops.YardstickOf(name, runCfg, s.in, s.baseRef, s.f, s.opt.K); err != nil {
			return nil, nil
		}
		if v, err = judge(s.baseRef, s.got, ys); err != nil {
			return nil, err
		}
		at = costAt{config: runCfg, in: s.in, ref: s.baseRef, sub: true}
	}
	nonFinite := math.IsInf(float64(s.given.Normwise), 1)
	if !s.isCut || v.Pass || nonFinite {
		if ys, err = ops.YardstickOf(name, config, s.full, s.fullRef, s.f, s.opt.K); err != nil {
			return nil, nil
		}
		if v, err = judge(s.fullRef, s.fullGot, ys); err != nil {
			return nil, err
		}
		reproduces(&v, s.fullRef, s.fullGot, ys, s.given.Outputs)
		if !s.isCut {
			at = costAt{config: config, in: s.full, ref: s.fullRef}
		}
		if nonFinite {
			s.sameNonFinite(a, ys)
		}
	}
	s.idiomsJudged++
	c := &cand{Candidate: Candidate{Change: a.text, Changes: []string{a.text}, Edits: []Edit{a.edit}, Config: config,
		Normwise: v.Normwise, Measured: true, Pass: v.Pass, Outputs: v.Outputs}, changes: []change{a}, idiom: true, cost: at}
	c.fit, c.close, c.loose = fit(v), closeness(v, ys), loose(v, ys, s.given.Outputs)
	return c, nil
}

// idiomWith judges the port by the yardstick of the convention candidate
// best with the idiom a, against best's own reference, on the problem the
// candidates run on. It returns nil when the operation refuses it.
func (s *search) idiomWith(best *cand, a change) (*cand, error) {
	var m map[string]any
	if err := decode(best.Config, &m); err != nil {
		return nil, nil
	}
	a.cfg(m)
	config, err := json.Marshal(m)
	if err != nil {
		return nil, nil
	}
	runCfg, err := s.sub.run(config)
	if err != nil {
		return nil, nil
	}
	ys, err := ops.YardstickOf(s.op.Name(), runCfg, best.in, best.raw, s.f, s.opt.K)
	if err != nil {
		return nil, nil
	}
	s.idiomsJudged++
	v, err := judge(best.ref, s.got, ys)
	if err != nil {
		return nil, err
	}
	transformed := false
	for _, c := range best.changes {
		transformed = transformed || c.out != nil
	}
	if transformed {
		// The idiom's own run is not in the port's layout: a vacuous
		// yardstick cannot be checked against it, and does not pass.
		reproduces(&v, best.ref, s.got, nil, best.Outputs)
	} else {
		reproduces(&v, best.ref, s.got, ys, best.Outputs)
	}
	changes := append(append([]change(nil), best.changes...), a)
	names := append(append([]string(nil), best.Changes...), a.text)
	edits := append(append([]Edit(nil), best.Edits...), a.edit)
	var same []string
	for _, d := range best.Same {
		same = append(same, d+"; "+a.text)
	}
	c := &cand{Candidate: Candidate{Change: strings.Join(names, "; "), Changes: names, Edits: edits, Same: same, Config: config,
		Normwise: v.Normwise, Measured: true, Pass: v.Pass, Outputs: v.Outputs}, changes: changes, idiom: true,
		cost: costAt{config: runCfg, in: best.in, ref: best.raw, sub: s.isCut}}
	c.fit, c.close, c.loose = fit(v), closeness(v, ys), loose(v, ys, best.Outputs)
	return c, nil
}

// loose reports whether the idiom's yardsticks ys are too wide to explain
// the port: on some output that fails without the idiom (plain), the
// port's normwise error is more than idiomShare times smaller than that of
// the idiom's own float32 run (each at least one rounding).
func loose(v Verdict, ys map[string]*compare.Yardstick, plain []OutputVerdict) bool {
	failed := map[string]bool{}
	for _, o := range plain {
		failed[o.Output] = o.Pass != nil && !*o.Pass
	}
	for _, o := range v.Outputs {
		y, ok := ys[o.Output]
		if !ok || !failed[o.Output] {
			continue
		}
		port, run := max(float64(o.Normwise), y.FloorNormwise), max(y.Report.Normwise, y.FloorNormwise)
		if float64(idiomShare*port) < run {
			return true
		}
	}
	return false
}

// reproduces fails, in the verdict v of the port's outputs got under an
// idiom's yardsticks ys, every passing output whose idiom tolerance is
// above vacuous and whose outputs do not reproduce the idiom's own float32
// run: ‖got − run‖₂ / ‖ref‖₂ must be within the normwise tolerance of the
// yardstick without the idiom (plain, the verdict that failed), as a port
// of the idiom differs from the idiom's run only by float32 roundings.
// Without ys, every output above vacuous fails.
func reproduces(v *Verdict, ref, got ops.Tensors, ys map[string]*compare.Yardstick, plain []OutputVerdict) {
	if !v.Pass {
		return
	}
	tol := map[string]float64{}
	for _, o := range plain {
		tol[o.Output] = float64(o.Tolerance)
	}
	for i, o := range v.Outputs {
		if o.Pass == nil || !*o.Pass || float64(o.Tolerance) <= vacuous {
			continue
		}
		ok := false
		if y, has := ys[o.Output]; has && len(y.Output) == len(got[o.Output].Data) {
			ok = relDiff(ref[o.Output].Data, y.Output, got[o.Output].Data) <= tol[o.Output]
		}
		if !ok {
			f := false
			v.Outputs[i].Pass = &f
			v.Pass = false
		}
	}
}

// relDiff is ‖a − b‖₂ / ‖ref‖₂ (the absolute ‖a − b‖₂ when ‖ref‖₂ = 0),
// +Inf when a and b disagree on a NaN or an infinity.
func relDiff(ref, a, b []float64) float64 {
	var d, r scaledNorm
	for i, x := range a {
		y := b[i]
		if !finite(x) || !finite(y) {
			if (math.IsNaN(x) && math.IsNaN(y)) || x == y {
				continue
			}
			return math.Inf(1)
		}
		d.add(y - x)
		if finite(ref[i]) {
			r.add(ref[i])
		}
	}
	if r.value() == 0 {
		return d.value()
	}
	return d.value() / r.value()
}

// fit is how well a verdict under an idiom's yardstick fits the port, the
// worst output counting: the ratio of the port's normwise error to the
// tolerance (a port that passes has at most 1; one that computes as the
// idiom does sits near the idiom's own error, K times less).
func fit(v Verdict) float64 {
	f := 0.0
	for _, o := range v.Outputs {
		nw, tol := float64(o.Normwise), float64(o.Tolerance)
		switch {
		case nw == 0:
		case tol == 0 || math.IsNaN(nw):
			f = math.Inf(1)
		default:
			f = max(f, nw/tol)
		}
	}
	return f
}

// closeness is how far the port's normwise error is from that of the
// idiom's own float32 run, as |ln(port / run)| for the worst output, each
// error at least one rounding (the yardstick's FloorNormwise): 0 for a port
// that computes as the idiom does, ln 8 for a binary16 accumulation judged
// by the bfloat16 idiom, whose own error is eight times larger.
func closeness(v Verdict, ys map[string]*compare.Yardstick) float64 {
	c := 0.0
	for _, o := range v.Outputs {
		y, ok := ys[o.Output]
		if !ok {
			continue
		}
		port, run := max(float64(o.Normwise), y.FloorNormwise), max(y.Report.Normwise, y.FloorNormwise)
		d := math.Abs(math.Log(port / run))
		if math.IsNaN(d) {
			d = math.Inf(1)
		}
		c = max(c, d)
	}
	return c
}

// place merges the idiom candidates into the ranked convention candidates:
// the conventions the port passes first (a different reference explains
// the error), then the idioms it passes (the fewest changes first, then
// the idiom whose own error is nearest the port's first: see closeness),
// then the conventions it fails. An idiom too loose to explain the port
// (see loose) is not listed, whether the port passes it or not; an idiom
// the port fails is listed only when it is near (the port's error within
// nearIdiom times its tolerance, and nearer than under the yardstick as
// given), nothing passes and no convention change comes nearer than the
// configuration as given; it is then listed first among the failing.
func (s *search) place(found []*cand) {
	var passing, failing []*cand
	for _, c := range found {
		if c.loose {
			continue
		}
		if c.Pass {
			passing = append(passing, c)
		} else {
			failing = append(failing, c)
		}
	}
	sort.SliceStable(passing, func(i, j int) bool {
		a, b := passing[i], passing[j]
		if len(a.changes) != len(b.changes) {
			return len(a.changes) < len(b.changes)
		}
		return a.close < b.close
	})
	near := len(passing) > 0 // a passing idiom is nearer than a failing one
	for _, c := range s.cands {
		if c.Pass || s.promise(c) < 1 {
			near = true
			break
		}
	}
	var listed []*cand
	if !near {
		given := fit(s.given)
		for _, c := range failing {
			if c.fit <= nearIdiom && c.fit < given {
				listed = append(listed, c)
			}
		}
		sort.SliceStable(listed, func(i, j int) bool { return listed[i].fit < listed[j].fit })
	}
	k := 0
	for k < len(s.cands) && s.cands[k].Pass {
		k++
	}
	out := append([]*cand(nil), s.cands[:k]...)
	out = append(append(append(out, passing...), listed...), s.cands[k:]...)
	s.cands = out
}

// measureCost measures what the idiom of candidate c costs on the problem
// the candidates run on (ops.IdiomCostOf, the reference kept); it leaves
// the cost out when the operation cannot measure it.
func (s *search) measureCost(c *cand) {
	costs, err := ops.IdiomCostOf(s.op.Name(), c.cost.config, c.cost.in, c.cost.ref, s.f, s.opt.K)
	if err != nil || costs == nil {
		return
	}
	if ic := NewIdiomCost(costs, sortedNames(s.got)); ic != nil {
		ic.SubProblem = c.cost.sub
		c.IdiomCost = ic
	}
}

// NewIdiomCost is what ops.IdiomCost (or IdiomCostOf) measured, as data:
// the outputs named, in that order (those costs lacks are left out), each
// with its errors at the first and the last position when it has
// positions (ops.Cost.Sample). It is nil when no output is left.
func NewIdiomCost(costs map[string]*ops.Cost, outputs []string) *IdiomCost {
	ic := &IdiomCost{}
	for _, n := range outputs {
		k, ok := costs[n]
		if !ok {
			continue
		}
		ic.Keys = k.Keys
		oc := OutputCost{Output: n, Normwise: Number(k.Idiom.Report.Normwise), PlainNormwise: Number(k.Plain.Report.Normwise), Ratio: Number(k.Ratio()),
			MaxAbs: Number(k.Idiom.Report.MaxAbs), PlainMaxAbs: Number(k.Plain.Report.MaxAbs)}
		for _, p := range k.Sample(2) {
			oc.Positions = append(oc.Positions, PositionCost{Position: p.Position, MaxAbs: Number(p.Idiom.MaxAbs), PlainMaxAbs: Number(p.Plain.MaxAbs),
				Normwise: Number(p.Idiom.Normwise), PlainNormwise: Number(p.Plain.Normwise)})
		}
		ic.Outputs = append(ic.Outputs, oc)
	}
	if len(ic.Outputs) == 0 {
		return nil
	}
	return ic
}

// String is the cost in one line: for each output the idiom's normwise and
// max abs error against the plain float32 run's, and for an output with
// positions the largest error at its first and last position, for instance
//
//	what the idiom costs (angles = float32-angles) against the plain float32 run: y: normwise 7e-06 (plain 4.1e-08, ×170), max abs 8.9e-05 (plain 1.5e-07); position 0: 0 (plain 0), position 2047: 2.2e-05 (plain 7.7e-08)
func (c *IdiomCost) String() string {
	var parts []string
	for _, o := range c.Outputs {
		p := fmt.Sprintf("%s: normwise %.3g (plain %.3g, ×%.3g), max abs %.3g (plain %.3g)", o.Output,
			float64(o.Normwise), float64(o.PlainNormwise), float64(o.Ratio), float64(o.MaxAbs), float64(o.PlainMaxAbs))
		for i, q := range o.Positions {
			sep := "; "
			if i > 0 {
				sep = ", "
			}
			p += fmt.Sprintf("%sposition %d: %.3g (plain %.3g)", sep, q.Position, float64(q.MaxAbs), float64(q.PlainMaxAbs))
		}
		parts = append(parts, p)
	}
	on := ""
	if c.SubProblem {
		on = " on the sub-problem"
	}
	return fmt.Sprintf("what the idiom costs (%s) against the plain float32 run%s: %s", c.Keys, on, strings.Join(parts, " | "))
}

// sameNonFinite adds a signature for every output where the port has NaN
// or Inf where the reference is finite, exactly where the float32 run of
// the idiom a has them too: the port may compute as the idiom does, but no
// yardstick passes a NaN or an Inf where the reference is finite, so the
// idiom cannot be a passing candidate.
func (s *search) sameNonFinite(a change, ys map[string]*compare.Yardstick) {
	for _, n := range sortedNames(s.fullGot) {
		y, ok := ys[n]
		r := s.fullRef[n].Data
		g := s.fullGot[n].Data
		if !ok || len(y.Output) != len(r) {
			continue
		}
		count, same := 0, true
		for i, x := range r {
			if !finite(x) {
				continue
			}
			p, q := !finite(g[i]), !finite(y.Output[i])
			if p != q {
				same = false
				break
			}
			if p {
				count++
			}
		}
		if !same || count == 0 {
			continue
		}
		why := ""
		if a.edit.Key == "softmax_shift" {
			why = " (e^x overflows float32 for a logit above about 88.7 when the maximum is not subtracted)"
		}
		s.idiomSignatures = append(s.idiomSignatures, Signature{Output: n, Along: "non-finite",
			Finding: fmt.Sprintf("NaN or Inf in the same %d elements as the float32 run of the precision idiom %s", count, a.text),
			Suggests: fmt.Sprintf("that the port computes as %s does%s; it is not named as a candidate: "+
				"no yardstick passes a NaN or an Inf where the reference is finite", a.text, why)})
	}
}
