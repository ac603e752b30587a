package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

const windowed = `{"version": 1, "mask": [{"kind": "window", "size": 16}]}`

// rowsFixture writes q [1, 2, 64, 8], k, v [1, 1, 64, 8] (plumb gen) and
// a sliding-window configuration, and returns the directory, the inputs
// and the float32 run, a float32 port.
func rowsFixture(t *testing.T) (string, ops.Tensors, ops.Tensors) {
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "1,2,64,8", "-seed", "1", "q.npy")
	must(t, dir, 0, "gen", "-shape", "1,1,64,8", "-seed", "2", "k.npy")
	must(t, dir, 0, "gen", "-shape", "1,1,64,8", "-seed", "3", "v.npy")
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "c.json"), []byte(windowed), 0o644))
	in := fixtureInputs(t, dir)
	low, err := ops.Run32("attention-forward", []byte(windowed), in)
	ensure.NoError(t, err)
	return dir, in, low
}

func writeF32(t *testing.T, path string, x ops.Tensor) {
	y := make([]float32, len(x.Data))
	for i, v := range x.Data {
		y[i] = float32(v)
	}
	writeNPY(t, path, npy.Float32, x.Shape, y)
}

// TestCheckRowsSameAsFull: check on a row sample judges those rows as a
// full check would: the errors it reports are those of the rows, its
// yardstick is ops.YardstickRows on the same rows, and a port that
// passes whole passes on the sample.
func TestCheckRowsSameAsFull(t *testing.T) {
	dir, in, low := rowsFixture(t)
	writeF32(t, filepath.Join(dir, "port.npy"), low["out"])
	args := []string{"check", "-json", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port.npy"}
	o, _ := must(t, dir, 0, args...)
	var full checkJSON
	ensure.NoError(t, json.Unmarshal([]byte(o), &full))
	list := []int{0, 5, 14, 15, 40, 63}
	o, _ = must(t, dir, 0, append(args, "-rows-list", "63,5,14,15,40,0")...)
	var got checkRowsJSON
	ensure.NoError(t, json.Unmarshal([]byte(o), &got))
	expect.Equal(t, list, got.Rows.Index)
	expect.Equal(t, 64, got.Rows.Total)
	expect.Equal(t, 6, got.Rows.Judged)
	expect.False(t, got.Rows.Drawn)

	// the expected errors: the full reference and port on those rows
	ref, err := ops.Run("attention-forward", []byte(windowed), in)
	ensure.NoError(t, err)
	s, err := ops.RowsOf("-rows-list", 64, list)
	ensure.NoError(t, err)
	refRows := ops.GatherAxis(ref["out"], 2, list)
	lowRows := ops.GatherAxis(ops.Tensor{Shape: low["out"].Shape, Data: compare.Widen(compare.Narrow(low["out"].Data))}, 2, list)
	ys, err := ops.YardstickRows("attention-forward", []byte(windowed), in, ops.Tensors{"out": refRows}, s, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	want, err := compare.Diff(refRows.Data, lowRows.Data, refRows.Shape, ys["out"].Options())
	ensure.NoError(t, err)
	r := got.Outputs[0].Report
	expect.Equal(t, want.MaxAbs, r.MaxAbs)
	expect.Equal(t, want.Normwise, r.Normwise)
	expect.Equal(t, *want.Tolerance, *r.Tolerance)
	expect.Equal(t, full.Outputs[0].Report.Verdict.Pass, r.Verdict.Pass)
	// and no row's error exceeds the full check's worst
	expect.True(t, r.MaxAbs <= full.Outputs[0].Report.MaxAbs)
}

// TestCheckRowsCatchesConfinedSlips: a slip confined to the last rows, or
// to the window's edge row, fails a sample of edge rows alone (-rows 0),
// and the text report states the sample and the miss probabilities.
func TestCheckRowsCatchesConfinedSlips(t *testing.T) {
	dir, _, low := rowsFixture(t)
	slip := func(name string, rows ...int) {
		bad := ops.Tensor{Shape: low["out"].Shape, Data: slices.Clone(low["out"].Data)}
		for h := 0; h < 2; h++ {
			for _, r := range rows {
				for d := 0; d < 8; d++ {
					bad.Data[(h*64+r)*8+d] *= 1.01
				}
			}
		}
		writeF32(t, filepath.Join(dir, name), bad)
	}
	slip("last.npy", 62, 63)   // the last rows
	slip("edge.npy", 15)       // the first row whose window is full (position size − 1)
	slip("middle.npy", 30, 31) // rows no edge covers
	base := []string{"check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy"}
	for _, f := range []string{"last.npy", "edge.npy"} {
		o, _ := must(t, dir, 1, append(base, "-got", "out="+f, "-rows", "0")...)
		expect.Contains(t, o, "verdict: FAIL")
	}
	o, _ := must(t, dir, 0, append(base, "-got", "out=middle.npy", "-rows", "0")...)
	expect.Contains(t, o, "rows judged: ")
	must(t, dir, 1, append(base, "-got", "out=middle.npy", "-rows-list", "31")...)
	o, _ = must(t, dir, 0, append(base, "-got", "out=middle.npy", "-rows", "3", "-rows-seed", "1")...)
	expect.Contains(t, o, "drawn with seed 1")
	expect.Contains(t, o, "f = 1%:")
	expect.Contains(t, o, "C(R' - ceil(f*R), n) / C(R', n)")
}

// TestRunRows: run -rows writes the sampled rows of the reference, the
// same bits as those rows of the full run, for attention and a norm.
func TestRunRows(t *testing.T) {
	dir, in, _ := rowsFixture(t)
	_, e := must(t, dir, 0, "run", "attention-forward", "-config", "c.json", "-rows-list", "2,9", "q=q.npy", "k=k.npy", "v=v.npy", "-out", "out=rows.npy")
	expect.Contains(t, e, "rows: 2 of 64")
	ref, err := ops.Run("attention-forward", []byte(windowed), in)
	ensure.NoError(t, err)
	expect.Equal(t, ops.GatherAxis(ref["out"], 2, []int{2, 9}).Data, readNPY(t, filepath.Join(dir, "rows.npy")).Data)

	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "n.json"), []byte(`{"version": 1, "epsilon": 1e-6}`), 0o644))
	must(t, dir, 0, "run", "rmsnorm-forward", "-config", "n.json", "x=q.npy", "-out", "y=y.npy")
	must(t, dir, 0, "check", "rmsnorm-forward", "-config", "n.json", "x=q.npy", "-got", "y=y.npy", "-rows", "5")
}

// TestRowsFlagErrors: a bad sample is a usage error naming the flag and
// its value.
func TestRowsFlagErrors(t *testing.T) {
	dir, _, low := rowsFixture(t)
	writeF32(t, filepath.Join(dir, "port.npy"), low["out"])
	base := []string{"check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port.npy"}
	for _, c := range []struct{ flag, value, want string }{
		{"-rows-list", "3,3", `-rows-list = "3,3" holds row 3 twice`},
		{"-rows-list", "64", `-rows-list = "64" holds row 64; want rows in [0, 64)`},
		{"-rows-list", "1,x", `-rows-list = "1,x": "x" is not a row`},
		{"-rows", "-1", `-rows = "-1"; want a count ≥ 0`},
	} {
		_, e := must(t, dir, 2, append(base, c.flag, c.value)...)
		expect.Contains(t, e, c.want)
	}
	// a file -rows cannot read by rows is refused, named
	a, err := npy.New(npy.Float32, []int{1, 2, 64, 8}, make([]float32, 1024))
	ensure.NoError(t, err)
	a.FortranOrder = true
	ensure.NoError(t, npy.WriteFile(filepath.Join(dir, "f.npy"), a))
	_, e := must(t, dir, 2, "check", "attention-forward", "-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=f.npy", "-rows", "2")
	expect.Contains(t, e, "f.npy holds float32, fortran order true")
	expect.True(t, !strings.Contains(e, "panic"))
}
