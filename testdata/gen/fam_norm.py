"""Golden vectors for package norm: LayerNorm, RMSNorm and the fused
residual add, forward and backward.

Each formula is implemented here again from its published definition, at
common.DIGITS significant digits, on the exact float64 inputs:

  LayerNorm  Ba, Kiros & Hinton 2016, arXiv 1607.06450, section 3,
             Eq. (3)-(4): mu = mean, sigma^2 = biased variance; gain and
             bias as in section 3.1; epsilon inside the root is common
             practice, epsilon added to the root the other common form.
  RMSNorm    Zhang & Sennrich 2019, arXiv 1910.07467, the definition:
             a_i / RMS(a) * g_i, RMS(a) = sqrt(mean(a^2)); the epsilon
             placements and the (1 + w) gain are common practice.

The statistics are taken directly, mean then squared deviations, in
mpmath: at 50 digits no cancellation of float64 inputs can matter (an
offset of 1e8 and a spread of 1 lose 8 of the 50 digits).

Derivatives are not written from a closed form: the forward definition is
run on dual numbers (value, tangent), forward-mode differentiation, one
pass per input element for dx. The weight and bias enter y_j only through
w_j and b_j, so one pass with every weight (or bias) tangent set to 1 gives
the diagonal of their Jacobian. The fused residual add rounds the sum to
float64 first (that rounding is part of the function's contract: the new
residual stream is a float64 tensor), then normalises it; its gradient with
respect to x and to the residual is dsum + J^T dy with J the Jacobian of
the norm at the rounded sum.
"""

from mpmath import mpf, sqrt as msqrt

from common import families, case, ftensor, rng, uniform, word

# The words of the Go conventions (testdata/gen/vocabulary.json). Case names
# keep their older spellings (in_root, as_is, one_plus, none); the configs
# hold the words, under the keys of the norm operations (ops/norm.go).
IN_ROOT = word("norm.EpsilonPlacement", "in-root")
ADDED_TO_ROOT = word("norm.EpsilonPlacement", "added-to-root")
AS_IS = word("norm.WeightForm", "as-is")
ONE_PLUS = word("norm.WeightForm", "one-plus")

# The placement and weight spellings of the case names, and what they mean:
# a placement word, or (whether there is a weight, its form). "none" is a
# layer without a weight tensor (gain 1); its weight_form is the default.
PLACEMENT = {"in_root": IN_ROOT, "added_to_root": ADDED_TO_ROOT}
WEIGHT = {"none": (False, AS_IS), "as_is": (True, AS_IS), "one_plus": (True, ONE_PLUS)}

SRC_LN = ("Ba, Kiros & Hinton 2016, Layer Normalization, arXiv 1607.06450, "
          "sec. 3 Eq. (3)-(4) and sec. 3.1; epsilon placement common practice")
SRC_RMS = ("Zhang & Sennrich 2019, Root Mean Square Layer Normalization, "
           "arXiv 1910.07467, a_i / RMS(a) * g_i; epsilon placement and 1+w gain "
           "common practice")
SRC_ADD = ("residual add then normalisation (pre-norm block): Xiong et al. 2020, "
           "arXiv 2002.04745; the norm as in ")


class Dual:
    """A value and its derivative along one direction."""
    __slots__ = ("v", "t")

    def __init__(self, v, t=0):
        self.v = mpf(v)
        self.t = mpf(t)

    @staticmethod
    def of(a):
        return a if isinstance(a, Dual) else Dual(a, 0)

    def __add__(self, o):
        o = Dual.of(o)
        return Dual(self.v + o.v, self.t + o.t)

    __radd__ = __add__

    def __sub__(self, o):
        o = Dual.of(o)
        return Dual(self.v - o.v, self.t - o.t)

    def __rsub__(self, o):
        return Dual.of(o) - self

    def __mul__(self, o):
        o = Dual.of(o)
        return Dual(self.v * o.v, self.t * o.v + self.v * o.t)

    __rmul__ = __mul__

    def __truediv__(self, o):
        o = Dual.of(o)
        return Dual(self.v / o.v, (self.t * o.v - self.v * o.t) / (o.v * o.v))

    def __rtruediv__(self, o):
        return Dual.of(o) / self


def dsqrt(a):
    if not isinstance(a, Dual):
        return msqrt(a)
    r = msqrt(a.v)
    if r == 0:
        # sqrt of a zero mean square: its tangent is 0 too (the mean square
        # is quadratic in the deviations), and the root only reaches the
        # output multiplied by a zero deviation, so any finite value gives
        # the same derivative; 0 is used.
        return Dual(0, 0)
    return Dual(r, a.t / (2 * r))


def norm_row(x, w, b, cfg):
    """One row of the forward definition, on mpf or Dual values."""
    d = len(x)
    if cfg["kind"] == "layer":
        mu = sum(x[1:], x[0]) / d
        dev = [xi - mu for xi in x]
    else:
        dev = list(x)
    s2 = sum((v * v for v in dev[1:]), dev[0] * dev[0]) / d
    eps = mpf(cfg["epsilon"])
    if cfg["epsilon_placement"] == IN_ROOT:
        r = dsqrt(s2 + eps)
    elif cfg["epsilon_placement"] == ADDED_TO_ROOT:
        r = dsqrt(s2) + eps
    else:
        raise ValueError("epsilon placement %r" % cfg["epsilon_placement"])
    out = []
    for j in range(d):
        if not cfg["weighted"]:
            g = 1
        elif cfg["weight_form"] == AS_IS:
            g = w[j]
        elif cfg["weight_form"] == ONE_PLUS:
            g = 1 + w[j]
        else:
            raise ValueError("weight form %r" % cfg["weight_form"])
        y = g * dev[j] / r
        if b is not None:
            y = y + b[j]
        out.append(y)
    return out


def value(v):
    return v.v if isinstance(v, Dual) else v


def compute(cfg, x, w, b, dy, backward):
    """Forward over all rows, and with backward the gradients."""
    d = cfg["d"]
    rows = len(x) // d
    W = [mpf(v) for v in w] if w is not None else None
    B = [mpf(v) for v in b] if b is not None else None
    y, dx = [], []
    dw = [mpf(0)] * d
    db = [mpf(0)] * d
    for r in range(rows):
        xr = [mpf(v) for v in x[r * d:(r + 1) * d]]
        y += norm_row(xr, W, B, cfg)
        if not backward:
            continue
        dyr = [mpf(v) for v in dy[r * d:(r + 1) * d]]
        for k in range(d):
            xd = [Dual(v, 1 if i == k else 0) for i, v in enumerate(xr)]
            yd = norm_row(xd, W, B, cfg)
            dx.append(sum(dyr[i] * yd[i].t for i in range(d)))
        if W is not None:
            yd = norm_row(xr, [Dual(v, 1) for v in W], B, cfg)
            dw = [dw[j] + dyr[j] * yd[j].t for j in range(d)]
        # The bias gradient does not depend on whether the layer has a
        # bias: without one it is taken at b = 0.
        yd = norm_row(xr, W, [Dual(v, 1) for v in (B or [0] * d)], cfg)
        db = [db[j] + dyr[j] * yd[j].t for j in range(d)]
    return y, dx, dw, db


def make(name, cfg, x, w=None, b=None, dy=None, residual=None, dsum=None, backward=True):
    """One case. cfg keys: kind, d, epsilon, epsilon_placement, weighted,
    weight_form, and bias (LayerNorm only)."""
    d = cfg["d"]
    rows = len(x) // d
    shape = [rows, d]
    inputs = {"x": ftensor(x, shape)}
    outputs = {}
    h = x
    if residual is not None:
        inputs["residual"] = ftensor(residual, shape)
        h = [a + c for a, c in zip(x, residual)]  # float64 adds: rounded once
        outputs["sum"] = ftensor(h, shape)
    if w is not None:
        inputs["weight"] = ftensor(w, [d])
    if b is not None:
        inputs["bias"] = ftensor(b, [d])
    if backward:
        inputs["dy"] = ftensor(dy, shape)
        if dsum is not None:
            inputs["dsum"] = ftensor(dsum, shape)
    y, dx, dw, db = compute(cfg, h, w, b, dy, backward)
    outputs["y"] = ftensor(y, shape)
    if backward:
        if dsum is not None:
            dx = [g + mpf(s) for g, s in zip(dx, dsum)]
        outputs["dx"] = ftensor(dx, shape)
        if w is not None:
            outputs["dweight"] = ftensor(dw, [d])
        if cfg["kind"] == "layer":
            outputs["dbias"] = ftensor(db, [d])
    src = SRC_LN if cfg["kind"] == "layer" else SRC_RMS
    if residual is not None:
        src = SRC_ADD + ("LayerNorm: " + SRC_LN if cfg["kind"] == "layer" else "RMSNorm: " + SRC_RMS)
    return case(name, src, cfg, inputs, outputs)


def config(kind, d, eps, placement="in_root", weight="none", bias=False):
    """A config from the case-name spellings of placement and weight."""
    weighted, form = WEIGHT[weight]
    c = {"kind": kind, "d": d, "epsilon": eps, "epsilon_placement": PLACEMENT[placement],
         "weighted": weighted, "weight_form": form}
    if kind == "layer":
        c["bias"] = bias
    return c


def params(r, cfg):
    """Random weight and bias for a configuration (None where absent)."""
    d = cfg["d"]
    w = None
    if cfg["weighted"] and cfg["weight_form"] == AS_IS:
        w = uniform(r, d, 0.5, 1.5)
    elif cfg["weighted"]:
        w = uniform(r, d, -0.5, 0.5)
    b = uniform(r, d, -0.5, 0.5) if cfg.get("bias") else None
    return w, b


def scaled(r, n, scale, lo=-1.0, hi=1.0):
    """n float64 values uniform in [lo, hi) times scale, each product
    rounded to float64 (these floats are the inputs)."""
    return [v * scale for v in uniform(r, n, lo, hi)]


def grid(kind, seed):
    """Every option combination on a small random tensor, 3 rows of 8."""
    out = []
    r = rng(seed)
    biases = [False, True] if kind == "layer" else [False]
    for placement in ("in_root", "added_to_root"):
        for weight in ("none", "as_is", "one_plus"):
            for bias in biases:
                cfg = config(kind, 8, 1e-5, placement, weight, bias)
                x = uniform(r, 24, -2.0, 2.0)
                w, b = params(r, cfg)
                dy = uniform(r, 24)
                name = "grid/%s/%s%s" % (placement, weight, "/bias" if bias else "")
                out.append(make(name, cfg, x, w, b, dy))
    return out


def special(kind, seed, name, d, rows, eps, placement, gen_x, weight="as_is", bias=True, backward=True):
    r = rng(seed)
    cfg = config(kind, d, eps, placement, weight, bias)
    x = gen_x(r)
    assert len(x) == d * rows
    w, b = params(r, cfg)
    dy = uniform(r, d * rows) if backward else None
    return make(name, cfg, x, w, b, dy, backward=backward)


def small_rows(kind, seed):
    """Rows of 1, 2 and 3 elements under both placements and epsilons down
    to 1e-30: where the deviations span one dimension (LayerNorm of two
    elements, RMSNorm of one) dy is always parallel to the normalised row,
    the part of the gradient that epsilon scales. The first row of each
    LayerNorm d = 2 case is x = [0, 1], dy = [1, 0]."""
    out = []
    r = rng(seed)
    for d in (1, 2, 3):
        for placement in ("in_root", "added_to_root"):
            for eps in (1e-5, 1e-12, 1e-30):
                cfg = config(kind, d, eps, placement)
                x, dy = uniform(r, 3 * d, -2.0, 2.0), uniform(r, 3 * d)
                if kind == "layer" and d == 2:
                    x[:2], dy[:2] = [0.0, 1.0], [1.0, 0.0]
                out.append(make("small/d%d/eps%g/%s" % (d, eps, placement), cfg, x, dy=dy))
    return out


def build_layernorm():
    out = grid("layer", 101) + small_rows("layer", 111)
    # The worked value of the norm package documentation (computed there with
    # mpmath): x = [1,2,3,4], eps = 1e-5, no gain or bias.
    out.append(make("worked/1234", config("layer", 4, 1e-5), [1.0, 2.0, 3.0, 4.0],
                    dy=[0.25, -0.5, 1.0, 0.125]))
    for eps in (1e-5, 1e-12):
        for placement in ("in_root", "added_to_root"):
            out.append(special("layer", 102, "offset1e8/eps%g/%s" % (eps, placement), 64, 3, eps, placement,
                               lambda r: [1e8 + v for v in uniform(r, 192, -0.5, 0.5)]))
    out.append(special("layer", 103, "offset-1e8-spread1/eps1e-5", 32, 2, 1e-5, "in_root",
                       lambda r: [-1e8 + v for v in uniform(r, 64, -0.5, 0.5)]))
    const = [5.0] * 8 + [1e8] * 8 + [0.0] * 8 + [-3.25] * 8
    for placement in ("in_root", "added_to_root"):
        out.append(special("layer", 104, "constant-rows/%s" % placement, 8, 4, 1e-5, placement,
                           lambda r: list(const)))
    out.append(special("layer", 105, "single-element-rows", 1, 5, 1e-5, "in_root",
                       lambda r: uniform(r, 5, -3.0, 3.0)))
    for eps, placement in ((1e-300, "in_root"), (1e-310, "added_to_root"), (1e-290, "added_to_root")):
        out.append(special("layer", 106, "tiny1e-300/eps%g/%s" % (eps, placement), 16, 2, eps, placement,
                           lambda r: scaled(r, 32, 1e-300)))
    out.append(special("layer", 107, "tiny1e-160/eps1e-322/in_root", 16, 2, 1e-322, "in_root",
                       lambda r: scaled(r, 32, 1e-160)))
    out.append(special("layer", 108, "huge1e200", 16, 2, 1e-5, "in_root",
                       lambda r: scaled(r, 32, 1e200)))
    out.append(special("layer", 109, "epsilon-dominates", 16, 2, 1.0, "in_root",
                       lambda r: scaled(r, 32, 1e-3)))
    out.append(special("layer", 110, "wide/d1024", 1024, 2, 1e-5, "in_root",
                       lambda r: uniform(r, 2048, -3.0, 3.0), backward=False))
    return out


def build_rmsnorm():
    out = grid("rms", 201) + small_rows("rms", 211)
    # The worked value of the norm package documentation (computed there with
    # mpmath): x = [1,2,3,4], eps = 0 in the source. eps = 2^-1074
    # is the smallest allowed; here it changes mean(x^2) = 7.5 by a relative
    # 6e-325, far below what any float64 output can show.
    out.append(make("worked/1234", config("rms", 4, 5e-324), [1.0, 2.0, 3.0, 4.0],
                    dy=[0.25, -0.5, 1.0, 0.125]))
    # Near 1e-300 the squares (1e-600) underflow to 0 in float64. With eps in
    # the root every representable eps dominates them; with eps added to the
    # root, eps = 1e-310 is small beside RMS ~ 5e-301 and a naive kernel is
    # off by orders of magnitude, while eps = 1e-290 dominates.
    for eps, placement in ((5e-324, "in_root"), (1e-310, "added_to_root"), (1e-290, "added_to_root")):
        out.append(special("rms", 202, "tiny1e-300/eps%g/%s" % (eps, placement), 16, 2, eps, placement,
                           lambda r: scaled(r, 32, 1e-300), bias=False))
    # Near 1e-160 the squares are subnormal (about 1e-320) and comparable to
    # eps = 1e-322: eps inside the root matters, and naive squares keep only
    # a few bits.
    out.append(special("rms", 203, "tiny1e-160/eps1e-322/in_root", 16, 2, 1e-322, "in_root",
                       lambda r: scaled(r, 32, 1e-160), bias=False))
    out.append(special("rms", 204, "huge1e200", 16, 2, 1e-5, "in_root",
                       lambda r: scaled(r, 32, 1e200), bias=False))
    out.append(special("rms", 205, "huge1e200/added_to_root", 16, 2, 1e-5, "added_to_root",
                       lambda r: scaled(r, 32, 1e200), bias=False))
    out.append(special("rms", 206, "mixed-magnitudes", 8, 3, 1e-6, "in_root",
                       lambda r: [v * 10.0 ** r.randint(-300, 300) for v in uniform(r, 24)], bias=False))
    zero = [0.0] * 8 + [1.0] * 8
    for placement in ("in_root", "added_to_root"):
        out.append(special("rms", 207, "zero-row/%s" % placement, 8, 2, 1e-5, placement,
                           lambda r: list(zero), bias=False))
    out.append(special("rms", 208, "epsilon-dominates", 16, 2, 1.0, "in_root",
                       lambda r: scaled(r, 32, 1e-3), bias=False))
    out.append(special("rms", 209, "offset1e8", 32, 2, 1e-5, "in_root",
                       lambda r: [1e8 + v for v in uniform(r, 64, -0.5, 0.5)], bias=False))
    out.append(special("rms", 210, "single-element-rows", 1, 5, 1e-5, "added_to_root",
                       lambda r: uniform(r, 5, -3.0, 3.0), bias=False))
    out.append(special("rms", 211, "wide/d1024", 1024, 2, 1e-5, "in_root",
                       lambda r: uniform(r, 2048, -3.0, 3.0), bias=False, backward=False))
    return out


def build_addnorm():
    out = []
    r = rng(301)
    for kind in ("layer", "rms"):
        for placement, weight, with_dsum in (("in_root", "as_is", True), ("added_to_root", "one_plus", False)):
            cfg = config(kind, 16, 1e-6, placement, weight, kind == "layer")
            x = uniform(r, 48, -1.0, 1.0)
            res = uniform(r, 48, -4.0, 4.0)
            w, b = params(r, cfg)
            dy = uniform(r, 48)
            dsum = uniform(r, 48) if with_dsum else None
            name = "%s/%s/%s%s" % (kind, placement, weight, "/dsum" if with_dsum else "")
            out.append(make(name, cfg, x, w, b, dy, residual=res, dsum=dsum))
    return out


FAMILIES = families("norm", build_layernorm, build_rmsnorm, build_addnorm)
