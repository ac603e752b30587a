"""Golden vectors for the quant package.

Every value here is computed with exact rationals (fractions.Fraction) from
the definitions in quant/doc.go and the sources below, written again for
this file; nothing is shared with the Go code.

  * quantise: integer codes of a [rows, cols] tensor under a scheme
    (Jacob et al. 2018, arXiv 1712.05877, Sec. 2.1, Eq. (1): r = S(q - Z)).
    The scale of a block is the smallest value of the scale format at or
    above the exact quotient amax/hi (symmetric) or (xmax - xmin)/(hi - lo)
    (asymmetric), the extremes limited to the p-th percentile of |x| by
    nearest rank under the percentile rule (common practice). Quant's Go
    code reaches the same scale through float64 quotients rounded upward:
    the smallest format value above those is the smallest above the exact
    quotient, for a format value between the two would be a float64 between
    the exact quotient and its upward rounding. Codes are the exact nearest
    integer to x/s (+ z), ties by the rounding word.
  * pack4: int4 codes two to a byte (common practice), low or high nibble
    first, two's complement or offset binary.
  * fp8: FP8 elements with scales, OCP 8-bit Floating Point Specification
    (OFP8), revision 1.0, 2023: E4M3 (bias 7, max 448, no infinity) and
    E5M2 (bias 15, max 57344); the exact quotient x/s rounded once to
    nearest even, saturating or not.
  * sqnr: 10 log10(sum x^2 / sum (x - xhat)^2) in decibels (common
    practice), the sums exact, the logarithm in mpmath.
"""

import math
from fractions import Fraction

from mpmath import mpf, log10

from common import families, case, ftensor, itensor, rng, uniform, word

SYMMETRIC, ASYMMETRIC, ASYM_FLOAT = word("quant.Symmetry", "symmetric", "asymmetric", "asymmetric-float")
PER_TENSOR, PER_CHANNEL, PER_GROUP = word("quant.Granularity", "per-tensor", "per-channel", "per-group")
ROWS, COLUMNS = word("quant.Channel", "rows", "columns")
INT8, INT4 = word("quant.Width", "int8", "int4")
FULL, CLIPPED = word("quant.Range", "full", "symmetric-clipped")
HALF_EVEN, HALF_AWAY = word("quant.Rounding", "half-even", "half-away")
F32, B16, BF16, POW2 = word("quant.ScaleFormat", "float32", "binary16", "bfloat16", "pow2")
ABSMAX, PERCENTILE = word("quant.ScaleRule", "absmax", "percentile")
LOW_FIRST, HIGH_FIRST = word("quant.NibbleOrder", "low-first", "high-first")
TWOS, OFFSET = word("quant.NibbleCode", "twos-complement", "offset-binary")
E4M3, E5M2 = word("quant.FP8Element", "e4m3", "e5m2")
SPECIAL, SATURATE = word("quant.Overflow", "nan-or-inf", "saturate")

SRC_Q = "r = S(q - Z): Jacob et al. 2018, arXiv 1712.05877, Sec. 2.1, Eq. (1); scale rounded upward to its format and ties by the rounding word: quant/doc.go; nearest-rank percentile: common practice"
SRC_PACK = "two int4 codes to a byte: common practice"
SRC_FP8 = "OCP 8-bit Floating Point Specification (OFP8), revision 1.0, 2023: E4M3 and E5M2, round to nearest even, saturating or not"
SRC_SQNR = "SQNR = 10 log10(sum x^2 / sum (x - xhat)^2): common practice"

# (precision in bits, smallest normal exponent, largest finite value) of
# the floating scale formats: IEEE 754-2019 binary32 and binary16, bfloat16.
FLOATS = {
    F32: (24, -126, (2 - Fraction(1, 2 ** 23)) * Fraction(2) ** 127),
    B16: (11, -14, Fraction(65504)),
    BF16: (8, -126, (2 - Fraction(1, 2 ** 7)) * Fraction(2) ** 127),
}
# The FP8 element formats: (precision, emin, max, has infinity).
FP8 = {E4M3: (4, -6, Fraction(448), False), E5M2: (3, -14, Fraction(57344), True)}


def floor_log2(q):
    """floor(log2 q) of a positive Fraction, exactly."""
    e = q.numerator.bit_length() - q.denominator.bit_length()
    if Fraction(2) ** e > q:
        e -= 1
    if Fraction(2) ** (e + 1) <= q:
        e += 1
    return e


def ceil_frac(q):
    return -((-q.numerator) // q.denominator)


def round_int(q, mode):
    """The integer nearest the Fraction q, ties by mode."""
    f = q.numerator // q.denominator
    r = q - f
    if r > Fraction(1, 2):
        return f + 1
    if r < Fraction(1, 2):
        return f
    if mode == HALF_AWAY:
        return f + 1 if q > 0 else f
    return f + 1 if f % 2 else f


def step(q, prec, emin):
    """The spacing of a format's values at |q| (q != 0)."""
    return Fraction(2) ** (max(floor_log2(abs(q)), emin) - prec + 1)


def scale_up(q, fmt):
    """The smallest value of the scale format >= q > 0."""
    if fmt == POW2:
        e = floor_log2(q)
        if Fraction(2) ** e < q:
            e += 1
        return Fraction(2) ** max(e, -127)
    prec, emin, top = FLOATS[fmt]
    u = step(q, prec, emin)
    v = ceil_frac(q / u) * u
    if v > top:
        raise ValueError("scale beyond the format")
    return v


def round_float(q, prec, emin):
    """q rounded to nearest even among the values of (prec, emin), no
    overflow check."""
    if q == 0:
        return Fraction(0)
    u = step(q, prec, emin)
    # a carry into the next binade is still a multiple of u there
    return round_int(q / u, HALF_EVEN) * u


def limits(width, rng_word):
    hi = 7 if width == INT4 else 127
    return (-hi if rng_word == CLIPPED else -hi - 1), hi


def blocks_of(rows, cols, gran, chan, group):
    """The block of each element, row-major, and the number of blocks."""
    out = []
    for r in range(rows):
        for c in range(cols):
            if gran == PER_TENSOR:
                out.append(0)
            elif gran == PER_CHANNEL:
                out.append(r if chan == ROWS else c)
            elif chan == ROWS:
                out.append(r * (cols // group) + c // group)
            else:
                out.append((r // group) * cols + c)
    n = {PER_TENSOR: 1, PER_CHANNEL: rows if chan == ROWS else cols}.get(gran, rows * cols // max(group, 1))
    return out, n


def percentile(vals, p):
    """The nearest-rank p-th percentile of |vals|: the ceil(p n / 100)-th
    smallest (at least the first)."""
    a = sorted(abs(v) for v in vals)
    k = max(ceil_frac(Fraction(p) * len(a) / 100), 1)
    return a[min(k, len(a)) - 1]


def quantise(x, rows, cols, cfg):
    lo, hi = limits(cfg["width"], cfg["range"])
    blk, nb = blocks_of(rows, cols, cfg["granularity"], cfg["channel"], cfg["group"])
    sym = cfg["symmetry"]
    vals = [[] for _ in range(nb)]
    for i, v in enumerate(x):
        vals[blk[i]].append(Fraction(v))
    scales, zeros = [], []
    for b in range(nb):
        v = vals[b]
        if sym == ASYM_FLOAT:
            xmin, xmax = (min(v), max(v)) if v else (Fraction(0), Fraction(0))
        else:
            xmin, xmax = min(v + [Fraction(0)]), max(v + [Fraction(0)])
        if cfg["rule"] == PERCENTILE and v:
            p = percentile(v, cfg["percentile"])
            xmin, xmax = max(xmin, -p), min(xmax, p)
        q = max(-xmin, xmax) / hi if sym == SYMMETRIC else (xmax - xmin) / (hi - lo)
        s = scale_up(q, cfg["scale"]) if q > 0 else Fraction(1)
        scales.append(s)
        if sym == ASYMMETRIC:
            zeros.append(lo - round_int(xmin / s, cfg["rounding"]))
        elif sym == ASYM_FLOAT:
            prec, emin, _ = FLOATS[cfg["scale"]]
            zeros.append(round_float(lo - xmin / s, prec, emin))
    codes, xhat = [], []
    for i, v in enumerate(x):
        b, s = blk[i], scales[blk[i]]
        if sym == ASYM_FLOAT:
            k = round_int(Fraction(v) / s + zeros[b], cfg["rounding"])
        else:
            k = round_int(Fraction(v) / s, cfg["rounding"]) + (zeros[b] if sym == ASYMMETRIC else 0)
        k = min(max(k, lo), hi)
        codes.append(k)
        xhat.append((k - (zeros[b] if sym != SYMMETRIC else 0)) * s)
    return codes, scales, zeros, xhat, nb


def scheme(**kw):
    cfg = {"symmetry": SYMMETRIC, "granularity": PER_TENSOR, "channel": ROWS, "group": 0,
           "width": INT8, "range": FULL, "rounding": HALF_EVEN, "scale": F32,
           "rule": ABSMAX, "percentile": 0}
    cfg.update(kw)
    return cfg


def quantise_case(name, x, rows, cols, **kw):
    cfg = scheme(**kw)
    codes, scales, zeros, xhat, nb = quantise(x, rows, cols, cfg)
    cfg = dict(cfg, rows=rows, cols=cols)
    outs = {"codes": itensor(codes, [rows, cols]), "scales": ftensor([to_float(s) for s in scales], [nb])}
    if cfg["symmetry"] == ASYMMETRIC:
        outs["zeros"] = itensor(zeros, [nb])
    elif cfg["symmetry"] == ASYM_FLOAT:
        outs["float_zeros"] = ftensor([to_float(z) for z in zeros], [nb])
    outs["xhat"] = ftensor([to_float(v) for v in xhat], [rows, cols])
    return case(name, SRC_Q, cfg, {"x": ftensor(x, [rows, cols])}, outs)


def to_float(q):
    """A Fraction rounded once to float64 (correctly rounded division)."""
    return q.numerator / q.denominator


def ties(n, scale):
    """Multiples of scale/2: ties of the codes at every other one."""
    return [scale * (k - n // 2) / 2 for k in range(n)]


def build_quantise():
    r = rng(601)
    c = []
    x = uniform(r, 24, -3, 3)
    c.append(quantise_case("symmetric int8 per tensor", x, 4, 6))
    c.append(quantise_case("asymmetric int8 per channel rows, bfloat16", x, 4, 6, symmetry=ASYMMETRIC, granularity=PER_CHANNEL, scale=BF16))
    c.append(quantise_case("symmetric int4 per group of 3 along rows, binary16", x, 4, 6, width=INT4, granularity=PER_GROUP, group=3, scale=B16))
    c.append(quantise_case("int4 clipped per column, pow2", x, 4, 6, width=INT4, range=CLIPPED, granularity=PER_CHANNEL, channel=COLUMNS, scale=POW2))
    c.append(quantise_case("groups of 2 down the columns, half-away", x, 4, 6, granularity=PER_GROUP, channel=COLUMNS, group=2, rounding=HALF_AWAY))
    # amax 127/4 gives s = 1/4 exactly; x = k/8 are ties of the codes.
    t = [Fraction(k, 8) for k in range(-9, 9)] + [Fraction(127, 4), Fraction(-127, 4)]
    tf = [to_float(v) for v in t]
    c.append(quantise_case("ties, half-even", tf, 1, 20))
    c.append(quantise_case("ties, half-away", tf, 1, 20, rounding=HALF_AWAY))
    c.append(quantise_case("ties, int4 clipped half-away, pow2", [to_float(Fraction(k, 4)) for k in range(-14, 15)] + [to_float(Fraction(7, 2))], 1, 30, width=INT4, range=CLIPPED, rounding=HALF_AWAY, scale=POW2))
    c.append(quantise_case("a block of zeros beside others, asymmetric", [0.0] * 6 + x[:6], 2, 6, symmetry=ASYMMETRIC, granularity=PER_CHANNEL))
    c.append(quantise_case("subnormal-scale magnitudes, float32", [v * 2.0 ** -140 for v in x[:8]], 2, 4))
    c.append(quantise_case("all positive, asymmetric", [abs(v) + 1 for v in x[:12]], 3, 4, symmetry=ASYMMETRIC))
    y = uniform(r, 40, -1, 1)
    y[7], y[31] = 9.0, -12.0
    c.append(quantise_case("percentile 90 clips two outliers", y, 1, 40, rule=PERCENTILE, percentile=90))
    c.append(quantise_case("percentile 95 per row, int4 asymmetric", y, 2, 20, rule=PERCENTILE, percentile=95, width=INT4, symmetry=ASYMMETRIC, granularity=PER_CHANNEL))
    c.append(quantise_case("percentile 100 is the absolute maximum", y, 1, 40, rule=PERCENTILE, percentile=100))
    c.append(quantise_case("percentile 37.5 of eight, rank 3", [1.0, -2.0, 3.0, -4.0, 5.0, -6.0, 7.0, -8.0], 1, 8, rule=PERCENTILE, percentile=37.5))
    z = [10 + 10 * v for v in uniform(r, 32, 0, 1)]
    c.append(quantise_case("float zero point, int4 groups of 8, binary16", z, 2, 16, symmetry=ASYM_FLOAT, width=INT4, granularity=PER_GROUP, group=8, scale=B16))
    c.append(quantise_case("float zero point, int8 per row, float32", z, 2, 16, symmetry=ASYM_FLOAT, granularity=PER_CHANNEL))
    c.append(quantise_case("float zero point, bfloat16, a range holding zero", x, 4, 6, symmetry=ASYM_FLOAT, granularity=PER_CHANNEL, scale=BF16))
    c.append(quantise_case("float zero point, bfloat16 far from zero, extremes clipped", z, 2, 16, symmetry=ASYM_FLOAT, granularity=PER_CHANNEL, scale=BF16))
    c.append(quantise_case("float zero point with percentile, half-away", y, 2, 20, symmetry=ASYM_FLOAT, rule=PERCENTILE, percentile=90, rounding=HALF_AWAY))
    return c


def pack4(codes, order, code):
    out = [0] * ((len(codes) + 1) // 2)
    for i, q in enumerate(codes):
        n = q + 8 if code == OFFSET else q & 0xF
        first = i % 2 == 0
        if first == (order == LOW_FIRST):
            out[i // 2] |= n
        else:
            out[i // 2] |= n << 4
    return out


def build_pack4():
    c = []
    every = list(range(-8, 8))
    for order in (LOW_FIRST, HIGH_FIRST):
        for code in (TWOS, OFFSET):
            for name, q in (("every code", every), ("an odd count", [-8, 7, 3])):
                cfg = {"order": order, "code": code, "n": len(q)}
                c.append(case("%s, %s, %s" % (name, order, code), SRC_PACK, cfg,
                              {"codes": itensor(q, [len(q)])},
                              {"packed": itensor(pack4(q, order, code), [(len(q) + 1) // 2])}))
    return c


def fp8_round(q, elem, sat):
    """(value, finite) of the Fraction q rounded to the element format."""
    prec, emin, top, has_inf = FP8[elem]
    v = round_float(q, prec, emin)
    if abs(v) > top:
        if sat:
            return (top if q > 0 else -top), True
        return None, False
    return v, True


def fp8_encode(v, elem):
    """The bit pattern of the finite element value v."""
    prec, emin, _, _ = FP8[elem]
    frac_bits = prec - 1
    bias = 1 - emin
    sign = 0x80 if v < 0 else 0
    a = abs(v)
    if a == 0:
        return sign
    if a < Fraction(2) ** emin:
        return sign | int(a / Fraction(2) ** (emin - frac_bits))
    e = floor_log2(a)
    m = int(a / Fraction(2) ** (e - frac_bits)) - (1 << frac_bits)
    return sign | (e + bias) << frac_bits | m


def fp8_case(name, x, rows, cols, elem=E4M3, gran=PER_TENSOR, chan=ROWS, group=0, overflow=SPECIAL, scale=F32, given=None):
    blk, nb = blocks_of(rows, cols, gran, chan, group)
    top = FP8[elem][2]
    if given is None:
        amax = [Fraction(0)] * nb
        for i, v in enumerate(x):
            amax[blk[i]] = max(amax[blk[i]], abs(Fraction(v)))
        scales = [scale_up(a / top, scale) if a > 0 else Fraction(1) for a in amax]
    else:
        scales = [Fraction(s) for s in given]
    codes, xhat = [], []
    for i, v in enumerate(x):
        s = scales[blk[i]]
        p, finite = fp8_round(Fraction(v) / s, elem, overflow == SATURATE)
        if not finite:
            raise ValueError("golden FP8 cases stay finite")
        if p == 0 and math.copysign(1, v) < 0:  # -0 keeps its sign
            codes.append(0x80)
            xhat.append(-0.0)
        else:
            codes.append(fp8_encode(p, elem))
            xhat.append(to_float(p * s))
    cfg = {"rows": rows, "cols": cols, "element": elem, "granularity": gran, "channel": chan,
           "group": group, "overflow": overflow, "scale": scale, "given": given is not None}
    ins = {"x": ftensor(x, [rows, cols])}
    if given is not None:
        ins["given_scales"] = ftensor(given, [nb])
    return case(name, SRC_FP8, cfg, ins, {"codes": itensor(codes, [rows, cols]),
                                          "scales": ftensor([to_float(s) for s in scales], [nb]),
                                          "xhat": ftensor(xhat, [rows, cols])})


def build_fp8():
    r = rng(611)
    c = []
    x = uniform(r, 32, -50, 50)
    c.append(fp8_case("e4m3 per tensor", x, 4, 8))
    c.append(fp8_case("e5m2 per tensor", x, 4, 8, elem=E5M2))
    c.append(fp8_case("e4m3 per row, bfloat16 scales", x, 4, 8, gran=PER_CHANNEL, scale=BF16))
    c.append(fp8_case("e5m2 per column, pow2 scales", x, 4, 8, elem=E5M2, gran=PER_CHANNEL, chan=COLUMNS, scale=POW2))
    c.append(fp8_case("e4m3 groups of 4, binary16 scales", x, 4, 8, gran=PER_GROUP, group=4, scale=B16))
    # Given scale 2: 928 = 2 * 464, the tie of 448 and 480, goes to 448;
    # 960 = 2 * 480 overflows and saturates to 448.
    c.append(fp8_case("e4m3 given scale, ties and saturation", [896.0, 928.0, 960.0, -1000.0, 1.0, -0.0, 2.0 ** -9, 3 * 2.0 ** -10], 1, 8, overflow=SATURATE, given=[2.0]))
    c.append(fp8_case("e5m2 given scale, saturation", [114688.0, 122880.0, -1e9, 2.0 ** -16, 3 * 2.0 ** -17], 1, 5, elem=E5M2, overflow=SATURATE, given=[2.0]))
    c.append(fp8_case("e4m3 subnormal elements", [k * 2.0 ** -10 for k in range(-8, 8)], 2, 8, given=[1.0]))
    c.append(fp8_case("a block of zeros", [0.0] * 4 + x[:4], 2, 4, gran=PER_CHANNEL))
    return c


def build_sqnr():
    r = rng(621)
    c = []
    for name, n, noise in (("small noise", 16, 1e-3), ("equal powers", 8, None), ("large noise", 12, 10.0)):
        x = uniform(r, n)
        if noise is None:
            xhat = [0.0] * n  # noise = signal: 0 dB
        else:
            xhat = [v + noise * e for v, e in zip(x, uniform(r, n))]
        sig = sum(Fraction(v) ** 2 for v in x)
        err = sum((Fraction(a) - Fraction(b)) ** 2 for a, b in zip(x, xhat))
        db = 10 * log10(mpf(sig.numerator) / sig.denominator / (mpf(err.numerator) / err.denominator))
        c.append(case(name, SRC_SQNR, {"n": n}, {"x": ftensor(x, [n]), "xhat": ftensor(xhat, [n])},
                      {"sqnr": ftensor([db], [1])}))
    return c


FAMILIES = families("quant", build_quantise, build_pack4, build_fp8, build_sqnr)
