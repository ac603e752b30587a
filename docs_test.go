package plumb_test

import (
	"bufio"
	"bytes"
	"fmt"
	"go/parser"
	"go/token"
	"io/fs"
	"os"
	"os/exec"
	"path"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// The documentation names files and folders of the repository: the guides
// (README.md, DEVELOPERS.md, testdata/README.md), the comments of every Go
// file, and the text of every plumb help topic. TestDocumentedPathsExist
// checks that each one is there, so that no document points a reader at a
// file that was moved, renamed, or never was part of the repository.
//
// What counts as a path. The text is cut into words at white space and at
// the characters ( ) [ ] ` " ' , ; : = that never stand inside a path here
// (so that a Markdown link target, a backquoted name and a file:line
// reference each give their path); web addresses are dropped first, and
// sentence punctuation is trimmed from the end of a word. A word made of
// letters, digits and _ . - / alone (no wildcard, placeholder or brace) and
// not starting with / (a path of the machine, not of the repository) is a
// path when
//
//  1. it ends in .go, .py, .md or .sh: a source or documentation file,
//     with or without folders ("README.md", "testdata/gen/gen.py");
//  2. it starts with ./ or ../ and a name ("./cmd/plumb"; a Go pattern
//     with "..." is not a path);
//  3. it starts with the module path github.com/plumbref/plumb/ (an import
//     path: the rest is a folder of the repository); or
//  4. it holds a / and its first element is a file or folder that exists
//     where the path is read from ("mask/", "testdata/golden",
//     "examples/fastattn").
//
// So "heads_q/heads_kv" and "1/√dim" are not paths, nor are the names of a
// user's files in examples ("q.npy", "DIR/NAME.npy", "ref/out.npy"); a
// data file under a folder of the repository is
// ("testdata/gen/vocabulary.json").
//
// Where a path is read from: a guide's paths are relative to the guide's
// own folder or to the repository root; a Go comment's to the file's folder
// or to the root; a help topic's to the root (the command's users read it
// at the top of a clone). A path must exist inside the repository: one
// that climbs out of it is missing, whatever is there.

// docPath is a path a document names.
type docPath struct {
	where string   // "README.md:34", "ops/doc.go:12", "plumb help gen"
	path  string   // as written
	bases []string // folders, relative to the root, it may be relative to
}

// modulePath is the module's import path.
const modulePath = "github.com/plumbref/plumb/"

var (
	webAddress = regexp.MustCompile(`[a-zA-Z][a-zA-Z0-9+.-]*://\S*`)
	pathChars  = regexp.MustCompile(`^[A-Za-z0-9_./-]+$`)
	sourceExt  = regexp.MustCompile(`[A-Za-z0-9_-]\.(go|py|md|sh)$`)
)

// pathWords returns the words of text that are paths by the rule above;
// entry reports whether a first path element names a file or folder where
// the text is read from.
func pathWords(text string, entry func(first string) bool) []string {
	text = webAddress.ReplaceAllString(text, " ")
	words := strings.FieldsFunc(text, func(r rune) bool {
		return r == ' ' || r == '\t' || r == '\n' || r == '\r' || strings.ContainsRune("()[]`\"',;:=", r)
	})
	var out []string
	for _, w := range words {
		if strings.Contains(w, "...") {
			continue // a Go package pattern
		}
		w = strings.TrimRight(w, ".!?")
		if w == "" || !pathChars.MatchString(w) || strings.HasPrefix(w, "/") || w == "./" || w == "../" {
			continue
		}
		first, _, nested := strings.Cut(w, "/")
		switch {
		case sourceExt.MatchString(w),
			strings.HasPrefix(w, "./") || strings.HasPrefix(w, "../"),
			strings.HasPrefix(w, modulePath),
			nested && first != "" && entry(first):
			out = append(out, w)
		}
	}
	return out
}

// repoRoot is the repository root: the folder of this file, where the
// test runs.
const repoRoot = "."

// exists reports whether p, relative to one of the bases, names a file or
// folder inside the repository.
func exists(p string, bases []string) bool {
	if rest, ok := strings.CutPrefix(p, modulePath); ok {
		p, bases = rest, []string{""}
	}
	for _, b := range bases {
		rel := path.Clean(path.Join(b, p))
		if rel == ".." || strings.HasPrefix(rel, "../") {
			continue // outside the repository
		}
		if _, err := os.Stat(filepath.Join(repoRoot, filepath.FromSlash(rel))); err == nil {
			return true
		}
	}
	return false
}

// entryIn reports whether first names a file or folder in one of the bases.
func entryIn(bases []string) func(string) bool {
	return func(first string) bool {
		if first == "." || first == ".." {
			return false
		}
		for _, b := range bases {
			if _, err := os.Stat(filepath.Join(repoRoot, filepath.FromSlash(b), first)); err == nil {
				return true
			}
		}
		return false
	}
}

// linePaths collects the paths of text, line by line; where is the
// document's name, first the number of its first line.
func linePaths(where string, first int, text string, bases []string) []docPath {
	var out []docPath
	sc := bufio.NewScanner(strings.NewReader(text))
	sc.Buffer(nil, 1<<20)
	for n := first; sc.Scan(); n++ {
		for _, p := range pathWords(sc.Text(), entryIn(bases)) {
			out = append(out, docPath{where: fmt.Sprintf("%s:%d", where, n), path: p, bases: bases})
		}
	}
	return out
}

// guidePaths are the paths of the guides.
func guidePaths(t *testing.T) []docPath {
	var out []docPath
	for _, g := range []string{"README.md", "DEVELOPERS.md", "testdata/README.md"} {
		b, err := os.ReadFile(filepath.FromSlash(g))
		ensure.NoError(t, err)
		dir := path.Dir(g)
		if dir == "." {
			dir = ""
		}
		out = append(out, linePaths(g, 1, string(b), slices.Compact([]string{dir, ""}))...)
	}
	return out
}

// commentPaths are the paths of the comments of every Go file outside
// testdata folders (which hold data, not documentation).
func commentPaths(t *testing.T) []docPath {
	var out []docPath
	err := filepath.WalkDir(repoRoot, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			if p != repoRoot && (strings.HasPrefix(d.Name(), ".") || d.Name() == "testdata") {
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(p, ".go") {
			return nil
		}
		fset := token.NewFileSet()
		f, err := parser.ParseFile(fset, p, nil, parser.ParseComments)
		if err != nil {
			return err
		}
		rel := filepath.ToSlash(p)
		dir := path.Dir(rel)
		if dir == "." {
			dir = ""
		}
		for _, c := range f.Comments {
			out = append(out, linePaths(rel, fset.Position(c.Pos()).Line, c.Text(), slices.Compact([]string{dir, ""}))...)
		}
		return nil
	})
	ensure.NoError(t, err)
	return out
}

// helpPaths are the paths of every plumb help topic: the overview, each
// command, "ops", "conventions" and each operation, from the built command.
func helpPaths(t *testing.T) []docPath {
	bin := filepath.Join(t.TempDir(), "plumb")
	out, err := exec.Command("go", "build", "-o", bin, "./cmd/plumb").CombinedOutput()
	ensure.NoError(t, err, "building plumb: %s", out)
	help := func(topic ...string) string {
		var o bytes.Buffer
		cmd := exec.Command(bin, append([]string{"help"}, topic...)...)
		cmd.Stdout = &o
		ensure.NoError(t, cmd.Run(), "plumb help %s", strings.Join(topic, " "))
		return o.String()
	}
	top := help()
	topics := []string{"ops", "conventions"}
	// The overview lists the commands as "  NAME   summary" after "commands:".
	_, list, ok := strings.Cut(top, "\ncommands:\n")
	ensure.True(t, ok, "plumb help lists no commands:\n%s", top)
	for _, l := range strings.Split(list, "\n") {
		f := strings.Fields(l)
		if len(f) == 0 || !strings.HasPrefix(l, "  ") {
			break
		}
		if l[2] != ' ' && f[0] != "help" {
			topics = append(topics, f[0])
		}
	}
	ensure.Contains(t, topics, "gen", "the commands parsed from plumb help")
	topics = append(topics, ops.Names()...)
	paths := linePaths("plumb help", 1, top, []string{""})
	for _, tp := range topics {
		paths = append(paths, linePaths("plumb help "+tp, 1, help(tp), []string{""})...)
	}
	return paths
}

func TestDocumentedPathsExist(t *testing.T) {
	var all []docPath
	all = append(all, guidePaths(t)...)
	all = append(all, commentPaths(t)...)
	all = append(all, helpPaths(t)...)
	ensure.NotEmpty(t, all)
	seen := map[string]bool{}
	for _, p := range all {
		key := p.where + " " + p.path
		if !seen[key] && !exists(p.path, p.bases) {
			t.Errorf("%s names %s, which is not in the repository", p.where, p.path)
		}
		seen[key] = true
	}
	t.Logf("%d paths checked", len(all))
}

// TestPathWords: the rule finds the paths of a line, a made-up one
// included, and nothing else; a made-up path is reported missing.
func TestPathWords(t *testing.T) {
	line := "See no_such_guide.md and `ops/no_such_file.go`, testdata/golden/none.json (line 3), cmd/plumb/gen.go:93; " +
		"heads_q/heads_kv, 1/√dim, q.npy, DIR/NAME.npy, testdata/gen/fam_<package>.py, golden/*.json, " +
		"https://example.org/a.md, /usr/bin/python3, go test ./..., [the guide](DEVELOPERS.md), ./cmd/plumb, ../outside/notes and " +
		modulePath + "ops."
	got := pathWords(line, entryIn([]string{""}))
	expect.Equal(t, []string{"no_such_guide.md", "ops/no_such_file.go", "testdata/golden/none.json", "cmd/plumb/gen.go",
		"DEVELOPERS.md", "./cmd/plumb", "../outside/notes", modulePath + "ops"}, got)

	var missing []string
	for _, p := range got {
		if !exists(p, []string{""}) {
			missing = append(missing, p)
		}
	}
	expect.Equal(t, []string{"no_such_guide.md", "ops/no_such_file.go", "testdata/golden/none.json", "../outside/notes"}, missing)

	// Relative to a guide's own folder: golden/ is testdata's.
	expect.True(t, exists("golden/mask/kinds.json", []string{"testdata", ""}))
	expect.False(t, exists("golden/mask/kinds.json", []string{""}))
	expect.Equal(t, []string{"golden/mask/none.json"}, pathWords("`golden/mask/none.json`", entryIn([]string{"testdata", ""})))
}
