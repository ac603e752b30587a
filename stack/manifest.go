package stack

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/posenc"
)

// ManifestFormat is the value of a manifest's "format" key.
const ManifestFormat = "plumb-stack/1"

// LayerMark is the text a layer's weight name carries where the layer's
// index goes: "layers.{layer}.q" names layers.0.q, layers.1.q, ….
const LayerMark = "{layer}"

// Manifest is plumb's description of a stack on disk: its configuration
// and where each weight is. It is JSON, decoded strictly (a key it does
// not define is an error); see the package documentation for a complete
// example.
type Manifest struct {
	Format string `json:"format"` // ManifestFormat
	// Weights is the .npz archive or the directory of .npy files that
	// holds the weights, relative to the manifest's directory.
	Weights string `json:"weights"`

	Layers  int `json:"layers"`
	Vocab   int `json:"vocab"`
	Width   int `json:"width"`
	Heads   int `json:"heads"`
	HeadsKV int `json:"heads_kv"`
	HeadDim int `json:"head_dim"`
	Hidden  int `json:"hidden"`

	Form        block.Form            `json:"form"`
	NormKind    block.NormKind        `json:"norm_kind"`
	Epsilon     float64               `json:"epsilon"`
	Placement   norm.EpsilonPlacement `json:"epsilon_placement"`
	WeightForm  norm.WeightForm       `json:"weight_form"`
	WeightOrder ffn.Layout            `json:"weight_order"`
	Act         ffn.Act               `json:"activation"`
	Gated       bool                  `json:"gated"`
	Group       attention.GroupMap    `json:"group"`
	// Rotary, when present, rotates queries and keys: {"base": b,
	// "rotated": r, "pairing": p}; rotated 0 means head_dim.
	Rotary *ManifestRotary `json:"rotary"`
	// Sinusoidal, when present, adds the sinusoidal encoding:
	// {"base": b, "layout": l}; base 0 means 10000.
	Sinusoidal *ManifestSinusoidal `json:"sinusoidal"`
	FinalNorm  bool                `json:"final_norm"`
	Tied       bool                `json:"tied"`

	// Names maps the keys embed, final_norm, final_norm_bias and head to
	// array names.
	Names map[string]string `json:"names"`
	// LayerNames maps each layer key (norm1, q, ffn_w1, …) to an array
	// name carrying LayerMark.
	LayerNames map[string]string `json:"layer_names"`

	dir string // the manifest's directory
}

// ManifestRotary is the rotary encoding of a manifest.
type ManifestRotary struct {
	Base    float64        `json:"base"`
	Rotated int            `json:"rotated"`
	Pairing posenc.Pairing `json:"pairing"`
}

// ManifestSinusoidal is the sinusoidal encoding of a manifest.
type ManifestSinusoidal struct {
	Base   float64       `json:"base"`
	Layout posenc.Layout `json:"layout"`
}

// ReadManifest reads the manifest at path. The weights it names are not
// opened until a Source reads them.
//
// Special cases are:
//
//	a key the manifest does not define  ErrManifest, naming it
//	a word none of its convention's     that convention's sentinel
//	format not ManifestFormat           ErrManifest
//	a name key or layer key undefined   ErrManifest
//	a layer name without LayerMark      ErrManifest
//	a configuration out of range        ErrConfig (Manifest.Config)
func ReadManifest(path string) (*Manifest, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	m, err := ParseManifest(b)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	m.dir = filepath.Dir(path)
	return m, nil
}

// ParseManifest decodes a manifest from its JSON text; the weights'
// location is taken relative to the current directory.
func ParseManifest(b []byte) (*Manifest, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	m := &Manifest{dir: "."}
	if err := dec.Decode(m); err != nil {
		return nil, fmt.Errorf("%w: ParseManifest: %w", ErrManifest, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("%w: ParseManifest: text after the manifest's object; want one JSON object", ErrManifest)
	}
	if m.Format != ManifestFormat {
		return nil, fmt.Errorf("%w: ParseManifest: format = %q; want %q", ErrManifest, m.Format, ManifestFormat)
	}
	if m.Weights == "" {
		return nil, fmt.Errorf("%w: ParseManifest: weights = \"\"; want the .npz archive or directory of .npy files holding the weights", ErrManifest)
	}
	for k := range m.Names {
		if k != keyEmbed && k != keyNorm && k != keyNormBias && k != keyHead {
			return nil, fmt.Errorf("%w: ParseManifest: names has the key %q; want one of %s, %s, %s, %s", ErrManifest, k, keyEmbed, keyNorm, keyNormBias, keyHead)
		}
	}
	for k, v := range m.LayerNames {
		if !isLayerKey(k) {
			return nil, fmt.Errorf("%w: ParseManifest: layer_names has the key %q; want one of %s", ErrManifest, k, strings.Join(layerKeys, ", "))
		}
		if !strings.Contains(v, LayerMark) {
			return nil, fmt.Errorf("%w: ParseManifest: layer_names[%q] = %q; want a name carrying %s where the layer index goes", ErrManifest, k, v, LayerMark)
		}
	}
	if _, err := m.Config(); err != nil {
		return nil, err
	}
	return m, nil
}

func isLayerKey(k string) bool {
	for _, v := range layerKeys {
		if v == k {
			return true
		}
	}
	return false
}

// Config returns the stack configuration the manifest describes: a causal
// mask, the attention's other options at their zero values.
func (m *Manifest) Config() (Config, error) {
	c := Config{Layers: m.Layers, Vocab: m.Vocab, Width: m.Width, Heads: m.Heads, HeadsKV: m.HeadsKV, HeadDim: m.HeadDim, Hidden: m.Hidden,
		FinalNorm: m.FinalNorm, Tied: m.Tied}
	c.Block = block.Options{Form: m.Form, NormKind: m.NormKind, Norm: norm.Options{Epsilon: m.Epsilon, Placement: m.Placement, Weight: m.WeightForm},
		WeightOrder: m.WeightOrder, FFN: ffn.Options{Act: m.Act, Gated: m.Gated}}
	c.Block.Attention.Mask = mask.Causal()
	c.Block.Attention.Group = m.Group
	if r := m.Rotary; r != nil {
		c.Block.Rotary = &posenc.Rotary{Dim: m.HeadDim, Rotated: r.Rotated, Base: r.Base, Pairing: r.Pairing}
	}
	if s := m.Sinusoidal; s != nil {
		c.Sinusoidal = &posenc.Sinusoidal{Dim: m.Width, Base: s.Base, Layout: s.Layout}
	}
	if err := c.check("Manifest.Config"); err != nil {
		return Config{}, err
	}
	return c, nil
}

// Files is a Source reading a manifest's weights from its .npz archive or
// directory of .npy files, one array at a time: Layer(i) reads layer i's
// arrays only, converted to T, and keeps nothing.
type Files[T ~float32 | ~float64] struct {
	m   *Manifest
	c   Config
	loc string
}

// NewFiles returns the Source of the weights manifest m names.
func NewFiles[T ~float32 | ~float64](m *Manifest) (*Files[T], error) {
	if m == nil {
		return nil, fmt.Errorf("%w: NewFiles: m = nil; want a Manifest", ErrManifest)
	}
	c, err := m.Config()
	if err != nil {
		return nil, err
	}
	loc := m.Weights
	if !filepath.IsAbs(loc) {
		loc = filepath.Join(m.dir, loc)
	}
	if _, err := os.Stat(loc); err != nil {
		return nil, fmt.Errorf("%w: NewFiles: weights = %q: %w", ErrManifest, m.Weights, err)
	}
	return &Files[T]{m: m, c: c, loc: loc}, nil
}

// Globals reads the embedding, the final norm and the head.
func (f *Files[T]) Globals() (Globals[T], error) {
	var g Globals[T]
	err := f.read(-1, globalSpecs(&f.c), f.m.Names, globalSlots(&g))
	return g, err
}

// Layer reads layer i's weights.
func (f *Files[T]) Layer(i int) (block.Weights[T], error) {
	var w block.Weights[T]
	if i < 0 || i >= f.c.Layers {
		return w, fmt.Errorf("%w: Files.Layer: i = %d; want a layer 0 … %d", ErrWeight, i, f.c.Layers-1)
	}
	err := f.read(i, layerSpecs(&f.c), f.m.LayerNames, layerSlots(&w))
	return w, err
}

// read reads the arrays of specs into slots, names giving each key's
// array name (LayerMark replaced by layer).
func (f *Files[T]) read(layer int, specs []spec, names map[string]string, slots map[string]*[]T) error {
	fn := "Files.Globals"
	if layer >= 0 {
		fn = "Files.Layer"
	}
	var arc *npy.Archive
	if st, err := os.Stat(f.loc); err == nil && !st.IsDir() {
		if arc, err = npy.OpenArchive(f.loc); err != nil {
			return err
		}
		defer arc.Close()
	}
	for _, s := range specs {
		name, ok := names[s.key]
		if !ok || name == "" {
			if s.need == required {
				return fmt.Errorf("%w: %s: %s is missing: the manifest names no array for it; want %s", ErrWeight, fn, where(layer, s.key), shapeText(s.shape))
			}
			continue
		}
		if s.need == forbidden {
			return fmt.Errorf("%w: %s: %s is named %q; want none: this configuration has no use for it", ErrWeight, fn, where(layer, s.key), name)
		}
		name = strings.ReplaceAll(name, LayerMark, strconv.Itoa(layer))
		var a *npy.Array
		var err error
		if arc != nil {
			a, err = arc.Read(name)
		} else {
			a, err = npy.ReadFile(filepath.Join(f.loc, name+".npy"))
		}
		if errors.Is(err, npy.ErrMember) || errors.Is(err, os.ErrNotExist) {
			return fmt.Errorf("%w: %s: %s, the array %q, is missing from %s: %w", ErrWeight, fn, where(layer, s.key), name, f.m.Weights, err)
		}
		if err != nil {
			return fmt.Errorf("%s: %s, the array %q: %w", fn, where(layer, s.key), name, err)
		}
		if !sameShape(a.Shape, s.shape) {
			return fmt.Errorf("%w: %s: %s, the array %q, has shape %s; want %s", ErrWeight, fn, where(layer, s.key), name, shapeText(a.Shape), shapeText(s.shape))
		}
		v, err := a.Float64s()
		if err != nil {
			return fmt.Errorf("%s: %s, the array %q: %w", fn, where(layer, s.key), name, err)
		}
		*slots[s.key] = num.Convert[T](v)
	}
	return nil
}

func sameShape(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// IDs returns the token ids of an integer array (int8 … int64, uint8 …
// uint32), in row-major order. Errors wrap ErrToken: an array of floats
// or booleans, or nil.
func IDs(a *npy.Array) ([]int, error) {
	if a == nil {
		return nil, fmt.Errorf("%w: IDs: a = nil; want an array of integers", ErrToken)
	}
	switch v := a.Values.(type) {
	case []int64:
		return ints(v), nil
	case []int32:
		return ints(v), nil
	case []int16:
		return ints(v), nil
	case []int8:
		return ints(v), nil
	case []uint32:
		return ints(v), nil
	case []uint8:
		if a.Bits == npy.Integer {
			return ints(v), nil
		}
	case []uint16:
		if a.DType == npy.Uint16 && a.Bits == npy.Integer {
			return ints(v), nil
		}
	}
	return nil, fmt.Errorf("%w: IDs: the array's type = %v (%v); want an integer type (int8, int16, int32, int64, uint8, uint16, uint32)", ErrToken, a.DType, a.Bits)
}

func ints[E int64 | int32 | int16 | int8 | uint32 | uint16 | uint8](v []E) []int {
	out := make([]int, len(v))
	for i, x := range v {
		out[i] = int(x)
	}
	return out
}
