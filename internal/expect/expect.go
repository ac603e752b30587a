// Package expect holds the checks the project's tests make: each reports a
// failure through the test's Errorf, returns whether it held, and lets the
// test go on. Its sibling package ensure makes the same checks and stops the
// test at the first that fails.
//
// The checks are written on the standard library alone, so that a test
// binary links reflect, regexp and encoding/json but no web or cryptographic
// packages: a test build from empty caches compiles little beyond the code
// under test.
//
// Every check takes the test, its operands and an optional message: none; one
// value, printed as it is; or a format string and its arguments.
//
// Equality is the reflect package's deep equality, []byte compared by
// content, with two nils equal; an ordered comparison (Less, Greater, …)
// takes two operands of one kind among the integers, the floating-point
// numbers and strings; InDelta and InEpsilon convert both operands to
// float64.
package expect

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"reflect"
	"regexp"
	"strings"
)

// T is what a check needs of a test: testing.TB has it.
type T interface {
	Helper()
	Errorf(format string, args ...any)
}

// ErrAny is an error to hand to code under test where any error will do.
var ErrAny = errors.New("expect.ErrAny: an error for tests")

// fail reports a failed check: its name, what was seen and the caller's
// message.
func fail(t T, check, what string, msg []any) bool {
	t.Helper()
	text := check + ": " + what
	if m := message(msg); m != "" {
		text += "\n\tmessage: " + m
	}
	t.Errorf("%s", text)
	return false
}

// message renders the optional message arguments of a check.
func message(msg []any) string {
	switch len(msg) {
	case 0:
		return ""
	case 1:
		if s, ok := msg[0].(string); ok {
			return s
		}
		return fmt.Sprintf("%+v", msg[0])
	}
	if f, ok := msg[0].(string); ok {
		return fmt.Sprintf(f, msg[1:]...)
	}
	return fmt.Sprint(msg...)
}

// show renders one operand for a failure message.
func show(v any) string {
	if s, ok := v.(string); ok {
		return fmt.Sprintf("%q", s)
	}
	if e, ok := v.(error); ok && e != nil {
		return fmt.Sprintf("%T(%q)", v, e.Error())
	}
	return fmt.Sprintf("%#v", v)
}

// same is the equality of Equal.
func same(want, got any) bool {
	if want == nil || got == nil {
		return want == got
	}
	wb, ok1 := want.([]byte)
	gb, ok2 := got.([]byte)
	if ok1 && ok2 {
		if wb == nil || gb == nil {
			return wb == nil && gb == nil
		}
		return bytes.Equal(wb, gb)
	}
	return reflect.DeepEqual(want, got)
}

// Equal checks that got equals want (deep equality; no conversion between
// types).
func Equal(t T, want, got any, msg ...any) bool {
	t.Helper()
	if same(want, got) {
		return true
	}
	return fail(t, "Equal", "values differ\n\twant: "+show(want)+"\n\t got: "+show(got), msg)
}

// Equalf is Equal with a format string and its arguments.
func Equalf(t T, want, got any, format string, args ...any) bool {
	t.Helper()
	return Equal(t, want, got, append([]any{format}, args...)...)
}

// NotEqual checks that got differs from want.
func NotEqual(t T, want, got any, msg ...any) bool {
	t.Helper()
	if !same(want, got) {
		return true
	}
	return fail(t, "NotEqual", "both are "+show(got), msg)
}

// EqualValues checks that got equals want, or want converted to got's
// type.
func EqualValues(t T, want, got any, msg ...any) bool {
	t.Helper()
	if same(want, got) {
		return true
	}
	if want != nil && got != nil {
		wt, gt := reflect.TypeOf(want), reflect.TypeOf(got)
		if wt.ConvertibleTo(gt) && reflect.DeepEqual(reflect.ValueOf(want).Convert(gt).Interface(), got) {
			return true
		}
	}
	return fail(t, "EqualValues", "values differ\n\twant: "+show(want)+"\n\t got: "+show(got), msg)
}

// True checks that v is true.
func True(t T, v bool, msg ...any) bool {
	t.Helper()
	if v {
		return true
	}
	return fail(t, "True", "the condition is false", msg)
}

// Truef is True with a format string and its arguments.
func Truef(t T, v bool, format string, args ...any) bool {
	t.Helper()
	return True(t, v, append([]any{format}, args...)...)
}

// False checks that v is false.
func False(t T, v bool, msg ...any) bool {
	t.Helper()
	if !v {
		return true
	}
	return fail(t, "False", "the condition is true", msg)
}

// isNil says whether v is nil or a nil pointer, map, slice, channel,
// function or interface.
func isNil(v any) bool {
	if v == nil {
		return true
	}
	r := reflect.ValueOf(v)
	switch r.Kind() {
	case reflect.Chan, reflect.Func, reflect.Interface, reflect.Map, reflect.Pointer, reflect.Slice, reflect.UnsafePointer:
		return r.IsNil()
	}
	return false
}

// Nil checks that v is nil (a nil pointer, map, slice … counts).
func Nil(t T, v any, msg ...any) bool {
	t.Helper()
	if isNil(v) {
		return true
	}
	return fail(t, "Nil", "the value is "+show(v), msg)
}

// NotNil checks that v is not nil.
func NotNil(t T, v any, msg ...any) bool {
	t.Helper()
	if !isNil(v) {
		return true
	}
	return fail(t, "NotNil", "the value is nil", msg)
}

// NoError checks that err is nil.
func NoError(t T, err error, msg ...any) bool {
	t.Helper()
	if err == nil {
		return true
	}
	return fail(t, "NoError", "unexpected error: "+err.Error(), msg)
}

// Error checks that err is not nil.
func Error(t T, err error, msg ...any) bool {
	t.Helper()
	if err != nil {
		return true
	}
	return fail(t, "Error", "no error", msg)
}

// ErrorIs checks that errors.Is(err, target).
func ErrorIs(t T, err, target error, msg ...any) bool {
	t.Helper()
	if errors.Is(err, target) {
		return true
	}
	return fail(t, "ErrorIs", fmt.Sprintf("the error %s does not wrap %s", show(err), show(target)), msg)
}

// NotErrorIs checks that err does not wrap target.
func NotErrorIs(t T, err, target error, msg ...any) bool {
	t.Helper()
	if !errors.Is(err, target) {
		return true
	}
	return fail(t, "NotErrorIs", fmt.Sprintf("the error %s wraps %s", show(err), show(target)), msg)
}

// ErrorAs checks that errors.As(err, target).
func ErrorAs(t T, err error, target any, msg ...any) bool {
	t.Helper()
	if errors.As(err, target) {
		return true
	}
	return fail(t, "ErrorAs", fmt.Sprintf("the error %s has nothing of type %T in its chain", show(err), target), msg)
}

// EqualError checks that err is not nil and its text is want.
func EqualError(t T, err error, want string, msg ...any) bool {
	t.Helper()
	if err == nil {
		return fail(t, "EqualError", "no error; want "+show(want), msg)
	}
	if err.Error() == want {
		return true
	}
	return fail(t, "EqualError", "error texts differ\n\twant: "+show(want)+"\n\t got: "+show(err.Error()), msg)
}

// ErrorContains checks that err is not nil and its text contains part.
func ErrorContains(t T, err error, part string, msg ...any) bool {
	t.Helper()
	if err == nil {
		return fail(t, "ErrorContains", "no error; want one containing "+show(part), msg)
	}
	if strings.Contains(err.Error(), part) {
		return true
	}
	return fail(t, "ErrorContains", show(err.Error())+" does not contain "+show(part), msg)
}

// holds says whether whole (a string, slice, array or map) holds part (a
// substring, an element, a key); ok is false for any other whole.
func holds(whole, part any) (found, ok bool) {
	if s, isStr := whole.(string); isStr {
		p, pStr := part.(string)
		if !pStr {
			return false, false
		}
		return strings.Contains(s, p), true
	}
	if whole == nil {
		return false, false
	}
	r := reflect.ValueOf(whole)
	switch r.Kind() {
	case reflect.String:
		p := reflect.ValueOf(part)
		if p.Kind() != reflect.String {
			return false, false
		}
		return strings.Contains(r.String(), p.String()), true
	case reflect.Slice, reflect.Array:
		for i := range r.Len() {
			if same(r.Index(i).Interface(), part) {
				return true, true
			}
		}
		return false, true
	case reflect.Map:
		for _, k := range r.MapKeys() {
			if same(k.Interface(), part) {
				return true, true
			}
		}
		return false, true
	}
	return false, false
}

// Contains checks that whole holds part: a substring of a string, an
// element of a slice or array, a key of a map.
func Contains(t T, whole, part any, msg ...any) bool {
	t.Helper()
	found, ok := holds(whole, part)
	if !ok {
		return fail(t, "Contains", fmt.Sprintf("%T cannot hold %T", whole, part), msg)
	}
	if found {
		return true
	}
	return fail(t, "Contains", show(whole)+" does not contain "+show(part), msg)
}

// NotContains checks that whole (a string, slice, array or map) does not
// hold part.
func NotContains(t T, whole, part any, msg ...any) bool {
	t.Helper()
	found, ok := holds(whole, part)
	if !ok {
		return fail(t, "NotContains", fmt.Sprintf("%T cannot hold %T", whole, part), msg)
	}
	if !found {
		return true
	}
	return fail(t, "NotContains", show(whole)+" contains "+show(part), msg)
}

// ElementsMatch checks that a and b (slices or arrays) hold the same
// elements as many times each, in any order.
func ElementsMatch(t T, a, b any, msg ...any) bool {
	t.Helper()
	ra, rb := reflect.ValueOf(a), reflect.ValueOf(b)
	listy := func(r reflect.Value) bool { return r.Kind() == reflect.Slice || r.Kind() == reflect.Array }
	if !listy(ra) || !listy(rb) {
		return fail(t, "ElementsMatch", fmt.Sprintf("%T and %T are not both lists", a, b), msg)
	}
	used := make([]bool, rb.Len())
	var extra []any
	for i := range ra.Len() {
		x := ra.Index(i).Interface()
		found := false
		for j := range rb.Len() {
			if !used[j] && same(x, rb.Index(j).Interface()) {
				used[j], found = true, true
				break
			}
		}
		if !found {
			extra = append(extra, x)
		}
	}
	var missing []any
	for j, u := range used {
		if !u {
			missing = append(missing, rb.Index(j).Interface())
		}
	}
	if len(extra) == 0 && len(missing) == 0 {
		return true
	}
	return fail(t, "ElementsMatch", fmt.Sprintf("only in the first: %#v; only in the second: %#v", extra, missing), msg)
}

// length returns the length of a string, slice, array, map or channel.
func length(v any) (int, bool) {
	if v == nil {
		return 0, false
	}
	r := reflect.ValueOf(v)
	switch r.Kind() {
	case reflect.String, reflect.Slice, reflect.Array, reflect.Map, reflect.Chan:
		return r.Len(), true
	}
	return 0, false
}

// Len checks that v (a string, slice, array, map or channel) has n
// elements.
func Len(t T, v any, n int, msg ...any) bool {
	t.Helper()
	l, ok := length(v)
	if !ok {
		return fail(t, "Len", fmt.Sprintf("%T has no length", v), msg)
	}
	if l == n {
		return true
	}
	return fail(t, "Len", fmt.Sprintf("%d elements, want %d: %s", l, n, show(v)), msg)
}

// isZero says whether v is nil or its type's zero value.
func isZero(v any) bool {
	return v == nil || reflect.ValueOf(v).IsZero()
}

// isEmpty says whether v is nil, a string, slice, map or channel of length
// 0, a nil pointer or one to an empty value, or any other zero value.
func isEmpty(v any) bool {
	if v == nil {
		return true
	}
	r := reflect.ValueOf(v)
	switch r.Kind() {
	case reflect.Slice, reflect.Map, reflect.Chan:
		return r.Len() == 0
	case reflect.Pointer:
		return r.IsNil() || isEmpty(r.Elem().Interface())
	}
	return r.IsZero()
}

// Empty checks that v is empty: nil, of length 0 (a string, slice, map or
// channel), a pointer to an empty value, or a zero value.
func Empty(t T, v any, msg ...any) bool {
	t.Helper()
	if isEmpty(v) {
		return true
	}
	return fail(t, "Empty", "the value is "+show(v), msg)
}

// NotEmpty checks that v is not empty (see Empty).
func NotEmpty(t T, v any, msg ...any) bool {
	t.Helper()
	if !isEmpty(v) {
		return true
	}
	return fail(t, "NotEmpty", "the value is empty: "+show(v), msg)
}

// Zero checks that v is nil or its type's zero value.
func Zero(t T, v any, msg ...any) bool {
	t.Helper()
	if isZero(v) {
		return true
	}
	return fail(t, "Zero", "the value is "+show(v), msg)
}

// NotZero checks that v is not its type's zero value.
func NotZero(t T, v any, msg ...any) bool {
	t.Helper()
	if !isZero(v) {
		return true
	}
	return fail(t, "NotZero", "the value is zero: "+show(v), msg)
}

// class sorts the kinds the numeric and ordered checks take: 'i' for the
// signed integers, 'u' the unsigned, 'f' floating point, 's' strings, 0 any
// other.
func class(k reflect.Kind) byte {
	switch k {
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return 'i'
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		return 'u'
	case reflect.Float32, reflect.Float64:
		return 'f'
	case reflect.String:
		return 's'
	}
	return 0
}

// order compares a and b, of one kind among the integers, floats and
// strings: −1, 0 or +1, and false when they cannot be compared (a NaN, or
// kinds that differ).
func order(a, b any) (int, bool) {
	if a == nil || b == nil {
		return 0, false
	}
	ra, rb := reflect.ValueOf(a), reflect.ValueOf(b)
	if ra.Kind() != rb.Kind() {
		return 0, false
	}
	switch class(ra.Kind()) {
	case 'i':
		return compareOrdered(ra.Int(), rb.Int()), true
	case 'u':
		return compareOrdered(ra.Uint(), rb.Uint()), true
	case 'f':
		x, y := ra.Float(), rb.Float()
		if x != x || y != y {
			return 0, false // a NaN
		}
		return compareOrdered(x, y), true
	case 's':
		return compareOrdered(ra.String(), rb.String()), true
	}
	return 0, false
}

func compareOrdered[E int64 | uint64 | float64 | string](x, y E) int {
	switch {
	case x < y:
		return -1
	case x > y:
		return 1
	}
	return 0
}

// ordered is the body of Less, LessOrEqual, Greater and GreaterOrEqual:
// it passes when the order of a and b is one of the signs in ok.
func ordered(t T, check, rel string, a, b any, ok func(int) bool, msg []any) bool {
	t.Helper()
	c, comparable := order(a, b)
	if !comparable {
		return fail(t, check, fmt.Sprintf("%s and %s cannot be ordered (of one kind among numbers and strings, no NaN)", show(a), show(b)), msg)
	}
	if ok(c) {
		return true
	}
	return fail(t, check, fmt.Sprintf("%s is not %s %s", show(a), rel, show(b)), msg)
}

// Less checks that a < b.
func Less(t T, a, b any, msg ...any) bool {
	t.Helper()
	return ordered(t, "Less", "less than", a, b, func(c int) bool { return c < 0 }, msg)
}

// Lessf is Less with a format string and its arguments.
func Lessf(t T, a, b any, format string, args ...any) bool {
	t.Helper()
	return Less(t, a, b, append([]any{format}, args...)...)
}

// LessOrEqual checks that a ≤ b.
func LessOrEqual(t T, a, b any, msg ...any) bool {
	t.Helper()
	return ordered(t, "LessOrEqual", "at most", a, b, func(c int) bool { return c <= 0 }, msg)
}

// Greater checks that a > b.
func Greater(t T, a, b any, msg ...any) bool {
	t.Helper()
	return ordered(t, "Greater", "greater than", a, b, func(c int) bool { return c > 0 }, msg)
}

// GreaterOrEqual checks that a ≥ b.
func GreaterOrEqual(t T, a, b any, msg ...any) bool {
	t.Helper()
	return ordered(t, "GreaterOrEqual", "at least", a, b, func(c int) bool { return c >= 0 }, msg)
}

// Positive checks that v, a number, is above zero.
func Positive(t T, v any, msg ...any) bool {
	t.Helper()
	zero := any(nil)
	if v != nil {
		zero = reflect.Zero(reflect.TypeOf(v)).Interface()
	}
	return ordered(t, "Positive", "greater than", v, zero, func(c int) bool { return c > 0 }, msg)
}

// toFloat converts a number of any integer or floating-point kind.
func toFloat(v any) (float64, bool) {
	if v == nil {
		return 0, false
	}
	r := reflect.ValueOf(v)
	switch class(r.Kind()) {
	case 'i':
		return float64(r.Int()), true
	case 'u':
		return float64(r.Uint()), true
	case 'f':
		return r.Float(), true
	}
	return 0, false
}

// within says whether |want − got| ≤ delta, with two NaNs and two equal
// infinities within any delta; why says what is wrong otherwise.
func within(want, got any, delta float64) (ok bool, why string) {
	w, ok1 := toFloat(want)
	g, ok2 := toFloat(got)
	switch {
	case !ok1 || !ok2:
		return false, fmt.Sprintf("%s and %s are not both numbers", show(want), show(got))
	case math.IsNaN(delta) || delta < 0:
		return false, fmt.Sprintf("the allowed difference %v is not a number ≥ 0", delta)
	case math.IsNaN(w) && math.IsNaN(g), w == g:
		return true, ""
	case math.IsNaN(w) || math.IsNaN(g):
		return false, fmt.Sprintf("want %v, got %v", w, g)
	}
	if d := math.Abs(w - g); !(d <= delta) {
		return false, fmt.Sprintf("want %v, got %v: they differ by %v, more than %v", w, g, d, delta)
	}
	return true, ""
}

// InDelta checks that |want − got| ≤ delta, both converted to float64 (two
// NaNs pass).
func InDelta(t T, want, got any, delta float64, msg ...any) bool {
	t.Helper()
	if ok, why := within(want, got, delta); !ok {
		return fail(t, "InDelta", why, msg)
	}
	return true
}

// InDeltaSlice checks InDelta element by element for two slices of one
// length.
func InDeltaSlice(t T, want, got any, delta float64, msg ...any) bool {
	t.Helper()
	rw, rg := reflect.ValueOf(want), reflect.ValueOf(got)
	if rw.Kind() != reflect.Slice || rg.Kind() != reflect.Slice {
		return fail(t, "InDeltaSlice", fmt.Sprintf("%T and %T are not both slices", want, got), msg)
	}
	if rw.Len() != rg.Len() {
		return fail(t, "InDeltaSlice", fmt.Sprintf("lengths %d and %d differ", rw.Len(), rg.Len()), msg)
	}
	for i := range rw.Len() {
		if ok, why := within(rw.Index(i).Interface(), rg.Index(i).Interface(), delta); !ok {
			return fail(t, "InDeltaSlice", fmt.Sprintf("at index %d: %s", i, why), msg)
		}
	}
	return true
}

// InEpsilon checks that |want − got| ≤ epsilon·|want|, both converted to
// float64; want must be finite and not zero.
func InEpsilon(t T, want, got any, epsilon float64, msg ...any) bool {
	t.Helper()
	w, ok1 := toFloat(want)
	g, ok2 := toFloat(got)
	switch {
	case !ok1 || !ok2:
		return fail(t, "InEpsilon", fmt.Sprintf("%s and %s are not both numbers", show(want), show(got)), msg)
	case w == 0 || math.IsNaN(w) || math.IsInf(w, 0):
		return fail(t, "InEpsilon", fmt.Sprintf("a relative error needs a finite, non-zero expected value, not %v", w), msg)
	case math.IsNaN(epsilon) || epsilon < 0:
		return fail(t, "InEpsilon", fmt.Sprintf("the allowed relative error %v is not a number ≥ 0", epsilon), msg)
	}
	if r := math.Abs(w-g) / math.Abs(w); !(r <= epsilon) {
		return fail(t, "InEpsilon", fmt.Sprintf("want %v, got %v: relative error %v, more than %v", w, g, r, epsilon), msg)
	}
	return true
}

// Regexp checks that the text of v (fmt.Sprint) matches rx, a
// *regexp.Regexp or a pattern.
func Regexp(t T, rx any, v any, msg ...any) bool {
	t.Helper()
	var re *regexp.Regexp
	switch x := rx.(type) {
	case *regexp.Regexp:
		re = x
	case string:
		var err error
		if re, err = regexp.Compile(x); err != nil {
			return fail(t, "Regexp", "the pattern does not compile: "+err.Error(), msg)
		}
	default:
		return fail(t, "Regexp", fmt.Sprintf("%T is not a pattern", rx), msg)
	}
	s := fmt.Sprint(v)
	if re.MatchString(s) {
		return true
	}
	return fail(t, "Regexp", fmt.Sprintf("%q does not match %q", s, re.String()), msg)
}

// JSONEq checks that want and got are JSON texts of equal values.
func JSONEq(t T, want, got string, msg ...any) bool {
	t.Helper()
	var w, g any
	if err := json.Unmarshal([]byte(want), &w); err != nil {
		return fail(t, "JSONEq", "the expected text is not JSON: "+err.Error(), msg)
	}
	if err := json.Unmarshal([]byte(got), &g); err != nil {
		return fail(t, "JSONEq", "the text is not JSON: "+err.Error()+": "+show(got), msg)
	}
	if reflect.DeepEqual(w, g) {
		return true
	}
	return fail(t, "JSONEq", "values differ\n\twant: "+want+"\n\t got: "+got, msg)
}

// Panics checks that f panics.
func Panics(t T, f func(), msg ...any) (ok bool) {
	t.Helper()
	defer func() {
		if recover() != nil {
			ok = true
		}
	}()
	f()
	return fail(t, "Panics", "the function returned without a panic", msg)
}

// NoFileExists checks that nothing but perhaps a directory is at path.
func NoFileExists(t T, path string, msg ...any) bool {
	t.Helper()
	info, err := os.Lstat(path)
	if err != nil || info.IsDir() {
		return true
	}
	return fail(t, "NoFileExists", "a file is at "+path, msg)
}
