"""Golden vectors for the quantised products and caches of package quant.

Everything is computed here again from the definitions of quant/doc.go,
with exact rationals (fractions.Fraction) and, for attention, mpmath at
common.DIGITS digits. Nothing is shared with the Go code.

  * FP8 values (OCP 8-bit Floating Point Specification (OFP8), revision
    1.0, 2023): a bit pattern s.e.m decodes to (-1)^s 2^(e - bias) (1 +
    m/2^M), or (-1)^s 2^(1 - bias) m/2^M when e = 0; E4M3 has bias 7, M =
    3, E5M2 bias 15, M = 2. Only finite patterns are drawn.
  * fp8_matmul: out[i, j] = sum_k (va sa)(vb sb), exact, rounded once to
    the output format (IEEE 754-2019 binary32 or binary16, bfloat16 with 8
    significand bits, or float64), to nearest with ties to even.
  * int8_matmul_to: sa sb sum_k (qa - za)(qb - zb), exact (Jacob et al.
    2018, arXiv 1712.05877, Eq. (3)-(7)), rounded once to the output format.
  * quant_cache: a block's scale is amax / qmax rounded upward to float32
    (qmax 127, 448, 57344); each code is the nearest to x / s, ties to
    even (int8: the nearest integer; FP8: the nearest value of the format).
    An appended per-token cache is the old codes and scales followed by
    the new rows, each quantised with its own scale.
  * quant_attention: softmax attention (Vaswani et al. 2017, arXiv
    1706.03762, Eq. (1); grouped heads in contiguous blocks, Ainslie et al.
    2023, arXiv 2305.13245) on the exactly decoded cache; with the weights
    quantised, c_j = the FP8 value nearest Q e_j, e_j = exp(x_j - max x),
    Q = 448 (E4M3) or 57344 (E5M2), out = (sum_j c_j v_j / Q) / sum_j e_j.
    The Go reference computes e_j in float64; the cases are drawn so that
    no Q e_j lies within 1e-9 (relative) of a boundary between two codes,
    so that the codes are the same however e_j is rounded.

The convention words (int8, e4m3, per-token, ...) are spelled here as the
Go types quant.CacheCode, quant.CacheScaling, quant.ProbCode,
quant.Granularity and compare.Format define them; the Go golden test reads
them with UnmarshalText, which fails on any other word.
"""

from fractions import Fraction

import mpmath
from mpmath import mpf

from common import families, case, ftensor, itensor, rng

SRC_FP8 = "OFP8 rev 1.0 bit layouts; exact sum of products rounded once (IEEE 754-2019 round to nearest, ties to even)"
SRC_INT8 = "Jacob et al. 2018, arXiv 1712.05877, Eq. (3)-(7); the rescaled product rounded once"
SRC_CACHE = "scale amax/qmax rounded upward to float32, codes nearest, ties to even (quant/doc.go); OFP8 rev 1.0"
SRC_ATTN = "Vaswani et al. 2017, arXiv 1706.03762, Eq. (1), on the exactly decoded cache; weights quantised to OFP8 with scale 1/Q"

# (significand bits p including the hidden bit, smallest normal exponent, largest finite value)
FORMATS = {
    "float64": (53, -1022, None),
    "float32": (24, -126, (2 - Fraction(1, 2**23)) * Fraction(2)**127),
    "binary16": (11, -14, Fraction(65504)),
    "bfloat16": (8, -126, (2 - Fraction(1, 2**7)) * Fraction(2)**127),
    "e4m3": (4, -6, Fraction(448)),
    "e5m2": (3, -14, Fraction(57344)),
}
FP8 = {"e4m3": (4, 3, 7), "e5m2": (5, 2, 15)}  # exponent bits, fraction bits, bias
QMAX = {"int8": 127, "e4m3": 448, "e5m2": 57344}


def floor_log2(x):
    """floor(log2 x) of a positive Fraction, exactly."""
    e = x.numerator.bit_length() - x.denominator.bit_length()
    if Fraction(2)**e > x:
        e -= 1
    while Fraction(2)**(e + 1) <= x:
        e += 1
    return e


def round_to(x, fmt, up=False):
    """x (a Fraction) rounded to the format: to nearest, ties to even, or
    upward (up=True, for positive x)."""
    p, emin, top = FORMATS[fmt]
    if x == 0:
        return Fraction(0)
    sign = -1 if x < 0 else 1
    a = abs(x)
    e = max(floor_log2(a), emin)
    ulp = Fraction(2)**(e - p + 1)
    q = a / ulp
    n = q.numerator // q.denominator
    rem = q - n
    if up:
        if rem > 0:
            n += 1
    elif rem > Fraction(1, 2) or (rem == Fraction(1, 2) and n % 2 == 1):
        n += 1
    v = sign * n * ulp
    if top is not None and abs(v) > top:
        raise ValueError("overflow rounding %s to %s" % (x, fmt))
    return v


def fp8_decode(fmt, b):
    eb, mb, bias = FP8[fmt]
    s = -1 if b >> 7 else 1
    e = (b >> mb) & ((1 << eb) - 1)
    m = b & ((1 << mb) - 1)
    if e == 0:
        return s * Fraction(m, 2**mb) * Fraction(2)**(1 - bias)
    return s * (1 + Fraction(m, 2**mb)) * Fraction(2)**(e - bias)


def fp8_encode(fmt, v):
    """The bit pattern of a value of the format (an exact search)."""
    for b in range(256):
        if fp8_finite(fmt, b) and fp8_decode(fmt, b) == v and not (v == 0 and b):
            return b
    raise ValueError("%s is not a value of %s" % (v, fmt))


def fp8_finite(fmt, b):
    eb, mb, _ = FP8[fmt]
    e = (b >> mb) & ((1 << eb) - 1)
    m = b & ((1 << mb) - 1)
    if fmt == "e4m3":
        return not (e == 15 and m == 7)
    return e != 31


def f32(r, lo, hi):
    """A float32 value (as a float) in [lo, hi)."""
    import struct
    v = lo + (hi - lo) * r.random()
    return struct.unpack("f", struct.pack("f", v))[0]


def draw_codes(r, fmt, n, spread=None):
    out = []
    while len(out) < n:
        b = r.randrange(256)
        if fp8_finite(fmt, b) and (spread is None or abs(fp8_decode(fmt, b)) <= spread):
            out.append(b)
    return out


def fp8_case(name, seed, m, k, n, fa, fb, ga, gb, out):
    r = rng(seed)
    ca, cb = draw_codes(r, fa, m * k, 64), draw_codes(r, fb, k * n, 64)
    na = m if ga == "per-channel" else 1
    nb = n if gb == "per-channel" else 1
    sa = [f32(r, 0.25, 2) for _ in range(na)]
    sb = [f32(r, 0.25, 2) for _ in range(nb)]
    y = []
    for i in range(m):
        for j in range(n):
            s = sum(fp8_decode(fa, ca[i * k + p]) * Fraction(sa[i % na]) * fp8_decode(fb, cb[p * n + j]) * Fraction(sb[j % nb])
                    for p in range(k))
            y.append(round_to(s, out))
    cfg = {"format_a": fa, "format_b": fb, "granularity_a": ga, "granularity_b": gb, "out": out}
    ins = {"a": itensor(ca, [m, k]), "b": itensor(cb, [k, n]), "scales_a": ftensor(sa, [na]), "scales_b": ftensor(sb, [nb])}
    return case(name, SRC_FP8, cfg, ins, {"out": ftensor(y, [m, n])})


def build_fp8_matmul():
    return [
        fp8_case("e4m3 per tensor, float64 out", 801, 2, 8, 3, "e4m3", "e4m3", "per-tensor", "per-tensor", "float64"),
        fp8_case("e4m3 x e5m2 per row and column, float32 out", 802, 3, 16, 4, "e4m3", "e5m2", "per-channel", "per-channel", "float32"),
        fp8_case("e5m2 per column, bfloat16 out", 803, 2, 32, 5, "e5m2", "e5m2", "per-tensor", "per-channel", "bfloat16"),
        fp8_case("e4m3 per row, binary16 out", 804, 4, 12, 2, "e4m3", "e4m3", "per-channel", "per-tensor", "binary16"),
    ]


def int8_case(name, seed, m, k, n, asym_a, ga, gb, out):
    r = rng(seed)
    na = m if ga == "per-channel" else 1
    nb = n if gb == "per-channel" else 1
    qa = [r.randrange(-128, 128) for _ in range(m * k)]
    qb = [r.randrange(-128, 128) for _ in range(k * n)]
    za = [r.randrange(-20, 21) for _ in range(na)] if asym_a else []
    sa = [f32(r, 0.001, 0.1) for _ in range(na)]
    sb = [f32(r, 0.001, 0.1) for _ in range(nb)]
    y, acc = [], []
    for i in range(m):
        for j in range(n):
            z = za[i % na] if asym_a else 0
            s = sum((qa[i * k + p] - z) * qb[p * n + j] for p in range(k))
            acc.append(s)
            y.append(round_to(Fraction(sa[i % na]) * Fraction(sb[j % nb]) * s, out))
    cfg = {"symmetry_a": "asymmetric" if asym_a else "symmetric", "granularity_a": ga, "granularity_b": gb, "out": out}
    ins = {"a": itensor(qa, [m, k]), "b": itensor(qb, [k, n]), "scales_a": ftensor(sa, [na]), "scales_b": ftensor(sb, [nb]),
           "zeros_a": itensor(za, [len(za)])}
    return case(name, SRC_INT8, cfg, ins, {"acc": itensor(acc, [m, n]), "out": ftensor(y, [m, n])})


def build_int8_matmul_to():
    return [
        int8_case("per tensor, float32 out", 811, 2, 16, 3, False, "per-tensor", "per-tensor", "float32"),
        int8_case("asymmetric per row x per column, bfloat16 out", 812, 3, 24, 4, True, "per-channel", "per-channel", "bfloat16"),
        int8_case("per column, binary16 out", 813, 2, 40, 2, False, "per-tensor", "per-channel", "binary16"),
    ]


def scale_count(scaling, b, h, n):
    return {"per-tensor": 1, "per-head": b * h, "per-token": b * h * n}[scaling]


def scale_index(scaling, bh, t, n):
    return {"per-tensor": 0, "per-head": bh, "per-token": bh * n + t}[scaling]


def quantise(x, b, h, n, d, code, scaling):
    """codes and scales of quant.QuantiseCache's definition."""
    amax = [Fraction(0)] * scale_count(scaling, b, h, n)
    for i, v in enumerate(x):
        s = scale_index(scaling, i // (n * d), i // d % n, n)
        amax[s] = max(amax[s], abs(Fraction(v)))
    scales = [round_to(a / QMAX[code], "float32", up=True) if a else Fraction(1) for a in amax]
    codes = []
    for i, v in enumerate(x):
        s = scales[scale_index(scaling, i // (n * d), i // d % n, n)]
        t = Fraction(v) / s
        if code == "int8":
            fl = t.numerator // t.denominator
            rem = t - fl
            q = fl + 1 if rem > Fraction(1, 2) or (rem == Fraction(1, 2) and fl % 2) else fl
            q = max(-127, min(127, q))
            codes.append(q & 0xFF)
        else:
            codes.append(fp8_encode(code, round_to(t, code)))
    return codes, [float(s) for s in scales]


def decode(codes, scales, b, h, n, d, code, scaling):
    out = []
    for i, c in enumerate(codes):
        s = Fraction(scales[scale_index(scaling, i // (n * d), i // d % n, n)])
        v = Fraction(c - 256 if c > 127 else c) if code == "int8" else fp8_decode(code, c)
        out.append(v * s)
    return out


def normal(r, n, scale=1.0):
    return [scale * r.gauss(0, 1) for _ in range(n)]


def cache_case(name, seed, b, h, n, d, code, scaling, add=0):
    r = rng(seed)
    x = normal(r, b * h * n * d)
    codes, scales = quantise(x, b, h, n, d, code, scaling)
    cfg = {"batch": b, "heads": h, "len": n, "dim": d, "code": code, "scaling": scaling, "append": add}
    ins = {"x": ftensor(x, [b, h, n, d])}
    outs = {"codes": itensor(codes, [b, h, n, d]), "scales": ftensor(scales, [len(scales)])}
    if add:
        y = normal(r, b * h * add * d)
        nc, ns = quantise(y, b, h, add, d, code, "per-token")
        allc, alls = [], []
        for bh in range(b * h):
            allc += codes[bh * n * d:(bh + 1) * n * d] + nc[bh * add * d:(bh + 1) * add * d]
            alls += scales[bh * n:(bh + 1) * n] + ns[bh * add:(bh + 1) * add]
        ins["new"] = ftensor(y, [b, h, add, d])
        outs["appended_codes"] = itensor(allc, [b, h, n + add, d])
        outs["appended_scales"] = ftensor(alls, [len(alls)])
    return case(name, SRC_CACHE, cfg, ins, outs)


def build_quant_cache():
    return [
        cache_case("int8 per tensor", 821, 1, 2, 3, 4, "int8", "per-tensor"),
        cache_case("e4m3 per head", 822, 2, 2, 3, 4, "e4m3", "per-head"),
        cache_case("e5m2 per token", 823, 1, 2, 4, 3, "e5m2", "per-token"),
        cache_case("int8 per token, two rows appended", 824, 2, 1, 3, 4, "int8", "per-token", add=2),
        cache_case("e4m3 per token, one row appended", 825, 1, 2, 2, 5, "e4m3", "per-token", add=1),
    ]


def attention_case(name, seed, b, hq, hkv, lq, lk, dk, dv, code, scaling, causal=False, prob="none"):
    r = rng(seed)
    for attempt in range(100):
        q = normal(r, b * hq * lq * dk)
        kc, ks = quantise(normal(r, b * hkv * lk * dk), b, hkv, lk, dk, code, scaling)
        vc, vs = quantise(normal(r, b * hkv * lk * dv), b, hkv, lk, dv, code, scaling)
        kd = [mpf(v.numerator) / v.denominator for v in decode(kc, ks, b, hkv, lk, dk, code, scaling)]
        vd = [mpf(v.numerator) / v.denominator for v in decode(vc, vs, b, hkv, lk, dv, code, scaling)]
        out, robust = [], True
        tau = 1 / mpmath.sqrt(dk)
        for bb in range(b):
            for h in range(hq):
                kh = bb * hkv + h // (hq // hkv)
                for i in range(lq):
                    hi = min(lk, i + lk - lq + 1) if causal else lk
                    if hi <= 0:
                        out += [mpf(0)] * dv
                        continue
                    qi = q[((bb * hq + h) * lq + i) * dk:][:dk]
                    x = [tau * mpmath.fsum(mpf(qi[c]) * kd[(kh * lk + j) * dk + c] for c in range(dk)) for j in range(hi)]
                    m = max(x)
                    e = [mpmath.exp(xj - m) for xj in x]
                    l = mpmath.fsum(e)
                    w = e
                    if prob != "none":
                        Q = QMAX[prob]
                        w = []
                        for ej in e:
                            t = Q * ej
                            tf = Fraction(mpmath.nstr(t, 45))  # 45 digits: far finer than the margin below
                            c = round_to(tf, prob)
                            # the distance to the nearest boundary between two codes
                            p, emin, _ = FORMATS[prob]
                            ulp = Fraction(2)**(max(floor_log2(tf), emin) - p + 1)
                            frac = (tf / ulp) % 1
                            if abs(frac - Fraction(1, 2)) < Fraction(1, 10**9) * (tf / ulp):
                                robust = False
                            w.append(mpf(c.numerator) / c.denominator / Q)
                    for c in range(dv):
                        out.append(mpmath.fsum(w[j] * vd[(kh * lk + j) * dv + c] for j in range(hi)) / l)
        if robust:
            break
    else:
        raise SystemExit("%s: no draw keeps the weights away from code boundaries" % name)
    cfg = {"batch": b, "heads_q": hq, "heads_kv": hkv, "lq": lq, "lk": lk, "dk": dk, "dv": dv,
           "code": code, "scaling": scaling, "causal": causal, "prob": prob}
    ins = {"q": ftensor(q, [b, hq, lq, dk]), "k_codes": itensor(kc, [b, hkv, lk, dk]), "k_scales": ftensor(ks, [len(ks)]),
           "v_codes": itensor(vc, [b, hkv, lk, dv]), "v_scales": ftensor(vs, [len(vs)])}
    return case(name, SRC_ATTN, cfg, ins, {"out": ftensor(out, [b, hq, lq, dv])})


def build_quant_attention():
    return [
        attention_case("int8 per tensor", 831, 1, 2, 2, 2, 5, 4, 3, "int8", "per-tensor"),
        attention_case("e4m3 per head, grouped heads", 832, 2, 4, 2, 2, 6, 4, 4, "e4m3", "per-head"),
        attention_case("e5m2 per token, causal", 833, 1, 2, 1, 3, 5, 4, 2, "e5m2", "per-token", causal=True),
        attention_case("int8 per token, weights e4m3", 834, 1, 1, 1, 2, 7, 4, 3, "int8", "per-token", prob="e4m3"),
        attention_case("e4m3 per head, weights e5m2, causal", 835, 1, 2, 1, 2, 6, 4, 4, "e4m3", "per-head", causal=True, prob="e5m2"),
    ]


FAMILIES = families("quant", build_fp8_matmul, build_int8_matmul_to, build_quant_cache, build_quant_attention)
