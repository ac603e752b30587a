package main

import (
	"strings"
	"testing"
)

// FuzzArguments: the parsers of -shape, NAME=FILE arguments and tensor
// file names (FILE:NAME, FILE:TYPE:DIMS) never panic, and what they accept
// is consistent.
func FuzzArguments(f *testing.F) {
	f.Add("1,8,128,64", "q=q.npy k=k.npy")
	f.Add("0", "=x")
	f.Add("3,,2", "a==b")
	f.Add("1,8,128,64", "x.bin:bf16")
	f.Add("4", "in.npz:q")
	f.Fuzz(func(t *testing.T, shape, named string) {
		if s, err := parseShape(shape); err == nil {
			n := 1
			for _, d := range s {
				if d < 0 {
					t.Fatalf("negative dimension in %v", s)
				}
				n *= d
			}
			if n > 1<<28 {
				t.Fatalf("shape %v holds %d elements", s, n)
			}
		}
		// A tensor file's name parses or is refused, never panics; raw
		// binary has a type and a shape within the bound.
		for _, text := range []string{shape, named, named + ":" + shape, named + ":float32:" + shape} {
			if sp, err := parseSpec(text); err == nil && sp.raw != nil {
				n := 1
				for _, d := range sp.shape {
					n *= d
				}
				if n > 1<<28 || len(sp.shape) == 0 {
					t.Fatalf("raw shape %v from %q", sp.shape, text)
				}
			}
		}
		args := strings.Fields(named)
		if m, err := (&env{}).namedFiles(args, "input", false); err == nil {
			if len(m) != len(args) {
				t.Fatalf("%d arguments, %d names", len(args), len(m))
			}
			for k, v := range m {
				if k == "" || v == "" {
					t.Fatalf("empty name or file in %q", named)
				}
			}
		}
	})
}
