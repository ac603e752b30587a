package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/diagnose"
	"github.com/plumbref/plumb/ops"
)

// This file holds what check reports of a precision idiom its
// configuration declares (a key with ops.Key.Idiom: "angles", "variance",
// "accumulation", "softmax_shift"): the block under idiomCostTitle after
// the reports, and "idiom_cost" in -json.

// idiomCostTitle opens the block.
const idiomCostTitle = "What the declared precision idiom costs"

// idiomCost is what the precision idiom the check's configuration
// declares costs on the check's own inputs and positions, for each output
// judged: ops.IdiomCostOf against the reference the check ran, the errors
// of the idiom's float32 run (the yardstick's) beside those of the plain
// float32 run (the configuration without its idiom keys), their ratio, and
// for an output with positions the errors at the first and the last.
type idiomCost struct {
	// Format is the format of both runs' yardsticks: the narrowest of the
	// candidates' formats, float32 for float64 candidates.
	Format compare.Format `json:"format"`
	// Note says why the format is not the candidates' own, or that
	// tolerance flags judged them; empty otherwise.
	Note string `json:"note,omitempty"`
	// Error is why the cost could not be measured; the fields of
	// IdiomCost are then absent.
	Error string `json:"error,omitempty"`
	*diagnose.IdiomCost
}

// costRun is one measure of the idiom's cost, kept for every format it
// was measured in.
type costRun struct {
	costs map[string]*ops.Cost // nil: the configuration declares no idiom
	err   error
}

// idiomCosts measures (once per format) what the idiom the configuration
// declares costs in format f, against the reference already run.
func (j *judge) idiomCosts(f compare.Format) (map[string]*ops.Cost, error) {
	if c, ok := j.costs[f]; ok {
		return c.costs, c.err
	}
	done := progress(j.e, j.o.quiet, "measuring the "+f.String()+" yardstick with and without the idiom")
	costs, err := ops.IdiomCostOf(j.r.op.Name(), j.r.config, j.r.in, j.r.out, f, j.o.k)
	done()
	if j.costs == nil {
		j.costs = map[compare.Format]costRun{}
	}
	j.costs[f] = costRun{costs, err}
	return costs, err
}

// idiomCost is the block of the reports: nil when the configuration
// declares no idiom. The cost is measured in the narrowest of the
// candidates' formats (float32 for float64 candidates), so that, in the
// common case, the yardstick the check judged by is the one measured here.
func (j *judge) idiomCost(reports []namedReport) *idiomCost {
	f, allFloat64, mixed := narrowest(reports)
	c := &idiomCost{Format: f}
	switch {
	case allFloat64:
		c.Note = "the candidates are float64, which has no yardstick: the cost is measured under the float32 one"
	case mixed:
		c.Note = fmt.Sprintf("the candidates are of several formats: the cost is measured under the yardstick of the narrowest, %v", f)
	}
	if j.o.explicit() {
		c.Note = strings.TrimPrefix(c.Note+"; the tolerance flags judged the candidates, not the idiom's yardstick", "; ")
	}
	costs, err := j.idiomCosts(f)
	if err != nil {
		c.Error = err.Error()
		return c
	}
	var names []string
	for _, r := range reports {
		names = append(names, r.Name)
	}
	if c.IdiomCost = diagnose.NewIdiomCost(costs, names); c.IdiomCost == nil {
		return nil
	}
	return c
}

// narrowest is the format the candidates are judged in by a yardstick:
// the narrowest of theirs, float32 when all are float64 (allFloat64);
// mixed says that they are not all of one format.
func narrowest(reports []namedReport) (f compare.Format, allFloat64, mixed bool) {
	f = compare.Float64
	for i, rep := range reports {
		if i > 0 && rep.format != reports[0].format {
			mixed = true
		}
		if rep.format.UnitRoundoff() > f.UnitRoundoff() {
			f = rep.format
		}
	}
	if f == compare.Float64 {
		return compare.Float32, true, mixed
	}
	return f, false, mixed
}

// writeIdiomCost prints the block: the title with the idiom, then for
// each output its errors under the idiom against the plain float32 run's,
// and for an output with positions those at the first and the last, every
// line within compare.TextWidth characters, for instance
//
//	What the declared precision idiom costs (angles = float32-angles)
//	  against the plain float32 run (the configuration without it), under the float32 yardstick:
//	    y: normwise 5.65e-06 (plain 4.89e-08, ×116), max abs 0.000201 (plain 3.73e-07)
//	      max abs at position 0: 1.12e-07 (plain 1.12e-07), at position 2047: 5.86e-05 (plain 1.17e-07)
func writeIdiomCost(w io.Writer, c *idiomCost) error {
	var b strings.Builder
	if c.IdiomCost == nil {
		fmt.Fprintf(&b, "%s\n", idiomCostTitle)
	} else {
		compare.WrapText(&b, "", "  ", fmt.Sprintf("%s (%s)", idiomCostTitle, c.Keys))
	}
	if c.Note != "" {
		compare.WrapText(&b, "  ", "   ", "("+c.Note+")")
	}
	if c.IdiomCost == nil {
		compare.WrapText(&b, "  ", "    ", "the cost could not be measured: "+c.Error)
		_, err := io.WriteString(w, b.String())
		return err
	}
	compare.WrapText(&b, "  ", "  ", fmt.Sprintf("against the plain float32 run (the configuration without it), under the %v yardstick:", c.Format))
	for _, o := range c.Outputs {
		compare.WrapText(&b, "    ", "      ", fmt.Sprintf("%s: normwise %.3g (plain %.3g, ×%.3g), max abs %.3g (plain %.3g)", o.Output,
			float64(o.Normwise), float64(o.PlainNormwise), float64(o.Ratio), float64(o.MaxAbs), float64(o.PlainMaxAbs)))
		var at []string
		for _, p := range o.Positions {
			at = append(at, fmt.Sprintf("at position %d: %.3g (plain %.3g)", p.Position, float64(p.MaxAbs), float64(p.PlainMaxAbs)))
		}
		if len(at) > 0 {
			compare.WrapText(&b, "      ", "        ", "max abs "+strings.Join(at, ", "))
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}
