package ops

import (
	"fmt"
	"strings"
)

// The errors of this package take the form the package documentation
// describes (doc.go, Errors); within and configAt put other packages'
// errors in it.

// opError is an error with a message of its own that wraps others.
type opError struct {
	msg  string
	errs []error
}

func (e *opError) Error() string   { return e.msg }
func (e *opError) Unwrap() []error { return e.errs }

// sentinelOf follows err's chain to its root: the sentinel whose text
// leads err's message (the first of several, as vocab.Error and opError
// wrap them).
func sentinelOf(err error) error {
	for {
		switch u := err.(type) {
		case interface{ Unwrap() error }:
			next := u.Unwrap()
			if next == nil {
				return err
			}
			err = next
		case interface{ Unwrap() []error }:
			es := u.Unwrap()
			if len(es) == 0 {
				return err
			}
			err = es[0]
		default:
			return err
		}
	}
}

// within returns err with where (an operation's name, and what of it is at
// fault) put after the text of err's sentinel, or before the message when
// the message does not start with it. The result wraps err: errors.Is sees
// what it saw in err.
func within(err error, where string) error {
	if err == nil {
		return nil
	}
	s, msg := sentinelOf(err).Error(), err.Error()
	if rest, ok := strings.CutPrefix(msg, s+": "); ok {
		msg = s + ": " + where + ": " + rest
	} else {
		msg = where + ": " + msg
	}
	return &opError{msg: msg, errs: []error{err}}
}

// configAt rewords err, the error of another package about the value of a
// configuration key (a mask description), under ErrConfig, as vocab.At
// rewords the error of a word: the message leads with ErrConfig's text and
// where, then gives err's message without its own sentinel's text; the
// result wraps ErrConfig and err, so that errors.Is finds both.
func configAt(err error, where string) error {
	s, msg := sentinelOf(err).Error(), err.Error()
	if i := strings.Index(msg, s+": "); i >= 0 {
		msg = msg[:i] + msg[i+len(s)+2:]
	}
	return &opError{msg: fmt.Sprintf("%s: %s: %s", ErrConfig, where, msg), errs: []error{ErrConfig, err}}
}
