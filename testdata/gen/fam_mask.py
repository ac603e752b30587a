"""Golden cases for package mask: which keys each query may see.

Written from the definitions, independently of the Go code:
  * masking before the softmax, and the causal mask: Vaswani et al. 2017,
    "Attention Is All You Need", arXiv 1706.03762, section 3.2.3;
  * sliding window of n keys ending at the query (i - n < j <= i): the
    rolling-cache reading of Jiang et al. 2023, arXiv 2310.06825, section 2;
    bands with both extents generalise Beltagy et al. 2020, arXiv 2004.05150,
    section 3.1;
  * prefix-bidirectional masks, key padding and packed sequences: common
    practice, defined in mask/doc.go.
Query i sits at key position p(i) = a + offset + i with a = lk - lq for the
end alignment and a = 0 for the start alignment.

A mask is written as the Go side reads it (mask.Spec, mask/spec.go): a list
of entries {"kind": ..., that kind's keys}, intersected; an empty list is
every key. The keys are band before/after (-1 for no limit), window size,
prefix length, key-padding valid, packed offsets/block.

The mask family involves no rounding; its 'digits' field records the
generator's working precision like every other family.
"""

from common import btensor, ftensor, itensor, case, word

# Every convention word is spelled as the Go types define it
# (vocabulary.json); word() stops the generator on a word Go does not know.
FULL, CAUSAL, BAND, WINDOW, PREFIX, KEY_PADDING, PACKED = word(
    "mask.Kind", "full", "causal", "band", "window", "prefix", "key-padding", "packed")
BLOCK_CAUSAL, BLOCK_FULL = word("mask.Block", "causal", "full")
END, START = word("mask.Align", "end", "start")

# A band extent of UNBOUNDED means no limit on that side.
UNBOUNDED = -1

SRC_CAUSAL = "Vaswani et al. 2017, arXiv 1706.03762, sec. 3.2.3 (masking illegal connections before the softmax)"
SRC_WINDOW = "Jiang et al. 2023, arXiv 2310.06825, sec. 2 (window of W keys, i - W < j <= i); Beltagy et al. 2020, arXiv 2004.05150, sec. 3.1"
SRC_PRACTICE = "common practice (prefix-bidirectional, key padding, packed sequences); definition in mask/doc.go; masking per Vaswani et al. 2017, arXiv 1706.03762, sec. 3.2.3"
SRC_FULL = "Vaswani et al. 2017, arXiv 1706.03762, sec. 3.2.1 Eq. (1) (no mask)"


def pos(g, i):
    a = g["lk"] - g["lq"] if g["align"] == END else 0
    return a + g["offset"] + i


def segment(offsets, x):
    for s in range(len(offsets) - 1):
        if offsets[s] <= x < offsets[s + 1]:
            return s
    raise ValueError("position %d outside the packed sequences %r" % (x, offsets))


def sees_one(spec, g, b, i, j):
    """Whether one mask entry (a mask.Spec: {"kind": ..., its keys}) lets
    query i of batch entry b see key j."""
    k = spec["kind"]
    p = pos(g, i)
    if k == FULL:
        return True
    if k == CAUSAL:
        return j <= p
    if k == BAND:
        d = j - p
        lo = spec["before"]
        hi = spec["after"]
        return (lo == UNBOUNDED or d >= -lo) and (hi == UNBOUNDED or d <= hi)
    if k == WINDOW:
        return p - spec["size"] < j <= p
    if k == PREFIX:
        return j < spec["length"] or j <= p
    if k == KEY_PADDING:
        return j < spec["valid"][b]
    if k == PACKED:
        if segment(spec["offsets"], j) != segment(spec["offsets"], p):
            return False
        return spec["block"] == BLOCK_FULL or j <= p
    raise ValueError(k)


def sees(specs, g, b, i, j):
    """Whether the mask, a list of entries that are intersected, lets query
    i of batch entry b see key j. No entry at all is every key."""
    return all(sees_one(s, g, b, i, j) for s in specs)


def geometry(batch, lq, lk, align=END, offset=0):
    return {"batch": batch, "lq": lq, "lk": lk, "align": align, "offset": offset}


def make(name, source, specs, g, fill=None):
    """One case: the mask is a list of mask.Spec entries, intersected."""
    B, Lq, Lk = g["batch"], g["lq"], g["lk"]
    vis = [sees(specs, g, b, i, j) for b in range(B) for i in range(Lq) for j in range(Lk)]
    f = float("-inf") if fill is None else fill
    bias = [0.0 if v else f for v in vis]
    empty = []
    for b in range(B):
        for i in range(Lq):
            if not any(vis[(b * Lq + i) * Lk + j] for j in range(Lk)):
                empty += [b, i]
    cfg = {"mask": specs}
    cfg.update(g)
    if fill is not None:
        cfg["fill"] = fill
    return case(name, source, cfg, {},
                {"visible": btensor(vis, [B, Lq, Lk]),
                 "bias": ftensor(bias, [B, Lq, Lk]),
                 "empty_rows": itensor(empty, [len(empty) // 2, 2])})


# One mask.Spec entry per kind, with exactly that kind's keys.
def full():
    return {"kind": FULL}


def causal():
    return {"kind": CAUSAL}


def band(before, after):
    return {"kind": BAND, "before": before, "after": after}


def window(size):
    return {"kind": WINDOW, "size": size}


def prefix(length):
    return {"kind": PREFIX, "length": length}


def key_padding(valid):
    return {"kind": KEY_PADDING, "valid": valid}


def packed(offsets, block):
    return {"kind": PACKED, "offsets": offsets, "block": block}


def build():
    C = [causal()]
    F = [full()]
    U = UNBOUNDED
    out = [
        make("full_4x6", SRC_FULL, F, geometry(1, 4, 6)),
        make("full_cross_lq_gt_lk", SRC_FULL, F, geometry(1, 5, 3)),
        make("full_lk0", SRC_FULL, F, geometry(1, 2, 0)),
        make("causal_5x5", SRC_CAUSAL, C, geometry(1, 5, 5)),
        make("causal_end_3x7", SRC_CAUSAL, C, geometry(1, 3, 7)),
        make("causal_start_3x7", SRC_CAUSAL, C, geometry(1, 3, 7, START)),
        make("causal_start_offset2_3x7", SRC_CAUSAL, C, geometry(2, 3, 7, START, 2)),
        make("causal_end_offset_minus2_3x7", SRC_CAUSAL, C, geometry(1, 3, 7, END, -2)),
        make("causal_decode_1x9", SRC_CAUSAL, C, geometry(1, 1, 9)),
        make("causal_finite_fill", SRC_CAUSAL, C, geometry(1, 4, 4), fill=-1e9),
        make("causal_fill_lowest_binary16", SRC_CAUSAL, C, geometry(1, 3, 3), fill=-65504.0),
        make("window1_6x6", SRC_WINDOW, [window(1)], geometry(1, 6, 6)),
        make("window3_8x8", SRC_WINDOW, [window(3)], geometry(1, 8, 8)),
        make("window3_end_2x8", SRC_WINDOW, [window(3)], geometry(1, 2, 8)),
        make("window4_start_offset3_3x9", SRC_WINDOW, [window(4)], geometry(1, 3, 9, START, 3)),
        make("window_longer_than_keys", SRC_WINDOW, [window(20)], geometry(1, 6, 6)),
        make("band_2_1_7x7", SRC_WINDOW, [band(2, 1)], geometry(1, 7, 7)),
        make("band_0_0_5x5", SRC_WINDOW, [band(0, 0)], geometry(1, 5, 5)),
        make("band_future_only_5x5", SRC_WINDOW, [band(0, U)], geometry(1, 5, 5)),
        make("band_unbounded_before_1_5x5", SRC_WINDOW, [band(U, 1)], geometry(1, 5, 5)),
        make("band_unbounded_both", SRC_WINDOW, [band(U, U)], geometry(1, 4, 6, START)),
        make("band_1_2_end_3x8", SRC_WINDOW, [band(1, 2)], geometry(1, 3, 8)),
        make("prefix3_7x7", SRC_PRACTICE, [prefix(3)], geometry(1, 7, 7)),
        make("prefix0_4x4", SRC_PRACTICE, [prefix(0)], geometry(1, 4, 4)),
        make("prefix_all_5x5", SRC_PRACTICE, [prefix(5)], geometry(1, 5, 5)),
        make("prefix2_end_3x6", SRC_PRACTICE, [prefix(2)], geometry(1, 3, 6)),
        make("padding_b3", SRC_PRACTICE, [key_padding([5, 2, 0])], geometry(3, 2, 5)),
        make("padding_cross", SRC_PRACTICE, [key_padding([1, 4])], geometry(2, 6, 4)),
        make("packed_causal_3seq", SRC_PRACTICE, [packed([0, 3, 4, 8], BLOCK_CAUSAL)], geometry(1, 8, 8)),
        make("packed_full_3seq", SRC_PRACTICE, [packed([0, 2, 5, 7], BLOCK_FULL)], geometry(1, 7, 7)),
        make("packed_causal_end_chunk", SRC_PRACTICE, [packed([0, 4, 9], BLOCK_CAUSAL)], geometry(1, 3, 9)),
        make("packed_one_seq_causal", SRC_PRACTICE, [packed([0, 5], BLOCK_CAUSAL)], geometry(1, 5, 5)),
        # An intersection is a list of several entries.
        make("intersect_window_padding", SRC_PRACTICE,
             [window(2), key_padding([4, 6])], geometry(2, 6, 6)),
        make("intersect_packed_window", SRC_PRACTICE,
             [packed([0, 5, 8], BLOCK_CAUSAL), window(3)], geometry(1, 8, 8)),
        make("intersect_causal_band_start", SRC_PRACTICE,
             [causal(), band(1, 3)], geometry(1, 4, 8, START, 1)),
        # An empty list is every key (mask.Build of no entry is Full).
        make("no_entry_is_full_3x5", SRC_FULL, [], geometry(2, 3, 5)),
        # Three entries: the intersection of all of them.
        make("intersect_three_prefix_band_padding", SRC_PRACTICE,
             [prefix(3), band(1, U), key_padding([6, 4])], geometry(2, 6, 6)),
    ]
    return out


FAMILIES = [("mask", "kinds", build)]
