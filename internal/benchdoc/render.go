package main

import (
	"fmt"
	"strings"
)

// The generated part of BENCHMARKS.md lies between these lines.
const (
	beginMark = "<!-- benchdoc: begin (go test ./internal/benchdoc -run TestBenchmarksTable -update) -->"
	endMark   = "<!-- benchdoc: end -->"
)

// quantity writes a measure: seconds, GFLOP/s, peak memory, what it has.
func quantity(m Measure) string {
	var p []string
	if m.Seconds > 0 {
		p = append(p, fmt.Sprintf("%.3g s", m.Seconds))
	}
	if m.GFLOPS > 0 {
		p = append(p, fmt.Sprintf("%.3g GFLOP/s", m.GFLOPS))
	}
	if m.MiB > 0 {
		p = append(p, fmt.Sprintf("%.0f MiB", m.MiB))
	}
	if len(p) == 0 {
		return "—"
	}
	return strings.Join(p, ", ")
}

// ratio is plumb's time over the other's (or the other's GFLOP/s over
// plumb's when there are no times), "" when there is nothing to divide.
func ratio(p, o Measure) string {
	switch {
	case p.Seconds > 0 && o.Seconds > 0:
		return fmt.Sprintf("%.2f", p.Seconds/o.Seconds)
	case p.GFLOPS > 0 && o.GFLOPS > 0:
		return fmt.Sprintf("%.2f", o.GFLOPS/p.GFLOPS)
	}
	return ""
}

// render is the generated part of BENCHMARKS.md for r, marks included.
func render(r Results) string {
	var b strings.Builder
	fmt.Fprintln(&b, beginMark)
	fmt.Fprintf(&b, "Measured %s on %s (%d cores, shared), %s, numpy %s float64 over %s; medians of %d alternating rounds.\n\n",
		r.Date, r.CPU, r.Cores, r.Go, r.Numpy, r.BLAS, r.Repetitions)
	fmt.Fprintln(&b, "| figure | plumb | compared with | ratio (plumb ÷ other, in time) | rerun |")
	fmt.Fprintln(&b, "|---|---|---|---|---|")
	for _, w := range r.Rows {
		var with, rat []string
		for _, o := range w.Others {
			with = append(with, o.Label+": "+quantity(o))
			if x := ratio(w.Plumb, o); x != "" {
				rat = append(rat, x+" ("+o.Label+")")
			}
		}
		fmt.Fprintf(&b, "| %s | %s | %s | %s | `%s` |\n", w.Name, quantity(w.Plumb), strings.Join(with, "; "), strings.Join(rat, "; "), w.Command)
	}
	fmt.Fprintln(&b, endMark)
	return b.String()
}

// splice replaces the generated part of doc with gen; it fails if doc
// does not hold the two marks once each, in order.
func splice(doc, gen string) (string, error) {
	i, j := strings.Index(doc, beginMark), strings.Index(doc, endMark)
	if i < 0 || j < i || strings.Count(doc, beginMark) != 1 || strings.Count(doc, endMark) != 1 {
		return "", fmt.Errorf("splice: the document does not hold %q and %q once each, in order", beginMark, endMark)
	}
	return doc[:i] + gen + doc[j+len(endMark)+1:], nil
}
