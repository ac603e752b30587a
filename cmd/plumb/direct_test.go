package main

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
)

// plumb run -direct runs the direct forms and writes the same bytes as the
// fast forms, the default: for attention forward and backward on more than
// one block of 64 query rows, and through check, whose yardstick and
// verdict are the same.
func TestDirectFlag(t *testing.T) {
	dir := t.TempDir()
	must(t, dir, 0, "gen", "-shape", "1,4,70,8", "-seed", "1", "q.npy")
	must(t, dir, 0, "gen", "-shape", "1,2,70,8", "-seed", "2", "k.npy")
	must(t, dir, 0, "gen", "-shape", "1,2,70,8", "-seed", "3", "v.npy")
	must(t, dir, 0, "gen", "-shape", "1,4,70,8", "-seed", "4", "dout.npy")
	if err := os.WriteFile(filepath.Join(dir, "c.json"), []byte(causal), 0o644); err != nil {
		t.Fatal(err)
	}
	in := []string{"-config", "c.json", "q=q.npy", "k=k.npy", "v=v.npy"}
	for _, form := range []string{"fast", "direct"} {
		run := func(out, op string, inputs ...string) {
			args := []string{"run", "-quiet", "-out", out}
			if form == "direct" {
				args = append(args, "-direct")
			}
			must(t, dir, 0, append(append(args, op), inputs...)...)
		}
		run(form, "attention-forward", in...)
		run(form+"/grad", "attention-backward", append(in, "dout=dout.npy")...)
	}
	for _, f := range []string{"out.npy", "lse.npy", "grad/dq.npy", "grad/dk.npy", "grad/dv.npy"} {
		expect.Equal(t, readFile(t, filepath.Join(dir, "fast", f)), readFile(t, filepath.Join(dir, "direct", f)), "%s: the fast and direct forms' bytes", f)
	}
	// check: the float32 run of each form, the same verdict and report.
	must(t, dir, 0, "gen", "-shape", "1,4,70,8", "-dtype", "float32", "-seed", "9", "port.npy")
	check := append(append([]string{"attention-forward"}, in...), "-no-diagnosis", "-got", "out=port.npy")
	fast, _ := must(t, dir, 1, append([]string{"check"}, check...)...)
	direct, _ := must(t, dir, 1, append([]string{"check", "-direct"}, check...)...)
	expect.Equal(t, fast, direct)
}
