package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/diagnose"
	"github.com/plumbref/plumb/ops"
)

// The bounds of the search a failing check runs (diagnose.Options): at
// most diagnosisCandidates configurations, each run on at most
// diagnosisElements input values (a larger problem is cut to its first
// batch entries or rows).
const (
	diagnosisCandidates = diagnose.DefaultMaxCandidates
	diagnosisElements   = diagnose.DefaultMaxElements
)

// diagnosisListed is the number of candidates the section lists: the
// passing ones, or when none passes the nearest.
const diagnosisListed = 5

// diagnosisTitle opens the section check prints after its reports.
const diagnosisTitle = "What the port may have done"

// diagnosis is what a failing check found by searching the configuration's
// alternatives: the result of diagnose.Run, or the error that stopped it,
// and a note on the format the port was judged in when it is not the
// candidates' own.
type diagnosis struct {
	// Note says why the search judged the port in another format than
	// the candidates' (float64 candidates, or candidates of several
	// formats); empty when it is theirs.
	Note string `json:"note,omitempty"`
	// Error is why the search could not run; the other fields are then
	// absent.
	Error string `json:"error,omitempty"`
	*diagnose.Result
}

// diagnoseCheck searches what a port whose check failed may have done:
// diagnose.Run on the operation, configuration and inputs of the check and
// every candidate read, bounded by diagnosisCandidates and
// diagnosisElements. The port is judged in the narrowest of the
// candidates' formats, and float64 candidates in float32: the search
// judges by a yardstick, which a float64 candidate does not have. An error
// of the search is kept in the result, never returned: the diagnosis does
// not change what the check says.
func diagnoseCheck(r *refRun, reports []namedReport, k float64) *diagnosis {
	got := ops.Tensors{}
	for _, rep := range reports {
		got[rep.Name] = rep.got
	}
	f, allFloat64, mixed := narrowest(reports)
	d := &diagnosis{}
	switch {
	case allFloat64:
		d.Note = "the candidates are float64, which has no yardstick: they are judged by the float32 one, looser than the check's own tolerance"
	case mixed:
		d.Note = fmt.Sprintf("the candidates are of several formats: all are judged by the yardstick of the narrowest, %v", f)
	}
	search(d, r.op.Name(), r.config, r.in, got, f, k)
	return d
}

// search runs diagnose.Run within the bounds of the section and keeps its
// result, or its error, in d.
func search(d *diagnosis, op string, config []byte, in, got ops.Tensors, f compare.Format, k float64) {
	res, err := diagnose.Run(op, config, in, got, f, diagnose.Options{
		MaxCandidates: diagnosisCandidates, MaxElements: diagnosisElements, K: k})
	if err != nil {
		d.Error = err.Error()
		return
	}
	d.Result = res
}

// writeDiagnosis prints the section: the port as configured under the
// yardstick, the search, the best-matching changes in the configuration's
// own words with their normwise errors and verdicts, and the error
// signatures of the failing outputs.
func writeDiagnosis(w io.Writer, d *diagnosis) error {
	var b strings.Builder
	fmt.Fprintf(&b, "%s\n", diagnosisTitle)
	if d.Note != "" {
		fmt.Fprintf(&b, "  (%s)\n", d.Note)
	}
	if d.Result == nil {
		fmt.Fprintf(&b, "  the search could not run: %s\n", d.Error)
		_, err := io.WriteString(w, b.String())
		return err
	}
	r := d.Result
	fmt.Fprintf(&b, "  as configured, under the %v yardstick: %s\n", r.Format, diagnose.VerdictText(r.Given.Pass, true, r.Given.Normwise, r.Given.Outputs))
	if r.Given.Pass {
		b.WriteString("  the port passes the yardstick as configured: there is no change to name; it failed the check's own tolerance, not the yardstick\n")
		_, err := io.WriteString(w, b.String())
		return err
	}
	where := "the whole problem"
	if r.SubProblem != "" {
		where = "a sub-problem, " + r.SubProblem
	}
	alternatives := "alternatives"
	if r.Run == 1 {
		alternatives = "alternative"
	}
	fmt.Fprintf(&b, "  searched %d %s of the configuration and of the tensors' reading on %s\n", r.Run, alternatives, where)
	fmt.Fprintf(&b, "  (%d without effect there, %d refused by the operation, %d left out by the limit of %d)\n",
		r.NoEffect, r.Refused, r.LeftOut, diagnosisCandidates)
	passing := r.Passing()
	list := passing
	switch {
	case len(r.Candidates) == 0:
		b.WriteString("  the operation has no alternative to search here: no change of its configuration explains the output\n")
	case len(passing) == 0:
		b.WriteString("  no alternative makes the port pass; the nearest:\n")
		list = r.Candidates
	case len(passing) == 1:
		b.WriteString("  the port passes under one change:\n")
	default:
		fmt.Fprintf(&b, "  the port passes under %d changes, the simplest first:\n", len(passing))
	}
	diagnose.WriteCandidates(&b, "    ", list, diagnosisListed)
	r.WriteSignatures(&b, "  ")
	_, err := io.WriteString(w, b.String())
	return err
}
