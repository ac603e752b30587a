package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// versionText on the build information of each kind of build.
func TestVersionText(t *testing.T) {
	info := func(version string, settings ...string) *debug.BuildInfo {
		bi := &debug.BuildInfo{GoVersion: "go1.99.1", Path: "github.com/plumbref/plumb/cmd/plumb",
			Main: debug.Module{Path: "github.com/plumbref/plumb", Version: version}}
		for i := 0; i+1 < len(settings); i += 2 {
			bi.Settings = append(bi.Settings, debug.BuildSetting{Key: settings[i], Value: settings[i+1]})
		}
		return bi
	}
	for _, tc := range []struct {
		name     string
		bi       *debug.BuildInfo
		ok       bool
		version  string
		revision string
	}{
		{"release, go install @v1.2.0", info("v1.2.0"), true,
			"plumb v1.2.0\n", "revision  not recorded; the release v1.2.0 names it\n"},
		{"go install @latest before any tag", info("v0.0.0-20250102150405-3f2a1b0c9d8e"), true,
			"plumb v0.0.0-20250102150405-3f2a1b0c9d8e\n", "revision  3f2a1b0c9d8e (2025-01-02T15:04:05Z), from the pseudo-version\n"},
		{"a commit after a pre-release", info("v1.3.0-rc.1.0.20250607080910-aaaaaaaaaaaa"), true,
			"plumb v1.3.0-rc.1.0.20250607080910-aaaaaaaaaaaa\n", "revision  aaaaaaaaaaaa (2025-06-07T08:09:10Z), from the pseudo-version\n"},
		{"a commit after a release", info("v1.2.1-0.20250607080910-bbbbbbbbbbbb+dirty"), true,
			"plumb v1.2.1-0.20250607080910-bbbbbbbbbbbb+dirty\n", "revision  bbbbbbbbbbbb (2025-06-07T08:09:10Z), from the pseudo-version, with changes not committed\n"},
		{"a clone, stamped", info("(devel)", "vcs", "git", "vcs.revision", "0123456789abcdef0123456789abcdef01234567", "vcs.time", "2025-03-04T05:06:07Z", "vcs.modified", "true"), true,
			"plumb (devel)\n", "revision  0123456789abcdef0123456789abcdef01234567 (2025-03-04T05:06:07Z), with changes not committed\n"},
		{"a clone, clean", info("(devel)", "vcs.revision", "0123456789abcdef0123456789abcdef01234567", "vcs.modified", "false"), true,
			"plumb (devel)\n", "revision  0123456789abcdef0123456789abcdef01234567\n"},
		{"-buildvcs=false", info("(devel)", "-buildvcs", "false"), true,
			"plumb (devel)\n", "revision  not recorded (built without VCS stamping: -buildvcs=false, or outside a repository)\n"},
		{"no build information", nil, false,
			"plumb (version unknown: the binary records no build information)\n", ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := versionText(tc.bi, tc.ok, "linux/amd64")
			expect.True(t, strings.HasPrefix(s, tc.version), s)
			expect.Contains(t, s, tc.revision)
			if tc.ok {
				expect.Contains(t, s, "  module    github.com/plumbref/plumb ")
				expect.Contains(t, s, "  go        go1.99.1 linux/amd64\n")
			} else {
				expect.Contains(t, s, "  go        "+runtime.Version()+" linux/amd64\n")
			}
		})
	}
}

// plumb version on the test binary, and listed by plumb help; it takes
// no arguments.
func TestVersionCommand(t *testing.T) {
	dir := t.TempDir()
	o, _ := must(t, dir, 0, "version")
	expect.True(t, strings.HasPrefix(o, "plumb "), o)
	expect.Contains(t, o, "  module    github.com/plumbref/plumb ")
	// The binary TestMain built is for the go command's target, which is
	// not this test's architecture when the test runs under an emulator.
	target, err := exec.Command("go", "env", "GOOS", "GOARCH").Output()
	ensure.NoError(t, err)
	osArch := strings.Fields(string(target))
	ensure.Len(t, osArch, 2)
	expect.Contains(t, o, "  go        "+runtime.Version()+" "+osArch[0]+"/"+osArch[1]+"\n")
	o, _ = must(t, dir, 0, "help")
	expect.Contains(t, o, "  version")
	expect.Less(t, strings.Index(o, "  demo"), strings.Index(o, "  version"), "listed after the other commands")
	o, _ = must(t, dir, 0, "help", "version")
	expect.Contains(t, o, "usage: plumb version")
	_, e := must(t, dir, 2, "version", "extra")
	expect.Contains(t, e, `arguments = ["extra"]; want none (plumb help version)`)
}

// A binary built in the clone with VCS stamping names the checked-out
// commit.
func TestVersionRevision(t *testing.T) {
	if testing.Short() {
		t.Skip("builds plumb once more")
	}
	git, err := exec.LookPath("git")
	if err != nil {
		t.Skip("git is not installed")
	}
	head, err := exec.Command(git, "rev-parse", "HEAD").Output()
	if err != nil {
		t.Skipf("not in a git work tree: %v", err)
	}
	dirs, err := exec.Command(git, "rev-parse", "--path-format=absolute", "--git-dir", "--git-common-dir").Output()
	ensure.NoError(t, err)
	if d := strings.Fields(string(dirs)); len(d) == 2 && d[0] != d[1] {
		t.Skip("a linked work tree (git worktree), which the go command does not stamp; the test needs a clone")
	}
	bin := filepath.Join(t.TempDir(), "plumb")
	build := exec.Command("go", "build", "-buildvcs=true", "-o", bin, ".")
	build.Env = append(os.Environ(), "GOFLAGS=")
	out, err := build.CombinedOutput()
	ensure.NoError(t, err, "go build -buildvcs=true: %s", out)
	o, _, code := runCmd(t, exec.Command(bin, "version"), t.TempDir(), []string{"version"})
	ensure.Equal(t, 0, code)
	expect.Contains(t, o, "  revision  "+strings.TrimSpace(string(head)), o)
}
