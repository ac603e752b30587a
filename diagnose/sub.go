package diagnose

import (
	"fmt"
	"sort"
	"strings"

	"github.com/plumbref/plumb/ops"
)

// plan says how an operation's problem is cut along its leading axis: the
// inputs and outputs cut, the outputs that sum over it (left out of a cut
// problem), and what one entry of the axis is called.
type plan struct {
	inputs, outputs []string
	sums            []string
	entry           string
}

// planOf returns the plan of the operation, or false when its problem is
// not cut.
func planOf(op string, cfg map[string]any, in ops.Tensors) (plan, bool) {
	rows := []string{"activation", "activation-grad", "softmax", "logsumexp", "layernorm-forward", "rmsnorm-forward",
		"ffn-forward", "layernorm-backward", "rmsnorm-backward", "ffn-backward"}
	switch {
	case strings.HasPrefix(op, "attention-"):
		masks, _ := cfg["mask"].([]any)
		for _, m := range masks {
			if o, ok := m.(map[string]any); ok {
				if _, ok := o["valid"]; ok {
					return plan{}, false // the key-padding lengths are per batch entry
				}
			}
		}
		p := plan{inputs: []string{"q", "k", "v", "dout", "dlse"}, outputs: []string{"out", "lse", "dq", "dk", "dv"},
			sums: []string{"dsinks"}, entry: "batch entries"}
		if b, ok := in["bias"]; ok && len(b.Shape) == 4 && b.Shape[0] > 1 {
			p.inputs, p.outputs = append(p.inputs, "bias"), append(p.outputs, "dbias")
		} else {
			p.sums = append(p.sums, "dbias")
		}
		return p, true
	case op == "rotary-apply":
		x := in["x"].Shape
		if _, pos := cfg["positions"]; len(x) < 3 && pos {
			return plan{}, false // the positions run along the leading axis
		}
		return plan{inputs: []string{"x"}, outputs: []string{"y"}, entry: "entries of the leading axis"}, true
	default:
		for _, r := range rows {
			if op == r {
				x := in["x"].Shape
				if len(x) < 2 && !strings.HasPrefix(op, "activation") {
					return plan{}, false // a single row
				}
				return plan{inputs: []string{"x", "dy"}, outputs: []string{"y", "dx", "lse"},
					sums: []string{"dweight", "dbias", "dw1", "db1", "dv", "dc", "dfused", "dfused_bias", "dw2", "db2"}, entry: "rows"}, true
			}
		}
	}
	return plan{}, false
}

// cut returns the sub-problem the candidates run on: the whole problem
// when its inputs hold at most maxElements values, else the first entries
// of its leading axis that fit (at least one), and a note saying what was
// kept.
func cut(op string, cfg map[string]any, in, got ops.Tensors, maxElements int) (ops.Tensors, ops.Tensors, string) {
	total := 0
	for _, t := range in {
		total += len(t.Data)
	}
	p, ok := planOf(op, cfg, in)
	if total <= maxElements || !ok || len(in["x"].Shape)+len(in["q"].Shape) == 0 {
		return in, got, ""
	}
	lead := 0
	if q, ok := in["q"]; ok {
		lead = q.Shape[0]
	} else {
		lead = in["x"].Shape[0]
	}
	n := max(1, lead*maxElements/total)
	if n >= lead {
		return in, got, ""
	}
	subIn, subGot := ops.Tensors{}, ops.Tensors{}
	for k, t := range in {
		subIn[k] = t
	}
	for _, k := range p.inputs {
		if t, ok := in[k]; ok && len(t.Shape) > 0 && t.Shape[0] == lead {
			subIn[k] = head(t, n)
		}
	}
	var dropped []string
	for k, t := range got {
		switch {
		case contains(p.outputs, k) && len(t.Data) > 0:
			subGot[k] = ops.Tensor{Data: t.Data[:len(t.Data)/lead*n]}
		case contains(p.sums, k):
			dropped = append(dropped, k)
		default:
			subGot[k] = t
		}
	}
	if len(subGot) == 0 {
		return in, got, ""
	}
	note := fmt.Sprintf("%s 0–%d of %d (%d of %d input values)", p.entry, n-1, lead, total/lead*n, total)
	if len(dropped) > 0 {
		sort.Strings(dropped)
		note += fmt.Sprintf("; outputs %s, which sum over the %s, not compared", strings.Join(dropped, ", "), p.entry)
	}
	return subIn, subGot, note
}

// head returns the first n entries of t's leading axis.
func head(t ops.Tensor, n int) ops.Tensor {
	s := append([]int(nil), t.Shape...)
	inner := len(t.Data) / s[0]
	s[0] = n
	return ops.Tensor{Shape: s, Data: t.Data[:n*inner]}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
