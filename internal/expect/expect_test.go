package expect_test

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// recorder is a test that keeps what the checks report.
type recorder struct {
	failures []string
	stopped  bool
}

func (r *recorder) Helper() {}
func (r *recorder) Errorf(format string, args ...any) {
	r.failures = append(r.failures, fmt.Sprintf(format, args...))
}
func (r *recorder) FailNow() { r.stopped = true }

type celsius float64

type pair struct {
	a int
	b []string
}

// TestChecks runs every check once where it holds and once where it does
// not: it must return true and report nothing, then return false and report
// one failure that names the check.
func TestChecks(t *testing.T) {
	wrapped := fmt.Errorf("reading: %w", fs.ErrNotExist)
	var pathErr *fs.PathError
	dir := t.TempDir()
	file := filepath.Join(dir, "f")
	if err := os.WriteFile(file, nil, 0o600); err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	inf := math.Inf(1)
	cases := []struct {
		name       string
		hold, fail func(expect.T) bool
	}{
		{"Equal", func(t expect.T) bool { return expect.Equal(t, pair{1, []string{"x"}}, pair{1, []string{"x"}}) },
			func(t expect.T) bool { return expect.Equal(t, 1, int64(1)) }},
		{"Equal", func(t expect.T) bool { return expect.Equal(t, []byte{}, []byte{}) },
			func(t expect.T) bool { return expect.Equal(t, []byte(nil), []byte{}) }},
		{"Equal", func(t expect.T) bool { return expect.Equal(t, nil, nil) },
			func(t expect.T) bool { return expect.Equal(t, nil, []int(nil)) }},
		{"Equal", func(t expect.T) bool { return expect.Equalf(t, "a", "a", "%d", 1) },
			func(t expect.T) bool { return expect.Equalf(t, "a", "b", "%d", 1) }},
		{"NotEqual", func(t expect.T) bool { return expect.NotEqual(t, 1, 2) },
			func(t expect.T) bool { return expect.NotEqual(t, "a", "a") }},
		{"EqualValues", func(t expect.T) bool { return expect.EqualValues(t, 2, uint8(2)) },
			func(t expect.T) bool { return expect.EqualValues(t, 3, uint8(2)) }},
		{"True", func(t expect.T) bool { return expect.True(t, true) }, func(t expect.T) bool { return expect.True(t, false) }},
		{"True", func(t expect.T) bool { return expect.Truef(t, true, "%s", "x") },
			func(t expect.T) bool { return expect.Truef(t, false, "%s", "x") }},
		{"False", func(t expect.T) bool { return expect.False(t, false) }, func(t expect.T) bool { return expect.False(t, true) }},
		{"Nil", func(t expect.T) bool { return expect.Nil(t, (*int)(nil)) }, func(t expect.T) bool { return expect.Nil(t, 0) }},
		{"NotNil", func(t expect.T) bool { return expect.NotNil(t, new(int)) },
			func(t expect.T) bool { return expect.NotNil(t, map[int]int(nil)) }},
		{"NoError", func(t expect.T) bool { return expect.NoError(t, nil) },
			func(t expect.T) bool { return expect.NoError(t, expect.ErrAny) }},
		{"Error", func(t expect.T) bool { return expect.Error(t, expect.ErrAny) },
			func(t expect.T) bool { return expect.Error(t, nil) }},
		{"ErrorIs", func(t expect.T) bool { return expect.ErrorIs(t, wrapped, fs.ErrNotExist) },
			func(t expect.T) bool { return expect.ErrorIs(t, wrapped, fs.ErrExist) }},
		{"NotErrorIs", func(t expect.T) bool { return expect.NotErrorIs(t, wrapped, fs.ErrExist) },
			func(t expect.T) bool { return expect.NotErrorIs(t, wrapped, fs.ErrNotExist) }},
		{"ErrorAs", func(t expect.T) bool {
			_, err := os.Open(filepath.Join(dir, "none"))
			return expect.ErrorAs(t, err, &pathErr)
		},
			func(t expect.T) bool { return expect.ErrorAs(t, wrapped, &pathErr) }},
		{"EqualError", func(t expect.T) bool { return expect.EqualError(t, errors.New("e"), "e") },
			func(t expect.T) bool { return expect.EqualError(t, nil, "e") }},
		{"EqualError", func(t expect.T) bool { return expect.EqualError(t, errors.New(""), "") },
			func(t expect.T) bool { return expect.EqualError(t, errors.New("e"), "f") }},
		{"ErrorContains", func(t expect.T) bool { return expect.ErrorContains(t, wrapped, "reading") },
			func(t expect.T) bool { return expect.ErrorContains(t, wrapped, "writing") }},
		{"Contains", func(t expect.T) bool { return expect.Contains(t, "abc", "b") },
			func(t expect.T) bool { return expect.Contains(t, "abc", "d") }},
		{"Contains", func(t expect.T) bool { return expect.Contains(t, []any{1, "x"}, "x") },
			func(t expect.T) bool { return expect.Contains(t, map[string]int{"a": 1}, 1) }},
		{"Contains", func(t expect.T) bool { return expect.Contains(t, map[string]int{"a": 1}, "a") },
			func(t expect.T) bool { return expect.Contains(t, 12, 1) }},
		{"NotContains", func(t expect.T) bool { return expect.NotContains(t, []int{1, 2}, 3) },
			func(t expect.T) bool { return expect.NotContains(t, []int{1, 2}, 2) }},
		{"ElementsMatch", func(t expect.T) bool { return expect.ElementsMatch(t, []int{1, 2, 2}, [3]int{2, 1, 2}) },
			func(t expect.T) bool { return expect.ElementsMatch(t, []int{1, 2, 2}, []int{1, 1, 2}) }},
		{"Len", func(t expect.T) bool { return expect.Len(t, "héllo", 6) }, func(t expect.T) bool { return expect.Len(t, []int{1}, 2) }},
		{"Len", func(t expect.T) bool { return expect.Len(t, map[int]int{}, 0) }, func(t expect.T) bool { return expect.Len(t, 3, 0) }},
		{"Empty", func(t expect.T) bool { return expect.Empty(t, []int{}) }, func(t expect.T) bool { return expect.Empty(t, " ") }},
		{"Empty", func(t expect.T) bool { return expect.Empty(t, [2]int{}) }, func(t expect.T) bool { return expect.Empty(t, &pair{a: 1}) }},
		{"NotEmpty", func(t expect.T) bool { return expect.NotEmpty(t, map[int]int{1: 1}) },
			func(t expect.T) bool { return expect.NotEmpty(t, (*int)(nil)) }},
		{"Zero", func(t expect.T) bool { return expect.Zero(t, pair{}) }, func(t expect.T) bool { return expect.Zero(t, -0.5) }},
		{"NotZero", func(t expect.T) bool { return expect.NotZero(t, "a") }, func(t expect.T) bool { return expect.NotZero(t, 0) }},
		{"Less", func(t expect.T) bool { return expect.Less(t, -1, 2) }, func(t expect.T) bool { return expect.Less(t, 2, 2) }},
		{"Less", func(t expect.T) bool { return expect.Lessf(t, "a", "b", "%d", 1) },
			func(t expect.T) bool { return expect.Less(t, 1, 2.0) }},
		{"LessOrEqual", func(t expect.T) bool { return expect.LessOrEqual(t, celsius(2), 2.0) },
			func(t expect.T) bool { return expect.LessOrEqual(t, nan, 2.0) }},
		{"Greater", func(t expect.T) bool { return expect.Greater(t, uint(3), uint(2)) },
			func(t expect.T) bool { return expect.Greater(t, 2, 3) }},
		{"GreaterOrEqual", func(t expect.T) bool { return expect.GreaterOrEqual(t, inf, inf) },
			func(t expect.T) bool { return expect.GreaterOrEqual(t, "a", "b") }},
		{"Positive", func(t expect.T) bool { return expect.Positive(t, 1e-300) }, func(t expect.T) bool { return expect.Positive(t, 0) }},
		{"InDelta", func(t expect.T) bool { return expect.InDelta(t, 1, 1.1, 0.1000001) },
			func(t expect.T) bool { return expect.InDelta(t, 1, 1.2, 0.1) }},
		{"InDelta", func(t expect.T) bool { return expect.InDelta(t, nan, nan, 0) },
			func(t expect.T) bool { return expect.InDelta(t, 1, nan, 1) }},
		{"InDelta", func(t expect.T) bool { return expect.InDelta(t, inf, inf, 0) },
			func(t expect.T) bool { return expect.InDelta(t, inf, -inf, 1) }},
		{"InDeltaSlice", func(t expect.T) bool { return expect.InDeltaSlice(t, []float64{1, 2}, []float32{1, 2}, 0) },
			func(t expect.T) bool { return expect.InDeltaSlice(t, []float64{1, 2}, []float64{1}, 1) }},
		{"InEpsilon", func(t expect.T) bool { return expect.InEpsilon(t, -100, -101, 0.01) },
			func(t expect.T) bool { return expect.InEpsilon(t, 0, 0, 1) }},
		{"InEpsilon", func(t expect.T) bool { return expect.InEpsilon(t, 2, 2, 0) },
			func(t expect.T) bool { return expect.InEpsilon(t, 100, 102, 0.01) }},
		{"Regexp", func(t expect.T) bool { return expect.Regexp(t, `^a\d$`, "a1") },
			func(t expect.T) bool { return expect.Regexp(t, regexp.MustCompile(`^a\d$`), 12) }},
		{"JSONEq", func(t expect.T) bool { return expect.JSONEq(t, `{"a": [1, 2]}`, `{ "a":[1,2] }`) },
			func(t expect.T) bool { return expect.JSONEq(t, `{"a": 1}`, `{"a": 1.5}`) }},
		{"Panics", func(t expect.T) bool { return expect.Panics(t, func() { panic("p") }) },
			func(t expect.T) bool { return expect.Panics(t, func() {}) }},
		{"NoFileExists", func(t expect.T) bool { return expect.NoFileExists(t, dir) },
			func(t expect.T) bool { return expect.NoFileExists(t, file) }},
	}
	for _, c := range cases {
		var r recorder
		if !c.hold(&r) || len(r.failures) != 0 {
			t.Errorf("%s: a check that holds returned false or reported %q", c.name, r.failures)
		}
		r = recorder{}
		if c.fail(&r) || len(r.failures) != 1 {
			t.Errorf("%s: a check that fails returned true or reported %d failures, want 1", c.name, len(r.failures))
			continue
		}
		if !strings.HasPrefix(r.failures[0], c.name+": ") {
			t.Errorf("%s: the failure %q does not start with the check's name", c.name, r.failures[0])
		}
	}
}

// TestMessage: the optional message is printed as a value, or as a format
// with its arguments.
func TestMessage(t *testing.T) {
	for _, c := range []struct {
		msg  []any
		want string
	}{
		{nil, ""},
		{[]any{"plain %d"}, "\n\tmessage: plain %d"},
		{[]any{"case %d of %s", 3, "x"}, "\n\tmessage: case 3 of x"},
		{[]any{42}, "\n\tmessage: 42"},
	} {
		var r recorder
		expect.True(&r, false, c.msg...)
		if want := "True: the condition is false" + c.want; len(r.failures) != 1 || r.failures[0] != want {
			t.Errorf("message %v: reported %q, want %q", c.msg, r.failures, want)
		}
	}
	var r recorder
	expect.Equal(&r, "a", "b")
	if want := "Equal: values differ\n\twant: \"a\"\n\t got: \"b\""; r.failures[0] != want {
		t.Errorf("Equal reported %q, want %q", r.failures[0], want)
	}
}

// TestEnsureStops: ensure stops the test exactly when its check fails.
func TestEnsureStops(t *testing.T) {
	var r recorder
	ensure.NoError(&r, nil)
	ensure.Len(&r, []int{1}, 1)
	if r.stopped || len(r.failures) != 0 {
		t.Fatalf("checks that hold stopped the test or reported %q", r.failures)
	}
	ensure.ErrorIs(&r, expect.ErrAny, fs.ErrClosed, "closing")
	if !r.stopped || len(r.failures) != 1 || !strings.HasSuffix(r.failures[0], "message: closing") {
		t.Fatalf("a failed check: stopped %v, reported %q", r.stopped, r.failures)
	}
}
