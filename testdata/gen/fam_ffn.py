"""Golden vectors for package ffn: activations and their derivatives,
the two-layer feed-forward network, the gated units of Shazeer 2020 and
the hidden-size rule.

Every formula is written here again from its published definition and
evaluated with mpmath at common.DIGITS significant digits on the exact
float64 inputs; only the final values are rounded to float64.

Tails: wherever the textbook form cancels (1 + erf(z) for z < 0,
1 + tanh(u) for u < 0) an exact identity is used instead, so that the
50 digits are digits of the value and not of the cancellation:
1 + erf(z) = erfc(-z), and 1 + tanh(u) = 2 / (1 + e^{-2u}).

Derivatives are the analytic ones, each checked against mpmath.diff
(numerical differentiation at raised precision) to 40 digits at every
point where the function is differentiable.
"""

import mpmath
from mpmath import mp, mpf

from common import families, btensor, case, ftensor, itensor, rng, to_f64, uniform, word  # noqa: F401

# The words of the Go conventions (testdata/gen/vocabulary.json). Configs
# hold them under the keys of the operations (ops/ffn.go): "function" and
# "beta" for an activation, "activation", "beta", "gated", "layout" and
# "packing" for a layer. Case names keep their older spellings (LABEL).
RELU, GELU, GELU_TANH, GELU_SIGMOID, SIGMOID, SILU, SWISH, IDENTITY = word(
    "ffn.Act", "relu", "gelu", "gelu-tanh", "gelu-sigmoid", "sigmoid", "silu", "swish",
    "identity")
IN_BY_OUT, OUT_BY_IN = word("ffn.Layout", "in-by-out", "out-by-in")
STACKED, INTERLEAVED = word("ffn.Packing", "stacked", "interleaved")

LABEL = {GELU_TANH: "gelu_tanh", GELU_SIGMOID: "gelu_sigmoid",
         IN_BY_OUT: "in_by_out", OUT_BY_IN: "out_by_in"}


def label(w):
    """The spelling of a word in case names."""
    return LABEL.get(w, w)

SRC_GELU = "Hendrycks & Gimpel 2016, Gaussian Error Linear Units (GELUs), arXiv 1606.08415, sec. 2"
SRC_SWISH = "Ramachandran et al. 2017, Searching for Activation Functions, arXiv 1710.05941"
SRC_SILU = "Elfwing et al. 2018, arXiv 1702.03118 (SiLU = Swish with beta 1)"
SRC_SIGMOID = "logistic function 1/(1+e^-x)"
SRC_RELU = "max(0, x); Vaswani et al. 2017, arXiv 1706.03762, Eq. 2; derivative at 0 taken as 0 (common practice)"
SRC_FFN = "Vaswani et al. 2017, Attention Is All You Need, arXiv 1706.03762, sec. 3.3 Eq. 2; backward by the chain rule"
SRC_GLU = "Shazeer 2020, GLU Variants Improve Transformer, arXiv 2002.05202, Eq. 4-6; backward by the chain rule"
SRC_IDENTITY = ("identity, phi(x) = x: the activation of the Bilinear unit of Shazeer 2020, "
                "GLU Variants Improve Transformer, arXiv 2002.05202, sec. 2")
SRC_HIDDEN = "common practice: h = m * ceil((2/3 * 4d) / m) (Shazeer 2020, arXiv 2002.05202, sec. 2, for the 2/3)"


def sig(t):
    return 1 / (1 + mpmath.exp(-t))


def phi_n(x):
    return mpmath.exp(-x * x / 2) / mpmath.sqrt(2 * mpmath.pi)


def Phi(x):
    return mpmath.erfc(-x / mpmath.sqrt(2)) / 2


K_CUBIC = mpf("0.044715")
K_SIG = mpf("1.702")


def tanh_u(x):
    return mpmath.sqrt(2 / mpmath.pi) * (x + K_CUBIC * x ** 3)


# word -> (value, derivative, source); beta-parametrised ones take beta.
def acts(beta):
    return {
        IDENTITY: (lambda x: x, lambda x: mpf(1), SRC_IDENTITY),
        RELU: (lambda x: x if x > 0 else mpf(0),
               lambda x: mpf(1) if x > 0 else mpf(0), SRC_RELU),
        SIGMOID: (sig, lambda x: sig(x) * sig(-x), SRC_SIGMOID),
        SILU: (lambda x: x * sig(x),
               lambda x: sig(x) + x * sig(x) * sig(-x), SRC_SILU),
        SWISH: (lambda x: x * sig(beta * x),
                lambda x: sig(beta * x) + beta * x * sig(beta * x) * sig(-beta * x), SRC_SWISH),
        GELU: (lambda x: x * Phi(x),
               lambda x: Phi(x) + x * phi_n(x), SRC_GELU + ", exact form x*Phi(x)"),
        # 1/2 x (1 + tanh u) = x / (1 + e^{-2u})
        GELU_TANH: (lambda x: x / (1 + mpmath.exp(-2 * tanh_u(x))),
                    lambda x: sig(2 * tanh_u(x)) + x * sig(2 * tanh_u(x)) * sig(-2 * tanh_u(x)) * 2
                    * mpmath.sqrt(2 / mpmath.pi) * (1 + 3 * K_CUBIC * x * x),
                    SRC_GELU + ", tanh approximation"),
        GELU_SIGMOID: (lambda x: x * sig(K_SIG * x),
                       lambda x: sig(K_SIG * x) + K_SIG * x * sig(K_SIG * x) * sig(-K_SIG * x),
                       SRC_GELU + ", sigmoid approximation x*sigma(1.702x)"),
    }


def checked_deriv(f, df, x, name):
    """df(x), after checking it against mpmath.diff to 40 digits."""
    d = df(x)
    if name == RELU and abs(x) < mpf("1e-3"):
        return d  # the kink at 0 lies within the numerical step
    with mp.workdps(mp.dps + 30):
        num = mpmath.diff(f, x)
    err = abs(num - d)
    if err > mpf(10) ** -40 * max(abs(d), mpf(10) ** -300):
        raise AssertionError("%s'(%r): analytic %s, numeric %s" % (name, x, d, num))
    return d


def core_inputs(seed):
    r = rng(seed)
    xs = uniform(r, 48, -8.0, 8.0)
    xs += [0.0, -0.0, 1.0, -1.0, 0.5, -0.5, 2.0, -2.0, 1e-300, -1e-300,
           5e-324, -5e-324, 1e-20, -1e-20, 3.0, -3.0]
    return xs


def tail_inputs(seed, scale):
    """Inputs with 5 <= |t| <= 30 for t = scale * x (scale is Swish's
    |beta|, 1 elsewhere): the tails where values are relative-accuracy
    tests."""
    r = rng(seed)
    lo, top = 5.0 / scale, 30.0 / scale
    xs = []
    k = 5.0
    while k <= 30.0:
        xs += [k / scale, -k / scale]
        k += 2.5
    xs += uniform(r, 12, lo, top) + uniform(r, 12, -top, -lo)
    return xs


def far_inputs(seed, scale):
    """Inputs with |t| > 30 for t = scale * x, beyond the tails: where the
    tanh approximation of GELU has saturated (the Go code returns x and its
    slope 1 for t >= 30, a signed zero for t <= -30), and where every other
    activation is within a rounding of x, 1 or 0. Every value and slope here
    is either 0 or a normal float64 (no subnormal result, whose relative
    accuracy would be that of a few bits): the exact GELU underflows
    through the subnormals for t between about -37 and -38.5, and the
    sigmoids' e^{-t} for t between about 708 and 745, so the random inputs
    stay in 30 < |t| <= 36 and the fixed ones skip those ranges."""
    r = rng(seed)
    xs = []
    for k in (30.5, 31.0, 32.0, 33.0, 35.0, 36.0, 40.0, 50.0, 100.0, 1000.0):
        xs += [k / scale, -k / scale]
    xs += uniform(r, 6, 30.0 / scale, 36.0 / scale) + uniform(r, 6, -36.0 / scale, -30.0 / scale)
    return xs


# (activation word, Swish beta or None), in the order that fixes the seeds:
# case n draws its core inputs with seed 100 + n, its tail with 200 + n and
# the inputs beyond the tail with 300 + n.
ACT_CASES = [
    (RELU, None), (SIGMOID, None), (SILU, None), (GELU, None),
    (GELU_TANH, None), (GELU_SIGMOID, None),
    (SWISH, 1.0), (SWISH, 1.5), (SWISH, 0.25), (SWISH, -0.7), (SWISH, 0.0),
    (IDENTITY, None),
]


def build_activations():
    cases = []
    for n, (act, beta) in enumerate(ACT_CASES):
        f, df, src = acts(mpf(beta) if beta is not None else None)[act]
        cfg = {"function": act}
        name = label(act)
        if beta is not None:
            cfg["beta"] = beta
            name = "%s beta=%r" % (label(act), beta)
            src = SRC_SWISH
        groups = [("core", core_inputs(100 + n))]
        if act != RELU and beta != 0.0:
            scale = abs(beta) if beta is not None else 1.0
            groups.append(("tail", tail_inputs(200 + n, scale)))
            groups.append(("far", far_inputs(300 + n, scale)))
        for part, xs in groups:
            y = [f(mpf(x)) for x in xs]
            dy = [checked_deriv(f, df, mpf(x), act) for x in xs]
            c = dict(cfg)
            c["part"] = part
            cases.append(case("%s %s" % (name, part), src, c,
                              {"x": ftensor(xs, [len(xs)])},
                              {"y": ftensor(y, [len(y)]), "dydx": ftensor(dy, [len(dy)])}))
    return cases


# ---- layers -------------------------------------------------------------

def mat(vals, rows, cols):
    return [[mpf(vals[i * cols + j]) for j in range(cols)] for i in range(rows)]


def store(m, layout):
    """Flatten a logical [in][out] matrix in the given layout."""
    rows, cols = len(m), len(m[0])
    if layout == IN_BY_OUT:
        return [m[i][j] for i in range(rows) for j in range(cols)]
    if layout == OUT_BY_IN:
        return [m[i][j] for j in range(cols) for i in range(rows)]
    raise ValueError("layout %r" % layout)


def fuse_cols(w, v, packing):
    """The logical [in][2h] fused matrix from gate w and value v."""
    h = len(w[0])
    out = []
    for i in range(len(w)):
        row = [None] * (2 * h)
        for j in range(h):
            if packing == STACKED:
                row[j], row[h + j] = w[i][j], v[i][j]
            elif packing == INTERLEAVED:
                row[2 * j], row[2 * j + 1] = w[i][j], v[i][j]
            else:
                raise ValueError("packing %r" % packing)
        out.append(row)
    return out


def fuse_vec(b, c, packing):
    h = len(b)
    out = [None] * (2 * h)
    for j in range(h):
        if packing == STACKED:
            out[j], out[h + j] = b[j], c[j]
        elif packing == INTERLEAVED:
            out[2 * j], out[2 * j + 1] = b[j], c[j]
        else:
            raise ValueError("packing %r" % packing)
    return out


def matvec(x, m):
    """x (length in) times logical m [in][out]."""
    return [mpmath.fsum(x[i] * m[i][j] for i in range(len(x))) for j in range(len(m[0]))]


def layer_case(name, src, seed, act, beta, gated, layout, packing, dims, biases, scale):
    """One layer case; packing is None for separate gate and value
    matrices, or the packing word of a fused one."""
    rows, din, hid, dout = dims
    r = rng(seed)
    f, df, _ = acts(mpf(beta) if beta is not None else None)[act]
    xs = uniform(r, rows * din, -scale, scale)
    w1 = uniform(r, din * hid, -1.0, 1.0)
    b1 = uniform(r, hid, -0.5, 0.5)
    v = uniform(r, din * hid, -1.0, 1.0) if gated else None
    c = uniform(r, hid, -0.5, 0.5) if gated else None
    w2 = uniform(r, hid * dout, -1.0, 1.0)
    b2 = uniform(r, dout, -0.5, 0.5)
    dys = uniform(r, rows * dout, -1.0, 1.0)
    W1, W2 = mat(w1, din, hid), mat(w2, hid, dout)
    V = mat(v, din, hid) if gated else None
    B1 = [mpf(t) for t in b1] if biases else [mpf(0)] * hid
    C = ([mpf(t) for t in c] if biases else [mpf(0)] * hid) if gated else None
    B2 = [mpf(t) for t in b2] if biases else [mpf(0)] * dout

    y, dx = [], []
    dW1 = [[mpf(0)] * hid for _ in range(din)]
    dV = [[mpf(0)] * hid for _ in range(din)]
    dW2 = [[mpf(0)] * dout for _ in range(hid)]
    dB1, dC, dB2 = [mpf(0)] * hid, [mpf(0)] * hid, [mpf(0)] * dout
    for rr in range(rows):
        x = [mpf(t) for t in xs[rr * din:(rr + 1) * din]]
        dy = [mpf(t) for t in dys[rr * dout:(rr + 1) * dout]]
        a = [s + bb for s, bb in zip(matvec(x, W1), B1)]
        if gated:
            u = [s + cc for s, cc in zip(matvec(x, V), C)]
            h = [f(a[j]) * u[j] for j in range(hid)]
        else:
            h = [f(a[j]) for j in range(hid)]
        y += [s + bb for s, bb in zip(matvec(h, W2), B2)]
        # backward
        dh = [mpmath.fsum(W2[j][k] * dy[k] for k in range(dout)) for j in range(hid)]
        for j in range(hid):
            for k in range(dout):
                dW2[j][k] += h[j] * dy[k]
        for k in range(dout):
            dB2[k] += dy[k]
        if gated:
            da = [dh[j] * u[j] * df(a[j]) for j in range(hid)]
            du = [dh[j] * f(a[j]) for j in range(hid)]
        else:
            da = [dh[j] * df(a[j]) for j in range(hid)]
            du = [mpf(0)] * hid
        for j in range(hid):
            dB1[j] += da[j]
            dC[j] += du[j]
            for i in range(din):
                dW1[i][j] += x[i] * da[j]
                dV[i][j] += x[i] * du[j]
        for i in range(din):
            s = mpmath.fsum(W1[i][j] * da[j] for j in range(hid))
            if gated:
                s += mpmath.fsum(V[i][j] * du[j] for j in range(hid))
            dx.append(s)

    cfg = {"activation": act}
    if beta is not None:
        cfg["beta"] = beta
    cfg.update({"gated": gated, "layout": layout, "storage": "separate" if packing is None else "fused"})
    if packing is not None:
        cfg["packing"] = packing
    cfg.update({"rows": rows, "in": din, "hidden": hid, "out": dout, "biases": biases})
    inputs = {"x": ftensor(xs, [rows, din]), "dy": ftensor(dys, [rows, dout])}
    outputs = {"y": ftensor(y, [rows, dout]), "dx": ftensor(dx, [rows, din])}
    shape_w = [din, hid] if layout == IN_BY_OUT else [hid, din]
    shape_f = [din, 2 * hid] if layout == IN_BY_OUT else [2 * hid, din]
    shape_w2 = [hid, dout] if layout == IN_BY_OUT else [dout, hid]
    inputs["w2"] = ftensor(store(W2, layout), shape_w2)
    outputs["dw2"] = ftensor(store(dW2, layout), shape_w2)
    outputs["db2"] = ftensor(dB2, [dout])
    if biases:
        inputs["b2"] = ftensor(B2, [dout])
    if packing is not None:
        p = packing
        inputs["fused"] = ftensor(store(fuse_cols(W1, V, p), layout), shape_f)
        outputs["dfused"] = ftensor(store(fuse_cols(dW1, dV, p), layout), shape_f)
        outputs["dfused_bias"] = ftensor(fuse_vec(dB1, dC, p), [2 * hid])
        if biases:
            inputs["fused_bias"] = ftensor(fuse_vec(B1, C, p), [2 * hid])
    else:
        inputs["w1"] = ftensor(store(W1, layout), shape_w)
        outputs["dw1"] = ftensor(store(dW1, layout), shape_w)
        outputs["db1"] = ftensor(dB1, [hid])
        if biases:
            inputs["b1"] = ftensor(B1, [hid])
        if gated:
            inputs["v"] = ftensor(store(V, layout), shape_w)
            outputs["dv"] = ftensor(store(dV, layout), shape_w)
            outputs["dc"] = ftensor(dC, [hid])
            if biases:
                inputs["c"] = ftensor(C, [hid])
    return case(name, src, cfg, inputs, outputs)


LAYOUTS = [IN_BY_OUT, OUT_BY_IN]
PLAIN_ACTS = [(RELU, None), (GELU, None), (GELU_TANH, None), (GELU_SIGMOID, None),
              (SIGMOID, None), (SILU, None), (SWISH, 1.5), (IDENTITY, None)]


def build_plain():
    cases = []
    seed = 1000
    for act, beta in PLAIN_ACTS:
        for layout in LAYOUTS:
            for biases in (True, False):
                seed += 1
                lab = label(act) if beta is None else "%s beta=%r" % (label(act), beta)
                name = "%s %s %s" % (lab, label(layout), "biases" if biases else "no biases")
                cases.append(layer_case(name, SRC_FFN, seed, act, beta, False, layout, None,
                                        (3, 5, 6, 4), biases, 2.0))
    # wide inputs push pre-activations into the tails
    for act in (GELU, SILU):
        seed += 1
        cases.append(layer_case("%s %s wide inputs" % (label(act), label(IN_BY_OUT)), SRC_FFN, seed, act, None, False,
                                IN_BY_OUT, None, (2, 4, 5, 3), True, 12.0))
    return cases


GATED = [("GLU", SIGMOID, None), ("Bilinear", IDENTITY, None), ("ReGLU", RELU, None),
         ("GEGLU", GELU, None), ("GEGLU tanh", GELU_TANH, None),
         ("GEGLU sigmoid", GELU_SIGMOID, None), ("SwiGLU", SILU, None),
         ("SwiGLU beta=1.5", SWISH, 1.5)]
# storage in case names -> packing word (None: separate W and V)
STORAGES = [("separate", None), ("fused stacked", STACKED), ("fused interleaved", INTERLEAVED)]


def build_gated():
    cases = []
    seed = 2000
    for unit, act, beta in GATED:
        for layout in LAYOUTS:
            for storage, packing in STORAGES:
                seed += 1
                biases = packing != INTERLEAVED or layout == IN_BY_OUT
                name = "%s %s %s%s" % (unit, label(layout), storage, "" if biases else " no biases")
                cases.append(layer_case(name, SRC_GLU, seed, act, beta, True, layout,
                                        packing, (3, 5, 6, 4), biases, 2.0))
    return cases


def build_hidden_size():
    cases = []
    for d, m in [(4096, 256), (4096, 1), (512, 1), (768, 64), (1, 1), (1, 256),
                 (5120, 256), (8192, 128), (3, 7), (12288, 256)]:
        q = -((-8 * d) // (3 * m))  # exact ceil(8d / 3m) in integers
        cases.append(case("d=%d m=%d" % (d, m), SRC_HIDDEN, {},
                          {"d": itensor([d], [1]), "m": itensor([m], [1])},
                          {"hidden": itensor([q * m], [1])}))
    return cases


FAMILIES = families("ffn", build_activations, build_plain, build_gated, build_hidden_size)
