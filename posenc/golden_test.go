package posenc

import (
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/mask"
)

// The golden files under testdata/golden/posenc are written by
// testdata/gen/fam_posenc.py, which implements every formula again from its
// published definition in mpmath at 50 significant digits, on the exact
// float64 inputs; each expected value is rounded once to float64.
//
// Tolerances, each with its reason:
//
//   - tableBound (tables, sinusoidal, rotation): every entry is a sine or
//     cosine of an angle formed in double-double (error below 1e-25 at
//     the largest positions), so what is left is math.Sincos (about 1 ulp),
//     the one rounding of the addition formula, and for the rotation two
//     products and a sum (at most 2 ulps of the pair's norm). 1 ulp of
//     numbers of magnitude ≤ 1 is 2.2e-16, so 8e-16 normwise is 4 ulps
//     of room: a regression to forming angles in float64 (absolute error
//     up to 6e-11 at position 10⁶) fails it by four orders of magnitude
//     (TestLargePositionAngles shows it).
//   - exact: frequencies, slopes, NTK base, YaRN magnitude and the ALiBi
//     bias are claimed correctly rounded (the double-double values carry
//     ~106 bits; the bias is one rounding of an exact product), so they
//     must equal the golden values bit for bit.
const tableBound = 8e-16

// accuracy is the package's accuracy table in doc.go: every normwise
// golden check notes its error there, and TestMain fails when the table is
// out of date.
var accuracy = &golden.Accuracy{
	Path: "doc.go",
	Rows: []string{"Sinusoidal.Table", "Sinusoidal.Add", "Rotary.Tables", "Rotary.Apply", "Rotary.ApplyInverse"},
	Cols: []string{"table", "cos", "sin", "y"},
}

func TestMain(m *testing.M) { os.Exit(accuracy.Main(m)) }

func checkNorm(t *testing.T, fn string, c *golden.Case, name string, got []float64, bound float64) {
	t.Helper()
	want, _, err := c.Float(name)
	ensure.NoError(t, err)
	ensure.Len(t, got, len(want), "%s: %s", c, name)
	e := golden.NormwiseRelErr(got, want)
	accuracy.Note(fn, strings.TrimSuffix(name, "_inverse"), e)
	expect.LessOrEqual(t, e, bound, golden.Describe(c, name, e, bound))
}

func checkExact(t *testing.T, c *golden.Case, name string, got []float64) {
	t.Helper()
	want, _, err := c.Float(name)
	ensure.NoError(t, err)
	ensure.Len(t, got, len(want), "%s: %s", c, name)
	for i := range want {
		expect.Equal(t, want[i], got[i], "%s: %s[%d]: got %x, want %x", c, name, i, got[i], want[i])
	}
}

// The configurations of the golden families, decoded into the package's
// types: every convention word is read by its type's UnmarshalText, so a
// word the generator misspells fails the decoding.

// sinusoidalCfg is the configuration of sinusoidal_table and sinusoidal_add.
type sinusoidalCfg struct {
	Dim    int     `json:"dim"`
	Base   float64 `json:"base"`
	Layout Layout  `json:"layout"`
	Offset int     `json:"offset"`
	Length int     `json:"length"` // positions in the table; of each sequence of x
}

func (cfg *sinusoidalCfg) sinusoidal() Sinusoidal {
	return Sinusoidal{Dim: cfg.Dim, Base: cfg.Base, Layout: cfg.Layout}
}

// scalingCfg is a rotary configuration's "scaling" object; a
// per-frequency case's factors are its input tensor "factors".
type scalingCfg struct {
	Method        Method  `json:"method"`
	Factor        float64 `json:"factor"`
	TrainedLength int     `json:"trained_length"`
	CurrentLength int     `json:"current_length"`
	Alpha         float64 `json:"alpha"`
	Beta          float64 `json:"beta"`
	// Ramp is a pointer so that only the cases that name a ramp count
	// towards the coverage of its words (golden.Words notes a zero value).
	Ramp *Ramp `json:"ramp"`
}

// rotaryCfg is the configuration of rotary_tables, rotary_apply and
// scaling.
type rotaryCfg struct {
	Dim       int         `json:"dim"`
	Rotated   int         `json:"rotated"`
	Base      float64     `json:"base"`
	Pairing   Pairing     `json:"pairing"`
	Magnitude float64     `json:"magnitude"`
	Length    int         `json:"length"` // positions per sequence of x (apply)
	Offset    int         `json:"offset"`
	Scaling   *scalingCfg `json:"scaling"`
}

func (cfg *rotaryCfg) rotary(t *testing.T, c *golden.Case) (Rotary, Positions) {
	t.Helper()
	r := Rotary{Dim: cfg.Dim, Rotated: cfg.Rotated, Base: cfg.Base, Pairing: cfg.Pairing, Magnitude: cfg.Magnitude}
	if sc := cfg.Scaling; sc != nil {
		r.Scaling = Scaling{Method: sc.Method, Factor: sc.Factor, TrainedLength: sc.TrainedLength,
			CurrentLength: sc.CurrentLength, Alpha: sc.Alpha, Beta: sc.Beta}
		if sc.Ramp != nil {
			r.Scaling.Ramp = *sc.Ramp
		}
	}
	if c.Has("factors") {
		var err error
		r.Scaling.Factors, _, err = c.Float("factors")
		ensure.NoError(t, err)
	}
	pos := Positions{Offset: cfg.Offset}
	if c.Has("positions") {
		pos.List = positions(t, c)
	}
	return r, pos
}

func positions(t *testing.T, c *golden.Case) []int {
	t.Helper()
	p64, _, err := c.Ints("positions")
	ensure.NoError(t, err)
	pos := make([]int, len(p64))
	for i, v := range p64 {
		pos[i] = int(v)
	}
	return pos
}

type ntkBaseCfg struct {
	Base    float64 `json:"base"`
	Factor  float64 `json:"factor"`
	Rotated int     `json:"rotated"`
}

type yarnMagnitudeCfg struct {
	Factor float64 `json:"factor"`
}

type alibiSlopesCfg struct {
	Heads int `json:"heads"`
}

// alibiBiasCfg uses the keys of the ops alibi-bias operation.
type alibiBiasCfg struct {
	Queries int            `json:"queries"`
	Keys    int            `json:"keys"`
	Align   mask.Align     `json:"align"`
	Offset  int            `json:"offset"`
	Form    mask.ALiBiForm `json:"alibi_form"`
}

// goldenConfigs gives each posenc golden family a new value of its
// configuration type.
var goldenConfigs = map[string]func() any{
	"sinusoidal_table": func() any { return new(sinusoidalCfg) },
	"sinusoidal_add":   func() any { return new(sinusoidalCfg) },
	"rotary_tables":    func() any { return new(rotaryCfg) },
	"rotary_apply":     func() any { return new(rotaryCfg) },
	"scaling":          func() any { return new(rotaryCfg) },
	"ntk_base":         func() any { return new(ntkBaseCfg) },
	"yarn_magnitude":   func() any { return new(yarnMagnitudeCfg) },
	"alibi_slopes":     func() any { return new(alibiSlopesCfg) },
	"alibi_bias":       func() any { return new(alibiBiasCfg) },
}

// eachCase runs check, as a subtest, on every case of the family with its
// configuration decoded into a C.
func eachCase[C any](t *testing.T, family string, check func(t *testing.T, c *golden.Case, cfg *C)) {
	for _, c := range golden.MustLoadFamily(t, "posenc", family).Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg C
			ensure.NoError(t, c.DecodeConfig(&cfg))
			check(t, c, &cfg)
		})
	}
}

func TestGoldenSinusoidal(t *testing.T) {
	eachCase(t, "sinusoidal_table", func(t *testing.T, c *golden.Case, cfg *sinusoidalCfg) {
		got, err := cfg.sinusoidal().Table(cfg.Length, cfg.Offset)
		ensure.NoError(t, err)
		checkNorm(t, "Sinusoidal.Table", c, "table", got, tableBound)
	})
	eachCase(t, "sinusoidal_add", func(t *testing.T, c *golden.Case, cfg *sinusoidalCfg) {
		x, _, err := c.Float("x")
		ensure.NoError(t, err)
		got, err := cfg.sinusoidal().Add(x, cfg.Length, cfg.Offset)
		ensure.NoError(t, err)
		checkNorm(t, "Sinusoidal.Add", c, "y", got, tableBound)
	})
}

func TestGoldenRotaryTables(t *testing.T) {
	eachCase(t, "rotary_tables", func(t *testing.T, c *golden.Case, cfg *rotaryCfg) {
		r, _ := cfg.rotary(t, c)
		th, err := r.Frequencies()
		ensure.NoError(t, err)
		checkExact(t, c, "theta", th)
		cos, sin, err := r.Tables(positions(t, c))
		ensure.NoError(t, err)
		checkNorm(t, "Rotary.Tables", c, "cos", cos, tableBound)
		checkNorm(t, "Rotary.Tables", c, "sin", sin, tableBound)
	})
}

func runApplyFamily(t *testing.T, family string) {
	eachCase(t, family, func(t *testing.T, c *golden.Case, cfg *rotaryCfg) {
		r, pos := cfg.rotary(t, c)
		x, _, err := c.Float("x")
		ensure.NoError(t, err)
		th, err := r.Frequencies()
		ensure.NoError(t, err)
		checkExact(t, c, "theta", th)
		y, err := r.Apply(x, cfg.Length, pos)
		ensure.NoError(t, err)
		checkNorm(t, "Rotary.Apply", c, "y", y, tableBound)
		if c.Has("y_inverse") {
			yi, err := r.ApplyInverse(x, cfg.Length, pos)
			ensure.NoError(t, err)
			checkNorm(t, "Rotary.ApplyInverse", c, "y_inverse", yi, tableBound)
		}
	})
}

func TestGoldenRotaryApply(t *testing.T) { runApplyFamily(t, "rotary_apply") }

func TestGoldenScaling(t *testing.T) { runApplyFamily(t, "scaling") }

// checkFamily runs run on the configuration, of type C, of every case of
// the family and checks its result against the case's output exactly.
func checkFamily[C any](t *testing.T, family, output string, run func(C) ([]float64, error)) {
	eachCase(t, family, func(t *testing.T, c *golden.Case, cfg *C) {
		got, err := run(*cfg)
		ensure.NoError(t, err, c.String())
		checkExact(t, c, output, got)
	})
}

// one makes a function of one result return it as a slice.
func one[C any](f func(C) (float64, error)) func(C) ([]float64, error) {
	return func(cfg C) ([]float64, error) {
		v, err := f(cfg)
		return []float64{v}, err
	}
}

func TestGoldenNTKBase(t *testing.T) {
	checkFamily(t, "ntk_base", "base_scaled", one(func(cfg ntkBaseCfg) (float64, error) { return NTKBase(cfg.Base, cfg.Factor, cfg.Rotated) }))
}

func TestGoldenYaRNMagnitude(t *testing.T) {
	checkFamily(t, "yarn_magnitude", "magnitude", one(func(cfg yarnMagnitudeCfg) (float64, error) { return YaRNMagnitude(cfg.Factor) }))
}

func TestGoldenALiBiSlopes(t *testing.T) {
	checkFamily(t, "alibi_slopes", "slopes", func(cfg alibiSlopesCfg) ([]float64, error) { return ALiBiSlopes(cfg.Heads) })
}

func TestGoldenALiBiBias(t *testing.T) {
	eachCase(t, "alibi_bias", func(t *testing.T, c *golden.Case, cfg *alibiBiasCfg) {
		slopes, _, err := c.Float("slopes")
		ensure.NoError(t, err)
		g := mask.Geometry{Batch: 1, Lq: cfg.Queries, Lk: cfg.Keys, Align: cfg.Align, Offset: cfg.Offset}
		got, err := ALiBiBias(slopes, g, cfg.Form)
		ensure.NoError(t, err)
		checkExact(t, c, "bias", got)
		// The bias is claimed bit-exact, zeros included: a distance of
		// 0 gives +0, never −0.
		for i, v := range got {
			if v == 0 {
				expect.False(t, math.Signbit(v), "%s: bias[%d] = −0", c, i)
			}
		}
	})
}

// TestGoldenWords requires every word of the package's conventions, and of
// the mask conventions ALiBiBias takes, to appear in some golden case: a
// word added to one of them fails here until testdata/gen/fam_posenc.py
// writes a case for it.
func TestGoldenWords(t *testing.T) {
	var w golden.Words
	w.NoteFamilies(t, "posenc", goldenConfigs)
	w.Require(t, "posenc.Layout", "posenc.Pairing", "posenc.Method", "posenc.Ramp", "mask.Align", "mask.ALiBiForm")
}

// TestGoldenCount guards against a family silently losing its cases.
func TestGoldenCount(t *testing.T) {
	want := map[string]int{
		"sinusoidal_table": 10, "sinusoidal_add": 3, "rotary_tables": 6,
		"rotary_apply": 13, "scaling": 67, "ntk_base": 9, "yarn_magnitude": 9,
		"alibi_slopes": 29, "alibi_bias": 14,
	}
	got := map[string]int{}
	for fam := range want {
		got[fam] = len(golden.MustLoadFamily(t, "posenc", fam).Cases)
	}
	expect.Equal(t, want, got, "case counts")
	// Every file of the package has a count and a configuration type.
	files, err := filepath.Glob(filepath.Join(golden.Dir(), "posenc", "*.json"))
	ensure.NoError(t, err)
	var names, typed []string
	for _, f := range files {
		names = append(names, strings.TrimSuffix(filepath.Base(f), ".json"))
	}
	for fam := range goldenConfigs {
		typed = append(typed, fam)
	}
	expect.ElementsMatch(t, names, slices.Collect(maps.Keys(want)), "families with a count")
	expect.ElementsMatch(t, names, typed, "families with a configuration type")
}
