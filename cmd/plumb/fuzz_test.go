package main

import (
	"strings"
	"testing"
)

// FuzzArguments: the parsers of -shape and NAME=FILE arguments never panic,
// and what they accept is consistent.
func FuzzArguments(f *testing.F) {
	f.Add("1,8,128,64", "q=q.npy k=k.npy")
	f.Add("0", "=x")
	f.Add("3,,2", "a==b")
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
		args := strings.Fields(named)
		if m, err := namedFiles(args, "input"); err == nil {
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
