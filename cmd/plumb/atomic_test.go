package main

import (
	"bytes"
	"crypto/sha256"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/npy"
)

// dirState is every entry of dir with its size and SHA-256 ("dir/" for a
// directory).
func dirState(t *testing.T, dir string) map[string]string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	ensure.NoError(t, err)
	m := map[string]string{}
	for _, e := range entries {
		if e.IsDir() {
			m[e.Name()] = "dir/"
			continue
		}
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		ensure.NoError(t, err)
		m[e.Name()] = fmt.Sprintf("%d bytes, sha256 %x", len(b), sha256.Sum256(b))
	}
	return m
}

func names(m map[string]string) []string {
	var n []string
	for k := range m {
		n = append(n, k)
	}
	sort.Strings(n)
	return n
}

// failAfter writes n bytes of data and then fails, as a full disk would.
func failAfter(data []byte, n int) func(io.Writer) error {
	return func(w io.Writer) error {
		if _, err := w.Write(data[:n]); err != nil {
			return err
		}
		return errors.New("write: no space left on device")
	}
}

func writeAll(data []byte) func(io.Writer) error {
	return func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	}
}

// A set of two outputs whose second write fails midway leaves both
// previous files as they were and no temporary behind.
func TestOutputSetWriteFails(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.npy"), filepath.Join(dir, "b.npy")
	ensure.NoError(t, os.WriteFile(a, []byte("good a"), 0o644))
	ensure.NoError(t, os.WriteFile(b, []byte("good b"), 0o644))
	before := dirState(t, dir)

	var s outputSet
	ensure.NoError(t, s.add(a, writeAll([]byte("new a, complete"))))
	err := s.add(b, failAfter([]byte("new b, cut short"), 5))
	ensure.Error(t, err)
	expect.Contains(t, err.Error(), b+": write: no space left on device; no output was replaced")
	s.abort()
	expect.Equal(t, before, dirState(t, dir))

	// A single file (writeAtomic) likewise.
	ensure.Error(t, writeAtomic(a, failAfter([]byte("new a, cut short"), 3)))
	expect.Equal(t, before, dirState(t, dir))

	// The same set written whole replaces both.
	s = outputSet{}
	ensure.NoError(t, s.add(a, writeAll([]byte("new a"))))
	ensure.NoError(t, s.add(b, writeAll([]byte("new b"))))
	mid := dirState(t, dir)
	expect.Equal(t, before["a.npy"], mid["a.npy"], "nothing is renamed before commit")
	expect.Equal(t, before["b.npy"], mid["b.npy"], "nothing is renamed before commit")
	expect.Len(t, mid, 4, "the two targets and their temporaries: %v", names(mid))
	ensure.NoError(t, s.commit())
	expect.Equal(t, []string{"a.npy", "b.npy"}, names(dirState(t, dir)))
	for f, want := range map[string]string{a: "new a", b: "new b"} {
		got, err := os.ReadFile(f)
		ensure.NoError(t, err)
		expect.Equal(t, want, string(got))
	}
}

// A rename that fails after the first output was renamed puts the first
// back: the set is replaced all or none, also where a target is new.
func TestOutputSetRenameFails(t *testing.T) {
	dir := t.TempDir()
	a, b, c := filepath.Join(dir, "a.npy"), filepath.Join(dir, "b.npy"), filepath.Join(dir, "c.npy")
	ensure.NoError(t, os.WriteFile(a, []byte("good a"), 0o644))
	ensure.NoError(t, os.WriteFile(b, []byte("good b"), 0o644))
	before := dirState(t, dir) // c.npy does not exist yet

	defer func(r func(string, string) error) { renameFile = r }(renameFile)
	var renamed []string // the temporaries renamed over their targets
	renameFile = func(from, to string) error {
		if strings.Contains(filepath.Base(from), ".tmp-") {
			if to == b {
				return &os.LinkError{Op: "rename", Old: from, New: to, Err: errors.New("input/output error")}
			}
			renamed = append(renamed, filepath.Base(to))
		}
		return os.Rename(from, to)
	}
	var s outputSet
	ensure.NoError(t, s.add(c, writeAll([]byte("new c"))))
	ensure.NoError(t, s.add(a, writeAll([]byte("new a"))))
	ensure.NoError(t, s.add(b, writeAll([]byte("new b"))))
	err := s.commit()
	ensure.Error(t, err)
	expect.Contains(t, err.Error(), "input/output error; no output was replaced")
	expect.Equal(t, []string{"c.npy", "a.npy"}, renamed, "c and a were renamed before b failed")
	expect.Equal(t, before, dirState(t, dir), "a restored, c removed, no temporary or copy left: %v", names(dirState(t, dir)))
}

// An output keeps the mode of the file it replaces; a new one gets what
// os.Create gives (0666 less the umask). A symbolic link is written
// through, as os.Create would, and stays a link.
func TestOutputModesAndLinks(t *testing.T) {
	dir := t.TempDir()
	made := filepath.Join(dir, "made")
	f, err := os.Create(made)
	ensure.NoError(t, err)
	ensure.NoError(t, f.Close())
	want, err := os.Stat(made)
	ensure.NoError(t, err)

	fresh := filepath.Join(dir, "fresh.npy")
	ensure.NoError(t, writeAtomic(fresh, writeAll([]byte("x"))))
	fi, err := os.Stat(fresh)
	ensure.NoError(t, err)
	expect.Equal(t, want.Mode().Perm(), fi.Mode().Perm())

	private := filepath.Join(dir, "private.npy")
	ensure.NoError(t, os.WriteFile(private, []byte("old"), 0o600))
	ensure.NoError(t, os.Chmod(private, 0o600))
	ensure.NoError(t, writeAtomic(private, writeAll([]byte("new"))))
	fi, err = os.Stat(private)
	ensure.NoError(t, err)
	expect.Equal(t, os.FileMode(0o600), fi.Mode().Perm())

	sub := filepath.Join(dir, "sub")
	ensure.NoError(t, os.Mkdir(sub, 0o755))
	real := filepath.Join(sub, "real.npy")
	ensure.NoError(t, os.WriteFile(real, []byte("old"), 0o644))
	link := filepath.Join(dir, "link.npy")
	if err := os.Symlink(filepath.Join("sub", "real.npy"), link); err != nil {
		t.Skipf("skipped: this system makes no symbolic link here (%v)", err)
	}
	ensure.NoError(t, writeAtomic(link, writeAll([]byte("through"))))
	got, err := os.ReadFile(real)
	ensure.NoError(t, err)
	expect.Equal(t, "through", string(got))
	li, err := os.Lstat(link)
	ensure.NoError(t, err)
	expect.NotZero(t, li.Mode()&os.ModeSymlink, "the link stays a link")
	expect.Equal(t, []string{"real.npy"}, names(dirState(t, sub)), "no temporary left beside the file")

	// A link to a file not there yet creates the file where it points.
	dangling := filepath.Join(dir, "dangling.npy")
	ensure.NoError(t, os.Symlink(filepath.Join("sub", "later.npy"), dangling))
	ensure.NoError(t, writeAtomic(dangling, writeAll([]byte("later"))))
	got, err = os.ReadFile(filepath.Join(sub, "later.npy"))
	ensure.NoError(t, err)
	expect.Equal(t, "later", string(got))

	// A directory in the way is refused before anything is written.
	err = writeAtomic(sub, writeAll([]byte("x")))
	ensure.Error(t, err)
	expect.Contains(t, err.Error(), sub+" is a directory; want a path where a file can be written")
}

// shell runs the built binary under sh with a command prefix (ulimit).
func shell(t *testing.T, dir, prefix string, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	if _, err := os.Stat("/bin/sh"); err != nil {
		t.Skip("skipped: /bin/sh not present")
	}
	return runCmd(t, exec.Command("/bin/sh", append([]string{"-c", prefix + ` && exec "$0" "$@"`, plumbBin}, args...)...), dir, args)
}

// A run whose write fails midway (a file size limit of 1024 bytes, below
// the 1664 bytes of out.npy: a 128-byte header and 192 float64 values)
// leaves the outputs of the earlier run as they were: no truncated
// out.npy, no new lse.npy beside an old out.npy, no temporary.
func TestRunWriteFailsMidway(t *testing.T) {
	dir := attentionFixture(t)
	must(t, dir, 0, "gen", "-shape", "1,2,6,8", "-seed", "4", "v4.npy")
	must(t, dir, 0, "run", "-out", "ref", "attention-forward", "q=q.npy", "k=k.npy", "v=v.npy")
	before := dirState(t, filepath.Join(dir, "ref"))
	ensure.Equal(t, []string{"lse.npy", "out.npy"}, names(before))
	ensure.Equal(t, "1664 bytes", strings.Fields(before["out.npy"])[0]+" bytes")

	// ulimit -f counts blocks of 512 bytes in sh: 2 blocks = 1024 bytes.
	o, e, code := shell(t, dir, "ulimit -f 2", "run", "-out", "ref", "attention-forward", "q=q.npy", "k=k.npy", "v=v4.npy")
	ensure.Equal(t, 2, code, "stdout:\n%s\nstderr:\n%s", o, e)
	expect.Contains(t, e, "plumb run: "+filepath.Join("ref", "out.npy")+": npy: Write: writing a float64 array of shape [1 4 6 8]: write: file too large; no output was replaced")
	expect.Empty(t, o, "no output is reported written")
	expect.Equal(t, before, dirState(t, filepath.Join(dir, "ref")))

	// The second output in the way (a directory named lse.npy): out.npy
	// is not replaced either.
	ensure.NoError(t, os.Remove(filepath.Join(dir, "ref", "lse.npy")))
	ensure.NoError(t, os.Mkdir(filepath.Join(dir, "ref", "lse.npy"), 0o755))
	before = dirState(t, filepath.Join(dir, "ref"))
	_, e = must(t, dir, 2, "run", "-out", "ref", "attention-forward", "q=q.npy", "k=k.npy", "v=v4.npy")
	expect.Contains(t, e, filepath.Join("ref", "lse.npy")+" is a directory")
	expect.Equal(t, before, dirState(t, filepath.Join(dir, "ref")))

	// plumb gen over an earlier file, likewise: 2^10 float64 values do not
	// fit in 1024 bytes.
	must(t, dir, 0, "gen", "-shape", "4", "g.npy")
	before = dirState(t, dir)
	_, e, code = shell(t, dir, "ulimit -f 2", "gen", "-shape", "1024", "g.npy")
	ensure.Equal(t, 2, code, e)
	expect.Contains(t, e, "g.npy: npy: Write: ")
	expect.Equal(t, before, dirState(t, dir))
}

// plumb gen writes to a file that is not a regular one (here standard
// output) directly: there is nothing there to keep.
func TestGenToStdout(t *testing.T) {
	if _, err := os.Stat("/dev/stdout"); err != nil {
		t.Skip("skipped: /dev/stdout not present")
	}
	o, e := must(t, t.TempDir(), 0, "gen", "-shape", "3", "-dist", "uniform", "-low", "0", "-high", "1", "/dev/stdout")
	r := bytes.NewReader([]byte(o))
	a, err := npy.Read(r)
	ensure.NoError(t, err)
	// The values of TestGenFirstValues, stated in plumb help gen.
	expect.Equal(t, []float64{0.5982609488236689, 0.08911177802144832, 0.715356444878812}, a.Values)
	rest, err := io.ReadAll(r)
	ensure.NoError(t, err)
	expect.Empty(t, rest, "standard output holds the .npy stream alone")
	expect.Equal(t, "wrote /dev/stdout: float64 [3], uniform, seed 1\n", e, "the status line goes to stderr")
}
