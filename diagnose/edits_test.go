package diagnose

import (
	"encoding/json"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// TestEditsAsData checks that every change a candidate names comes as
// data too, the note apart from the value: a port that scaled by 1/d
// (d = 8) is named `"scale": 0.125 (1/d)` in words and {key "scale",
// value 0.125, note "1/d"} as data; a port that read k and v swapped has a
// mix-up in words and no key.
func TestEditsAsData(t *testing.T) {
	const cfg = `{"version":1,"mask":[{"kind":"causal"}]}`
	run := func(a attnPort) *Result {
		in := attnInputs(1, 2, 2, 5, 5, 8, 3)
		out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
		got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
		res, err := Run("attention-forward", []byte(cfg), in, got, compare.Float32, Options{})
		ensure.NoError(t, err)
		ensure.NotEmpty(t, res.Passing(), "the slipped port should pass under some change")
		return res
	}

	a := attnBase(1, 2, 2, 5, 5, 8)
	a.scale = 1.0 / 8
	best := run(a).Passing()[0]
	ensure.Equal(t, `"scale": 0.125 (1/d)`, best.Change)
	ensure.Equal(t, []Edit{{Key: "scale", Value: json.RawMessage("0.125"), Note: "1/d"}}, best.Edits)
	js, err := json.Marshal(best)
	ensure.NoError(t, err)
	ensure.Contains(t, string(js), `"edits":[{"key":"scale","value":0.125,"note":"1/d"}]`)

	a = attnBase(1, 2, 2, 5, 5, 8)
	a.swapKV = true
	best = run(a).Passing()[0]
	ensure.Len(t, best.Edits, 1)
	ensure.Empty(t, best.Edits[0].Key)
	ensure.Equal(t, best.Change, best.Edits[0].Mixup)
}
