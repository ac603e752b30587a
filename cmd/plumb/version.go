package main

import (
	"flag"
	"fmt"
	"regexp"
	"runtime"
	"runtime/debug"
	"strings"
	"time"
)

// plumb version: what the binary says of its own build, from the build
// information the go command records in it (runtime/debug.ReadBuildInfo).

func init() {
	order = append(order, "version")
	commands = append(commands, &command{
		name:    "version",
		usage:   "version",
		summary: "print plumb's module version, VCS revision and Go version",
		about: `
Prints what the binary records of its build: the module's version, the
version control revision it was built from, and the Go toolchain that
built it.

A binary from go install github.com/plumbref/plumb/cmd/plumb@VERSION has
the version it was asked for: a release tag (v1.2.0) or, for a commit
without one (@latest before the first tag, @main, @COMMIT), a
pseudo-version whose last part is the commit's revision and whose
timestamp is the commit's time (v0.0.0-20250102150405-3f2a1b0c9d8e).
A binary built in a clone of the repository (go build ./cmd/plumb, go run)
has the revision and time of the checked-out commit, and says so when the
work tree had changes, unless VCS stamping is off (-buildvcs=false), in
which case the revision is not recorded and the command says that.
`,
		flags: func(fs *flag.FlagSet) any { return nil },
		nargs: 0,
		args:  "none",
		run: func(e *env, _ any, _ []string) (int, error) {
			bi, ok := debug.ReadBuildInfo()
			_, err := fmt.Fprint(e.stdout, versionText(bi, ok, runtime.GOOS+"/"+runtime.GOARCH))
			return exitPass, err
		},
	})
}

// pseudoVersion matches the end of a Go pseudo-version: the commit's UTC
// time (yyyymmddhhmmss) and the first 12 hex digits of its revision, as
// the go command writes them (vX.Y.Z-yyyymmddhhmmss-abcdefabcdef,
// vX.Y.Z-pre.0.yyyymmddhhmmss-abcdefabcdef,
// vX.Y.(Z+1)-0.yyyymmddhhmmss-abcdefabcdef), with an optional build suffix.
var pseudoVersion = regexp.MustCompile(`[-.](\d{14})-([0-9a-f]{12})(\+[0-9A-Za-z.+-]+)?$`)

// versionText is what plumb version prints for the build information bi
// (ok false: the binary has none), on platform (GOOS/GOARCH).
func versionText(bi *debug.BuildInfo, ok bool, platform string) string {
	var b strings.Builder
	if !ok || bi == nil {
		fmt.Fprintf(&b, "plumb (version unknown: the binary records no build information)\n")
		fmt.Fprintf(&b, "  go        %s %s\n", runtime.Version(), platform)
		return b.String()
	}
	version := bi.Main.Version
	if version == "" {
		version = "(devel)"
	}
	path := bi.Main.Path
	if path == "" {
		path = bi.Path
	}
	settings := map[string]string{}
	for _, s := range bi.Settings {
		settings[s.Key] = s.Value
	}
	fmt.Fprintf(&b, "plumb %s\n", version)
	fmt.Fprintf(&b, "  module    %s %s", path, version)
	if r := bi.Main.Replace; r != nil {
		fmt.Fprintf(&b, " (replaced by %s %s)", r.Path, r.Version)
	}
	b.WriteString("\n")
	fmt.Fprintf(&b, "  revision  %s\n", revisionText(version, settings))
	goVersion := bi.GoVersion
	if goVersion == "" {
		goVersion = runtime.Version()
	}
	fmt.Fprintf(&b, "  go        %s %s\n", goVersion, platform)
	return b.String()
}

// revisionText says which revision the build is of: the VCS stamp when the
// go command recorded one, else the revision a pseudo-version names, else
// why none is known.
func revisionText(version string, settings map[string]string) string {
	if rev := settings["vcs.revision"]; rev != "" {
		s := rev
		if t := settings["vcs.time"]; t != "" {
			s += " (" + t + ")"
		}
		if settings["vcs.modified"] == "true" {
			s += ", with changes not committed"
		}
		if vcs := settings["vcs"]; vcs != "" && vcs != "git" {
			s += ", " + vcs
		}
		return s
	}
	if m := pseudoVersion.FindStringSubmatch(version); m != nil {
		s := m[2]
		if t, err := time.Parse("20060102150405", m[1]); err == nil {
			s += " (" + t.UTC().Format(time.RFC3339) + ")"
		}
		s += ", from the pseudo-version"
		if strings.Contains(m[3], "dirty") {
			s += ", with changes not committed"
		}
		return s
	}
	if version != "(devel)" {
		return "not recorded; the release " + version + " names it"
	}
	return "not recorded (built without VCS stamping: -buildvcs=false, or outside a repository)"
}
