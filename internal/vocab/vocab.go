// Package vocab gives every convention type of plumb its words.
//
// A convention type is an integer type whose values are the options of one
// convention (a rotary pairing, a group map, an epsilon placement, …). Its
// package declares the type's vocabulary once, with New: for each value one
// word, the only spelling plumb uses for it (in configurations, golden
// files, help and error messages), and one line saying what it means. The
// type's methods (String, MarshalText, UnmarshalText, Meaning, Values) are
// one-line calls into its Set, and so are the package's validity checks.
//
// Every Set registers itself, so that code can enumerate every convention
// and its alternatives (All): the command's help, the configuration layer,
// the vocabulary file the golden generator reads, and the search for the
// convention a failing port follows are all built on that list, never on a
// table kept by hand.
//
// Words are lower case, with hyphens between parts ("heads-major",
// "gelu-tanh", "added-to-root"). A Set may accept other spellings when
// reading (Aliases), but always writes its one word.
package vocab

import (
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"slices"
	"strings"
	"sync"
)

// Integer is the underlying type a convention type may have.
type Integer interface{ ~int | ~uint8 }

// Word is one value of a convention type T.
type Word[T Integer] struct {
	Value   T
	Text    string // the one spelling
	Meaning string // one line, no final period
}

// W is shorthand for a Word literal.
func W[T Integer](v T, text, meaning string) Word[T] {
	return Word[T]{Value: v, Text: text, Meaning: meaning}
}

// Set is the vocabulary of one convention type T.
type Set[T Integer] struct {
	pkg, name string // "attention", "GroupMap"
	noun      string // what one value is called in prose: "group map"
	question  string // one line: what the convention decides
	err       error  // the sentinel every error wraps
	words     []Word[T]
	aliases   map[string]T
}

// wordRE is the form of a word: lower-case letters and digits, parts joined
// by single hyphens.
var wordRE = regexp.MustCompile(`^[a-z0-9]+(-[a-z0-9]+)*$`)

// New declares and registers the vocabulary of the convention type T of
// package pkg. noun names one value in prose ("group map"), question says
// in one line what the convention decides, err is the sentinel error the
// Set's errors wrap (the package's ErrOption or its like; nil for none). The words must
// be distinct, well formed and have distinct values; New panics otherwise,
// at package initialisation, since that is a programming error.
func New[T Integer](pkg, noun, question string, err error, words ...Word[T]) *Set[T] {
	s := &Set[T]{pkg: pkg, name: reflect.TypeFor[T]().Name(), noun: noun, question: question, err: err, words: words}
	if len(words) == 0 {
		panic("vocab: " + s.Name() + " has no words")
	}
	seenText, seenValue := map[string]bool{}, map[T]bool{}
	for _, w := range words {
		switch {
		case !wordRE.MatchString(w.Text):
			panic(fmt.Sprintf("vocab: %s: word %q is not lower-case words joined by hyphens", s.Name(), w.Text))
		case seenText[w.Text]:
			panic(fmt.Sprintf("vocab: %s: word %q twice", s.Name(), w.Text))
		case seenValue[w.Value]:
			panic(fmt.Sprintf("vocab: %s: value %d twice", s.Name(), int(w.Value)))
		case w.Meaning == "" || strings.HasSuffix(w.Meaning, "."):
			panic(fmt.Sprintf("vocab: %s: word %q needs a one-line meaning without a final period", s.Name(), w.Text))
		}
		seenText[w.Text], seenValue[w.Value] = true, true
	}
	register(s)
	return s
}

// Aliases adds other spellings that UnmarshalText accepts for a value (in
// any case, as words are compared after lowering); MarshalText still writes
// the value's word. It returns s.
func (s *Set[T]) Aliases(aliases map[string]T) *Set[T] {
	m := map[string]T{}
	for a, v := range aliases {
		if _, ok := s.word(v); !ok {
			panic(fmt.Sprintf("vocab: %s: alias %q of a value with no word", s.Name(), a))
		}
		m[strings.ToLower(a)] = v
	}
	s.aliases = m
	return s
}

func (s *Set[T]) word(v T) (Word[T], bool) {
	for _, w := range s.words {
		if w.Value == v {
			return w, true
		}
	}
	return Word[T]{}, false
}

// Name is the type's qualified name, "attention.GroupMap".
func (s *Set[T]) Name() string { return s.pkg + "." + s.name }

// String is v's word, or "GroupMap(7)" for a value with none.
func (s *Set[T]) String(v T) string {
	if w, ok := s.word(v); ok {
		return w.Text
	}
	return fmt.Sprintf("%s(%d)", s.name, int(v))
}

// Meaning is the one-line meaning of v, or "" for a value with no word.
func (s *Set[T]) Meaning(v T) string {
	w, _ := s.word(v)
	return w.Meaning
}

// Values lists every value, in the order of the words.
func (s *Set[T]) Values() []T {
	v := make([]T, len(s.words))
	for i, w := range s.words {
		v[i] = w.Value
	}
	return v
}

// Texts lists every word, in order.
func (s *Set[T]) Texts() []string {
	t := make([]string, len(s.words))
	for i, w := range s.words {
		t[i] = w.Text
	}
	return t
}

// Check returns nil if v has a word, or an *Error wrapping the Set's
// sentinel that names the value by the Set's noun and lists the words.
func (s *Set[T]) Check(v T) error { return s.CheckAt(s.noun, v) }

// CheckAt is Check with the value named by where, the function and field
// that hold it ("LayerNorm: Options.Placement").
func (s *Set[T]) CheckAt(where string, v T) error {
	if _, ok := s.word(v); ok {
		return nil
	}
	return &Error{Set: s.Name(), Where: where, Value: fmt.Sprint(int(v)), Words: s.Texts(), errs: s.sentinels()}
}

func (s *Set[T]) sentinels() []error {
	if s.err == nil {
		return nil
	}
	return []error{s.err}
}

// Marshal is MarshalText for v: its word, or the error of Check.
func (s *Set[T]) Marshal(v T) ([]byte, error) {
	if err := s.Check(v); err != nil {
		return nil, err
	}
	return []byte(s.String(v)), nil
}

// Unmarshal is UnmarshalText: it sets *v to the value whose word (or alias)
// is b, compared without regard to case and surrounding space, or returns
// an *Error that lists the words and leaves *v alone. A nil v is an error
// wrapping the Set's sentinel, not a panic.
func (s *Set[T]) Unmarshal(v *T, b []byte) error {
	if v == nil {
		msg := fmt.Sprintf("%s.UnmarshalText: receiver = nil; want a *%s to set", s.name, s.name)
		if s.err == nil {
			return errors.New(s.pkg + ": " + msg)
		}
		return fmt.Errorf("%w: %s", s.err, msg)
	}
	t := strings.ToLower(strings.TrimSpace(string(b)))
	for _, w := range s.words {
		if w.Text == t {
			*v = w.Value
			return nil
		}
	}
	if a, ok := s.aliases[t]; ok {
		*v = a
		return nil
	}
	return &Error{Set: s.Name(), Where: s.noun, Value: fmt.Sprintf("%q", b), Words: s.Texts(), errs: s.sentinels()}
}

// Error is the error of a value or a word that is not one of a
// convention's words. It reads
//
//	<sentinel>: <where> = <value>; want one of <words>
//
// and wraps the sentinel the Set was declared with (and, after At, the
// caller's own).
type Error struct {
	Set   string   // the convention type, "attention.GroupMap"
	Where string   // what holds the value: "group map", or "Forward: Options.Group"
	Value string   // the offending value, a quoted word or an integer
	Words []string // the words it could have been
	errs  []error
}

func (e *Error) Error() string {
	msg := fmt.Sprintf("%s = %s; want one of %s", e.Where, e.Value, strings.Join(e.Words, ", "))
	if len(e.errs) > 0 {
		return e.errs[0].Error() + ": " + msg
	}
	return msg
}

// Unwrap returns the sentinels.
func (e *Error) Unwrap() []error { return e.errs }

// At re-words err, when it is an *Error, for the caller that checked a
// convention of another package: the message leads with sentinel and names
// the value by where, and the error wraps sentinel as well as the original
// sentinel. Any other err (nil included) is returned as it is.
func At(err, sentinel error, where string) error {
	var e *Error
	if !errors.As(err, &e) {
		return err
	}
	return &Error{Set: e.Set, Where: where, Value: e.Value, Words: e.Words, errs: append([]error{sentinel}, e.errs...)}
}

// Entry is a registered convention, without its type parameter: what code
// that enumerates every convention sees.
type Entry struct {
	Name     string       // "attention.GroupMap"
	Noun     string       // "group map"
	Question string       // what the convention decides
	Type     reflect.Type // the Go type
	Words    []Text       // every value's word and meaning, in order
	Aliases  []string     // other accepted spellings, sorted
}

// Text is a word and its meaning.
type Text struct {
	Text, Meaning string
}

func (s *Set[T]) entry() Entry {
	e := Entry{Name: s.Name(), Noun: s.noun, Question: s.question, Type: reflect.TypeFor[T]()}
	for _, w := range s.words {
		e.Words = append(e.Words, Text{w.Text, w.Meaning})
	}
	for a := range s.aliases {
		e.Aliases = append(e.Aliases, a)
	}
	slices.Sort(e.Aliases)
	return e
}

var (
	mu       sync.Mutex
	registry = map[reflect.Type]func() Entry{}
)

func register[T Integer](s *Set[T]) {
	mu.Lock()
	defer mu.Unlock()
	t := reflect.TypeFor[T]()
	if _, dup := registry[t]; dup {
		panic("vocab: " + s.Name() + " declared twice")
	}
	registry[t] = s.entry
}

// All lists every registered convention, sorted by name. A convention is
// registered when its package is initialised, so All sees those of the
// packages the program imports.
func All() []Entry {
	mu.Lock()
	defer mu.Unlock()
	out := make([]Entry, 0, len(registry))
	for _, f := range registry {
		out = append(out, f())
	}
	slices.SortFunc(out, func(a, b Entry) int { return strings.Compare(a.Name, b.Name) })
	return out
}

// Lookup returns the registered convention of type t.
func Lookup(t reflect.Type) (Entry, bool) {
	mu.Lock()
	defer mu.Unlock()
	if f, ok := registry[t]; ok {
		return f(), true
	}
	return Entry{}, false
}
