package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
	"github.com/plumbref/plumb/ops"
)

// endless is a stream that never ends, as /dev/zero.
type endless struct{}

func (endless) Read(b []byte) (int, error) {
	for i := range b {
		b[i] = ' '
	}
	return len(b), nil
}

// needStdin skips a test that reads standard input as the file /dev/stdin
// where the system has no such file.
func needStdin(t *testing.T) {
	t.Helper()
	if _, err := os.Stat("/dev/stdin"); err != nil {
		t.Skip("skipped: /dev/stdin not present")
	}
}

// cliIn runs the built binary in dir with stdin, and fails the test
// (instead of hanging) when it does not end within a minute.
func cliIn(t *testing.T, dir string, stdin any, args ...string) (stderr string, code int) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, plumbBin, args...)
	switch s := stdin.(type) {
	case endless:
		cmd.Stdin = s
	case []byte:
		cmd.Stdin = bytes.NewReader(s)
	}
	_, stderr, code = runCmd(t, cmd, dir, args)
	ensure.NoError(t, ctx.Err(), "plumb %v did not end within a minute", args)
	return stderr, code
}

// A configuration is read up to ops.MaxConfigBytes + 1 bytes: a larger
// file, or an endless stream, is refused without reading it to its end.
func TestConfigIsBounded(t *testing.T) {
	dir := t.TempDir()
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, 5, 6})
	relu := `{"version": 1, "function": "relu"}`
	tooLarge := fmt.Sprintf("has more than ops.MaxConfigBytes = %d bytes; want one JSON object of at most %[1]d bytes", ops.MaxConfigBytes)
	// The command's documentation states the limit as 1 MiB.
	doc, err := os.ReadFile("doc.go")
	ensure.NoError(t, err)
	expect.Contains(t, string(doc), "ops.MaxConfigBytes (1 MiB)")
	expect.Equal(t, 1<<20, ops.MaxConfigBytes, "doc.go says 1 MiB")

	// Exactly MaxConfigBytes: read whole and given to the ops package.
	exact := relu + strings.Repeat(" ", ops.MaxConfigBytes-len(relu))
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "exact.json"), []byte(exact), 0o644))
	must(t, dir, 0, "run", "activation", "-config", "exact.json", "x=x.npy")

	// One byte more: refused, naming the file and the limit.
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "big.json"), []byte(exact+" "), 0o644))
	_, e := must(t, dir, 2, "run", "activation", "-config", "big.json", "x=x.npy")
	expect.Contains(t, e, "plumb run: configuration big.json "+tooLarge)

	// Streams that never end: standard input and /dev/zero.
	needStdin(t)
	e, code := cliIn(t, dir, endless{}, "run", "activation", "-config", "/dev/stdin", "x=x.npy")
	expect.Equal(t, 2, code, e)
	expect.Contains(t, e, "configuration /dev/stdin "+tooLarge)
	if _, err := os.Stat("/dev/zero"); err == nil {
		e, code = cliIn(t, dir, nil, "check", "activation", "-config", "/dev/zero", "x=x.npy", "-got", "y=x.npy")
		expect.Equal(t, 2, code, e)
		expect.Contains(t, e, "configuration /dev/zero "+tooLarge)
	}
	// A configuration on standard input that ends is read as a file.
	e, code = cliIn(t, dir, []byte(relu), "run", "-out", "fromstdin", "activation", "-config", "/dev/stdin", "x=x.npy")
	expect.Equal(t, 0, code, e)
}

// An empty configuration file is an error that shows the smallest
// configuration; no -config at all still means {"version": 1}.
func TestEmptyConfig(t *testing.T) {
	dir := attentionFixture(t)
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "empty.json"), nil, 0o644))
	ensure.NoError(t, os.WriteFile(filepath.Join(dir, "blank.json"), []byte(" \n\t\n"), 0o644))
	for _, c := range []struct{ file, says string }{
		{"empty.json", "configuration empty.json is empty; "},
		{"blank.json", "configuration blank.json holds only white space (4 bytes); "},
	} {
		for _, cmd := range [][]string{
			{"run", "attention-forward", "-config", c.file, "q=q.npy", "k=k.npy", "v=v.npy"},
			{"check", "attention-forward", "-config", c.file, "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=q.npy"},
		} {
			_, e := must(t, dir, 2, cmd...)
			expect.Contains(t, e, "plumb "+cmd[0]+": "+c.says+`want a JSON object, at least {"version":1}`)
		}
	}
	must(t, dir, 0, "run", "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")
}

// npyFile is a .npy file of version 1.0 (or 2.0 with a 4-byte header
// length) holding the header dictionary hdr, padded to 64 bytes, and data.
func npyFile(hdr string, v2 bool, data []byte) []byte {
	var b bytes.Buffer
	pre := 10
	if v2 {
		pre = 12
	}
	hdr += strings.Repeat(" ", 63-(pre+len(hdr))%64) + "\n"
	if v2 {
		b.WriteString("\x93NUMPY\x02\x00")
		binary.Write(&b, binary.LittleEndian, uint32(len(hdr)))
	} else {
		b.WriteString("\x93NUMPY\x01\x00")
		binary.Write(&b, binary.LittleEndian, uint16(len(hdr)))
	}
	b.WriteString(hdr)
	b.Write(data)
	return b.Bytes()
}

// A .npy file is read as far as its header says and no further: a header
// that promises more data than the file holds, or a header longer than the
// file or than npy.MaxHeaderLen, is an error naming the file, from a file
// and from a stream alike, before anything large is allocated.
func TestNPYHeaderBounds(t *testing.T) {
	needStdin(t)
	dir := t.TempDir()
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, 5, 6})
	var huge bytes.Buffer // a 4-byte header length of 2^32 − 16, then one byte
	huge.WriteString("\x93NUMPY\x02\x00")
	binary.Write(&huge, binary.LittleEndian, uint32(1<<32-16))
	huge.WriteString("{")
	var long bytes.Buffer // a header length of MaxHeaderLen, and 8 bytes of it
	long.WriteString("\x93NUMPY\x02\x00")
	binary.Write(&long, binary.LittleEndian, uint32(npy.MaxHeaderLen))
	long.WriteString("{'descr'")
	for _, c := range []struct {
		name string
		data []byte
		says string
	}{
		{"short", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }", false, make([]byte, 16)),
			"want the 48 bytes that shape [2 3] of float64 needs"},
		// 10^6 float64 values: 8·10^6 bytes promised, 16 present.
		{"promise", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1000000,), }", false, make([]byte, 16)),
			"want the 8000000 bytes that shape [1000000] of float64 needs"},
		// 10^12 values: more than any buffer plumb would allocate.
		{"huge promise", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1000000000000,), }", false, make([]byte, 16)),
			"1000000000000"},
		{"huge header", huge.Bytes(), "header length = 4294967280; want at most MaxHeaderLen = 1048576"},
		{"header past the end", long.Bytes(), "the header of 1048576 bytes ends early"},
	} {
		t.Run(c.name, func(t *testing.T) {
			file := strings.ReplaceAll(c.name, " ", "_") + ".npy"
			ensure.NoError(t, os.WriteFile(filepath.Join(dir, file), c.data, 0o644))
			_, e := must(t, dir, 2, "diff", file, "x.npy")
			expect.Contains(t, e, "plumb diff: "+file+": npy: ")
			expect.Contains(t, e, c.says)
			_, e = must(t, dir, 2, "run", "activation", "x="+file)
			expect.Contains(t, e, c.says)
			// From a stream, whose length the reader cannot know in advance.
			e, code := cliIn(t, dir, c.data, "diff", "/dev/stdin", "x.npy")
			expect.Equal(t, 2, code, e)
			expect.Contains(t, e, "plumb diff: /dev/stdin: npy: ")
			expect.Contains(t, e, c.says)
		})
	}
}

// NaN, +Inf and −Inf in an input are refused, naming the file, the index
// and the value, unless -allow-nonfinite; then the kernel's special cases
// apply. Candidates and diff's files may hold them.
func TestNonFiniteInputs(t *testing.T) {
	needStdin(t)
	dir := t.TempDir()
	writeNPY(t, filepath.Join(dir, "x.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, 5, 6})
	writeNPY(t, filepath.Join(dir, "pinf.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, math.Inf(1), 6})
	writeNPY(t, filepath.Join(dir, "ninf.npy"), npy.Float32, []int{2, 3}, []float32{1, 2, float32(math.Inf(-1)), 4, 5, float32(math.NaN())})
	writeNPY(t, filepath.Join(dir, "nan.npy"), npy.Float64, []int{2, 3}, []float64{1, 2, 3, 4, math.NaN(), 6})
	const want = "want finite numbers (-allow-nonfinite passes NaN and ±Inf to the reference, whose special cases then apply)"
	for _, c := range []struct {
		args []string
		says string
	}{
		{[]string{"run", "softmax", "x=pinf.npy"}, "plumb run: pinf.npy: element [1 1] = +Inf (1 NaN or ±Inf in all); " + want},
		{[]string{"run", "softmax", "x=ninf.npy"}, "plumb run: ninf.npy: element [0 2] = -Inf (2 NaN or ±Inf in all); " + want},
		{[]string{"run", "softmax", "x=nan.npy"}, "plumb run: nan.npy: element [1 1] = NaN (1 NaN or ±Inf in all); " + want},
		{[]string{"check", "softmax", "x=pinf.npy", "-got", "y=x.npy"}, "plumb check: pinf.npy: element [1 1] = +Inf (1 NaN or ±Inf in all); " + want},
		{[]string{"run", "layernorm-forward", "-config", "/dev/stdin", "x=x.npy", "weight=pinfw.npy"}, "pinfw.npy: element [2] = +Inf"},
	} {
		writeNPY(t, filepath.Join(dir, "pinfw.npy"), npy.Float64, []int{3}, []float64{1, 1, math.Inf(1)})
		e, code := cliIn(t, dir, []byte(`{"version": 1, "epsilon": 1e-5}`), c.args...)
		expect.Equal(t, 2, code, "plumb %v: %s", c.args, e)
		expect.Contains(t, e, c.says)
		expect.NoFileExists(t, filepath.Join(dir, "y.npy"), "nothing is written")
	}

	// With -allow-nonfinite the reference computes: softmax of a row with
	// +Inf is NaN in every element of the row, the special case stated in
	// attention.Softmax's documentation; the row without it is finite.
	must(t, dir, 0, "run", "-allow-nonfinite", "-out", "inf", "softmax", "x=pinf.npy")
	y := readNPY(t, filepath.Join(dir, "inf", "y.npy"))
	for i, v := range y.Data {
		expect.Equal(t, i >= 3, math.IsNaN(v), "element %d = %v", i, v)
	}
	// and a candidate with the same NaN row passes check, while diff of
	// that output against a finite one fails on the NaN mismatches.
	o, _ := must(t, dir, 0, "check", "-allow-nonfinite", "softmax", "x=pinf.npy", "-got", "y="+filepath.Join("inf", "y.npy"))
	expect.Contains(t, o, "verdict: PASS")
	must(t, dir, 0, "run", "-out", "fin", "softmax", "x=x.npy")
	o, _ = must(t, dir, 1, "diff", filepath.Join("fin", "y.npy"), filepath.Join("inf", "y.npy"))
	expect.Contains(t, o, "3 NaN and 0 Inf mismatches")

	// The help of each command says how it treats them.
	for _, c := range []struct{ cmd, says string }{
		{"run", "unless -allow-nonfinite"},
		{"check", "unless -allow-nonfinite"},
		{"diff", "NaN and ±Inf in either file are compared, never refused"},
	} {
		h, _ := must(t, dir, 0, "help", c.cmd)
		expect.Contains(t, strings.Join(strings.Fields(h), " "), c.says, "plumb help %s", c.cmd)
	}
}
