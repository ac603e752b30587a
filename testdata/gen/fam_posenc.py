"""Golden vectors for package posenc: sinusoidal and rotary position
encodings, context scaling of rotary frequencies, and ALiBi.

Every formula is implemented here again from its published definition, with
mpmath at common.DIGITS significant digits, on exact float64 inputs:

  * sinusoidal: Vaswani et al. 2017, "Attention Is All You Need",
    arXiv 1706.03762, section 3.5;
  * rotary: Su et al. 2021, "RoFormer", arXiv 2104.09864, Eq. (13)-(16), (34);
  * position interpolation: Chen et al. 2023, arXiv 2306.15595, Eq. (4);
  * NTK-aware base, NTK-by-parts, dynamic scaling, temperature: Peng et al.
    2023, "YaRN", arXiv 2309.00071 v2, Eq. (11)-(22) and section 3.3;
  * ALiBi: Press et al. 2022, "Train Short, Test Long", arXiv 2108.12409,
    section 3, in three forms: causal (the paper's -m (p - j) for every
    key), symmetric (-m |p - j|) and past-only (-m max(p - j, 0)).

Positions are exact integers; angles m*theta are formed and reduced at 50
digits, so large positions (up to 2^31 - 1) are exact references.
"""

from mpmath import mp, mpf

from common import families, case, ftensor, itensor, rng, to_f64, uniform, word
from fam_mask import geometry, pos

# Every convention word, spelled as the Go types define them
# (vocabulary.json); word() stops the generator on a word Go does not have.
INTERLEAVED, CONCATENATED = word("posenc.Layout", "interleaved", "concatenated")
ADJACENT, HALVES = word("posenc.Pairing", "adjacent", "halves")
NONE, INTERPOLATION, NTK, YARN, PER_FREQUENCY = word(
    "posenc.Method", "none", "interpolation", "ntk-aware", "yarn", "per-frequency")
RATIO, DIMS = word("posenc.Ramp", "ratio", "dims")
END, START = word("mask.Align", "end", "start")
CAUSAL, SYMMETRIC, PAST_ONLY = word("mask.ALiBiForm", "causal", "symmetric", "past-only")

SIN = "Vaswani et al. 2017, arXiv 1706.03762, sec. 3.5"
ROPE = "Su et al. 2021, arXiv 2104.09864, Eq. (13)-(15), (34)"
PI_SRC = "Chen et al. 2023, arXiv 2306.15595, sec. 2.3 Eq. (4)"
NTK_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (14)-(16)"
YARN_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (17)-(20)"
DYN_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, sec. 3.3"
TEMP_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (21)-(22)"
ALIBI = "Press et al. 2022, arXiv 2108.12409, sec. 3"
PER_FREQ_SRC = "common practice: caller-given per-frequency divisors"

# YaRN's sqrt(1/t) = 0.1 ln s + 1 at s = 8 (Eq. (22)), rounded to float64:
# the magnitude input of the cases that use one.
MAG8 = to_f64(mp.log(mpf(8)) / 10 + 1)
assert MAG8 == 1.2079441541679836

BIG_POSITIONS = [0, 1, 2, 7, 100, 4095, 65535, 999999, 1000000,
                 123456789, 2147483647]


# ---------------------------------------------------------------- formulas

def base_freqs(r, base):
    """theta_i = base^(-2i/r), i = 0 .. r/2-1 (RoFormer Eq. (15); the
    sinusoidal omega_i of Vaswani sec. 3.5 with d for r)."""
    b = mpf(base)
    return [b ** (-mpf(2 * i) / r) for i in range(r // 2)]


def scale_factor(sc):
    if sc.get("current_length", 0):
        return max(mpf(1), mpf(sc["current_length"]) / sc["trained_length"])
    return mpf(sc["factor"])


def scaled_freqs(r, base, sc):
    """The frequencies after context scaling, from the published formulas."""
    method = sc.get("method", NONE)
    if method == NONE:
        return base_freqs(r, base)
    if method == PER_FREQUENCY:
        return [t / mpf(f) for t, f in zip(base_freqs(r, base), sc["factors"])]
    s = scale_factor(sc)
    if method == INTERPOLATION:
        # f'(x, m) = f(x, m/s): the angle (m/s) theta = m (theta/s)
        return [t / s for t in base_freqs(r, base)]
    if method == NTK:
        bp = mpf(base) * s ** (mpf(r) / (r - 2))
        return [bp ** (-mpf(2 * i) / r) for i in range(r // 2)]
    if method == YARN:
        L = mpf(sc["trained_length"])
        alpha = mpf(sc.get("alpha", 1))
        beta = mpf(sc.get("beta", 32))
        th = base_freqs(r, base)
        if sc.get("ramp", RATIO) == RATIO:
            gam = []
            for t in th:
                rho = L * t / (2 * mp.pi)  # L / lambda_d, lambda_d = 2 pi / theta_d
                if rho < alpha:
                    gam.append(mpf(0))
                elif rho > beta:
                    gam.append(mpf(1))
                else:
                    gam.append((rho - alpha) / (beta - alpha))
        elif sc["ramp"] == DIMS:
            def dim_at(x):
                return r * mp.log(L / (2 * mp.pi * x)) / (2 * mp.log(mpf(base)))
            low = max(int(mp.floor(dim_at(beta))), 0)
            high = r - 1 if alpha == 0 else min(int(mp.ceil(dim_at(alpha))), r - 1)
            gam = []
            for d in range(r // 2):
                if high == low:
                    gam.append(mpf(1) if d <= low else mpf(0))
                    continue
                t = mpf(d - low) / (high - low)
                t = min(max(t, mpf(0)), mpf(1))
                gam.append(1 - t)
        else:
            raise ValueError(sc["ramp"])
        return [(1 - g) * t / s + g * t for g, t in zip(gam, th)]
    raise ValueError(method)


def rotate(x, D, r, pairing, theta, m, mag, inverse):
    """One row: pairs rotated by m*theta_i (negated for the inverse), times
    mag; dims r.. passed through."""
    y = [mpf(v) for v in x]
    h = r // 2
    for i in range(h):
        if pairing == ADJACENT:
            a, b = 2 * i, 2 * i + 1
        elif pairing == HALVES:
            a, b = i, i + h
        else:
            raise ValueError(pairing)
        ang = m * theta[i]
        c, s = mp.cos(ang), mp.sin(ang)
        if inverse:
            s = -s
        xa, xb = mpf(x[a]), mpf(x[b])
        y[a] = mag * (xa * c - xb * s)
        y[b] = mag * (xa * s + xb * c)
    return y


def row_positions(rows, L, offset, plist):
    if plist is None:
        return [offset + (row % L) for row in range(rows)]
    if len(plist) == L:
        return [plist[row % L] for row in range(rows)]
    return list(plist)


def alibi_distance(form, p, j):
    """The key distance d(p, j) each ALiBi form penalises, the bias being
    -m d. Press et al. 2022 sec. 3 give -m (p - j) for the keys j <= p a
    causal model sees, where the three forms agree; they differ only for
    keys after the query."""
    if form == CAUSAL:
        return p - j  # the paper's formula for every key: j > p gets +m (j - p)
    if form == SYMMETRIC:
        return abs(p - j)
    if form == PAST_ONLY:
        return max(p - j, 0)  # no bias for keys after the query
    raise ValueError(form)


# ---------------------------------------------------------------- families
#
# Configuration keys follow the ops package's keys for the same things:
# rotary "rotated", "base", "pairing", "magnitude", "offset" and "scaling"
# (an object with "method", "factor", "trained_length", "current_length",
# "alpha", "beta", "ramp"); sinusoidal "dim", "base", "layout", "offset",
# "length"; ALiBi bias "queries", "keys", "align", "offset", "alibi_form".
# "dim" and "length" also give the shape of a case's input (head dimension,
# positions per sequence). Positions lists and per-frequency factors are
# input tensors.

def build_sinusoidal_table():
    cases = []
    specs = [
        ("worked_d4_pos0to3", 4, 10000.0, INTERLEAVED, 0, 4),
        ("d16_interleaved", 16, 10000.0, INTERLEAVED, 0, 12),
        ("d16_concatenated", 16, 10000.0, CONCATENATED, 0, 12),
        ("d32_offset_100", 32, 10000.0, INTERLEAVED, 100, 8),
        ("d24_base_500", 24, 500.0, INTERLEAVED, 3, 8),
        ("d20_base_1e6_concatenated", 20, 1e6, CONCATENATED, 0, 6),
        ("d64_positions_near_1e6", 64, 10000.0, INTERLEAVED, 999997, 4),
        ("d64_positions_near_2e9_concatenated", 64, 10000.0, CONCATENATED, 2147483644, 4),
        ("d2_single_frequency", 2, 10000.0, INTERLEAVED, 0, 5),
        ("d128_empty", 128, 10000.0, INTERLEAVED, 5, 0),
    ]
    for name, d, base, layout, offset, n in specs:
        w = base_freqs(d, base)
        out = []
        for t in range(n):
            m = offset + t
            s = [mp.sin(m * wi) for wi in w]
            c = [mp.cos(m * wi) for wi in w]
            if layout == INTERLEAVED:
                row = [v for pair in zip(s, c) for v in pair]
            elif layout == CONCATENATED:
                row = s + c
            else:
                raise ValueError(layout)
            out.extend(row)
        cases.append(case(name, SIN,
                          {"dim": d, "base": base, "layout": layout, "offset": offset, "length": n},
                          {}, {"table": ftensor(out, [n, d])}))
    return cases


def build_sinusoidal_add():
    cases = []
    for k, (d, L, B, offset, layout) in enumerate([(8, 5, 2, 0, INTERLEAVED),
                                                   (16, 3, 3, 1000, CONCATENATED),
                                                   (32, 4, 1, 999996, INTERLEAVED)]):
        r = rng(4100 + k)
        x = uniform(r, B * L * d, -2.0, 2.0)
        w = base_freqs(d, 10000.0)
        y = []
        for idx, v in enumerate(x):
            t = (idx // d) % L
            col = idx % d
            m = offset + t
            if layout == INTERLEAVED:
                i, fn = col // 2, (mp.sin if col % 2 == 0 else mp.cos)
            else:
                i, fn = col % (d // 2), (mp.sin if col < d // 2 else mp.cos)
            y.append(mpf(v) + fn(m * w[i]))
        cases.append(case("add_d%d_L%d_B%d_offset%d_%s" % (d, L, B, offset, layout), SIN,
                          {"dim": d, "base": 10000.0, "layout": layout, "offset": offset, "length": L},
                          {"x": ftensor(x, [B, L, d])}, {"y": ftensor(y, [B, L, d])}))
    return cases


def build_rotary_tables():
    cases = []
    # name, source, D, r, base, magnitude, scaling
    specs = [
        ("r128_base_1e4", ROPE, 128, 128, 10000.0, 1.0, None),
        ("r64_base_5e5", ROPE, 64, 64, 500000.0, 1.0, None),
        ("r32_base_1e6", ROPE, 32, 32, 1e6, 1.0, None),
        ("r8_base_100", ROPE, 8, 8, 100.0, 1.0, None),
        # the magnitude M multiplies both tables: M cos, M sin
        ("r64_base_5e5_magnitude", ROPE + "; magnitude: " + TEMP_SRC, 64, 64, 500000.0, MAG8, None),
        ("d40_r32_yarn_ramp_dims_s8_magnitude", YARN_SRC + "; magnitude: " + TEMP_SRC, 40, 32, 10000.0, MAG8,
         {"method": YARN, "factor": 8.0, "trained_length": 4096, "ramp": DIMS}),
    ]
    for name, source, D, r, base, mag, sc in specs:
        th = scaled_freqs(r, base, sc or {})
        M = mpf(mag)
        cos = [M * mp.cos(m * t) for m in BIG_POSITIONS for t in th]
        sin = [M * mp.sin(m * t) for m in BIG_POSITIONS for t in th]
        n = len(BIG_POSITIONS)
        cfg = {"dim": D, "rotated": r, "base": base}
        if mag != 1.0:
            cfg["magnitude"] = mag
        if sc is not None:
            cfg["scaling"] = dict(sc)
        cases.append(case(name, source, cfg,
                          {"positions": itensor(BIG_POSITIONS, [n])},
                          {"theta": ftensor(th, [r // 2]),
                           "cos": ftensor(cos, [n, r // 2]), "sin": ftensor(sin, [n, r // 2])}))
    return cases


def apply_case(name, source, D, r, base, pairing, sc, mag, shape, offset, plist, seed, inverse=True):
    rows = 1
    for s in shape[:-1]:
        rows *= s
    L = shape[-2]
    x = uniform(rng(seed), rows * D, -1.0, 1.0)
    theta = scaled_freqs(r, base, sc)
    pos = row_positions(rows, L, offset, plist)
    y, yi = [], []
    for row in range(rows):
        xr = x[row * D:(row + 1) * D]
        y.extend(rotate(xr, D, r, pairing, theta, pos[row], mpf(mag), False))
        if inverse:
            yi.extend(rotate(xr, D, r, pairing, theta, pos[row], mpf(mag), True))
    cfg = {"dim": D, "rotated": r, "base": base, "pairing": pairing,
           "magnitude": mag, "length": L, "offset": offset,
           "scaling": {k: v for k, v in sc.items() if k != "factors"}}
    inputs = {"x": ftensor(x, shape)}
    if plist is not None:
        inputs["positions"] = itensor(plist, [len(plist)])
    if "factors" in sc:
        inputs["factors"] = ftensor(sc["factors"], [len(sc["factors"])])
    outputs = {"theta": ftensor(theta, [r // 2]), "y": ftensor(y, shape)}
    if inverse:
        outputs["y_inverse"] = ftensor(yi, shape)
    return case(name, source, cfg, inputs, outputs)


def build_rotary_apply():
    none = {"method": NONE}
    specs = [
        # name, D, r, base, pairing, magnitude, shape, offset, positions
        ("worked_d4_m1_adjacent", 4, 4, 10000.0, ADJACENT, 1.0, [1, 4], 1, None),
        ("d16_adjacent", 16, 16, 10000.0, ADJACENT, 1.0, [2, 5, 16], 0, None),
        ("d16_halves", 16, 16, 10000.0, HALVES, 1.0, [2, 5, 16], 0, None),
        ("d64_halves_offset_4000", 64, 64, 10000.0, HALVES, 1.0, [1, 3, 64], 4000, None),
        ("d32_partial_r8_adjacent", 32, 8, 10000.0, ADJACENT, 1.0, [2, 3, 32], 0, None),
        ("d24_partial_r12_halves_base_1e6", 24, 12, 1e6, HALVES, 1.0, [1, 4, 24], 7, None),
        ("d13_partial_r6_odd_head", 13, 6, 10000.0, ADJACENT, 1.0, [1, 3, 13], 0, None),
        ("d32_base_500_magnitude", 32, 32, 500.0, ADJACENT, MAG8, [1, 3, 32], 2, None),
        ("d64_positions_up_to_2e9", 64, 64, 10000.0, ADJACENT, 1.0, [1, 6, 64], 0,
         [0, 999999, 1000000, 65536, 123456789, 2147483647]),
        ("d32_halves_positions_near_1e6", 32, 32, 10000.0, HALVES, 1.0, [2, 4, 32], 999996, None),
        ("d8_per_row_positions_packed", 8, 8, 10000.0, ADJACENT, 1.0, [2, 3, 8], 0,
         [0, 1, 2, 0, 1, 0]),
        ("d8_negative_positions", 8, 8, 10000.0, HALVES, 1.0, [1, 3, 8], -5, None),
        # a magnitude below 1 with partial rotation: the rotated dims are
        # scaled, the pass-through dims copied unscaled
        ("d24_partial_r8_halves_magnitude", 24, 8, 10000.0, HALVES, 0.75, [2, 3, 24], 3, None),
    ]
    return [apply_case(name, ROPE, D, r, base, pairing, none, mag, shape, offset, plist, 4200 + k)
            for k, (name, D, r, base, pairing, mag, shape, offset, plist) in enumerate(specs)]


def build_scaling():
    cases = []
    seed = 4300
    POS = [0, 17, 4095, 999999, 1000000]
    for s in (2.0, 4.0, 8.0, 32.0):
        tag = "s%d" % int(s)
        variants = [
            ("interpolation_" + tag, PI_SRC, 32, 32, 10000.0, ADJACENT,
             {"method": INTERPOLATION, "factor": s}),
            ("ntk_" + tag, NTK_SRC, 32, 32, 10000.0, HALVES,
             {"method": NTK, "factor": s}),
            ("ntk_partial_r16_base_5e5_" + tag, NTK_SRC, 40, 16, 500000.0, ADJACENT,
             {"method": NTK, "factor": s}),
            ("yarn_ramp_ratio_" + tag, YARN_SRC, 32, 32, 10000.0, HALVES,
             {"method": YARN, "factor": s, "trained_length": 4096, "ramp": RATIO}),
            ("yarn_ramp_dims_" + tag, YARN_SRC, 32, 32, 10000.0, HALVES,
             {"method": YARN, "factor": s, "trained_length": 4096, "ramp": DIMS}),
            ("yarn_ramp_ratio_alpha2_beta16_base_5e5_" + tag, YARN_SRC, 32, 32, 500000.0, ADJACENT,
             {"method": YARN, "factor": s, "trained_length": 2048, "ramp": RATIO,
              "alpha": 2.0, "beta": 16.0}),
            ("yarn_ramp_dims_alpha2_beta16_base_5e5_" + tag, YARN_SRC, 32, 32, 500000.0, ADJACENT,
             {"method": YARN, "factor": s, "trained_length": 2048, "ramp": DIMS,
              "alpha": 2.0, "beta": 16.0}),
            ("dynamic_ntk_" + tag, DYN_SRC, 32, 32, 10000.0, ADJACENT,
             {"method": NTK, "trained_length": 2048, "current_length": int(2048 * s)}),
            ("dynamic_yarn_ramp_ratio_" + tag, DYN_SRC, 32, 32, 10000.0, HALVES,
             {"method": YARN, "trained_length": 1024, "current_length": int(1024 * s) + 1,
              "ramp": RATIO}),
            ("dynamic_interpolation_" + tag, DYN_SRC, 16, 16, 10000.0, ADJACENT,
             {"method": INTERPOLATION, "trained_length": 3000, "current_length": int(3000 * s) - 1}),
        ]
        fr = rng(seed)
        variants.append(("per_frequency_" + tag, PER_FREQ_SRC, 32, 32,
                         10000.0, HALVES,
                         {"method": PER_FREQUENCY,
                          "factors": [1.0 + (s - 1.0) * fr.random() for _ in range(16)]}))
        for name, src, D, r, base, pairing, sc in variants:
            seed += 1
            cases.append(apply_case(name, src, D, r, base, pairing, sc, 1.0, [1, len(POS), D], 0, POS, seed,
                                    inverse=False))
    # YaRN ramp edges: alpha = 0, the authors'-code clamp of the upper bound
    # to r - 1, bounds that meet (a step) and bounds that cross (no ramp).
    for name, sc in [
        ("yarn_ramp_ratio_alpha0", {"method": YARN, "factor": 8.0, "trained_length": 4096,
                                    "ramp": RATIO, "alpha": 0.0, "beta": 32.0}),
        ("yarn_ramp_dims_alpha0", {"method": YARN, "factor": 8.0, "trained_length": 4096,
                                   "ramp": DIMS, "alpha": 0.0, "beta": 32.0}),
        ("yarn_ramp_dims_high_clamped", {"method": YARN, "factor": 4.0, "trained_length": 10 ** 9,
                                         "ramp": DIMS, "alpha": 1.0, "beta": 1e6}),
        ("yarn_ramp_dims_step", {"method": YARN, "factor": 2.0, "trained_length": 4, "ramp": DIMS}),
        ("yarn_ramp_dims_bounds_crossed", {"method": YARN, "factor": 2.0, "trained_length": 4,
                                           "ramp": DIMS, "alpha": 100.0, "beta": 200.0}),
    ]:
        seed += 1
        cases.append(apply_case(name, YARN_SRC, 32, 32, 10000.0, ADJACENT, sc, 1.0, [1, len(POS), 32], 0, POS,
                                seed, inverse=False))
    # dynamic scaling below the trained length is no scaling at all
    cases.append(apply_case("dynamic_ntk_shorter_than_trained", DYN_SRC, 16, 16, 10000.0, ADJACENT,
                            {"method": NTK, "trained_length": 2048, "current_length": 1000},
                            1.0, [1, 3, 16], 5, None, 4399))
    cases.append(apply_case("interpolation_factor_1", PI_SRC, 16, 16, 10000.0, ADJACENT,
                            {"method": INTERPOLATION, "factor": 1.0}, 1.0, [1, 3, 16], 5, None, 4398))
    cases.append(apply_case("interpolation_factor_3", PI_SRC, 16, 16, 10000.0, HALVES,
                            {"method": INTERPOLATION, "factor": 3.0}, 1.0, [1, 3, 16], 999998, None, 4397))

    # Every case below also checks the inverse rotation (ApplyInverse, the
    # transpose and backward pass) with the scaled frequencies.
    fr = rng(4370)
    more = [
        # name, source, D, r, base, pairing, scaling, magnitude
        # dynamic YaRN with the dims ramp (the ratio ramp is above)
        *[("dynamic_yarn_ramp_dims_s%d" % int(s), DYN_SRC + "; ramp: " + YARN_SRC, 32, 32, 10000.0, HALVES,
           {"method": YARN, "trained_length": 1024, "current_length": int(1024 * s) + 1, "ramp": DIMS}, 1.0)
          for s in (2.0, 4.0, 8.0, 32.0)],
        # factors below 1 (s < 1 compresses instead of stretching), for
        # every method that takes a factor; dynamic scaling has s >= 1
        ("interpolation_s0.5", PI_SRC, 32, 32, 10000.0, ADJACENT, {"method": INTERPOLATION, "factor": 0.5}, 1.0),
        ("ntk_s0.5", NTK_SRC, 32, 32, 10000.0, HALVES, {"method": NTK, "factor": 0.5}, 1.0),
        ("yarn_ramp_ratio_s0.5", YARN_SRC, 32, 32, 10000.0, HALVES,
         {"method": YARN, "factor": 0.5, "trained_length": 4096, "ramp": RATIO}, 1.0),
        ("yarn_ramp_dims_s0.5", YARN_SRC, 32, 32, 10000.0, ADJACENT,
         {"method": YARN, "factor": 0.5, "trained_length": 4096, "ramp": DIMS}, 1.0),
        ("per_frequency_below_1", PER_FREQ_SRC, 32, 32, 10000.0, HALVES,
         {"method": PER_FREQUENCY, "factors": [0.25 + 0.75 * fr.random() for _ in range(16)]}, 1.0),
        # scaling with the inverse rotation, and YaRN with its magnitude
        ("ntk_s8_inverse", NTK_SRC, 32, 32, 10000.0, HALVES, {"method": NTK, "factor": 8.0}, 1.0),
        ("yarn_ramp_ratio_s8_magnitude_inverse", YARN_SRC + "; magnitude: " + TEMP_SRC, 32, 32, 10000.0, ADJACENT,
         {"method": YARN, "factor": 8.0, "trained_length": 4096, "ramp": RATIO}, MAG8),
        ("yarn_ramp_dims_s8_partial_r16_magnitude_inverse", YARN_SRC + "; magnitude: " + TEMP_SRC,
         24, 16, 500000.0, HALVES,
         {"method": YARN, "factor": 8.0, "trained_length": 2048, "ramp": DIMS}, MAG8),
        ("dynamic_interpolation_s4_inverse", DYN_SRC, 16, 16, 10000.0, HALVES,
         {"method": INTERPOLATION, "trained_length": 3000, "current_length": 12000}, 1.0),
        # per-frequency factors with partial rotation: r/2 factors, the
        # dims from r on passed through
        ("per_frequency_partial_r12_d20", PER_FREQ_SRC, 20, 12, 10000.0, ADJACENT,
         {"method": PER_FREQUENCY, "factors": [1.0 + 7.0 * fr.random() for _ in range(6)]}, 1.0),
        ("per_frequency_partial_r8_d13_halves", PER_FREQ_SRC, 13, 8, 500000.0, HALVES,
         {"method": PER_FREQUENCY, "factors": [0.5 + 3.5 * fr.random() for _ in range(4)]}, 1.0),
    ]
    for k, (name, src, D, r, base, pairing, sc, mag) in enumerate(more):
        cases.append(apply_case(name, src, D, r, base, pairing, sc, mag, [1, len(POS), D], 0, POS, 4350 + k))
    return cases


def build_ntk_base():
    cases = []
    for b, s, r in [(10000.0, 4.0, 128), (10000.0, 2.0, 64), (10000.0, 8.0, 128),
                    (10000.0, 32.0, 128), (500000.0, 4.0, 64), (10000.0, 1.0, 128),
                    (1e6, 3.5, 16), (10000.0, 8.0, 4), (10000.0, 0.5, 128)]:
        v = mpf(b) * mpf(s) ** (mpf(r) / (r - 2))
        cases.append(case("base%g_s%g_r%d" % (b, s, r), NTK_SRC + ", b' = b s^(|D|/(|D|-2))",
                          {"base": b, "factor": s, "rotated": r}, {},
                          {"base_scaled": ftensor([v], [1])}))
    return cases


def build_yarn_magnitude():
    cases = []
    for s in (1.0, 1.5, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0, 0.5):
        v = mp.log(mpf(s)) / 10 + 1  # sqrt(1/t) = 0.1 ln s + 1, with 0.1 the exact 1/10
        cases.append(case("s%g" % s, TEMP_SRC + ", sqrt(1/t) = 0.1 ln s + 1",
                          {"factor": s}, {}, {"magnitude": ftensor([v], [1])}))
    return cases


def slopes(n):
    """Press et al. 2022 sec. 3 for powers of two; for other n the rule of the
    authors' published code (c = 2^floor(log2 n), then every other slope of
    the 2c-head list)."""
    def pow2(n):
        return [mpf(2) ** (-mpf(8 * k) / n) for k in range(1, n + 1)]
    c = 1
    while 2 * c <= n:
        c *= 2
    out = pow2(c)
    if c < n:
        out += pow2(2 * c)[0::2][:n - c]
    return out


def build_alibi_slopes():
    cases = []
    for n in list(range(1, 21)) + [24, 31, 32, 40, 48, 64, 80, 96, 128]:
        cases.append(case("heads_%d" % n, ALIBI + "; other counts: the authors' published code",
                          {"heads": n}, {}, {"slopes": ftensor(slopes(n), [n])}))
    return cases


ALIBI_FORM_SRC = {
    CAUSAL: ALIBI + "; keys after the query: the same formula, -m (p - j) > 0",
    SYMMETRIC: ALIBI + "; symmetric form: common practice",
    PAST_ONLY: ALIBI + "; past-only form, 0 for keys after the query: common practice",
}


def build_alibi_bias():
    cases = []
    specs = [
        # name, heads, queries, keys, align, offset, form
        ("causal_square_8_heads", 8, 6, 6, END, 0, CAUSAL),
        ("causal_decode_end", 4, 1, 9, END, 0, CAUSAL),
        ("causal_chunk_end", 12, 3, 7, END, 0, CAUSAL),
        ("causal_start_offset", 4, 3, 8, START, 2, CAUSAL),
        ("causal_end_negative_offset", 2, 3, 8, END, -2, CAUSAL),
        ("symmetric_square", 6, 5, 5, END, 0, SYMMETRIC),
        ("symmetric_cross_start", 3, 4, 6, START, 1, SYMMETRIC),
        ("symmetric_end_queries_beyond_keys", 5, 4, 3, END, 3, SYMMETRIC),
        ("causal_empty_keys", 2, 0, 0, END, 0, CAUSAL),
    ]
    # the geometries above whose causal bias has keys after the query, in
    # the past-only form: 0 for those keys
    specs += [("past_only_" + name[len("causal_"):], H, Lq, Lk, align, offset, PAST_ONLY)
              for name, H, Lq, Lk, align, offset, form in list(specs)
              if form == CAUSAL and Lq > 0 and pos(geometry(1, Lq, Lk, align, offset), 0) < Lk - 1]
    # most keys after the query: the causal form's positive bias m (j - p)
    specs.append(("causal_keys_after_query_start", 3, 4, 10, START, 0, CAUSAL))
    for name, H, Lq, Lk, align, offset, form in specs:
        sl = slopes(H)
        slf = ftensor(sl, [H])  # the slopes, rounded to float64: the bias input
        slv = [to_f64(v) for v in sl]
        out = []
        g = geometry(1, Lq, Lk, align, offset)
        for h in range(H):
            for i in range(Lq):
                p = pos(g, i)
                for j in range(Lk):
                    # a distance of 0 gives +0 (mpmath has no -0)
                    out.append(-mpf(slv[h]) * alibi_distance(form, p, j))
        cases.append(case(name, ALIBI_FORM_SRC[form],
                          {"queries": Lq, "keys": Lk, "align": align, "offset": offset, "alibi_form": form},
                          {"slopes": slf}, {"bias": ftensor(out, [H, Lq, Lk])}))
    return cases


FAMILIES = families("posenc", build_sinusoidal_table, build_sinusoidal_add, build_rotary_tables,
                    build_rotary_apply, build_scaling, build_ntk_base, build_yarn_magnitude,
                    build_alibi_slopes, build_alibi_bias)
