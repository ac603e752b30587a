package main

import (
	"bytes"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// tensorFile is a tensor read from a .npy file.
type tensorFile struct {
	path   string
	dtype  npy.DType
	tensor ops.Tensor
}

// readTensor reads the .npy file at path as float64 values. Float files
// (float64, float32, float16) are read as they are; uint16 and uint8 files
// hold bit patterns and need bits, the format named by -format (bfloat16,
// e4m3, e5m2). Integer files are refused: plumb's tensors are numbers
// of a floating-point format.
func readTensor(path string, bits string) (*tensorFile, error) {
	a, err := npy.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("%s: no such file", path)
		}
		return nil, fmt.Errorf("%s: %w", path, trimPath(err, path))
	}
	switch a.DType {
	case npy.Float64, npy.Float32, npy.Float16:
	case npy.Uint16, npy.Uint8:
		want := map[string]npy.Bits{"bfloat16": npy.BFloat16, "e4m3": npy.E4M3, "e5m2": npy.E5M2}
		b, ok := want[bits]
		if !ok {
			return nil, fmt.Errorf("%s holds %s values; want -format bfloat16 (uint16 files), e4m3 or e5m2 (uint8 files) to read them as a float format's bit patterns", path, a.DType)
		}
		a.Bits = b
		if (b == npy.BFloat16) != (a.DType == npy.Uint16) {
			return nil, fmt.Errorf("%s holds %s values; want %s values for -format %s (bfloat16 is uint16, e4m3 and e5m2 are uint8)", path, a.DType, bitsDType(b), bits)
		}
	default:
		return nil, fmt.Errorf("%s holds %s values; want float64, float32 or float16 (or bit patterns with -format)", path, a.DType)
	}
	x, err := a.Float64s()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	shape := append([]int{}, a.Shape...)
	return &tensorFile{path: path, dtype: a.DType, tensor: ops.Tensor{Shape: shape, Data: x}}, nil
}

// trimPath drops a repetition of the path from an error of the os package.
func trimPath(err error, path string) error {
	if pe, ok := err.(*os.PathError); ok && pe.Path == path {
		return fmt.Errorf("%s: %w", pe.Op, pe.Err)
	}
	return err
}

// refuseNonFinite returns an error naming the first NaN or ±Inf of the
// tensor: its index and value, and how many there are.
func refuseNonFinite(f *tensorFile) error {
	first, n := -1, 0
	for i, v := range f.tensor.Data {
		if !finite(v) {
			if first < 0 {
				first = i
			}
			n++
		}
	}
	if first < 0 {
		return nil
	}
	return fmt.Errorf("%s: element %v = %v (%d NaN or ±Inf in all); want finite numbers (-allow-nonfinite passes NaN and ±Inf to the reference, whose special cases then apply)",
		f.path, num.Unravel(first, f.tensor.Shape), f.tensor.Data[first], n)
}

// bitsDType is the element type that holds the bit patterns of b.
func bitsDType(b npy.Bits) npy.DType {
	if b == npy.BFloat16 {
		return npy.Uint16
	}
	return npy.Uint8
}

// tensorWriter writes t as a float64 .npy stream.
func tensorWriter(t ops.Tensor) func(w io.Writer) error {
	return func(w io.Writer) error {
		a, err := npy.New(npy.Float64, t.Shape, t.Data)
		if err != nil {
			return err
		}
		return npy.Write(w, a)
	}
}

// namedFiles parses arguments NAME=FILE into a map, refusing malformed
// arguments and repeated names.
func namedFiles(args []string, what string) (map[string]string, error) {
	m := map[string]string{}
	for _, a := range args {
		name, file, ok := strings.Cut(a, "=")
		if !ok || name == "" || file == "" {
			return nil, fmt.Errorf("%s argument = %q; want NAME=FILE", what, a)
		}
		if first, dup := m[name]; dup {
			return nil, fmt.Errorf("%s %q is given twice (%s, %s); want each name once", what, name, first, file)
		}
		m[name] = file
	}
	return m, nil
}

// readInputs reads the named input files; an input holding NaN or ±Inf is
// an error unless allowNonFinite.
func readInputs(files map[string]string, allowNonFinite bool) (ops.Tensors, error) {
	names := slices.Sorted(maps.Keys(files))
	in := ops.Tensors{}
	for _, n := range names {
		f, err := readTensor(files[n], "")
		if err != nil {
			return nil, err
		}
		if !allowNonFinite {
			if err := refuseNonFinite(f); err != nil {
				return nil, err
			}
		}
		in[n] = f.tensor
	}
	return in, nil
}

// readConfig reads a configuration file; no file means {"version": 1}. It
// reads at most ops.MaxConfigBytes + 1 bytes, so that a file too large for
// the ops package (or an endless one, such as /dev/zero) is refused
// without reading it all, and refuses a file with no JSON in it.
func readConfig(path string) ([]byte, error) {
	if path == "" {
		return nil, nil
	}
	f, err := os.Open(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("configuration %s: no such file", path)
		}
		return nil, fmt.Errorf("configuration %s: %w", path, trimPath(err, path))
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, ops.MaxConfigBytes+1))
	if err != nil {
		return nil, fmt.Errorf("configuration %s: %w", path, trimPath(err, path))
	}
	if len(b) > ops.MaxConfigBytes {
		return nil, fmt.Errorf("configuration %s has more than ops.MaxConfigBytes = %d bytes; want one JSON object of at most %d bytes",
			path, ops.MaxConfigBytes, ops.MaxConfigBytes)
	}
	if len(bytes.TrimSpace(b)) == 0 {
		what := "is empty"
		if len(b) > 0 {
			what = fmt.Sprintf("holds only white space (%d bytes)", len(b))
		}
		return nil, fmt.Errorf(`configuration %s %s; want a JSON object, at least {"version":1} (plumb help OPERATION lists its other keys)`, path, what)
	}
	return b, nil
}

// configError names the configuration file in an error of the ops package.
func configError(path string, err error) error {
	if path != "" {
		return fmt.Errorf("configuration %s: %w", filepath.Clean(path), err)
	}
	return err
}

// candidateFormat is the format of a candidate file: the -format flag, or
// else the file's own type.
func candidateFormat(flagFormat string, dtype npy.DType) (compare.Format, error) {
	if flagFormat != "" {
		return compare.FormatByName(flagFormat)
	}
	switch dtype {
	case npy.Float32:
		return compare.Float32, nil
	case npy.Float16:
		return compare.Binary16, nil
	}
	return compare.Float64, nil
}

// canonicalBits maps a -format name to the bit-pattern names readTensor
// knows ("bf16" → "bfloat16").
func canonicalBits(flagFormat string) string {
	if flagFormat == "" {
		return ""
	}
	f, err := compare.FormatByName(flagFormat)
	if err != nil {
		return ""
	}
	return f.String()
}
