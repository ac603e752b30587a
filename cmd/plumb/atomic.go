package main

import (
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
)

// outputSet writes the output files of one command all or none. Each file
// is written to a temporary file beside its target (same directory, so a
// rename replaces the target in one step), synced to disk and closed; only
// when every file of the set has been written does commit rename the
// temporaries over their targets, and if a rename fails the targets
// renamed so far are put back. A reader of a target sees the old file or
// the new one, never a part of one, and a failed command leaves the
// previous files as they were and no temporaries behind.
//
// A target that exists and is not a regular file (a device or a pipe, such
// as /dev/stdout) has no previous content to keep and is written directly.
type outputSet struct {
	files []*pendingFile
}

// pendingFile is one file of an outputSet.
type pendingFile struct {
	target  string // the path written, symbolic links resolved
	existed bool   // target was a regular file before
	direct  bool   // target is not a regular file: written in place
	temp    string // the temporary beside target ("" once renamed, or when direct)
	backup  string // a hard link to the previous target during commit ("" when none)
}

// renameFile is os.Rename; tests replace it to make a rename fail.
var renameFile = os.Rename

// writeAtomic writes the one file path with write, as a set of one file.
func writeAtomic(path string, write func(w io.Writer) error) error {
	var s outputSet
	defer s.abort()
	if err := s.add(path, write); err != nil {
		return err
	}
	return s.commit()
}

// add writes one file of the set: write's bytes go to a temporary beside
// path, which is synced and closed. On an error nothing of path changes
// (abort removes the temporaries written before).
func (s *outputSet) add(path string, write func(w io.Writer) error) error {
	target, fi, err := resolveTarget(path)
	p := &pendingFile{target: target}
	switch {
	case err != nil && !errors.Is(err, os.ErrNotExist):
		return fmt.Errorf("%s: %w", path, trimPath(err, path))
	case err == nil && fi.IsDir():
		return fmt.Errorf("%s is a directory; want a path where a file can be written", path)
	case err == nil && !fi.Mode().IsRegular():
		p.direct = true
		return s.writeDirect(p, path, write)
	}
	p.existed = err == nil
	f, err := createBeside(p.target)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	p.temp = f.Name()
	s.files = append(s.files, p) // from here on abort removes the temporary
	var werr error
	if p.existed {
		// Keep the mode of the file replaced, as writing over it would.
		werr = trimPath(f.Chmod(fi.Mode().Perm()), p.temp)
	}
	if werr == nil {
		werr = write(tempWriter{f})
	}
	if werr == nil {
		werr = trimPath(f.Sync(), p.temp)
	}
	if cerr := f.Close(); werr == nil {
		werr = trimPath(cerr, p.temp)
	}
	if werr != nil {
		return fmt.Errorf("%s: %w; no output was replaced", path, werr)
	}
	return nil
}

// resolveTarget returns the file that writing to path replaces: path, or
// for a symbolic link the file it points to, with that file's information
// (an error wrapping os.ErrNotExist when there is none yet).
func resolveTarget(path string) (string, os.FileInfo, error) {
	fi, err := os.Lstat(path)
	if err != nil || fi.Mode()&os.ModeSymlink == 0 {
		return path, fi, err
	}
	if resolved, err := filepath.EvalSymlinks(path); err == nil {
		fi, err := os.Lstat(resolved)
		return resolved, fi, err
	}
	// A link EvalSymlinks cannot follow to its end: one to a file that does
	// not exist yet, which is created where the link points, or one such as
	// /dev/stdout, whose last link names a pipe ("pipe:[…]"), not a path.
	fi, err = os.Stat(path)
	if errors.Is(err, os.ErrNotExist) {
		if dest, rerr := os.Readlink(path); rerr == nil {
			if !filepath.IsAbs(dest) {
				dest = filepath.Join(filepath.Dir(path), dest)
			}
			return dest, nil, err
		}
	}
	return path, fi, err
}

// writeDirect writes to a target that is not a regular file.
func (s *outputSet) writeDirect(p *pendingFile, path string, write func(w io.Writer) error) error {
	f, err := os.OpenFile(p.target, os.O_WRONLY, 0)
	if err != nil {
		return fmt.Errorf("%s: %w", path, trimPath(err, p.target))
	}
	werr := write(f)
	if cerr := f.Close(); werr == nil {
		werr = trimPath(cerr, p.target)
	}
	if werr != nil {
		return fmt.Errorf("%s: %w", path, werr)
	}
	s.files = append(s.files, p)
	return nil
}

// tempWriter writes to a temporary file and drops the temporary's name from
// the errors (the message names the target instead).
type tempWriter struct{ f *os.File }

func (w tempWriter) Write(b []byte) (int, error) {
	n, err := w.f.Write(b)
	return n, trimPath(err, w.f.Name())
}

// createBeside creates a new file in the directory of target, named after
// it with a random suffix, with mode 0666 less the umask (as os.Create
// gives).
func createBeside(target string) (*os.File, error) {
	dir, base := filepath.Split(target)
	for range 100 {
		name := filepath.Join(dir, fmt.Sprintf(".%s.tmp-%08x", base, rand.Uint32()))
		f, err := os.OpenFile(name, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
		if errors.Is(err, os.ErrExist) {
			continue
		}
		if err != nil {
			return nil, fmt.Errorf("creating a temporary file in %s: %w", displayDir(dir), trimPath(err, name))
		}
		return f, nil
	}
	return nil, fmt.Errorf("creating a temporary file in %s: 100 random names exist already; want one free name", displayDir(dir))
}

func displayDir(dir string) string {
	if dir == "" {
		return "."
	}
	return filepath.Clean(dir)
}

// commit renames every temporary over its target. If a rename fails, the
// targets renamed before it are restored from hard links to the previous
// files (or removed, where there was none), so that the set is replaced
// all or none.
func (s *outputSet) commit() error {
	for _, p := range s.files {
		if p.existed {
			i := strings.LastIndex(p.temp, ".tmp-") // the suffix createBeside adds
			backup := p.temp[:i] + ".old-" + p.temp[i+len(".tmp-"):]
			if os.Link(p.target, backup) == nil {
				p.backup = backup
			}
		}
	}
	for i, p := range s.files {
		if p.direct {
			continue
		}
		if err := renameFile(p.temp, p.target); err != nil {
			return fmt.Errorf("%s: %w; %s", p.target, trimPath(err, p.temp), s.rollback(i))
		}
		p.temp = ""
	}
	dirs := map[string]bool{}
	for _, p := range s.files {
		if !p.direct {
			dirs[filepath.Dir(p.target)] = true
		}
	}
	s.abort() // the backups
	for d := range dirs {
		syncDir(d)
	}
	return nil
}

// rollback undoes the renames of the files before the i-th, removes the
// remaining temporaries and says what became of the previous files.
func (s *outputSet) rollback(i int) string {
	var lost []string
	for _, p := range s.files[:i] {
		switch {
		case p.direct:
		case p.backup != "":
			if renameFile(p.backup, p.target) == nil {
				p.backup = ""
			} else {
				lost = append(lost, fmt.Sprintf("%s (the previous file is %s)", p.target, p.backup))
				p.backup = "" // kept for the user
			}
		case p.existed:
			lost = append(lost, p.target+" (no copy of the previous file could be made)")
		default:
			if os.Remove(p.target) != nil {
				lost = append(lost, p.target+" (it did not exist before)")
			}
		}
	}
	s.abort()
	if len(lost) > 0 {
		return "these outputs were replaced and could not be restored: " + strings.Join(lost, ", ")
	}
	return "no output was replaced"
}

// abort removes the temporaries and backups not yet renamed; after commit
// it does nothing.
func (s *outputSet) abort() {
	for _, p := range s.files {
		if p.temp != "" {
			os.Remove(p.temp)
		}
		if p.backup != "" {
			os.Remove(p.backup)
		}
	}
	s.files = nil
}

// syncDir syncs a directory so that the renames in it are on disk. Not
// every system can sync a directory; the renames are done either way, so
// an error here changes nothing and is dropped.
func syncDir(dir string) {
	d, err := os.Open(dir)
	if err != nil {
		return
	}
	d.Sync()
	d.Close()
}
