#!/usr/bin/env python3
"""Golden data for internal/elem: correctly rounded float64 values of the
elementary functions, from mpmath.

    /usr/bin/python3 testdata/gen/elem.py testdata/elem

A standalone script (it shares nothing with gen.py and its families). For
each function it writes DIR/<function>.txt: a few comment lines starting
with '#', then one case a line,

    <x> <f(x)>            (pow: <x> <y> <x**y>)

every number the 16 hexadecimal digits of its IEEE 754 binary64 bit
pattern (NaN is written 7ff8000000000000; a reader should accept any NaN).

How a value is made:
  * inputs are float64 values before any computation (built from random
    bits of a seeded random.Random, or float arithmetic, or fixed lists);
    mpf(x) of a float is exact;
  * the function is evaluated with mpmath at 50 significant digits and the
    result rounded once to the nearest float64, ties to even, gradual
    underflow and overflow included (round_f64; mpmath's float()
    truncates and is not used);
  * the rounding is checked as a rounding test (Ziv 1991): the value is
    taken as known to within 10^-45 of itself, and when that interval
    holds a rounding boundary the evaluation is repeated at 100, 200 and
    400 digits. The few inputs that need it are the hard-to-round cases;
    the number that needed more than 50 digits is printed on stderr and
    written in each file's header;
  * pow results that are exact dyadic rationals (the only values that can
    lie exactly on a rounding boundary) are computed in exact rational
    arithmetic.

Besides dense deterministic samples of the domains the kernels use, each
file holds special values and published hard-to-round inputs: worst cases
for correct rounding in double precision (Lefèvre & Muller 2001, "Worst
cases for correct rounding of the elementary functions in double
precision"; Sibidanov, Zimmermann & Glondu 2022, Proc. 29th IEEE Symposium on
Computer Arithmetic, pp. 33-40),
the double nearest a multiple of pi/2 (6381956970095103 * 2**797), and pow
cases with 102 to 153 identical bits after the rounding bit.
"""

import math
import os
import random
import struct
import sys
from fractions import Fraction

import mpmath
from mpmath import mp, mpf

H = float.fromhex
DIGITS = 50
LADDER = (50, 100, 200, 400)
escalated = {}


def bits(x):
    if x != x:
        return "7ff8000000000000"
    return "%016x" % struct.unpack("<Q", struct.pack("<d", x))[0]


def from_bits(b):
    return struct.unpack("<d", struct.pack("<Q", b))[0]


def round_f64(v):
    """The float64 nearest the mpf (or Fraction) v, ties to even, with
    gradual underflow and overflow to infinity."""
    if isinstance(v, Fraction):
        if v == 0:
            return 0.0
        try:
            return float(v)  # CPython's int/int division is correctly rounded
        except OverflowError:
            return math.inf if v > 0 else -math.inf
    if mpmath.isinf(v):
        return math.inf if v > 0 else -math.inf
    sign, man, exp, bc = v._mpf_
    if man == 0:
        return -0.0 if sign else 0.0
    e = exp + bc  # 2^(e-1) <= |v| < 2^e
    if e < -1075:  # below half the smallest subnormal
        return -0.0 if sign else 0.0
    if e > 1025:
        return -math.inf if sign else math.inf
    q = max(e - 53, -1074)  # exponent of the last place
    shift = q - exp
    if shift <= 0:
        m = man << -shift
    else:
        m = man >> shift
        rem = man & ((1 << shift) - 1)
        half = 1 << (shift - 1)
        if rem > half or (rem == half and m & 1):
            m += 1
    if m == 0:
        return -0.0 if sign else 0.0
    if m.bit_length() + q > 1024:
        return -math.inf if sign else math.inf
    x = math.ldexp(m, q)  # exact: m has at most 54 bits
    return -x if sign else x


def correctly_rounded(name, fn, *args):
    """fn(*mpf args) rounded to float64, with the rounding test above."""
    for dps in LADDER:
        with mp.workdps(dps):
            v = fn(*[mpf(a) for a in args])
            if mpmath.isinf(v) or v == 0:
                return round_f64(v)
            tol = abs(v) * mpf(10) ** (-(dps - 5))
            lo, hi = round_f64(v - tol), round_f64(v + tol)
        if lo == hi and math.copysign(1, lo) == math.copysign(1, hi):
            if dps > DIGITS:
                escalated[name] = escalated.get(name, 0) + 1
            return lo
    raise SystemExit("%s%r: no rounding decided at %d digits" % (name, args, LADDER[-1]))


# ---------------------------------------------------------------- samples


def rand_normal(r, emin, emax, sign=None):
    """A float64 with exponent uniform in [emin, emax] and random mantissa
    bits: log-uniform over those binades."""
    e = r.randint(emin, emax)
    m = r.getrandbits(52)
    s = r.getrandbits(1) if sign is None else (1 if sign < 0 else 0)
    return from_bits((s << 63) | ((e + 1023) << 52) | m)


def rand_subnormal(r, sign=None):
    s = r.getrandbits(1) if sign is None else (1 if sign < 0 else 0)
    return from_bits((s << 63) | (r.getrandbits(52) or 1))


def uniform(r, n, lo, hi):
    return [lo + (hi - lo) * r.random() for _ in range(n)]


def neighbours(x, k=2):
    """x and the k float64 either side of it."""
    b = struct.unpack("<q", struct.pack("<d", x))[0]
    return [struct.unpack("<d", struct.pack("<q", b + d))[0] for d in range(-k, k + 1)]


def hexes(text):
    return [float.fromhex(t) for t in text.split()]


# Published hard-to-round inputs (a selection of each list).
HARD = {
    "exp": hexes("""
        0x1.0122ef37212ebp-1 0x1.00d48a707b93ep-1 0x1.012c061237773p-1 0x1.0036671ff87efp-1
        0x1.0303c5638675fp-1 0x1.0582220d9645ep-1 0x1.091b18c62db66p-1 0x1.0cf99b01aecb7p-1
        0x1.1058a8cd8e069p-1 0x1.13636533a411bp-1 0x1.18b6279561da9p-1 0x1.1db4b229c26a4p-1
        0x1.25c2f230921aap-1 0x1.2af6d81edd6d1p-1 0x1.30d96abe653ffp-1 0x1.38542927a91ffp-1
        0x1.3ebcb976b1475p-1 0x1.4595f711ccf3fp-1 0x1.4c457171e6acap-1 0x1.54fc31f3f7fa4p-1
        0x1.5ca0a39e6dc16p-1 0x1.64211416d165cp-1 0x1.6e907dbde1469p-1 0x1.767a31a34d2a7p-1
        0x1.7ecc4aa4f4b23p-1 0x1.8803036574923p-1 0x1.933224c726293p-1 0x1.9e4e63c1b1276p-1
        0x1.a60e433867612p-1 0x1.af2fa21fbead8p-1 0x1.b888d80fb6b14p-1 0x1.c43682353601ep-1
        0x1.cf22cdc4bcda7p-1 0x1.d812635ec82eap-1 0x1.e2e35f909c12ep-1 0x1.ece617d86b815p-1
        0x1.f75f3374cc00ep-1 0x1.fedc746ddf8fap-1 0x1.008eb56314daap+0 0x1.07c846fe97a64p+0
        0x1.0f67c115ce1dep+0 0x1.16d25c4f94ea1p+0 0x1.1e28e6231bb87p+0 0x1.27159d988530ap+0
        0x1.2f2fccf23ce9dp+0 0x1.35abff3cf7fc5p+0 0x1.3d0a24603e7f7p+0 0x1.45e82d4da379dp+0
        0x1.4df6c48246aep+0 0x1.564a134a99a33p+0 0x1.5f4dc1b98132p+0 0x1.673ae84d4d733p+0
        0x1.6f1b50dc653dbp+0"""),
    "expm1": hexes("""
        0x1.00091a4a0dae5p+2 0x1.000bffb8030a7p-39 0x1.002881d0cbecfp-12 0x1.006652fb6febep-3
        0x1.0076d13ab9d18p+4 0x1.00ada891b730cp+0 0x1.011dd7222b8d2p+1 0x1.015f22aac6d3dp+3
        0x1.01e5ceb2c761ep+5 0x1.02e473c781d6ep+6 0x1.03e7aea5af7fap-2 0x1.03f81f636b806p-47
        0x1.046bea8fccaebp+4 0x1.05bdb1f88dfc3p+5 0x1.07e0f66afed03p-48 0x1.08f61e2cdac9ap+6
        0x1.099aa4abe33dcp+0 0x1.0a64abf09dc3ap+5 0x1.0c7289dfa6823p-2 0x1.0d0fd1d8858a6p-1
        0x1.0f039371d9921p+5 0x1.0f876ccdf6cd5p-49 0x1.10847f8e2bfa9p+2 0x1.1152145faccf9p+4
        0x1.13d2f0e235b3p+0 0x1.16f8334644df4p-48 0x1.191ed705112ebp+0 0x1.1d1de3abfe921p+5
        0x1.1e3779b97f4ap-50 0x1.1e6ab0031ddb6p+4 0x1.217a72b274cd7p+5 0x1.25c2c28b7a5cp+4
        0x1.27a0cf692f7d4p+0 0x1.28f490f4d1308p+4 0x1.2baf996c46064p+5 0x1.2c2fc595456a2p-49
        0x1.2d282c4afc33ep+5 0x1.2e10d90b10786p+5 0x1.2ea1220b0c15bp+5 0x1.3069961a643eep+4
        0x1.31749d4012b58p+4 0x1.31201f7161d92p+0"""),
    "log": hexes("""
        0x1.a6ae5142326b5p+0 0x1.b072ab04ee9bfp+0 0x1.c877cba59d0acp+0 0x1.1e852e6951306p+1
        0x1.dafdb40362537p+0 0x1.efcbe699decc2p+0 0x1.ac032a8d2ec23p+0 0x1.f702d109768c2p+0
        0x1.000976581ce4ep+1 0x1.09a5847e980edp+1 0x1.24dea21900258p+1 0x1.3fa2991e8c0c2p+1
        0x1.547de187239f2p+1 0x1.cb37a42d3e479p+0 0x1.55ec2afc881bbp+1 0x1.967e2d739876bp+1
        0x1.dacc581d105a4p+1 0x1.ffcd1f1e0c16fp+1 0x1.2d26e1ebebee6p+2 0x1.6cda8bc1f5cadp+1
        0x1.a81defc27bf8ap+1 0x1.d327d1ff03239p+1 0x1.3c5cfbe22af51p+2 0x1.94a11eb4a79dfp+2
        0x1.6de110c79fac5p+2 0x1.cba86687034f4p+2 0x1.39e3e05fe5f35p+3 0x1.2410dce04f88cp+3
        0x1.879c73969a24ap+3 0x1.0af4fba7063b8p+4 0x1.37a0f7178fb6p+4 0x1.84a5538257275p+4
        0x1.ab6aca90ccf87p+4 0x1.de4dca800394fp+4 0x1.0bb1747d46314p+5 0x1.762ebeb6ac83p+5
        0x1.ad5af3de769bap+5 0x1.186e96b6dca56p+6 0x1.b511b4be9cc84p+6 0x1.08fa8af9c8957p+7
        0x1.3eaf35955d798p+7 0x1.15956b273c365p+8 0x1.cc9952467a0b3p+8 0x1.07598f4a78f02p+9
        0x1.e4fd30c6d986ap+9 0x1.38a3dbb5a6a4fp+10 0x1.909c5a9c3eb66p+10 0x1.1e88509f96c39p+11
        0x1.6f6cc943605c5p+11 0x1.a455a70c31d8p+13 0x1.467cb238723a1p+15 0x1.1c9c4b63cad4dp+17
        0x1.51335f6f0989cp+18 0x1.7d822b508bb3bp+20 0x1.5106c15d1fc3fp+22 0x1.a04c79af61dcep+26
        0x1.70945ecdc0194p+28 0x1.187473f1019f6p+31 0x1.69f42533c22b5p+32 0x1.8e27f4f0e6c74p+34
        0x1.deab16bf0cba3p+37 0x1.b61a3bd0deacp+39 0x1.f432ceabc9bfp+41 0x1.a6004162f2b8cp+45"""),
    "log1p": hexes("""
        0x1.94d915fa88734p-51 0x1.010634736a28p+14 -0x0.1bc6879ea14c5p-1022 0x0.02efe618534fbp-1022
        0x1.0000ffff82ab3p-37 0x1.002e52063d1b8p-23 0x1.003ff5333549cp-11 0x1.0041f934a35b2p+5
        0x1.006ea7f7cb461p-9 0x1.0092084ce40eap+27 0x1.00c3d4acbba8ap-1 0x1.00fad16d4997dp-5
        0x1.01033ffc76c24p+14 0x1.01501f8756111p+35 0x1.01867637cbd03p+4 0x1.0209c6fa7e358p-1
        0x1.02653dbebce5dp-6 0x1.0274751df8c4ep+11 0x1.031246d60053bp+34 0x1.039d33161ce58p+77
        0x1.03dd73a3b7adcp+16 0x1.0402e125922c2p+1 0x1.042ba9de75289p+77 0x1.05af9c7ab5cb1p+48
        0x1.069e7e2b2dfebp+50 0x1.06adf9df65bf9p+0 0x1.07d21ef062608p+0 0x1.0a1636f8aeb6ep+93
        0x1.0de56f7b56c5cp+85 0x1.10539c6b56392p+56 0x1.17730e99cd1a2p+63 0x1.27773e7108461p+61
        0x1.297b8bc8b2d6p+67 0x1.2b133e33c7152p+70 0x1.2c342ad3773b3p+78 0x1.2495616956132p-1"""),
    "sin": hexes("""
        0x1.005023d32fee5p+1 0x1.00874a5f9fc33p-13 0x1.009ee184a02e7p-8 0x1.0102947e7003bp-3
        0x1.0192deafac33fp+0 0x1.034c2318b3f2dp+0 0x1.039d88c480fccp-22 0x1.04394261cffa6p-1
        0x1.043e268ba402ap+1 0x1.057e5c72ad274p+0 0x1.06800e629d672p-23 0x1.07d5978b896fcp+0
        0x1.07edc73037d32p+1 0x1.093026e62d889p+1 0x1.0ba1b997d2e32p+0 0x1.0e9f8bb095163p+1
        0x1.104614176463ep+0 0x1.1065078d33361p+1 0x1.10b4048d92a67p+1 0x1.1398b2271821p+0
        0x1.164149539c81dp+1 0x1.184a0aa58191dp-24 0x1.1acbd0dc6d5c2p-1 0x1.1da5d5a23306dp+0
        0x1.1fa6b462b1c81p+1 0x1.23f40dccdef72p+0 0x1.2645db00c9b84p+1 0x1.273a233829bc6p+0
        0x1.276d5c5c9df2cp+1 0x1.29b798b1566fcp+1 0x1.2daf8e028c6c9p+0 0x1.2e8439fd922dep+1
        0x1.2f2cc9bd434fbp+1 0x1.306705e372fb7p+1 0x1.30c7efbee12acp-24 0x1.31a22ec73dd62p+1
        0x1.34b19761f1f4bp+0 0x1.36bd8001bb569p+1 0x1.3aff240e7a743p+1 0x1.3b727649b9393p+0
        0x1.407f8eb75c76p+1 0x1.45dd7c26e54b9p-24 0x1.46552b86d2836p+1 0x1.49a4334fee0f3p+1
        0x1.4bcc0c8872f76p+1 0x1.4e644e05f6f29p+1 0x1.5473f39abf1e6p+0 0x1.553151fbcd204p+0
        0x1.55b92c74d29cbp+1 0x1.57006c1b011c8p+0 0x1.57d2baabad457p+1 0x1.58868e3115187p-24
        0x1.5c68997fe1bdap+0 0x1.5d9b876341713p+1 0x1.5e5fe5d033da6p+0 0x1.695b9b149a438p-24
        0x1.6ebdedd37ba17p+1 0x1.6f623e27cdb79p-1"""),
    "cos": hexes("""
        0x1.0009effd4bedap-12 0x1.00147eec5cfa5p+0 0x1.0066bbcf2cf68p-7 0x1.00786b0bf421p-2
        0x1.00ff807f60deep-23 0x1.0155dcbae56fdp-2 0x1.0203b71ba100fp-1 0x1.03f81f636b80cp-24
        0x1.062a2f8ff7e5p+0 0x1.065be6e6ee03cp-1 0x1.0813eb8986375p-1 0x1.090379dc5cdf1p-2
        0x1.0bbb307acafdbp-24 0x1.0bfbedfb16285p+0 0x1.0c86069092edcp+0 0x1.0d726986bc5f6p-1
        0x1.0f16c6f632009p+0 0x1.0f876ccdf6cd6p-25 0x1.0fb6b9c0eec57p-1 0x1.11a08114c99bcp+0
        0x1.11ba803f22334p-1 0x1.146de9a66c2e3p+0 0x1.1baf00b2f6b01p-1 0x1.1c2d9650ac5f2p+0
        0x1.1e400c741b302p+0 0x1.1f7ef6ffd562p+0 0x1.21745c6355307p-1 0x1.217532b8faae7p+0
        0x1.21c6f0699a3fdp+0 0x1.22b826533dc99p+0 0x1.24844c6d40d56p-1 0x1.273ebd3a4814fp-1
        0x1.28b84886ff618p-1 0x1.2b0899b756771p+0 0x1.2c2fc595456a4p-25 0x1.2d6b3e43fd3c7p-1
        0x1.2e0ae5857311dp+0 0x1.30bed7646b2aep+0 0x1.3561f5bf797bcp+0 0x1.35c1fe2237f1cp+0
        0x1.3aca9ac4d718dp+0 0x1.3b5014b5ccae6p+0 0x1.3dfd2710f8618p+0 0x1.41bf5603f5ddp+0
        0x1.45c1a864fbec2p+0 0x1.465655f122ff4p-25 0x1.48228de97ee2p-1 0x1.4fdb840109affp-1
        0x1.5193f76d73c29p-1 0x1.522e45e58fbbep+0 0x1.5504c91eb9e32p+0 0x1.5b504e3a7cb6ap-1
        0x1.5e8add236a58dp-25 0x1.5fb9cf33f5119p-1 0x1.64af4ea49404p+0 0x1.673b9fe297c3ep+0
        0x1.6b87ec3ad8729p+0 0x1.6b8a6273d7c21p+0"""),
    "tanh": hexes("""
        0x1.000b47bdb383fp-9 0x1.004524207fad9p-3 0x1.00a0f3cf999acp+2 0x1.015bdb2761717p+4
        0x1.015cee8026857p+1 0x1.01885ae3c818ap+0 0x1.01ae2526d9494p+2 0x1.02a3ad2ef6f49p-24
        0x1.0305db6b8debcp+2 0x1.036c04e3850f6p+1 0x1.0413eefc9a1c3p+1 0x1.0481dc5df327dp-1
        0x1.0487b6ec9ca7ap+4 0x1.055473494e40dp+0 0x1.0700e7095831cp+1 0x1.0869134bd9375p+1
        0x1.093bb419995c8p+0 0x1.097519f44243fp+3 0x1.0a402fcc79292p-25 0x1.0a79cc2a648f4p+1
        0x1.0b15623004e51p+3 0x1.0cb8a1d5d7dfbp+0 0x1.0d08e941d6338p+0 0x1.0d41eb28cc1cfp+4
        0x1.0d718c73ff568p+4 0x1.10ed147e7a9ebp+4 0x1.122eff025fabep+4 0x1.13ad1fc9688ecp+4
        0x1.1a51ad6ff61d2p+4 0x1.1f682eb743999p+4 0x1.216adfdad76f7p+4 0x1.241bf835f9d6p+4
        0x1.283223f49a1b1p+4 0x1.30fc1931f09c8p+4 0x1.3bacd6561ff5ap-25 0x1.61246d6ad9aecp-25
        0x1.2f92275748a2ap+3 0x1.3516b4baeec59p+3 0x1.5813a86045f07p+3 0x1.5e6ddde371b5dp+3"""),
    "cosh": hexes("""
        0x1.003c1d82e8bb4p+0 0x1.0051f2e2330acp-19 0x1.00bf99263dd9bp-1 0x1.013065f3561b2p+4
        0x1.02752435dffap+4 0x1.03fdf3603656dp+5 0x1.04414c3c17d28p+2 0x1.04ab02ec6b6ap+5
        0x1.04afd0e313b1cp+5 0x1.0623b7ab62a48p+0 0x1.064514903747ap+4 0x1.06e8a8a4b2243p+5
        0x1.07e0f66afed05p-24 0x1.088beface97a9p+5 0x1.099d68c1179c4p+2 0x1.0a27cda6817b6p+1
        0x1.0c6da0b04a388p+4 0x1.0cf142c3b7d23p+3 0x1.0dc16b775ee93p+4 0x1.112ac20b57e67p+5
        0x1.136e76bac0f6bp+4 0x1.15c856c2b1239p+4 0x1.16fee63d7fe3ep+4 0x1.1d1de3abfe921p+5
        0x1.1e3779b97f4a1p-25 0x1.217a72b274cd7p+5 0x1.29b22636accddp+5 0x1.2e67e3aa5f823p+5
        0x1.303a829e5a25fp+5 0x1.3135cb668f12p+5 0x1.369c7577fe63bp+5 0x1.394be51542d1dp+5
        0x1.3c3fd72ac1549p+5 0x1.3efde0715f202p+5 0x1.4122fd816823bp+5 0x1.4a0983d8ef1c4p+5
        0x1.4b3ded710bd0fp+5 0x1.4c799d09d08cap+5 0x1.4fdd2e7d0db6ep+5 0x1.58be0ec315db6p+5
        0x1.3fffffffffffep-24 0x1.4p-24 0x1.52a7fa9d2f8e4p-25"""),
    "erf": hexes("""
        0x1.6d5ad4307dd52p-7 0x1.037b548d9d7a6p-61 0x1.059a3d07be48cp-61 0x1.015c6c137cacp-61
        0x1.07bb029a8d96bp-61 0x1.09d9eb14ae651p-61 0x1.0be80db0acb76p-61 0x1.1020475ae2d57p-61
        0x1.2106c54dc6cc6p-61 0x1.3a52880100021p-61 0x1.5188b3b580e73p-61 0x1.7ff150ed25b25p-61
        0x1.9942aaea6a66bp-61 0x1.b29404e7af1b1p-61"""),
    "erfc": hexes("""
        0x1.c5bf891b4ef6bp-55 0x1.c5bf891b4ef80p-55 0x1.c5bf891b4efa3p-55 0x1.c5bf891b4f00fp-55
        0x1.c5bf891b4f1a0p-55 0x1.c5bf891b4f236p-55 -0x1.167295293019p-32 -0x1.0ddfacee4ee7cp-32
        -0x1.fff82b536c568p-31 -0x1.e8cf053382054p-31 -0x1.c4567eba68fa1p-31 -0x1.9e5aa218cdd72p-31
        -0x1.76bb2820a5c52p-31 -0x1.6b4ff37a19a8ep-31"""),
    "pow": [
        (float.fromhex("0x1.ffffffffffffcp-1"), float.fromhex("0x1.fffffffffffffp-2")),
        (float.fromhex("0x1.ffffffffffffcp-1"), float.fromhex("-0x1.ffffffffffffdp-2")),
        (float.fromhex("0x1.ffffffffffffp-1"), float.fromhex("-0x1.ffffffffffff6p-3")),
        (float.fromhex("0x1.ffffffffffff8p-1"), float.fromhex("-0x1.ffffffffffffbp-3")),
    ],
}
HARD["log2"] = HARD["log"]


def signs(xs):
    return xs + [-x for x in xs]


def sample_exp(r):
    xs = uniform(r, 1500, -745.2, 709.8)
    xs += uniform(r, 600, -10.0, 10.0)
    xs += [rand_normal(r, -60, 0) for _ in range(600)]
    xs += uniform(r, 60, 709.0, 709.79) + uniform(r, 60, -745.2, -708.0)
    for x in (709.782712893384, -745.1332191019411, -708.3964185322641, -744.4400719213812):
        xs += neighbours(x)
    xs += signs(HARD["exp"])
    xs += [0.0, -0.0, 5e-324, -5e-324, H("0x1p-1022"), 1.0, -1.0, 1e-300, 709.79, 710.0,
           -745.14, -746.0, math.inf, -math.inf, math.nan]
    return xs


def sample_expm1(r):
    xs = signs([rand_normal(r, -60, 9) for _ in range(700)])
    xs += uniform(r, 800, -40.0, 40.0)
    xs += uniform(r, 200, -0.36, 0.36)
    xs += signs(HARD["expm1"])
    xs += [0.0, -0.0, 5e-324, -5e-324, H("0x1p-54"), -H("0x1p-54"), 1e-300, -38.0, -37.0,
           709.78, 710.0, -1000.0, math.inf, -math.inf, math.nan]
    return xs


def sample_log(r):
    xs = [rand_normal(r, -1022, 1023, 1) for _ in range(1200)]
    xs += [rand_subnormal(r, 1) for _ in range(60)]
    xs += [1 + d for d in signs([rand_normal(r, -53, -1, 1) for _ in range(400)])]
    xs += uniform(r, 500, 0.5, 2.0)
    xs += [x for x in HARD["log"]]
    xs += [math.ldexp(1, k) for k in range(-1074, 1024, 37)]
    xs += neighbours(1.0, 4) + neighbours(2.0, 2) + neighbours(0.5, 2)
    xs += [5e-324, H("0x1p-1022"), 1.7976931348623157e308, 0.0, -0.0, -1.0, -5e-324, math.inf,
           -math.inf, math.nan, 10.0, 10000.0, 500000.0]
    return xs


def sample_log1p(r):
    xs = signs([rand_normal(r, -60, -1) for _ in range(700)])
    xs += [rand_normal(r, 0, 1023, 1) for _ in range(500)]
    xs += [-1 + rand_normal(r, -53, -2, 1) for _ in range(200)]
    xs += uniform(r, 400, -0.999, 3.0)
    xs += HARD["log1p"] + [-x for x in HARD["log1p"] if abs(x) < 0.5]
    xs += [0.0, -0.0, 5e-324, -5e-324, 1e-300, -1.0, -1.0000000000000002, -2.0, 1.0, -0.5,
           1.7976931348623157e308, math.inf, -math.inf, math.nan] + neighbours(-1.0, 2)[3:]
    return xs


def sample_log2(r):
    xs = [rand_normal(r, -1022, 1023, 1) for _ in range(800)]
    xs += [rand_subnormal(r, 1) for _ in range(40)]
    xs += [1 + d for d in signs([rand_normal(r, -53, -1, 1) for _ in range(300)])]
    xs += uniform(r, 300, 0.5, 2.0)
    xs += HARD["log2"][::2]
    xs += [math.ldexp(1, k) for k in range(-1074, 1024, 13)]
    xs += neighbours(1.0, 3) + neighbours(2.0, 2)
    xs += [0.0, -0.0, -1.0, math.inf, -math.inf, math.nan, 10.0, 3.0]
    return xs


def sample_trig(r, name):
    xs = uniform(r, 1800, -1e4, 1e4)
    xs += uniform(r, 400, -4.0, 4.0)
    xs += signs([rand_normal(r, -40, -1) for _ in range(150)])
    xs += signs([rand_normal(r, 14, 1023) for _ in range(100)])
    # the float64 nearest k*pi/2 for random k, and their neighbours
    with mp.workdps(60):
        for _ in range(40):
            k = r.randint(1, 10 ** 6)
            xs += neighbours(round_f64(k * mp.pi / 2), 1)
    xs += [6381956970095103 * 2.0 ** 797, -6381956970095103 * 2.0 ** 797, 1e22, 1e300,
           1.7976931348623157e308, H("0x1p1023"), H("0x1p19"), H("0x1p20"), 0.7853981633974483,
           1.5707963267948966, 3.141592653589793, 4.71238898038469, 6.283185307179586]
    xs += signs(HARD[name])
    xs += [0.0, -0.0, 5e-324, -5e-324, H("0x1p-27"), 1e-300, math.inf, -math.inf, math.nan]
    return xs


def sample_tanh(r):
    xs = uniform(r, 1200, -25.0, 25.0)
    xs += signs([rand_normal(r, -40, 4) for _ in range(400)])
    xs += signs(HARD["tanh"])
    xs += [0.0, -0.0, 5e-324, -5e-324, H("0x1p-27"), 19.0, 22.0, 23.0, math.inf, -math.inf,
           math.nan]
    return xs


def sample_cosh(r):
    xs = uniform(r, 1000, -711.0, 711.0)
    xs += uniform(r, 300, -40.0, 40.0)
    xs += signs([rand_normal(r, -40, 3) for _ in range(300)])
    xs += neighbours(710.4758600739439, 2)
    xs += signs(HARD["cosh"])
    xs += [0.0, -0.0, 5e-324, H("0x1p-27"), 710.0, 710.5, 711.0, math.inf, -math.inf, math.nan]
    return xs


def sample_erf(r):
    xs = uniform(r, 1500, -6.0, 6.0)
    xs += signs([rand_normal(r, -1022, 0) for _ in range(250)])
    xs += [rand_subnormal(r) for _ in range(30)]
    xs += uniform(r, 200, -0.0625, 0.0625)
    # the erfc table nodes and interval ends
    xs += [k / 32 for k in range(0, 200)]
    xs += signs(HARD["erf"])
    xs += [0.0, -0.0, 5e-324, -5e-324, 5.9, 5.92, 5.93, 6.0, math.inf, -math.inf, math.nan]
    return xs


def sample_erfc(r):
    xs = uniform(r, 2200, -6.0, 27.3)
    xs += uniform(r, 200, 26.0, 27.3)
    xs += signs([rand_normal(r, -60, -1) for _ in range(200)])
    xs += [k / 16 for k in range(-96, 440)]
    xs += HARD["erfc"]
    xs += [0.0, -0.0, 5e-324, -5e-324, 27.2, 27.22, 27.23, 27.3, 28.0, -27.0, math.inf, -math.inf,
           math.nan]
    return xs


def sample_pow(r):
    cases = []
    # base in [1, 1e6] (log-uniform), exponent in [-1, 1]
    for _ in range(1400):
        x = math.exp(r.random() * math.log(1e6))
        cases.append((x, -1 + 2 * r.random()))
    # rotary inverse frequencies base**(-2i/d)
    for base in (10000.0, 500000.0, 1000000.0, 10000.0 * 8, 10000.0 * 32.0 ** (128 / 126)):
        for d in (32, 64, 128, 256):
            for i in range(d // 2):
                cases.append((base, -2 * i / d))
                cases.append((base, 2 * i / d))
    # wide ranges, results overflowing and underflowing
    for _ in range(400):
        cases.append((rand_normal(r, -1022, 1023, 1), -60 + 120 * r.random()))
    for _ in range(100):
        cases.append((1 + (r.random() - 0.5) * 1e-6, r.choice([-1, 1]) * math.exp(r.random() * 40)))
    # negative bases with integral exponents
    for _ in range(100):
        cases.append((-math.exp(r.random() * 20 - 10), float(r.randint(-40, 40))))
    # exact results and exact midpoints
    for _ in range(30):
        m = r.getrandbits(26) | (1 << 26) | 1  # 27-bit odd: m*m has 53 or 54 bits
        cases.append((float(m), 2.0))
        m = r.getrandbits(17) | (1 << 17) | 1  # 18-bit odd: m**3 has 52 to 54 bits
        cases.append((float(m * m), 1.5))
    cases += [(9.0, 0.5), (4.0, 1.5), (2.0, 10.0), (2.0, -1074.0), (2.0, -1075.0), (0.5, 1075.0),
              (2.0, 1023.0), (2.0, 1024.0), (3.0, 33.0), (10.0, 22.0), (10.0, 23.0),
              (H("0x1p-1074"), 0.5), (16.0, 0.25), (8.0, 1.0 / 3.0),
              (1.0000000000000002, 4503599627370496.0)]
    cases += HARD["pow"]
    # special cases
    inf, nan = math.inf, math.nan
    for x in (0.0, -0.0, 1.0, -1.0, 0.5, -0.5, 2.0, -2.0, inf, -inf, nan, 5e-324, -5e-324, 3.0):
        for y in (0.0, -0.0, 1.0, -1.0, 2.0, -2.0, 3.0, -3.0, 0.5, -0.5, inf, -inf, nan, 1e300,
                  -1e300, 2.5):
            cases.append((x, y))
    return cases


# ---------------------------------------------------------------- specials


def special(name, x):
    """The value for NaN, infinite and zero arguments (and a few other
    exact cases), as the math package defines them; None otherwise."""
    if x != x:
        return math.nan
    inf = math.inf
    if name == "exp":
        return {inf: inf, -inf: 0.0}.get(x, 1.0 if x == 0 else None)
    if name == "expm1":
        return {inf: inf, -inf: -1.0}.get(x, x if x == 0 else None)
    if name in ("log", "log2"):
        if x < 0:
            return math.nan
        if x == 0:
            return -inf
        if x == inf:
            return inf
        if x == 1:
            return 0.0
        return None
    if name == "log1p":
        if x < -1:
            return math.nan
        if x == -1:
            return -inf
        if x == inf:
            return inf
        return x if x == 0 else None
    if name in ("sin", "tanh", "erf"):
        if math.isinf(x):
            return math.nan if name == "sin" else math.copysign(1.0, x)
        return x if x == 0 else None
    if name == "cos":
        if math.isinf(x):
            return math.nan
        return 1.0 if x == 0 else None
    if name == "cosh":
        if math.isinf(x):
            return inf
        return 1.0 if x == 0 else None
    if name == "erfc":
        if math.isinf(x):
            return 0.0 if x > 0 else 2.0
        return 1.0 if x == 0 else None
    raise ValueError(name)


def is_odd_int(y):
    return math.isfinite(y) and y == math.floor(y) and abs(y) < 2 ** 53 and int(y) % 2 == 1


def pow_special(x, y):
    """math.Pow's special cases (C99 Annex F)."""
    inf, nan = math.inf, math.nan
    if y == 0:
        return 1.0
    if x == 1:
        return 1.0
    if y == 1:
        return x
    if x != x or y != y:
        return nan
    if x == 0:
        if y < 0:
            if y == -inf:
                return inf
            return math.copysign(inf, x) if is_odd_int(y) else inf
        if y == inf:
            return 0.0
        return x if is_odd_int(y) else 0.0
    if math.isinf(y):
        if x == -1:
            return 1.0
        if (abs(x) < 1) == (y > 0):
            return 0.0
        return inf
    if math.isinf(x):
        if x < 0:
            return pow_special(-0.0, -y)
        return inf if y > 0 else 0.0
    if x < 0 and y != math.floor(y):
        return nan
    return None


def exact_pow(x, y):
    """x**y (x > 0) as a Fraction when it is rational (x = X*2^a with X odd:
    a power of two to an exponent making a*y integral, or y = p/2^q > 0
    with X a perfect 2^q-th power); None otherwise."""
    fx = Fraction(x)
    fy = Fraction(y)
    num, den = fx.numerator, fx.denominator  # den is a power of two
    a = -(den.bit_length() - 1)
    while num % 2 == 0:
        num //= 2
        a += 1
    if (a * fy).denominator != 1:
        return None
    ay = int(a * fy)
    if num == 1:
        if ay > 1100:
            return Fraction(2) ** 1100
        if ay < -1100:
            return Fraction(1, 2 ** 1100)
        return Fraction(2) ** ay
    if y <= 0 or y > 40 or fy.denominator > 32:
        return None
    q = fy.denominator.bit_length() - 1
    z = num
    for _ in range(q):
        s = math.isqrt(z)
        if s * s != z:
            return None
        z = s
    return Fraction(z ** fy.numerator) * Fraction(2) ** ay


def pow_value(x, y):
    s = pow_special(x, y)
    if s is not None:
        return s
    sign = -1.0 if x < 0 and is_odd_int(y) else 1.0
    ax = abs(x)
    e = exact_pow(ax, y)
    if e is not None:
        return sign * round_f64(e)
    return sign * correctly_rounded("pow", pow_mp, ax, y)


def pow_mp(a, b):
    """a**b for a > 0 as exp(b*log a), with 30 guard digits for the
    magnitude of b*log a (mpmath.power would square its way through an
    integral b of 2**57 exactly)."""
    with mp.extradps(30):
        v = mpmath.exp(b * mpmath.log(a))
    return v


FUNCS = {
    "exp": (mpmath.exp, sample_exp),
    "expm1": (mpmath.expm1, sample_expm1),
    "log": (mpmath.log, sample_log),
    "log1p": (mpmath.log1p, sample_log1p),
    "log2": (lambda v: mpmath.log(v, 2), sample_log2),
    "sin": (mpmath.sin, lambda r: sample_trig(r, "sin")),
    "cos": (mpmath.cos, lambda r: sample_trig(r, "cos")),
    "tanh": (mpmath.tanh, sample_tanh),
    "cosh": (mpmath.cosh, sample_cosh),
    "erf": (mpmath.erf, sample_erf),
    "erfc": (mpmath.erfc, sample_erfc),
}

SEEDS = {"exp": 101, "expm1": 102, "log": 103, "log1p": 104, "log2": 105, "sin": 106, "cos": 107,
         "tanh": 108, "cosh": 109, "erf": 110, "erfc": 111, "pow": 112}


def header(name, n):
    return ("# %s: correctly rounded float64 values, mpmath %s at %d significant digits\n"
            "# (rounding checked at up to %d digits; %d cases needed more than %d)\n"
            "# generated by testdata/gen/elem.py; one case a line: %s,\n"
            "# each number the IEEE 754 bit pattern in hex\n"
            "# %d cases\n") % (name, mpmath.__version__, DIGITS, LADDER[-1], escalated.get(name, 0),
                              DIGITS, "x y x**y" if name == "pow" else "x f(x)", n)


def log2_value(x):
    m, e = math.frexp(x)
    if m == 0.5:  # a power of two: an exact integer
        return float(e - 1)
    return correctly_rounded("log2", lambda v: mpmath.log(v, 2), x)


def main():
    if len(sys.argv) != 2:
        raise SystemExit("usage: elem.py OUTDIR")
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    mp.dps = DIGITS
    for name in list(FUNCS) + ["pow"]:
        r = random.Random(SEEDS[name])
        lines = []
        seen = set()
        if name == "pow":
            for x, y in sample_pow(r):
                key = (bits(x), bits(y))
                if key in seen:
                    continue
                seen.add(key)
                lines.append("%s %s %s\n" % (key[0], key[1], bits(pow_value(x, y))))
        else:
            fn, sample = FUNCS[name]
            for x in sample(r):
                key = bits(x)
                if key in seen:
                    continue
                seen.add(key)
                v = special(name, x)
                if v is None:
                    if name == "log2":
                        v = log2_value(x)
                    else:
                        v = correctly_rounded(name, fn, x)
                lines.append("%s %s\n" % (key, bits(v)))
        with open(os.path.join(out, name + ".txt"), "w", encoding="ascii") as f:
            f.write(header(name, len(lines)))
            f.writelines(lines)
        print("%-6s %5d cases, %d needed more than %d digits"
              % (name, len(lines), escalated.get(name, 0), DIGITS), file=sys.stderr)


if __name__ == "__main__":
    main()
