package mask

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strings"
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
// unknown block).
func (s *Spec) UnmarshalJSON(b []byte) error {
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(b, &keys); err != nil {
		return fmt.Errorf("%w: a mask is a JSON object with a \"kind\": %w", ErrSpec, err)
	}
	type plain Spec
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var p plain
	if err := dec.Decode(&p); err != nil {
		if strings.HasPrefix(err.Error(), "json: unknown field ") {
			return fmt.Errorf("%w: unknown key %s; a mask takes kind, %s", ErrSpec,
				strings.TrimPrefix(err.Error(), "json: unknown field "), strings.Join(allSpecKeys(), ", "))
		}
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return fmt.Errorf("%w: key %q holds a JSON %s; want %v", ErrSpec, te.Field, te.Value, te.Type)
		}
		return err // a word that is not a kind or a block: ErrKind or ErrBlock
	}
	for _, k := range slices.Sorted(maps.Keys(keys)) {
		if bytes.Equal(bytes.TrimSpace(keys[k]), []byte("null")) {
			return fmt.Errorf("%w: key %q is null; give its value (-1 for an unbounded side of a band)", ErrSpec, k)
		}
	}
	if _, ok := keys["kind"]; !ok {
		return fmt.Errorf("%w: key \"kind\" is missing; want one of %s", ErrSpec, strings.Join(kindWords.Texts(), ", "))
	}
	want := specKeys[p.Kind]
	for _, k := range want {
		if _, ok := keys[k]; !ok {
			return fmt.Errorf("%w: kind %q needs key %q", ErrSpec, p.Kind, k)
		}
	}
	for _, k := range slices.Sorted(maps.Keys(keys)) {
		if k != "kind" && !slices.Contains(want, k) {
			return fmt.Errorf("%w: key %q does not apply to kind %q (it takes %s)", ErrSpec, k, p.Kind, describeKeys(want))
		}
	}
	*s = Spec(p)
	return nil
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

func describeKeys(keys []string) string {
	if len(keys) == 0 {
		return "no other key"
	}
	return strings.Join(keys, " and ")
}

// MarshalJSON writes the Spec with exactly the keys of its kind.
func (s Spec) MarshalJSON() ([]byte, error) {
	if err := kindWords.Check(s.Kind); err != nil {
		return nil, err
	}
	m := map[string]any{"kind": s.Kind}
	for _, k := range specKeys[s.Kind] {
		switch k {
		case "before":
			m[k] = s.Before
		case "after":
			m[k] = s.After
		case "size":
			m[k] = s.Size
		case "length":
			m[k] = s.Length
		case "valid":
			m[k] = s.Valid
		case "offsets":
			m[k] = s.Offsets
		case "block":
			m[k] = s.Block
		}
	}
	return json.Marshal(m)
}

// Mask builds the mask the Spec describes; the constructor's error is
// returned as it is.
func (s Spec) Mask() (Mask, error) {
	switch s.Kind {
	case KindFull:
		return Full(), nil
	case KindCausal:
		return Causal(), nil
	case KindBand:
		return Band(s.Before, s.After)
	case KindWindow:
		return Window(s.Size)
	case KindPrefix:
		return Prefix(s.Length)
	case KindKeyPadding:
		return KeyPadding(s.Valid)
	case KindPacked:
		return Packed(s.Offsets, s.Block)
	}
	return Mask{}, kindWords.Check(s.Kind)
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
		m, err := s.Mask()
		if err != nil {
			return Mask{}, fmt.Errorf("mask %d (%s): %w", i, s.Kind, err)
		}
		ms[i] = m
	}
	return Intersect(ms...)
}
