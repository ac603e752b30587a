package main

import (
	"encoding/json"
)

// This file gives diff's and check's JSON an overall "pass" (through the
// MarshalJSON methods of namedReport and checkJSON, declared in diff.go and
// run.go), and holds the paragraph of their help on reading the report.

// reportAbout explains the lines of the report that are easy to misread.
const reportAbout = `
Reading the report. "max abs error" is the largest |got − ref| of any
element. The worst elements are ranked by how far each exceeds the
tolerance: the column "× tol" is the element's error over the error the
tolerance allows there (above 1 fails), NaN and Inf mismatches first. So
the first one listed need not be the element of the max abs error: a large
error where the reference is large may pass a relative tolerance while a
smaller one near zero fails. "max rel error" divides by |ref|, or by the
floor printed on the line below it where |ref| is smaller (2^−10·max|ref|),
so that references near zero do not swamp it. A part of the tolerance that
plays no part in the test (rel 0, ULPs 0, normwise 0) reads "not used".
With -json the object starts with "pass": true when every candidate is
within tolerance (exit status 0), false otherwise.
`

// passes reports whether the candidate is within tolerance.
func (r namedReport) passes() bool {
	return r.Report != nil && r.Report.Verdict != nil && r.Report.Verdict.Pass
}

// MarshalJSON writes the report of one candidate as an object whose first
// key is "pass", its verdict, followed by the keys of namedReport.
func (r namedReport) MarshalJSON() ([]byte, error) {
	type plain namedReport // the fields without this method
	return json.Marshal(struct {
		Pass bool `json:"pass"`
		plain
	}{r.passes(), plain(r)})
}

// MarshalJSON writes check's object with "pass" first: true when every
// candidate is within tolerance, as the exit status 0 says.
func (c checkJSON) MarshalJSON() ([]byte, error) {
	type plain checkJSON
	pass := true
	for _, o := range c.Outputs {
		pass = pass && o.passes()
	}
	return json.Marshal(struct {
		Pass bool `json:"pass"`
		plain
	}{pass, plain(c)})
}
