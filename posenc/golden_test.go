package posenc

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

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

// worst records the largest normwise relative error seen per function, for
// the accuracy statement of the package doc (go test -v -run Golden).
type worst map[string]float64

func (w worst) note(fn string, e float64) {
	if e > w[fn] {
		w[fn] = e
	}
}

func (w worst) log(t *testing.T) {
	for fn, e := range w {
		t.Logf("worst normwise relative error %-28s %.3g", fn, e)
	}
}

func checkNorm(t *testing.T, w worst, fn string, c *golden.Case, name string, got []float64, bound float64) {
	t.Helper()
	want, _, err := c.Float(name)
	require.NoError(t, err)
	require.Len(t, got, len(want), "%s: %s", c, name)
	e := golden.NormwiseRelErr(got, want)
	w.note(fn, e)
	assert.LessOrEqual(t, e, bound, golden.Describe(c, name, e, bound))
}

func checkExact(t *testing.T, c *golden.Case, name string, got []float64) {
	t.Helper()
	want, _, err := c.Float(name)
	require.NoError(t, err)
	require.Len(t, got, len(want), "%s: %s", c, name)
	for i := range want {
		assert.Equal(t, want[i], got[i], "%s: %s[%d]: got %x, want %x", c, name, i, got[i], want[i])
	}
}

func layoutOf(t *testing.T, s string) Layout {
	switch s {
	case "interleaved":
		return Interleaved
	case "concatenated":
		return Concatenated
	}
	t.Fatalf("unknown layout %q", s)
	return 0
}

func TestGoldenSinusoidal(t *testing.T) {
	w := worst{}
	defer w.log(t)
	type tableCfg struct {
		Dim    int     `json:"dim"`
		Base   float64 `json:"base"`
		Layout string  `json:"layout"`
		Offset int     `json:"offset"`
		N      int     `json:"n"`
	}
	f := golden.MustLoadFamily(t, "posenc", "sinusoidal_table")
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg tableCfg
			require.NoError(t, c.DecodeConfig(&cfg))
			s := Sinusoidal{Dim: cfg.Dim, Base: cfg.Base, Layout: layoutOf(t, cfg.Layout)}
			got, err := s.Table(cfg.N, cfg.Offset)
			require.NoError(t, err)
			checkNorm(t, w, "Sinusoidal.Table", c, "table", got, tableBound)
		})
	}
	type addCfg struct {
		Dim    int     `json:"dim"`
		Base   float64 `json:"base"`
		Layout string  `json:"layout"`
		Offset int     `json:"offset"`
		SeqLen int     `json:"seq_len"`
	}
	f = golden.MustLoadFamily(t, "posenc", "sinusoidal_add")
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg addCfg
			require.NoError(t, c.DecodeConfig(&cfg))
			x, _, err := c.Float("x")
			require.NoError(t, err)
			s := Sinusoidal{Dim: cfg.Dim, Base: cfg.Base, Layout: layoutOf(t, cfg.Layout)}
			got, err := s.Add(x, cfg.SeqLen, cfg.Offset)
			require.NoError(t, err)
			checkNorm(t, w, "Sinusoidal.Add", c, "y", got, tableBound)
		})
	}
}

func TestGoldenRotaryTables(t *testing.T) {
	w := worst{}
	defer w.log(t)
	type cfgT struct {
		Dim     int     `json:"dim"`
		Rotated int     `json:"rotated"`
		Base    float64 `json:"base"`
	}
	f := golden.MustLoadFamily(t, "posenc", "rotary_tables")
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg cfgT
			require.NoError(t, c.DecodeConfig(&cfg))
			p64, _, err := c.Ints("positions")
			require.NoError(t, err)
			pos := make([]int, len(p64))
			for i, v := range p64 {
				pos[i] = int(v)
			}
			r := Rotary{Dim: cfg.Dim, Rotated: cfg.Rotated, Base: cfg.Base}
			th, err := r.Frequencies()
			require.NoError(t, err)
			checkExact(t, c, "theta", th)
			cos, sin, err := r.Tables(pos)
			require.NoError(t, err)
			checkNorm(t, w, "Rotary.Tables", c, "cos", cos, tableBound)
			checkNorm(t, w, "Rotary.Tables", c, "sin", sin, tableBound)
		})
	}
}

// applyCfg is the configuration of the rotary_apply and scaling families.
type applyCfg struct {
	Dim           int     `json:"dim"`
	Rotated       int     `json:"rotated"`
	Base          float64 `json:"base"`
	Pairing       string  `json:"pairing"`
	Magnitude     float64 `json:"magnitude"`
	SeqLen        int     `json:"seq_len"`
	Offset        int     `json:"offset"`
	Method        string  `json:"scaling_method"`
	Factor        float64 `json:"scaling_factor"`
	TrainedLength int     `json:"scaling_trained_length"`
	CurrentLength int     `json:"scaling_current_length"`
	Alpha         float64 `json:"scaling_alpha"`
	Beta          float64 `json:"scaling_beta"`
	Ramp          string  `json:"scaling_ramp"`
}

func (cfg applyCfg) rotary(t *testing.T, c *golden.Case) (Rotary, Positions) {
	r := Rotary{Dim: cfg.Dim, Rotated: cfg.Rotated, Base: cfg.Base, Magnitude: cfg.Magnitude}
	switch cfg.Pairing {
	case "adjacent":
		r.Pairing = PairAdjacent
	case "halves":
		r.Pairing = PairHalves
	default:
		t.Fatalf("unknown pairing %q", cfg.Pairing)
	}
	sc := Scaling{Factor: cfg.Factor, TrainedLength: cfg.TrainedLength, CurrentLength: cfg.CurrentLength,
		Alpha: cfg.Alpha, Beta: cfg.Beta}
	switch cfg.Method {
	case "none":
	case "interpolation":
		sc.Method = Interpolation
	case "ntk":
		sc.Method = NTKAware
	case "yarn":
		sc.Method = YaRN
	case "per_frequency":
		sc.Method = PerFrequency
		var err error
		sc.Factors, _, err = c.Float("factors")
		require.NoError(t, err)
	default:
		t.Fatalf("unknown method %q", cfg.Method)
	}
	switch cfg.Ramp {
	case "", "ratio":
	case "dims":
		sc.Ramp = RampDims
	default:
		t.Fatalf("unknown ramp %q", cfg.Ramp)
	}
	r.Scaling = sc
	pos := Positions{Offset: cfg.Offset}
	if c.Has("positions") {
		p64, _, err := c.Ints("positions")
		require.NoError(t, err)
		pos.List = make([]int, len(p64))
		for i, v := range p64 {
			pos.List[i] = int(v)
		}
	}
	return r, pos
}

func runApplyFamily(t *testing.T, family string) {
	w := worst{}
	defer w.log(t)
	f := golden.MustLoadFamily(t, "posenc", family)
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg applyCfg
			require.NoError(t, c.DecodeConfig(&cfg))
			r, pos := cfg.rotary(t, c)
			x, _, err := c.Float("x")
			require.NoError(t, err)
			th, err := r.Frequencies()
			require.NoError(t, err)
			checkExact(t, c, "theta", th)
			y, err := r.Apply(x, cfg.SeqLen, pos)
			require.NoError(t, err)
			checkNorm(t, w, "Rotary.Apply", c, "y", y, tableBound)
			if c.Has("y_inverse") {
				yi, err := r.ApplyInverse(x, cfg.SeqLen, pos)
				require.NoError(t, err)
				checkNorm(t, w, "Rotary.ApplyInverse", c, "y_inverse", yi, tableBound)
			}
		})
	}
}

func TestGoldenRotaryApply(t *testing.T) { runApplyFamily(t, "rotary_apply") }

func TestGoldenScaling(t *testing.T) { runApplyFamily(t, "scaling") }

func TestGoldenNTKBase(t *testing.T) {
	type cfgT struct {
		Base    float64 `json:"base"`
		Factor  float64 `json:"factor"`
		Rotated int     `json:"rotated"`
	}
	for _, c := range golden.MustLoadFamily(t, "posenc", "ntk_base").Cases {
		var cfg cfgT
		require.NoError(t, c.DecodeConfig(&cfg))
		got, err := NTKBase(cfg.Base, cfg.Factor, cfg.Rotated)
		require.NoError(t, err, c.String())
		checkExact(t, c, "base_scaled", []float64{got})
	}
}

func TestGoldenYaRNMagnitude(t *testing.T) {
	type cfgT struct {
		Factor float64 `json:"factor"`
	}
	for _, c := range golden.MustLoadFamily(t, "posenc", "yarn_magnitude").Cases {
		var cfg cfgT
		require.NoError(t, c.DecodeConfig(&cfg))
		got, err := YaRNMagnitude(cfg.Factor)
		require.NoError(t, err, c.String())
		checkExact(t, c, "magnitude", []float64{got})
	}
}

func TestGoldenALiBiSlopes(t *testing.T) {
	type cfgT struct {
		Heads int `json:"heads"`
	}
	for _, c := range golden.MustLoadFamily(t, "posenc", "alibi_slopes").Cases {
		var cfg cfgT
		require.NoError(t, c.DecodeConfig(&cfg))
		got, err := ALiBiSlopes(cfg.Heads)
		require.NoError(t, err, c.String())
		checkExact(t, c, "slopes", got)
	}
}

func TestGoldenALiBiBias(t *testing.T) {
	type cfgT struct {
		Lq     int    `json:"lq"`
		Lk     int    `json:"lk"`
		Align  string `json:"align"`
		Offset int    `json:"offset"`
		Form   string `json:"form"`
	}
	for _, c := range golden.MustLoadFamily(t, "posenc", "alibi_bias").Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg cfgT
			require.NoError(t, c.DecodeConfig(&cfg))
			slopes, _, err := c.Float("slopes")
			require.NoError(t, err)
			g := mask.Geometry{Batch: 1, Lq: cfg.Lq, Lk: cfg.Lk, Offset: cfg.Offset}
			switch cfg.Align {
			case "end":
			case "start":
				g.Align = mask.AlignStart
			default:
				t.Fatalf("unknown align %q", cfg.Align)
			}
			form := map[string]ALiBiForm{"causal": ALiBiCausal, "symmetric": ALiBiSymmetric}[cfg.Form]
			got, err := ALiBiBias(slopes, g, form)
			require.NoError(t, err)
			checkExact(t, c, "bias", got)
		})
	}
}

// TestGoldenCount guards against a family silently losing its cases.
func TestGoldenCount(t *testing.T) {
	want := map[string]int{
		"sinusoidal_table": 10, "sinusoidal_add": 3, "rotary_tables": 4,
		"rotary_apply": 12, "scaling": 52, "ntk_base": 8, "yarn_magnitude": 9,
		"alibi_slopes": 29, "alibi_bias": 9,
	}
	got := map[string]int{}
	for fam := range want {
		got[fam] = len(golden.MustLoadFamily(t, "posenc", fam).Cases)
	}
	assert.Equal(t, want, got, "case counts")
}
