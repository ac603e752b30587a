package mask

import (
	"encoding/json"
	"errors"
	"regexp"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// TestSpecJSONRoundTrip: every kind written as JSON holds exactly its own
// keys, reads back to the same Spec, and builds the mask of its
// constructor (the table of mask/spec.go).
func TestSpecJSONRoundTrip(t *testing.T) {
	tests := []struct {
		spec Spec
		json string
		mask Mask
	}{
		{Spec{Kind: KindFull}, `{"kind":"full"}`, Full()},
		{Spec{Kind: KindCausal}, `{"kind":"causal"}`, Causal()},
		{Spec{Kind: KindBand, Before: 2, After: 1}, `{"after":1,"before":2,"kind":"band"}`, must(t)(Band(2, 1))},
		{Spec{Kind: KindBand, Before: Unbounded, After: 0}, `{"after":0,"before":-1,"kind":"band"}`, must(t)(Band(Unbounded, 0))},
		{Spec{Kind: KindWindow, Size: 4}, `{"kind":"window","size":4}`, must(t)(Window(4))},
		{Spec{Kind: KindPrefix, Length: 0}, `{"kind":"prefix","length":0}`, must(t)(Prefix(0))},
		{Spec{Kind: KindKeyPadding, Valid: []int{3, 0}}, `{"kind":"key-padding","valid":[3,0]}`, must(t)(KeyPadding([]int{3, 0}))},
		{Spec{Kind: KindPacked, Offsets: []int{0, 2, 5}, Block: BlockCausal}, `{"block":"causal","kind":"packed","offsets":[0,2,5]}`, must(t)(Packed([]int{0, 2, 5}, BlockCausal))},
		{Spec{Kind: KindPacked, Offsets: []int{0, 5}, Block: BlockFull}, `{"block":"full","kind":"packed","offsets":[0,5]}`, must(t)(Packed([]int{0, 5}, BlockFull))},
	}
	seen := map[Kind]bool{}
	g := Geometry{Batch: 2, Lq: 5, Lk: 5}
	for _, tc := range tests {
		seen[tc.spec.Kind] = true
		b, err := json.Marshal(tc.spec)
		ensure.NoError(t, err)
		expect.Equal(t, tc.json, string(b))
		var back Spec
		ensure.NoError(t, json.Unmarshal(b, &back), tc.json)
		if d := cmp.Diff(tc.spec, back); d != "" {
			t.Errorf("%s read back (-want +got):\n%s", tc.json, d)
		}
		m, err := back.Mask()
		ensure.NoError(t, err)
		expect.Equal(t, tc.mask.String(), m.String(), tc.json)
		expect.Equal(t, vis(t, tc.mask, g), vis(t, m, g), tc.json)
		expect.ElementsMatch(t, SpecKeys(tc.spec.Kind), jsonKeys(t, b), "%s: the keys of its kind", tc.json)
	}
	for _, k := range KindFull.Values() {
		expect.True(t, seen[k], "kind %v has no round-trip case", k)
	}
}

// jsonKeys lists the keys of a JSON object other than "kind".
func jsonKeys(t *testing.T, b []byte) []string {
	t.Helper()
	var m map[string]json.RawMessage
	ensure.NoError(t, json.Unmarshal(b, &m))
	var keys []string
	for k := range m {
		if k != "kind" {
			keys = append(keys, k)
		}
	}
	return keys
}

// TestKindMeaningsNameKeys: the meaning of each kind, which configuration
// help prints beside its word, names every key of the kind as a Spec
// spells it in JSON (SpecKeys), so that the help says what each key does.
func TestKindMeaningsNameKeys(t *testing.T) {
	word := regexp.MustCompile(`[a-z]+`)
	for _, k := range KindFull.Values() {
		words := word.FindAllString(k.Meaning(), -1)
		for _, key := range SpecKeys(k) {
			expect.Contains(t, words, key, "kind %v: meaning %q does not name key %q", k, k.Meaning(), key)
		}
	}
}

// TestBuild: a list of Specs is their intersection, no Spec is Full, and a
// constructor's error names the entry.
func TestBuild(t *testing.T) {
	var specs []Spec
	ensure.NoError(t, json.Unmarshal([]byte(`[{"kind":"window","size":2},{"kind":"key-padding","valid":[3]}]`), &specs))
	m, err := Build(specs)
	ensure.NoError(t, err)
	g := Geometry{Batch: 1, Lq: 5, Lk: 5}
	expect.Equal(t, vis(t, must(t)(Intersect(must(t)(Window(2)), must(t)(KeyPadding([]int{3})))), g), vis(t, m, g))
	expect.Equal(t, "Intersect(Window(2), KeyPadding([3]))", m.String())

	for _, none := range [][]Spec{nil, {}} {
		m, err = Build(none)
		ensure.NoError(t, err)
		expect.Equal(t, vis(t, Full(), g), vis(t, m, g))
	}

	_, err = Build([]Spec{{Kind: KindCausal}, {Kind: KindWindow, Size: 0}})
	expect.ErrorIs(t, err, ErrWindow)
	expect.EqualError(t, err, "mask: invalid window: Build: specs[1].Size = 0; want ≥ 1: a window holds at least the query's own key")
	_, err = Build([]Spec{{Kind: Kind(9)}})
	expect.ErrorIs(t, err, ErrKind)
	expect.EqualError(t, err, "mask: invalid mask kind: Build: specs[0].Kind = 9; want one of full, causal, band, window, prefix, key-padding, packed")
	_, err = Build([]Spec{{Kind: KindBand, Before: 1, After: -2}})
	expect.EqualError(t, err, "mask: invalid band: Build: specs[0].After = -2; want ≥ 0 or Unbounded")
	_, err = Spec{Kind: KindPacked, Offsets: []int{0, 2}, Block: 4}.Mask()
	expect.ErrorIs(t, err, ErrBlock)
	expect.EqualError(t, err, "mask: invalid block kind: Spec.Mask: Spec.Block = 4; want one of causal, full")
	_, err = Spec{Kind: KindPrefix, Length: -1}.Mask()
	expect.EqualError(t, err, "mask: invalid prefix: Spec.Mask: Spec.Length = -1; want ≥ 0")
}

// TestSpecErrors: a slip in a mask's JSON is an error wrapping one
// sentinel, naming the key, and never a mask other than the one meant.
func TestSpecErrors(t *testing.T) {
	tests := []struct {
		name, json string
		sentinel   error
		want       string
	}{
		{"missing kind", `{}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "kind" is missing; want one of full, causal, band, window, prefix, key-padding, packed`},
		{"missing kind with a key", `{"size":3}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "kind" is missing; want one of full, causal, band, window, prefix, key-padding, packed`},
		{"unknown kind", `{"kind":"diagonal"}`, ErrKind, `mask: invalid mask kind: Spec.UnmarshalJSON: key "kind" = "diagonal"; want one of full, causal, band, window, prefix, key-padding, packed`},
		{"old spelling of a kind", `{"kind":"padding","valid":[1]}`, ErrKind, `mask: invalid mask kind: Spec.UnmarshalJSON: key "kind" = "padding"; want one of full, causal, band, window, prefix, key-padding, packed`},
		{"key of another kind", `{"kind":"causal","size":3}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "size" with kind "causal"; want no key but "kind"`},
		{"keys of other kinds, the first named", `{"kind":"window","size":3,"valid":[1],"length":2}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "length" with kind "window"; want only "kind" and "size"`},
		{"band missing after", `{"kind":"band","before":1}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "after" is missing; want it with kind "band"`},
		{"band with another key", `{"kind":"band","before":1,"after":0,"size":2}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "size" with kind "band"; want only "kind" and "before" and "after"`},
		{"window missing size", `{"kind":"window"}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "size" is missing; want it with kind "window"`},
		{"prefix missing length", `{"kind":"prefix"}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "length" is missing; want it with kind "prefix"`},
		{"key padding missing valid", `{"kind":"key-padding"}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "valid" is missing; want it with kind "key-padding"`},
		{"packed missing block", `{"kind":"packed","offsets":[0,2]}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "block" is missing; want it with kind "packed"`},
		{"unknown key", `{"kind":"full","lanes":3}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "lanes"; want one of kind, before, after, size, length, valid, offsets, block`},
		{"old key of a window", `{"kind":"window","n":3}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "n"; want one of kind, before, after, size, length, valid, offsets, block`},
		{"unknown block", `{"kind":"packed","offsets":[0,2],"block":"diagonal"}`, ErrBlock, `mask: invalid block kind: Spec.UnmarshalJSON: key "block" = "diagonal"; want one of causal, full`},
		{"null kind", `{"kind":null}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "kind" = null; want its value (-1 for an unbounded side of a band)`},
		{"null extent", `{"kind":"band","before":null,"after":2}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "before" = null; want its value (-1 for an unbounded side of a band)`},
		{"null block", `{"kind":"packed","offsets":[0,2],"block":null}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "block" = null; want its value (-1 for an unbounded side of a band)`},
		{"wrong type", `{"kind":"window","size":"3"}`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: key "size" holds a JSON string; want int`},
		{"not an object", `[{"kind":"full"}]`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: mask = a JSON array; want a JSON object with a "kind" (` + jsonError(`[]`) + `)`},
		{"a number", `3`, ErrSpec, `mask: invalid mask description: Spec.UnmarshalJSON: mask = a JSON number; want a JSON object with a "kind" (` + jsonError(`3`) + `)`},
	}
	sentinels := []error{ErrSpec, ErrKind, ErrBlock}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := Spec{Kind: KindWindow, Size: 7}
			err := json.Unmarshal([]byte(tc.json), &s)
			ensure.Error(t, err)
			expect.ErrorIs(t, err, tc.sentinel)
			expect.EqualError(t, err, tc.want)
			for _, o := range sentinels {
				if o != tc.sentinel {
					expect.False(t, errors.Is(err, o), "%v also wraps %v", err, o)
				}
			}
			expect.Equal(t, Spec{Kind: KindWindow, Size: 7}, s, "a refused Spec is left alone")
			// Inside a list, as configurations hold them, the error is the
			// same.
			var list []Spec
			err = json.Unmarshal([]byte("["+tc.json+"]"), &list)
			expect.ErrorIs(t, err, tc.sentinel)
			expect.EqualError(t, err, tc.want)
		})
	}
	var typ *json.UnmarshalTypeError
	expect.ErrorAs(t, json.Unmarshal([]byte(`[3]`), &[]Spec{}), &typ, "a value that is not an object keeps json's own error")
	_, err := json.Marshal(Spec{Kind: Kind(9)})
	expect.ErrorIs(t, err, ErrKind)
	expect.ErrorContains(t, err, "mask: invalid mask kind: Spec.MarshalJSON: Spec.Kind = 9; want one of full")
}

// jsonError is encoding/json's own error for b read as a JSON object, which
// a Spec's error quotes (and wraps).
func jsonError(b string) string {
	var m map[string]json.RawMessage
	return json.Unmarshal([]byte(b), &m).Error()
}

// FuzzSpec reads arbitrary JSON as a list of Specs: no panic; an error
// wraps a sentinel of this package or is JSON's own syntax error; a list
// read without error writes back to JSON that reads to the same list.
func FuzzSpec(f *testing.F) {
	f.Add([]byte(`[{"kind":"band","before":-1,"after":2},{"kind":"key-padding","valid":[3]}]`))
	f.Add([]byte(`[{"kind":"packed","offsets":[0,2,5],"block":"full"}]`))
	f.Add([]byte(`[{"kind":"window","size":null}]`))
	f.Add([]byte(`[{"kind":"prefix","length":1e99}]`))
	f.Fuzz(func(t *testing.T, b []byte) {
		var specs []Spec
		err := json.Unmarshal(b, &specs)
		if err != nil {
			var se *json.SyntaxError
			var te *json.UnmarshalTypeError
			if !errors.Is(err, ErrSpec) && !errors.Is(err, ErrKind) && !errors.Is(err, ErrBlock) &&
				!errors.As(err, &se) && !errors.As(err, &te) {
				t.Fatalf("%s: error wraps no sentinel: %v", b, err)
			}
			return
		}
		out, err := json.Marshal(specs)
		if err != nil {
			t.Fatalf("%s: read, but does not write: %v", b, err)
		}
		var back []Spec
		if err := json.Unmarshal(out, &back); err != nil {
			t.Fatalf("%s: wrote %s, which does not read: %v", b, out, err)
		}
		if d := cmp.Diff(specs, back); d != "" {
			t.Fatalf("%s: round trip through %s (-first +second):\n%s", b, out, d)
		}
		if _, err := Build(specs); err != nil && !errors.Is(err, ErrBand) && !errors.Is(err, ErrWindow) &&
			!errors.Is(err, ErrPrefix) && !errors.Is(err, ErrValidLength) && !errors.Is(err, ErrSegments) {
			t.Fatalf("%s: Build: %v", b, err)
		}
	})
}

// TestALiBiDistance is the distance of each form (mask/alibi.go): for keys
// up to the query all three are the paper's p − j (Press et al. 2022,
// arXiv 2108.12409, §3); after it causal keeps the formula (a negative
// distance, so a positive bias), symmetric takes |p − j| and past-only 0
// (common practice).
func TestALiBiDistance(t *testing.T) {
	p := 3
	want := map[ALiBiForm][]int{ // j = 0 … 6
		ALiBiCausal:    {3, 2, 1, 0, -1, -2, -3},
		ALiBiSymmetric: {3, 2, 1, 0, 1, 2, 3},
		ALiBiPastOnly:  {3, 2, 1, 0, 0, 0, 0},
	}
	for _, f := range ALiBiCausal.Values() {
		ensure.Contains(t, want, f, "form %v has no expected distances", f)
		var got []int
		for j := range 7 {
			got = append(got, f.Distance(p, j))
		}
		expect.Equal(t, want[f], got, "%v", f)
	}
	expect.Zero(t, ALiBiForm(7).Distance(3, 0), "an invalid form")
	expect.Error(t, ALiBiForm(7).Check())
}

// TestALiBiFormText: the words of mask.ALiBiForm read and write as text,
// and any other word is an error wrapping ErrALiBi that lists them.
func TestALiBiFormText(t *testing.T) {
	var cfg struct {
		Forms []ALiBiForm `json:"forms"`
	}
	ensure.NoError(t, json.Unmarshal([]byte(`{"forms":["causal","symmetric","past-only"]}`), &cfg))
	expect.Equal(t, []ALiBiForm{ALiBiCausal, ALiBiSymmetric, ALiBiPastOnly}, cfg.Forms)
	b, err := json.Marshal(cfg)
	ensure.NoError(t, err)
	expect.Equal(t, `{"forms":["causal","symmetric","past-only"]}`, string(b))
	for _, f := range ALiBiCausal.Values() {
		expect.NotEmpty(t, f.Meaning(), "%v", f)
		expect.NoError(t, f.Check())
	}

	var f ALiBiForm
	err = json.Unmarshal([]byte(`"ALiBiSymmetric"`), &f)
	expect.ErrorIs(t, err, ErrALiBi)
	expect.ErrorContains(t, err, `mask: invalid ALiBi form: ALiBi form = "ALiBiSymmetric"; want one of causal, symmetric, past-only`)
	_, err = json.Marshal(ALiBiForm(3))
	expect.ErrorIs(t, err, ErrALiBi)
	expect.ErrorContains(t, ALiBiForm(3).Check(), "mask: invalid ALiBi form: ALiBi form = 3; want one of causal, symmetric, past-only")
}
