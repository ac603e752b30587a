package ops

import (
	"bytes"
	"encoding"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/internal/vocab"
)

// A configuration type is a struct whose fields are its keys, each field
// tagged with
//
//	json:"name"      the key
//	doc:"…"          one line saying what it does
//	default:"…"      what an absent key means, or "required"
//	idiom:"true"     the key names a port's precision idiom (Key.Idiom)
//
// A field of a convention type (one with words, see package vocab) is a
// word key: its words, their meanings and its default (the zero value's
// word) come from the convention. A struct field is an object whose fields
// are keys in turn, a slice of structs a list of such objects; embedded
// structs add their keys to the outer object.

var (
	textUnmarshaler = reflect.TypeFor[encoding.TextUnmarshaler]()
	jsonUnmarshaler = reflect.TypeFor[json.Unmarshaler]()
)

// keysOf lists the keys of configuration type t (a struct), in the order of
// its fields, nested keys after the key that holds them.
func keysOf(t reflect.Type, prefix string) []Key {
	var keys []Key
	for i := range t.NumField() {
		f := t.Field(i)
		if f.Anonymous {
			keys = append(keys, keysOf(f.Type, prefix)...)
			continue
		}
		name := strings.Split(f.Tag.Get("json"), ",")[0]
		if name == "" || name == "-" || name == "version" {
			continue
		}
		k := Key{Name: prefix + name, Doc: f.Tag.Get("doc"), Default: f.Tag.Get("default"), Idiom: f.Tag.Get("idiom") == "true"}
		ft := f.Type
		if ft.Kind() == reflect.Pointer {
			ft = ft.Elem()
		}
		var nested []Key
		switch {
		case isWord(ft):
			e, _ := vocab.Lookup(ft)
			k.Type, k.Convention = "word", e.Name
			for _, w := range e.Words {
				k.Words = append(k.Words, Word{w.Text, w.Meaning})
			}
			if k.Default == "" {
				k.Default = fmt.Sprintf("%q", e.Words[0].Text)
			}
		case ft.Kind() == reflect.Struct:
			k.Type = "object"
			k.decodes = reflect.PointerTo(ft).Implements(jsonUnmarshaler)
			nested = keysOf(ft, k.Name+".")
		case ft.Kind() == reflect.Slice && ft.Elem().Kind() == reflect.Struct:
			k.Type = "[object]"
			k.decodes = reflect.PointerTo(ft.Elem()).Implements(jsonUnmarshaler)
			nested = keysOf(ft.Elem(), k.Name+"[].")
		case ft.Kind() == reflect.Slice:
			k.Type = "[" + scalarType(ft.Elem()) + "]"
		default:
			k.Type = scalarType(ft)
		}
		keys = append(append(keys, k), nested...)
	}
	return keys
}

func isWord(t reflect.Type) bool {
	_, ok := vocab.Lookup(t)
	return ok && reflect.PointerTo(t).Implements(textUnmarshaler)
}

func scalarType(t reflect.Type) string {
	switch t.Kind() {
	case reflect.Int:
		return "int"
	case reflect.Float64:
		return "number"
	case reflect.Bool:
		return "bool"
	case reflect.String:
		return "string"
	case reflect.Slice:
		return "[" + scalarType(t.Elem()) + "]"
	}
	return t.String()
}

// MaxConfigBytes is the largest configuration this package reads.
const MaxConfigBytes = 1 << 20

// decodeConfig reads one JSON object into c, refusing unknown keys, missing
// required keys, words that are not their convention's, trailing data and
// versions other than ConfigVersion. An empty config means {"version": 1}.
func decodeConfig(name string, data []byte, c any, keys []Key) error {
	if len(data) > MaxConfigBytes {
		return fmt.Errorf("%w: %s: configuration has %d bytes; want at most MaxConfigBytes = %d", ErrConfig, name, len(data), MaxConfigBytes)
	}
	if len(bytes.TrimSpace(data)) == 0 {
		data = []byte(`{"version":1}`)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(c); err != nil {
		return configError(name, err, data, keys)
	}
	if dec.More() {
		return fmt.Errorf("%w: %s: configuration holds more than one JSON value (malformed JSON); want one JSON object", ErrConfig, name)
	}
	if v := c.(versioned).version(); v != ConfigVersion {
		if v == 0 {
			return fmt.Errorf("%w: %s: key \"version\" is missing or 0; want %d, the version this plumb reads", ErrConfig, name, ConfigVersion)
		}
		return fmt.Errorf("%w: %s: key \"version\" = %d; want %d, the version this plumb reads", ErrConfig, name, v, ConfigVersion)
	}
	var present map[string]json.RawMessage
	if err := json.Unmarshal(data, &present); err != nil {
		return configError(name, err, data, keys)
	}
	for _, k := range keys {
		if k.Default == "required" && !strings.ContainsAny(k.Name, ".[") {
			if _, ok := present[k.Name]; !ok {
				return fmt.Errorf("%w: %s: key %q is missing; want %s", ErrConfig, name, k.Name, expectation(k))
			}
		}
	}
	return nil
}

// expectation says what key k takes: "one of a, b (doc)" for a word key,
// "doc (a number)" for the others.
func expectation(k Key) string {
	if k.Type != "word" {
		return fmt.Sprintf("%s (%s %s)", k.Doc, article(k.Type), k.Type)
	}
	w := make([]string, len(k.Words))
	for i, x := range k.Words {
		w[i] = x.Text
	}
	return fmt.Sprintf("one of %s (%s)", strings.Join(w, ", "), k.Doc)
}

// article is "an" before a type that starts with a vowel, else "a".
func article(typ string) string {
	if typ != "" && strings.ContainsRune("aeiou", rune(typ[0])) {
		return "an"
	}
	return "a"
}

// keysBeside lists the keys a configuration may hold beside key, the
// unknown one: the top-level keys, "version" included, or those of the
// object key is found in.
func keysBeside(key string, data []byte, keys []Key) []string {
	var top map[string]json.RawMessage
	_ = json.Unmarshal(data, &top) // a malformed configuration has failed before
	prefix := ""
	if _, ok := top[key]; !ok {
		for _, k := range keys {
			var inner map[string]json.RawMessage
			if k.Type == "object" && json.Unmarshal(top[k.Name], &inner) == nil {
				if _, ok := inner[key]; ok {
					prefix = k.Name + "."
					break
				}
			}
		}
	}
	var list []string
	if prefix == "" {
		list = append(list, "version")
	}
	for _, k := range keys {
		if rest, ok := strings.CutPrefix(k.Name, prefix); ok && !strings.ContainsAny(rest, ".[") {
			list = append(list, k.Name)
		}
	}
	return list
}

// configError turns a decoding error of configuration data into one that
// names the key.
func configError(name string, err error, data []byte, keys []Key) error {
	var syn *json.SyntaxError
	var typ *json.UnmarshalTypeError
	var word *vocab.Error
	switch {
	case errors.As(err, &word):
		var at []string
		for _, k := range keys {
			if k.Convention == word.Set {
				at = append(at, fmt.Sprintf("%q", k.Name))
			}
		}
		where := "a key"
		if len(at) > 0 {
			where = "key " + strings.Join(at, " or ")
		}
		return vocab.At(err, ErrConfig, name+": "+where)
	case strings.HasPrefix(err.Error(), "json: unknown field "):
		key, uerr := strconv.Unquote(strings.TrimPrefix(err.Error(), "json: unknown field "))
		if uerr != nil {
			key = strings.TrimPrefix(err.Error(), "json: unknown field ")
		}
		return fmt.Errorf("%w: %s: unknown key %q; want one of %s (see `plumb help %s`)", ErrConfig, name, key,
			strings.Join(keysBeside(key, data, keys), ", "), name)
	case errors.As(err, &syn):
		return fmt.Errorf("%w: %s: configuration is malformed JSON at byte %d (%v); want one JSON object", ErrConfig, name, syn.Offset, err)
	case errors.As(err, &typ):
		want := typ.Type.String()
		if isWord(typ.Type) {
			want = "a word: " + wordsOf(reflect.Zero(typ.Type).Interface())
		}
		return fmt.Errorf("%w: %s: key %q holds a JSON %s; want %s", ErrConfig, name, keyAt(typ.Field, keys), typ.Value, want)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return fmt.Errorf("%w: %s: configuration ends early (malformed JSON); want one JSON object", ErrConfig, name)
	}
	// Any other error is that of a value that decodes itself (a mask
	// description), which names what is wrong inside it.
	var at []string
	for _, k := range keys {
		if k.decodes {
			at = append(at, fmt.Sprintf("%q", k.Name))
		}
	}
	if len(at) == 0 {
		return configAt(err, name)
	}
	return configAt(err, name+": key "+strings.Join(at, " or "))
}

// keyAt is the key a decoding error's field path names: encoding/json
// puts the names of the embedded structs that hold a field before it
// ("attentionConfig.group"), which are no keys; the longest tail of the
// path that is a key is the key.
func keyAt(field string, keys []Key) string {
	parts := strings.Split(field, ".")
	for i := range parts {
		tail := strings.Join(parts[i:], ".")
		for _, k := range keys {
			if k.Name == tail {
				return tail
			}
		}
	}
	return field
}

// wordsOf lists the words of convention v's type, "a, b".
func wordsOf(v any) string {
	e, _ := vocab.Lookup(reflect.TypeOf(v))
	w := make([]string, len(e.Words))
	for i, x := range e.Words {
		w[i] = x.Text
	}
	return strings.Join(w, ", ")
}

// Convention is one of plumb's conventions as the configurations meet it:
// the Go type, what it decides, its words, and the keys that take them.
type Convention struct {
	Name     string   `json:"name"`     // the Go type, "attention.GroupMap"
	Noun     string   `json:"noun"`     // what one value is called, "group map"
	Question string   `json:"question"` // what the convention decides
	Words    []Word   `json:"words"`    // every word and its meaning, the default (zero value) first
	Aliases  []string `json:"aliases,omitempty"`
	Keys     []string `json:"keys,omitempty"` // "operation: key" for every key that takes the words
}

// MarshalJSON writes a Word as {"word": …, "meaning": …}.
func (w Word) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Word    string `json:"word"`
		Meaning string `json:"meaning"`
	}{w.Text, w.Meaning})
}

// Conventions lists every convention of the packages this program links
// (this package links attention, mask, posenc, norm, ffn, kvcache and compare),
// sorted by name, with the operation keys that take its words.
func Conventions() []Convention {
	used := map[string][]string{}
	for _, n := range Names() {
		o, _ := Lookup(n)
		for _, k := range o.Keys() {
			if k.Convention != "" {
				used[k.Convention] = append(used[k.Convention], n+": "+k.Name)
			}
		}
	}
	var out []Convention
	for _, e := range vocab.All() {
		c := Convention{Name: e.Name, Noun: e.Noun, Question: e.Question, Aliases: e.Aliases, Keys: used[e.Name]}
		for _, w := range e.Words {
			c.Words = append(c.Words, Word{w.Text, w.Meaning})
		}
		out = append(out, c)
	}
	return out
}
