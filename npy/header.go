package npy

import (
	"fmt"
	"strconv"
	"strings"
)

// The header is a Python dictionary literal. This file holds a small parser
// for the literals such a header can contain (strings, integers, True,
// False, None, tuples, lists and dictionaries: enough to parse any header
// NumPy writes, including structured descriptors, so that they are refused
// with their own text), the interpretation of the three keys, and the
// formatter the writer uses.

// maxDepth bounds the nesting of the literal (a structured descriptor nests
// a few levels; nothing legitimate nests 32).
const maxDepth = 32

type pyKind uint8

const (
	pyStr pyKind = iota
	pyInt
	pyBool
	pyNone
	pyTuple
	pyList
	pyDict
)

var pyKindName = [...]string{"string", "integer", "bool", "None", "tuple", "list", "dict"}

// pyValue is one parsed literal. text is its source text, for messages.
type pyValue struct {
	kind  pyKind
	str   string // pyStr: the value; pyInt: the digits with sign
	b     bool
	items []pyValue // tuple, list; dict: key, value, key, value…
	text  string
}

type pyParser struct {
	fn  string // the function called, for messages
	s   string
	pos int
}

func (p *pyParser) errorf(format string, args ...any) error {
	return fmt.Errorf("%w: %s: header byte %d: %s", ErrFormat, p.fn, p.pos, fmt.Sprintf(format, args...))
}

func (p *pyParser) space() {
	for p.pos < len(p.s) {
		switch p.s[p.pos] {
		case ' ', '\t', '\n', '\r':
			p.pos++
		default:
			return
		}
	}
}

func (p *pyParser) value(depth int) (pyValue, error) {
	if depth > maxDepth {
		return pyValue{}, p.errorf("a literal nested deeper than %d; want at most %d levels", maxDepth, maxDepth)
	}
	p.space()
	if p.pos >= len(p.s) {
		return pyValue{}, p.errorf("the header ends; want a value")
	}
	start := p.pos
	var v pyValue
	var err error
	switch c := p.s[p.pos]; {
	case c == '\'' || c == '"':
		v, err = p.str()
	case c == '-' || c == '+' || (c >= '0' && c <= '9'):
		v, err = p.integer()
	case c == '(':
		v, err = p.sequence(pyTuple, ')', depth)
	case c == '[':
		v, err = p.sequence(pyList, ']', depth)
	case c == '{':
		v, err = p.dict(depth)
	default:
		v, err = p.name()
	}
	if err != nil {
		return pyValue{}, err
	}
	v.text = p.s[start:p.pos]
	return v, nil
}

// str parses a quoted string. Backslash escapes are kept only for the
// quote and the backslash; a descriptor never needs more, and any other
// escape leaves the string unsupported (it is then refused by its text).
func (p *pyParser) str() (pyValue, error) {
	q := p.s[p.pos]
	p.pos++
	var b strings.Builder
	for p.pos < len(p.s) {
		c := p.s[p.pos]
		switch {
		case c == q:
			p.pos++
			return pyValue{kind: pyStr, str: b.String()}, nil
		case c == '\n':
			return pyValue{}, p.errorf("a newline inside a string; want the closing quote first")
		case c == '\\' && p.pos+1 < len(p.s):
			b.WriteByte(c)
			b.WriteByte(p.s[p.pos+1])
			p.pos += 2
		default:
			b.WriteByte(c)
			p.pos++
		}
	}
	return pyValue{}, p.errorf("the header ends inside a string; want the closing quote")
}

// integer parses a decimal integer, with an optional sign and the 'L'
// suffix that Python 2 writers of versions 1.0 and 2.0 could leave.
func (p *pyParser) integer() (pyValue, error) {
	start := p.pos
	if c := p.s[p.pos]; c == '-' || c == '+' {
		p.pos++
	}
	digits := p.pos
	for p.pos < len(p.s) && p.s[p.pos] >= '0' && p.s[p.pos] <= '9' {
		p.pos++
	}
	if p.pos == digits {
		return pyValue{}, p.errorf("a sign without digits; want an integer")
	}
	text := p.s[start:p.pos]
	if p.pos < len(p.s) && (p.s[p.pos] == 'L' || p.s[p.pos] == 'l') {
		p.pos++
	}
	return pyValue{kind: pyInt, str: text}, nil
}

func (p *pyParser) name() (pyValue, error) {
	start := p.pos
	for p.pos < len(p.s) {
		c := p.s[p.pos]
		if !(c == '_' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9') {
			break
		}
		p.pos++
	}
	switch p.s[start:p.pos] {
	case "True":
		return pyValue{kind: pyBool, b: true}, nil
	case "False":
		return pyValue{kind: pyBool}, nil
	case "None":
		return pyValue{kind: pyNone}, nil
	}
	p.pos = start
	return pyValue{}, p.errorf("%q; want a Python literal", p.s[start:min(len(p.s), start+16)])
}

func (p *pyParser) sequence(kind pyKind, end byte, depth int) (pyValue, error) {
	p.pos++ // the opening bracket
	v := pyValue{kind: kind}
	for {
		p.space()
		if p.pos < len(p.s) && p.s[p.pos] == end {
			p.pos++
			// (x) is x in Python, not a tuple; a header never holds one.
			if kind == pyTuple && len(v.items) == 1 && !strings.HasSuffix(strings.TrimRight(p.s[:p.pos-1], " \t\r\n"), ",") {
				return pyValue{}, p.errorf("a parenthesised value without a comma, which is not a tuple; want (x,)")
			}
			return v, nil
		}
		item, err := p.value(depth + 1)
		if err != nil {
			return pyValue{}, err
		}
		v.items = append(v.items, item)
		p.space()
		if p.pos < len(p.s) && p.s[p.pos] == ',' {
			p.pos++
			continue
		}
		if p.pos < len(p.s) && p.s[p.pos] == end {
			continue
		}
		return pyValue{}, p.errorf("%.16q in a %s; want ',' or %q", p.s[p.pos:], pyKindName[kind], end)
	}
}

func (p *pyParser) dict(depth int) (pyValue, error) {
	p.pos++ // '{'
	v := pyValue{kind: pyDict}
	for {
		p.space()
		if p.pos < len(p.s) && p.s[p.pos] == '}' {
			p.pos++
			return v, nil
		}
		key, err := p.value(depth + 1)
		if err != nil {
			return pyValue{}, err
		}
		p.space()
		if p.pos >= len(p.s) || p.s[p.pos] != ':' {
			return pyValue{}, p.errorf("%.16q after dictionary key %s; want ':'", p.s[p.pos:], key.text)
		}
		p.pos++
		val, err := p.value(depth + 1)
		if err != nil {
			return pyValue{}, err
		}
		v.items = append(v.items, key, val)
		p.space()
		if p.pos < len(p.s) && p.s[p.pos] == ',' {
			p.pos++
			continue
		}
		if p.pos < len(p.s) && p.s[p.pos] == '}' {
			continue
		}
		return pyValue{}, p.errorf("%.16q in the dictionary; want ',' or '}'", p.s[p.pos:])
	}
}

// parseHeader interprets the header text (already decoded to a Go string)
// for a call of fn. The version is filled in by the caller.
func parseHeader(fn, text string) (Header, error) {
	p := &pyParser{fn: fn, s: text}
	d, err := p.value(0)
	if err != nil {
		return Header{}, err
	}
	p.space()
	if p.pos != len(p.s) {
		return Header{}, p.errorf("%q after the dictionary; want only spaces and a newline", p.s[p.pos:min(len(p.s), p.pos+16)])
	}
	if d.kind != pyDict {
		return Header{}, fmt.Errorf("%w: %s: the header is a %s; want a dictionary", ErrFormat, fn, pyKindName[d.kind])
	}
	var descr, fortran, shape *pyValue
	for i := 0; i < len(d.items); i += 2 {
		k := d.items[i]
		var slot **pyValue
		if k.kind == pyStr {
			switch k.str {
			case "descr":
				slot = &descr
			case "fortran_order":
				slot = &fortran
			case "shape":
				slot = &shape
			}
		}
		if slot == nil {
			return Header{}, fmt.Errorf("%w: %s: header key %s; want one of 'descr', 'fortran_order', 'shape'", ErrFormat, fn, k.text)
		}
		if *slot != nil {
			return Header{}, fmt.Errorf("%w: %s: header key %s twice; want each key once", ErrFormat, fn, k.text)
		}
		*slot = &d.items[i+1]
	}
	for _, m := range []struct {
		v    *pyValue
		name string
	}{{descr, "descr"}, {fortran, "fortran_order"}, {shape, "shape"}} {
		if m.v == nil {
			return Header{}, fmt.Errorf("%w: %s: the header has no '%s' key; want 'descr', 'fortran_order' and 'shape'", ErrFormat, fn, m.name)
		}
	}

	var h Header
	if h.DType, h.ByteOrder, err = parseDescr(fn, descr); err != nil {
		return Header{}, err
	}
	if fortran.kind != pyBool {
		return Header{}, fmt.Errorf("%w: %s: 'fortran_order' = %s; want True or False", ErrFormat, fn, fortran.text)
	}
	h.FortranOrder = fortran.b
	if shape.kind != pyTuple {
		return Header{}, fmt.Errorf("%w: %s: 'shape' = %s; want a tuple of integers", ErrFormat, fn, shape.text)
	}
	h.Shape = make([]int, len(shape.items))
	for i, it := range shape.items {
		if it.kind != pyInt {
			return Header{}, fmt.Errorf("%w: %s: 'shape' = %s, dimension %d = %s; want an integer", ErrFormat, fn, shape.text, i, it.text)
		}
		n, err := strconv.Atoi(it.str)
		if err != nil {
			return Header{}, fmt.Errorf("%w: %s: 'shape' = %s, dimension %d = %s; want one that fits an int", ErrShape, fn, shape.text, i, it.text)
		}
		h.Shape[i] = n
	}
	n, err := count(fn, "'shape'", h.Shape)
	if err != nil {
		return Header{}, err
	}
	if err := holdable(fn, "'shape'", h.Shape, n); err != nil {
		return Header{}, err
	}
	return h, nil
}

// kindNames names the NumPy kinds this package refuses, for the message.
var kindNames = map[byte]string{
	'b': "bool", 'c': "complex", 'O': "Python object", 'S': "byte string",
	'a': "byte string", 'U': "unicode string", 'V': "raw or structured",
	'M': "datetime", 'm': "timedelta", 'f': "floating point", 'i': "signed integer",
	'u': "unsigned integer",
}

// supportedDescrs lists the descriptors accepted, for messages.
const supportedDescrs = "'<f8', '<f4', '<f2', '<i8', '<i4', '<i2', '<u4', '<u2' (or '>' for big-endian), '|i1', '|u1' and '|b1'"

// parseDescr interprets 'descr'. Accepted: a string of an optional byte
// order mark and one of the kind-and-size codes of the supported types.
// Multi-byte types need '<' or '>': '=' (native order) and '|' (order not
// applicable) do not say how the writer's machine stored the bytes.
func parseDescr(fn string, v *pyValue) (DType, ByteOrder, error) {
	if v.kind != pyStr {
		what := "a " + pyKindName[v.kind]
		if v.kind == pyInt {
			what = "an integer"
		}
		if v.kind == pyList {
			what = "a structured type"
		}
		return 0, 0, fmt.Errorf("%w: %s: 'descr' = %s, %s; want one of %s", ErrDType, fn, v.text, what, supportedDescrs)
	}
	s := v.str
	var mark byte
	if s != "" && strings.IndexByte("<>|=", s[0]) >= 0 {
		mark, s = s[0], s[1:]
	}
	dt, found := DType(0), false
	for _, d := range dt.Values() {
		if s == fmt.Sprintf("%c%d", dtypeInfo[d].kind, dtypeInfo[d].size) {
			dt, found = d, true
		}
	}
	if !found {
		what := "not a supported type"
		if s != "" {
			if name, ok := kindNames[s[0]]; ok {
				what = name
				if strings.IndexByte("fiu", s[0]) >= 0 {
					what += " of an unsupported size"
				}
			}
		}
		return 0, 0, fmt.Errorf("%w: %s: 'descr' = %s (%s); want one of %s", ErrDType, fn, v.text, what, supportedDescrs)
	}
	if dt.Size() == 1 {
		return dt, LittleEndian, nil
	}
	switch mark {
	case '<':
		return dt, LittleEndian, nil
	case '>':
		return dt, BigEndian, nil
	}
	return 0, 0, fmt.Errorf("%w: %s: 'descr' = %s, no byte order for a type of %d bytes; want '<' or '>' (a file does not say which machine's native order '=' or none meant)",
		ErrDType, fn, v.text, dt.Size())
}

// growthDigits is the room NumPy leaves after the dictionary (21 characters
// less the digits of the dimension that grows when arrays are appended),
// kept so that the bytes equal NumPy's own.
const growthDigits = 21

// formatDict returns the header dictionary as NumPy writes it: keys sorted,
// a trailing ", " before the brace, and room for the growing dimension.
func formatDict(h *Header) string {
	var b strings.Builder
	b.WriteString("{'descr': '")
	switch {
	case h.DType.Size() == 1:
		b.WriteByte('|')
	case h.ByteOrder == BigEndian:
		b.WriteByte('>')
	default:
		b.WriteByte('<')
	}
	fmt.Fprintf(&b, "%c%d', 'fortran_order': ", dtypeInfo[h.DType].kind, h.DType.Size())
	if h.FortranOrder {
		b.WriteString("True")
	} else {
		b.WriteString("False")
	}
	b.WriteString(", 'shape': (")
	for i, d := range h.Shape {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Itoa(d))
	}
	if len(h.Shape) == 1 {
		b.WriteByte(',')
	}
	b.WriteString("), }")
	if len(h.Shape) > 0 {
		grow := h.Shape[0]
		if h.FortranOrder {
			grow = h.Shape[len(h.Shape)-1]
		}
		b.WriteString(strings.Repeat(" ", max(0, growthDigits-len(strconv.Itoa(grow)))))
	}
	return b.String()
}
