package ops

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/posenc"
)

type scalingConfig struct {
	Method        string    `json:"method"`
	Factor        float64   `json:"factor"`
	TrainedLength int       `json:"trained_length"`
	CurrentLength int       `json:"current_length"`
	Alpha         float64   `json:"alpha"`
	Beta          float64   `json:"beta"`
	Ramp          string    `json:"ramp"`
	Factors       []float64 `json:"factors"`
}

// rotaryCommon holds the keys shared by rotary-apply and rotary-tables.
type rotaryCommon struct {
	Rotated   int            `json:"rotated"`
	Base      float64        `json:"base"`
	Pairing   string         `json:"pairing"`
	Magnitude float64        `json:"magnitude"`
	Scaling   *scalingConfig `json:"scaling"`
	Offset    int            `json:"offset"`
	Positions []int          `json:"positions"`
}

var rotaryCommonKeys = []Key{
	{"rotated", "int", "the head dimension", "number of leading dims rotated (even); the rest pass through"},
	{"base", "number", "10000", "frequency base b, θ_i = b^(−2i/rotated)"},
	{"pairing", "string", `"adjacent"`, `"adjacent" rotates dims (2i, 2i+1); "halves" rotates (i, i + rotated/2)`},
	{"magnitude", "number", "1", "multiplies cos and sin (YaRN's √(1/t))"},
	{"scaling", "object", "none", `context scaling: "method" ("none", "interpolation", "ntk-aware", "yarn", "per-frequency"), "factor", "trained_length", "current_length" (dynamic scaling), "alpha", "beta", "ramp" ("ratio" or "dims"), "factors" (one divisor per pair)`},
	{"offset", "int", "0", "position of the first token"},
	{"positions", "[int]", "offset, offset+1, …", "explicit positions (rotary-apply: one per token of the length axis, or one per row)"},
}

func (c *rotaryCommon) rotary(dim int) (posenc.Rotary, error) {
	r := posenc.Rotary{Dim: dim, Rotated: c.Rotated, Base: c.Base, Magnitude: c.Magnitude}
	var err error
	if r.Pairing, err = choice("pairing", c.Pairing, []string{"adjacent", "halves"}, []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves}); err != nil {
		return r, err
	}
	if s := c.Scaling; s != nil {
		if r.Scaling.Method, err = choice("scaling.method", s.Method, []string{"none", "interpolation", "ntk-aware", "yarn", "per-frequency"},
			[]posenc.Method{posenc.NoScaling, posenc.Interpolation, posenc.NTKAware, posenc.YaRN, posenc.PerFrequency}); err != nil {
			return r, err
		}
		if r.Scaling.Ramp, err = choice("scaling.ramp", s.Ramp, []string{"ratio", "dims"}, []posenc.Ramp{posenc.RampRatio, posenc.RampDims}); err != nil {
			return r, err
		}
		r.Scaling.Factor, r.Scaling.TrainedLength, r.Scaling.CurrentLength = s.Factor, s.TrainedLength, s.CurrentLength
		r.Scaling.Alpha, r.Scaling.Beta, r.Scaling.Factors = s.Alpha, s.Beta, s.Factors
	}
	return r, nil
}

type rotaryApplyConfig struct {
	header
	rotaryCommon
	Inverse bool `json:"inverse"`
}

type rotaryTablesConfig struct {
	header
	rotaryCommon
	Dim    int `json:"dim"`
	Length int `json:"length"`
}

type sinusoidalConfig struct {
	header
	Dim    int     `json:"dim"`
	Base   float64 `json:"base"`
	Layout string  `json:"layout"`
	Offset int     `json:"offset"`
	Length int     `json:"length"`
}

type slopesConfig struct {
	header
	Heads int `json:"heads"`
}

type alibiBiasConfig struct {
	header
	Queries int    `json:"queries"`
	Keys    int    `json:"keys"`
	Align   string `json:"align"`
	Offset  int    `json:"offset"`
	Form    string `json:"form"`
}

// MaxTableElements is the largest output an operation that makes a table
// from its configuration alone (rotary-tables, sinusoidal-table, alibi-bias)
// will allocate: 2^28 values, 2 GiB of float64.
const MaxTableElements = 1 << 28

// tableSize refuses configurations whose output would exceed
// MaxTableElements; dims are the sizes from the configuration.
func tableSize(keys string, dims ...int) error {
	n := 1
	for _, d := range dims {
		if d < 0 {
			return fmt.Errorf("%w: %s: a size is %d; want ≥ 0", ErrConfig, keys, d)
		}
		if d > 0 && n > MaxTableElements/d {
			return fmt.Errorf("%w: %s: the output would hold more than %d values", ErrConfig, keys, MaxTableElements)
		}
		n *= d
	}
	return nil
}

// tableRun32 is Run32 of an operation with no float input: the reference
// rounded to float32.
func tableRun32(t Tensors, single bool) Tensors {
	if single {
		return round32(t)
	}
	return t
}

func init() {
	register(&op[rotaryApplyConfig]{
		name:    "rotary-apply",
		summary: "rotary position encoding of a [..., length, dim] tensor (posenc.Rotary.Apply / ApplyInverse; float32: Apply32 / ApplyInverse32)",
		keys: append(append([]Key(nil), rotaryCommonKeys...),
			Key{"inverse", "bool", "false", "apply the transposed rotation R(−m): the inverse, and the backward pass"}),
		inputs:  []Port{{Name: "x", Doc: "[..., length, dim]: every row of dim values is rotated at its position"}},
		outputs: []Port{{Name: "y", Doc: "the rotated tensor, the shape of x"}},
		run: func(c *rotaryApplyConfig, in Tensors, single bool) (Tensors, error) {
			s := in["x"].Shape
			if len(s) < 2 {
				return nil, fmt.Errorf("%w: input \"x\" has shape %v; want at least 2 dimensions [..., length, dim]", ErrInput, s)
			}
			r, err := c.rotary(s[len(s)-1])
			if err != nil {
				return nil, err
			}
			pos := posenc.Positions{Offset: c.Offset, List: c.Positions}
			L := s[len(s)-2]
			var y []float64
			switch {
			case single && c.Inverse:
				var y32 []float32
				y32, err = r.ApplyInverse32(num.Convert[float32](in.data("x")), L, pos)
				y = num.Convert[float64](y32)
			case single:
				var y32 []float32
				y32, err = r.Apply32(num.Convert[float32](in.data("x")), L, pos)
				y = num.Convert[float64](y32)
			case c.Inverse:
				y, err = r.ApplyInverse(in.data("x"), L, pos)
			default:
				y, err = r.Apply(in.data("x"), L, pos)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"y": {s, y}}, nil
		},
	})

	register(&op[rotaryTablesConfig]{
		name:    "rotary-tables",
		summary: "rotary cos and sin tables (posenc.Rotary.Tables; float32: the tables rounded)",
		keys: append(append([]Key(nil), rotaryCommonKeys...),
			Key{"dim", "int", "required", "head dimension"},
			Key{"length", "int", "required unless positions", "number of positions offset … offset+length−1"}),
		outputs: []Port{
			{Name: "cos", Doc: "[positions, rotated/2]: magnitude·cos(m·θ_i)"},
			{Name: "sin", Doc: "[positions, rotated/2]: magnitude·sin(m·θ_i)"},
		},
		run: func(c *rotaryTablesConfig, in Tensors, single bool) (Tensors, error) {
			r, err := c.rotary(c.Dim)
			if err != nil {
				return nil, err
			}
			pos := c.Positions
			if pos == nil {
				if err := tableSize(`"length" and "dim"`, c.Length, c.Dim); err != nil {
					return nil, err
				}
				pos = make([]int, c.Length)
				for i := range pos {
					pos[i] = c.Offset + i
				}
			} else if c.Length != 0 || c.Offset != 0 {
				return nil, fmt.Errorf("%w: keys \"positions\" and \"length\"/\"offset\" exclude each other", ErrConfig)
			}
			cos, sin, err := r.Tables(pos)
			if err != nil {
				return nil, err
			}
			half := len(cos) / max(len(pos), 1)
			return tableRun32(Tensors{"cos": {[]int{len(pos), half}, cos}, "sin": {[]int{len(pos), half}, sin}}, single), nil
		},
	})

	register(&op[sinusoidalConfig]{
		name:    "sinusoidal-table",
		summary: "sinusoidal absolute position encodings (posenc.Sinusoidal.Table; float32: the table rounded)",
		keys: []Key{
			{"dim", "int", "required", "model dimension (even)"},
			{"base", "number", "10000", "frequency base"},
			{"layout", "string", `"interleaved"`, `"interleaved" (sin, cos, sin, cos, …) or "concatenated" (all sines, then all cosines)`},
			{"offset", "int", "0", "first position (≥ 0)"},
			{"length", "int", "required", "number of positions"},
		},
		outputs: []Port{{Name: "table", Doc: "[length, dim]"}},
		run: func(c *sinusoidalConfig, in Tensors, single bool) (Tensors, error) {
			l, err := choice("layout", c.Layout, []string{"interleaved", "concatenated"}, []posenc.Layout{posenc.Interleaved, posenc.Concatenated})
			if err != nil {
				return nil, err
			}
			if err := tableSize(`"length" and "dim"`, c.Length, c.Dim); err != nil {
				return nil, err
			}
			t, err := posenc.Sinusoidal{Dim: c.Dim, Base: c.Base, Layout: l}.Table(c.Length, c.Offset)
			if err != nil {
				return nil, err
			}
			return tableRun32(Tensors{"table": {[]int{c.Length, c.Dim}, t}}, single), nil
		},
	})

	register(&op[slopesConfig]{
		name:    "alibi-slopes",
		summary: "ALiBi slopes, one per head (posenc.ALiBiSlopes; float32: the slopes rounded)",
		keys:    []Key{{"heads", "int", "required", "number of heads"}},
		outputs: []Port{{Name: "slopes", Doc: "[heads]"}},
		run: func(c *slopesConfig, in Tensors, single bool) (Tensors, error) {
			s, err := posenc.ALiBiSlopes(c.Heads)
			if err != nil {
				return nil, err
			}
			return tableRun32(Tensors{"slopes": {[]int{c.Heads}, s}}, single), nil
		},
	})

	register(&op[alibiBiasConfig]{
		name:    "alibi-bias",
		summary: "ALiBi additive bias [heads, queries, keys] (posenc.ALiBiBias; float32: posenc.ALiBiBias32)",
		keys: []Key{
			{"queries", "int", "required", "number of queries"},
			{"keys", "int", "required", "number of keys"},
			{"align", "string", `"end"`, `"end": query i at position keys − queries + i; "start": at i (plus "offset")`},
			{"offset", "int", "0", "shifts every query position"},
			{"form", "string", `"causal"`, `"causal": −m·(p(i) − j), 0 after the query; "symmetric": −m·|p(i) − j|`},
		},
		inputs:  []Port{{Name: "slopes", Doc: "one slope per head [heads]"}},
		outputs: []Port{{Name: "bias", Doc: "[heads, queries, keys]"}},
		run: func(c *alibiBiasConfig, in Tensors, single bool) (Tensors, error) {
			if _, err := rank(in, "slopes", 1, "[heads]"); err != nil {
				return nil, err
			}
			if err := tableSize(`"queries" and "keys"`, len(in.data("slopes")), c.Queries, c.Keys); err != nil {
				return nil, err
			}
			g := mask.Geometry{Batch: 1, Lq: c.Queries, Lk: c.Keys, Offset: c.Offset}
			var err error
			if g.Align, err = choice("align", c.Align, []string{"end", "start"}, []mask.Align{mask.AlignEnd, mask.AlignStart}); err != nil {
				return nil, err
			}
			f, err := choice("form", c.Form, []string{"causal", "symmetric"}, []posenc.ALiBiForm{posenc.ALiBiCausal, posenc.ALiBiSymmetric})
			if err != nil {
				return nil, err
			}
			var b []float64
			if single {
				var b32 []float32
				b32, err = posenc.ALiBiBias32(num.Convert[float32](in.data("slopes")), g, f)
				b = num.Convert[float64](b32)
			} else {
				b, err = posenc.ALiBiBias(in.data("slopes"), g, f)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"bias": {[]int{len(in.data("slopes")), c.Queries, c.Keys}, b}}, nil
		},
	})
}
