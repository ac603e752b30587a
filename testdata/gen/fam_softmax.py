"""Golden cases for attention.Softmax and attention.LogSumExp: the softmax
and the natural log-sum-exp of each row, computed from the definitions

    softmax(x)_j = exp(x_j) / sum_k exp(x_k)     Vaswani et al. 2017,
                                                 arXiv 1706.03762, sec. 3.2.1 Eq. (1)
    lse(x)       = log sum_k exp(x_k)            Milakov & Gimelshein 2018,
                                                 arXiv 1805.02867, sec. 3.1

directly in mpmath at 50 digits: mpmath's exponent range is unbounded, so
exp(1000) needs no shift by the row maximum here, unlike in float64.
A row whose elements are all -inf has lse -inf and a softmax of 0/0,
stored as nan; a row with a nan gives nan throughout.
"""

import math

from mpmath import mp, mpf

from common import case, ftensor, rng, uniform

SRC = ("Vaswani et al. 2017, arXiv 1706.03762, sec. 3.2.1 Eq. (1) (softmax); "
       "Milakov & Gimelshein 2018, arXiv 1805.02867, sec. 3.1 (log-sum-exp)")


def row_values(row):
    if any(math.isnan(v) for v in row):
        return [mp.nan] * len(row), mp.nan
    fin = [mpf(v) for v in row if not math.isinf(v)]
    if any(v == math.inf for v in row):
        raise ValueError("+inf rows are covered by the Go special-case tests")
    if not fin:
        return [mp.nan] * len(row), mpf("-inf")
    total = mp.fsum(mp.exp(v) for v in fin)
    sm = [mpf(0) if math.isinf(v) else mp.exp(mpf(v)) / total for v in row]
    return sm, mp.log(total)


def make(name, rows, n):
    x = [v for r in rows for v in r]
    sm, lse = [], []
    for r in rows:
        s, l = row_values(r)
        sm += s
        lse.append(l)
    return case(name, SRC, {"n": n},
                {"x": ftensor(x, [len(rows), n])},
                {"softmax": ftensor(sm, [len(rows), n]),
                 "lse": ftensor(lse, [len(rows)])})


def build():
    r = rng(8101)
    ninf = float("-inf")
    out = [
        make("worked_1_3_2", [[1.0, 3.0, 2.0]], 3),
        make("random_4x7", [uniform(r, 7, -4, 4) for _ in range(4)], 7),
        make("random_3x64", [uniform(r, 64, -10, 10) for _ in range(3)], 64),
        make("wide_2x1000", [uniform(r, 1000, -3, 3) for _ in range(2)], 1000),
        make("near_plus_1000", [[1000.0 + d for d in uniform(r, 9, -2, 2)] for _ in range(2)], 9),
        make("near_minus_1000", [[-1000.0 + d for d in uniform(r, 9, -2, 2)] for _ in range(2)], 9),
        make("spread_pm_1000", [[1000.0, -1000.0, 999.5, 0.0, 998.0]], 5),
        make("tiny_logits", [[1e-300 * d for d in uniform(r, 6)]], 6),
        make("n1", [[0.25], [-7.0], [800.0]], 1),
        make("masked_entries", [[ninf, 0.5, ninf, -0.25], [ninf, ninf, ninf, 3.0]], 4),
        make("all_masked_row", [[ninf, ninf, ninf], [0.0, 1.0, 2.0]], 3),
        make("nan_row", [[0.0, float("nan"), 1.0], [1.0, 2.0, 3.0]], 3),
        make("equal_logits", [[2.5] * 8], 8),
        make("dominant", [[0.0, 40.0, 0.0, -40.0]], 4),
    ]
    return out


FAMILIES = [("attention", "softmax", build)]
