"""Golden vectors for the kvcache package.

Each family stores keys and values the way a serving kernel does and
states, from the definitions of kvcache/doc.go, which logical position each
stored element is; the outputs are attention over those logical keys,
computed by fam_attention.attend (scaled dot-product attention written from
its published definition, in mpmath at common.DIGITS digits). Nothing here
is shared with the Go code.

  * pages: a pool of pages and a page table per sequence (Kwon et al. 2023,
    arXiv 2309.06180, Sec. 4): position t of a sequence is slot t mod P of
    page table[t // P]; the pool is [pages, P, heads_kv, d]
    ("pages-first") or [pages, heads_kv, P, d] ("heads-first"). The last
    lq positions of each sequence are its queries' own, causal.
  * splits: one decoding step over key ranges [start, end) of the cache,
    the queries at their true positions pos + i; each split's partial
    output and log-sum-exp over its own keys (the sink in the first split
    only), and the whole step (Milakov & Gimelshein 2018, arXiv 1805.02867,
    Sec. 3.1, for why the partials merge to the whole).
  * ring: W slots, the token at position p in slot p mod W (common
    practice); the newest token's query against the ring is attention over
    every position with the sliding window of W keys p - W < j <= p
    (Beltagy et al. 2020, arXiv 2004.05150, Sec. 3.1; the window's extent
    is the mask package's, fam_mask).
  * packed: sequences packed token after token, queries and keys with
    separate running offsets, each sequence causal and aligned at its end
    (common practice).
  * draft: k drafted tokens scored in one pass after a cache of n tokens,
    causal among themselves (Leviathan et al. 2023, arXiv 2211.17192).
"""

from mpmath import mpf

from common import families, case, ftensor, rng, uniform, word
from fam_attention import attend, idx, shape, HEADS_MAJOR, SEQ_MAJOR, BLOCKS, CYCLE
from fam_mask import causal, window, START

PAGES_FIRST, HEADS_FIRST = word("kvcache.PoolLayout", "pages-first", "heads-first")

SRC_PAGES = "pages and page tables: Kwon et al. 2023, arXiv 2309.06180, Sec. 4; attention: Vaswani et al. 2017, arXiv 1706.03762, Sec. 3.2.1"
SRC_SPLITS = "partials over disjoint keys: Milakov & Gimelshein 2018, arXiv 1805.02867, Sec. 3.1; the split of one step: common practice"
SRC_RING = "ring of W slots (common practice) = sliding window, Beltagy et al. 2020, arXiv 2004.05150, Sec. 3.1"
SRC_PACKED = "packed sequences with running offsets: common practice; attention: Vaswani et al. 2017, Sec. 3.2.1, 3.2.3"
SRC_DRAFT = "drafted tokens scored in one pass: Leviathan et al. 2023, arXiv 2211.17192"

NEG_INF = mpf("-inf")


def forward(cfg, q, k, v, bias=None, sinks=None):
    """out and lse of attention for one configuration (no gradients)."""
    ins = {"q": q, "k": k, "v": v, "d_out": [0.0] * (cfg["batch"] * cfg["heads_q"] * cfg["lq"] * cfg["dv"])}
    if bias is not None:
        ins["bias"] = bias
    if sinks is not None:
        ins["sinks"] = sinks
    res = attend(cfg, ins)
    return res["out"], res["lse"]


def rows(t, layout, B, H, L, D):
    """t as rows: rows[b][h][i] is the D values of row (b, h, i)."""
    return [[[t[idx(layout, b, h, i, H, L, D):idx(layout, b, h, i, H, L, D) + D] for i in range(L)]
             for h in range(H)] for b in range(B)]


def flat(r, layout):
    """The inverse of rows: rows[b][h][i] laid out in the layout."""
    B, H, L = len(r), len(r[0]), len(r[0][0])
    D = len(r[0][0][0]) if L else 0
    out = [None] * (B * H * L * D)
    for b in range(B):
        for h in range(H):
            for i in range(L):
                o = idx(layout, b, h, i, H, L, D)
                out[o:o + D] = r[b][h][i]
    return out


def pool_slot(layout, page, slot, g, P, H, D):
    """Offset of (page, slot, head g) in a pool of the layout."""
    if layout == HEADS_FIRST:
        return ((page * H + g) * P + slot) * D
    return ((page * P + slot) * H + g) * D


def pages_case(name, seed, pages, P, hq, hkv, d, lq, tables, lengths, pool_layout=PAGES_FIRST,
               layout=HEADS_MAJOR, group=BLOCKS):
    r = rng(seed)
    B = len(tables)
    kp = uniform(r, pages * P * hkv * d)
    vp = uniform(r, pages * P * hkv * d)
    q = uniform(r, B * hq * lq * d)
    qrows = rows(q, layout, B, hq, lq, d)
    outs, lses = [], []
    for b in range(B):
        L = lengths[b]
        cfg = shape(1, hq, hkv, lq, L, d, d, mask=[causal()], group=group)
        k, v = [], []
        for g in range(hkv):
            for t in range(L):
                o = pool_slot(pool_layout, tables[b][t // P], t % P, g, P, hkv, d)
                k += kp[o:o + d]
                v += vp[o:o + d]
        out, lse = forward(cfg, flat([qrows[b]], HEADS_MAJOR), k, v)
        outs.append(rows(out, HEADS_MAJOR, 1, hq, lq, d)[0])
        lses.append(rows(lse, HEADS_MAJOR, 1, hq, lq, 1)[0])
    pool_shape = [pages, hkv, P, d] if pool_layout == HEADS_FIRST else [pages, P, hkv, d]
    qshape = [B, lq, hq, d] if layout == SEQ_MAJOR else [B, hq, lq, d]
    cfg = {"pages": pages, "page_size": P, "heads_kv": hkv, "dk": d, "dv": d, "pool_layout": pool_layout,
           "heads_q": hq, "lq": lq, "tables": tables, "lengths": lengths, "layout": layout, "group": group}
    ins = {"q": ftensor(q, qshape), "k_pool": ftensor(kp, pool_shape), "v_pool": ftensor(vp, pool_shape)}
    outs_t = {"out": ftensor(flat(outs, layout), qshape), "lse": ftensor(flat(lses, layout), qshape[:3])}
    return case(name, SRC_PAGES, cfg, ins, outs_t)


def build_pages():
    c = []
    c.append(pages_case("one sequence, pages in order", 501, 3, 4, 2, 2, 4, 1, [[0, 1, 2]], [12]))
    c.append(pages_case("last page partly filled, pages shuffled", 502, 5, 4, 2, 1, 4, 1, [[3, 0, 4]], [10]))
    c.append(pages_case("two sequences share a prefix page", 503, 6, 4, 4, 2, 3, 2, [[5, 1, 2], [5, 3]], [11, 7]))
    c.append(pages_case("heads-first pool, grouped by cycle", 504, 4, 3, 4, 2, 4, 1, [[2, 0, 3], [1]],
                        [8, 3], pool_layout=HEADS_FIRST, group=CYCLE))
    c.append(pages_case("chunk of 3 queries, seq-major, table longer than used", 505, 5, 2, 2, 2, 4, 3,
                        [[4, 2, 0, 1, 3]], [7], layout=SEQ_MAJOR))
    c.append(pages_case("page size 1", 506, 6, 1, 2, 1, 2, 1, [[5, 4, 3, 2, 1, 0]], [6]))
    return c


def splits_case(name, seed, hq, hkv, lq, lk, d, pos, splits, sinks=False):
    r = rng(seed)
    q = uniform(r, hq * lq * d)
    k = uniform(r, hkv * lk * d)
    v = uniform(r, hkv * lk * d)
    snk = uniform(r, hq, -1.0, 2.0) if sinks else None
    cfg = shape(1, hq, hkv, lq, lk, d, d, mask=[causal()], align=START, offset=pos,
                bias_batch=1, bias_heads=1)
    ins = {"q": ftensor(q, [1, hq, lq, d]), "k": ftensor(k, [1, hkv, lk, d]), "v": ftensor(v, [1, hkv, lk, d])}
    if sinks:
        ins["sinks"] = ftensor(snk, [hq])
    outs = {}
    for n, (s, e) in enumerate(splits):
        bias = [0.0 if s <= j < e else NEG_INF for i in range(lq) for j in range(lk)]
        out, lse = forward(cfg, q, k, v, bias=bias, sinks=snk if n == 0 else None)
        outs["out_%d" % n] = ftensor(out, [1, hq, lq, d])
        outs["lse_%d" % n] = ftensor(lse, [1, hq, lq])
    out, lse = forward(cfg, q, k, v, sinks=snk)
    outs["out"] = ftensor(out, [1, hq, lq, d])
    outs["lse"] = ftensor(lse, [1, hq, lq])
    c = {"heads_q": hq, "heads_kv": hkv, "lq": lq, "lk": lk, "dk": d, "dv": d, "pos": pos,
         "splits": [list(x) for x in splits]}
    return case(name, SRC_SPLITS, c, ins, outs)


def build_splits():
    c = []
    c.append(splits_case("two equal splits", 511, 2, 2, 1, 12, 4, 11, [(0, 6), (6, 12)]))
    c.append(splits_case("unequal splits and an empty one", 512, 4, 2, 1, 10, 4, 9, [(0, 1), (1, 1), (1, 7), (7, 10)]))
    c.append(splits_case("a split after the queries, two queries", 513, 2, 1, 2, 12, 3, 6, [(0, 5), (5, 8), (8, 12)]))
    c.append(splits_case("sink in the first split", 514, 2, 2, 1, 9, 4, 8, [(0, 4), (4, 9)], sinks=True))
    return c


def ring_case(name, seed, hq, hkv, d, W, n, layout=HEADS_MAJOR):
    r = rng(seed)
    q = uniform(r, hq * d)
    k = uniform(r, hkv * n * d)  # every position, heads-major [1, hkv, n, d]
    v = uniform(r, hkv * n * d)
    # slots never written hold values the ring must not read
    kr = uniform(r, hkv * W * d, 5.0, 6.0)
    vr = uniform(r, hkv * W * d, 5.0, 6.0)
    for p in range(n):
        for g in range(hkv):
            src = idx(HEADS_MAJOR, 0, g, p, hkv, n, d)
            dst = idx(layout, 0, g, p % W, hkv, W, d)
            kr[dst:dst + d] = k[src:src + d]
            vr[dst:dst + d] = v[src:src + d]
    cfg = shape(1, hq, hkv, 1, n, d, d, mask=[causal(), window(W)])
    out, lse = forward(cfg, q, k, v)
    ring = [1, W, hkv, d] if layout == SEQ_MAJOR else [1, hkv, W, d]
    qs = [1, 1, hq, d] if layout == SEQ_MAJOR else [1, hq, 1, d]
    c = {"heads_q": hq, "heads_kv": hkv, "dk": d, "dv": d, "slots": W, "n": n, "layout": layout}
    ins = {"q": ftensor(q, qs), "k_ring": ftensor(kr, ring), "v_ring": ftensor(vr, ring)}
    return case(name, SRC_RING, c, ins, {"out": ftensor(out, qs), "lse": ftensor(lse, qs[:3])})


def build_ring():
    c = []
    c.append(ring_case("before the ring fills", 521, 2, 2, 4, 6, 4))
    c.append(ring_case("exactly full", 522, 2, 1, 4, 6, 6))
    c.append(ring_case("one past the wrap", 523, 4, 2, 4, 6, 7))
    c.append(ring_case("many steps after the wrap, seq-major", 524, 2, 2, 3, 5, 23, layout=SEQ_MAJOR))
    c.append(ring_case("a ring of one slot", 525, 2, 1, 4, 1, 5))
    return c


def packed_case(name, seed, hq, hkv, d, qoff, koff):
    r = rng(seed)
    tq, tk = qoff[-1], koff[-1]
    q = uniform(r, tq * hq * d)
    k = uniform(r, tk * hkv * d)
    v = uniform(r, tk * hkv * d)
    out, lse = [], []
    for b in range(len(qoff) - 1):
        lq, lk = qoff[b + 1] - qoff[b], koff[b + 1] - koff[b]
        if lq == 0:
            continue
        cfg = shape(1, hq, hkv, lq, lk, d, d, mask=[causal()], layout=SEQ_MAJOR)
        o, l = forward(cfg, q[qoff[b] * hq * d:qoff[b + 1] * hq * d],
                       k[koff[b] * hkv * d:koff[b + 1] * hkv * d], v[koff[b] * hkv * d:koff[b + 1] * hkv * d])
        out += o
        lse += l
    c = {"heads_q": hq, "heads_kv": hkv, "dk": d, "dv": d, "query_offsets": qoff, "key_offsets": koff}
    ins = {"q": ftensor(q, [tq, hq, d]), "k": ftensor(k, [tk, hkv, d]), "v": ftensor(v, [tk, hkv, d])}
    return case(name, SRC_PACKED, c, ins, {"out": ftensor(out, [tq, hq, d]), "lse": ftensor(lse, [tq, hq])})


def build_packed():
    c = []
    c.append(packed_case("three sequences, no prefix", 531, 2, 2, 4, [0, 3, 4, 9], [0, 3, 4, 9]))
    c.append(packed_case("cached prefixes of different lengths", 532, 4, 2, 4, [0, 2, 5, 6], [0, 7, 10, 14]))
    c.append(packed_case("a sequence with no queries", 533, 2, 1, 3, [0, 2, 2, 4], [0, 2, 6, 9]))
    return c


def draft_case(name, seed, b, hq, hkv, d, n, kd, layout=HEADS_MAJOR):
    r = rng(seed)
    q = uniform(r, b * hq * kd * d)
    kc = uniform(r, b * hkv * n * d)
    vc = uniform(r, b * hkv * n * d)
    kdr = uniform(r, b * hkv * kd * d)
    vdr = uniform(r, b * hkv * kd * d)
    L = n + kd
    k = flat([[rows(kc, layout, b, hkv, n, d)[x][g] + rows(kdr, layout, b, hkv, kd, d)[x][g]
               for g in range(hkv)] for x in range(b)], layout)
    v = flat([[rows(vc, layout, b, hkv, n, d)[x][g] + rows(vdr, layout, b, hkv, kd, d)[x][g]
               for g in range(hkv)] for x in range(b)], layout)
    cfg = shape(b, hq, hkv, kd, L, d, d, mask=[causal()], layout=layout)
    out, lse = forward(cfg, q, k, v)

    def sh(h, l):
        return [b, l, h, d] if layout == SEQ_MAJOR else [b, h, l, d]
    c = {"batch": b, "heads_q": hq, "heads_kv": hkv, "dk": d, "dv": d, "lq": kd, "lk": n, "layout": layout}
    ins = {"q": ftensor(q, sh(hq, kd)), "k_cache": ftensor(kc, sh(hkv, n)), "v_cache": ftensor(vc, sh(hkv, n)),
           "k_draft": ftensor(kdr, sh(hkv, kd)), "v_draft": ftensor(vdr, sh(hkv, kd))}
    return case(name, SRC_DRAFT, c, ins, {"out": ftensor(out, sh(hq, kd)), "lse": ftensor(lse, sh(hq, kd)[:3])})


def build_draft():
    c = []
    c.append(draft_case("four drafts after eight tokens", 541, 1, 2, 2, 4, 8, 4))
    c.append(draft_case("two sequences, grouped, seq-major", 542, 2, 4, 2, 4, 5, 3, layout=SEQ_MAJOR))
    c.append(draft_case("one draft is one decoding step", 543, 1, 2, 1, 4, 6, 1))
    return c


FAMILIES = families("kvcache", build_pages, build_splits, build_ring, build_packed, build_draft)
