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
    section 3.

Positions are exact integers; angles m*theta are formed and reduced at 50
digits, so large positions (up to 2^31 - 1) are exact references.
"""

from mpmath import mp, mpf

from common import case, ftensor, itensor, rng, to_f64, uniform

SIN = "Vaswani et al. 2017, arXiv 1706.03762, sec. 3.5"
ROPE = "Su et al. 2021, arXiv 2104.09864, Eq. (13)-(15), (34)"
PI_SRC = "Chen et al. 2023, arXiv 2306.15595, sec. 2.3 Eq. (4)"
NTK_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (14)-(16)"
YARN_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (17)-(20)"
DYN_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, sec. 3.3"
TEMP_SRC = "Peng et al. 2023, arXiv 2309.00071 v2, Eq. (21)-(22)"
ALIBI = "Press et al. 2022, arXiv 2108.12409, sec. 3"

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
    method = sc.get("method", "none")
    if method == "none":
        return base_freqs(r, base)
    if method == "per_frequency":
        return [t / mpf(f) for t, f in zip(base_freqs(r, base), sc["factors"])]
    s = scale_factor(sc)
    if method == "interpolation":
        # f'(x, m) = f(x, m/s): the angle (m/s) theta = m (theta/s)
        return [t / s for t in base_freqs(r, base)]
    if method == "ntk":
        bp = mpf(base) * s ** (mpf(r) / (r - 2))
        return [bp ** (-mpf(2 * i) / r) for i in range(r // 2)]
    if method == "yarn":
        L = mpf(sc["trained_length"])
        alpha = mpf(sc.get("alpha", 1))
        beta = mpf(sc.get("beta", 32))
        th = base_freqs(r, base)
        if sc.get("ramp", "ratio") == "ratio":
            gam = []
            for t in th:
                rho = L * t / (2 * mp.pi)  # L / lambda_d, lambda_d = 2 pi / theta_d
                if rho < alpha:
                    gam.append(mpf(0))
                elif rho > beta:
                    gam.append(mpf(1))
                else:
                    gam.append((rho - alpha) / (beta - alpha))
        else:
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
        return [(1 - g) * t / s + g * t for g, t in zip(gam, th)]
    raise ValueError(method)


def rotate(x, D, r, pairing, theta, m, mag, inverse):
    """One row: pairs rotated by m*theta_i (negated for the inverse), times
    mag; dims r.. passed through."""
    y = [mpf(v) for v in x]
    h = r // 2
    for i in range(h):
        a, b = (2 * i, 2 * i + 1) if pairing == "adjacent" else (i, i + h)
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


# ---------------------------------------------------------------- families

def build_sinusoidal_table():
    cases = []
    specs = [
        ("worked_d4_pos0to3", 4, 10000.0, "interleaved", 0, 4),
        ("d16_interleaved", 16, 10000.0, "interleaved", 0, 12),
        ("d16_concatenated", 16, 10000.0, "concatenated", 0, 12),
        ("d32_offset_100", 32, 10000.0, "interleaved", 100, 8),
        ("d24_base_500", 24, 500.0, "interleaved", 3, 8),
        ("d20_base_1e6_concatenated", 20, 1e6, "concatenated", 0, 6),
        ("d64_positions_near_1e6", 64, 10000.0, "interleaved", 999997, 4),
        ("d64_positions_near_2e9_concatenated", 64, 10000.0, "concatenated", 2147483644, 4),
        ("d2_single_frequency", 2, 10000.0, "interleaved", 0, 5),
        ("d128_empty", 128, 10000.0, "interleaved", 5, 0),
    ]
    for name, d, base, layout, offset, n in specs:
        w = base_freqs(d, base)
        out = []
        for t in range(n):
            m = offset + t
            s = [mp.sin(m * wi) for wi in w]
            c = [mp.cos(m * wi) for wi in w]
            if layout == "interleaved":
                row = [v for pair in zip(s, c) for v in pair]
            else:
                row = s + c
            out.extend(row)
        cases.append(case(name, SIN,
                          {"dim": d, "base": base, "layout": layout, "offset": offset, "n": n},
                          {}, {"table": ftensor(out, [n, d])}))
    return cases


def build_sinusoidal_add():
    cases = []
    for k, (d, L, B, offset, layout) in enumerate([(8, 5, 2, 0, "interleaved"),
                                                   (16, 3, 3, 1000, "concatenated"),
                                                   (32, 4, 1, 999996, "interleaved")]):
        r = rng(4100 + k)
        x = uniform(r, B * L * d, -2.0, 2.0)
        w = base_freqs(d, 10000.0)
        y = []
        for idx, v in enumerate(x):
            t = (idx // d) % L
            col = idx % d
            m = offset + t
            if layout == "interleaved":
                i, fn = col // 2, (mp.sin if col % 2 == 0 else mp.cos)
            else:
                i, fn = col % (d // 2), (mp.sin if col < d // 2 else mp.cos)
            y.append(mpf(v) + fn(m * w[i]))
        cases.append(case("add_d%d_L%d_B%d_offset%d_%s" % (d, L, B, offset, layout), SIN,
                          {"dim": d, "base": 10000.0, "layout": layout, "offset": offset, "seq_len": L},
                          {"x": ftensor(x, [B, L, d])}, {"y": ftensor(y, [B, L, d])}))
    return cases


def build_rotary_tables():
    cases = []
    for name, r, base in [("r128_base_1e4", 128, 10000.0),
                          ("r64_base_5e5", 64, 500000.0),
                          ("r32_base_1e6", 32, 1e6),
                          ("r8_base_100", 8, 100.0)]:
        th = base_freqs(r, base)
        cos = [mp.cos(m * t) for m in BIG_POSITIONS for t in th]
        sin = [mp.sin(m * t) for m in BIG_POSITIONS for t in th]
        n = len(BIG_POSITIONS)
        cases.append(case(name, ROPE, {"dim": r, "rotated": r, "base": base},
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
           "magnitude": mag, "seq_len": L, "offset": offset}
    cfg.update({"scaling_" + k: v for k, v in sc.items() if k != "factors"})
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
    none = {"method": "none"}
    specs = [
        # name, D, r, base, pairing, magnitude, shape, offset, positions
        ("worked_d4_m1_adjacent", 4, 4, 10000.0, "adjacent", 1.0, [1, 4], 1, None),
        ("d16_adjacent", 16, 16, 10000.0, "adjacent", 1.0, [2, 5, 16], 0, None),
        ("d16_halves", 16, 16, 10000.0, "halves", 1.0, [2, 5, 16], 0, None),
        ("d64_halves_offset_4000", 64, 64, 10000.0, "halves", 1.0, [1, 3, 64], 4000, None),
        ("d32_partial_r8_adjacent", 32, 8, 10000.0, "adjacent", 1.0, [2, 3, 32], 0, None),
        ("d24_partial_r12_halves_base_1e6", 24, 12, 1e6, "halves", 1.0, [1, 4, 24], 7, None),
        ("d13_partial_r6_odd_head", 13, 6, 10000.0, "adjacent", 1.0, [1, 3, 13], 0, None),
        ("d32_base_500_magnitude", 32, 32, 500.0, "adjacent", 1.2079441541679836, [1, 3, 32], 2, None),
        ("d64_positions_up_to_2e9", 64, 64, 10000.0, "adjacent", 1.0, [1, 6, 64], 0,
         [0, 999999, 1000000, 65536, 123456789, 2147483647]),
        ("d32_halves_positions_near_1e6", 32, 32, 10000.0, "halves", 1.0, [2, 4, 32], 999996, None),
        ("d8_per_row_positions_packed", 8, 8, 10000.0, "adjacent", 1.0, [2, 3, 8], 0,
         [0, 1, 2, 0, 1, 0]),
        ("d8_negative_positions", 8, 8, 10000.0, "halves", 1.0, [1, 3, 8], -5, None),
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
            ("interpolation_" + tag, PI_SRC, 32, 32, 10000.0, "adjacent",
             {"method": "interpolation", "factor": s}),
            ("ntk_" + tag, NTK_SRC, 32, 32, 10000.0, "halves",
             {"method": "ntk", "factor": s}),
            ("ntk_partial_r16_base_5e5_" + tag, NTK_SRC, 40, 16, 500000.0, "adjacent",
             {"method": "ntk", "factor": s}),
            ("yarn_ramp_ratio_" + tag, YARN_SRC, 32, 32, 10000.0, "halves",
             {"method": "yarn", "factor": s, "trained_length": 4096, "ramp": "ratio"}),
            ("yarn_ramp_dims_" + tag, YARN_SRC, 32, 32, 10000.0, "halves",
             {"method": "yarn", "factor": s, "trained_length": 4096, "ramp": "dims"}),
            ("yarn_ramp_ratio_alpha2_beta16_base_5e5_" + tag, YARN_SRC, 32, 32, 500000.0, "adjacent",
             {"method": "yarn", "factor": s, "trained_length": 2048, "ramp": "ratio",
              "alpha": 2.0, "beta": 16.0}),
            ("yarn_ramp_dims_alpha2_beta16_base_5e5_" + tag, YARN_SRC, 32, 32, 500000.0, "adjacent",
             {"method": "yarn", "factor": s, "trained_length": 2048, "ramp": "dims",
              "alpha": 2.0, "beta": 16.0}),
            ("dynamic_ntk_" + tag, DYN_SRC, 32, 32, 10000.0, "adjacent",
             {"method": "ntk", "trained_length": 2048, "current_length": int(2048 * s)}),
            ("dynamic_yarn_ramp_ratio_" + tag, DYN_SRC, 32, 32, 10000.0, "halves",
             {"method": "yarn", "trained_length": 1024, "current_length": int(1024 * s) + 1,
              "ramp": "ratio"}),
            ("dynamic_interpolation_" + tag, DYN_SRC, 16, 16, 10000.0, "adjacent",
             {"method": "interpolation", "trained_length": 3000, "current_length": int(3000 * s) - 1}),
        ]
        fr = rng(seed)
        variants.append(("per_frequency_" + tag, "common practice: caller-given per-frequency divisors", 32, 32,
                         10000.0, "halves",
                         {"method": "per_frequency",
                          "factors": [1.0 + (s - 1.0) * fr.random() for _ in range(16)]}))
        for name, src, D, r, base, pairing, sc in variants:
            seed += 1
            cases.append(apply_case(name, src, D, r, base, pairing, sc, 1.0, [1, len(POS), D], 0, POS, seed,
                                    inverse=False))
    # YaRN ramp edges: alpha = 0, the authors'-code clamp of the upper bound
    # to r - 1, bounds that meet (a step) and bounds that cross (no ramp).
    for name, sc in [
        ("yarn_ramp_ratio_alpha0", {"method": "yarn", "factor": 8.0, "trained_length": 4096,
                                    "ramp": "ratio", "alpha": 0.0, "beta": 32.0}),
        ("yarn_ramp_dims_alpha0", {"method": "yarn", "factor": 8.0, "trained_length": 4096,
                                   "ramp": "dims", "alpha": 0.0, "beta": 32.0}),
        ("yarn_ramp_dims_high_clamped", {"method": "yarn", "factor": 4.0, "trained_length": 10 ** 9,
                                         "ramp": "dims", "alpha": 1.0, "beta": 1e6}),
        ("yarn_ramp_dims_step", {"method": "yarn", "factor": 2.0, "trained_length": 4, "ramp": "dims"}),
        ("yarn_ramp_dims_bounds_crossed", {"method": "yarn", "factor": 2.0, "trained_length": 4,
                                           "ramp": "dims", "alpha": 100.0, "beta": 200.0}),
    ]:
        seed += 1
        cases.append(apply_case(name, YARN_SRC, 32, 32, 10000.0, "adjacent", sc, 1.0, [1, len(POS), 32], 0, POS,
                                seed, inverse=False))
    # dynamic scaling below the trained length is no scaling at all
    cases.append(apply_case("dynamic_ntk_shorter_than_trained", DYN_SRC, 16, 16, 10000.0, "adjacent",
                            {"method": "ntk", "trained_length": 2048, "current_length": 1000},
                            1.0, [1, 3, 16], 5, None, 4399))
    cases.append(apply_case("interpolation_factor_1", PI_SRC, 16, 16, 10000.0, "adjacent",
                            {"method": "interpolation", "factor": 1.0}, 1.0, [1, 3, 16], 5, None, 4398))
    cases.append(apply_case("interpolation_factor_3", PI_SRC, 16, 16, 10000.0, "halves",
                            {"method": "interpolation", "factor": 3.0}, 1.0, [1, 3, 16], 999998, None, 4397))
    return cases


def build_ntk_base():
    cases = []
    for b, s, r in [(10000.0, 4.0, 128), (10000.0, 2.0, 64), (10000.0, 8.0, 128),
                    (10000.0, 32.0, 128), (500000.0, 4.0, 64), (10000.0, 1.0, 128),
                    (1e6, 3.5, 16), (10000.0, 8.0, 4)]:
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


def build_alibi_bias():
    cases = []
    specs = [
        ("causal_square_8_heads", 8, 6, 6, "end", 0, "causal"),
        ("causal_decode_end", 4, 1, 9, "end", 0, "causal"),
        ("causal_chunk_end", 12, 3, 7, "end", 0, "causal"),
        ("causal_start_offset", 4, 3, 8, "start", 2, "causal"),
        ("causal_end_negative_offset", 2, 3, 8, "end", -2, "causal"),
        ("symmetric_square", 6, 5, 5, "end", 0, "symmetric"),
        ("symmetric_cross_start", 3, 4, 6, "start", 1, "symmetric"),
        ("symmetric_end_queries_beyond_keys", 5, 4, 3, "end", 3, "symmetric"),
        ("causal_empty_keys", 2, 0, 0, "end", 0, "causal"),
    ]
    for name, H, Lq, Lk, align, offset, form in specs:
        sl = slopes(H)
        slf = ftensor(sl, [H])  # the slopes, rounded to float64: the bias input
        slv = [to_f64(v) for v in sl]
        out = []
        for h in range(H):
            for i in range(Lq):
                p = (Lk - Lq + i + offset) if align == "end" else (i + offset)
                for j in range(Lk):
                    d = p - j
                    if form == "causal" and d < 0:
                        out.append(mpf(0))
                    else:
                        out.append(-mpf(slv[h]) * abs(d))
        cases.append(case(name, ALIBI + ("" if form == "causal" else "; symmetric form: common practice"),
                          {"lq": Lq, "lk": Lk, "align": align, "offset": offset, "form": form},
                          {"slopes": slf}, {"bias": ftensor(out, [H, Lq, Lk])}))
    return cases


FAMILIES = [
    ("posenc", "sinusoidal_table", build_sinusoidal_table),
    ("posenc", "sinusoidal_add", build_sinusoidal_add),
    ("posenc", "rotary_tables", build_rotary_tables),
    ("posenc", "rotary_apply", build_rotary_apply),
    ("posenc", "scaling", build_scaling),
    ("posenc", "ntk_base", build_ntk_base),
    ("posenc", "yarn_magnitude", build_yarn_magnitude),
    ("posenc", "alibi_slopes", build_alibi_slopes),
    ("posenc", "alibi_bias", build_alibi_bias),
]
