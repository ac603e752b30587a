"""Shared plumbing of the golden-vector generator.

This module knows how to round, encode and write numbers; it knows nothing
of the kernels. Each fam_<package>.py module implements its formulas again
from the published definitions, with mpmath at DIGITS significant digits,
and shares no code with the Go side.

Rules every family follows (see testdata/README.md):
  * inputs are drawn from a seeded random.Random and are Python floats, that
    is float64 values, before any computation; mpmath then works on those
    exact binary values (mpf(x) of a float is exact);
  * every expected output is an mpf rounded once, to the nearest float64
    with ties to even (to_f64), including the subnormal range;
  * numbers are stored as hexadecimal floating-point strings (float.hex),
    with a decimal copy (repr) beside them for readers.
"""

import json
import os
import random
from fractions import Fraction

import mpmath
from mpmath import mp

DIGITS = 50
mp.dps = DIGITS

# Every convention's words, as the Go types define them: vocabulary.json is
# written from the Go code (go test ./ops -run TestVocabularyFile -update),
# and a Go test fails when it is out of date. The families spell every
# convention word through word(), so a word the Go side renames or drops
# stops the generator instead of writing a golden file no Go test can read.
with open(os.path.join(os.path.dirname(os.path.abspath(__file__)), "vocabulary.json"), encoding="utf-8") as _f:
    VOCABULARY = {c["name"]: [w["word"] for w in c["words"]] for c in json.load(_f)["conventions"]}


def words(convention):
    """Every word of a convention ("attention.GroupMap"), the default
    (the Go zero value) first."""
    if convention not in VOCABULARY:
        raise SystemExit("no convention %r in vocabulary.json; known: %s" % (convention, ", ".join(sorted(VOCABULARY))))
    return list(VOCABULARY[convention])


def word(convention, *texts):
    """texts, each checked to be one of the convention's words: the one
    text, or a tuple of them when there are several."""
    for text in texts:
        if text not in words(convention):
            raise SystemExit("%r is not a word of %s; its words: %s" % (text, convention, ", ".join(words(convention))))
    return texts[0] if len(texts) == 1 else texts


def families(package, *builds):
    """The FAMILIES list of a module: one (package, family, build) per
    build function, the family named by the function (build_<family>)."""
    out = []
    for build in builds:
        name = build.__name__
        if not name.startswith("build_"):
            raise ValueError("family builder %s is not named build_<family>" % name)
        out.append((package, name[len("build_"):], build))
    return out


def rng(seed):
    """A deterministic generator. random.Random's Mersenne Twister and its
    random() method are stable across Python 3 versions."""
    return random.Random(seed)


def uniform(r, n, lo=-1.0, hi=1.0):
    """n float64 values uniform in [lo, hi), rounded to float64 by
    construction (the arithmetic is float64)."""
    return [lo + (hi - lo) * r.random() for _ in range(n)]


def to_f64(x):
    """Round an mpf (or int, Fraction, float) to the nearest float64, ties
    to even, with gradual underflow and overflow to infinity.

    mpmath's own float() truncates (its default rounding for that path is
    round_down), so the rounding is done here exactly: the mpf is turned
    into a Fraction and CPython's integer true division, which is correctly
    rounded, produces the float."""
    if isinstance(x, float):
        return x
    if isinstance(x, int):
        x = Fraction(x)
    if isinstance(x, mpmath.mpf):
        if mpmath.isnan(x):
            return float("nan")
        if mpmath.isinf(x):
            return float("inf") if x > 0 else float("-inf")
        sign, man, exp, _ = x._mpf_
        if man == 0:
            return -0.0 if sign else 0.0
        v = Fraction(man) * (Fraction(2) ** exp)
        if sign:
            v = -v
        x = v
    if isinstance(x, Fraction):
        if x == 0:
            return 0.0
        try:
            return x.numerator / x.denominator
        except OverflowError:
            return float("inf") if x > 0 else float("-inf")
    raise TypeError("to_f64: unsupported type %r" % type(x))


def hexf(v):
    return float.hex(v)


def ftensor(values, shape):
    """A float64 tensor. values are floats or mpf; mpf values are rounded
    with to_f64."""
    vals = [to_f64(v) for v in values]
    _check_shape(vals, shape)
    return {"dtype": "float64", "shape": list(shape),
            "data": [hexf(v) for v in vals],
            "decimal": [repr(v) for v in vals]}


def btensor(values, shape):
    vals = [bool(v) for v in values]
    _check_shape(vals, shape)
    return {"dtype": "bool", "shape": list(shape), "data": vals}


def itensor(values, shape):
    vals = [int(v) for v in values]
    _check_shape(vals, shape)
    return {"dtype": "int", "shape": list(shape), "data": vals}


def _check_shape(vals, shape):
    n = 1
    for d in shape:
        n *= d
    if n != len(vals):
        raise ValueError("shape %r holds %d elements, got %d" % (shape, n, len(vals)))


def case(name, source, config, inputs, outputs):
    return {"name": name, "source": source, "digits": DIGITS,
            "config": config, "inputs": inputs, "outputs": outputs}


def _dump(obj, indent, out):
    pad = " " * indent
    if isinstance(obj, dict):
        if not obj:
            out.append("{}")
            return
        out.append("{\n")
        items = list(obj.items())
        for k, (key, val) in enumerate(items):
            out.append(pad + "  " + json.dumps(key) + ": ")
            _dump(val, indent + 2, out)
            out.append(",\n" if k + 1 < len(items) else "\n")
        out.append(pad + "}")
    elif isinstance(obj, list) and obj and all(isinstance(v, dict) for v in obj):
        out.append("[\n")
        for k, val in enumerate(obj):
            out.append(pad + "  ")
            _dump(val, indent + 2, out)
            out.append(",\n" if k + 1 < len(obj) else "\n")
        out.append(pad + "]")
    else:
        # scalars and lists of scalars stay on one line
        out.append(json.dumps(obj, ensure_ascii=False, allow_nan=False))


def render(package, family, generator, cases):
    """The bytes of one golden file. Key order is fixed by construction, so
    the same cases always give the same bytes."""
    names = [c["name"] for c in cases]
    if len(set(names)) != len(names):
        raise ValueError("%s/%s: duplicate case names" % (package, family))
    obj = {"schema": 1, "package": package, "family": family,
           "generator": generator, "cases": cases}
    out = []
    _dump(obj, 0, out)
    out.append("\n")
    return "".join(out).encode("utf-8")
