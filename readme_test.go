package plumb_test

import (
	"bufio"
	"bytes"
	"fmt"
	"go/format"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// Every Go block of README.md is a complete program (package main, its
// imports, main), written as a user writes one in a module of their own.
// TestReadmePrograms builds each block with the go command, from a file
// outside the repository but with this module as the main module, so that
// the program imports plumb's packages as a user's does (an internal
// package refuses it), offline and with -mod=readonly; runs it; and checks
// that it exits 0 and, where the README shows its output, prints that
// output.
//
// A block's output is the ```text block that follows it before any other
// block or heading (the prose between says "prints"). In it, a line that
// is … alone stands for any number of lines, and … ending a line for the
// rest of that line; everything else must match exactly.

// fence is one fenced block of a Markdown file.
type fence struct {
	lang string
	body string
	line int // the line of its opening ```
	// after is the fence that follows it, nil at the end; heading reports
	// whether a heading stands between the two.
	after   *fence
	heading bool
}

// fences returns the fenced blocks of a Markdown text, in order.
func fences(text string) []*fence {
	var out []*fence
	var cur *fence
	var body strings.Builder
	heading := false
	sc := bufio.NewScanner(strings.NewReader(text))
	for n := 1; sc.Scan(); n++ {
		l := sc.Text()
		switch {
		case cur == nil && strings.HasPrefix(l, "```"):
			cur = &fence{lang: strings.TrimSpace(l[3:]), line: n}
			if len(out) > 0 {
				out[len(out)-1].after, out[len(out)-1].heading = cur, heading
			}
			body.Reset()
		case cur != nil && l == "```":
			cur.body = body.String()
			out = append(out, cur)
			cur, heading = nil, false
		case cur != nil:
			body.WriteString(l + "\n")
		case strings.HasPrefix(l, "#"):
			heading = true
		}
	}
	return out
}

// output is the README's output of a Go block: the text block right after
// it, or "" and false.
func (f *fence) output() (string, bool) {
	if f.after == nil || f.heading || f.after.lang != "text" {
		return "", false
	}
	return f.after.body, true
}

// outputPattern turns a shown output into a regular expression over the
// whole output: … alone on a line is any number of lines, … at the end of
// a line the rest of it.
func outputPattern(shown string) *regexp.Regexp {
	var re strings.Builder
	re.WriteString(`\A`)
	for _, l := range strings.SplitAfter(shown, "\n") {
		switch body := strings.TrimSuffix(l, "\n"); {
		case l == "":
		case body == "…":
			re.WriteString(`(?:.*\n)*?`)
		case strings.HasSuffix(body, "…"):
			re.WriteString(regexp.QuoteMeta(strings.TrimSuffix(body, "…")) + `.*\n`)
		default:
			re.WriteString(regexp.QuoteMeta(l))
		}
	}
	re.WriteString(`\z`)
	return regexp.MustCompile(re.String())
}

func TestReadmePrograms(t *testing.T) {
	if testing.Short() {
		t.Skip("skipped in -short: each of the README's programs is built and run by the full go test")
	}
	readme, err := os.ReadFile("README.md")
	ensure.NoError(t, err)
	var programs []*fence
	for _, f := range fences(string(readme)) {
		if f.lang == "go" {
			programs = append(programs, f)
		}
	}
	ensure.NotEmpty(t, programs, "README.md has no Go block")
	root, err := filepath.Abs(repoRoot)
	ensure.NoError(t, err)
	for _, p := range programs {
		t.Run(fmt.Sprintf("line %d", p.line), func(t *testing.T) {
			t.Parallel()
			formatted, err := format.Source([]byte(p.body))
			ensure.NoError(t, err, "README.md:%d: the Go block does not parse", p.line)
			expect.Equal(t, string(formatted), p.body, "README.md:%d: the Go block is not gofmt'ed", p.line)

			dir := t.TempDir()
			src, bin := filepath.Join(dir, "main.go"), filepath.Join(dir, "program")
			ensure.NoError(t, os.WriteFile(src, []byte(p.body), 0o644))
			build := exec.Command("go", "build", "-o", bin, src)
			build.Dir = root // this module is the main module: its requirements and go.sum resolve the imports
			out, err := build.CombinedOutput()
			ensure.NoError(t, err, "README.md:%d: the Go block does not build as a program:\n%s", p.line, out)

			var stdout, stderr bytes.Buffer
			run := exec.Command(bin)
			run.Dir, run.Stdout, run.Stderr = dir, &stdout, &stderr
			ensure.NoError(t, run.Run(), "README.md:%d: the program fails:\nstdout:\n%s\nstderr:\n%s", p.line, &stdout, &stderr)
			if shown, ok := p.output(); ok {
				expect.Regexp(t, outputPattern(shown), stdout.String(), "README.md:%d: the program prints other than README.md:%d shows", p.line, p.after.line)
			}
		})
	}
}

// TestReadmeOutputRules: the rules that pair a Go block with its output
// and match the output, on a made-up README.
func TestReadmeOutputRules(t *testing.T) {
	md := "# T\n\n```go\nA\n```\n\nprints\n\n```text\na\n…\nz…\n```\n\n```go\nB\n```\n\n## next\n\n```text\nnot B's\n```\n\n```sh\nC\n```\n"
	fs := fences(md)
	ensure.Len(t, fs, 5)
	expect.Equal(t, []string{"go", "text", "go", "text", "sh"}, []string{fs[0].lang, fs[1].lang, fs[2].lang, fs[3].lang, fs[4].lang})
	expect.Equal(t, "A\n", fs[0].body)
	expect.Equal(t, 3, fs[0].line)
	shown, ok := fs[0].output()
	expect.True(t, ok)
	expect.Equal(t, "a\n…\nz…\n", shown)
	_, ok = fs[2].output()
	expect.False(t, ok, "a heading stands between B and the text block")
	_, ok = fs[4].output()
	expect.False(t, ok, "the last block has none")

	re := outputPattern(shown)
	for out, want := range map[string]bool{
		"a\nz\n":             true,
		"a\nb\nc\nzzz 1 2\n": true,
		"a\nz":               false, // the last newline missing
		"x\na\nz\n":          false, // a line before a
		"a\nz\nextra\n":      false, // a line after the last
		"a\nb\n":             false,
	} {
		expect.Equal(t, want, re.MatchString(out), "%q", out)
	}
	expect.True(t, outputPattern("[1 2]\n").MatchString("[1 2]\n"), "brackets are literal")
	expect.False(t, outputPattern("[1 2]\n").MatchString("1\n"))
}
