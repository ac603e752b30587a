"""plumbcheck: check a NumPy port against plumb's float64 references.

One file, NumPy only. Copy it next to your tests, or put this folder on
sys.path. It does two things:

1. Encodes and decodes the bit patterns of the number formats NumPy has no
   type for, exactly as plumb's Go package compare does (Format.Encode,
   Format.EncodeSaturating, Format.Decode):

   bfloat16  1 sign, 8 exponent, 7 fraction bits, bias 127, as binary32
             with the low 16 fraction bits dropped; ±Inf and NaN as in
             binary32; max 3.3895313892515355e38.
   e4m3      OCP 8-bit Floating Point Specification (OFP8), 2023: 4
             exponent bits, bias 7, 3 fraction bits; no infinities; only
             S.1111.111 is NaN; max 448.
   e5m2      OFP8 2023: 5 exponent bits, bias 15, 2 fraction bits;
             IEEE-style ±Inf (S.11111.00) and NaN; max 57344.

   Rounding is to nearest, ties to even, in one step from the float64 value
   (a float32 input is exact in float64, so the result is also the correct
   rounding of the float32). Overflow is non-saturating by default: a value
   whose rounding exceeds the format's max becomes ±Inf (bfloat16, e5m2)
   or NaN (e4m3, which has no infinities); ±Inf becomes NaN in e4m3.
   With saturate=True a finite value beyond max, and ±Inf, become ±max
   (OFP8 §5's saturating mode, offered for every format as compare does).
   NaN encodes as the canonical pattern with the sign bit clear: 0x7fc0
   (bfloat16), 0x7f (e4m3), 0x7e (e5m2).

2. Runs ``plumb check -json`` on a port's outputs: writes the inputs and
   the outputs as .npy files, runs the plumb binary (given, named by the
   environment variable PLUMBCHECK_BINARY, or found on PATH) and returns
   the parsed report, or raises CheckFailed, an AssertionError whose
   message is the report's summary, when an output is outside tolerance.
   It works the same under pytest and unittest.

Example::

    import numpy as np, plumbcheck

    q, k, v = (np.load(f) for f in ("q.npy", "k.npy", "v.npy"))
    out = my_attention(q, k, v)                     # float32
    report = plumbcheck.check(
        "attention-forward",
        inputs={"q": q, "k": k, "v": v},
        outputs={"out": out},
        config={"mask": [{"kind": "causal"}], "group": "blocks"},
    )

    bits = plumbcheck.encode(out, "bfloat16")      # uint16 patterns
    plumbcheck.check("attention-forward", {"q": q, "k": k, "v": v},
                     {"out": bits}, config={...}, fmt="bfloat16")
"""

import json
import os
import shutil
import subprocess
import tempfile
import textwrap

import numpy as np

__all__ = [
    "FORMATS",
    "CheckFailed",
    "PlumbError",
    "check",
    "decode",
    "encode",
    "find_plumb",
    "round_to",
    "summary",
]


class _Format:
    """The parameters of one format, as compare's newParams computes them."""

    def __init__(self, name, width, exp_bits, frac_bits, ieee):
        self.name = name
        self.width = width
        self.exp_bits = exp_bits
        self.frac_bits = frac_bits
        self.ieee = ieee
        self.bias = (1 << (exp_bits - 1)) - 1
        self.emin = 1 - self.bias
        self.all_ones = (1 << exp_bits) - 1
        self.frac_ones = (1 << frac_bits) - 1
        if ieee:
            self.emax = self.all_ones - 1 - self.bias
            self.max = float(np.ldexp(2.0 - np.ldexp(1.0, -frac_bits), self.emax))
            self.nan_bits = (self.all_ones << frac_bits) | (1 << (frac_bits - 1))
        else:
            self.emax = self.all_ones - self.bias
            self.max = float(np.ldexp(2.0 - np.ldexp(2.0, -frac_bits), self.emax))
            self.nan_bits = (self.all_ones << frac_bits) | self.frac_ones
        self.min_normal = float(np.ldexp(1.0, self.emin))
        self.min_subnormal = float(np.ldexp(1.0, self.emin - frac_bits))
        self.dtype = np.dtype(np.uint16 if width == 16 else np.uint8)

    def __repr__(self):
        return "<format %s>" % self.name


#: The formats by name.
FORMATS = {
    "bfloat16": _Format("bfloat16", 16, 8, 7, True),
    "e4m3": _Format("e4m3", 8, 4, 3, False),
    "e5m2": _Format("e5m2", 8, 5, 2, True),
}

# Other names compare.FormatByName accepts for these formats.
_ALIASES = {"bf16": "bfloat16", "fp8e4m3": "e4m3", "fp8-e4m3": "e4m3", "fp8e5m2": "e5m2", "fp8-e5m2": "e5m2"}


def _format(fmt):
    if isinstance(fmt, _Format):
        return fmt
    name = str(fmt).lower()
    name = _ALIASES.get(name, name)
    if name not in FORMATS:
        raise ValueError(
            "format = %r; want one of %s (or %s)" % (fmt, ", ".join(FORMATS), ", ".join(sorted(_ALIASES)))
        )
    return FORMATS[name]


def _as_float64(x, what):
    a = np.asarray(x)
    if a.dtype.kind not in "fiub":
        raise TypeError("%s has dtype %s; want real numbers (float, int or bool)" % (what, a.dtype))
    if a.dtype.kind == "f" and a.dtype.itemsize > 8:
        raise TypeError("%s has dtype %s; want at most float64: wider values would be rounded twice" % (what, a.dtype))
    with np.errstate(invalid="ignore"):  # signalling NaN patterns of float32
        return a.astype(np.float64)


def round_to(x, fmt, saturate=False):
    """Return x rounded to the nearest value of fmt, as float64 values.

    One rounding from float64, ties to even (compare's Format.Round, or
    Format.RoundSaturating with saturate=True).
    """
    f = _format(fmt)
    x = _as_float64(x, "x")
    with np.errstate(all="ignore"):
        a = np.abs(x)
        _, e2 = np.frexp(a)
        q = (np.maximum(e2.astype(np.int64) - 1, f.emin) - f.frac_bits).astype(np.int32)
        # a·2^-q is exact, and rint rounds it to an integer, ties to even:
        # one rounding. Back with ldexp, exact (or +Inf past float64).
        v = np.ldexp(np.rint(np.ldexp(a, -q)), q)
        over = v > f.max
        if saturate:
            v = np.where(over, f.max, v)
        elif f.ieee:
            v = np.where(over, np.inf, v)
        else:
            v = np.where(over, np.nan, v)
        inf = np.isinf(x)
        if saturate:
            v = np.where(inf, f.max, v)
        elif f.ieee:
            v = np.where(inf, np.inf, v)
        else:
            v = np.where(inf, np.nan, v)
        v = np.where(np.isnan(x), np.nan, v)
        v = np.where(a == 0, 0.0, v)
        return np.copysign(v, x)


def encode(x, fmt, saturate=False):
    """Return the bit patterns of x rounded to fmt (uint16 or uint8).

    fmt is "bfloat16", "e4m3" or "e5m2" (also "bf16", "fp8e4m3", ...).
    x may be any real array or scalar; float32 and float64 values are
    rounded exactly as compare's Format.Encode (EncodeSaturating with
    saturate=True) does. The result has x's shape.
    """
    f = _format(fmt)
    v = round_to(x, f, saturate)
    with np.errstate(all="ignore"):
        a = np.abs(v)
        nan = np.isnan(v)
        inf = np.isinf(v)
        sign = np.where(np.signbit(v) & ~nan, 1 << (f.width - 1), 0).astype(np.int64)
        sub = (a < f.min_normal) & ~nan
        m, e2 = np.frexp(a)
        normal = ~sub & ~nan & ~inf
        expo = np.where(normal, e2.astype(np.int64) - 1 + f.bias, 0)
        frac = np.where(normal, np.ldexp(2 * m - 1, f.frac_bits), 0.0)  # exact
        frac = np.where(sub, a / f.min_subnormal, frac)  # exact: a multiple of the smallest subnormal
        bits = sign | (expo << f.frac_bits) | frac.astype(np.int64)
        bits = np.where(inf, sign | (f.all_ones << f.frac_bits), bits)
        bits = np.where(nan, f.nan_bits, bits)
    return bits.astype(f.dtype)


def decode(bits, fmt):
    """Return the float64 values of the bit patterns of fmt.

    Every pattern of the format's width decodes (compare's Format.Decode):
    NaN patterns give NaN, bfloat16 and e5m2 patterns with an all-ones
    exponent and zero fraction ±Inf. bits must be integers within the
    format's width; anything else is a ValueError or TypeError.
    """
    f = _format(fmt)
    b = np.asarray(bits)
    if b.dtype.kind not in "iu":
        raise TypeError("bits have dtype %s; want unsigned integers (uint16 for bfloat16, uint8 for e4m3, e5m2)" % b.dtype)
    b = b.astype(np.int64)
    if b.size and (b.min() < 0 or b.max() >> f.width):
        bad = b[(b < 0) | (b >> f.width != 0)].flat[0]
        raise ValueError("bit pattern %#x is out of range; want at most the %d bits of %s" % (int(bad), f.width, f.name))
    neg = (b >> (f.width - 1)) & 1 == 1
    expo = (b >> f.frac_bits) & f.all_ones
    frac = b & f.frac_ones
    with np.errstate(all="ignore"):
        v = np.where(
            expo == 0,
            np.ldexp(frac.astype(np.float64), f.emin - f.frac_bits),
            np.ldexp((frac | (1 << f.frac_bits)).astype(np.float64), (expo - f.bias - f.frac_bits).astype(np.int32)),
        )
        if f.ieee:
            v = np.where((expo == f.all_ones) & (frac == 0), np.inf, v)
            nan = (expo == f.all_ones) & (frac != 0)
        else:
            nan = (expo == f.all_ones) & (frac == f.frac_ones)
        v = np.where(neg, -v, v)
        return np.where(nan, np.nan, v)


class PlumbError(RuntimeError):
    """plumb could not run the check: a usage or input error (exit status 2),
    or the binary is missing or did not answer as expected."""


class CheckFailed(AssertionError):
    """An output of the port is outside tolerance (plumb's exit status 1).

    The message is the report's summary; .report is the parsed JSON report
    and .command the command line run.
    """

    def __init__(self, message, report, command):
        super().__init__(message)
        self.report = report
        self.command = command


def find_plumb(plumb=None):
    """Return the path of the plumb binary: plumb if given, else the
    environment variable PLUMBCHECK_BINARY, else "plumb" on PATH."""
    candidate = plumb or os.environ.get("PLUMBCHECK_BINARY") or "plumb"
    path = shutil.which(candidate)
    if path is None:
        raise PlumbError(
            "plumb binary %r not found; want it on PATH (go install github.com/plumbref/plumb/cmd/plumb@latest), "
            "in PLUMBCHECK_BINARY, or given as plumb=PATH" % candidate
        )
    return path


# The element types plumb reads as they are (float16 files are binary16).
_FLOATS = (np.dtype(np.float64), np.dtype(np.float32), np.dtype(np.float16))


def _input_array(name, x):
    a = np.asarray(x)
    if a.dtype.kind == "f" and a.dtype.newbyteorder("<") in _FLOATS:
        return a
    if a.dtype.kind in "iub":
        return a.astype(np.float64)
    raise TypeError("input %r has dtype %s; want float64, float32 or float16 (integers are widened)" % (name, a.dtype))


def _output_array(name, x, fmt):
    a = np.asarray(x)
    if a.dtype.kind == "f" and a.dtype.newbyteorder("<") in _FLOATS:
        return a
    if a.dtype.kind == "u" and a.dtype.itemsize in (1, 2):
        if fmt is None:
            raise ValueError(
                "output %r holds %s bit patterns; want fmt=%s to say which format they are"
                % (name, a.dtype, '"bfloat16"' if a.dtype.itemsize == 2 else '"e4m3" or "e5m2"')
            )
        f = _format(fmt)
        if f.dtype.itemsize != a.dtype.itemsize:
            raise ValueError("output %r holds %s values; want %s bit patterns for fmt=%r" % (name, a.dtype, f.dtype, fmt))
        return a
    raise TypeError(
        "output %r has dtype %s; want float64, float32 or float16, or uint16/uint8 bit patterns with fmt" % (name, a.dtype)
    )


def _safe_name(name):
    if not name or any(c in name for c in "/\\=\0") or name in (".", ".."):
        raise ValueError("tensor name %r; want a plain name (no '/', '\\\\' or '=')" % name)
    return name


def check(
    operation,
    inputs,
    outputs,
    config=None,
    *,
    fmt=None,
    tolerance=None,
    k=None,
    allow_nonfinite=False,
    diagnosis=True,
    plumb=None,
    workdir=None,
    timeout=600,
):
    """Run plumb's reference of operation on inputs and judge outputs.

    operation  a plumb operation ("attention-forward"; plumb help ops).
    inputs     {name: array}: float64, float32 or float16 arrays (integer
               arrays are widened to float64), written as .npy files.
    outputs    {name: array}: the port's outputs, float64, float32 or
               float16, or uint16/uint8 bit patterns with fmt.
    config     the operation's configuration: a dict ("version": 1 is
               added when missing), a JSON string, or None for
               {"version": 1}.
    fmt        the candidates' format when it is not their dtype's
               ("bfloat16", "e4m3", "e5m2", or a float format name).
    tolerance  None for plumb's own (the yardstick for formats narrower
               than float64), or a dict with any of "abs", "rel",
               "ulps", "normwise".
    k          the yardstick's factor (plumb's default 2 when None).
    diagnosis  when an output fails, let plumb search for what the port
               may have done (its findings are in the summary).
    plumb      the plumb binary (see find_plumb).
    workdir    a folder to write the files in and keep (to rerun the
               command by hand); by default a temporary folder, removed.

    Returns the report, plumb's JSON as a dict: "pass", "outputs" (each
    with "output", "candidate", "pass" and "report") and, for a failing
    check, "diagnosis". Raises CheckFailed (an AssertionError) with the
    summary when an output is outside tolerance, PlumbError when plumb
    refuses the inputs or configuration (its message says why), and
    TypeError or ValueError for arguments it cannot write.
    """
    if not isinstance(operation, str) or not operation:
        raise ValueError("operation = %r; want the name of a plumb operation (plumb help ops)" % (operation,))
    if not outputs:
        raise ValueError("outputs is empty; want at least one {name: array} to judge")
    ins = {_safe_name(n): _input_array(n, x) for n, x in dict(inputs).items()}
    outs = {_safe_name(n): _output_array(n, x, fmt) for n, x in dict(outputs).items()}
    if config is None:
        cfg = {"version": 1}
    elif isinstance(config, str):
        try:
            cfg = json.loads(config)
        except ValueError as e:
            raise ValueError("config is not JSON: %s" % e) from None
    else:
        cfg = dict(config)
    if isinstance(cfg, dict):
        cfg.setdefault("version", 1)
    flags = []
    if fmt is not None:
        flags += ["-format", fmt.name if isinstance(fmt, _Format) else str(fmt)]
    if tolerance:
        unknown = set(tolerance) - {"abs", "rel", "ulps", "normwise"}
        if unknown:
            raise ValueError("tolerance keys %s; want abs, rel, ulps or normwise" % sorted(unknown))
        for key in ("abs", "rel", "normwise"):
            if key in tolerance:
                flags += ["-" + key, repr(float(tolerance[key]))]
        if "ulps" in tolerance:
            flags += ["-ulps", str(int(tolerance["ulps"]))]
    if k is not None:
        flags += ["-k", repr(float(k))]
    if allow_nonfinite:
        flags.append("-allow-nonfinite")
    if not diagnosis:
        flags.append("-no-diagnosis")
    binary = find_plumb(plumb)

    def run(folder):
        cfg_path = os.path.join(folder, "config.json")
        with open(cfg_path, "w") as fh:
            json.dump(cfg, fh)
        cmd = [binary, "check", "-json", "-quiet", operation, "-config", cfg_path]
        for n, a in ins.items():
            p = os.path.join(folder, "in_%s.npy" % n)
            np.save(p, a)
            cmd.append("%s=%s" % (n, p))
        for n, a in outs.items():
            p = os.path.join(folder, "got_%s.npy" % n)
            np.save(p, a)
            cmd += ["-got", "%s=%s" % (n, p)]
        cmd += flags
        try:
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
        except OSError as e:
            raise PlumbError("running %s: %s" % (binary, e)) from None
        except subprocess.TimeoutExpired:
            raise PlumbError("plumb check did not finish within %s s: %s" % (timeout, " ".join(cmd))) from None
        return cmd, done

    if workdir is not None:
        os.makedirs(workdir, exist_ok=True)
        cmd, done = run(workdir)
    else:
        with tempfile.TemporaryDirectory(prefix="plumbcheck-") as folder:
            cmd, done = run(folder)
    if done.returncode not in (0, 1):
        raise PlumbError("plumb check refused the check (exit status %d): %s" % (done.returncode, done.stderr.strip()))
    try:
        report = json.loads(done.stdout)
    except ValueError as e:
        raise PlumbError("plumb check -json wrote no JSON (%s): %r" % (e, done.stdout[:200])) from None
    if "pass" not in report:
        report["pass"] = all(_output_passes(o) for o in report.get("outputs", []))
    if bool(report["pass"]) != (done.returncode == 0):
        raise PlumbError("plumb check: exit status %d but \"pass\": %s" % (done.returncode, report["pass"]))
    if not report["pass"]:
        raise CheckFailed(summary(report, operation), report, cmd)
    return report


def _output_passes(o):
    if "pass" in o:
        return bool(o["pass"])
    verdict = (o.get("report") or {}).get("verdict") or {}
    return bool(verdict.get("pass"))


def _g(x):
    return x if isinstance(x, str) else "%.4g" % x


def summary(report, operation=None):
    """Return a few lines saying what plumb's JSON report says: the verdict
    of each output with its reasons and largest errors, and what the
    diagnosis found (the changes under which the port passes)."""
    head = "plumb check" + (" " + operation if operation else "")
    lines = ["%s: %s" % (head, "PASS" if report.get("pass") else "FAIL")]
    for o in report.get("outputs", []):
        r = o.get("report") or {}
        v = r.get("verdict") or {}
        name = "%s (%s)" % (o.get("output", "?"), os.path.basename(str(o.get("candidate", "?"))))
        measures = "max abs error %s at %s, normwise %s" % (
            _g(r.get("max_abs_error", float("nan"))),
            r.get("max_abs_error_at"),
            _g(r.get("normwise_rel_error", float("nan"))),
        )
        if _output_passes(o):
            lines.append("  %s: PASS (%s)" % (name, measures))
        else:
            lines.append("  %s: FAIL: %s; %s" % (name, "; ".join(v.get("reasons") or ["outside tolerance"]), measures))
    d = report.get("diagnosis") or {}
    if d.get("error"):
        lines.append("  what the port may have done: the search failed: %s" % d["error"])
    passing = [c for c in d.get("candidates") or [] if c.get("passes")]
    if passing:
        lines.append("  what the port may have done (the port passes under each):")
        for c in passing[:3]:
            lines.append("    %s (normwise %s)" % (c.get("change"), _g(c.get("normwise_error", float("nan")))))
    elif d.get("candidates"):
        c = d["candidates"][0]
        lines.append("  nearest change found (still failing): %s (normwise %s)" % (c.get("change"), _g(c.get("normwise_error", float("nan")))))
    for s in (d.get("signatures") or [])[:3]:
        lines.append("  signature of %s along %s: %s" % (s.get("output"), s.get("along"), s.get("finding")))
    # Lines of at most 100 characters, as plumb's own report.
    return "\n".join(
        textwrap.fill(l, width=100, subsequent_indent=" " * (len(l) - len(l.lstrip()) + 2), break_on_hyphens=False)
        for l in lines
    )
