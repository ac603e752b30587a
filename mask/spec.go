package mask

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"reflect"
	"slices"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/internal/vocab"
)

// Spec is a mask written as data: a kind and the parameters of its
// constructor. It is the form configurations and golden files use, in JSON
// an object such as {"kind": "window", "size": 4}; a list of Specs is their
// intersection (Build).
//
// Each kind takes exactly its own keys, all required:
//
//	kind          keys               constructor
//	full          —                  Full()
//	causal        —                  Causal()
//	band          before, after      Band(before, after), −1 for Unbounded
//	window        size               Window(size)
//	prefix        length             Prefix(length)
//	key-padding   valid              KeyPadding(valid)
//	packed        offsets, block     Packed(offsets, block)
//
// Decoding from JSON refuses a key that belongs to another kind ("size" on
// a "causal" entry) and a missing key, so that a slip in a configuration is
// an error and not a mask other than the one meant.
type Spec struct {
	Kind    Kind  `json:"kind" doc:"which keys each query may see" default:"required"`
	Before  int   `json:"before,omitempty" doc:"band: key j is visible to the query at position p iff −before ≤ j − p ≤ after; −1 for no limit" default:"required by band"`
	After   int   `json:"after,omitempty" doc:"band: see before" default:"required by band"`
	Size    int   `json:"size,omitempty" doc:"window: that many keys ending at the query, the query included" default:"required by window"`
	Length  int   `json:"length,omitempty" doc:"prefix: keys below it are visible to every query" default:"required by prefix"`
	Valid   []int `json:"valid,omitempty" doc:"key-padding: one valid key count per batch entry" default:"required by key-padding"`
	Offsets []int `json:"offsets,omitempty" doc:"packed: sequence starts, from 0 to the key count" default:"required by packed"`
	Block   Block `json:"block,omitempty" doc:"packed: what a query sees inside its own sequence" default:"required by packed"`
}

// specKeys lists, for each kind, the keys it takes.
var specKeys = map[Kind][]string{
	KindFull:       nil,
	KindCausal:     nil,
	KindBand:       {"before", "after"},
	KindWindow:     {"size"},
	KindPrefix:     {"length"},
	KindKeyPadding: {"valid"},
	KindPacked:     {"offsets", "block"},
}

// SpecKeys returns the keys a Spec of kind k takes besides "kind".
func SpecKeys(k Kind) []string { return slices.Clone(specKeys[k]) }

// UnmarshalJSON decodes one Spec, refusing unknown keys, keys of another
// kind, missing keys, null values and values of the wrong JSON type with an
// error wrapping ErrSpec (or ErrKind for an unknown kind, ErrBlock for an
// unknown block). A nil receiver is an error wrapping ErrSpec, not a
// panic.
func (s *Spec) UnmarshalJSON(b []byte) error {
	const fn = "Spec.UnmarshalJSON"
	if s == nil {
		return fmt.Errorf("%w: %s: receiver = nil; want a *Spec to set", ErrSpec, fn)
	}
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(b, &keys); err != nil {
		return fmt.Errorf("%w: %s: mask = %s; want a JSON object with a \"kind\" (%w)", ErrSpec, fn, jsonKind(b), err)
	}
	type plain Spec
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var p plain
	if err := dec.Decode(&p); err != nil {
		if strings.HasPrefix(err.Error(), "json: unknown field ") {
			return fmt.Errorf("%w: %s: key %s; want one of kind, %s", ErrSpec, fn,
				strings.TrimPrefix(err.Error(), "json: unknown field "), strings.Join(allSpecKeys(), ", "))
		}
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return fmt.Errorf("%w: %s: key %q holds a JSON %s; want %v", ErrSpec, fn, te.Field, te.Value, te.Type)
		}
		// A word that is not a kind or a block: ErrKind or ErrBlock.
		for _, w := range []struct {
			key      string
			sentinel error
		}{{"kind", ErrKind}, {"block", ErrBlock}} {
			if errors.Is(err, w.sentinel) {
				return vocab.At(err, w.sentinel, fn+": key \""+w.key+"\"")
			}
		}
		return err
	}
	for _, k := range slices.Sorted(maps.Keys(keys)) {
		if bytes.Equal(bytes.TrimSpace(keys[k]), []byte("null")) {
			return fmt.Errorf("%w: %s: key %q = null; want its value (-1 for an unbounded side of a band)", ErrSpec, fn, k)
		}
	}
	if _, ok := keys["kind"]; !ok {
		return fmt.Errorf("%w: %s: key \"kind\" is missing; want one of %s", ErrSpec, fn, strings.Join(kindWords.Texts(), ", "))
	}
	want := specKeys[p.Kind]
	for _, k := range want {
		if _, ok := keys[k]; !ok {
			return fmt.Errorf("%w: %s: key %q is missing; want it with kind %q", ErrSpec, fn, k, p.Kind)
		}
	}
	for _, k := range slices.Sorted(maps.Keys(keys)) {
		if k != "kind" && !slices.Contains(want, k) {
			return fmt.Errorf("%w: %s: key %q with kind %q; want %s", ErrSpec, fn, k, p.Kind, describeKeys(want))
		}
	}
	*s = Spec(p)
	return nil
}

// jsonKind names what b holds, for a message: "a JSON array".
func jsonKind(b []byte) string {
	t := bytes.TrimSpace(b)
	if !json.Valid(t) || len(t) == 0 {
		return fmt.Sprintf("%.40q, not JSON", t)
	}
	switch t[0] {
	case '[':
		return "a JSON array"
	case '"':
		return "a JSON string"
	case 't', 'f':
		return "a JSON boolean"
	case 'n':
		return "JSON null"
	case '{':
		return "a JSON object"
	}
	return "a JSON number"
}

func allSpecKeys() []string {
	var all []string
	for _, k := range kindWords.Values() {
		for _, key := range specKeys[k] {
			if !slices.Contains(all, key) {
				all = append(all, key)
			}
		}
	}
	return all
}

// describeKeys says which keys a kind takes: `only "kind" and "size"`.
func describeKeys(keys []string) string {
	if len(keys) == 0 {
		return `no key but "kind"`
	}
	q := make([]string, len(keys))
	for i, k := range keys {
		q[i] = strconv.Quote(k)
	}
	return `only "kind" and ` + strings.Join(q, " and ")
}

// MarshalJSON writes the Spec with exactly the keys of its kind, each as
// its field's json tag spells it.
func (s Spec) MarshalJSON() ([]byte, error) {
	if err := kindWords.CheckAt("Spec.MarshalJSON: Spec.Kind", s.Kind); err != nil {
		return nil, err
	}
	m := map[string]any{"kind": s.Kind}
	v := reflect.ValueOf(s)
	for i := range v.NumField() {
		key, _, _ := strings.Cut(v.Type().Field(i).Tag.Get("json"), ",")
		if slices.Contains(specKeys[s.Kind], key) {
			m[key] = v.Field(i).Interface()
		}
	}
	return json.Marshal(m)
}

// Mask builds the mask the Spec describes; an error is the constructor's,
// naming the Spec's field ("mask: invalid window: Spec.Mask: Spec.Size =
// 0; want ≥ 1: …").
func (s Spec) Mask() (Mask, error) { return s.mask(args{fn: "Spec.Mask", owner: "Spec"}) }

// mask is Mask with the names of a's messages.
func (s Spec) mask(a args) (Mask, error) {
	switch s.Kind {
	case KindFull:
		return Full(), nil
	case KindCausal:
		return Causal(), nil
	case KindBand:
		return band(a, s.Before, s.After)
	case KindWindow:
		return window(a, s.Size)
	case KindPrefix:
		return prefix(a, s.Length)
	case KindKeyPadding:
		return keyPadding(a, s.Valid)
	case KindPacked:
		return packed(a, s.Offsets, s.Block)
	}
	return Mask{}, kindWords.CheckAt(a.fn+": "+a.name("kind", "Kind"), s.Kind)
}

// Build is the intersection of the masks the Specs describe; no Spec at
// all is Full (every key visible), the default of a configuration that
// names no mask.
func Build(specs []Spec) (Mask, error) {
	if len(specs) == 0 {
		return Full(), nil
	}
	ms := make([]Mask, len(specs))
	for i, s := range specs {
		m, err := s.mask(args{fn: "Build", owner: fmt.Sprintf("specs[%d]", i)})
		if err != nil {
			return Mask{}, err
		}
		ms[i] = m
	}
	return Intersect(ms...)
}
