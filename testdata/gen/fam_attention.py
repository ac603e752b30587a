"""Golden vectors for the attention package.

Scaled dot-product attention is implemented here again, from its published
definition, in mpmath at common.DIGITS significant digits, on the exact
float64 inputs:

  * logits (Vaswani et al. 2017, arXiv 1706.03762, Sec. 3.2.1 Eq. (1)):
    t_ij = scale * q_i . k_j, scale = 1/sqrt(d_k) unless given;
  * soft-capping (Bello et al. 2016, arXiv 1611.09940): t = c tanh(t / c);
  * additive bias, broadcast over batch and heads; ALiBi (Press et al.
    2022, arXiv 2108.12409, Sec. 3): t -= m_h d(p(i), j) with the distance
    of the form: "causal" d = p(i) - j for every key (the paper's formula,
    so keys after the query get a positive bias when a mask shows them),
    "symmetric" d = |p(i) - j|, "past-only" d = max(p(i) - j, 0) (the last
    two: common practice); under a causal mask all three agree;
  * mask: hidden keys leave the softmax (Sec. 3.2.3); the mask is a list of
    mask.Spec entries, intersected, and the visibility rules are fam_mask's,
    written there from their definitions;
  * sink logits join the softmax denominator and carry no value;
  * grouped heads (Ainslie et al. 2023, arXiv 2305.13245, Sec. 2.2):
    contiguous groups ("blocks") or h mod H_kv ("cycle");
  * backward: the calculus of softmax, dV = P^T dO, dP = dO V^T,
    D_i = sum_j P_ij dP_ij, dS = P (dP - D + dLSE), dQ = scale dT K,
    dK = scale dT^T Q, dT = dS sech^2(t/c) under a cap; dsink_h =
    sum_i P_sink,i (dLSE_i - D_i); dBias = dS summed over broadcast dims.

The order of application is scale, cap, bias, ALiBi, mask. The family
"merge" checks the merge of two partial results over disjoint key sets
(Milakov & Gimelshein 2018, arXiv 1805.02867, Sec. 3.1). Nothing here is
shared with the Go code.
"""

import mpmath
from mpmath import mpf

from common import families, case, ftensor, rng, uniform, word
# The visibility rules are those of the mask family, written from their
# definitions there (mask/doc.go); attention shares them, not the Go code.
from fam_mask import (END, START, UNBOUNDED, BLOCK_CAUSAL, BLOCK_FULL, band, causal, full,
                      key_padding, packed, pos, prefix, sees, window)

# Every convention word is spelled as the Go types define it
# (vocabulary.json); word() stops the generator on a word Go does not know.
HEADS_MAJOR, SEQ_MAJOR = word("attention.Layout", "heads-major", "seq-major")
BLOCKS, CYCLE = word("attention.GroupMap", "blocks", "cycle")
EMPTY_ZERO, EMPTY_NAN = word("attention.EmptyRow", "zero", "nan")
ALIBI_CAUSAL, ALIBI_SYMMETRIC, ALIBI_PAST_ONLY = word(
    "mask.ALiBiForm", "causal", "symmetric", "past-only")

SRC_SDPA = "Vaswani et al. 2017, arXiv 1706.03762, Sec. 3.2.1 Eq. (1), 3.2.2, 3.2.3"
SRC_GQA = "Ainslie et al. 2023, arXiv 2305.13245, Sec. 2.2; Shazeer 2019, arXiv 1911.02150, Sec. 3"
SRC_ALIBI = "Press et al. 2022, arXiv 2108.12409, Sec. 3"
SRC_CAP = "Bello et al. 2016, arXiv 1611.09940 (logit clipping c tanh(s/c))"
SRC_SINK = "sink logit in the softmax denominator (cf. Xiao et al. 2023, arXiv 2309.17453); learned form: common practice"
SRC_MASK = "masks: Vaswani et al. 2017 Sec. 3.2.3; windows Beltagy et al. 2020, arXiv 2004.05150 Sec. 3.1; padding and packing: common practice"
SRC_BWD = "backward: calculus of softmax (standard)"

NEG_INF = mpf("-inf")


def idx(layout, b, h, i, H, L, D):
    """Offset of row (b, h, i) of a [B, H, L, D] tensor in the layout."""
    if layout == SEQ_MAJOR:
        return ((b * L + i) * H + h) * D
    return ((b * H + h) * L + i) * D


def geometry(cfg):
    """The mask geometry of a case, in fam_mask's terms."""
    return {"batch": cfg["batch"], "lq": cfg["lq"], "lk": cfg["lk"],
            "align": cfg.get("align", END), "offset": cfg.get("offset", 0)}


def kv_head(cfg, h):
    hq, hkv = cfg["heads_q"], cfg["heads_kv"]
    if cfg.get("group", BLOCKS) == CYCLE:
        return h % hkv
    return h // (hq // hkv)


def alibi_distance(form, p, j):
    """d(p, j) of the ALiBi bias -m d for the query at key position p and
    key j (Press et al. 2022, Sec. 3, for keys up to the query; the forms
    differ only after it)."""
    if form == ALIBI_CAUSAL:
        return p - j
    if form == ALIBI_SYMMETRIC:
        return abs(p - j)
    if form == ALIBI_PAST_ONLY:
        return max(p - j, 0)
    raise ValueError(form)


def attend(cfg, ins):
    """Forward and backward at DIGITS digits. Returns the output dict of
    mpf lists (rounded later by ftensor)."""
    B, Hq, Hkv = cfg["batch"], cfg["heads_q"], cfg["heads_kv"]
    Lq, Lk, Dk, Dv = cfg["lq"], cfg["lk"], cfg["dk"], cfg["dv"]
    lay = cfg.get("layout", HEADS_MAJOR)
    scale = mpf(cfg["scale"]) if "scale" in cfg else 1 / mpmath.sqrt(Dk)
    cap = mpf(cfg.get("soft_cap", 0))
    msk = cfg.get("mask", [])
    geo = geometry(cfg)
    nan_rows = cfg.get("empty_row", EMPTY_ZERO) == EMPTY_NAN
    q, k, v, do = ins["q"], ins["k"], ins["v"], ins["d_out"]
    dl = ins.get("d_lse")
    bias, slopes, sinks = ins.get("bias"), ins.get("slopes"), ins.get("sinks")
    bb, bh = cfg.get("bias_batch", 1), cfg.get("bias_heads", 1)
    # Every ALiBi case names its form; a form without slopes means nothing.
    form = cfg["alibi_form"] if slopes is not None else None
    if slopes is None and "alibi_form" in cfg:
        raise ValueError("alibi_form without slopes")

    out = [mpf(0)] * (B * Hq * Lq * Dv)
    lse = [mpf(0)] * (B * Hq * Lq)
    dq = [mpf(0)] * (B * Hq * Lq * Dk)
    dk = [mpf(0)] * (B * Hkv * Lk * Dk)
    dv = [mpf(0)] * (B * Hkv * Lk * Dv)
    dsinks = [mpf(0)] * Hq
    dbias = [mpf(0)] * (len(bias) if bias is not None else 0)
    nan = mpf("nan")

    for b in range(B):
        for h in range(Hq):
            g = kv_head(cfg, h)
            for i in range(Lq):
                qo = idx(lay, b, h, i, Hq, Lq, Dk)
                p = pos(geo, i)
                brow = None
                if bias is not None:
                    brow = (((b if bb > 1 else 0) * bh + (h if bh > 1 else 0)) * Lq + i) * Lk
                t = {}      # final logit of each visible key
                dcap = {}   # derivative of the cap
                for j in range(Lk):
                    if not sees(msk, geo, b, i, j):
                        continue
                    ko = idx(lay, b, g, j, Hkv, Lk, Dk)
                    x = scale * mpmath.fsum(mpf(q[qo + d]) * mpf(k[ko + d]) for d in range(Dk))
                    if cap > 0:
                        dcap[j] = mpmath.sech(x / cap) ** 2
                        x = cap * mpmath.tanh(x / cap)
                    if brow is not None:
                        x += mpf(bias[brow + j])
                    if slopes is not None:
                        x -= mpf(slopes[h]) * alibi_distance(form, p, j)
                    if x == NEG_INF:
                        continue  # a -inf bias hides the key too
                    t[j] = x
                sink = mpf(sinks[h]) if sinks is not None else NEG_INF
                lo = idx(lay, b, h, i, Hq, Lq, 1)
                oo = idx(lay, b, h, i, Hq, Lq, Dv)
                if not t and sink == NEG_INF:
                    lse[lo] = NEG_INF
                    if nan_rows:
                        # a naive softmax: every probability NaN
                        for d in range(Dv):
                            out[oo + d] = nan
                        for d in range(Dk):
                            dq[qo + d] = nan
                        for j in range(Lk):
                            for d in range(Dk):
                                dk[idx(lay, b, g, j, Hkv, Lk, Dk) + d] = nan
                            for d in range(Dv):
                                dv[idx(lay, b, g, j, Hkv, Lk, Dv) + d] = nan
                            if brow is not None:
                                dbias[brow + j] = nan
                        if sinks is not None:
                            dsinks[h] = nan
                    continue
                terms = [mpmath.exp(x) for x in t.values()]
                if sink != NEG_INF:
                    terms.append(mpmath.exp(sink))
                L = mpmath.log(mpmath.fsum(terms))
                lse[lo] = L
                P = {j: mpmath.exp(x - L) for j, x in t.items()}
                for d in range(Dv):
                    out[oo + d] = mpmath.fsum(P[j] * mpf(v[idx(lay, b, g, j, Hkv, Lk, Dv) + d]) for j in P)
                # backward
                dpo = idx(lay, b, h, i, Hq, Lq, Dv)
                gl = mpf(dl[lo]) if dl is not None else mpf(0)
                dP = {j: mpmath.fsum(mpf(do[dpo + d]) * mpf(v[idx(lay, b, g, j, Hkv, Lk, Dv) + d]) for d in range(Dv)) for j in P}
                D = mpmath.fsum(P[j] * dP[j] for j in P)
                if sinks is not None and sink != NEG_INF:
                    dsinks[h] += mpmath.exp(sink - L) * (gl - D)
                for j in P:
                    ds = P[j] * (dP[j] - D + gl)
                    if brow is not None:
                        dbias[brow + j] += ds
                    dt = ds * dcap[j] if cap > 0 else ds
                    ko = idx(lay, b, g, j, Hkv, Lk, Dk)
                    vo = idx(lay, b, g, j, Hkv, Lk, Dv)
                    for d in range(Dk):
                        dq[qo + d] += scale * dt * mpf(k[ko + d])
                        dk[ko + d] += scale * dt * mpf(q[qo + d])
                    for d in range(Dv):
                        dv[vo + d] += P[j] * mpf(do[dpo + d])
    res = {"out": out, "lse": lse, "d_q": dq, "d_k": dk, "d_v": dv}
    if sinks is not None:
        res["d_sinks"] = dsinks
    if bias is not None:
        res["d_bias"] = dbias
    return res


def shapes(cfg):
    B, Hq, Hkv = cfg["batch"], cfg["heads_q"], cfg["heads_kv"]
    Lq, Lk, Dk, Dv = cfg["lq"], cfg["lk"], cfg["dk"], cfg["dv"]
    if cfg.get("layout", HEADS_MAJOR) == SEQ_MAJOR:
        sq, sk, sv, so, sl = [B, Lq, Hq, Dk], [B, Lk, Hkv, Dk], [B, Lk, Hkv, Dv], [B, Lq, Hq, Dv], [B, Lq, Hq]
    else:
        sq, sk, sv, so, sl = [B, Hq, Lq, Dk], [B, Hkv, Lk, Dk], [B, Hkv, Lk, Dv], [B, Hq, Lq, Dv], [B, Hq, Lq]
    return {"q": sq, "k": sk, "v": sv, "out": so, "d_out": so, "lse": sl, "d_lse": sl,
            "d_q": sq, "d_k": sk, "d_v": sv}


def numel(shape):
    n = 1
    for d in shape:
        n *= d
    return n


def make(name, source, cfg, seed, q=None, k=None, v=None, qk_range=(-1.0, 1.0),
         d_lse=False, bias=None, slopes=None, sinks=None):
    """One case: inputs drawn from seed unless given, outputs from attend."""
    r = rng(seed)
    sh = shapes(cfg)
    ins = {}
    ins["q"] = q if q is not None else uniform(r, numel(sh["q"]), *qk_range)
    ins["k"] = k if k is not None else uniform(r, numel(sh["k"]), *qk_range)
    ins["v"] = v if v is not None else uniform(r, numel(sh["v"]))
    ins["d_out"] = uniform(r, numel(sh["d_out"]))
    if d_lse:
        ins["d_lse"] = uniform(r, numel(sh["d_lse"]))
    bshape = None
    if bias is not None:
        bshape = [cfg["bias_batch"], cfg["bias_heads"], cfg["lq"], cfg["lk"]]
        ins["bias"] = bias if isinstance(bias, list) else uniform(r, numel(bshape), -2.0, 2.0)
    if slopes is not None:
        ins["slopes"] = slopes
    if sinks is not None:
        ins["sinks"] = sinks if isinstance(sinks, list) else uniform(r, cfg["heads_q"], -1.0, 2.0)
    outs = attend(cfg, ins)
    tin = {}
    for key, val in ins.items():
        if key == "bias":
            tin[key] = ftensor(val, bshape)
        elif key in ("slopes", "sinks"):
            tin[key] = ftensor(val, [len(val)])
        else:
            tin[key] = ftensor(val, sh[key])
    tout = {}
    for key, val in outs.items():
        if key == "d_bias":
            tout[key] = ftensor(val, bshape)
        elif key == "d_sinks":
            tout[key] = ftensor(val, [len(val)])
        else:
            tout[key] = ftensor(val, sh[key])
    return case(name, source + "; " + SRC_BWD, cfg, tin, tout)


def shape(b, hq, hkv, lq, lk, dk, dv, **extra):
    cfg = {"batch": b, "heads_q": hq, "heads_kv": hkv, "lq": lq, "lk": lk, "dk": dk, "dv": dv}
    cfg.update(extra)
    return cfg


def build_basic():
    c = []
    c.append(make("formula_check_identity", SRC_SDPA + "; worked value Q = K = I2, V = [[1,2],[3,4]]",
                  shape(1, 1, 1, 2, 2, 2, 2), 1, q=[1.0, 0.0, 0.0, 1.0], k=[1.0, 0.0, 0.0, 1.0],
                  v=[1.0, 2.0, 3.0, 4.0]))
    c.append(make("mha_b1_h1_l4_d4", SRC_SDPA, shape(1, 1, 1, 4, 4, 4, 4), 2))
    c.append(make("mha_b2_h2_l5_d4_heads_major", SRC_SDPA, shape(2, 2, 2, 5, 5, 4, 4), 3, d_lse=True))
    c.append(make("mha_b2_h2_l5_d4_seq_major", SRC_SDPA, shape(2, 2, 2, 5, 5, 4, 4, layout=SEQ_MAJOR), 3, d_lse=True))
    c.append(make("scale_given", SRC_SDPA, shape(1, 2, 2, 4, 4, 4, 4, scale=0.3), 4))
    c.append(make("dk_1", SRC_SDPA, shape(1, 2, 2, 4, 4, 1, 3), 5, d_lse=True))
    c.append(make("lq_1_lk_1", SRC_SDPA, shape(2, 2, 2, 1, 1, 3, 3), 6, d_lse=True))
    c.append(make("dv_5_dk_3", SRC_SDPA, shape(1, 2, 2, 4, 4, 3, 5), 7))
    c.append(make("cross_lq3_lk6", SRC_SDPA, shape(2, 1, 1, 3, 6, 4, 2), 8, d_lse=True))
    c.append(make("cross_lq6_lk3", SRC_SDPA, shape(1, 2, 1, 6, 3, 4, 2, layout=SEQ_MAJOR), 9))
    # logits near +1000 and -1000, where e^s overflows or underflows in
    # float64 unless the maximum is subtracted first. scale = 1 is exact.
    c.append(make("logits_near_plus_1000", SRC_SDPA, shape(1, 1, 1, 3, 4, 2, 3, scale=1.0), 10,
                  qk_range=(21.0, 23.0)))
    r = rng(11)
    qn = uniform(r, 6, 21.0, 23.0)
    kn = uniform(r, 8, -23.0, -21.0)
    c.append(make("logits_near_minus_1000", SRC_SDPA, shape(1, 1, 1, 3, 4, 2, 3, scale=1.0), 12,
                  q=qn, k=kn, d_lse=True))
    # one logit far above the rest: a probability within 1e-300 of 1
    c.append(make("logits_spread_700", SRC_SDPA, shape(1, 1, 1, 2, 3, 1, 2, scale=1.0), 13,
                  q=[20.0, -20.0], k=[35.0, 0.5, 1.5]))
    c.append(make("mha_b1_h4_l8_d8", SRC_SDPA, shape(1, 4, 4, 8, 8, 8, 8), 14, d_lse=True))
    return c


def build_masks():
    c = []
    src = SRC_SDPA + "; " + SRC_MASK
    c.append(make("causal_square", src, shape(1, 2, 2, 5, 5, 3, 3, mask=[causal()]), 20, d_lse=True))
    c.append(make("causal_lq3_lk6_align_end", src, shape(1, 1, 1, 3, 6, 3, 2, mask=[causal()]), 21))
    c.append(make("causal_lq3_lk6_align_start", src, shape(1, 1, 1, 3, 6, 3, 2, mask=[causal()], align=START), 22))
    c.append(make("causal_align_start_offset_2", src, shape(1, 1, 1, 3, 6, 3, 2, mask=[causal()], align=START, offset=2), 23, d_lse=True))
    # end alignment moved by an offset: the queries sit at Lk - Lq + offset
    c.append(make("causal_align_end_offset_minus_2", src, shape(1, 1, 1, 3, 6, 3, 2, mask=[causal()], offset=-2), 23, d_lse=True))
    c.append(make("window_align_end_offset_minus_1", src, shape(1, 1, 1, 3, 6, 3, 2, mask=[window(2)], offset=-1), 23))
    c.append(make("window_3", src, shape(1, 2, 2, 7, 7, 3, 3, mask=[window(3)]), 24))
    c.append(make("band_1_2", src, shape(1, 1, 1, 6, 6, 3, 3, mask=[band(1, 2)]), 25))
    c.append(make("prefix_3", src, shape(1, 1, 1, 6, 6, 3, 3, mask=[prefix(3)]), 26))
    c.append(make("key_padding", src, shape(2, 2, 2, 3, 5, 3, 3, mask=[key_padding([5, 2])]), 27, d_lse=True))
    c.append(make("packed_causal", src, shape(1, 2, 2, 7, 7, 3, 3, mask=[packed([0, 3, 7], BLOCK_CAUSAL)]), 28))
    c.append(make("packed_full", src, shape(1, 1, 1, 7, 7, 3, 3, mask=[packed([0, 2, 5, 7], BLOCK_FULL)]), 29))
    c.append(make("intersect_causal_padding", src, shape(2, 1, 1, 5, 5, 3, 3, mask=[causal(), key_padding([5, 3])]), 30))
    pad0 = [key_padding([0, 3])]
    c.append(make("empty_rows_zero", src, shape(2, 2, 2, 3, 4, 3, 3, mask=pad0), 31, d_lse=True))
    c.append(make("empty_rows_nan", src, shape(2, 2, 2, 3, 4, 3, 3, mask=pad0, empty_row=EMPTY_NAN), 31, d_lse=True))
    c.append(make("lk_0", src, shape(1, 2, 2, 3, 0, 3, 2), 32))
    # no key at all under the NaN policy: every output and dQ NaN, though
    # no key carries the NaN
    c.append(make("lk_0_nan", src, shape(1, 2, 2, 3, 0, 3, 2, empty_row=EMPTY_NAN), 32, d_lse=True))
    win_pad = [window(2), key_padding([2])]
    c.append(make("window_padding_some_rows_empty", src, shape(1, 1, 1, 5, 5, 3, 3, mask=win_pad), 33))
    c.append(make("window_padding_some_rows_nan", src, shape(1, 1, 1, 5, 5, 3, 3, mask=win_pad, empty_row=EMPTY_NAN), 33))
    return c


def build_grouped():
    c = []
    src = SRC_SDPA + "; " + SRC_GQA
    c.append(make("gqa_blocks_h4_kv2", src, shape(1, 4, 2, 4, 4, 3, 3), 40, d_lse=True))
    c.append(make("gqa_cycle_h4_kv2", src, shape(1, 4, 2, 4, 4, 3, 3, group=CYCLE), 40, d_lse=True))
    c.append(make("mqa_h4_kv1", src, shape(2, 4, 1, 3, 4, 3, 2, mask=[causal()]), 41))
    c.append(make("gqa_blocks_h6_kv3_seq_major", src, shape(1, 6, 3, 3, 5, 2, 3, layout=SEQ_MAJOR), 42))
    c.append(make("gqa_cycle_h6_kv2_seq_major_causal", src, shape(1, 6, 2, 4, 4, 2, 2, layout=SEQ_MAJOR, group=CYCLE, mask=[causal()]), 43))
    return c


def build_extras():
    c = []
    src = SRC_SDPA
    c.append(make("bias_full", src, shape(2, 2, 2, 3, 4, 3, 3, bias_batch=2, bias_heads=2), 50, bias=True, d_lse=True))
    c.append(make("bias_over_heads", src, shape(2, 2, 2, 3, 4, 3, 3, bias_batch=1, bias_heads=2), 51, bias=True))
    c.append(make("bias_over_batch", src, shape(2, 2, 2, 3, 4, 3, 3, bias_batch=2, bias_heads=1), 52, bias=True))
    c.append(make("bias_scalar_rows", src, shape(2, 2, 2, 3, 4, 3, 3, bias_batch=1, bias_heads=1), 53, bias=True))
    ninf = float("-inf")
    bias = [0.5, ninf, -1.0, 0.25, ninf, ninf, ninf, ninf, 1.0, 0.0, ninf, -0.5]
    c.append(make("bias_minus_inf_hides", src, shape(1, 1, 1, 3, 4, 3, 3, bias_batch=1, bias_heads=1), 54, bias=bias, d_lse=True))
    slopes4 = [0.5, 0.25, 0.125, 0.0625]  # 2^(-8k/8), k = 1..4 of 8 heads [paper]
    c.append(make("alibi_causal", src + "; " + SRC_ALIBI, shape(1, 4, 4, 6, 6, 3, 3, mask=[causal()], alibi_form=ALIBI_CAUSAL), 55, slopes=slopes4, d_lse=True))
    c.append(make("alibi_symmetric_full", src + "; " + SRC_ALIBI, shape(1, 4, 4, 5, 5, 3, 3, alibi_form=ALIBI_SYMMETRIC), 56, slopes=slopes4))
    c.append(make("alibi_causal_lq2_lk6", src + "; " + SRC_ALIBI, shape(1, 2, 2, 2, 6, 3, 3, mask=[causal()], alibi_form=ALIBI_CAUSAL), 57, slopes=[0.7, 1.5]))
    # Keys after the query, which the paper's causal model never shows: the
    # three forms differ there. The same inputs under each form.
    band12 = shape(1, 4, 4, 6, 6, 3, 3, mask=[band(1, 2)])
    c.append(make("alibi_causal_band_1_2", src + "; " + SRC_ALIBI + "; the formula applied to every key; " + SRC_MASK,
                  dict(band12, alibi_form=ALIBI_CAUSAL), 63, slopes=slopes4, d_lse=True))
    c.append(make("alibi_symmetric_band_1_2", src + "; " + SRC_ALIBI + "; symmetric form: common practice; " + SRC_MASK,
                  dict(band12, alibi_form=ALIBI_SYMMETRIC), 63, slopes=slopes4, d_lse=True))
    c.append(make("alibi_past_only_band_1_2", src + "; " + SRC_ALIBI + "; past-only form: common practice; " + SRC_MASK,
                  dict(band12, alibi_form=ALIBI_PAST_ONLY), 63, slopes=slopes4, d_lse=True))
    c.append(make("alibi_past_only_full_lq3_lk5", src + "; " + SRC_ALIBI + "; past-only form: common practice",
                  shape(1, 4, 4, 3, 5, 3, 3, mask=[full()], alibi_form=ALIBI_PAST_ONLY), 64, slopes=slopes4, d_lse=True))
    # Under a causal mask every form is the paper's: the inputs of
    # alibi_causal, so the numbers are the same.
    c.append(make("alibi_past_only_causal", src + "; " + SRC_ALIBI + "; past-only form: common practice",
                  shape(1, 4, 4, 6, 6, 3, 3, mask=[causal()], alibi_form=ALIBI_PAST_ONLY), 55, slopes=slopes4, d_lse=True))
    c.append(make("alibi_causal_band_unbounded_start", src + "; " + SRC_ALIBI + "; the formula applied to every key; " + SRC_MASK,
                  shape(1, 2, 2, 3, 6, 3, 3, mask=[band(UNBOUNDED, 2)], align=START, offset=1, alibi_form=ALIBI_CAUSAL), 65,
                  slopes=[0.7, 1.5], d_lse=True))
    c.append(make("soft_cap_1_5", src + "; " + SRC_CAP, shape(1, 2, 2, 4, 4, 4, 4, soft_cap=1.5, scale=1.0), 58, qk_range=(-1.5, 1.5), d_lse=True))
    c.append(make("soft_cap_30_logits_near_100", src + "; " + SRC_CAP, shape(1, 1, 1, 3, 4, 2, 2, soft_cap=30.0, scale=1.0), 59, qk_range=(6.0, 8.0)))
    c.append(make("sinks", src + "; " + SRC_SINK, shape(1, 3, 3, 4, 4, 3, 3), 60, sinks=True, d_lse=True))
    c.append(make("sinks_with_empty_rows", src + "; " + SRC_SINK + "; " + SRC_MASK,
                  shape(2, 2, 2, 3, 4, 3, 3, mask=[key_padding([0, 3])]), 61, sinks=[0.5, ninf], d_lse=True))
    c.append(make("soft_cap_and_sinks", src + "; " + SRC_CAP + "; " + SRC_SINK,
                  shape(1, 2, 2, 5, 5, 3, 3, soft_cap=2.0, mask=[causal()]), 62, qk_range=(-2.0, 2.0), sinks=True, d_lse=True))
    return c


def build_combined():
    c = []
    src = "; ".join([SRC_SDPA, SRC_GQA, SRC_ALIBI, SRC_MASK])
    slopes = [0.5, 0.25, 0.125, 0.0625]
    c.append(make("gqa_window_alibi", src, shape(1, 4, 2, 7, 7, 3, 3, mask=[window(3)], alibi_form=ALIBI_CAUSAL), 70, slopes=slopes, d_lse=True))
    c.append(make("gqa_cycle_window_alibi_seq_major", src, shape(2, 4, 2, 6, 6, 2, 3, layout=SEQ_MAJOR, group=CYCLE, mask=[window(4)], alibi_form=ALIBI_CAUSAL), 71, slopes=slopes))
    c.append(make("decode_lq1_lk9", src, shape(1, 4, 2, 1, 9, 4, 4, mask=[causal()], alibi_form=ALIBI_CAUSAL), 72, slopes=slopes, d_lse=True))
    c.append(make("chunked_prefill_lq3_lk8_window", src, shape(1, 2, 1, 3, 8, 3, 3, mask=[window(4)]), 73))
    c.append(make("packed_alibi_bias", src, shape(1, 2, 2, 6, 6, 3, 3, mask=[packed([0, 4, 6], BLOCK_CAUSAL)], bias_batch=1, bias_heads=2, alibi_form=ALIBI_CAUSAL), 74,
                  slopes=[0.25, 0.5], bias=True))
    src_all = src + "; " + SRC_CAP + "; " + SRC_SINK
    c.append(make("everything", src_all,
                  shape(2, 4, 2, 5, 7, 3, 4, layout=SEQ_MAJOR, group=CYCLE, soft_cap=3.0,
                        mask=[window(4), key_padding([7, 5])],
                        bias_batch=1, bias_heads=4, alibi_form=ALIBI_CAUSAL),
                  75, slopes=slopes, sinks=True, bias=True, d_lse=True, qk_range=(-2.0, 2.0)))
    c.append(make("everything_nan_rows", src_all,
                  shape(2, 2, 1, 4, 4, 2, 2, group=CYCLE, soft_cap=3.0, empty_row=EMPTY_NAN,
                        mask=[key_padding([4, 0])], bias_batch=2, bias_heads=1, alibi_form=ALIBI_CAUSAL),
                  76, slopes=[0.5, 0.25], sinks=[0.5, float("-inf")], bias=True, d_lse=True))
    return c


FAMILIES = families("attention", build_basic, build_masks, build_grouped, build_extras, build_combined)


SRC_MERGE = ("Milakov & Gimelshein 2018, arXiv 1805.02867, Sec. 3.1 Eq. (3)-(4), applied to "
             "normalised partial outputs: lse = log(e^lse_a + e^lse_b), "
             "o = e^(lse_a - lse) o_a + e^(lse_b - lse) o_b")


def merge_case(name, seed, rows, dv, lse_a=None, lse_b=None):
    """Merge of two partial results given as float64 inputs."""
    r = rng(seed)
    oa = uniform(r, rows * dv)
    ob = uniform(r, rows * dv)
    la = lse_a if lse_a is not None else uniform(r, rows, -3.0, 3.0)
    lb = lse_b if lse_b is not None else uniform(r, rows, -3.0, 3.0)
    o, lse = [], []
    for i in range(rows):
        a, b = mpf(la[i]), mpf(lb[i])
        if a == NEG_INF and b == NEG_INF:
            lse.append(NEG_INF)
            o += [mpf(0)] * dv
            continue
        L = mpmath.log(mpmath.exp(a) + mpmath.exp(b))
        wa, wb = mpmath.exp(a - L), mpmath.exp(b - L)
        lse.append(L)
        o += [wa * mpf(oa[i * dv + d]) + wb * mpf(ob[i * dv + d]) for d in range(dv)]
    cfg = {"rows": rows, "dv": dv}
    ins = {"out_a": ftensor(oa, [rows, dv]), "lse_a": ftensor(la, [rows]),
           "out_b": ftensor(ob, [rows, dv]), "lse_b": ftensor(lb, [rows])}
    return case(name, SRC_MERGE, cfg, ins, {"out": ftensor(o, [rows, dv]), "lse": ftensor(lse, [rows])})


def build_merge():
    ninf = float("-inf")
    return [
        merge_case("random", 80, 6, 4),
        merge_case("one_row_dv_1", 81, 1, 1),
        merge_case("empty_parts", 82, 4, 3, lse_a=[ninf, 0.5, ninf, -1.0], lse_b=[ninf, ninf, 2.0, -1.0]),
        merge_case("far_apart", 83, 3, 2, lse_a=[700.0, -700.0, 1000.0], lse_b=[-700.0, 700.0, 1000.0 - 40.0]),
        merge_case("near_plus_1000", 84, 3, 3, lse_a=[1000.25, 999.5, 1001.0], lse_b=[1000.0, 1000.0, 1000.5]),
        merge_case("equal_lse", 85, 2, 3, lse_a=[0.0, -2.5], lse_b=[0.0, -2.5]),
    ]


FAMILIES += families("attention", build_merge)
