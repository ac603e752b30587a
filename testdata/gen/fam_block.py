"""Golden vectors for the block package.

One decoder block is composed here from the generator's own per-layer
formulas, each written from its published definition in its family and
imported, not from the Go code:

  * the norms: fam_norm.norm_row (LayerNorm, Ba, Kiros & Hinton 2016, arXiv
    1607.06450; RMSNorm, Zhang & Sennrich 2019, arXiv 1910.07467);
  * the projections x W + b: fam_ffn.matvec, an exact sum;
  * rotary encoding: fam_posenc.scaled_freqs and fam_posenc.rotate (Su et
    al. 2021, arXiv 2104.09864, Eq. (34); scalings as fam_posenc cites);
  * attention: fam_attention.attend (Vaswani et al. 2017, arXiv 1706.03762,
    Sec. 3.2; GQA, soft-cap, sinks, ALiBi and masks as fam_attention cites),
    over the past keys and values followed by the new ones, the queries at
    positions past + t;
  * the feed-forward layer: fam_ffn.acts and matvec (Vaswani et al. 2017,
    Sec. 3.3 Eq. (2); gated units Shazeer 2020, arXiv 2002.05202, Eq. (4)-(6)).

The forms (block/doc.go):
  pre-norm  (Xiong et al. 2020, arXiv 2002.04745, Fig. 1(b)):
      h = x + Attn(N1(x)),  y = h + FFN(N2(h))
  post-norm (Vaswani et al. 2017, Sec. 3.1, LayerNorm(x + Sublayer(x))):
      h = N1(x + Attn(x)),  y = N2(h + FFN(h))
  parallel  (common practice):
      y = x + Attn(N1(x)) + FFN(N1(x))

Every intermediate stays at DIGITS digits; only out, present_k and
present_v are rounded, once each, to float64.
"""

from mpmath import mpf

from common import families, case, ftensor, rng, uniform, word
from fam_attention import attend, SEQ_MAJOR, BLOCKS, CYCLE, ALIBI_CAUSAL
from fam_ffn import acts, matvec, mat, IN_BY_OUT, OUT_BY_IN, GELU, SILU, RELU
from fam_mask import causal, window, END, START
from fam_norm import norm_row, IN_ROOT, ADDED_TO_ROOT, AS_IS, ONE_PLUS
from fam_posenc import scaled_freqs, rotate, ADJACENT, HALVES, INTERPOLATION, YARN

PRE, POST, PARALLEL = word("block.Form", "pre-norm", "post-norm", "parallel")
LAYER, RMS = word("block.NormKind", "layer-norm", "rms-norm")

SRC_PRE = "pre-norm block: Xiong et al. 2020, arXiv 2002.04745, Fig. 1(b)"
SRC_POST = "post-norm block: Vaswani et al. 2017, arXiv 1706.03762, Sec. 3.1"
SRC_PARALLEL = "parallel attention and feed-forward from one norm: common practice"
SRC_PARTS = ("; attention Vaswani et al. 2017 Sec. 3.2; rotary Su et al. 2021, arXiv 2104.09864; "
             "feed-forward Vaswani et al. 2017 Sec. 3.3, gated Shazeer 2020, arXiv 2002.05202")
SOURCE = {PRE: SRC_PRE + SRC_PARTS, POST: SRC_POST + SRC_PARTS, PARALLEL: SRC_PARALLEL + SRC_PARTS}


def logical(flat, rows, cols, order):
    """The logical [rows][cols] matrix (in by out) of a stored weight."""
    if order == IN_BY_OUT:
        return mat(flat, rows, cols)
    return [[mpf(flat[j * rows + i]) for j in range(cols)] for i in range(rows)]


def project(x, rows, din, dout, w, b, order):
    """x [rows, din] times the weight w, plus b (None for none)."""
    W = logical(w, din, dout, order)
    out = []
    for r in range(rows):
        y = matvec([mpf(v) for v in x[r * din:(r + 1) * din]], W)
        if b is not None:
            y = [s + mpf(c) for s, c in zip(y, b)]
        out += y
    return out


def normalise(cfg, x, w, b):
    """The block's norm over each row of x."""
    d = cfg["width"]
    ncfg = {"kind": "layer" if cfg["norm_kind"] == LAYER else "rms", "epsilon": cfg["epsilon"],
            "epsilon_placement": cfg["epsilon_placement"], "weighted": w is not None,
            "weight_form": cfg["weight_form"]}
    W = [mpf(v) for v in w] if w is not None else None
    B = [mpf(v) for v in b] if b is not None else None
    out = []
    for r in range(len(x) // d):
        out += norm_row([mpf(v) for v in x[r * d:(r + 1) * d]], W, B, ncfg)
    return out


def block(cfg, ins):
    """out, present_k, present_v of one block call, at DIGITS digits."""
    T, Wd, H, G, D = cfg["tokens"], cfg["width"], cfg["heads"], cfg["heads_kv"], cfg["head_dim"]
    P, hid, order = cfg["past"], cfg["hidden"], cfg["weight_order"]
    g = ins.get
    x = [mpf(v) for v in ins["x"]]

    def attn(a):
        q = project(a, T, Wd, H * D, ins["wq"], g("bq"), order)
        k = project(a, T, Wd, G * D, ins["wk"], g("bk"), order)
        v = project(a, T, Wd, G * D, ins["wv"], g("bv"), order)
        rc = cfg.get("rotary")
        if rc is not None:
            r = rc.get("rotated") or D
            theta = scaled_freqs(r, rc.get("base", 10000.0), rc.get("scaling", {}))
            mag = mpf(rc.get("magnitude", 1.0))
            q = sum((rotate(q[i * D:(i + 1) * D], D, r, rc["pairing"], theta, P + i // H, mag, False)
                     for i in range(T * H)), [])
            k = sum((rotate(k[i * D:(i + 1) * D], D, r, rc["pairing"], theta, P + i // G, mag, False)
                     for i in range(T * G)), [])
        K = [mpf(t) for t in ins.get("past_k", [])] + k
        V = [mpf(t) for t in ins.get("past_v", [])] + v
        acfg = {"batch": 1, "heads_q": H, "heads_kv": G, "lq": T, "lk": P + T, "dk": D, "dv": D,
                "layout": SEQ_MAJOR, "group": cfg.get("group", BLOCKS), "mask": cfg.get("mask", []),
                "align": cfg.get("align", END), "offset": P if cfg.get("align", END) == START else 0}
        for key in ("soft_cap", "scale", "alibi_form"):
            if key in cfg:
                acfg[key] = cfg[key]
        ains = {"q": q, "k": K, "v": V, "d_out": [0.0] * (T * H * D)}
        for key in ("sinks", "slopes"):
            if key in ins:
                ains[key] = ins[key]
        o = attend(acfg, ains)["out"]
        return project(o, T, H * D, Wd, ins["wo"], g("bo"), order), K, V

    phi = acts(mpf(cfg.get("beta", 0)))[cfg["activation"]][0]

    def ffn(f):
        out = []
        W1 = logical(ins["w1"], Wd, hid, order)
        W2 = logical(ins["w2"], hid, Wd, order)
        Vm = logical(ins["v"], Wd, hid, order) if cfg["gated"] else None
        for r in range(T):
            row = f[r * Wd:(r + 1) * Wd]
            a = matvec(row, W1)
            if "b1" in ins:
                a = [s + mpf(c) for s, c in zip(a, ins["b1"])]
            u = [phi(s) for s in a]
            if cfg["gated"]:
                z = matvec(row, Vm)
                if "c" in ins:
                    z = [s + mpf(c) for s, c in zip(z, ins["c"])]
                u = [p * s for p, s in zip(u, z)]
            y = matvec(u, W2)
            if "b2" in ins:
                y = [s + mpf(c) for s, c in zip(y, ins["b2"])]
            out += y
        return out

    form = cfg["form"]
    n1 = lambda t: normalise(cfg, t, g("norm1"), g("norm1_bias"))  # noqa: E731
    n2 = lambda t: normalise(cfg, t, g("norm2"), g("norm2_bias"))  # noqa: E731
    a = x if form == POST else n1(x)
    ao, K, V = attn(a)
    r1 = [s + t for s, t in zip(x, ao)]
    if form == PRE:
        h, f = r1, n2(r1)
    elif form == POST:
        h = n1(r1)
        f = h
    else:
        h, f = r1, a
    y = [s + t for s, t in zip(h, ffn(f))]
    if form == POST:
        y = n2(y)
    return y, K, V


def make(name, seed, form, kind, order, tokens=3, width=8, heads=2, heads_kv=2, head_dim=4, hidden=12,
         past=0, biases=False, gated=False, act=GELU, rotary=None, extras=None, eps=1e-5,
         placement=IN_ROOT, weight_form=AS_IS):
    r = rng(seed)
    nq, nkv = heads * head_dim, heads_kv * head_dim
    cfg = {"form": form, "norm_kind": kind, "epsilon": eps, "epsilon_placement": placement,
           "weight_form": weight_form, "weight_order": order, "tokens": tokens, "width": width,
           "heads": heads, "heads_kv": heads_kv, "head_dim": head_dim, "hidden": hidden, "past": past,
           "activation": act, "gated": gated, "mask": [causal()]}
    if rotary is not None:
        cfg["rotary"] = rotary
    ins = {"x": (uniform(r, tokens * width), [tokens, width])}
    shapes = {"wq": (width, nq), "wk": (width, nkv), "wv": (width, nkv), "wo": (nq, width),
              "w1": (width, hidden), "w2": (hidden, width)}
    if gated:
        shapes["v"] = (width, hidden)
    ins["norm1"] = (uniform(r, width, 0.5, 1.5), [width])
    if form != PARALLEL:
        ins["norm2"] = (uniform(r, width, 0.5, 1.5), [width])
    for n, (a, b) in shapes.items():
        st = [a, b] if order == IN_BY_OUT else [b, a]
        ins[n] = (uniform(r, a * b, -0.5, 0.5), st)
    if biases:
        for n, m in (("bq", nq), ("bk", nkv), ("bv", nkv), ("bo", width), ("b1", hidden), ("b2", width)):
            ins[n] = (uniform(r, m, -0.1, 0.1), [m])
        if gated:
            ins["c"] = (uniform(r, hidden, -0.1, 0.1), [hidden])
        if kind == LAYER:
            ins["norm1_bias"] = (uniform(r, width, -0.1, 0.1), [width])
            if form != PARALLEL:
                ins["norm2_bias"] = (uniform(r, width, -0.1, 0.1), [width])
    if past > 0:
        ins["past_k"] = (uniform(r, past * nkv), [past, heads_kv, head_dim])
        ins["past_v"] = (uniform(r, past * nkv), [past, heads_kv, head_dim])
    for key, val in (extras or {}).items():
        if key in ("sinks", "slopes"):
            ins[key] = (val, [heads])
        else:
            cfg[key] = val
    y, K, V = block(cfg, {k: v for k, (v, _) in ins.items()})
    inputs = {k: ftensor(v, s) for k, (v, s) in ins.items()}
    outputs = {"out": ftensor(y, [tokens, width]),
               "present_k": ftensor(K, [past + tokens, heads_kv, head_dim]),
               "present_v": ftensor(V, [past + tokens, heads_kv, head_dim])}
    return case(name, SOURCE[form], cfg, inputs, outputs)


def slopes(h):
    """ALiBi slopes 2^(-8k/h), k = 1..h (Press et al. 2022, arXiv 2108.12409, Sec. 3)."""
    return [2.0 ** (-8.0 * k / h) for k in range(1, h + 1)]


def build_pre_norm():
    return [
        make("layer_norm_biases_gelu", 9100, PRE, LAYER, IN_BY_OUT, biases=True),
        make("rms_gated_silu_gqa_rotary", 9101, PRE, RMS, IN_BY_OUT, heads=4, heads_kv=2, gated=True, act=SILU,
             rotary={"rotated": 4, "base": 10000.0, "pairing": ADJACENT}),
        make("rms_width16_one_plus_added_to_root", 9102, PRE, RMS, IN_BY_OUT, width=16, heads=4, heads_kv=1,
             hidden=24, gated=True, act=SILU, placement=ADDED_TO_ROOT, weight_form=ONE_PLUS,
             rotary={"rotated": 4, "base": 10000.0, "pairing": HALVES}),
    ]


def build_post_norm():
    return [
        make("layer_norm_biases_relu", 9200, POST, LAYER, IN_BY_OUT, biases=True, act=RELU),
        make("rms_gated_out_by_in", 9201, POST, RMS, OUT_BY_IN, gated=True, act=SILU, heads=4, heads_kv=2),
    ]


def build_parallel():
    return [
        make("layer_norm_biases", 9300, PARALLEL, LAYER, IN_BY_OUT, biases=True),
        make("rms_gated_gqa_cycle_partial_rotary", 9301, PARALLEL, RMS, IN_BY_OUT, heads=4, heads_kv=2,
             gated=True, act=SILU, extras={"group": CYCLE},
             rotary={"rotated": 2, "base": 10000.0, "pairing": HALVES}),
    ]


def build_cache():
    return [
        make("past4_rms_gated_gqa_rotary", 9400, PRE, RMS, IN_BY_OUT, past=4, heads=4, heads_kv=1, gated=True,
             act=SILU, rotary={"rotated": 4, "base": 500.0, "pairing": ADJACENT}),
        make("past3_one_token_interpolation_softcap_sinks", 9401, PRE, RMS, IN_BY_OUT, tokens=1, past=3,
             heads=4, heads_kv=2, gated=True, act=SILU,
             rotary={"rotated": 4, "base": 10000.0, "pairing": HALVES,
                     "scaling": {"method": INTERPOLATION, "factor": 4.0}},
             extras={"soft_cap": 2.0, "sinks": [0.5, -0.25, 1.0, 0.0]}),
        make("past2_alibi_align_start_window_biases", 9402, PRE, LAYER, IN_BY_OUT, past=2, biases=True,
             extras={"align": START, "alibi_form": ALIBI_CAUSAL, "slopes": slopes(2), "mask": [window(3)]}),
        make("past3_yarn_magnitude_out_by_in", 9403, POST, RMS, OUT_BY_IN, past=3, heads=4, heads_kv=2,
             gated=True, act=SILU, biases=True,
             rotary={"rotated": 4, "base": 10000.0, "pairing": ADJACENT, "magnitude": 1.1,
                     "scaling": {"method": YARN, "factor": 4.0, "trained_length": 8}}),
    ]


def build_weight_order():
    return [
        make("pre_layer_biases_out_by_in", 9500, PRE, LAYER, OUT_BY_IN, biases=True),
        make("parallel_rms_gated_out_by_in", 9501, PARALLEL, RMS, OUT_BY_IN, heads=4, heads_kv=2, gated=True,
             act=SILU, biases=True),
    ]


FAMILIES = families("block", build_pre_norm, build_post_norm, build_parallel, build_cache, build_weight_order)
