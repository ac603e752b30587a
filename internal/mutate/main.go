// Command mutate checks that the tests can fail where they should: it
// applies each mutation of a list (one small bug in the code, a text
// replacement that must match exactly once) and runs the tests named for
// it, which must then fail. A mutation they survive is a gap in the tests.
//
//	go run ./internal/mutate                       # every mutation of testdata/mutants.json
//	go run ./internal/mutate -ci                   # those marked for CI
//	go run ./internal/mutate -run 'ops:.*align'    # those whose name matches
//
// The code on disk is never changed: each mutated file is handed to the
// go command as a build overlay (go help build, -overlay), through
// GOFLAGS so that a test that builds a binary of its own builds the
// mutated one too. It prints one line per mutation and, per package, how
// many mutations the tests killed, and exits 1 when any mutation survived,
// did not apply, or did not compile.
package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"maps"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"time"
)

// Mutant is one entry of the list.
type Mutant struct {
	// Name is "package:what", unique: "ops:align-start-reads-as-end".
	Name string `json:"name"`
	// File is the file to mutate, from the repository root.
	File string `json:"file"`
	// Old must occur exactly once in File; it is replaced by New.
	Old string `json:"old"`
	New string `json:"new"`
	// Test lists the packages whose tests must fail ("./ops").
	Test []string `json:"test"`
	// Run, when set, is the go test -run pattern that selects the tests.
	Run string `json:"run,omitempty"`
	// CI marks the mutations CI runs (a subset, to keep CI short).
	CI bool `json:"ci,omitempty"`
	// Why says what the mutation breaks, for the reader of a survival.
	Why string `json:"why"`
}

// outcome of one mutation.
type outcome int

const (
	killed outcome = iota
	survived
	notApplied
	notCompiled
)

func (o outcome) String() string {
	return [...]string{"killed", "SURVIVED", "DOES NOT APPLY", "DOES NOT COMPILE"}[o]
}

func main() {
	list := flag.String("list", "testdata/mutants.json", "the list of mutations, from the repository root")
	ci := flag.Bool("ci", false, "run only the mutations marked \"ci\"")
	run := flag.String("run", "", "run only the mutations whose name matches this regular expression")
	flag.Parse()
	if err := mainErr(*list, *ci, *run); err != nil {
		fmt.Fprintln(os.Stderr, "mutate:", err)
		os.Exit(1)
	}
}

func mainErr(list string, ci bool, run string) error {
	ms, err := load(list)
	if err != nil {
		return err
	}
	re, err := regexp.Compile(run)
	if err != nil {
		return fmt.Errorf("-run: %v", err)
	}
	tmp, err := os.MkdirTemp("", "mutate")
	if err != nil {
		return err
	}
	defer os.RemoveAll(tmp)
	type tally struct{ killed, total int }
	per := map[string]*tally{}
	bad := 0
	for _, m := range ms {
		if (ci && !m.CI) || !re.MatchString(m.Name) {
			continue
		}
		start := time.Now()
		o, detail := apply(m, tmp)
		pkg, _, _ := strings.Cut(m.Name, ":")
		if per[pkg] == nil {
			per[pkg] = &tally{}
		}
		per[pkg].total++
		if o == killed {
			per[pkg].killed++
		} else {
			bad++
		}
		fmt.Printf("%-8s %-48s %5.1fs\n", o, m.Name, time.Since(start).Seconds())
		if o != killed {
			fmt.Printf("         %s: %s\n", m.File, m.Why)
			if detail != "" {
				fmt.Printf("         %s\n", strings.ReplaceAll(strings.TrimSpace(detail), "\n", "\n         "))
			}
		}
	}
	if len(per) == 0 {
		return errors.New("no mutation selected")
	}
	pkgs := slices.Sorted(maps.Keys(per))
	for _, p := range pkgs {
		t := per[p]
		fmt.Printf("%-12s %d of %d killed (%.0f%%)\n", p, t.killed, t.total, 100*float64(t.killed)/float64(t.total))
	}
	if bad > 0 {
		return fmt.Errorf("%d mutation(s) not killed; every listed mutation is a bug the tests must catch", bad)
	}
	return nil
}

// load reads and checks the list: unique names of the form package/what,
// and every field a mutation needs.
func load(path string) ([]Mutant, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var ms []Mutant
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&ms); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	seen := map[string]bool{}
	for i, m := range ms {
		switch {
		case !strings.Contains(m.Name, ":"):
			return nil, fmt.Errorf("%s: mutation %d: name = %q; want package:what", path, i, m.Name)
		case seen[m.Name]:
			return nil, fmt.Errorf("%s: mutation %q listed twice", path, m.Name)
		case m.File == "" || m.Old == "" || len(m.Test) == 0 || m.Why == "":
			return nil, fmt.Errorf("%s: mutation %q needs file, old, test and why", path, m.Name)
		case m.Old == m.New:
			return nil, fmt.Errorf("%s: mutation %q changes nothing", path, m.Name)
		}
		seen[m.Name] = true
	}
	return ms, nil
}

// apply runs m's tests against the mutated file.
func apply(m Mutant, tmp string) (outcome, string) {
	src, err := os.ReadFile(m.File)
	if err != nil {
		return notApplied, err.Error()
	}
	if n := countOf(string(src), m.Old); n != 1 {
		return notApplied, fmt.Sprintf("the old text occurs %d times; want exactly once", n)
	}
	abs, err := filepath.Abs(m.File)
	if err != nil {
		return notApplied, err.Error()
	}
	mutated := filepath.Join(tmp, "mutated.go")
	if err := os.WriteFile(mutated, bytes.Replace(src, []byte(m.Old), []byte(m.New), 1), 0o644); err != nil {
		return notApplied, err.Error()
	}
	overlay, _ := json.Marshal(map[string]map[string]string{"Replace": {abs: mutated}})
	ov := filepath.Join(tmp, "overlay.json")
	if err := os.WriteFile(ov, overlay, 0o644); err != nil {
		return notApplied, err.Error()
	}
	args := []string{"test", "-count=1"}
	if m.Run != "" {
		args = append(args, "-run", m.Run)
	}
	cmd := exec.Command("go", append(args, m.Test...)...)
	cmd.Env = append(os.Environ(), "GOFLAGS="+strings.TrimSpace(os.Getenv("GOFLAGS")+" -overlay="+ov))
	out, err := cmd.CombinedOutput()
	switch {
	case err == nil:
		return survived, ""
	case bytes.Contains(out, []byte("[build failed]")) || bytes.Contains(out, []byte("[setup failed]")):
		return notCompiled, lastLines(string(out), 6)
	}
	return killed, ""
}

// countOf is the number of non-overlapping occurrences of old in s.
func countOf(s, old string) int { return strings.Count(s, old) }

func lastLines(s string, n int) string {
	l := strings.Split(strings.TrimSpace(s), "\n")
	if len(l) > n {
		l = l[len(l)-n:]
	}
	return strings.Join(l, "\n")
}
