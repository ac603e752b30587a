package ops

import (
	"errors"
	"maps"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// TestYardstickOfEqualsYardstick checks that handing YardstickOf the
// reference already computed gives the yardstick Yardstick measures, to
// the bit, for every operation's test case, and that a reference missing
// an output is refused.
func TestYardstickOfEqualsYardstick(t *testing.T) {
	for _, c := range cases() {
		t.Run(c.name, func(t *testing.T) {
			in := c.inputs(rand.New(rand.NewPCG(1, 2)))
			ref, err := Run(c.op, []byte(c.config), in)
			ensure.NoError(t, err)
			want, err := Yardstick(c.op, []byte(c.config), in, compare.Float32, compare.DefaultK)
			ensure.NoError(t, err)
			got, err := YardstickOf(c.op, []byte(c.config), in, ref, compare.Float32, compare.DefaultK)
			ensure.NoError(t, err)
			ensure.Equal(t, slices.Sorted(maps.Keys(want)), slices.Sorted(maps.Keys(got)))
			for n, w := range want {
				ensure.Equal(t, w.Tolerance, got[n].Tolerance, n)
				ensure.Equal(t, w.Report.Normwise, got[n].Report.Normwise, n)
			}
			first := slices.Sorted(maps.Keys(ref))[0]
			partial := maps.Clone(ref)
			delete(partial, first)
			_, err = YardstickOf(c.op, []byte(c.config), in, partial, compare.Float32, compare.DefaultK)
			if o, _ := Lookup(c.op); isOptional(o, first) {
				return
			}
			ensure.True(t, errors.Is(err, ErrInput), "a reference without %q: %v", first, err)
		})
	}
}

func isOptional(o Op, output string) bool {
	for _, p := range o.Outputs() {
		if p.Name == output {
			return p.Optional
		}
	}
	return false
}
