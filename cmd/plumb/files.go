package main

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// filesAbout is plumb help files: the kinds of file every command reads
// and writes, and how to name them.
const filesAbout = `
Every command reads tensors from, and writes them to, files named on the
command line. A tensor file is one of:

  FILE              a .npy file (NumPy's format, versions 1.0 to 3.0), or an
                    .npz archive holding one array
  FILE:NAME         the array NAME of an .npz archive (numpy.savez or
                    numpy.savez_compressed; NAME is the keyword given to
                    savez, arr_0, arr_1, ... for positional arrays)
  FILE:TYPE:DIMS    raw little-endian binary, row-major, no header, as a C or
                    GPU harness writes a buffer: TYPE is its element type and
                    DIMS its shape, comma-separated (x.bin:float32:1,8,128,64);
                    a file of any other size is refused with both sizes
  -                 standard input (as FILE, or -:TYPE:DIMS); at most one
                    file of a command may be read from it

A name that is a file as it stands is that file, colons and all; only
otherwise is it split at its last colons.

Element types. Floating point: float64 (also fp64, double), float32 (fp32,
single), float16 (fp16, half, binary16: IEEE 754 binary16), bfloat16 (bf16),
e4m3 and e5m2 (OCP 8-bit floating point). Integers and booleans: int64,
int32, int16, int8, uint32, uint16, uint8, bool. The same names are accepted
wherever a command takes a format or a type (-format, gen -dtype, TYPE).

In a .npy file, bfloat16, e4m3 and e5m2 travel as their bit patterns in
uint16 and uint8 arrays: diff and check read such a candidate with
-format bfloat16, e4m3 or e5m2, and refuse it without. Raw binary names its
format in TYPE (x.bin:bfloat16:64,64), so it needs no -format. Integer
files (int64, int32, int16, int8, uint32) and bool files (0 and 1) are read
as their exact values; a bool file is refused as an input of run or check,
where a mask belongs in the configuration's "mask" key (or an additive
bias of 0 and -Inf, as float).

Inputs of run and check are NAME=FILE in any of these forms; an .npz
archive given alone (no NAME=) supplies each of its arrays as the input of
its name. check -got takes OUTPUT=FILE, or an archive alone whose arrays
are named as the outputs.

Outputs. gen writes FILE (a .npy file), - (standard output) or FILE.npz:NAME
(the array NAME added to the archive FILE.npz, or replaced in it, the other
arrays kept). run -out writes a directory of NAME.npy files (the default,
.), one archive (-out FILE.npz), the one output to standard output (-out -),
or chosen outputs (-out NAME=FILE, repeated; FILE may be -). Data and
reports go to standard output, every status line ("wrote ...") and
progress to standard error, and -quiet silences them all.
`

// tensorFile is a tensor read from a file.
type tensorFile struct {
	path   string // as the command line names it
	dtype  npy.DType
	format *compare.Format // the format the name says (raw bfloat16, …); nil when the file's type says it
	tensor ops.Tensor
}

// spec is where one tensor is read from, parsed from its name.
type spec struct {
	text   string // as given
	path   string // the file, "-" for standard input
	member string // an archive's array ("" for the only one)
	raw    *rawType
	shape  []int // raw: the dims
}

// rawType is the element type of raw binary: a .npy type and, for
// bfloat16 and the 8-bit formats, the format its bit patterns hold.
type rawType struct {
	dtype  npy.DType
	bits   npy.Bits
	format *compare.Format // for the bit-pattern formats
}

// dimsRE is the form of DIMS in FILE:TYPE:DIMS.
var dimsRE = regexp.MustCompile(`^[0-9]+(,[0-9]+)*$`)

// typeNames lists the element types for messages.
const typeNames = "float64, float32, float16, bfloat16, e4m3, e5m2 (or fp64, double, fp32, single, fp16, half, binary16, bf16), int64, int32, int16, int8, uint32, uint16, uint8, bool"

// rawTypeByName reads an element type: a number format of package compare
// (with its other names) or a .npy integer or bool type.
func rawTypeByName(name string) (*rawType, error) {
	if f, err := compare.FormatByName(name); err == nil {
		switch f {
		case compare.Float64:
			return &rawType{dtype: npy.Float64}, nil
		case compare.Float32:
			return &rawType{dtype: npy.Float32}, nil
		case compare.Binary16:
			return &rawType{dtype: npy.Float16}, nil
		case compare.BFloat16:
			return &rawType{dtype: npy.Uint16, bits: npy.BFloat16, format: &f}, nil
		case compare.E4M3:
			return &rawType{dtype: npy.Uint8, bits: npy.E4M3, format: &f}, nil
		case compare.E5M2:
			return &rawType{dtype: npy.Uint8, bits: npy.E5M2, format: &f}, nil
		}
	}
	var d npy.DType
	if err := d.UnmarshalText([]byte(name)); err == nil {
		return &rawType{dtype: d}, nil
	}
	return nil, fmt.Errorf("element type %q is unknown; want one of %s", name, typeNames)
}

// parseSpec reads the name of a tensor file (plumb help files).
func parseSpec(s string) (spec, error) {
	sp := spec{text: s, path: s}
	if s == "-" || exists(s) {
		return sp, nil
	}
	i := strings.LastIndexByte(s, ':')
	if i < 0 {
		return sp, nil // reading it says there is no such file
	}
	head, last := s[:i], s[i+1:]
	if j := strings.LastIndexByte(head, ':'); j >= 0 && dimsRE.MatchString(last) {
		path, typ := head[:j], head[j+1:]
		rt, err := rawTypeByName(typ)
		if err != nil {
			return sp, fmt.Errorf("%s: %v (raw binary is FILE:TYPE:DIMS; plumb help files)", s, err)
		}
		shape, err := parseDims(last)
		if err != nil {
			return sp, fmt.Errorf("%s: %v", s, err)
		}
		sp.path, sp.raw, sp.shape = path, rt, shape
		return sp, nil
	}
	if _, err := rawTypeByName(last); err == nil && !isArchiveFile(head) {
		return sp, fmt.Errorf("%s: raw binary needs its dims; want %s:DIMS, the shape comma-separated (plumb help files)", s, s)
	}
	if dimsRE.MatchString(last) && !isArchiveFile(head) {
		return sp, fmt.Errorf("%s: raw binary needs its element type; want %s:TYPE:%s, TYPE one of %s", s, head, last, typeNames)
	}
	sp.path, sp.member = head, last
	return sp, nil
}

func exists(path string) bool {
	_, err := os.Stat(path)
	return err == nil
}

// isArchiveFile reports whether path is "-", is named .npz, or is a
// regular file that starts as a zip archive does. (Other files, such as
// pipes, are not read here: what is read from them is gone.)
func isArchiveFile(path string) bool {
	if path == "-" || strings.HasSuffix(path, ".npz") {
		return true
	}
	if fi, err := os.Stat(path); err != nil || !fi.Mode().IsRegular() {
		return false
	}
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	var head [4]byte
	n, _ := io.ReadFull(f, head[:])
	return npy.IsArchive(head[:n])
}

// maxStreamArchive bounds an .npz archive read from a stream (standard
// input, a pipe), which must be held whole: the largest array and room for
// its header and the archive's records.
const maxStreamArchive = npy.MaxElements*8 + 1<<24

// source is an open tensor file.
type source struct {
	r       io.Reader
	file    *os.File // a regular file: r, whose length is known
	closer  io.Closer
	display string // the name for messages
}

// open opens the file of sp (standard input for "-").
func (e *env) open(sp spec) (*source, error) {
	if sp.path == "-" {
		if err := e.useStdin(sp.text); err != nil {
			return nil, err
		}
		return &source{r: bufio.NewReaderSize(e.stdin, 1<<16), display: sp.text}, nil
	}
	f, err := os.Open(sp.path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("%s: no such file", sp.path)
		}
		return nil, fmt.Errorf("%s: %w", sp.path, trimPath(err, sp.path))
	}
	src := &source{closer: f, display: sp.text}
	if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() {
		src.r, src.file = f, f
	} else if err == nil && fi.IsDir() {
		f.Close()
		return nil, fmt.Errorf("%s is a directory; want a tensor file (plumb help files)", sp.path)
	} else {
		src.r = bufio.NewReaderSize(f, 1<<16)
	}
	return src, nil
}

func (s *source) close() {
	if s.closer != nil {
		s.closer.Close()
	}
}

// head returns the first n bytes (fewer at the end of the file) without
// consuming them.
func (s *source) head(n int) []byte {
	if s.file != nil {
		b := make([]byte, n)
		k, _ := s.file.ReadAt(b, 0)
		return b[:k]
	}
	b, _ := s.r.(*bufio.Reader).Peek(n)
	return b
}

// useStdin claims standard input for what (a file's name), once.
func (e *env) useStdin(what string) error {
	if e.stdinBy != "" {
		return fmt.Errorf("%s: standard input is read for %s already; want - for one file only", what, e.stdinBy)
	}
	if e.stdin == nil {
		return fmt.Errorf("%s: there is no standard input to read", what)
	}
	e.stdinBy = what
	return nil
}

// readArray reads the array sp names.
func (e *env) readArray(sp spec) (*npy.Array, error) {
	src, err := e.open(sp)
	if err != nil {
		return nil, err
	}
	defer src.close()
	name := src.display
	if sp.raw != nil {
		a, err := npy.ReadRaw(src.r, sp.raw.dtype, sp.shape)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		a.Bits = sp.raw.bits
		return a, nil
	}
	head := src.head(6)
	switch {
	case string(head) == "\x93NUMPY":
		if sp.member != "" {
			return nil, fmt.Errorf("%s: %s is a .npy file, which holds one array; want it named without :%s (members are for .npz archives)", sp.text, sp.path, sp.member)
		}
		a, err := npy.Read(src.r)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		var one [1]byte
		if k, _ := io.ReadFull(src.r, one[:]); k != 0 {
			return nil, fmt.Errorf("%s: bytes follow the %d bytes of data that shape %v of %v needs; want the file to end there (is the header's shape right?)",
				name, a.Len()*a.DType.Size(), a.Shape, a.DType)
		}
		return a, nil
	case npy.IsArchive(head):
		return e.readMember(src, sp)
	case len(head) == 0:
		return nil, fmt.Errorf("%s is empty; want a .npy file, an .npz archive, or raw binary named FILE:TYPE:DIMS (plumb help files)", name)
	}
	hint := ""
	if sp.member != "" {
		hint = fmt.Sprintf(" (:%s names an array of an .npz archive)", sp.member)
		name = sp.path
	}
	return nil, fmt.Errorf("%s is neither a .npy file nor an .npz archive (it starts with %q)%s; for raw little-endian binary, name its element type and dims: %s:float32:DIMS, say (plumb help files)",
		name, head, hint, sp.path)
}

// readMember reads the array of an .npz archive that sp names.
func (e *env) readMember(src *source, sp spec) (*npy.Array, error) {
	var a *npy.Archive
	var err error
	if src.file != nil {
		fi, serr := src.file.Stat()
		if serr != nil {
			return nil, fmt.Errorf("%s: %w", sp.path, trimPath(serr, sp.path))
		}
		a, err = npy.NewArchive(src.file, fi.Size())
	} else {
		var b []byte
		b, err = io.ReadAll(io.LimitReader(src.r, maxStreamArchive+1))
		if err == nil && len(b) > maxStreamArchive {
			return nil, fmt.Errorf("%s: an archive read from a stream of more than %d bytes; want it as a file, which is read member by member", sp.path, maxStreamArchive)
		}
		if err == nil {
			a, err = npy.NewArchive(bytes.NewReader(b), int64(len(b)))
		}
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", sp.path, err)
	}
	names := a.Names()
	member := sp.member
	switch {
	case member == "" && len(names) == 1:
		member = names[0]
	case member == "" && len(names) == 0:
		return nil, fmt.Errorf("%s is an .npz archive with no arrays; want one holding the tensor", sp.path)
	case member == "":
		return nil, fmt.Errorf("%s is an .npz archive of %d arrays (%s); want one named: %s:NAME, say %s:%s", sp.path, len(names), listNames(names), sp.path, sp.path, names[0])
	case !slices.Contains(names, member) && !slices.Contains(names, strings.TrimSuffix(member, ".npy")):
		return nil, fmt.Errorf("%s: the archive has no array %q; want one of its %d: %s", sp.path, member, len(names), listNames(names))
	}
	arr, err := a.Read(member)
	if err != nil {
		return nil, fmt.Errorf("%s:%s: %w", sp.path, member, err)
	}
	return arr, nil
}

// listNames lists names for a message, the first 20 of more.
func listNames(names []string) string {
	if len(names) > 20 {
		return strings.Join(names[:20], ", ") + fmt.Sprintf(" and %d more", len(names)-20)
	}
	return strings.Join(names, ", ")
}

// readTensor reads the tensor the name text gives (plumb help files) as
// float64 values. Float files (float64, float32, float16) are read as they
// are, integer and bool files as their exact values; uint16 and uint8
// files of .npy hold bit patterns and need bits, the format named by
// -format (bfloat16, e4m3, e5m2), unless raw binary named the format.
func (e *env) readTensor(text string, bits string) (*tensorFile, error) {
	sp, err := parseSpec(text)
	if err != nil {
		return nil, err
	}
	a, err := e.readArray(sp)
	if err != nil {
		return nil, err
	}
	tf := &tensorFile{path: text, dtype: a.DType}
	if sp.raw != nil {
		tf.format = sp.raw.format
	}
	switch a.DType {
	case npy.Uint16, npy.Uint8:
		if a.Bits != npy.Integer {
			break // raw binary named the format
		}
		want := map[string]npy.Bits{"bfloat16": npy.BFloat16, "e4m3": npy.E4M3, "e5m2": npy.E5M2}
		b, ok := want[bits]
		if !ok {
			return nil, fmt.Errorf("%s holds %s values; want -format bfloat16 (uint16 files), e4m3 or e5m2 (uint8 files) to read them as a float format's bit patterns", text, a.DType)
		}
		a.Bits = b
		if (b == npy.BFloat16) != (a.DType == npy.Uint16) {
			return nil, fmt.Errorf("%s holds %s values; want %s values for -format %s (bfloat16 is uint16, e4m3 and e5m2 are uint8)", text, a.DType, bitsDType(b), bits)
		}
	}
	x, err := a.Float64s()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", text, err)
	}
	shape := append([]int{}, a.Shape...)
	tf.tensor = ops.Tensor{Shape: shape, Data: x}
	return tf, nil
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

// tensorArray is t as a float64 array.
func tensorArray(t ops.Tensor) (*npy.Array, error) { return npy.New(npy.Float64, t.Shape, t.Data) }

// tensorWriter writes t as a float64 .npy stream.
func tensorWriter(t ops.Tensor) func(w io.Writer) error {
	return func(w io.Writer) error {
		a, err := tensorArray(t)
		if err != nil {
			return err
		}
		return npy.Write(w, a)
	}
}

// nameRE is the form of a tensor's name in NAME=FILE.
var nameRE = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_]*$`)

// namedFiles parses arguments NAME=FILE into a map, refusing malformed
// arguments and repeated names. An argument without "=" that is an .npz
// archive gives each of its arrays under its own name (FILE:NAME), when
// archives is true.
func (e *env) namedFiles(args []string, what string, archives bool) (map[string]string, error) {
	m := map[string]string{}
	add := func(name, file string) error {
		if first, dup := m[name]; dup {
			return fmt.Errorf("%s %q is given twice (%s, %s); want each name once", what, name, first, file)
		}
		m[name] = file
		return nil
	}
	for _, a := range args {
		name, file, ok := strings.Cut(a, "=")
		if ok && name != "" && file != "" {
			if err := add(name, file); err != nil {
				return nil, err
			}
			continue
		}
		if !ok && archives && a != "-" && exists(a) && isArchiveFile(a) {
			names, err := archiveNames(a)
			if err != nil {
				return nil, err
			}
			for _, n := range names {
				if err := add(n, a+":"+n); err != nil {
					return nil, err
				}
			}
			continue
		}
		want := "NAME=FILE"
		if archives {
			want += ", or an .npz archive whose arrays are named as the " + what + "s"
		}
		return nil, fmt.Errorf("%s argument = %q; want %s", what, a, want)
	}
	return m, nil
}

// archiveNames lists the arrays of the archive at path.
func archiveNames(path string) ([]string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, trimPath(err, path))
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, trimPath(err, path))
	}
	a, err := npy.NewArchive(f, fi.Size())
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	names := a.Names()
	if len(names) == 0 {
		return nil, fmt.Errorf("%s is an .npz archive with no arrays; want one holding the tensors", path)
	}
	return names, nil
}

// readInputs reads the named input files; an input holding NaN or ±Inf is
// an error unless allowNonFinite, and so is a bool file.
func (e *env) readInputs(files map[string]string, allowNonFinite bool) (ops.Tensors, error) {
	names := slices.Sorted(maps.Keys(files))
	in := ops.Tensors{}
	for _, n := range names {
		f, err := e.readTensor(files[n], "")
		if err != nil {
			return nil, err
		}
		if f.dtype == npy.Bool {
			return nil, fmt.Errorf("%s (input %s) holds bool values; want numbers: a mask belongs in the configuration's \"mask\" key, or as an additive bias of 0 and -Inf in a float file", f.path, n)
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

// readConfig reads a configuration file ("-": standard input); no file
// means {"version": 1}. It reads at most ops.MaxConfigBytes + 1 bytes, so
// that a file too large for the ops package (or an endless one, such as
// /dev/zero) is refused without reading it all, and refuses a file with no
// JSON in it.
func (e *env) readConfig(path string) ([]byte, error) {
	if path == "" {
		return nil, nil
	}
	var r io.Reader
	if path == "-" {
		if err := e.useStdin("-config -"); err != nil {
			return nil, err
		}
		r = e.stdin
	} else {
		f, err := os.Open(path)
		if err != nil {
			if os.IsNotExist(err) {
				return nil, fmt.Errorf("configuration %s: no such file", path)
			}
			return nil, fmt.Errorf("configuration %s: %w", path, trimPath(err, path))
		}
		defer f.Close()
		r = f
	}
	b, err := io.ReadAll(io.LimitReader(r, ops.MaxConfigBytes+1))
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

// configError names the configuration file in an error of the ops package
// about the configuration; an error about the inputs is left as it is.
func configError(path string, err error) error {
	if path != "" && errors.Is(err, ops.ErrConfig) && !errors.Is(err, ops.ErrInput) {
		return fmt.Errorf("configuration %s: %w", filepath.Clean(path), err)
	}
	return err
}

// candidateFormat is the format of a candidate file: the -format flag, or
// else the format its name gave, or else the file's own type.
func candidateFormat(flagFormat string, f *tensorFile) (compare.Format, error) {
	if flagFormat != "" {
		return compare.FormatByName(flagFormat)
	}
	if f.format != nil {
		return *f.format, nil
	}
	switch f.dtype {
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

// writeOutput writes one file with write: "-" is standard output,
// anything else is written atomically (writeAtomic).
func (e *env) writeOutput(path string, write func(w io.Writer) error) error {
	if path == "-" {
		if e.stdoutBy != "" {
			return fmt.Errorf("-: standard output is written for %s already; want - for one output only", e.stdoutBy)
		}
		e.stdoutBy = path
		bw := bufio.NewWriter(e.stdout)
		if err := write(bw); err != nil {
			return fmt.Errorf("standard output: %w", err)
		}
		if err := bw.Flush(); err != nil {
			return fmt.Errorf("standard output: %w", err)
		}
		return nil
	}
	return writeAtomic(path, write)
}

// displayPath names an output file in a status line.
func displayPath(path string) string {
	if path == "-" {
		return "standard output"
	}
	return path
}

// status prints a status line on stderr unless quiet.
func (e *env) status(quiet bool, format string, args ...any) {
	if !quiet {
		fmt.Fprintf(e.stderr, format, args...)
	}
}
