package stack_test

import (
	"testing"

	"github.com/plumbref/plumb/stack"
)

// ParseManifest never panics; it accepts a manifest or returns an error
// wrapping a sentinel, and an accepted manifest has a valid Config.
func FuzzParseManifest(f *testing.F) {
	text, _ := demoFiles()
	f.Add(text)
	f.Add([]byte(`{"format": "plumb-stack/1"}`))
	f.Add([]byte(`{}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := stack.ParseManifest(b)
		if err != nil {
			if m != nil {
				t.Fatalf("a manifest and an error: %v", err)
			}
			_, one := err.(interface{ Unwrap() error })
			_, many := err.(interface{ Unwrap() []error })
			if !one && !many {
				t.Fatalf("an error wrapping nothing: %v", err)
			}
			return
		}
		if _, err := m.Config(); err != nil {
			t.Fatalf("accepted, but Config fails: %v", err)
		}
	})
}
