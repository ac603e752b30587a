package compare

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
	"unicode/utf8"
)

// WriteText writes the report to w as text aligned for a terminal: the
// measures, the ULP distribution, the worst elements, the tolerance and the
// verdict. Numbers are printed with 4 significant digits (values of the
// worst elements with enough digits to tell them apart in float64). A nil
// r or w is an error wrapping ErrReport.
func (r *Report) WriteText(w io.Writer) error {
	switch {
	case r == nil:
		return fmt.Errorf("%w: Report.WriteText: receiver = nil; want a Report from Diff", ErrReport)
	case w == nil:
		return fmt.Errorf("%w: Report.WriteText: w = nil; want an io.Writer", ErrReport)
	}
	var b bytes.Buffer
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintf(&b, "%d elements, shape %v, candidate format %v\n", r.Elements, r.Shape, r.Format)
	if r.Finite > 0 {
		fmt.Fprintf(tw, "  max abs error\t%s\tat %v\n", g4(r.MaxAbs), r.MaxAbsAt)
		fmt.Fprintf(tw, "  max rel error\t%s\tat %v\n", g4(r.MaxRel), r.MaxRelAt)
		fmt.Fprintf(tw, "  \t\trelative to |ref|, or to %s where |ref| is smaller\n", g4(r.RelFloor))
		fmt.Fprintf(tw, "  RMS error\t%s\t\n", g4(r.RMS))
		fmt.Fprintf(tw, "  mean signed error\t%s\t(got − ref)\n", g4(r.MeanSigned))
		fmt.Fprintf(tw, "  normwise rel error\t%s\t\n", g4(r.Normwise))
		fmt.Fprintf(tw, "  SQNR\t%s dB\t10·log₁₀(Σ ref² / Σ (got − ref)²)\n", g4(r.SQNR))
		fmt.Fprintf(tw, "  max ULP distance\t%s\t(%v)\n", g4(r.MaxULPs), r.Format)
	}
	fmt.Fprintf(tw, "  NaN mismatches\t%d\n", r.NaNMismatches)
	fmt.Fprintf(tw, "  Inf mismatches\t%d\n", r.InfMismatches)
	if r.NonFiniteMatches > 0 {
		fmt.Fprintf(tw, "  NaN/Inf matches\t%d\n", r.NonFiniteMatches)
	}
	if r.NotInFormat > 0 {
		fmt.Fprintf(tw, "  not %v values\t%d\tcandidate values off the format's grid\n", r.Format, r.NotInFormat)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(r.ULPs) > 0 {
		fmt.Fprintf(&b, "ULP distances in %v:\n", r.Format)
		for _, u := range r.ULPs {
			if u.Count == 0 {
				continue // JSON keeps the empty buckets; text is for reading
			}
			span := strconv.FormatUint(u.Lo, 10)
			if u.Hi != u.Lo {
				span += "–" + strconv.FormatUint(u.Hi, 10)
			}
			fmt.Fprintf(tw, "  %s\t%d\t%5.1f%%\n", span, u.Count, 100*float64(u.Count)/float64(r.Finite))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if len(r.Worst) > 0 {
		r.writeWorst(&b, tw)
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if t := r.Tolerance; t != nil {
		fmt.Fprintf(&b, "tolerance: %s\n", t.words())
		if t.Basis != "" {
			WrapText(&b, "  basis: ", "         ", t.Basis)
		}
	}
	if v := r.Verdict; v != nil {
		if v.Pass {
			b.WriteString("verdict: PASS\n")
		} else {
			WrapText(&b, "verdict: FAIL: ", "  ", strings.Join(v.Reasons, "; "))
		}
	}
	// Empty last cells leave trailing blanks; drop them.
	lines := strings.SplitAfter(b.String(), "\n")
	var out strings.Builder
	for _, l := range lines {
		if strings.HasSuffix(l, "\n") {
			out.WriteString(strings.TrimRight(l[:len(l)-1], " "))
			out.WriteByte('\n')
		} else {
			out.WriteString(l)
		}
	}
	_, err := io.WriteString(w, out.String())
	return err
}

// String returns the text WriteText writes; for a nil r, "<nil>", as fmt
// prints a nil pointer.
func (r *Report) String() string {
	if r == nil {
		return "<nil>"
	}
	var b strings.Builder
	_ = r.WriteText(&b) // a strings.Builder does not fail
	return b.String()
}

// TextWidth is the width, in characters, that WriteText keeps its lines
// of words within (the heading of the worst elements, the basis of the
// tolerance, the verdict's reasons), wrapping them at spaces; a table row
// is not wrapped, and a single word longer than the width stays whole.
const TextWidth = 100

// writeWorst writes the heading and the table of the worst elements. With
// a tolerance they are ranked by how many times their error exceeds what
// it allows there (the column "× tol"), which is not the order of the
// absolute error; the heading says so.
func (r *Report) writeWorst(b *bytes.Buffer, tw *tabwriter.Writer) {
	n := len(r.Worst)
	what := "element"
	if n > 1 {
		what = fmt.Sprintf("%d elements", n)
	}
	t := r.Tolerance
	if t == nil {
		WrapText(b, "", "  ", fmt.Sprintf("worst %s, ranked by absolute error |got − ref| (NaN and Inf mismatches first):", what))
		fmt.Fprintf(tw, "  index\treference\tcandidate\tabs error\trel error\tULPs\n")
		for _, e := range r.Worst {
			fmt.Fprintf(tw, "  %v\t%s\t%s\t%s\t%s\t%s\n", e.Index, g17(e.Ref), g17(e.Got), g4(e.AbsErr), g4(e.RelErr), g4(e.ULPs))
		}
		return
	}
	WrapText(b, "", "  ", fmt.Sprintf("worst %s, ranked by how far each exceeds the tolerance (× tol: its error over the "+
		"error allowed there; above 1 fails), NaN and Inf mismatches first; the max abs error above is the largest "+
		"|got − ref|, whatever its tolerance:", what))
	fmt.Fprintf(tw, "  index\treference\tcandidate\tabs error\trel error\tULPs\t× tol\n")
	for _, e := range r.Worst {
		x := math.Inf(1)
		if finite(e.Ref) && finite(e.Got) {
			x = t.excess(e.Ref, e.AbsErr, e.ULPs)
		}
		fmt.Fprintf(tw, "  %v\t%s\t%s\t%s\t%s\t%s\t%s\n", e.Index, g17(e.Ref), g17(e.Got), g4(e.AbsErr), g4(e.RelErr), g4(e.ULPs), g4(x))
	}
}

// words lists the tolerance's parts, a part that plays no part in the
// test as "not used": Rel, ULPs and MaxNormwise when 0, and Abs when 0
// while Rel or ULPs is not (with all three 0 the elementwise test asks for
// equal values, which "abs 0 (equal values)" says).
func (t *Tolerance) words() string {
	abs := g4(t.Abs)
	switch {
	case t.Abs == 0 && t.Rel == 0 && t.ULPs == 0:
		abs = "0 (equal values)"
	case t.Abs == 0:
		abs = "not used"
	}
	rel, ulps, normwise := "not used", "not used", "not used"
	if t.Rel != 0 {
		rel = g4(t.Rel)
	}
	if t.ULPs != 0 {
		ulps = strconv.FormatUint(t.ULPs, 10)
	}
	if t.MaxNormwise != 0 {
		normwise = g4(t.MaxNormwise)
	}
	return fmt.Sprintf("abs %s, rel %s, ULPs %s, normwise %s", abs, rel, ulps, normwise)
}

// WrapText writes first and then text, broken at spaces into lines of at
// most TextWidth characters, the lines after the first starting with
// indent: the wrapping of WriteText, for a report printed beside it.
func WrapText(b io.StringWriter, first, indent, text string) {
	line, width := first, utf8.RuneCountInString(first)
	fresh := true // nothing of text on the line yet
	for _, w := range strings.Fields(text) {
		n := utf8.RuneCountInString(w)
		if !fresh && width+1+n > TextWidth {
			b.WriteString(line + "\n")
			line, width, fresh = indent, utf8.RuneCountInString(indent), true
		}
		if !fresh {
			line += " "
			width++
		}
		line += w
		width += n
		fresh = false
	}
	b.WriteString(line + "\n")
}

func g4(x float64) string  { return strconv.FormatFloat(x, 'g', 4, 64) }
func g17(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// jsonFloat is a float64 that JSON carries as a number when finite and as
// the strings "nan", "inf" and "-inf" otherwise, which encoding/json cannot.
type jsonFloat float64

func (x jsonFloat) MarshalJSON() ([]byte, error) {
	v := float64(x)
	switch {
	case math.IsNaN(v):
		return []byte(`"nan"`), nil
	case math.IsInf(v, 1):
		return []byte(`"inf"`), nil
	case math.IsInf(v, -1):
		return []byte(`"-inf"`), nil
	}
	return strconv.AppendFloat(nil, v, 'g', -1, 64), nil
}

func (x *jsonFloat) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case `"nan"`:
		*x = jsonFloat(math.NaN())
		return nil
	case `"inf"`:
		*x = jsonFloat(math.Inf(1))
		return nil
	case `"-inf"`:
		*x = jsonFloat(math.Inf(-1))
		return nil
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*x = jsonFloat(v)
	return nil
}

type jsonElement struct {
	Index  []int     `json:"index"`
	Offset int       `json:"offset"`
	Ref    jsonFloat `json:"reference"`
	Got    jsonFloat `json:"candidate"`
	AbsErr jsonFloat `json:"abs_error"`
	RelErr jsonFloat `json:"rel_error"`
	ULPs   jsonFloat `json:"ulps"`
}

type jsonBucket struct {
	Lo    uint64 `json:"from"`
	Hi    uint64 `json:"to"`
	Count int    `json:"count"`
}

type jsonTolerance struct {
	Abs         jsonFloat `json:"abs"`
	Rel         jsonFloat `json:"rel"`
	ULPs        uint64    `json:"ulps"`
	MaxNormwise jsonFloat `json:"max_normwise"`
	Basis       string    `json:"basis"`
}

type jsonVerdict struct {
	Pass    bool     `json:"pass"`
	Failed  int      `json:"failed_elements"`
	Reasons []string `json:"reasons"`
}

type jsonReport struct {
	Shape            []int          `json:"shape"`
	Elements         int            `json:"elements"`
	Format           Format         `json:"format"`
	Finite           int            `json:"finite_pairs"`
	MaxAbs           jsonFloat      `json:"max_abs_error"`
	MaxAbsAt         []int          `json:"max_abs_error_at"`
	MaxRel           jsonFloat      `json:"max_rel_error"`
	MaxRelAt         []int          `json:"max_rel_error_at"`
	RelFloor         jsonFloat      `json:"rel_error_floor"`
	RMS              jsonFloat      `json:"rms_error"`
	MeanSigned       jsonFloat      `json:"mean_signed_error"`
	Normwise         jsonFloat      `json:"normwise_rel_error"`
	SQNR             jsonFloat      `json:"sqnr_db"`
	MaxULPs          jsonFloat      `json:"max_ulps"`
	ULPs             []jsonBucket   `json:"ulp_histogram"`
	NotInFormat      int            `json:"not_in_format"`
	NaNMismatches    int            `json:"nan_mismatches"`
	InfMismatches    int            `json:"inf_mismatches"`
	NonFiniteMatches int            `json:"nonfinite_matches"`
	Worst            []jsonElement  `json:"worst"`
	Tolerance        *jsonTolerance `json:"tolerance"`
	Verdict          *jsonVerdict   `json:"verdict"`
}

// MarshalJSON encodes the report as one JSON object with these keys, in
// this order, whatever the Go field names become:
//
//	shape, elements, format (a name as FormatByName accepts), finite_pairs,
//	max_abs_error, max_abs_error_at, max_rel_error, max_rel_error_at,
//	rel_error_floor, rms_error, mean_signed_error, normwise_rel_error,
//	sqnr_db, max_ulps, ulp_histogram ([{from, to, count}]), not_in_format,
//	nan_mismatches, inf_mismatches, nonfinite_matches,
//	worst ([{index, offset, reference, candidate, abs_error, rel_error, ulps}]),
//	tolerance ({abs, rel, ulps, max_normwise, basis} or null),
//	verdict ({pass, failed_elements, reasons} or null).
//
// Non-finite numbers are the strings "nan", "inf" and "-inf"; finite ones
// are printed with the shortest decimal that reads back exactly.
func (r *Report) MarshalJSON() ([]byte, error) {
	if r == nil {
		return []byte("null"), nil // what encoding/json writes for a nil *Report
	}
	j := jsonReport{Format: r.Format, ULPs: []jsonBucket{}, Worst: []jsonElement{}}
	floats, ints, indices := reportFields(r, &j)
	copyFields(floats, true)
	copyFields(ints, true)
	copyFields(indices, true)
	for _, u := range r.ULPs {
		j.ULPs = append(j.ULPs, jsonBucket(u))
	}
	for _, e := range r.Worst {
		j.Worst = append(j.Worst, jsonElement{e.Index, e.Offset, jsonFloat(e.Ref), jsonFloat(e.Got),
			jsonFloat(e.AbsErr), jsonFloat(e.RelErr), jsonFloat(e.ULPs)})
	}
	if t := r.Tolerance; t != nil {
		j.Tolerance = &jsonTolerance{jsonFloat(t.Abs), jsonFloat(t.Rel), t.ULPs, jsonFloat(t.MaxNormwise), t.Basis}
	}
	if v := r.Verdict; v != nil {
		j.Verdict = &jsonVerdict{v.Pass, v.Failed, append([]string{}, v.Reasons...)}
	}
	return json.Marshal(j)
}

// UnmarshalJSON decodes what MarshalJSON encodes, refusing unknown keys;
// an error, and a nil r, wrap ErrReport.
func (r *Report) UnmarshalJSON(b []byte) error {
	const fn = "Report.UnmarshalJSON"
	if r == nil {
		return fmt.Errorf("%w: %s: receiver = nil; want a *Report to set", ErrReport, fn)
	}
	var j jsonReport
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&j); err != nil {
		return fmt.Errorf("%w: %s: %w; want the JSON object Report.MarshalJSON writes", ErrReport, fn, err)
	}
	*r = Report{Format: j.Format}
	floats, ints, indices := reportFields(r, &j)
	copyFields(floats, false)
	copyFields(ints, false)
	copyFields(indices, false)
	for _, u := range j.ULPs {
		r.ULPs = append(r.ULPs, ULPBucket(u))
	}
	for _, e := range j.Worst {
		r.Worst = append(r.Worst, Element{e.Index, e.Offset, float64(e.Ref), float64(e.Got),
			float64(e.AbsErr), float64(e.RelErr), float64(e.ULPs)})
	}
	if t := j.Tolerance; t != nil {
		r.Tolerance = &Tolerance{float64(t.Abs), float64(t.Rel), t.ULPs, float64(t.MaxNormwise), t.Basis}
	}
	if v := j.Verdict; v != nil {
		r.Verdict = &Verdict{v.Pass, v.Failed, v.Reasons}
	}
	return nil
}

// field is one field of a Report and the field of its JSON form that
// carries it.
type field[T any] struct{ r, j *T }

// reportFields pairs the numbers and indices of r with their fields in j,
// so that MarshalJSON and UnmarshalJSON copy one list, in opposite
// directions.
func reportFields(r *Report, j *jsonReport) ([]field[float64], []field[int], []field[[]int]) {
	f := func(r *float64, j *jsonFloat) field[float64] { return field[float64]{r, (*float64)(j)} }
	return []field[float64]{f(&r.MaxAbs, &j.MaxAbs), f(&r.MaxRel, &j.MaxRel), f(&r.RelFloor, &j.RelFloor),
			f(&r.RMS, &j.RMS), f(&r.MeanSigned, &j.MeanSigned), f(&r.Normwise, &j.Normwise), f(&r.SQNR, &j.SQNR), f(&r.MaxULPs, &j.MaxULPs)},
		[]field[int]{{&r.Elements, &j.Elements}, {&r.Finite, &j.Finite}, {&r.NotInFormat, &j.NotInFormat},
			{&r.NaNMismatches, &j.NaNMismatches}, {&r.InfMismatches, &j.InfMismatches}, {&r.NonFiniteMatches, &j.NonFiniteMatches}},
		[]field[[]int]{{&r.Shape, &j.Shape}, {&r.MaxAbsAt, &j.MaxAbsAt}, {&r.MaxRelAt, &j.MaxRelAt}}
}

// copyFields copies each Report field to its JSON field (toJSON) or back.
func copyFields[T any](fs []field[T], toJSON bool) {
	for _, f := range fs {
		if toJSON {
			*f.j = *f.r
		} else {
			*f.r = *f.j
		}
	}
}
