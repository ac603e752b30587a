// Package ensure makes the checks of package expect and stops the test at
// the first that fails (through FailNow, after the failure is reported), for
// checks whose failure leaves nothing sensible to test after them.
package ensure

import "github.com/plumbref/plumb/internal/expect"

// T is what a check needs of a test: testing.TB has it.
type T interface {
	expect.T
	FailNow()
}

// stop ends the test when a check did not hold.
func stop(t T, held bool) {
	if !held {
		t.FailNow()
	}
}

// Equal is expect.Equal, and stops the test if it fails.
func Equal(t T, want, got any, msg ...any) {
	t.Helper()
	stop(t, expect.Equal(t, want, got, msg...))
}

// Equalf is expect.Equalf, and stops the test if it fails.
func Equalf(t T, want, got any, format string, args ...any) {
	t.Helper()
	stop(t, expect.Equalf(t, want, got, format, args...))
}

// NotEqual is expect.NotEqual, and stops the test if it fails.
func NotEqual(t T, want, got any, msg ...any) {
	t.Helper()
	stop(t, expect.NotEqual(t, want, got, msg...))
}

// EqualValues is expect.EqualValues, and stops the test if it fails.
func EqualValues(t T, want, got any, msg ...any) {
	t.Helper()
	stop(t, expect.EqualValues(t, want, got, msg...))
}

// True is expect.True, and stops the test if it fails.
func True(t T, v bool, msg ...any) {
	t.Helper()
	stop(t, expect.True(t, v, msg...))
}

// Truef is expect.Truef, and stops the test if it fails.
func Truef(t T, v bool, format string, args ...any) {
	t.Helper()
	stop(t, expect.Truef(t, v, format, args...))
}

// False is expect.False, and stops the test if it fails.
func False(t T, v bool, msg ...any) {
	t.Helper()
	stop(t, expect.False(t, v, msg...))
}

// Nil is expect.Nil, and stops the test if it fails.
func Nil(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.Nil(t, v, msg...))
}

// NotNil is expect.NotNil, and stops the test if it fails.
func NotNil(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.NotNil(t, v, msg...))
}

// NoError is expect.NoError, and stops the test if it fails.
func NoError(t T, err error, msg ...any) {
	t.Helper()
	stop(t, expect.NoError(t, err, msg...))
}

// Error is expect.Error, and stops the test if it fails.
func Error(t T, err error, msg ...any) {
	t.Helper()
	stop(t, expect.Error(t, err, msg...))
}

// ErrorIs is expect.ErrorIs, and stops the test if it fails.
func ErrorIs(t T, err, target error, msg ...any) {
	t.Helper()
	stop(t, expect.ErrorIs(t, err, target, msg...))
}

// NotErrorIs is expect.NotErrorIs, and stops the test if it fails.
func NotErrorIs(t T, err, target error, msg ...any) {
	t.Helper()
	stop(t, expect.NotErrorIs(t, err, target, msg...))
}

// ErrorAs is expect.ErrorAs, and stops the test if it fails.
func ErrorAs(t T, err error, target any, msg ...any) {
	t.Helper()
	stop(t, expect.ErrorAs(t, err, target, msg...))
}

// EqualError is expect.EqualError, and stops the test if it fails.
func EqualError(t T, err error, want string, msg ...any) {
	t.Helper()
	stop(t, expect.EqualError(t, err, want, msg...))
}

// ErrorContains is expect.ErrorContains, and stops the test if it fails.
func ErrorContains(t T, err error, part string, msg ...any) {
	t.Helper()
	stop(t, expect.ErrorContains(t, err, part, msg...))
}

// Contains is expect.Contains, and stops the test if it fails.
func Contains(t T, whole, part any, msg ...any) {
	t.Helper()
	stop(t, expect.Contains(t, whole, part, msg...))
}

// NotContains is expect.NotContains, and stops the test if it fails.
func NotContains(t T, whole, part any, msg ...any) {
	t.Helper()
	stop(t, expect.NotContains(t, whole, part, msg...))
}

// ElementsMatch is expect.ElementsMatch, and stops the test if it fails.
func ElementsMatch(t T, a, b any, msg ...any) {
	t.Helper()
	stop(t, expect.ElementsMatch(t, a, b, msg...))
}

// Len is expect.Len, and stops the test if it fails.
func Len(t T, v any, n int, msg ...any) {
	t.Helper()
	stop(t, expect.Len(t, v, n, msg...))
}

// Empty is expect.Empty, and stops the test if it fails.
func Empty(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.Empty(t, v, msg...))
}

// NotEmpty is expect.NotEmpty, and stops the test if it fails.
func NotEmpty(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.NotEmpty(t, v, msg...))
}

// Zero is expect.Zero, and stops the test if it fails.
func Zero(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.Zero(t, v, msg...))
}

// NotZero is expect.NotZero, and stops the test if it fails.
func NotZero(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.NotZero(t, v, msg...))
}

// Less is expect.Less, and stops the test if it fails.
func Less(t T, a, b any, msg ...any) {
	t.Helper()
	stop(t, expect.Less(t, a, b, msg...))
}

// Lessf is expect.Lessf, and stops the test if it fails.
func Lessf(t T, a, b any, format string, args ...any) {
	t.Helper()
	stop(t, expect.Lessf(t, a, b, format, args...))
}

// LessOrEqual is expect.LessOrEqual, and stops the test if it fails.
func LessOrEqual(t T, a, b any, msg ...any) {
	t.Helper()
	stop(t, expect.LessOrEqual(t, a, b, msg...))
}

// Greater is expect.Greater, and stops the test if it fails.
func Greater(t T, a, b any, msg ...any) {
	t.Helper()
	stop(t, expect.Greater(t, a, b, msg...))
}

// GreaterOrEqual is expect.GreaterOrEqual, and stops the test if it fails.
func GreaterOrEqual(t T, a, b any, msg ...any) {
	t.Helper()
	stop(t, expect.GreaterOrEqual(t, a, b, msg...))
}

// Positive is expect.Positive, and stops the test if it fails.
func Positive(t T, v any, msg ...any) {
	t.Helper()
	stop(t, expect.Positive(t, v, msg...))
}

// InDelta is expect.InDelta, and stops the test if it fails.
func InDelta(t T, want, got any, delta float64, msg ...any) {
	t.Helper()
	stop(t, expect.InDelta(t, want, got, delta, msg...))
}

// InDeltaSlice is expect.InDeltaSlice, and stops the test if it fails.
func InDeltaSlice(t T, want, got any, delta float64, msg ...any) {
	t.Helper()
	stop(t, expect.InDeltaSlice(t, want, got, delta, msg...))
}

// InEpsilon is expect.InEpsilon, and stops the test if it fails.
func InEpsilon(t T, want, got any, epsilon float64, msg ...any) {
	t.Helper()
	stop(t, expect.InEpsilon(t, want, got, epsilon, msg...))
}

// Regexp is expect.Regexp, and stops the test if it fails.
func Regexp(t T, rx any, v any, msg ...any) {
	t.Helper()
	stop(t, expect.Regexp(t, rx, v, msg...))
}

// JSONEq is expect.JSONEq, and stops the test if it fails.
func JSONEq(t T, want, got string, msg ...any) {
	t.Helper()
	stop(t, expect.JSONEq(t, want, got, msg...))
}

// NoFileExists is expect.NoFileExists, and stops the test if it fails.
func NoFileExists(t T, path string, msg ...any) {
	t.Helper()
	stop(t, expect.NoFileExists(t, path, msg...))
}
