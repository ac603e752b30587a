// Package golden loads the golden-vector files under testdata/golden.
//
// The files are written by the 50-digit generator in testdata/gen (Python 3
// with mpmath), which shares no code with the Go side. Their schema is
// documented in testdata/README.md; in short, a file is
//
//	{
//	  "schema": 1,
//	  "package": "mask",
//	  "family": "causal",
//	  "generator": "testdata/gen/fam_mask.py",
//	  "cases": [ { "name": ..., "source": ..., "digits": 50,
//	               "config": {...}, "inputs": {...}, "outputs": {...} } ]
//	}
//
// and a tensor is {"dtype": "float64"|"bool"|"int", "shape": [...],
// "data": [...]} where float64 data are hexadecimal floating-point strings
// ("0x1.8p+1", "inf", "-inf", "nan") read exactly by strconv.ParseFloat.
//
// Every error returned by this package names the file, and where it applies
// the case and the tensor, so that a broken golden file is found at once.
package golden

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
)

// SchemaVersion is the schema number this loader reads.
const SchemaVersion = 1

// MinDigits is the smallest working precision, in significant decimal
// digits, that a golden case may declare.
const MinDigits = 50

// ErrMalformed is matched (errors.Is) by every error about the content of a
// golden file.
var ErrMalformed = errors.New("golden: malformed file")

// Dtype names the element type of a stored tensor.
type Dtype string

// The element types a golden tensor can hold.
const (
	Float64 Dtype = "float64"
	Bool    Dtype = "bool"
	Int     Dtype = "int"
)

// Tensor is one stored array, row-major. Exactly one of F, B and I is set,
// according to Dtype.
type Tensor struct {
	Dtype Dtype
	Shape []int
	F     []float64
	B     []bool
	I     []int64
}

// Len is the number of elements.
func (t *Tensor) Len() int {
	switch t.Dtype {
	case Float64:
		return len(t.F)
	case Bool:
		return len(t.B)
	default:
		return len(t.I)
	}
}

// Case is one golden case.
type Case struct {
	Name    string
	Source  string
	Digits  int
	Config  json.RawMessage
	Inputs  map[string]*Tensor
	Outputs map[string]*Tensor

	file string
}

// File is one golden file: a family of cases.
type File struct {
	Path      string
	Package   string
	Family    string
	Generator string
	Cases     []*Case
}

type rawTensor struct {
	Dtype Dtype             `json:"dtype"`
	Shape []int             `json:"shape"`
	Data  []json.RawMessage `json:"data"`
	Dec   []string          `json:"decimal,omitempty"`
}

type rawCase struct {
	Name    string                `json:"name"`
	Source  string                `json:"source"`
	Digits  int                   `json:"digits"`
	Config  json.RawMessage       `json:"config"`
	Inputs  map[string]*rawTensor `json:"inputs"`
	Outputs map[string]*rawTensor `json:"outputs"`
}

type rawFile struct {
	Schema    int        `json:"schema"`
	Package   string     `json:"package"`
	Family    string     `json:"family"`
	Generator string     `json:"generator"`
	Cases     []*rawCase `json:"cases"`
}

func fileErr(path, format string, args ...any) error {
	return fmt.Errorf("%w: %s: %s", ErrMalformed, path, fmt.Sprintf(format, args...))
}

func caseErr(path string, i int, name, format string, args ...any) error {
	if name == "" {
		name = "#" + strconv.Itoa(i)
	} else {
		name = fmt.Sprintf("%q", name)
	}
	return fmt.Errorf("%w: %s: case %s: %s", ErrMalformed, path, name, fmt.Sprintf(format, args...))
}

// Load reads and validates the golden file at path.
func Load(path string) (*File, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("golden: %w", err)
	}
	return Parse(path, b)
}

// Parse validates the content b of a golden file; path is used in errors.
func Parse(path string, b []byte) (*File, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var rf rawFile
	if err := dec.Decode(&rf); err != nil {
		return nil, fileErr(path, "%v", err)
	}
	if dec.More() {
		return nil, fileErr(path, "trailing data after the top-level object")
	}
	if rf.Schema != SchemaVersion {
		return nil, fileErr(path, "schema is %d, this loader reads %d", rf.Schema, SchemaVersion)
	}
	if rf.Package == "" || rf.Family == "" || rf.Generator == "" {
		return nil, fileErr(path, "package, family and generator must all be set (got %q, %q, %q)", rf.Package, rf.Family, rf.Generator)
	}
	if len(rf.Cases) == 0 {
		return nil, fileErr(path, "no cases")
	}
	f := &File{Path: path, Package: rf.Package, Family: rf.Family, Generator: rf.Generator}
	seen := map[string]bool{}
	for i, rc := range rf.Cases {
		if rc == nil {
			return nil, caseErr(path, i, "", "null case")
		}
		if rc.Name == "" {
			return nil, caseErr(path, i, "", "missing name")
		}
		if seen[rc.Name] {
			return nil, caseErr(path, i, rc.Name, "duplicate name")
		}
		seen[rc.Name] = true
		if rc.Source == "" {
			return nil, caseErr(path, i, rc.Name, "missing source")
		}
		if rc.Digits < MinDigits {
			return nil, caseErr(path, i, rc.Name, "digits is %d, want at least %d", rc.Digits, MinDigits)
		}
		if len(rc.Outputs) == 0 {
			return nil, caseErr(path, i, rc.Name, "no outputs")
		}
		c := &Case{Name: rc.Name, Source: rc.Source, Digits: rc.Digits, Config: rc.Config, file: path}
		if len(c.Config) == 0 {
			c.Config = json.RawMessage("{}")
		}
		var err error
		if c.Inputs, err = convertAll(path, i, rc.Name, "input", rc.Inputs); err != nil {
			return nil, err
		}
		if c.Outputs, err = convertAll(path, i, rc.Name, "output", rc.Outputs); err != nil {
			return nil, err
		}
		f.Cases = append(f.Cases, c)
	}
	return f, nil
}

func convertAll(path string, i int, name, kind string, in map[string]*rawTensor) (map[string]*Tensor, error) {
	out := make(map[string]*Tensor, len(in))
	for k, rt := range in {
		t, err := convert(rt)
		if err != nil {
			return nil, caseErr(path, i, name, "%s %q: %v", kind, k, err)
		}
		out[k] = t
	}
	return out, nil
}

func convert(rt *rawTensor) (*Tensor, error) {
	if rt == nil {
		return nil, errors.New("null tensor")
	}
	n := 1
	for _, d := range rt.Shape {
		if d < 0 {
			return nil, fmt.Errorf("negative dimension %d in shape %v", d, rt.Shape)
		}
		n *= d
	}
	if len(rt.Data) != n {
		return nil, fmt.Errorf("shape %v holds %d elements, data has %d", rt.Shape, n, len(rt.Data))
	}
	if rt.Dec != nil && len(rt.Dec) != n {
		return nil, fmt.Errorf("decimal copy has %d elements, data has %d", len(rt.Dec), n)
	}
	t := &Tensor{Dtype: rt.Dtype, Shape: append([]int{}, rt.Shape...)}
	switch rt.Dtype {
	case Float64:
		t.F = make([]float64, n)
		for j, raw := range rt.Data {
			var s string
			if err := json.Unmarshal(raw, &s); err != nil {
				return nil, fmt.Errorf("element %d: want a hex-float string, got %s", j, raw)
			}
			v, err := parseHex(s)
			if err != nil {
				return nil, fmt.Errorf("element %d: %v", j, err)
			}
			t.F[j] = v
		}
	case Bool:
		t.B = make([]bool, n)
		for j, raw := range rt.Data {
			if err := json.Unmarshal(raw, &t.B[j]); err != nil {
				return nil, fmt.Errorf("element %d: want true or false, got %s", j, raw)
			}
		}
	case Int:
		t.I = make([]int64, n)
		for j, raw := range rt.Data {
			if err := json.Unmarshal(raw, &t.I[j]); err != nil {
				return nil, fmt.Errorf("element %d: want an integer, got %s", j, raw)
			}
		}
	default:
		return nil, fmt.Errorf("unknown dtype %q (want float64, bool or int)", rt.Dtype)
	}
	return t, nil
}

// parseHex reads a float64 stored as a hexadecimal floating-point literal or
// one of inf, -inf, nan. Decimal spellings are refused: golden values must be
// stored exactly.
func parseHex(s string) (float64, error) {
	switch s {
	case "inf":
		return posInf, nil
	case "-inf":
		return negInf, nil
	case "nan":
		return nan, nil
	}
	body := s
	if len(body) > 0 && (body[0] == '-' || body[0] == '+') {
		body = body[1:]
	}
	if len(body) < 2 || body[0] != '0' || (body[1] != 'x' && body[1] != 'X') {
		return 0, fmt.Errorf("%q is not a hex float", s)
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a hex float: %v", s, err)
	}
	return v, nil
}

// Float returns the float64 tensor name from inputs or outputs (inputs
// first), with an error naming the file and case when it is missing or of
// another dtype.
func (c *Case) Float(name string) ([]float64, []int, error) {
	t, err := c.tensor(name, Float64)
	if err != nil {
		return nil, nil, err
	}
	return t.F, t.Shape, nil
}

// Bools returns the bool tensor name; see Float.
func (c *Case) Bools(name string) ([]bool, []int, error) {
	t, err := c.tensor(name, Bool)
	if err != nil {
		return nil, nil, err
	}
	return t.B, t.Shape, nil
}

// Ints returns the int tensor name; see Float.
func (c *Case) Ints(name string) ([]int64, []int, error) {
	t, err := c.tensor(name, Int)
	if err != nil {
		return nil, nil, err
	}
	return t.I, t.Shape, nil
}

// Has reports whether the case has a tensor called name.
func (c *Case) Has(name string) bool {
	_, in := c.Inputs[name]
	_, out := c.Outputs[name]
	return in || out
}

func (c *Case) tensor(name string, d Dtype) (*Tensor, error) {
	t, ok := c.Inputs[name]
	if !ok {
		t, ok = c.Outputs[name]
	}
	if !ok {
		return nil, fmt.Errorf("%w: %s: case %q: no tensor %q", ErrMalformed, c.file, c.Name, name)
	}
	if t.Dtype != d {
		return nil, fmt.Errorf("%w: %s: case %q: tensor %q is %s, want %s", ErrMalformed, c.file, c.Name, name, t.Dtype, d)
	}
	return t, nil
}

// DecodeConfig decodes the case's configuration into v, refusing unknown
// keys; errors name the file and the case.
func (c *Case) DecodeConfig(v any) error {
	dec := json.NewDecoder(bytes.NewReader(c.Config))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("%w: %s: case %q: config: %v", ErrMalformed, c.file, c.Name, err)
	}
	return nil
}

// String names the case as "file: case".
func (c *Case) String() string { return c.file + ": " + c.Name }

// Dir is the absolute path of testdata/golden in this module.
func Dir() string {
	_, here, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(here), "..", "..", "testdata", "golden")
}

// LoadFamily loads testdata/golden/<pkg>/<family>.json.
func LoadFamily(pkg, family string) (*File, error) {
	return Load(filepath.Join(Dir(), pkg, family+".json"))
}

var (
	posInf = math.Inf(1)
	negInf = math.Inf(-1)
	nan    = math.NaN()
)
