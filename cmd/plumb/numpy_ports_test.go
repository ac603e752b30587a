package main

import (
	"encoding/json"
	"fmt"
	"maps"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
)

// numpyPortsScript writes NumPy ports of plumb's operations, most with one
// slip written into the published formula, and their manifest.
const numpyPortsScript = "../../testdata/numpy_ports/ports.py"

// namedFirstFloor is the least share of slipped ports whose expected change
// the diagnosis must name first. Measured when the test was written (the
// ports of numpyPortsScript as they stand, 31 slipped ports): 29 of 31
// (0.935) named first, 29 of 31 in the top three. The two misses:
// alibi-slopes-for-16-heads (the operation has no alternative to search, so
// the diagnosis names nothing) and softmax-wrong-axis (found, but named "x
// reduced over its second-to-last axis", not the transposes the script
// expected). At 0.85 of 31 ports, 27 must be named first: one or two new
// misses are only reported in the log; three or more fail the test.
const namedFirstFloor = 0.85

// numpyPort is one entry of the manifest numpyPortsScript writes.
type numpyPort struct {
	Port       string            `json:"port"`
	Family     string            `json:"family"`
	Operation  string            `json:"operation"`
	ConfigFile string            `json:"config_file"`
	Inputs     map[string]string `json:"inputs"`
	Outputs    map[string]string `json:"outputs"`
	Correct    bool              `json:"correct"`
	Slip       string            `json:"slip"`
	Expected   []string          `json:"expected"`
}

// checkDiagnosis is the part of plumb check -json's "diagnosis" this test
// reads: the ranked changes, each with whether the port passes under it.
type checkDiagnosis struct {
	Candidates []diagnosisCandidate `json:"candidates"`
}

// diagnosisCandidate is one ranked change: its text, its parts, and whether
// the port passes its yardstick under it.
type diagnosisCandidate struct {
	Change  string   `json:"change"`
	Changes []string `json:"changes"`
	Passes  bool     `json:"passes"`
}

// portOutcome is what plumb check said of one port.
type portOutcome struct {
	port       numpyPort
	code       int
	diagnosed  bool
	namedFirst bool
	inTop3     bool
	said       []string // the first three changes named, with PASS or FAIL
}

// normalChange puts one change of the diagnosis, or one expected change, in
// a form two spellings of the same change share: a trailing annotation in
// parentheses ("(1/d)", "(gate and value projections)") is dropped, and a
// change "key": value becomes key=value with the value decoded as JSON, so
// that 1e-6 and 0.000001 compare equal.
func normalChange(s string) any {
	s = strings.TrimSpace(s)
	if strings.HasSuffix(s, ")") {
		if i := strings.LastIndex(s, " ("); i > 0 {
			s = s[:i]
		}
	}
	if strings.HasPrefix(s, `"`) {
		if i := strings.Index(s, `": `); i > 0 {
			var v any
			if json.Unmarshal([]byte(s[i+3:]), &v) == nil {
				return [2]any{s[1:i], v}
			}
		}
	}
	return s
}

// sameChanges reports whether the diagnosis's changes are the expected ones,
// in any order.
func sameChanges(got, want []string) bool {
	if len(got) != len(want) {
		return false
	}
	used := make([]bool, len(got))
	for _, w := range want {
		nw, found := normalChange(w), false
		for i, g := range got {
			if !used[i] && reflect.DeepEqual(normalChange(g), nw) {
				used[i], found = true, true
				break
			}
		}
		if !found {
			return false
		}
	}
	return true
}

// TestNumPyPortsDiagnosis measures the diagnosis of plumb check from the
// outside, on ports it has never seen: testdata/numpy_ports/ports.py writes
// NumPy ports of the operations (attention, rotary, ALiBi, LayerNorm,
// RMSNorm, activations, FFN, softmax), each from its published formula, most
// with one slip, and for each the change it expects the diagnosis to name,
// written down before the ports were first checked. The test runs plumb
// check -json on every port and requires that every correct port passes with
// no diagnosis, that every slipped port fails, and that the share of slipped
// ports whose expected change is ranked first is at least namedFirstFloor.
// It logs the named-first and top-three rates, overall and per family, and
// what the diagnosis said where it missed.
//
// A port whose slip no configuration key describes (expected []) counts as
// named when the diagnosis names no change under which it passes: claiming a
// passing change there would be a wrong answer.
func TestNumPyPortsDiagnosis(t *testing.T) {
	py := "/usr/bin/python3"
	if out, err := exec.Command(py, "-c", "import numpy").CombinedOutput(); err != nil {
		t.Skipf("NumPy ports skipped: %s cannot import numpy (install python3-numpy to run them): %v: %s", py, err, strings.TrimSpace(string(out)))
	}
	script, err := filepath.Abs(numpyPortsScript)
	ensure.NoError(t, err)
	dir := t.TempDir()
	o, e, code := runCmd(t, exec.Command(py, script, dir), ".", []string{script, dir})
	ensure.Equal(t, 0, code, "%s %s\nstdout:\n%s\nstderr:\n%s", py, script, o, e)

	raw, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	ensure.NoError(t, err)
	var ports []numpyPort
	ensure.NoError(t, json.Unmarshal(raw, &ports))
	slipped, correct := 0, 0
	for _, p := range ports {
		if p.Correct {
			correct++
		} else {
			slipped++
		}
	}
	// What the manifest promises: at least 20 slipped and 4 correct ports,
	// so that the rates below measure something.
	ensure.GreaterOrEqual(t, slipped, 20, "slipped ports in the manifest")
	ensure.GreaterOrEqual(t, correct, 4, "correct ports in the manifest")

	outcomes := make([]portOutcome, 0, len(ports))
	for _, p := range ports {
		args := []string{"check", p.Operation, "-config", p.ConfigFile, "-json", "-quiet"}
		for _, n := range slices.Sorted(maps.Keys(p.Inputs)) {
			args = append(args, n+"="+p.Inputs[n])
		}
		for _, n := range slices.Sorted(maps.Keys(p.Outputs)) {
			args = append(args, "-got", n+"="+p.Outputs[n])
		}
		stdout, stderr, code := cli(t, dir, args...)
		ensure.NotEqual(t, 2, code, "%s: plumb %v\nstderr:\n%s", p.Port, args, stderr)
		var res struct {
			Diagnosis *checkDiagnosis `json:"diagnosis"`
		}
		ensure.NoError(t, json.Unmarshal([]byte(stdout), &res), "%s: plumb check -json output:\n%s", p.Port, stdout)
		oc := portOutcome{port: p, code: code, diagnosed: res.Diagnosis != nil}
		if d := res.Diagnosis; d != nil {
			for i, c := range d.Candidates {
				verdict := "FAIL"
				if c.Passes {
					verdict = "PASS"
				}
				if i < 3 {
					oc.said = append(oc.said, c.Change+": "+verdict)
				}
			}
			if len(p.Expected) == 0 {
				anyPass := slices.ContainsFunc(d.Candidates, func(c diagnosisCandidate) bool { return c.Passes })
				oc.namedFirst, oc.inTop3 = !anyPass, !anyPass
			} else {
				for i, c := range d.Candidates {
					if i < 3 && sameChanges(c.Changes, p.Expected) {
						oc.inTop3 = true
						oc.namedFirst = oc.namedFirst || i == 0
					}
				}
			}
		}
		outcomes = append(outcomes, oc)
	}

	// The hard requirements, port by port.
	for _, oc := range outcomes {
		p := oc.port
		if p.Correct {
			if oc.code != 0 {
				t.Errorf("correct port %s (%s) fails its check", p.Port, p.Operation)
			}
			if oc.diagnosed {
				t.Errorf("correct port %s (%s) gets a diagnosis: %v", p.Port, p.Operation, oc.said)
			}
			continue
		}
		if oc.code != 1 {
			t.Errorf("slipped port %s (%s: %s) passes its check", p.Port, p.Operation, p.Slip)
		} else if !oc.diagnosed {
			t.Errorf("slipped port %s (%s) fails with no diagnosis section", p.Port, p.Operation)
		}
	}

	// The rates, overall and per family, and the misses.
	type tally struct{ n, first, top3 int }
	fams := map[string]*tally{}
	var all tally
	var misses []string
	for _, oc := range outcomes {
		if oc.port.Correct {
			continue
		}
		f := fams[oc.port.Family]
		if f == nil {
			f = &tally{}
			fams[oc.port.Family] = f
		}
		for _, x := range []*tally{f, &all} {
			x.n++
			if oc.namedFirst {
				x.first++
			}
			if oc.inTop3 {
				x.top3++
			}
		}
		if !oc.namedFirst {
			want := strings.Join(oc.port.Expected, "; ")
			if want == "" {
				want = "no passing change"
			}
			said := strings.Join(oc.said, " | ")
			if said == "" {
				said = "no change named"
			}
			misses = append(misses, fmt.Sprintf("%s (%s): expected %s, in the top three: %v; the diagnosis said: %s", oc.port.Port, oc.port.Slip, want, oc.inTop3, said))
		}
	}
	names := make([]string, 0, len(fams))
	for n := range fams {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		f := fams[n]
		t.Logf("%-10s named first %d/%d, in the top three %d/%d", n, f.first, f.n, f.top3, f.n)
	}
	rate := float64(all.first) / float64(all.n)
	t.Logf("all        named first %d/%d (%.3f; floor %.2f), in the top three %d/%d (%.3f)", all.first, all.n, rate, namedFirstFloor, all.top3, all.n, float64(all.top3)/float64(all.n))
	for _, m := range misses {
		t.Logf("not named first: %s", m)
	}
	if rate < namedFirstFloor {
		t.Errorf("the diagnosis names the expected change first for %d of %d slipped ports (%.3f); want at least %.2f", all.first, all.n, rate, namedFirstFloor)
	}
}
