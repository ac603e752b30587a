package diagnose

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// entry is one port of the catalogue: an operation, its configuration and
// inputs, the port, and the change the diagnosis should name (nil for a
// correct port, which should pass as configured).
type entry struct {
	family, name string
	op, config   string
	in           ops.Tensors
	port         func(in ops.Tensors) ops.Tensors
	format       compare.Format
	want         []string
}

func t32(in ops.Tensors, n string) []float32 { return to32(in[n].Data) }

func tensor(shape []int, seed int64) ops.Tensor {
	n := 1
	for _, d := range shape {
		n *= d
	}
	return ops.Tensor{Shape: shape, Data: uniform(seed, n, -1, 1)}
}

func attnInputs(b, h, hkv, lq, lk, d int, seed int64) ops.Tensors {
	return ops.Tensors{"q": tensor([]int{b, h, lq, d}, seed), "k": tensor([]int{b, hkv, lk, d}, seed+1), "v": tensor([]int{b, hkv, lk, d}, seed+2)}
}

// attnBase is the correct port of a heads-major, blocks, causal problem
// with end alignment.
func attnBase(b, h, hkv, lq, lk, d int) attnPort {
	g := h / hkv
	return attnPort{B: b, H: h, Hkv: hkv, Lq: lq, Lk: lk, D: d, kv: func(i int) int { return i / g },
		scale: float32(1 / math.Sqrt(float64(d))), pos: func(i int) int { return lk - lq + i },
		see: func(p, j int) bool { return j <= p }}
}

func attnEntry(name, config string, in ops.Tensors, a attnPort, want ...string) entry {
	return entry{family: "attention forward", name: name, op: "attention-forward", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
			return ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
		}}
}

func attnBackEntry(name, config string, in ops.Tensors, a attnPort, want ...string) entry {
	n := len(in["q"].Data)
	in["dout"] = ops.Tensor{Shape: in["q"].Shape, Data: uniform(99, n, -1, 1)}
	return entry{family: "attention backward", name: name, op: "attention-backward", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			dq, dk, dv := a.backward(t32(in, "q"), t32(in, "k"), t32(in, "v"), t32(in, "dout"))
			return ops.Tensors{"dq": {Data: to64(dq)}, "dk": {Data: to64(dk)}, "dv": {Data: to64(dv)}}
		}}
}

func rotEntry(name, config string, r rotPort, want ...string) entry {
	in := ops.Tensors{"x": tensor([]int{1, 2, r.L, r.D}, 7)}
	return entry{family: "rotary and scaling", name: name, op: "rotary-apply", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors { return ops.Tensors{"y": {Data: to64(r.apply(t32(in, "x")))}} }}
}

func normEntry(family, name, op, config string, n normPort, want ...string) entry {
	rows := 6
	in := ops.Tensors{"x": tensor([]int{rows, n.d}, 11), "weight": {Shape: []int{n.d}, Data: uniform(12, n.d, 0.5, 1.5)}}
	if !n.rms {
		in["bias"] = tensor([]int{n.d}, 13)
	}
	backward := strings.HasSuffix(op, "-backward")
	if backward {
		delete(in, "bias")
		in["dy"] = tensor([]int{rows, n.d}, 14)
	}
	return entry{family: family, name: name, op: op, config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			if backward {
				dx, dw, db := n.backward(t32(in, "x"), t32(in, "weight"), t32(in, "dy"))
				out := ops.Tensors{"dx": {Data: to64(dx)}, "dweight": {Data: to64(dw)}}
				if !n.rms {
					out["dbias"] = ops.Tensor{Data: to64(db)}
				}
				return out
			}
			var b []float32
			if !n.rms {
				b = t32(in, "bias")
			}
			return ops.Tensors{"y": {Data: to64(n.forward(t32(in, "x"), t32(in, "weight"), b))}}
		}}
}

func actEntry(name, function string, beta float64, f func(float32) float32, grad bool, swap bool, want ...string) entry {
	cfg := fmt.Sprintf(`{"version":1,"function":%q`, function)
	if beta != 0 {
		cfg += fmt.Sprintf(`,"beta":%v`, beta)
	}
	cfg += "}"
	in := ops.Tensors{"x": {Shape: []int{4, 16}, Data: uniform(21, 64, -3, 3)}}
	op := "activation"
	if grad {
		op = "activation-grad"
		in["dy"] = tensor([]int{4, 16}, 22)
	}
	return entry{family: "activations", name: name, op: op, config: cfg, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			x := t32(in, "x")
			if !grad {
				return ops.Tensors{"y": {Data: to64(mapf(x, f))}}
			}
			dy := t32(in, "dy")
			if swap {
				x, dy = dy, x
			}
			dx := make([]float32, len(x))
			for i := range x {
				dx[i] = dy[i] * f(x[i])
			}
			return ops.Tensors{"dx": {Data: to64(dx)}}
		}}
}

func ffnEntry(name, config string, f ffnPort, fused bool, want ...string) entry {
	in := ops.Tensors{"x": tensor([]int{f.rows, f.in}, 31), "w2": tensor([]int{f.hidden, f.out}, 34)}
	if fused {
		in["fused"] = tensor([]int{f.in, 2 * f.hidden}, 35)
	} else {
		in["w1"] = tensor([]int{f.in, f.hidden}, 32)
		if f.gated {
			in["v"] = tensor([]int{f.in, f.hidden}, 33)
		}
	}
	return entry{family: "FFN and GLU forward", name: name, op: "ffn-forward", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			w1, v := t32(in, "w1"), t32(in, "v")
			if fused {
				w1, v = f.unfuse(t32(in, "fused"))
			}
			return ops.Tensors{"y": {Data: to64(f.forward(t32(in, "x"), w1, v, t32(in, "w2")))}}
		}}
}

func ffnBackEntry(name, config string, f ffnPort, want ...string) entry {
	in := ops.Tensors{"x": tensor([]int{f.rows, f.in}, 41), "w1": tensor([]int{f.in, f.hidden}, 42),
		"w2": tensor([]int{f.hidden, f.out}, 44), "dy": tensor([]int{f.rows, f.out}, 45)}
	if f.gated {
		in["v"] = tensor([]int{f.in, f.hidden}, 43)
	}
	return entry{family: "FFN and GLU backward", name: name, op: "ffn-backward", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			dx, dw1, dv, dw2 := f.backward(t32(in, "x"), t32(in, "w1"), t32(in, "v"), t32(in, "w2"), t32(in, "dy"))
			out := ops.Tensors{"dx": {Data: to64(dx)}, "dw1": {Data: to64(dw1)}, "dw2": {Data: to64(dw2)}}
			if f.gated {
				out["dv"] = ops.Tensor{Data: to64(dv)}
			}
			return out
		}}
}

func alibiEntry(name, config string, lq, lk, start int, dist func(p, j int) float32, reverse bool, want ...string) entry {
	slopes := []float64{0.5, 0.25, 0.125, 0.0625} // 2^(−8h/H) for H = 4 heads (Press et al. 2022, arXiv 2108.12409 §3)
	in := ops.Tensors{"slopes": {Shape: []int{4}, Data: slopes}}
	return entry{family: "ALiBi", name: name, op: "alibi-bias", config: config, in: in, format: compare.Float32, want: want,
		port: func(in ops.Tensors) ops.Tensors {
			s := t32(in, "slopes")
			if reverse {
				s = []float32{s[3], s[2], s[1], s[0]}
			}
			return ops.Tensors{"bias": {Data: to64(alibiPort(s, lq, lk, start, dist))}}
		}}
}

func softmaxEntry(name, op string, shape []int, port func(x []float32) []float32, format compare.Format, want ...string) entry {
	in := ops.Tensors{"x": {Shape: shape, Data: uniform(51, shape[0]*shape[1]*shape[2], -4, 4)}}
	out := "y"
	if op == "logsumexp" {
		out = "lse"
	}
	return entry{family: "softmax and log-sum-exp", name: name, op: op, config: `{"version":1}`, in: in, format: format, want: want,
		port: func(in ops.Tensors) ops.Tensors { return ops.Tensors{out: {Data: to64(port(t32(in, "x")))}} }}
}

// offset returns the entry with every x moved by shift (kept a float32
// number): rows of mean shift.
func offset(e entry, shift float64) entry {
	x := e.in["x"]
	d := make([]float64, len(x.Data))
	for i, v := range x.Data {
		d[i] = float64(float32(shift + v))
	}
	e.in["x"] = ops.Tensor{Shape: x.Shape, Data: d}
	return e
}

// overflowing is a softmax input [2, 4, 64] whose rows 1 and 6 hold
// logits in [84, 88) (float32 numbers): e^x is finite, the unshifted sum
// of the row +Inf; the other rows are in [−4, 4).
func overflowing() ops.Tensor {
	x := uniform(61, 512, -4, 4)
	for _, r := range []int{1, 6} {
		for i := range 64 {
			x[r*64+i] = 86 + x[r*64+i]/2
		}
	}
	for i, v := range x {
		x[i] = float64(float32(v))
	}
	return ops.Tensor{Shape: []int{2, 4, 64}, Data: x}
}

// with returns a copy of the port p changed by slip.
func with[P any](p P, slip func(*P)) P {
	slip(&p)
	return p
}

// catalogue lists the slipped ports and the correct ones.
func catalogue() []entry {
	var c []entry
	const causal = `"mask":[{"kind":"causal"}]`
	fwd := `{"version":1,` + causal + `}`
	in := func() ops.Tensors { return attnInputs(1, 4, 2, 6, 6, 8, 1) }

	// Attention forward.
	a := attnBase(1, 4, 2, 6, 6, 8)
	c = append(c, attnEntry("correct", fwd, in(), a))
	c = append(c, attnEntry("kv head h mod Hkv", fwd, in(), with(a, func(s *attnPort) { s.kv = func(h int) int { return h % 2 } }), `"group": "cycle"`))
	c = append(c, attnEntry("scale 1/d", fwd, in(), with(a, func(s *attnPort) { s.scale = 1.0 / 8 }), `"scale": 0.125 (1/d)`))
	c = append(c, attnEntry("no scale", fwd, in(), with(a, func(s *attnPort) { s.scale = 1 }), `"scale": 1`))
	c = append(c, attnEntry("causal edge one key late", fwd, in(), with(a, func(s *attnPort) { s.see = func(p, j int) bool { return j <= p+1 } }), `"mask[0]": {"after":1,"before":-1,"kind":"band"}`))
	c = append(c, attnEntry("k and v swapped", fwd, in(), with(a, func(s *attnPort) { s.swapKV = true }), `k and v swapped`))
	c = append(c, attnEntry("q indexed seq-major", fwd, in(), with(a, func(s *attnPort) { s.seqMajorIn[0] = true }), `q read seq-major`))
	c = append(c, attnEntry("every tensor seq-major", fwd, in(), with(a, func(s *attnPort) { s.seqMajorIn, s.seqMajorOut = [3]bool{true, true, true}, true }), `"layout": "seq-major"`))
	c = append(c, attnEntry("window of 4 for 3", `{"version":1,"mask":[{"kind":"window","size":3}]}`, in(), with(a, func(s *attnPort) { s.see = func(p, j int) bool { return j <= p && j > p-4 } }), `"mask[0].size": 4`))
	c = append(c, attnEntry("soft cap left out", `{"version":1,"soft_cap":0.5}`, in(), with(a, func(s *attnPort) { s.see = nil }), `"soft_cap": 0 (none)`))
	c = append(c, attnEntry("two slips: cycle and no scale", fwd, in(), with(a, func(s *attnPort) { s.kv, s.scale = func(h int) int { return h % 2 }, 1 }), `"group": "cycle"`, `"scale": 1`))
	c = append(c, attnEntry("queries at the start", fwd, attnInputs(1, 4, 2, 4, 6, 8, 2), with(attnBase(1, 4, 2, 4, 6, 8), func(s *attnPort) { s.pos = func(i int) int { return i } }), `"align": "start"`))
	c = append(c, attnEntry("outputs written seq-major", fwd, in(), with(attnBase(1, 4, 2, 6, 6, 8), func(s *attnPort) { s.seqMajorOut = true }), `out written seq-major`, `lse written seq-major`))

	// Attention backward.
	b := attnBase(1, 4, 2, 6, 6, 8)
	c = append(c, attnBackEntry("correct", fwd, in(), b))
	c = append(c, attnBackEntry("kv head h mod Hkv", fwd, in(), with(b, func(s *attnPort) { s.kv = func(h int) int { return h % 2 } }), `"group": "cycle"`))
	c = append(c, attnBackEntry("scale 1/d", fwd, in(), with(b, func(s *attnPort) { s.scale = 1.0 / 8 }), `"scale": 0.125 (1/d)`))
	c = append(c, attnBackEntry("causal edge one key late", fwd, in(), with(b, func(s *attnPort) { s.see = func(p, j int) bool { return j <= p+1 } }), `"mask[0]": {"after":1,"before":-1,"kind":"band"}`))
	c = append(c, attnBackEntry("k and v swapped", fwd, in(), with(b, func(s *attnPort) { s.swapKV = true }), `k and v swapped, gradients written back swapped`))
	c = append(c, attnBackEntry("two slips: cycle and causal edge", fwd, in(), with(b, func(s *attnPort) {
		s.kv, s.see = func(h int) int { return h % 2 }, func(p, j int) bool { return j <= p+1 }
	}), `"group": "cycle"`, `"mask[0]": {"after":1,"before":-1,"kind":"band"}`))

	// Rotary and scaling.
	r := rotPort{L: 8, D: 8, rotated: 8, base: 10000, divide: 1, sign: 1}
	c = append(c, rotEntry("correct", `{"version":1}`, r))
	c = append(c, rotEntry("halves for adjacent", `{"version":1}`, with(r, func(x *rotPort) { x.halves = true }), `"pairing": "halves"`))
	c = append(c, rotEntry("base 500000", `{"version":1}`, with(r, func(x *rotPort) { x.base = 500000 }), `"base": 500000`))
	c = append(c, rotEntry("positions from 1", `{"version":1}`, with(r, func(x *rotPort) { x.first = 1 }), `"offset": 1`))
	c = append(c, rotEntry("half the dims rotated", `{"version":1}`, with(r, func(x *rotPort) { x.rotated = 4 }), `"rotated": 4`))
	c = append(c, rotEntry("inverse rotation", `{"version":1}`, with(r, func(x *rotPort) { x.sign = -1 }), `"inverse": true`))
	interp := `{"version":1,"scaling":{"method":"interpolation","factor":4}}`
	c = append(c, rotEntry("interpolation by 1/s", interp, with(r, func(x *rotPort) { x.divide = 0.25 }), `"scaling.factor": 0.25 (1/s)`))
	c = append(c, rotEntry("scaling left out", interp, r, `"scaling.method": "none"`))
	c = append(c, rotEntry("correct interpolation", interp, with(r, func(x *rotPort) { x.divide = 4 })))
	c = append(c, rotEntry("two slips: halves and base 1e6", `{"version":1}`, with(r, func(x *rotPort) { x.halves, x.base = true, 1000000 }), `"pairing": "halves"`, `"base": 1000000`))
	// Over 2048 positions, where forming the angles in float32 costs about
	// 170 times the plain float32 run's error (ops.TestRotaryAnglesPort).
	// One head of 2048 positions of 32 dims.
	long := rotPort{L: 2048, D: 32, rotated: 32, base: 10000, divide: 1, sign: 1}
	longEntry := func(name string, r rotPort, want ...string) entry {
		e := rotEntry(name, `{"version":1}`, r, want...)
		e.in = ops.Tensors{"x": tensor([]int{1, 1, r.L, r.D}, 8)}
		return e
	}
	c = append(c, longEntry("float32 angles at 2048 positions", with(long, func(x *rotPort) { x.angles32 = true }), `"angles": "float32-angles"`))
	c = append(c, longEntry("float32 angles and base 500000 at 2048 positions", with(long, func(x *rotPort) { x.angles32, x.base = true, 500000 }),
		`"base": 500000`, `"angles": "float32-angles"`))
	c = append(c, longEntry("halves at 2048 positions", with(long, func(x *rotPort) { x.halves = true }), `"pairing": "halves"`))
	c = append(c, longEntry("base 500000 at 2048 positions", with(long, func(x *rotPort) { x.base = 500000 }), `"base": 500000`))
	c = append(c, entry{family: "rotary and scaling", name: "tables with base 1e6", op: "rotary-tables", config: `{"version":1,"dim":8,"length":6}`,
		format: compare.Float32, want: []string{`"base": 1000000`},
		port: func(ops.Tensors) ops.Tensors {
			cos, sin := rotTablesPort(6, 8, 1000000)
			return ops.Tensors{"cos": {Data: to64(cos)}, "sin": {Data: to64(sin)}}
		}})

	// Sinusoidal.
	sin := func(name, config string, first int, base float64, concat bool, want ...string) entry {
		return entry{family: "sinusoidal", name: name, op: "sinusoidal-table", config: config, format: compare.Float32, want: want,
			port: func(ops.Tensors) ops.Tensors {
				return ops.Tensors{"table": {Data: to64(sinPort(10, 8, first, base, concat))}}
			}}
	}
	const sinCfg = `{"version":1,"dim":8,"length":10}`
	c = append(c, sin("correct", sinCfg, 0, 10000, false))
	c = append(c, sin("sines then cosines", sinCfg, 0, 10000, true, `"layout": "concatenated"`))
	c = append(c, sin("base 1e5", sinCfg, 0, 100000, false, `"base": 100000`))
	c = append(c, sin("positions from 1", sinCfg, 1, 10000, false, `"offset": 1`))

	// ALiBi.
	const biasCfg = `{"version":1,"queries":4,"keys":6}`
	c = append(c, alibiEntry("correct", biasCfg, 4, 6, 2, causalDist, false))
	c = append(c, alibiEntry("distance both ways", biasCfg, 4, 6, 2, symmetricDist, false, `"alibi_form": "symmetric"`))
	c = append(c, alibiEntry("slopes reversed", biasCfg, 4, 6, 2, causalDist, true, `slopes in reverse head order`))
	c = append(c, alibiEntry("queries at the start", biasCfg, 4, 6, 0, causalDist, false, `"align": "start"`))
	al := attnBase(1, 4, 4, 6, 6, 8)
	al.see, al.slopes, al.dist = nil, []float32{0.5, 0.25, 0.125, 0.0625}, pastOnlyDist
	alIn := attnInputs(1, 4, 4, 6, 6, 8, 3)
	alIn["slopes"] = ops.Tensor{Shape: []int{4}, Data: []float64{0.5, 0.25, 0.125, 0.0625}}
	e := attnEntry("attention with past-only ALiBi", `{"version":1}`, alIn, al, `"alibi_form": "past-only"`)
	e.family = "ALiBi"
	c = append(c, e)

	// Norms forward.
	const normCfg = `{"version":1,"epsilon":1e-5}`
	ln := normPort{d: 16, eps: 1e-5}
	rms := normPort{d: 16, rms: true, eps: 1e-5}
	nf := func(name, op string, n normPort, want ...string) entry {
		return normEntry("norms forward", name, op, normCfg, n, want...)
	}
	c = append(c, nf("LayerNorm correct", "layernorm-forward", ln))
	c = append(c, nf("LayerNorm correct, sums reversed", "layernorm-forward", with(ln, func(n *normPort) { n.reversed = true })))
	c = append(c, nf("LayerNorm ε added to the root", "layernorm-forward", with(ln, func(n *normPort) { n.addRoot = true }), `"epsilon_placement": "added-to-root"`))
	c = append(c, nf("LayerNorm ε 1e-6", "layernorm-forward", with(ln, func(n *normPort) { n.eps = 1e-6 }), `"epsilon": 0.000001`))
	c = append(c, nf("LayerNorm gain 1 + w", "layernorm-forward", with(ln, func(n *normPort) { n.onePlus = true }), `"weight_form": "one-plus"`))
	c = append(c, nf("LayerNorm weight and bias swapped", "layernorm-forward", with(ln, func(n *normPort) { n.swapWB = true }), `weight and bias swapped`))
	c = append(c, nf("RMSNorm ε added to the root", "rmsnorm-forward", with(rms, func(n *normPort) { n.addRoot = true }), `"epsilon_placement": "added-to-root"`))
	c = append(c, nf("RMSNorm ε 1e-6", "rmsnorm-forward", with(rms, func(n *normPort) { n.eps = 1e-6 }), `"epsilon": 0.000001`))
	c = append(c, nf("two slips: gain 1 + w and ε 1e-6", "layernorm-forward", with(ln, func(n *normPort) { n.onePlus, n.eps = true, 1e-6 }), `"weight_form": "one-plus"`, `"epsilon": 0.000001`))

	// One-pass variance on rows of mean 10 and spread 1: the cancellation
	// costs about μ²/σ² = 300 roundings of σ².
	onePass := with(ln, func(n *normPort) { n.onePass = true })
	c = append(c, offset(nf("LayerNorm one-pass variance, rows of mean 10", "layernorm-forward", onePass, `"variance": "one-pass"`), 10))
	c = append(c, offset(nf("LayerNorm one-pass variance, rows of mean 10, ε 1e-3", "layernorm-forward", with(onePass, func(n *normPort) { n.eps = 1e-3 }),
		`"epsilon": 0.001`, `"variance": "one-pass"`), 10))

	// A correct LayerNorm computed in float64 and stored in float32.
	c = append(c, entry{family: "norms forward", name: "LayerNorm correct, float64 arithmetic", op: "layernorm-forward", config: normCfg,
		in: normEntry("", "", "layernorm-forward", normCfg, ln).in, format: compare.Float32,
		port: func(in ops.Tensors) ops.Tensors {
			x, w, b := in["x"].Data, in["weight"].Data, in["bias"].Data
			y := make([]float64, len(x))
			for o := 0; o < len(x); o += 16 {
				var mu, v float64
				for _, e := range x[o : o+16] {
					mu += e
				}
				mu /= 16
				for _, e := range x[o : o+16] {
					v += float64((e - mu) * (e - mu))
				}
				r := math.Sqrt(v/16 + 1e-5)
				for i := range 16 {
					y[o+i] = float64(float32(float64((x[o+i]-mu)/r*w[i]) + b[i]))
				}
			}
			return ops.Tensors{"y": {Data: y}}
		}})

	// Norms backward.
	nb := func(name, op string, n normPort, want ...string) entry {
		return normEntry("norms backward", name, op, normCfg, n, want...)
	}
	c = append(c, nb("LayerNorm correct", "layernorm-backward", ln))
	c = append(c, nb("RMSNorm correct", "rmsnorm-backward", rms))
	c = append(c, nb("LayerNorm ε added to the root", "layernorm-backward", with(ln, func(n *normPort) { n.addRoot = true }), `"epsilon_placement": "added-to-root"`))
	c = append(c, nb("RMSNorm ε 1e-6", "rmsnorm-backward", with(rms, func(n *normPort) { n.eps = 1e-6 }), `"epsilon": 0.000001`))
	c = append(c, nb("LayerNorm gain 1 + w", "layernorm-backward", with(ln, func(n *normPort) { n.onePlus = true }), `"weight_form": "one-plus"`))
	c = append(c, offset(nb("LayerNorm one-pass variance, rows of mean 10", "layernorm-backward", onePass, `"variance": "one-pass"`), 10))

	// Activations.
	c = append(c, actEntry("GELU correct", "gelu", 0, geluErf, false, false))
	c = append(c, actEntry("tanh form for the exact GELU", "gelu", 0, geluTanh, false, false, `"function": "gelu-tanh"`))
	c = append(c, actEntry("exact GELU for the tanh form", "gelu-tanh", 0, geluErf, false, false, `"function": "gelu"`))
	c = append(c, actEntry("sigmoid GELU for SiLU", "silu", 0, swish(1.702), false, false, `"function": "gelu-sigmoid"`))
	c = append(c, actEntry("Swish β 1 for 1.5", "swish", 1.5, swish(1), false, false, `"beta": 1`))
	c = append(c, actEntry("gradient of the tanh form for the exact GELU", "gelu", 0, geluTanhGrad, true, false, `"function": "gelu-tanh"`))
	c = append(c, actEntry("gradient with x and dy swapped", "gelu", 0, geluErfGrad, true, true, `x and dy swapped`))
	c = append(c, actEntry("SiLU gradient correct", "silu", 0, swishGrad(1), true, false))

	// FFN and GLU forward.
	const swiglu = `{"version":1,"activation":"silu","gated":true,"layout":"in-by-out"}`
	g := ffnPort{rows: 5, in: 6, hidden: 8, out: 6, gated: true, act: swish(1), grad: swishGrad(1)}
	c = append(c, ffnEntry("SwiGLU correct", swiglu, g, false))
	c = append(c, ffnEntry("gate and value swapped", swiglu, with(g, func(f *ffnPort) { f.swapGate = true }), false, `w1 and v swapped (gate and value projections)`))
	c = append(c, ffnEntry("W2 read out-by-in", swiglu, with(g, func(f *ffnPort) { f.outByIn[2] = true }), false, `w2 read transposed`))
	c = append(c, ffnEntry("GEGLU with the tanh form", `{"version":1,"activation":"gelu","gated":true,"layout":"in-by-out"}`, with(g, func(f *ffnPort) { f.act = geluTanh }), false, `"activation": "gelu-tanh"`))
	sq := ffnPort{rows: 5, in: 8, hidden: 8, out: 8, gated: true, act: swish(1), outByIn: [3]bool{true, true, true}}
	c = append(c, ffnEntry("every weight read out-by-in", swiglu, sq, false, `"layout": "out-by-in"`))
	c = append(c, ffnEntry("fused units read alternating", `{"version":1,"activation":"silu","gated":true,"layout":"in-by-out","packing":"stacked"}`, with(g, func(f *ffnPort) { f.interleavedFused = true }), true, `"packing": "interleaved"`))
	plain := ffnPort{rows: 5, in: 6, hidden: 8, out: 6, act: geluErf}
	c = append(c, ffnEntry("GELU for ReLU", `{"version":1,"activation":"relu","layout":"in-by-out"}`, plain, false, `"activation": "gelu"`))
	c = append(c, ffnEntry("two slips: swapped and GELU", swiglu, with(g, func(f *ffnPort) { f.swapGate, f.act = true, geluErf }), false, `w1 and v swapped (gate and value projections)`, `"activation": "gelu"`))

	// FFN and GLU backward.
	c = append(c, ffnBackEntry("SwiGLU correct", swiglu, g))
	c = append(c, ffnBackEntry("gate and value swapped", swiglu, with(g, func(f *ffnPort) { f.swapGate = true }), `w1 and v swapped (gate and value projections), gradients written back swapped`))
	p := ffnPort{rows: 5, in: 6, hidden: 8, out: 6, act: geluTanh, grad: geluTanhGrad}
	c = append(c, ffnBackEntry("tanh GELU for the exact one", `{"version":1,"activation":"gelu","layout":"in-by-out"}`, p, `"activation": "gelu-tanh"`))
	c = append(c, ffnBackEntry("GEGLU for SwiGLU", swiglu, with(g, func(f *ffnPort) { f.act, f.grad = geluErf, geluErfGrad }), `"activation": "gelu"`))

	// Softmax and log-sum-exp, x of shape [2, 4, 6] (square [2, 5, 5] for
	// log-sum-exp over the other axis).
	bf := func(y []float32) []float32 { // stored in bfloat16
		for i, v := range y {
			y[i] = float32(compare.BFloat16.Round(float64(v)))
		}
		return y
	}
	c = append(c, softmaxEntry("softmax correct", "softmax", []int{2, 4, 6}, func(x []float32) []float32 { return softmaxPort(x, 4, 6, 1, 24) }, compare.Float32))
	c = append(c, softmaxEntry("softmax correct, bfloat16 storage", "softmax", []int{2, 4, 6},
		func(x []float32) []float32 {
			return bf(softmaxPort(to32(compare.BFloat16.RoundSlice(to64(x))), 4, 6, 1, 24))
		}, compare.BFloat16))
	c = append(c, softmaxEntry("softmax over columns", "softmax", []int{2, 4, 6}, func(x []float32) []float32 { return softmaxPort(x, 6, 4, 6, 24) }, compare.Float32,
		`x reduced over its second-to-last axis`))
	c = append(c, softmaxEntry("softmax over rows of 4", "softmax", []int{2, 4, 6}, func(x []float32) []float32 { return softmaxPort(x, 6, 4, 1, 24) }, compare.Float32,
		`x read in rows of 4 (the second-to-last size) instead of 6`))
	c = append(c, softmaxEntry("log-sum-exp correct", "logsumexp", []int{2, 5, 5}, func(x []float32) []float32 { return lsePort(x, 5, 5, 1, 25) }, compare.Float32))
	c = append(c, softmaxEntry("log-sum-exp over columns", "logsumexp", []int{2, 5, 5}, func(x []float32) []float32 { return lsePort(x, 5, 5, 5, 25) }, compare.Float32,
		`x reduced over its second-to-last axis`))

	// Precision idioms of a float32 softmax, on rows of 64: running sums
	// in bfloat16 or binary16 (summed from the end of the row, not in the
	// yardstick's order), and no maximum subtracted on rows whose sums
	// overflow float32 (logits in [84, 88): every e^x is finite, their sum
	// +Inf, the row 0).
	narrow := func(f compare.Format) func(a, b float32) float32 {
		return func(a, b float32) float32 { return float32(f.Round(float64(a) + float64(b))) }
	}
	c = append(c, softmaxEntry("softmax summed in bfloat16", "softmax", []int{2, 8, 64},
		func(x []float32) []float32 { return softmaxIdiomPort(x, 8, 64, 1, 512, narrow(compare.BFloat16), true) }, compare.Float32, `"accumulation": "bfloat16"`))
	c = append(c, softmaxEntry("softmax summed in binary16", "softmax", []int{2, 8, 64},
		func(x []float32) []float32 { return softmaxIdiomPort(x, 8, 64, 1, 512, narrow(compare.Binary16), true) }, compare.Float32, `"accumulation": "binary16"`))
	c = append(c, softmaxEntry("softmax summed in bfloat16, over columns", "softmax", []int{2, 8, 64},
		func(x []float32) []float32 {
			return softmaxIdiomPort(x, 64, 8, 64, 512, narrow(compare.BFloat16), true)
		}, compare.Float32,
		`x reduced over its second-to-last axis`, `"accumulation": "bfloat16"`))
	over := softmaxEntry("unshifted softmax, sums overflowing", "softmax", []int{2, 4, 64},
		func(x []float32) []float32 { return softmaxIdiomPort(x, 4, 64, 1, 256, nil, false) }, compare.Float32, `"softmax_shift": "none"`)
	over.in = ops.Tensors{"x": overflowing()}
	c = append(c, over)
	return c
}

// names reports whether candidate c is the change want (one change, or a
// set of changes in any order).
func names(c Candidate, want []string) bool {
	if len(want) == 1 {
		return c.Names(want[0])
	}
	got := append([]string(nil), c.Changes...)
	w := append([]string(nil), want...)
	sort.Strings(got)
	sort.Strings(w)
	return strings.Join(got, "\n") == strings.Join(w, "\n")
}

// wantsIdiom reports whether one of the candidate's changes is a
// precision idiom.
func wantsIdiom(c Candidate) bool {
	for _, e := range c.Edits {
		if e.Idiom {
			return true
		}
	}
	return false
}

// idiomOnly reports whether every change of the candidate is a precision
// idiom.
func idiomOnly(c Candidate) bool {
	for _, e := range c.Edits {
		if !e.Idiom {
			return false
		}
	}
	return len(c.Edits) > 0
}

func TestCatalogue(t *testing.T) {
	type tally struct{ ports, first, top3, correct, falseNames, idioms int }
	per := map[string]*tally{}
	var families []string
	slipped := 0
	for _, e := range catalogue() {
		if per[e.family] == nil {
			per[e.family] = &tally{}
			families = append(families, e.family)
		}
		tl := per[e.family]
		got := e.port(e.in)
		res, err := Run(e.op, []byte(e.config), e.in, got, e.format, Options{})
		ensure.NoError(t, err, "%s / %s", e.family, e.name)
		if e.want == nil {
			tl.correct++
			if !res.Given.Pass {
				tl.falseNames++
				var b strings.Builder
				_ = res.WriteText(&b)
				t.Errorf("%s / %s: a correct port fails its yardstick:\n%s", e.family, e.name, b.String())
			}
			continue
		}
		slipped++
		tl.ports++
		ensure.False(t, res.Given.Pass, "%s / %s: the slipped port passes as configured", e.family, e.name)
		for i, c := range res.Candidates {
			if i == 3 || !c.Pass {
				break
			}
			if names(c, e.want) {
				tl.top3++
				if i == 0 {
					tl.first++
				}
				break
			}
		}
		if len(res.Candidates) == 0 || !res.Candidates[0].Pass || !names(res.Candidates[0], e.want) {
			var b strings.Builder
			_ = res.WriteText(&b)
			t.Errorf("%s / %s: want %q named first:\n%s", e.family, e.name, e.want, b.String())
			continue
		}
		// A port named by an idiom carries its cost; a port named by
		// conventions alone is never explained by an idiom alone.
		if wantsIdiom(res.Candidates[0]) {
			tl.idioms++
			ensure.NotNil(t, res.Candidates[0].IdiomCost, "%s / %s: the idiom's cost", e.family, e.name)
			continue
		}
		for _, c := range res.Passing() {
			if idiomOnly(c) {
				var b strings.Builder
				_ = res.WriteText(&b)
				t.Errorf("%s / %s: a slipped port passes under the idiom alone %s:\n%s", e.family, e.name, c.Change, b.String())
			}
		}
	}
	ensure.GreaterOrEqual(t, slipped, 40, "the catalogue holds at least 40 slipped ports")
	for _, f := range families {
		tl := per[f]
		t.Logf("%-24s slipped %2d  named first %2d/%-2d  in top 3 %2d/%-2d  correct ports %d, false names %d; named by a precision idiom %d",
			f, tl.ports, tl.first, tl.ports, tl.top3, tl.ports, tl.correct, tl.falseNames, tl.idioms)
	}
}
