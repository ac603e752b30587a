// Package conformance holds what plumb's conformance suites
// (attentiontest, posenctest, normtest, ffntest) take besides a kernel:
// TB, the part of *testing.T a suite's Run uses, and Recorder, a stand-in
// for *testing.T that records what a suite says instead of failing the
// test that runs it.
//
// A kernel's test passes its *testing.T:
//
//	func TestAttention(t *testing.T) {
//		attentiontest.Run(t, kernel)
//	}
//
// A test that must watch a suite fail (a kernel with a deliberate slip)
// passes a Recorder and reads what it recorded:
//
//	rec := &conformance.Recorder{}
//	attentiontest.Run(rec, slipped)
//	fmt.Println(rec.Failures())
package conformance

import (
	"fmt"
	"strings"
)

// TB is the part of *testing.T a suite uses. *testing.T satisfies
// TB[*testing.T]: its Run takes a func(*testing.T). A suite never stops a
// test early (no Fatal, FailNow or SkipNow is needed): after Skipf it
// returns by itself, so a stand-in whose Skipf and Errorf only record,
// such as Recorder, sees every case.
type TB[T any] interface {
	Helper()
	Errorf(format string, args ...any)
	Logf(format string, args ...any)
	Skipf(format string, args ...any)
	Run(name string, f func(T)) bool
}

// Recorder is a stand-in for *testing.T that records what a suite says
// instead of failing the test that runs it: the way to show that a suite
// catches a broken kernel. Its Run runs f at once, on the same goroutine,
// with a child Recorder; every failure, skip and message is kept under
// the full name of its subtest ("case/variant"). The zero value is ready
// to use.
type Recorder struct {
	Name     string
	Failed   bool        // Errorf was called here or in a child
	Skipped  bool        // Skipf was called here
	Messages []string    // every Errorf, Logf and Skipf message, in order
	Children []*Recorder // one per Run call, in order
}

// Helper does nothing.
func (r *Recorder) Helper() {}

// Errorf records a failure.
func (r *Recorder) Errorf(format string, args ...any) {
	r.Failed = true
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Logf records a message.
func (r *Recorder) Logf(format string, args ...any) {
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Skipf records a skip; unlike testing.T.Skipf it does not stop the caller.
func (r *Recorder) Skipf(format string, args ...any) {
	r.Skipped = true
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Run runs f with a child Recorder named name and reports whether it passed.
func (r *Recorder) Run(name string, f func(*Recorder)) bool {
	c := &Recorder{Name: name}
	if r.Name != "" {
		c.Name = r.Name + "/" + name
	}
	r.Children = append(r.Children, c)
	f(c)
	if c.Failed {
		r.Failed = true
	}
	return !c.Failed
}

// Failures lists the full names of the failed subtests that have no
// subtests of their own, in the order they ran.
func (r *Recorder) Failures() []string {
	var names []string
	r.Walk(func(c *Recorder) {
		if c.Failed && len(c.Children) == 0 {
			names = append(names, c.Name)
		}
	})
	return names
}

// Walk calls f on r and on every recorder below it, depth first.
func (r *Recorder) Walk(f func(*Recorder)) {
	f(r)
	for _, c := range r.Children {
		c.Walk(f)
	}
}

// Find returns the recorder with the given full name below r, or nil.
func (r *Recorder) Find(name string) *Recorder {
	var found *Recorder
	r.Walk(func(c *Recorder) {
		if c.Name == name && found == nil {
			found = c
		}
	})
	return found
}

// Text is every message of r and its children, one per line, each after
// the full name of its subtest.
func (r *Recorder) Text() string {
	var b strings.Builder
	r.Walk(func(c *Recorder) {
		for _, m := range c.Messages {
			fmt.Fprintf(&b, "%s: %s\n", c.Name, m)
		}
	})
	return b.String()
}
