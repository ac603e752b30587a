package suite

import (
	"encoding/json"
	"fmt"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/diagnose"
	"github.com/plumbref/plumb/ops"
)

// Pose is a case's problem posed as an operation of package ops: what
// diagnose.Run searches, when an output fails, for the convention the
// kernel used instead. One diagnosis serves every output of the case: it
// runs at the first failing output, on all of Got, and its line is
// repeated for the others.
type Pose struct {
	Op     string      // the operation ("attention-forward")
	Config []byte      // its JSON configuration
	Inputs ops.Tensors // its inputs: the values the kernel was given
	Got    ops.Tensors // the kernel's outputs, by the operation's names ("out", "lse")
	// Words maps a configuration key ("group", "mask[0].size") to the
	// suite's name of the same setting ("Problem.Group, Supports.Groups"),
	// said beside the key; keys without an entry are left as they are.
	Words map[string]string
	// Unsearched, when not empty, names what the problem holds that the
	// pose leaves out of the search; it is said when no change explains
	// the failure.
	Unsearched string
	// Part, when not empty, says which part of the case's problem is posed
	// ("batch entry 0 of 2, queries 0–15 of 128"); the line says it.
	Part string

	done       bool   // the diagnosis has run
	line, text string // its line and whole text
}

// NewPose returns the pose of operation op with configuration cfg (a JSON
// object, version 1 added), inputs in and the kernel's outputs got. It
// returns nil, and the failure message then has no diagnosis line, when
// cfg does not encode in JSON.
func NewPose(op string, cfg map[string]any, in, got ops.Tensors, words map[string]string) *Pose {
	m := map[string]any{"version": 1}
	for k, v := range cfg {
		m[k] = v
	}
	b, err := json.Marshal(m)
	if err != nil {
		return nil
	}
	return &Pose{Op: op, Config: b, Inputs: in, Got: got, Words: words}
}

// Once returns a function that calls pose at its first call and returns
// the same pose at every call: the Output.Pose of every output of a case.
func Once(pose func() *Pose) func() *Pose {
	var p *Pose
	called := false
	return func() *Pose {
		if !called {
			p, called = pose(), true
		}
		return p
	}
}

// Tensor is an ops.Tensor of shape and data.
func Tensor(data []float64, shape ...int) ops.Tensor {
	return ops.Tensor{Shape: append([]int(nil), shape...), Data: data}
}

// diagnosisOptions bound one diagnosis to a few times the cost of one
// check of the case: at most 32 candidates, run on at most 4096 input
// elements (the leading rows or batch entries of a larger problem), the
// pair of the 2 most promising single changes, and the yardstick of the
// nearest candidate measured (the line names a candidate only when the
// kernel passes it).
var diagnosisOptions = diagnose.Options{MaxCandidates: 32, MaxElements: 1 << 12, Pairs: 2, Confirm: 1}

// diagnose runs diagnose.Run on p, the port's outputs p.Got, in the number
// format of opt (the first failing output's), once; it returns the line of
// the failure message and the diagnosis's whole text, for the report's
// file.
//
// The yardstick of package diagnose is a float32 run's; a float64 kernel
// (opt.Format Float64) is searched in Float32, and the candidate it
// matches is held to the normwise bound of the kernel's own tolerance.
func (p *Pose) diagnose(opt compare.Options) (line, text string) {
	if !p.done {
		p.line, p.text = p.run(opt)
		p.done = true
	}
	return p.line, p.text
}

func (p *Pose) run(opt compare.Options) (line, text string) {
	f, bound := opt.Format, 0.0
	if f == compare.Float64 {
		f = compare.Float32
		if opt.Tolerance != nil {
			bound = opt.Tolerance.MaxNormwise
		}
	}
	res, err := diagnose.Run(p.Op, p.Config, p.Inputs, p.Got, f, diagnosisOptions)
	if err != nil {
		return "the diagnosis could not run: " + err.Error(), err.Error() + "\n"
	}
	var b strings.Builder
	if err := res.WriteText(&b); err != nil {
		b.WriteString(err.Error() + "\n")
	}
	text = b.String()
	on := ""
	if p.Part != "" {
		on = " on " + p.Part
	}
	if res.Given.Pass {
		if p.Part != "" {
			return fmt.Sprintf("the diagnosis names nothing: posed as %s%s, the output passes the %v yardstick there (normwise %.2g)",
				p.Op, on, f, float64(res.Given.Normwise)), text
		}
		return fmt.Sprintf("no change of its conventions explains it: posed as %s it is within the %v yardstick (normwise %.2g), an error of accuracy",
			p.Op, f, float64(res.Given.Normwise)), text
	}
	if passing := res.Passing(); len(passing) > 0 {
		c := passing[0] // the simplest the kernel passes
		verdict := "passes"
		if bound > 0 && float64(c.Normwise) > bound {
			verdict = fmt.Sprintf("passes the %v yardstick, not the float64 bound %.0e", f, bound)
		}
		return fmt.Sprintf("it matches %s (normwise %.2g, %s%s)", p.describe(c), float64(c.Normwise), verdict, on), text
	}
	line = "no single change of its conventions explains it"
	var why []string
	if p.Part != "" {
		why = append(why, "posed"+on)
	}
	if p.Unsearched != "" {
		why = append(why, p.Unsearched)
	}
	if len(why) > 0 {
		line += " (" + strings.Join(why, "; ") + ")"
	}
	return line, text
}

// describe is the candidate's changes in the configuration's words, each
// key followed by the suite's name of it (Words) in brackets, a precision
// idiom (an Edit with Idiom set: it changes the tolerance, not the
// reference) introduced as such, joined by " and "; then the descriptions
// that gave the same reference.
func (p *Pose) describe(c diagnose.Candidate) string {
	changes := c.Changes
	if len(changes) == 0 {
		changes = []string{c.Change}
	}
	parts := make([]string, len(changes))
	for i, ch := range changes {
		parts[i] = ch
		if len(c.Edits) == len(changes) && c.Edits[i].Idiom {
			parts[i] = "the precision idiom " + ch
		}
		if w := p.Words[key(ch)]; w != "" {
			parts[i] += " [" + w + "]"
		}
	}
	s := strings.Join(parts, " and ")
	if len(c.Same) > 0 {
		s += ", the same here as " + strings.Join(c.Same, " or ")
	}
	return s
}

// key is the configuration key a change sets (`"group": "cycle"` sets
// group), or "" for a tensor mix-up ("k and v swapped").
func key(change string) string {
	if !strings.HasPrefix(change, `"`) {
		return ""
	}
	k, _, ok := strings.Cut(change[1:], `"`)
	if !ok {
		return ""
	}
	return k
}
