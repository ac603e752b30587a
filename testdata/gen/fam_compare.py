"""Golden conversions for the compare package: float64 values rounded to
each number format, computed exactly with Python's fractions.Fraction.

The rounding is implemented here again from the definitions, not from the
Go code: IEEE 754-2019 §4.3.1 roundTiesToEven and §7.4 overflow (binary16,
and float32/bfloat16 by the same rules); the OCP 8-bit Floating Point
Specification (OFP8), 2023, §5 for E4M3 and E5M2, non-saturating and
saturating. bfloat16 has no formal standard; it is laid out as binary32
with 7 fraction bits.

Method: x (a float64, so an exact Fraction) is written as n·2^q where q is
the exponent of the last place of the format in the binade of x (the
subnormal quantum below the normal range); n is rounded to an integer by
comparing the exact remainder with 1/2, ties to the even integer. The
result overflows when it exceeds the format's largest finite value. No
floating-point arithmetic touches a value before the final result, which is
exactly a float64.

Each case is one format: the inputs are float64 values chosen to hit every
rule (exact values, midpoints between neighbours and the float64 values on
either side of them, values near the subnormal, normal and overflow
boundaries, ±0, ±Inf, NaN, and random values across the exponent range);
the outputs are the rounded value, the saturated value, their bit patterns
and the ULP at the input.
"""

import math
import random
from fractions import Fraction

from common import case, ftensor, itensor, word

# The words of compare.Format (testdata/gen/vocabulary.json): the config of
# each case names its format by its word, under the key "format".
FLOAT64, FLOAT32, BINARY16, BFLOAT16, E4M3, E5M2 = word(
    "compare.Format", "float64", "float32", "binary16", "bfloat16", "e4m3", "e5m2")

SOURCE_IEEE = ("IEEE 754-2019 §3.6 table 3.5 (formats), §4.3.1 roundTiesToEven, "
               "§7.4 overflow")
SOURCE_OFP8 = ("OCP 8-bit Floating Point Specification (OFP8), 2023: formats E4M3 and "
               "E5M2, conversion with round to nearest ties to even, saturating and "
               "non-saturating overflow")
SOURCE_BF16 = ("bfloat16 (no formal standard): 1 sign, 8 exponent, 7 fraction bits, "
               "bias 127, IEEE 754-2019 rules for rounding and special values")

# word: (exponent bits, fraction bits, IEEE layout, source). These five
# draw their inputs in this order from one generator (seed 20260601).
FORMATS = [
    (FLOAT32, 8, 23, True, SOURCE_IEEE),
    (BINARY16, 5, 10, True, SOURCE_IEEE),
    (BFLOAT16, 8, 7, True, SOURCE_BF16),
    (E4M3, 4, 3, False, SOURCE_OFP8),
    (E5M2, 5, 2, True, SOURCE_OFP8),
]
# binary64 itself, with its own generator (seed 20261202): rounding is the
# identity there, but the case checks the encoding, the ULP and the
# saturation of ±Inf on every kind of float64 value.
FLOAT64_FORMAT = (FLOAT64, 11, 52, True, SOURCE_IEEE)


class Fmt:
    def __init__(self, name, ebits, fbits, ieee):
        self.name, self.ebits, self.fbits, self.ieee = name, ebits, fbits, ieee
        self.width = 1 + ebits + fbits
        self.bias = 2 ** (ebits - 1) - 1
        self.emin = 1 - self.bias
        if ieee:
            self.emax = 2 ** ebits - 2 - self.bias
            top_frac = 2 ** fbits - 1
        else:  # E4M3: all-ones exponent holds numbers; all-ones fraction is NaN
            self.emax = 2 ** ebits - 1 - self.bias
            top_frac = 2 ** fbits - 2
        self.max = (2 ** fbits + top_frac) * Fraction(2) ** (self.emax - fbits)
        self.min_sub = Fraction(2) ** (self.emin - fbits)
        if ieee:
            self.nan_bits = (2 ** ebits - 1) << fbits | 1 << (fbits - 1)
        else:
            self.nan_bits = (2 ** ebits - 1) << fbits | (2 ** fbits - 1)

    def floor_log2(self, a):
        """floor(log2 a) for a positive Fraction, exactly."""
        e = a.numerator.bit_length() - a.denominator.bit_length()
        while Fraction(2) ** e > a:
            e -= 1
        while Fraction(2) ** (e + 1) <= a:
            e += 1
        return e

    def quantum(self, a):
        e = self.emin if a == 0 else max(self.floor_log2(a), self.emin)
        return min(e, self.emax) - self.fbits

    def round(self, x, sat):
        """x a Python float; returns a Python float (exact)."""
        if math.isnan(x):
            return math.nan
        if math.isinf(x):
            if sat:
                return math.copysign(float(self.max), x)
            return x if self.ieee else math.nan
        if x == 0:
            return x
        a = Fraction(abs(x))
        q = max(self.floor_log2(a), self.emin) - self.fbits
        scaled = a / Fraction(2) ** q
        n = scaled.numerator // scaled.denominator
        rem = scaled - n
        if rem > Fraction(1, 2) or (rem == Fraction(1, 2) and n % 2 == 1):
            n += 1
        v = n * Fraction(2) ** q
        if v > self.max:
            if sat:
                v = self.max
            elif self.ieee:
                return math.copysign(math.inf, x)
            else:
                return math.nan
        f = v.numerator / v.denominator  # exact: v is a float64 value
        return math.copysign(f, x)

    def bits(self, v):
        """The pattern of a value of the format (a float)."""
        if math.isnan(v):
            return self.nan_bits
        sign = (1 << (self.width - 1)) if math.copysign(1, v) < 0 else 0
        if v == 0:
            return sign
        if math.isinf(v):
            return sign | (2 ** self.ebits - 1) << self.fbits
        a = Fraction(abs(v))
        if a < Fraction(2) ** self.emin:
            n = a / self.min_sub
            assert n.denominator == 1
            return sign | n.numerator
        e = self.floor_log2(a)
        frac = a / Fraction(2) ** e - 1
        fr = frac * 2 ** self.fbits
        assert fr.denominator == 1
        return sign | (e + self.bias) << self.fbits | fr.numerator

    def ulp(self, x):
        if math.isnan(x):
            return math.nan
        if math.isinf(x):
            return math.inf
        q = self.quantum(Fraction(abs(x)))
        return math.ldexp(1.0, q)

    def values(self):
        """Some positive finite values of the format, ascending: the
        subnormals, and the first, middle and last values of each binade."""
        top = 2 ** self.fbits
        ns = range(1, top) if top <= 1024 else [1, 2, 3, top // 2, top - 2, top - 1]
        out = [n * self.min_sub for n in ns]
        for e in range(self.emin, self.emax + 1):
            top = 2 ** self.fbits if (self.ieee or e < self.emax) else 2 ** self.fbits - 1
            ks = sorted(k for k in {0, 1, 2, top // 2, top - 2, top - 1} if 0 <= k < top)
            for k in ks:
                out.append((2 ** self.fbits + k) * Fraction(2) ** (e - self.fbits))
        return sorted(set(out))


def f64(fr):
    return fr.numerator / fr.denominator


def inputs_for(fm, r):
    xs = [0.0, -0.0, math.inf, -math.inf, math.nan, 1.0, -1.0]
    vals = fm.values()
    # neighbours on the grid, their midpoint, and the float64 values just
    # either side of the midpoint
    picks = sorted(set(r.sample(range(len(vals) - 1), min(40, len(vals) - 1))) | {0, len(vals) - 2})
    for i in picks:
        a, b = vals[i], vals[i + 1]
        m = f64((a + b) / 2)
        xs += [f64(a), m, math.nextafter(m, -math.inf), math.nextafter(m, math.inf)]
    # below the smallest subnormal: half of it is a tie with 0
    h = f64(fm.min_sub / 2)
    xs += [h, -h, math.nextafter(h, math.inf), math.nextafter(h, 0.0), f64(fm.min_sub)]
    # the overflow threshold: Max, the tie above Max, and either side of it
    mx = f64(fm.max)
    t = f64(fm.max + Fraction(2) ** (fm.emax - fm.fbits) / 2)
    xs += [mx, -mx, t, -t, math.nextafter(t, 0.0), math.nextafter(t, math.inf), 2 * t, 1e300, -1e300]
    # random values across the format's exponent range (and a little beyond)
    for _ in range(60):
        e = r.randint(fm.emin - fm.fbits - 3, fm.emax + 2)
        x = math.ldexp(1.0 + r.random(), e)
        xs.append(-x if r.random() < 0.5 else x)
    return xs


def inputs_float64(fm, r):
    """Inputs for binary64: the special values, the values of fm.values()
    (subnormals, and the first, middle and last values of every binade) of
    both signs with their float64 neighbours, the boundaries of the
    subnormal and overflow ranges, and random values across the exponent
    range. Every float64 is a value of the format, so there are no
    midpoints to test."""
    xs = [0.0, -0.0, math.inf, -math.inf, math.nan, 1.0, -1.0]
    vals = fm.values()
    picks = sorted(set(r.sample(range(len(vals)), 40)) | {0, 1, len(vals) - 1})
    for i in picks:
        a = f64(vals[i])
        xs += [a, -a, math.nextafter(a, 0.0), math.nextafter(a, math.inf)]
    mn = f64(fm.min_sub)
    xs += [mn, -mn, 2 * mn, math.ldexp(1.0, fm.emin), math.nextafter(math.ldexp(1.0, fm.emin), 0.0)]
    mx = f64(fm.max)
    xs += [mx, -mx, math.nextafter(mx, 0.0), -math.nextafter(mx, 0.0), 1e300, -1e300]
    for _ in range(60):
        e = r.randint(fm.emin - fm.fbits, fm.emax)
        x = math.ldexp(1.0 + r.random(), e)
        xs.append(-x if r.random() < 0.5 else x)
    return xs


def signed64(b):
    """A 64-bit pattern as the signed integer with the same two's-complement
    bits: the golden loader reads int tensors as int64, and the patterns of
    negative float64 values are at least 2^63."""
    return b - 2 ** 64 if b >= 2 ** 63 else b


def round_case(fm, src, xs):
    rounded = [fm.round(x, False) for x in xs]
    sat = [fm.round(x, True) for x in xs]
    return case(
        "round_" + fm.name, src,
        {"format": fm.name},
        {"x": ftensor(xs, [len(xs)])},
        {"rounded": ftensor(rounded, [len(xs)]),
         "saturated": ftensor(sat, [len(xs)]),
         "bits": itensor([signed64(fm.bits(v)) for v in rounded], [len(xs)]),
         "bits_saturated": itensor([signed64(fm.bits(v)) for v in sat], [len(xs)]),
         "ulp": ftensor([fm.ulp(x) for x in xs], [len(xs)])})


def build():
    name, ebits, fbits, ieee, src = FLOAT64_FORMAT
    fm = Fmt(name, ebits, fbits, ieee)
    cases = [round_case(fm, src, inputs_float64(fm, random.Random(20261202)))]
    r = random.Random(20260601)
    for name, ebits, fbits, ieee, src in FORMATS:
        fm = Fmt(name, ebits, fbits, ieee)
        cases.append(round_case(fm, src, inputs_for(fm, r)))
    return cases


FAMILIES = [("compare", "round", build)]
