package suite

import (
	"os"
	"regexp"
	"strings"

	"github.com/plumbref/plumb/conformance"
)

// This file holds what the suites' own tests share: they run a kernel on a
// conformance.Recorder and read the failure messages of Judge back.

// TB is what those checks need of a *testing.T; a *conformance.Recorder
// has it too.
type TB interface {
	Helper()
	Errorf(format string, args ...any)
}

// Failed checks that the subtest name ("case/variant") of rec ran and
// failed with a message of Judge's form: led by "case <case> (", the
// case's name and then its conventions, and holding each of says. It
// returns that first message, or "" after failing t when the subtest is
// missing, passed or said nothing.
func Failed(t TB, rec *conformance.Recorder, name string, says ...string) string {
	t.Helper()
	r := rec.Find(name)
	switch {
	case r == nil:
		t.Errorf("%s did not run", name)
		return ""
	case !r.Failed || len(r.Messages) == 0:
		t.Errorf("%s passed; want it to fail", name)
		return ""
	}
	msg := r.Messages[0]
	caseName, _, _ := strings.Cut(name, "/")
	if !strings.HasPrefix(msg, "case "+caseName+" (") {
		t.Errorf("%s: the message does not lead with %q:\n%s", name, "case "+caseName+" (", msg)
	}
	for _, s := range says {
		if !strings.Contains(msg, s) {
			t.Errorf("%s: the message does not say %q:\n%s", name, s, msg)
		}
	}
	return msg
}

// Passed fails t unless the subtest name of rec ran, was not skipped, and
// passed.
func Passed(t TB, rec *conformance.Recorder, name string) {
	t.Helper()
	switch r := rec.Find(name); {
	case r == nil:
		t.Errorf("%s did not run", name)
	case r.Skipped:
		t.Errorf("%s was skipped: %s", name, strings.Join(r.Messages, "\n"))
	case r.Failed:
		t.Errorf("%s failed:\n%s", name, strings.Join(r.Messages, "\n"))
	}
}

// Skipped fails t unless the subtest name of rec was skipped, by Run, for
// needs: what it needs and the kernel does not declare, each with its
// Supports field ("mask causal (Masks)").
func Skipped(t TB, rec *conformance.Recorder, name, needs string) {
	t.Helper()
	r := rec.Find(name)
	if r == nil {
		t.Errorf("%s did not run", name)
		return
	}
	if want := skipMessage(name, needs); !r.Skipped || len(r.Messages) != 1 || r.Messages[0] != want {
		t.Errorf("%s: want it skipped with %q; skipped %v, messages %q", name, want, r.Skipped, r.Messages)
	}
}

// DiagnosisLine returns the line of a failure message of Judge before the
// one naming the whole report: the diagnosis of a posed output (see Pose).
// It fails t, and returns "", when msg has no such line.
func DiagnosisLine(t TB, msg string) string {
	t.Helper()
	lines := strings.Split(msg, "\n")
	for i, l := range lines {
		if i > 0 && strings.HasPrefix(l, "  "+reportLine) {
			return lines[i-1]
		}
	}
	t.Errorf("no line naming the whole report in %q", msg)
	return ""
}

// MissingDocLines reads the Go file at path and returns the cases whose
// line, "//\t<name>  <why>" with any run of spaces between, is not in it:
// the package documentation lists the cases, and this keeps the list
// true.
func MissingDocLines(path string, names, whys []string) ([]string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var missing []string
	for i, n := range names {
		re := regexp.MustCompile(`(?m)^//\t` + regexp.QuoteMeta(n) + ` +` + regexp.QuoteMeta(whys[i]) + `$`)
		if !re.Match(b) {
			missing = append(missing, n)
		}
	}
	return missing, nil
}

// DocListsEveryCase fails t, naming them, for the cases whose line
// "//\t<name>  <why>" is missing from the package documentation in the Go
// file at path (see MissingDocLines); nameWhy gives a case's name and
// reason.
func DocListsEveryCase[C any](t TB, path string, cases []C, nameWhy func(C) (name, why string)) {
	t.Helper()
	var names, whys []string
	for _, c := range cases {
		n, w := nameWhy(c)
		names, whys = append(names, n), append(whys, w)
	}
	missing, err := MissingDocLines(path, names, whys)
	if err != nil {
		t.Errorf("%v", err)
		return
	}
	if len(missing) > 0 {
		t.Errorf("%s: the package documentation does not list these cases with their reasons: %s", path, strings.Join(missing, ", "))
	}
}
