package diagnose

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// TestSubProblemIsASlice: on every cut, the reference of the sub-problem
// (under the configuration it runs on) is the corresponding slice of the
// reference of the whole problem, output by output, for both group maps,
// both layouts, every alignment and the masks cut along the queries.
// The whole reference is passed as the port's outputs, so that cut slices
// it as it slices a port's.
func TestSubProblemIsASlice(t *testing.T) {
	const b, h, hkv, lq, lk, d = 2, 8, 2, 24, 28, 4
	in := attnInputs(b, h, hkv, lq, lk, d, 3)
	in["sinks"] = tensor([]int{h}, 9)
	in["bias"] = tensor([]int{1, h, lq, lk}, 10)
	seqIn := ops.Tensors{}
	for k, v := range in {
		seqIn[k] = v
	}
	for _, k := range []string{"q", "k", "v"} {
		s := in[k].Shape
		seqIn[k] = ops.Tensor{Shape: []int{s[0], s[2], s[1], s[3]}, Data: in[k].Data}
	}
	configs := []string{
		`"mask":[{"kind":"causal"}]`,
		`"group":"cycle","mask":[{"kind":"causal"}]`,
		`"align":"start","offset":3,"mask":[{"kind":"causal"}]`,
		`"offset":-2,"mask":[{"kind":"window","size":5}]`,
		`"align":"start","mask":[{"kind":"band","before":2,"after":1}]`,
		`"group":"cycle","mask":[{"kind":"prefix","length":6}]`,
		`"mask":[{"kind":"causal"},{"kind":"band","before":-1,"after":-1}]`,
	}
	for _, op := range []string{"attention-forward", "attention-backward"} {
		for _, layout := range []string{"heads-major", "seq-major"} {
			for _, c := range configs {
				name := fmt.Sprintf("%s %s %s", op, layout, c)
				cfg := []byte(fmt.Sprintf(`{"version":1,"layout":%q,%s}`, layout, c))
				x := in
				if layout == "seq-major" {
					x = seqIn
				}
				if op == "attention-backward" {
					x = copyTensors(x)
					x["dout"] = ops.Tensor{Shape: x["q"].Shape, Data: uniform(4, len(x["q"].Data), -1, 1)}
				}
				ref, err := ops.Run(op, cfg, x)
				ensure.NoError(t, err, name)
				var m map[string]any
				ensure.NoError(t, decode(cfg, &m))
				// Small enough that every axis is cut: one batch entry, four
				// query heads, then queries.
				sp := cut(op, m, x, ref, 600)
				ensure.Equal(t, []string{"batch", "heads", "queries"}, sp.cuts, name)
				sub, err := runSub(mustLookup(t, op), sp, cfg)
				ensure.NoError(t, err, name)
				ensure.NotEmpty(t, sp.got, name)
				for n, want := range sp.got {
					ensure.Equal(t, want.Data, sub[n].Data, "%s: output %s of the sub-problem (%s)", name, n, sp.note)
				}
				if op == "attention-backward" {
					ensure.Contains(t, sp.note, "outputs dbias, dk, dsinks, dv, which sum over what was cut, not compared", name)
				}
			}
		}
	}
}

// TestRowCutIsASlice: the rows kept of a row-wise operation give the
// first rows of the reference; dweight and dbias, sums over the rows, are
// left out.
func TestRowCutIsASlice(t *testing.T) {
	in := ops.Tensors{"x": tensor([]int{3, 40, 16}, 1), "weight": tensor([]int{16}, 2), "dy": tensor([]int{3, 40, 16}, 3)}
	for _, c := range []struct {
		op    string
		limit int
		shape []int
	}{
		{"rmsnorm-backward", 1000, []int{1, 30, 16}}, // (1000 − 16)·120/3840 = 30.75: 30 rows, not a whole entry
		{"rmsnorm-backward", 2600, []int{2, 40, 16}}, // (2600 − 16)·120/3840 = 80.75: 80 rows = 2 entries of 40
	} {
		cfg := []byte(`{"version":1,"epsilon":1e-5}`)
		ref, err := ops.Run(c.op, cfg, in)
		ensure.NoError(t, err)
		var m map[string]any
		ensure.NoError(t, decode(cfg, &m))
		sp := cut(c.op, m, in, ref, c.limit)
		ensure.Equal(t, []string{"rows"}, sp.cuts)
		ensure.Equal(t, c.shape, sp.in["x"].Shape)
		sub, err := runSub(mustLookup(t, c.op), sp, cfg)
		ensure.NoError(t, err)
		ensure.Equal(t, sp.got["dx"].Data, sub["dx"].Data)
		ensure.NotContains(t, sp.got, "dweight")
		ensure.Contains(t, sp.note, "outputs dweight, which sum over the rows, not compared")
	}
}

func mustLookup(t *testing.T, op string) ops.Op {
	o, err := ops.Lookup(op)
	ensure.NoError(t, err)
	return o
}

// TestHeadCutKeepsBothGroupMaps: for every head count up to 32, the heads
// a cut keeps read, under both group maps of the sub-problem, the kv heads
// they read in the whole problem (blocks: h/g; cycle: h mod hkv, the
// definitions of attention.GroupBlocks and attention.GroupCycle), and the
// two maps still differ on the sub-problem when they differ on the whole.
func TestHeadCutKeepsBothGroupMaps(t *testing.T) {
	found := 0
	for hkv := 1; hkv <= 16; hkv++ {
		for h := hkv; h <= 32; h += hkv {
			qh, kvh, ok := headCut(h, hkv)
			if !ok {
				continue
			}
			found++
			g, gs := h/hkv, len(qh)/len(kvh)
			for j, q := range qh {
				ensure.Equal(t, kvh[j/gs], q/g, "h %d, hkv %d: blocks, sub head %d = head %d", h, hkv, j, q)
				ensure.Equal(t, kvh[j%len(kvh)], q%hkv, "h %d, hkv %d: cycle, sub head %d = head %d", h, hkv, j, q)
			}
			if g > 1 && hkv > 1 {
				ensure.Equal(t, 2, gs, "h %d, hkv %d", h, hkv)
				ensure.Len(t, kvh, 2, "h %d, hkv %d", h, hkv)
			}
		}
	}
	// 8 query heads on 2 kv heads: heads 0, 1 of group 0 read kv 0, 1
	// under cycle, heads 4, 5 of group 1 (4 mod 2 = 0, 5 mod 2 = 1).
	qh, kvh, ok := headCut(8, 2)
	ensure.True(t, ok)
	ensure.Equal(t, []int{0, 1, 4, 5}, qh)
	ensure.Equal(t, []int{0, 1}, kvh)
	// 6 query heads on 3 kv heads: group 1 holds heads 2, 3, which read kv
	// 2, 0 under cycle; no pair of groups reads itself in order, no cut.
	_, _, ok = headCut(6, 3)
	ensure.False(t, ok)
	ensure.Greater(t, found, 50)
}

// TestRotaryCutIsASlice: on every cut of rotary-apply (the leading axis,
// the heads, an inner leading axis, the positions, and these together),
// the reference of the sub-problem, under the configuration the cut gives
// it, is the corresponding slice of the reference of the whole problem,
// for positions from an offset, given per token and given per row, and
// so it is for a candidate's change of the offset; the positions kept
// are spread over the length, the first and the last included.
func TestRotaryCutIsASlice(t *testing.T) {
	const L, D = 40, 4
	perToken := make([]int, L)
	for i := range perToken {
		perToken[i] = 3*i + 1
	}
	positions := func(n int) string {
		p := make([]string, n)
		for i := range p {
			p[i] = fmt.Sprint((7*i + 2) % 61)
		}
		return strings.Join(p, ",")
	}
	for _, c := range []struct {
		shape []int
		limit int
		cuts  []string
		x     []int // the shape of the sub-problem's x
	}{
		{[]int{6, L, D}, 2 * L * D, []string{"leading axis"}, []int{2, L, D}},
		{[]int{3, 4, L, D}, 2 * L * D, []string{"leading axis", "heads"}, []int{1, 2, L, D}},
		{[]int{3, 4, L, D}, 8 * L * D, []string{"leading axis"}, []int{2, 4, L, D}},
		{[]int{1, 4, L, D}, 20 * D, []string{"heads", "positions"}, []int{1, 1, 20, D}},
		{[]int{2, 3, 2, L, D}, 6 * L * D, []string{"leading axis"}, []int{1, 3, 2, L, D}},
		{[]int{2, 3, 2, L, D}, 5 * L * D, []string{"leading axis"}, []int{1, 2, 2, L, D}},
		{[]int{2, 3, 2, L, D}, L * D, []string{"leading axis", "heads"}, []int{1, 1, 1, L, D}},
		{[]int{L, D}, 10 * D, []string{"positions"}, []int{minPositions, D}},
	} {
		rows := 1
		for _, d := range c.shape[:len(c.shape)-1] {
			rows *= d
		}
		in := ops.Tensors{"x": tensor(c.shape, 5)}
		for _, cfg := range []string{
			`{"version":1}`,
			`{"version":1,"offset":3,"base":500,"inverse":true}`,
			`{"version":1,"positions":[` + positions(L) + `],"pairing":"halves"}`,
			`{"version":1,"positions":[` + positions(rows) + `]}`,
			`{"version":1,"scaling":{"method":"interpolation","factor":4},"angles":"float32-angles"}`,
		} {
			name := fmt.Sprintf("%v, limit %d, %s", c.shape, c.limit, cfg)
			ref, err := ops.Run("rotary-apply", []byte(cfg), in)
			ensure.NoError(t, err, name)
			var m map[string]any
			ensure.NoError(t, decode([]byte(cfg), &m))
			sp := cut("rotary-apply", m, in, ref, c.limit)
			ensure.Equal(t, c.cuts, sp.cuts, name)
			ensure.Equal(t, c.x, sp.in["x"].Shape, name)
			ensure.LessOrEqual(t, elements(sp.in), max(c.limit, minPositions*D), name)
			sub, err := runSub(mustLookup(t, "rotary-apply"), sp, []byte(cfg))
			ensure.NoError(t, err, name)
			ensure.Equal(t, sp.got["y"].Data, sub["y"].Data, "%s: the sub-problem (%s)", name, sp.note)
			if strings.Contains(cfg, "positions") {
				continue
			}
			// A candidate that moves the positions: offset 2 more.
			moved := deepCopy(m).(map[string]any)
			off, _ := number(moved["offset"])
			moved["offset"] = off + 2
			b, err := json.Marshal(moved)
			ensure.NoError(t, err)
			whole, err := ops.Run("rotary-apply", b, in)
			ensure.NoError(t, err, name)
			sub, err = runSub(mustLookup(t, "rotary-apply"), sp, b)
			ensure.NoError(t, err, name)
			want := cut("rotary-apply", m, in, whole, c.limit).got["y"].Data
			ensure.Equal(t, want, sub["y"].Data, "%s: offset moved on the sub-problem (%s)", name, sp.note)
		}
	}

	// The positions kept: 20 of 2048, the first and the last among them,
	// evenly spread.
	in := ops.Tensors{"x": tensor([]int{1, 2048, 8}, 6)}
	ref, err := ops.Run("rotary-apply", []byte(`{"version":1}`), in)
	ensure.NoError(t, err)
	sp := cut("rotary-apply", map[string]any{}, in, ref, 160)
	b, err := sp.run([]byte(`{"version":1}`))
	ensure.NoError(t, err)
	var m struct{ Positions []int }
	ensure.NoError(t, json.Unmarshal(b, &m))
	ensure.Len(t, m.Positions, 20)
	ensure.Equal(t, 0, m.Positions[0])
	ensure.Equal(t, 2047, m.Positions[19])
	for i := 1; i < 20; i++ {
		step := m.Positions[i] - m.Positions[i-1]
		ensure.True(t, step == 2047/19 || step == 2047/19+1, "step %d at %d", step, i)
	}
	ensure.Equal(t, "20 of 2048 tokens spread over the length (0, 107, 215, …, 2047), at their positions in the whole problem (160 of 16384 input values)", sp.note)
}
