package main

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

func write(t *testing.T, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "list.json")
	ensure.NoError(t, os.WriteFile(p, []byte(text), 0o644))
	return p
}

func TestLoad(t *testing.T) {
	ms, err := load(write(t, `[{"name": "x:a", "file": "f.go", "old": "a", "new": "b", "test": ["./x"], "why": "w", "ci": true}]`))
	ensure.NoError(t, err)
	expect.Equal(t, []Mutant{{Name: "x:a", File: "f.go", Old: "a", New: "b", Test: []string{"./x"}, Why: "w", CI: true}}, ms)
	for list, msg := range map[string]string{
		`[{"name": "a", "file": "f", "old": "a", "new": "b", "test": ["./x"], "why": "w"}]`:                                                                                      `name = "a"; want package:what`,
		`[{"name": "x:a", "file": "f", "old": "a", "new": "b", "test": ["./x"], "why": "w"}, {"name": "x:a", "file": "f", "old": "c", "new": "d", "test": ["./x"], "why": "w"}]`: `"x:a" listed twice`,
		`[{"name": "x:a", "file": "f", "old": "a", "new": "b", "why": "w"}]`:                                                                                                     "needs file, old, test and why",
		`[{"name": "x:a", "file": "f", "old": "a", "new": "a", "test": ["./x"], "why": "w"}]`:                                                                                    "changes nothing",
		`[{"name": "x:a", "fiel": "f"}]`: `unknown field "fiel"`,
	} {
		_, err := load(write(t, list))
		expect.ErrorContains(t, err, msg, list)
	}
}

// A mutation whose old text does not occur exactly once does not apply,
// and nothing runs.
func TestApplyNeedsOneMatch(t *testing.T) {
	dir := t.TempDir()
	f := filepath.Join(dir, "f.go")
	ensure.NoError(t, os.WriteFile(f, []byte("package f\nvar a, b = 1, 1\n"), 0o644))
	for old, want := range map[string]string{"1": "occurs 2 times", "2": "occurs 0 times"} {
		o, detail := apply(Mutant{Name: "f:x", File: f, Old: old, New: "3", Test: []string{"./none"}, Why: "w"}, dir)
		expect.Equal(t, notApplied, o)
		expect.Contains(t, detail, want)
	}
}

// The repository's own list loads, and every mutation applies to exactly
// one place of its file.
func TestRepositoryList(t *testing.T) {
	root := filepath.Join("..", "..")
	ms, err := load(filepath.Join(root, "testdata", "mutants.json"))
	ensure.NoError(t, err)
	ensure.NotEmpty(t, ms)
	for _, m := range ms {
		b, err := os.ReadFile(filepath.Join(root, m.File))
		ensure.NoError(t, err, m.Name)
		expect.Equal(t, 1, countOf(string(b), m.Old), "%s: the old text must occur exactly once in %s", m.Name, m.File)
	}
}
