package mask

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/internal/golden"
)

// spec is the mask description used in testdata/golden/mask/*.json (see
// testdata/gen/fam_mask.py). A null band extent means unbounded.
type spec struct {
	Kind    string  `json:"kind"`
	Before  *int    `json:"before"`
	After   *int    `json:"after"`
	N       int     `json:"n"`
	P       int     `json:"p"`
	Valid   []int   `json:"valid"`
	Offsets []int   `json:"offsets"`
	Block   string  `json:"block"`
	Parts   []*spec `json:"parts"`
}

type goldenConfig struct {
	Mask   *spec    `json:"mask"`
	Batch  int      `json:"batch"`
	Lq     int      `json:"lq"`
	Lk     int      `json:"lk"`
	Align  string   `json:"align"`
	Offset int      `json:"offset"`
	Fill   *float64 `json:"fill"`
}

func extentOf(p *int) int {
	if p == nil {
		return Unbounded
	}
	return *p
}

func (s *spec) build() (Mask, error) {
	switch s.Kind {
	case "full":
		return Full(), nil
	case "causal":
		return Causal(), nil
	case "band":
		return Band(extentOf(s.Before), extentOf(s.After))
	case "window":
		return Window(s.N)
	case "prefix":
		return Prefix(s.P)
	case "padding":
		return KeyPadding(s.Valid)
	case "packed":
		b := BlockCausal
		if s.Block == "full" {
			b = BlockFull
		}
		return Packed(s.Offsets, b)
	case "intersect":
		var ms []Mask
		for _, p := range s.Parts {
			m, err := p.build()
			if err != nil {
				return Mask{}, err
			}
			ms = append(ms, m)
		}
		return Intersect(ms...)
	}
	return Mask{}, fmt.Errorf("unknown kind %q", s.Kind)
}

func (c goldenConfig) geometry() Geometry {
	a := AlignEnd
	if c.Align == "start" {
		a = AlignStart
	}
	return Geometry{Batch: c.Batch, Lq: c.Lq, Lk: c.Lk, Align: a, Offset: c.Offset}
}

// TestGolden checks every mask against testdata/golden/mask/kinds.json,
// made by testdata/gen/fam_mask.py from the definitions (sources in each
// case). Masks are exact: booleans and biases must match bit for bit.
func TestGolden(t *testing.T) {
	f := golden.MustLoadFamily(t, "mask", "kinds")
	require.GreaterOrEqual(t, len(f.Cases), 30)
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg goldenConfig
			require.NoError(t, c.DecodeConfig(&cfg))
			m, err := cfg.Mask.build()
			require.NoError(t, err)
			g := cfg.geometry()

			wantVis, shape, err := c.Bools("visible")
			require.NoError(t, err)
			require.Equal(t, []int{g.Batch, g.Lq, g.Lk}, shape)
			vis, err := m.Visible(g)
			require.NoError(t, err)
			if d := cmp.Diff(wantVis, vis); d != "" {
				t.Fatalf("%s on %v: visible differs (-want +got):\n%s", m, g, d)
			}

			wantBias, _, err := c.Float("bias")
			require.NoError(t, err)
			var bias []float64
			if cfg.Fill != nil {
				bias, err = m.BiasFill(g, *cfg.Fill)
			} else {
				bias, err = m.Bias(g)
			}
			require.NoError(t, err)
			if d := cmp.Diff(wantBias, bias); d != "" {
				t.Fatalf("%s on %v: bias differs (-want +got):\n%s", m, g, d)
			}

			wantEmpty, _, err := c.Ints("empty_rows")
			require.NoError(t, err)
			rows, err := m.EmptyRows(g)
			require.NoError(t, err)
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
				require.NoError(t, err)
				require.Equal(t, want, s, "Sees(%d, %d, %d)", b, i, j)
			}
		})
	}
}

// TestGoldenSpecRoundTrip guards the test's own decoding: a band with a null
// extent is unbounded, and a config with an unknown key is refused.
func TestGoldenSpecRoundTrip(t *testing.T) {
	var s spec
	require.NoError(t, json.Unmarshal([]byte(`{"kind":"band","before":null,"after":2}`), &s))
	m, err := s.build()
	require.NoError(t, err)
	require.Equal(t, "Band(Unbounded, 2)", m.String())
	var c goldenConfig
	d := json.NewDecoder(strings.NewReader(`{"mask":{"kind":"full"},"lanes":3}`))
	d.DisallowUnknownFields()
	require.Error(t, d.Decode(&c))
}
