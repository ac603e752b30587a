package npy

import (
	"archive/zip"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"
)

// An .npz file is NumPy's archive of arrays (numpy.savez stores the
// members, numpy.savez_compressed deflates them): a zip archive (the
// .ZIP File Format Specification; Go's archive/zip reads and writes it)
// whose members are .npy files named NAME.npy, NAME being the keyword
// given to savez, or arr_0, arr_1, … for positional arrays. The array's
// name is the member's name without ".npy".

// zipMagics are the first four bytes of a zip archive: a local file header,
// or the end of central directory record of an empty archive.
var zipMagics = []string{"PK\x03\x04", "PK\x05\x06"}

// isZip reports whether b, the first four bytes of a file, open a zip
// archive.
func isZip(b []byte) bool {
	for _, m := range zipMagics {
		if string(b) == m {
			return true
		}
	}
	return false
}

// IsArchive reports whether head, the first bytes of a file (at least
// four), are those of a zip archive, as an .npz file is.
func IsArchive(head []byte) bool { return len(head) >= 4 && isZip(head[:4]) }

// Archive is an open .npz archive. Its members are read one at a time
// with Read, each bounded as Read bounds a stream: the data are read as
// they are decompressed, and a header that promises more than the member
// holds fails with ErrData before anything large is allocated.
type Archive struct {
	fn      string // "OpenArchive: PATH" or "NewArchive", for messages
	files   []*zip.File
	closer  io.Closer
	members []string
}

// OpenArchive opens the .npz file at path. Close it when done.
//
// Special cases are:
//
//	not a zip archive (a .npy file, say)  ErrArchive, saying what it is
//	a damaged central directory           ErrArchive
//	no such file, or unreadable           the error of os.Open, as it is
func OpenArchive(path string) (*Archive, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	fi, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, err
	}
	a, err := newArchive("OpenArchive: "+path, f, fi.Size())
	if err != nil {
		f.Close()
		return nil, err
	}
	a.closer = f
	return a, nil
}

// NewArchive reads the .npz archive of size bytes that r holds (a
// *bytes.Reader of a file read whole, an *os.File). Close does nothing for
// it.
func NewArchive(r io.ReaderAt, size int64) (*Archive, error) {
	if r == nil {
		return nil, fmt.Errorf("%w: NewArchive: r = nil; want an io.ReaderAt holding an .npz archive", ErrArchive)
	}
	return newArchive("NewArchive", r, size)
}

func newArchive(fn string, r io.ReaderAt, size int64) (*Archive, error) {
	var head [6]byte
	n, _ := r.ReadAt(head[:], 0)
	switch {
	case n >= 6 && string(head[:]) == magic:
		return nil, fmt.Errorf("%w: %s: the file is a .npy file (it starts with %q); want an .npz archive: read it with ReadFile", ErrArchive, fn, magic)
	case n < 4 || !isZip(head[:4]):
		return nil, fmt.Errorf("%w: %s: the file starts with %q; want a zip archive (\"PK\\x03\\x04\"), as numpy.savez writes", ErrArchive, fn, head[:n])
	}
	zr, err := zip.NewReader(r, size)
	if errors.Is(err, zip.ErrInsecurePath) {
		err = nil // names are looked up, never used as paths
	}
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %v; want an intact zip archive", ErrArchive, fn, err)
	}
	a := &Archive{fn: fn}
	for _, f := range zr.File {
		if strings.HasSuffix(f.Name, "/") {
			continue // a folder entry holds no array
		}
		a.files = append(a.files, f)
		a.members = append(a.members, strings.TrimSuffix(f.Name, ".npy"))
	}
	return a, nil
}

// Names lists the arrays of the archive, in the archive's order: each
// member's name without ".npy".
func (a *Archive) Names() []string {
	if a == nil {
		return nil
	}
	return append([]string(nil), a.members...)
}

// Close closes the file OpenArchive opened.
func (a *Archive) Close() error {
	if a == nil || a.closer == nil {
		return nil
	}
	return a.closer.Close()
}

// Read reads the array called name: the member NAME.npy (or a member
// called name exactly), with Read's bounds, and refuses bytes after its
// data (ErrData) as ReadFile does.
//
// Special cases are:
//
//	no member of that name             ErrMember, listing the members
//	a method other than stored, deflate  ErrArchive, naming the method
//	a checksum that does not match     ErrArchive
//	a member that is not a .npy file   as Read says (ErrFormat, …)
//	a nil a                            ErrMember
func (a *Archive) Read(name string) (*Array, error) {
	if a == nil {
		return nil, fmt.Errorf("%w: Archive.Read: receiver = nil; want an Archive", ErrMember)
	}
	var f *zip.File
	for i, m := range a.files {
		if a.members[i] == name || m.Name == name {
			f = m
			break
		}
	}
	if f == nil {
		return nil, fmt.Errorf("%w: %s: Archive.Read: name = %q; want %s", ErrMember, a.fn, name, a.membersText())
	}
	fn := a.fn + ": member " + f.Name
	rc, err := f.Open()
	if err != nil {
		if errors.Is(err, zip.ErrAlgorithm) {
			return nil, fmt.Errorf("%w: %s: compression method = %d; want stored (0) or deflate (8), as numpy.savez and numpy.savez_compressed write", ErrArchive, fn, f.Method)
		}
		return nil, fmt.Errorf("%w: %s: %v", ErrArchive, fn, err)
	}
	defer rc.Close()
	arr, err := read(fn, rc)
	if err != nil {
		if errors.Is(err, zip.ErrChecksum) || errors.Is(err, zip.ErrFormat) {
			return nil, fmt.Errorf("%w: %s: %v", ErrArchive, fn, err)
		}
		return nil, err
	}
	var one [1]byte
	k, err := io.ReadFull(rc, one[:])
	switch {
	case k != 0:
		return nil, fmt.Errorf("%w: %s: bytes follow the %d bytes of data that shape %v of %v needs; want the member to end there",
			ErrData, fn, arr.Len()*arr.DType.Size(), arr.Shape, arr.DType)
	case err != io.EOF:
		return nil, fmt.Errorf("%w: %s: %v; want an intact member", ErrArchive, fn, err)
	}
	return arr, nil
}

// membersText lists the members for a message: "one of the members a, b"
// (the first 20 of more), or says there are none.
func (a *Archive) membersText() string {
	switch len(a.members) {
	case 0:
		return "a member; the archive has none"
	case 1:
		return fmt.Sprintf("the archive's one member, %q", a.members[0])
	}
	list := a.members
	more := ""
	if len(list) > 20 {
		list, more = list[:20], fmt.Sprintf(" and %d more", len(a.members)-20)
	}
	return fmt.Sprintf("one of the %d members: %s%s", len(a.members), strings.Join(list, ", "), more)
}

// ArchiveWriter writes an .npz archive, one array at a time (Add), as
// numpy.savez (stored) or numpy.savez_compressed (deflate) does, with the
// members' times set to 1980-01-01 00:00 so that the same arrays give the
// same bytes.
type ArchiveWriter struct {
	zw       *zip.Writer
	compress bool
	names    map[string]bool
}

// archiveTime is the modification time of every member written: the
// earliest a zip archive can record.
var archiveTime = time.Date(1980, 1, 1, 0, 0, 0, 0, time.UTC)

// NewArchiveWriter returns a writer of an .npz archive to w; compress
// deflates the members. Close writes the archive's directory.
func NewArchiveWriter(w io.Writer, compress bool) *ArchiveWriter {
	if w == nil {
		w = nilWriter{}
	}
	return &ArchiveWriter{zw: zip.NewWriter(w), compress: compress, names: map[string]bool{}}
}

// Add writes a as the member NAME.npy.
//
// Special cases are:
//
//	name empty, with a "/", ending ".npy" or given before  ErrMember
//	an invalid a                                          as Write says
//	w fails                                               its error, wrapped
func (w *ArchiveWriter) Add(name string, a *Array) error {
	if w == nil || w.zw == nil {
		return fmt.Errorf("%w: ArchiveWriter.Add: receiver = nil; want one from NewArchiveWriter", ErrMember)
	}
	if err := w.newName("ArchiveWriter.Add", name); err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := write("ArchiveWriter.Add: "+name, &buf, a); err != nil {
		return err
	}
	method := zip.Store
	if w.compress {
		method = zip.Deflate
	}
	f, err := w.zw.CreateHeader(&zip.FileHeader{Name: name + ".npy", Method: method, Modified: archiveTime})
	if err == nil {
		_, err = f.Write(buf.Bytes())
	}
	if err != nil {
		return fmt.Errorf("npy: ArchiveWriter.Add: %s: %w", name, err)
	}
	return nil
}

// Copy writes the member called name of the archive from as it is there
// (its compressed bytes, unchanged): the way to keep the other members
// when one member of an archive is replaced.
func (w *ArchiveWriter) Copy(from *Archive, name string) error {
	if w == nil || w.zw == nil {
		return fmt.Errorf("%w: ArchiveWriter.Copy: receiver = nil; want one from NewArchiveWriter", ErrMember)
	}
	if err := w.newName("ArchiveWriter.Copy", name); err != nil {
		return err
	}
	if from == nil {
		return fmt.Errorf("%w: ArchiveWriter.Copy: from = nil; want an Archive", ErrMember)
	}
	for i, f := range from.files {
		if from.members[i] != name {
			continue
		}
		r, err := f.OpenRaw()
		if err != nil {
			return fmt.Errorf("%w: %s: member %s: %v", ErrArchive, from.fn, f.Name, err)
		}
		h := f.FileHeader
		h.Name = name + ".npy"
		dst, err := w.zw.CreateRaw(&h)
		if err == nil {
			_, err = io.Copy(dst, r)
		}
		if err != nil {
			return fmt.Errorf("npy: ArchiveWriter.Copy: %s: %w", name, err)
		}
		return nil
	}
	return fmt.Errorf("%w: %s: ArchiveWriter.Copy: name = %q; want %s", ErrMember, from.fn, name, from.membersText())
}

// newName checks and records a member name for a call of fn.
func (w *ArchiveWriter) newName(fn, name string) error {
	switch {
	case name == "" || strings.Contains(name, "/") || strings.HasSuffix(name, ".npy"):
		return fmt.Errorf("%w: %s: name = %q; want a name without \"/\" and without \".npy\" (the member is written as NAME.npy)", ErrMember, fn, name)
	case w.names[name]:
		return fmt.Errorf("%w: %s: name = %q given twice; want each name once", ErrMember, fn, name)
	}
	w.names[name] = true
	return nil
}

// Close finishes the archive: it writes the directory of the members. It
// does not close the underlying writer.
func (w *ArchiveWriter) Close() error {
	if w == nil || w.zw == nil {
		return fmt.Errorf("%w: ArchiveWriter.Close: receiver = nil; want one from NewArchiveWriter", ErrMember)
	}
	if err := w.zw.Close(); err != nil {
		return fmt.Errorf("npy: ArchiveWriter.Close: %w", err)
	}
	return nil
}

// nilWriter stands for a nil io.Writer: every write fails.
type nilWriter struct{}

func (nilWriter) Write([]byte) (int, error) {
	return 0, fmt.Errorf("%w: the io.Writer given to NewArchiveWriter is nil; want one to write the archive to", ErrFormat)
}
