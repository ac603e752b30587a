package posenc

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// TestLargePositionAngles measures, against the 50-digit tables of the
// rotary_tables golden family (positions up to 2^31 − 1), three ways of
// forming the angle m·θ_i:
//
//	float64  θ = math.Pow(b, −2i/r), angle = float64(m)·θ rounded, Sincos
//	fma      the same θ, the product kept exactly (FMA), addition formula
//	dd       θ in double-double, exact product, addition formula (plumb)
//
// and checks that plumb's is within tableBound while the float64 way is
// not: the bound is tight enough to tell them apart. Run with -v for the
// figures quoted in the package doc.
func TestLargePositionAngles(t *testing.T) {
	f := golden.MustLoadFamily(t, "posenc", "rotary_tables")
	for _, c := range f.Cases {
		var cfg rotaryCfg
		ensure.NoError(t, c.DecodeConfig(&cfg))
		if cfg.Scaling != nil || (cfg.Magnitude != 0 && cfg.Magnitude != 1) {
			continue // the float64 and fma ways below form θ without scaling and magnitude
		}
		p64, _, err := c.Ints("positions")
		ensure.NoError(t, err)
		wantSin, _, err := c.Float("sin")
		ensure.NoError(t, err)
		h := cfg.Rotated / 2
		r := Rotary{Dim: cfg.Dim, Rotated: cfg.Rotated, Base: cfg.Base}
		rs, err := r.resolve("Rotary.Tables")
		ensure.NoError(t, err)
		for _, limit := range []int64{1_000_000, math.MaxInt32} {
			var got = map[string][]float64{}
			var want []float64
			for k, m := range p64 {
				if m > limit {
					continue
				}
				want = append(want, wantSin[k*h:(k+1)*h]...)
				for i := range h {
					th := math.Pow(cfg.Base, -float64(2*i)/float64(cfg.Rotated))
					s, _ := math.Sincos(float64(m) * th)
					got["float64"] = append(got["float64"], s)
					s, _ = sincosDD(angle(int(m), ddFrom(th)))
					got["fma"] = append(got["fma"], s)
					s, _ = sincosDD(angle(int(m), rs.theta[i]))
					got["dd"] = append(got["dd"], s)
				}
			}
			for _, way := range []string{"float64", "fma", "dd"} {
				e := golden.NormwiseRelErr(got[way], want)
				t.Logf("%s: positions ≤ %d: %-8s normwise relative error %.3g", c.Name, limit, way, e)
				switch way {
				case "dd":
					expect.LessOrEqual(t, e, tableBound)
				case "float64":
					expect.Greater(t, e, tableBound, "the bound must reject float64 angles")
				}
			}
		}
	}
}
