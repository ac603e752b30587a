package mask

import (
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// goldenConfig is the config of a case of testdata/golden/mask/kinds.json
// (see testdata/gen/fam_mask.py): the mask as a list of Specs, intersected,
// and its geometry. Conventions are typed, so json decodes their words and
// refuses any other.
type goldenConfig struct {
	Mask   []Spec   `json:"mask"`
	Batch  int      `json:"batch"`
	Lq     int      `json:"lq"`
	Lk     int      `json:"lk"`
	Align  Align    `json:"align"`
	Offset int      `json:"offset"`
	Fill   *float64 `json:"fill"`
}

func (c goldenConfig) geometry() Geometry {
	return Geometry{Batch: c.Batch, Lq: c.Lq, Lk: c.Lk, Align: c.Align, Offset: c.Offset}
}

// goldenCases is the number of cases in kinds.json, so that a case the
// generator stops writing is noticed.
const goldenCases = 37

// goldenConventions are the conventions the mask family's configs hold;
// every word of each must appear in some case.
var goldenConventions = []string{"mask.Align", "mask.Kind", "mask.Block"}

// inEffect is the part of a config whose words change the mask, for
// golden.Words: the alignment only where Lq ≠ Lk and the mask uses
// positions, the block only of packed entries.
type inEffect struct {
	Align  *Align
	Kinds  []Kind
	Blocks []Block
}

func effectOf(m Mask, cfg goldenConfig) inEffect {
	var e inEffect
	if cfg.Lq != cfg.Lk && m.UsesPositions() {
		e.Align = &cfg.Align
	}
	for _, s := range cfg.Mask {
		e.Kinds = append(e.Kinds, s.Kind)
		if s.Kind == KindPacked {
			e.Blocks = append(e.Blocks, s.Block)
		}
	}
	return e
}

// TestGolden checks every mask against testdata/golden/mask/kinds.json,
// made by testdata/gen/fam_mask.py from the definitions (sources in each
// case). Masks are exact: booleans and biases must match bit for bit. It
// also requires every word of the conventions the configs use to appear in
// a case where it changes the mask (golden.Words).
func TestGolden(t *testing.T) {
	f := golden.MustLoadFamily(t, "mask", "kinds")
	ensure.Len(t, f.Cases, goldenCases)
	var noted, effective golden.Words
	for _, c := range f.Cases {
		var cfg goldenConfig
		ensure.NoError(t, c.DecodeConfig(&cfg))
		noted.Note(cfg)
		t.Run(c.Name, func(t *testing.T) {
			m, err := Build(cfg.Mask)
			ensure.NoError(t, err)
			effective.Note(effectOf(m, cfg))
			g := cfg.geometry()

			wantVis, shape, err := c.Bools("visible")
			ensure.NoError(t, err)
			ensure.Equal(t, []int{g.Batch, g.Lq, g.Lk}, shape)
			vis, err := m.Visible(g)
			ensure.NoError(t, err)
			if d := cmp.Diff(wantVis, vis); d != "" {
				t.Fatalf("%s on %v: visible differs (-want +got):\n%s", m, g, d)
			}

			wantBias, _, err := c.Float("bias")
			ensure.NoError(t, err)
			var bias []float64
			if cfg.Fill != nil {
				bias, err = m.BiasFill(g, *cfg.Fill)
			} else {
				bias, err = m.Bias(g)
			}
			ensure.NoError(t, err)
			if d := cmp.Diff(wantBias, bias); d != "" {
				t.Fatalf("%s on %v: bias differs (-want +got):\n%s", m, g, d)
			}

			wantEmpty, _, err := c.Ints("empty_rows")
			ensure.NoError(t, err)
			rows, err := m.EmptyRows(g)
			ensure.NoError(t, err)
			got := []int64{}
			for _, r := range rows {
				got = append(got, int64(r.Batch), int64(r.Query))
			}
			if d := cmp.Diff(wantEmpty, got); d != "" {
				t.Fatalf("%s on %v: empty rows differ (-want +got):\n%s", m, g, d)
			}

			for k, want := range wantVis {
				b, i, j := k/(g.Lq*g.Lk), k/g.Lk%g.Lq, k%g.Lk
				s, err := m.Sees(g, b, i, j)
				ensure.NoError(t, err)
				ensure.Equal(t, want, s, "Sees(%d, %d, %d)", b, i, j)
			}
		})
	}
	noted.Require(t, goldenConventions...)
	effective.Require(t, goldenConventions...)
}

// TestGoldenConfigStrict guards the test's own decoding: a config with an
// unknown key, or a word that is not one of the convention's, is refused.
func TestGoldenConfigStrict(t *testing.T) {
	f := golden.MustLoadFamily(t, "mask", "kinds")
	c := *f.Cases[0]
	for _, bad := range []string{
		`{"mask":[{"kind":"full"}],"batch":1,"lq":1,"lk":1,"lanes":3}`,
		`{"mask":[{"kind":"full"}],"batch":1,"lq":1,"lk":1,"align":"AlignEnd"}`,
		`{"mask":[{"kind":"padding","valid":[1]}],"batch":1,"lq":1,"lk":1}`,
		`{"mask":{"kind":"full"},"batch":1,"lq":1,"lk":1}`,
	} {
		c.Config = []byte(bad)
		var cfg goldenConfig
		ensure.Error(t, c.DecodeConfig(&cfg), bad)
	}
}
