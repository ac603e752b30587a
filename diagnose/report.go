package diagnose

import (
	"encoding/json"
	"fmt"
	"io"
	"strings"
)

// MaxListed is the number of candidates WriteText lists.
const MaxListed = 10

// WriteText writes the result as a report for people: the verdict of the
// configuration as given, the sub-problem, the best candidates (passing
// first) and the signatures of every failing output.
func (r *Result) WriteText(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "%s, %v, configuration %s\n", r.Op, r.Format, r.Config)
	fmt.Fprintf(&b, "as given: %s\n", VerdictText(r.Given.Pass, true, r.Given.Normwise, r.Given.Outputs))
	if r.Given.Pass {
		b.WriteString("the port passes its yardstick as configured: nothing to diagnose\n")
		_, err := io.WriteString(w, b.String())
		return err
	}
	if r.SubProblem != "" {
		fmt.Fprintf(&b, "candidates ran on a sub-problem: %s\n", r.SubProblem)
	}
	fmt.Fprintf(&b, "%d candidates run (%d without effect here, %d refused by the operation), %d left out by the limit",
		r.Run, r.NoEffect, r.Refused, r.LeftOut)
	if r.Idioms > 0 {
		fmt.Fprintf(&b, "; %d precision idioms judged by their own yardstick", r.Idioms)
	}
	b.WriteString("\n")
	passing := r.Passing()
	switch len(passing) {
	case 0:
		b.WriteString("no candidate passes; the nearest:\n")
	case 1:
		fmt.Fprintf(&b, "the port passes under: %s\n", passing[0].Change)
	default:
		fmt.Fprintf(&b, "the port passes under %d candidates, the simplest first:\n", len(passing))
	}
	WriteCandidates(&b, "  ", r.Candidates, MaxListed)
	r.WriteSignatures(&b, "")
	_, err := io.WriteString(w, b.String())
	return err
}

// WriteCandidates writes the first limit candidates of list, numbered, each
// with its verdict, the changes that give the same output and, for a
// precision idiom, a line on what the idiom costs; and a count of the
// rest. Every line starts with indent. WriteText uses it, and so
// can a report that embeds the diagnosis in its own text.
func WriteCandidates(w io.Writer, indent string, list []Candidate, limit int) {
	for i, c := range list {
		if i == limit {
			fmt.Fprintf(w, "%s… %d more\n", indent, len(list)-i)
			break
		}
		fmt.Fprintf(w, "%s%d. %s: %s\n", indent, i+1, c.Change, VerdictText(c.Pass, c.Measured, c.Normwise, c.Outputs))
		if len(c.Same) > 0 {
			fmt.Fprintf(w, "%s    the same here: %s\n", indent, strings.Join(c.Same, " | "))
		}
		if c.IdiomCost != nil {
			fmt.Fprintf(w, "%s    %s\n", indent, c.IdiomCost)
		}
	}
}

// WriteSignatures writes the error signatures of the failing outputs
// under a heading at indent, one a line indented two spaces more; nothing
// when there are none.
func (r *Result) WriteSignatures(w io.Writer, indent string) {
	if len(r.Signatures) == 0 {
		return
	}
	fmt.Fprintf(w, "%serror signatures of the failing outputs, on the whole problem:\n", indent)
	for _, s := range r.Signatures {
		fmt.Fprintf(w, "%s  %s\n", indent, s)
	}
}

// VerdictText is one line on a verdict, "PASS, normwise error 1.2e-07
// (out 1.2e-07 ≤ 3.4e-07)": PASS, FAIL or "not measured" (when the search
// did not measure the candidate's own yardstick), the normwise error, and
// each output's normwise error against the yardstick's normwise tolerance.
func VerdictText(pass, measured bool, nw Number, outs []OutputVerdict) string {
	word := "FAIL"
	switch {
	case pass:
		word = "PASS"
	case !measured:
		word = "not measured"
	}
	var parts []string
	for _, o := range outs {
		p := fmt.Sprintf("%s %.3g", o.Output, float64(o.Normwise))
		if o.Pass != nil {
			rel := "≤"
			if !*o.Pass {
				rel = "vs"
			}
			p += fmt.Sprintf(" %s %.3g", rel, float64(o.Tolerance))
		}
		parts = append(parts, p)
	}
	return fmt.Sprintf("%s, normwise error %.3g (%s)", word, float64(nw), strings.Join(parts, ", "))
}

// MarshalIndent returns the result as indented JSON, the same data as
// WriteText with every candidate.
func (r *Result) MarshalIndent() ([]byte, error) { return json.MarshalIndent(r, "", "  ") }
