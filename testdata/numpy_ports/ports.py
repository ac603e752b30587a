"""Ports of plumb's operations written again in NumPy, most with one slip.

Each port is written from the published formula in float32 NumPy (one in
float64), the way a user porting a kernel would write it. The slipped ports
carry one mistake each, written into the formula; the correct ones differ
from the reference only in rounding (float32, another summation order,
float64). For every port the manifest states the change of the configuration
or of the tensors' reading under which the port should pass: what
`plumb check` should name in its section "What the port may have done".
Those expectations were written down before any port was run through
`plumb check`, and are not tuned to its answers.

usage: /usr/bin/python3 ports.py OUTDIR

Writes into OUTDIR the inputs (float64 .npy files holding values exactly
representable in float32, drawn from a seeded NumPy generator), each
port's configuration (PORT.json) and output (PORT.OUTPUT.npy), and
manifest.json: a list of objects with the keys
  port        the port's name
  family      the operation family, for the rates per family
  operation   the plumb operation it ports
  config      the configuration (also written as the file in config_file)
  config_file its file name in OUTDIR
  inputs      {tensor name: file name in OUTDIR}
  outputs     {output name: file name in OUTDIR}
  correct     true for a port without a slip
  float64     true for the port computed in float64 (the others: float32)
  slip        what the slipped port does wrong (empty for a correct port)
  expected    the changes, each in the configuration's own words
              ("key": value, or a tensor mix-up), whose combination the
              diagnosis should name; [] with correct = false means no key
              describes the slip, so no change should be named as passing

Only NumPy and the standard library are used (math.erf for the normal
distribution function, which NumPy lacks).
"""
import json
import math
import os
import sys

import numpy as np

F32 = np.float32


def f32(a):
    """The float32 copy of an input, as a float32 port reads it."""
    return np.asarray(a, dtype=np.float32)


class Inputs:
    """Seeded inputs, rounded to float32 and stored as float64 .npy files."""

    def __init__(self, outdir):
        self.outdir = outdir
        self.rng = np.random.default_rng(20240601)

    def normal(self, name, shape, scale=1.0, mean=0.0):
        a = (mean + scale * self.rng.standard_normal(shape)).astype(np.float32).astype(np.float64)
        return self.put(name, a)

    def put(self, name, a):
        a = np.asarray(a, dtype=np.float64)
        np.save(os.path.join(self.outdir, name + ".npy"), a)
        return a


# ---------------------------------------------------------------- attention
#
# Vaswani et al. 2017, arXiv 1706.03762 §3.2.1 eq. 1:
# softmax(q·kᵀ·scale + bias)·v with scale 1/√d; grouped query heads (Ainslie
# et al. 2023, arXiv 2305.13245 §2.2): consecutive query heads share a kv
# head, kv(h) = h / (Hq/Hkv). Query i of Lq sits at key position Lk − Lq + i
# (end alignment, as the reference's default); causal: keys j ≤ p visible;
# window of size w: keys p − w < j ≤ p. ALiBi (Press et al. 2022, arXiv
# 2108.12409 §3): bias −m·(p − j) added to the scaled logits.


def attention(q, k, v, scale=None, group="blocks", visible=None, slopes=None,
              alibi="causal", soft_cap=0.0, swap_kv=False, dtype=np.float32):
    q, k, v = (np.asarray(t, dtype=dtype) for t in (q, k, v))
    if swap_kv:
        k, v = v, k
    b_, hq, lq, d = q.shape
    hkv, lk = k.shape[1], k.shape[2]
    if scale is None:
        scale = 1 / math.sqrt(d)
    scale = dtype(scale)
    out = np.zeros((b_, hq, lq, v.shape[3]), dtype=dtype)
    pos = np.arange(lq)[:, None] + (lk - lq)
    keys = np.arange(lk)[None, :]
    for b in range(b_):
        for h in range(hq):
            kh = h // (hq // hkv) if group == "blocks" else h % hkv
            s = (q[b, h] @ k[b, kh].T) * scale
            if soft_cap > 0:
                c = dtype(soft_cap)
                s = c * np.tanh(s / c)
            if slopes is not None:
                dist = (pos - keys).astype(dtype)
                if alibi == "symmetric":
                    dist = np.abs(dist)
                s = s - dtype(slopes[h]) * dist
            if visible is not None:
                s = np.where(visible(pos, keys), s, dtype(-np.inf))
            s = s - s.max(axis=-1, keepdims=True)
            e = np.exp(s)
            p = e / e.sum(axis=-1, keepdims=True)
            out[b, h] = p @ v[b, kh]
    return out


def causal(pos, keys):
    return keys <= pos


def window(size):
    return lambda pos, keys: (keys <= pos) & (keys > pos - size)


def attention_ports(inp):
    q = inp.normal("att_q", (1, 4, 6, 8))
    k = inp.normal("att_k", (1, 2, 6, 8))
    v = inp.normal("att_v", (1, 2, 6, 8))
    q4 = inp.normal("att_q4", (1, 4, 4, 8))  # 4 queries over 6 keys
    qkv = {"q": "att_q.npy", "k": "att_k.npy", "v": "att_v.npy"}
    q4kv = {"q": "att_q4.npy", "k": "att_k.npy", "v": "att_v.npy"}
    sl = inp.put("att_slopes", [2.0 ** (-8 * (h + 1) / 4) for h in range(4)])  # Press et al. 2022 §3: 2^(−8h/n)
    qkvs = dict(qkv, slopes="att_slopes.npy")
    c = {"version": 1, "mask": [{"kind": "causal"}]}
    w3 = {"version": 1, "mask": [{"kind": "window", "size": 3}]}
    yield dict(port="attention-group-cycle", slip="query head h reads kv head h mod Hkv instead of h/(Hq/Hkv)",
               config=c, inputs=qkv, expected=['"group": "cycle"'],
               run=lambda: attention(q, k, v, group="cycle", visible=causal))
    yield dict(port="attention-scale-1-over-d", slip="logits scaled by 1/d instead of 1/√d",
               config=c, inputs=qkv, expected=['"scale": 0.125'],
               run=lambda: attention(q, k, v, scale=1 / 8, visible=causal))
    yield dict(port="attention-no-scale", slip="logits not scaled at all",
               config=c, inputs=qkv, expected=['"scale": 1'],
               run=lambda: attention(q, k, v, scale=1.0, visible=causal))
    yield dict(port="attention-start-aligned", slip="query i sits at key i (start) although the configuration aligns the ends",
               config=c, inputs=q4kv, expected=['"align": "start"'],
               run=lambda: attention(q4, k, v, visible=lambda pos, keys: keys <= pos - 2))
    yield dict(port="attention-window-off-by-one", slip="window lets size + 1 keys through (j ≥ p − size)",
               config=w3, inputs=qkv, expected=['"mask[0].size": 4'],
               run=lambda: attention(q, k, v, visible=lambda pos, keys: (keys <= pos) & (keys >= pos - 3)))
    yield dict(port="attention-kv-swapped", slip="k and v passed in the wrong order",
               config=c, inputs=qkv, expected=["k and v swapped"],
               run=lambda: attention(q, k, v, visible=causal, swap_kv=True))
    yield dict(port="attention-mask-forgotten", slip="the causal mask is not applied",
               config=c, inputs=qkv, expected=['"mask[0].kind": "full"'],
               run=lambda: attention(q, k, v))
    yield dict(port="attention-alibi-symmetric", slip="ALiBi penalises |p − j| instead of p − j",
               config={"version": 1}, inputs=qkvs, expected=['"alibi_form": "symmetric"'],
               run=lambda: attention(q, k, v, slopes=sl, alibi="symmetric"))
    yield dict(port="attention-soft-cap-forgotten", slip="the soft cap c·tanh(t/c) is left out",
               config={"version": 1, "soft_cap": 2, "mask": [{"kind": "causal"}]}, inputs=qkv,
               expected=['"soft_cap": 0'],
               run=lambda: attention(q, k, v, visible=causal))
    yield dict(port="attention-correct-f32", slip="", correct=True,
               config=c, inputs=qkv, expected=[],
               run=lambda: attention(q, k, v, visible=causal))
    yield dict(port="attention-correct-alibi-f32", slip="", correct=True,
               config={"version": 1}, inputs=qkvs, expected=[],
               run=lambda: attention(q, k, v, slopes=sl))


# ------------------------------------------------------------------- rotary
#
# Su et al. 2021, arXiv 2104.09864 §3.4.2 eq. 34: frequency θ_i = b^(−2i/r)
# rotates the pair (x_2i, x_2i+1) by the angle m·θ_i at position m:
# (x0·cos − x1·sin, x0·sin + x1·cos). The halves pairing rotates
# (x_i, x_{i+r/2}). Position interpolation (Chen et al. 2023, arXiv
# 2306.15595 §2.3) divides every frequency by s.


def rotary(x, base=10000.0, pairing="adjacent", rotated=None, offset=0, factor=1.0,
           inverse=False, dtype=np.float32):
    x = np.asarray(x, dtype=dtype)
    d = x.shape[-1]
    r = d if rotated is None else rotated
    length = x.shape[-2]
    i = np.arange(r // 2, dtype=dtype)
    theta = dtype(base) ** (-dtype(2) * i / dtype(r))
    theta = theta / dtype(factor)
    m = np.arange(length, dtype=dtype) + dtype(offset)
    ang = m[:, None] * theta[None, :]
    cos, sin = np.cos(ang), np.sin(ang)
    if inverse:
        sin = -sin
    y = x.copy()
    if pairing == "adjacent":
        a, b = x[..., 0:r:2], x[..., 1:r:2]
        y[..., 0:r:2] = a * cos - b * sin
        y[..., 1:r:2] = a * sin + b * cos
    else:
        a, b = x[..., : r // 2], x[..., r // 2: r]
        y[..., : r // 2] = a * cos - b * sin
        y[..., r // 2: r] = a * sin + b * cos
    return y


def rotary_ports(inp):
    x = inp.normal("rot_x", (2, 8, 16))
    xi = {"x": "rot_x.npy"}
    yield dict(port="rotary-halves-pairing", slip="rotates (x_i, x_{i+r/2}) instead of adjacent pairs",
               config={"version": 1}, inputs=xi, expected=['"pairing": "halves"'],
               run=lambda: rotary(x, pairing="halves"))
    yield dict(port="rotary-wrong-base", slip="base 10000 although the configuration says 500000",
               config={"version": 1, "base": 500000}, inputs=xi, expected=['"base": 10000'],
               run=lambda: rotary(x, base=10000.0))
    yield dict(port="rotary-interpolation-inverted", slip="position interpolation multiplies the frequencies by s instead of dividing",
               config={"version": 1, "scaling": {"method": "interpolation", "factor": 4}}, inputs=xi,
               expected=['"scaling.factor": 0.25'],
               run=lambda: rotary(x, factor=0.25))
    yield dict(port="rotary-positions-from-one", slip="the first token sits at position 1",
               config={"version": 1}, inputs=xi, expected=['"offset": 1'],
               run=lambda: rotary(x, offset=1))
    yield dict(port="rotary-inverse-rotation", slip="rotates by −mθ (the sign of sin flipped)",
               config={"version": 1}, inputs=xi, expected=['"inverse": true'],
               run=lambda: rotary(x, inverse=True))
    yield dict(port="rotary-rotates-every-dim", slip="rotates all 16 dims although only the first 8 are rotary",
               config={"version": 1, "rotated": 8}, inputs=xi, expected=['"rotated": 16'],
               run=lambda: rotary(x))
    yield dict(port="rotary-correct-f64", slip="", correct=True, float64=True,
               config={"version": 1, "base": 500000, "rotated": 8}, inputs=xi, expected=[],
               run=lambda: rotary(x, base=500000.0, rotated=8, dtype=np.float64))


# -------------------------------------------------------------------- ALiBi
#
# Press et al. 2022, arXiv 2108.12409 §3: for n heads (a power of two) head
# h = 1..n has slope m_h = 2^(−8h/n); the bias of query position p on key j
# is −m·(p − j), with p = Lk − Lq + i when the ends are aligned.


def alibi_slopes(n, dtype=np.float32):
    h = np.arange(1, n + 1, dtype=np.float64)
    return (2.0 ** (-8.0 * h / n)).astype(dtype)


def alibi_bias(slopes, lq, lk, align="end", form="causal", dtype=np.float32):
    m = np.asarray(slopes, dtype=dtype)
    p = np.arange(lq)[:, None] + (lk - lq if align == "end" else 0)
    dist = (p - np.arange(lk)[None, :]).astype(dtype)
    if form == "symmetric":
        dist = np.abs(dist)
    return -m[:, None, None] * dist[None, :, :]


def alibi_ports(inp):
    sl = inp.put("alibi_slopes8", alibi_slopes(8, np.float64))
    si = {"slopes": "alibi_slopes8.npy"}
    bc = {"version": 1, "queries": 3, "keys": 5}
    yield dict(port="alibi-slopes-for-16-heads", operation="alibi-slopes",
               slip="slopes computed for 16 heads and the first 8 kept, 2^(−8h/16) instead of 2^(−8h/8)",
               config={"version": 1, "heads": 8}, inputs={}, expected=['"heads": 16'],
               outputs="slopes", run=lambda: alibi_slopes(16)[:8])
    yield dict(port="alibi-bias-start-aligned", operation="alibi-bias",
               slip="query i sits at key i although the configuration aligns the ends",
               config=bc, inputs=si, expected=['"align": "start"'],
               outputs="bias", run=lambda: alibi_bias(sl, 3, 5, align="start"))
    yield dict(port="alibi-bias-symmetric", operation="alibi-bias",
               slip="penalises |p − j| instead of p − j",
               config=bc, inputs=si, expected=['"alibi_form": "symmetric"'],
               outputs="bias", run=lambda: alibi_bias(sl, 3, 5, form="symmetric"))
    yield dict(port="alibi-bias-correct-f32", operation="alibi-bias", slip="", correct=True,
               config=bc, inputs=si, expected=[],
               outputs="bias", run=lambda: alibi_bias(sl, 3, 5))


# -------------------------------------------------------------------- norms
#
# LayerNorm (Ba et al. 2016, arXiv 1607.06450 §3 eq. 4): μ and the biased
# variance σ² = mean((x − μ)²) over the last dimension, y = (x − μ)/√(σ² + ε)·γ
# + β. RMSNorm (Zhang and Sennrich 2019, arXiv 1910.07467 §4 eq. 4):
# y = x/√(mean(x²) + ε)·γ. The gain γ is w, or 1 + w where the configuration
# says one-plus.


def rowsum_reversed(a):
    """Sums the last axis from its last element to its first, one add at a time."""
    s = np.zeros(a.shape[:-1], dtype=a.dtype)
    for j in range(a.shape[-1] - 1, -1, -1):
        s = s + a[..., j]
    return s


def layernorm(x, w, b, eps, unbiased=False, eps_outside=False, one_plus=False, reversed_sum=False):
    x, w, b = f32(x), f32(w), f32(b)
    d = x.shape[-1]
    total = rowsum_reversed if reversed_sum else (lambda a: a.sum(axis=-1))
    mu = (total(x) / F32(d))[..., None]
    c = x - mu
    var = (total(c * c) / F32(d - 1 if unbiased else d))[..., None]
    den = np.sqrt(var) + F32(eps) if eps_outside else np.sqrt(var + F32(eps))
    g = F32(1) + w if one_plus else w
    return c / den * g + b


def rmsnorm(x, w, eps, one_plus=False, eps_outside=False, dtype=np.float32):
    x, w = np.asarray(x, dtype=dtype), np.asarray(w, dtype=dtype)
    ms = (x * x).mean(axis=-1, keepdims=True)
    den = np.sqrt(ms) + dtype(eps) if eps_outside else np.sqrt(ms + dtype(eps))
    g = dtype(1) + w if one_plus else w
    return x / den * g


def norm_ports(inp):
    # RMSNorm's rows: small spread about 0.3, so that ε = 1e-5 is 0.1 % of
    # mean(x²) and every ε slip stands far above float32 rounding.
    x = inp.normal("norm_x", (4, 32), scale=0.05, mean=0.3)
    # LayerNorm's rows: standard normal. Rows of spread 0.05 about 0.3 (as
    # for RMSNorm) make the centring x − μ lose about 3 bits, and there a
    # correct float32 two-pass port (layernorm-correct-reversed-sum) is
    # outside the float32 yardstick (normwise 2.7e-7 against 1.6e-7
    # measured); at σ² ≈ 1 the ε slips still change y by about ε/2 = 5e-6,
    # thirty times the yardstick.
    xl = inp.normal("ln_x", (4, 32))
    w = inp.normal("norm_w", (32,), scale=0.5, mean=1.0)
    b = inp.normal("norm_b", (32,), scale=0.5)
    w0 = inp.normal("norm_w0", (32,), scale=0.3)  # a one-plus weight: gain near 1
    lni = {"x": "ln_x.npy", "weight": "norm_w.npy", "bias": "norm_b.npy"}
    rmi = {"x": "norm_x.npy", "weight": "norm_w0.npy"}
    ln = {"version": 1, "epsilon": 1e-5}
    yield dict(port="layernorm-unbiased-variance", operation="layernorm-forward", family="layernorm",
               slip="variance divided by d − 1", config=ln, inputs=lni, expected=[],
               run=lambda: layernorm(xl, w, b, 1e-5, unbiased=True))
    yield dict(port="layernorm-root-then-small-constant", operation="layernorm-forward", family="layernorm",
               slip="divides by √σ² + ε", config=ln, inputs=lni,
               expected=['"epsilon_placement": "added-to-root"'],
               run=lambda: layernorm(xl, w, b, 1e-5, eps_outside=True))
    yield dict(port="layernorm-smaller-constant", operation="layernorm-forward", family="layernorm",
               slip="ε = 1e-6 although the configuration says 1e-5", config=ln, inputs=lni,
               expected=['"epsilon": 1e-6'],
               run=lambda: layernorm(xl, w, b, 1e-6))
    yield dict(port="layernorm-one-plus-gain", operation="layernorm-forward", family="layernorm",
               slip="gain 1 + w although the weight is the gain itself", config=ln, inputs=lni,
               expected=['"weight_form": "one-plus"'],
               run=lambda: layernorm(xl, w, b, 1e-5, one_plus=True))
    yield dict(port="layernorm-correct-reversed-sum", operation="layernorm-forward", family="layernorm",
               slip="", correct=True, config=ln, inputs=lni, expected=[],
               run=lambda: layernorm(xl, w, b, 1e-5, reversed_sum=True))
    rc = {"version": 1, "epsilon": 1e-5, "weight_form": "one-plus"}
    yield dict(port="rmsnorm-w-instead-of-one-plus-w", operation="rmsnorm-forward", family="rmsnorm",
               slip="gain w although the configuration says 1 + w", config=rc, inputs=rmi,
               expected=['"weight_form": "as-is"'],
               run=lambda: rmsnorm(x, w0, 1e-5))
    yield dict(port="rmsnorm-root-then-small-constant", operation="rmsnorm-forward", family="rmsnorm",
               slip="divides by √mean(x²) + ε", config=rc, inputs=rmi,
               expected=['"epsilon_placement": "added-to-root"'],
               run=lambda: rmsnorm(x, w0, 1e-5, one_plus=True, eps_outside=True))
    yield dict(port="rmsnorm-correct-f32", operation="rmsnorm-forward", family="rmsnorm",
               slip="", correct=True, config=rc, inputs=rmi, expected=[],
               run=lambda: rmsnorm(x, w0, 1e-5, one_plus=True))


# ----------------------------------------------------------- activations, FFN
#
# GELU (Hendrycks and Gimpel 2016, arXiv 1606.08415 §2): x·Φ(x), Φ(x) =
# (1 + erf(x/√2))/2; its tanh approximation x/2·(1 + tanh(√(2/π)(x +
# 0.044715x³))). SiLU x·σ(x) (Elfwing et al. 2017, arXiv 1702.03118 §2.2).
# Gated layer (Shazeer 2020, arXiv 2002.05202 §2): (φ(x·W) ⊗ (x·V))·W2.


_erf = np.vectorize(math.erf, otypes=[np.float64])


def gelu(x):
    x = f32(x)
    return x * (F32(0.5) * (F32(1) + _erf(x / F32(math.sqrt(2))).astype(np.float32)))


def gelu_tanh(x):
    x = f32(x)
    return F32(0.5) * x * (F32(1) + np.tanh(F32(math.sqrt(2 / math.pi)) * (x + F32(0.044715) * x * x * x)))


def silu(x):
    x = f32(x)
    return x / (F32(1) + np.exp(-x))


def gated(x, w, v, w2, phi, swap=False):
    x, w, v, w2 = f32(x), f32(w), f32(v), f32(w2)
    if swap:
        w, v = v, w
    return (phi(x @ w) * (x @ v)) @ w2


def ffn_ports(inp):
    xa = inp.normal("act_x", (64,), scale=2.0)
    ai = {"x": "act_x.npy"}
    yield dict(port="activation-gelu-tanh", operation="activation", family="activation",
               slip="tanh approximation although the configuration says the exact GELU",
               config={"version": 1, "function": "gelu"}, inputs=ai,
               expected=['"function": "gelu-tanh"'], outputs="y", run=lambda: gelu_tanh(xa))
    yield dict(port="activation-silu-for-sigmoid", operation="activation", family="activation",
               slip="x·σ(x) although the configuration says σ(x)",
               config={"version": 1, "function": "sigmoid"}, inputs=ai,
               expected=['"function": "silu"'], outputs="y", run=lambda: silu(xa))
    yield dict(port="activation-correct-gelu-f32", operation="activation", family="activation",
               slip="", correct=True, config={"version": 1, "function": "gelu"}, inputs=ai,
               expected=[], outputs="y", run=lambda: gelu(xa))
    x = inp.normal("ffn_x", (3, 8))
    w1 = inp.normal("ffn_w1", (8, 12), scale=0.4)
    v = inp.normal("ffn_v", (8, 12), scale=0.4)
    w2 = inp.normal("ffn_w2", (12, 6), scale=0.4)
    fi = {"x": "ffn_x.npy", "w1": "ffn_w1.npy", "v": "ffn_v.npy", "w2": "ffn_w2.npy"}
    # The fused matrix: gate units then value units (stacked), [in, 2·hidden].
    inp.put("ffn_fused", np.concatenate([w1, v], axis=1))
    ffi = {"x": "ffn_x.npy", "fused": "ffn_fused.npy", "w2": "ffn_w2.npy"}
    gg = {"version": 1, "activation": "gelu", "gated": True, "layout": "in-by-out"}
    gs = {"version": 1, "activation": "silu", "gated": True, "layout": "in-by-out"}
    yield dict(port="ffn-silu-for-gelu", operation="ffn-forward", family="ffn",
               slip="SiLU gate although the configuration says GELU (GEGLU)", config=gg, inputs=fi,
               expected=['"activation": "silu"'], outputs="y", run=lambda: gated(x, w1, v, w2, silu))
    yield dict(port="ffn-gate-and-up-swapped", operation="ffn-forward", family="ffn",
               slip="φ applied to x·V and multiplied by x·W1", config=gs, inputs=fi,
               expected=["w1 and v swapped"], outputs="y", run=lambda: gated(x, w1, v, w2, silu, swap=True))
    yield dict(port="ffn-weights-read-out-by-in", operation="ffn-forward", family="ffn",
               slip="every weight's buffer read as [out, in] and multiplied transposed",
               config=gs, inputs=fi, expected=['"layout": "out-by-in"'], outputs="y",
               run=lambda: (silu(f32(x) @ f32(w1).reshape(12, 8).T) * (f32(x) @ f32(v).reshape(12, 8).T))
               @ f32(w2).reshape(6, 12).T)
    yield dict(port="ffn-fused-read-interleaved", operation="ffn-forward", family="ffn",
               slip="the fused matrix read as alternating gate and value units although it is stacked",
               config=dict(gs, packing="stacked"), inputs=ffi, expected=['"packing": "interleaved"'],
               outputs="y",
               run=lambda: gated(x, np.concatenate([w1, v], axis=1)[:, 0::2],
                                 np.concatenate([w1, v], axis=1)[:, 1::2], w2, silu))
    yield dict(port="ffn-correct-einsum-f32", operation="ffn-forward", family="ffn",
               slip="", correct=True, config=gs, inputs=fi, expected=[], outputs="y",
               run=lambda: np.einsum("rh,ho->ro",
                                     silu(np.einsum("ri,ih->rh", f32(x), f32(w1))) * np.einsum("ri,ih->rh", f32(x), f32(v)),
                                     f32(w2)))


# ------------------------------------------------------------------ softmax
#
# softmax(x)_j = e^(x_j − max x)/Σ_k e^(x_k − max x) over the last axis
# (Bridle 1990, "Probabilistic interpretation of feedforward classification
# network outputs", §3), the maximum subtracted first.


def softmax(x, axis=-1, reversed_sum=False):
    x = f32(x)
    e = np.exp(x - x.max(axis=axis, keepdims=True))
    if reversed_sum:
        return e / rowsum_reversed(e)[..., None]
    return e / e.sum(axis=axis, keepdims=True)


def softmax_ports(inp):
    x = inp.normal("softmax_x", (5, 5), scale=2.0)
    si = {"x": "softmax_x.npy"}
    yield dict(port="softmax-wrong-axis", operation="softmax", family="softmax",
               slip="softmax over the first axis instead of the last",
               config={"version": 1}, inputs=si, expected=["x transposed", "y transposed"],
               outputs="y", run=lambda: softmax(x, axis=0))
    yield dict(port="softmax-correct-reversed-sum", operation="softmax", family="softmax",
               slip="", correct=True, config={"version": 1}, inputs=si, expected=[],
               outputs="y", run=lambda: softmax(x, reversed_sum=True))


FAMILIES = [
    ("attention", "attention-forward", "out", attention_ports),
    ("rotary", "rotary-apply", "y", rotary_ports),
    ("alibi", None, None, alibi_ports),
    ("norm", None, "y", norm_ports),
    ("ffn", None, None, ffn_ports),
    ("softmax", None, None, softmax_ports),
]


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: ports.py OUTDIR")
    outdir = sys.argv[1]
    os.makedirs(outdir, exist_ok=True)
    inp = Inputs(outdir)
    manifest = []
    for family, operation, output, build in FAMILIES:
        for p in build(inp):
            out = np.asarray(p["run"]())
            want = np.float64 if p.get("float64") else np.float32
            if out.dtype != want:
                sys.exit("port %s computed %s; want %s" % (p["port"], out.dtype, np.dtype(want)))
            name = p.get("outputs", output)
            ofile = "%s.%s.npy" % (p["port"], name)
            np.save(os.path.join(outdir, ofile), out)
            cfile = p["port"] + ".json"
            with open(os.path.join(outdir, cfile), "w") as f:
                json.dump(p["config"], f)
            manifest.append({
                "port": p["port"],
                "family": p.get("family", family),
                "operation": p.get("operation", operation),
                "config": p["config"],
                "config_file": cfile,
                "inputs": p["inputs"],
                "outputs": {name: ofile},
                "correct": p.get("correct", False),
                "float64": bool(p.get("float64")),
                "slip": p["slip"],
                "expected": p["expected"],
            })
    with open(os.path.join(outdir, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1, ensure_ascii=False)
        f.write("\n")


if __name__ == "__main__":
    main()
