package ops

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/posenc"
)

type scalingConfig struct {
	Method        posenc.Method `json:"method" doc:"how the frequencies change for a longer context"`
	Factor        float64       `json:"factor" doc:"s = new length / trained length; finite and > 0" default:"required by the methods but per-frequency, unless current_length"`
	TrainedLength int           `json:"trained_length" doc:"the context length the model was trained on (YaRN, dynamic scaling)" default:"0"`
	CurrentLength int           `json:"current_length" doc:"when > 0, dynamic scaling: s = max(1, current_length/trained_length)" default:"0"`
	Alpha         float64       `json:"alpha" doc:"YaRN's α" default:"1 (with beta 0: 32)"`
	Beta          float64       `json:"beta" doc:"YaRN's β" default:"32"`
	Ramp          posenc.Ramp   `json:"ramp" doc:"YaRN: how the ramp from keeping to interpolating runs"`
	Factors       []float64     `json:"factors" doc:"per-frequency: one divisor per rotated pair" default:"[]"`
}

// rotaryCommon holds the keys shared by rotary-apply and rotary-tables.
type rotaryCommon struct {
	Rotated   int                    `json:"rotated" doc:"number of leading dims rotated (even); the rest pass through" default:"the head dimension"`
	Base      float64                `json:"base" doc:"frequency base b, θ_i = b^(−2i/rotated)" default:"10000"`
	Pairing   posenc.Pairing         `json:"pairing" doc:"which dims one frequency rotates"`
	Magnitude float64                `json:"magnitude" doc:"multiplies cos and sin (YaRN's √(1/t))" default:"1"`
	Scaling   *scalingConfig         `json:"scaling" doc:"context scaling" default:"none"`
	Offset    int                    `json:"offset" doc:"position of the first token" default:"0"`
	Positions []int                  `json:"positions" doc:"explicit positions (rotary-apply: one per token of the length axis, or one per row)" default:"offset, offset+1, …"`
	Angles    posenc.AngleArithmetic `json:"angles" idiom:"true" doc:"the port's precision idiom: how it forms the angles m·θ in float32; changes only the yardstick (the float32 run), never the reference"`
}

func (c *rotaryCommon) rotary(dim int) posenc.Rotary {
	r := posenc.Rotary{Dim: dim, Rotated: c.Rotated, Base: c.Base, Magnitude: c.Magnitude, Pairing: c.Pairing, Angles: c.Angles}
	if s := c.Scaling; s != nil {
		r.Scaling = posenc.Scaling{Method: s.Method, Factor: s.Factor, TrainedLength: s.TrainedLength, CurrentLength: s.CurrentLength,
			Alpha: s.Alpha, Beta: s.Beta, Ramp: s.Ramp, Factors: s.Factors}
	}
	return r
}

type rotaryApplyConfig struct {
	header
	rotaryCommon
	Inverse bool `json:"inverse" doc:"apply the transposed rotation R(−m): the inverse, and the backward pass" default:"false"`
}

type rotaryTablesConfig struct {
	header
	rotaryCommon
	Dim    int `json:"dim" doc:"head dimension" default:"required"`
	Length int `json:"length" doc:"number of positions offset … offset+length−1" default:"required unless positions"`
}

type sinusoidalConfig struct {
	header
	Dim    int           `json:"dim" doc:"model dimension (even)" default:"required"`
	Base   float64       `json:"base" doc:"frequency base" default:"10000"`
	Layout posenc.Layout `json:"layout" doc:"the order of the sine and cosine columns"`
	Offset int           `json:"offset" doc:"first position (≥ 0)" default:"0"`
	Length int           `json:"length" doc:"number of positions" default:"required"`
}

type slopesConfig struct {
	header
	Heads int `json:"heads" doc:"number of heads" default:"required"`
}

type alibiBiasConfig struct {
	header
	Queries int `json:"queries" doc:"number of queries" default:"required"`
	Keys    int `json:"keys" doc:"number of keys" default:"required"`
	queryPositions
	ALiBi mask.ALiBiForm `json:"alibi_form" doc:"the key distance d the bias −m·d penalises"`
}

// tablesHolder is what the size check of rotary-tables bounds: the two
// tables of length · rotated/2 values each, at most length · dim together.
const tablesHolder = `outputs "cos" and "sin" together (length · rotated ≤ length · dim)`

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
		inputs:  []Port{{Name: "x", Doc: "[..., length, dim]: every row of dim values is rotated at its position"}},
		outputs: []Port{{Name: "y", Doc: "the rotated tensor, the shape of x"}},
		run:     runRotaryApply,
		rows:    rotaryApplyRows,
	})

	register(&op[rotaryTablesConfig]{
		name:    "rotary-tables",
		summary: "rotary cos and sin tables (posenc.Rotary.Tables; float32: posenc.Rotary.Tables32, the tables rounded or formed as the angles key says)",
		outputs: []Port{
			{Name: "cos", Doc: "[positions, rotated/2]: magnitude·cos(m·θ_i)"},
			{Name: "sin", Doc: "[positions, rotated/2]: magnitude·sin(m·θ_i)"},
		},
		run:  runRotaryTables,
		rows: rotaryTablesRows,
	})

	register(&op[sinusoidalConfig]{
		name:    "sinusoidal-table",
		summary: "sinusoidal absolute position encodings (posenc.Sinusoidal.Table; float32: the table rounded)",
		outputs: []Port{{Name: "table", Doc: "[length, dim]"}},
		run:     runSinusoidalTable,
	})

	register(&op[slopesConfig]{
		name:    "alibi-slopes",
		summary: "ALiBi slopes, one per head (posenc.ALiBiSlopes; float32: the slopes rounded)",
		outputs: []Port{{Name: "slopes", Doc: "[heads]"}},
		run:     runAlibiSlopes,
	})

	register(&op[alibiBiasConfig]{
		name:    "alibi-bias",
		summary: "ALiBi additive bias [heads, queries, keys] (posenc.ALiBiBias; float32: posenc.ALiBiBias32)",
		inputs:  []Port{{Name: "slopes", Doc: "one slope per head [heads]"}},
		outputs: []Port{{Name: "bias", Doc: "[heads, queries, keys]"}},
		run:     runAlibiBias,
	})
}

func runRotaryApply(c *rotaryApplyConfig, in Tensors, single bool) (Tensors, error) {
	s := in["x"].Shape
	if len(s) < 2 {
		return nil, fmt.Errorf("%w: input \"x\" has shape %v; want at least 2 dimensions [..., length, dim]", ErrInput, s)
	}
	r := c.rotary(s[len(s)-1])
	pos := posenc.Positions{Offset: c.Offset, List: c.Positions}
	L := s[len(s)-2]
	apply, apply32 := r.Apply, r.Apply32
	if c.Inverse {
		apply, apply32 = r.ApplyInverse, r.ApplyInverse32
	}
	y, err := pick(single,
		func() ([]float64, error) { return apply(in.data("x"), L, pos) },
		func() ([]float32, error) { return apply32(in.f32("x"), L, pos) })
	if err != nil {
		return nil, err
	}
	return Tensors{"y": {s, y}}, nil
}

// tablePositions are the positions of the rows of rotary-tables, checked
// against the size limit.
func (c *rotaryTablesConfig) tablePositions() ([]int, error) {
	pos := c.Positions
	if pos == nil {
		length, dim := size{`key "length"`, c.Length}, size{`key "dim"`, c.Dim}
		if err := nonNegative(length, dim); err != nil {
			return nil, err
		}
		if err := fits(ErrConfig, tablesHolder, length, dim); err != nil {
			return nil, err
		}
		pos = make([]int, c.Length)
		for i := range pos {
			pos[i] = c.Offset + i
		}
	} else {
		if c.Length != 0 || c.Offset != 0 {
			return nil, fmt.Errorf("%w: key \"length\" = %d and key \"offset\" = %d with key \"positions\"; want 0 for both: the positions exclude them",
				ErrConfig, c.Length, c.Offset)
		}
		if err := fits(ErrConfig, tablesHolder, size{`count of key "positions"`, len(pos)}, size{`key "dim"`, c.Dim}); err != nil {
			return nil, err
		}
	}
	return pos, nil
}

func runRotaryTables(c *rotaryTablesConfig, in Tensors, single bool) (Tensors, error) {
	r := c.rotary(c.Dim)
	pos, err := c.tablePositions()
	if err != nil {
		return nil, err
	}
	var cos, sin []float64
	if single {
		// The float32 tables a port of the angles idiom forms; with the
		// default idiom, the reference tables rounded once.
		var c32, s32 []float32
		c32, s32, err = r.Tables32(pos)
		cos, sin = num.Convert[float64](c32), num.Convert[float64](s32)
	} else {
		cos, sin, err = r.Tables(pos)
	}
	if err != nil {
		return nil, err
	}
	half := r.Rotated / 2 // one column per frequency, also for no position
	if r.Rotated == 0 {
		half = r.Dim / 2
	}
	return Tensors{"cos": {[]int{len(pos), half}, cos}, "sin": {[]int{len(pos), half}, sin}}, nil
}

// rotaryTablesRows gives the position of every row of the tables.
func rotaryTablesRows(c *rotaryTablesConfig, _ Tensors) ([]int, error) { return c.tablePositions() }

// rotaryApplyRows gives the position of every row of dim values of x (and
// y), as posenc.Positions places them.
func rotaryApplyRows(c *rotaryApplyConfig, in Tensors) ([]int, error) {
	s := in["x"].Shape
	if len(s) < 2 || s[len(s)-1] < 1 || s[len(s)-2] < 1 {
		return nil, fmt.Errorf("%w: input \"x\" has shape %v; want at least 2 dimensions [..., length, dim], both ≥ 1", ErrInput, s)
	}
	L, rows := s[len(s)-2], len(in.data("x"))/s[len(s)-1]
	pos := make([]int, rows)
	for r := range pos {
		switch {
		case len(c.Positions) == rows:
			pos[r] = c.Positions[r]
		case c.Positions != nil:
			pos[r] = c.Positions[r%L]
		default:
			pos[r] = c.Offset + r%L
		}
	}
	return pos, nil
}

func runSinusoidalTable(c *sinusoidalConfig, in Tensors, single bool) (Tensors, error) {
	length, dim := size{`key "length"`, c.Length}, size{`key "dim"`, c.Dim}
	if err := nonNegative(length, dim); err != nil {
		return nil, err
	}
	if err := fits(ErrConfig, `output "table"`, length, dim); err != nil {
		return nil, err
	}
	t, err := posenc.Sinusoidal{Dim: c.Dim, Base: c.Base, Layout: c.Layout}.Table(c.Length, c.Offset)
	if err != nil {
		return nil, err
	}
	return tableRun32(Tensors{"table": {[]int{c.Length, c.Dim}, t}}, single), nil
}

func runAlibiSlopes(c *slopesConfig, in Tensors, single bool) (Tensors, error) {
	if err := fits(ErrConfig, `output "slopes"`, size{`key "heads"`, c.Heads}); err != nil {
		return nil, err
	}
	s, err := posenc.ALiBiSlopes(c.Heads)
	if err != nil {
		return nil, err
	}
	return tableRun32(Tensors{"slopes": {[]int{c.Heads}, s}}, single), nil
}

func runAlibiBias(c *alibiBiasConfig, in Tensors, single bool) (Tensors, error) {
	if _, err := rank(in, "slopes", 1, "[heads]"); err != nil {
		return nil, err
	}
	heads := len(in.data("slopes"))
	dims := []size{{`heads (input "slopes")`, heads}, {`key "queries"`, c.Queries}, {`key "keys"`, c.Keys}}
	if err := nonNegative(dims...); err != nil {
		return nil, err
	}
	if err := fits(ErrConfig, `output "bias"`, dims...); err != nil {
		return nil, err
	}
	g := mask.Geometry{Batch: 1, Lq: c.Queries, Lk: c.Keys, Align: c.Align, Offset: c.Offset}
	b, err := pick(single,
		func() ([]float64, error) { return posenc.ALiBiBias(in.data("slopes"), g, c.ALiBi) },
		func() ([]float32, error) { return posenc.ALiBiBias32(in.f32("slopes"), g, c.ALiBi) })
	if err != nil {
		return nil, err
	}
	return Tensors{"bias": {[]int{heads, c.Queries, c.Keys}, b}}, nil
}
