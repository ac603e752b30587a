package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"

	"github.com/plumbref/plumb/ops"
)

// Exit statuses.
const (
	exitPass  = 0 // success; for diff and check, within tolerance
	exitFail  = 1 // diff or check: outside the tolerance
	exitUsage = 2 // a usage or input error
)

// env is what a subcommand sees of the process.
type env struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	// terminal reports whether stderr is a terminal (progress is shown only
	// then).
	terminal bool
	// stdinBy and stdoutBy name the file read from standard input ("-")
	// and the output written to standard output, once claimed: each serves
	// one file of a command.
	stdinBy, stdoutBy string
}

// command is one subcommand.
type command struct {
	name    string
	usage   string // the synopsis after "plumb "
	summary string // one line
	about   string // paragraphs after the synopsis
	flags   func(fs *flag.FlagSet) any
	// nargs is the number of arguments the command takes, which args says
	// in words for the message that refuses another number; −1 is any
	// number, which run checks.
	nargs int
	args  string
	run   func(e *env, opts any, args []string) (int, error)
}

// commands are the subcommands, in the order help lists them (see order).
var commands []*command

// order is the order of the subcommands in help.
var order = []string{"gen", "run", "diff", "check", "demo"}

func sortCommands() {
	rank := map[string]int{}
	for i, n := range order {
		rank[n] = i + 1
	}
	last := len(order) + 1 // a command order does not name goes after the others
	at := func(n string) int {
		if r, ok := rank[n]; ok {
			return r
		}
		return last
	}
	sort.SliceStable(commands, func(i, j int) bool { return at(commands[i].name) < at(commands[j].name) })
}

func lookup(name string) *command {
	for _, c := range commands {
		if c.name == name {
			return c
		}
	}
	return nil
}

func main() {
	fi, err := os.Stderr.Stat()
	term := err == nil && fi.Mode()&os.ModeCharDevice != 0
	os.Exit(plumb(os.Args[1:], &env{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, terminal: term}))
}

// plumb runs the command line args and returns the exit status.
func plumb(args []string, e *env) int {
	sortCommands()
	if len(args) == 0 {
		topUsage(e.stderr)
		return exitUsage
	}
	name := args[0]
	if name == "help" || name == "-h" || name == "-help" || name == "--help" {
		return help(e, args[1:])
	}
	c := lookup(name)
	if c == nil {
		fmt.Fprintf(e.stderr, "plumb: command = %q; want one of %s, help (plumb help)%s\n", name, commandNames(), nearestHint(name, append(commandNames0(), "help")))
		return exitUsage
	}
	fs, opts := c.flagSet(io.Discard)
	pos, err := parseInterleaved(fs, args[1:])
	if errors.Is(err, flag.ErrHelp) {
		c.writeHelp(e.stdout, fs)
		return exitPass
	}
	if err != nil {
		fmt.Fprintf(e.stderr, "plumb %s: %v\nusage: plumb %s\n(plumb help %s explains the command and every flag)\n", c.name, err, c.usage, c.name)
		return exitUsage
	}
	// Every error a command returns is a usage or input error (exit 2); a
	// verdict outside the tolerance is the status 1 with no error.
	code, err := exitUsage, wantArgs(c.name, pos, c.nargs, c.args)
	if err == nil {
		code, err = c.run(e, opts, pos)
	}
	if err != nil {
		fmt.Fprintf(e.stderr, "plumb %s: %v\n", c.name, err)
		return exitUsage
	}
	return code
}

func (c *command) flagSet(w io.Writer) (*flag.FlagSet, any) {
	fs := flag.NewFlagSet("plumb "+c.name, flag.ContinueOnError)
	fs.SetOutput(w)
	opts := c.flags(fs)
	fs.Usage = func() {} // plumb prints the usage line, or the help for -h
	return fs, opts
}

func (c *command) writeHelp(w io.Writer, fs *flag.FlagSet) {
	fmt.Fprintf(w, "usage: plumb %s\n\n%s\n", c.usage, strings.TrimSpace(c.about))
	has := false
	fs.VisitAll(func(*flag.Flag) { has = true })
	if has {
		fmt.Fprintf(w, "\nflags:\n")
		fs.SetOutput(w)
		fs.PrintDefaults()
	}
}

// parseInterleaved parses flags that may come before, between and after the
// positional arguments, and returns the positional arguments in order.
// After "--" everything is positional.
func parseInterleaved(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if n := len(args) - len(rest); n > 0 && args[n-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

// wantArgs returns an error unless args holds n arguments (any number for
// n < 0); usage says what they are, cmd is the command.
func wantArgs(cmd string, args []string, n int, usage string) error {
	if n < 0 || len(args) == n {
		return nil
	}
	return fmt.Errorf("arguments = %q; want %s (plumb help %s)", args, usage, cmd)
}

func commandNames() string { return strings.Join(commandNames0(), ", ") }

func commandNames0() []string {
	var n []string
	for _, c := range commands {
		n = append(n, c.name)
	}
	return n
}

// helpTopics lists every topic of plumb help.
func helpTopics() []string {
	return append(append(commandNames0(), "ops", "conventions", "files"), ops.Names()...)
}

// lookupOp is ops.Lookup with a message that suggests the nearest names.
func lookupOp(name string) (ops.Op, error) {
	op, err := ops.Lookup(name)
	if err == nil {
		return op, nil
	}
	near := nearest(name, ops.Names())
	if len(near) > 0 {
		return nil, fmt.Errorf("operation %q is unknown; did you mean %s? (plumb help ops lists the %d operations)", name, strings.Join(near, " or "), len(ops.Names()))
	}
	return nil, fmt.Errorf("operation %q is unknown; want one of %s (plumb help ops)", name, strings.Join(ops.Names(), ", "))
}

// nearestHint is "; did you mean NAME?" for the names nearest to s, or "".
func nearestHint(s string, names []string) string {
	if len(names) < 2 {
		return "" // the message lists the one name already
	}
	near := nearest(s, names)
	if len(near) == 0 {
		return ""
	}
	return "; did you mean " + strings.Join(near, " or ") + "?"
}

// nearest returns the names closest to s by edit distance (at most three,
// within a quarter of the name's length or 2), and the names s
// starts or of which it is a part when there are none such.
func nearest(s string, names []string) []string {
	best, out := 0, []string(nil)
	for _, n := range names {
		d := editDistance(strings.ToLower(s), n)
		if d > max(2, len(n)/4) {
			continue
		}
		switch {
		case out == nil || d < best:
			best, out = d, []string{n}
		case d == best:
			out = append(out, n)
		}
	}
	if out == nil && len(s) >= 3 {
		for _, n := range names {
			if strings.HasPrefix(n, strings.ToLower(s)) || strings.Contains(n, strings.ToLower(s)) {
				out = append(out, n)
			}
		}
	}
	if len(out) > 3 {
		out = out[:3]
	}
	return out
}

// editDistance is the Levenshtein distance between a and b, in bytes.
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := 1
			if a[i-1] == b[j-1] {
				c = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+c)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

func topUsage(w io.Writer) {
	fmt.Fprintf(w, `plumb is the command line of a float64 reference for transformer layer math:
generate inputs, run the reference on them, and judge a port's outputs.

usage: plumb COMMAND [flags] [arguments]

commands:
`)
	for _, c := range commands {
		fmt.Fprintf(w, "  %-7s %s\n", c.name, c.summary)
	}
	fmt.Fprintf(w, `  help    this text; plumb help COMMAND explains a command and every flag,
          plumb help ops lists the operations, plumb help OPERATION explains one,
          plumb help conventions lists every convention and its words,
          plumb help files the kinds of file: .npy, .npz members (FILE.npz:NAME),
          raw binary (FILE:TYPE:DIMS) and - for standard input or output

Flags go before, between or after the arguments. Exit status: 0 success (and,
for diff and check, within tolerance), 1 outside the tolerance, 2 a usage or
input error, with a message naming the file, key or problem.
`)
}

func help(e *env, args []string) int {
	if len(args) == 0 {
		topUsage(e.stdout)
		return exitPass
	}
	if len(args) > 1 {
		fmt.Fprintf(e.stderr, "plumb help: topics = %q; want one topic at a time\n", args)
		return exitUsage
	}
	topic := args[0]
	if c := lookup(topic); c != nil {
		fs, _ := c.flagSet(e.stdout)
		c.writeHelp(e.stdout, fs)
		return exitPass
	}
	if topic == "files" {
		fmt.Fprintf(e.stdout, "files: what every command reads and writes, and how to name it\n%s", filesAbout)
		return exitPass
	}
	if topic == "conventions" {
		writeConventions(e.stdout)
		return exitPass
	}
	if topic == "ops" || topic == "operations" {
		fmt.Fprintf(e.stdout, "operations (plumb help OPERATION for its keys and tensors):\n\n")
		for _, n := range ops.Names() {
			o, _ := ops.Lookup(n)
			fmt.Fprintf(e.stdout, "  %-19s %s\n", n, o.Summary())
		}
		return exitPass
	}
	if o, err := ops.Lookup(topic); err == nil {
		writeOpHelp(e.stdout, o)
		return exitPass
	}
	fmt.Fprintf(e.stderr, "plumb help: topic = %q; want a command (%s), ops, conventions, files or an operation (plumb help ops lists them)%s\n", topic, commandNames(), nearestHint(topic, helpTopics()))
	return exitUsage
}

// writeWords lists the words of a word key, each with its meaning.
func writeWords(w io.Writer, indent string, words []ops.Word) {
	width := 0
	for _, x := range words {
		width = max(width, len(x.Text)+2)
	}
	for _, x := range words {
		fmt.Fprintf(w, "%s  %-*s %s\n", indent, width, `"`+x.Text+`"`, x.Meaning)
	}
}

// writeConventions lists every convention, its words and the keys that
// take them.
func writeConventions(w io.Writer) {
	fmt.Fprintf(w, "conventions: every choice a port can make differently, the words that name\nthe choices (the same in configurations, golden files and messages), and\nthe operation keys that take them; the first word is the default.\n")
	for _, c := range ops.Conventions() {
		fmt.Fprintf(w, "\n%s (%s): %s\n", c.Noun, c.Name, c.Question)
		writeWords(w, "", c.Words)
		if len(c.Aliases) > 0 {
			fmt.Fprintf(w, "  also read: %s\n", strings.Join(c.Aliases, ", "))
		}
		if len(c.Keys) > 0 {
			fmt.Fprintf(w, "  keys: %s\n", strings.Join(c.Keys, "; "))
		}
	}
}

func writeOpHelp(w io.Writer, o ops.Op) {
	fmt.Fprintf(w, "%s: %s\n\nconfiguration (a JSON object; unknown keys are errors):\n", o.Name(), o.Summary())
	fmt.Fprintf(w, "  %-18s %-9s %s\n", "version", "int", "required: 1, the schema version")
	for _, k := range o.Keys() {
		fmt.Fprintf(w, "  %-18s %-9s %s (default: %s)\n", k.Name, k.Type, k.Doc, k.Default)
		writeWords(w, "    ", k.Words)
	}
	port := func(title string, ps []ops.Port) {
		if len(ps) == 0 {
			fmt.Fprintf(w, "\n%s: none\n", title)
			return
		}
		fmt.Fprintf(w, "\n%s:\n", title)
		for _, p := range ps {
			opt := ""
			if p.Optional {
				opt = " (optional)"
			}
			fmt.Fprintf(w, "  %-12s %s%s\n", p.Name, p.Doc, opt)
		}
	}
	port("inputs (NAME=FILE; plumb help files)", o.Inputs())
	port("outputs (written as NAME.npy, float64)", o.Outputs())
	if n := o.Note(); n != "" {
		fmt.Fprintf(w, "\nnote:\n%s\n", indent(n, "  "))
	}
}

// indent puts prefix before every line of s.
func indent(s, prefix string) string {
	return prefix + strings.ReplaceAll(s, "\n", "\n"+prefix)
}
