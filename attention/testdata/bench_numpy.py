#!/usr/bin/python3
"""Time, in numpy float64, the forward computation that BenchmarkForwardFastCausal
(and BenchmarkForwardFastFull, BenchmarkDecodeFast) time in Go: causal (and
unmasked) scaled dot-product attention with batch 1, 16 heads, 2048
positions, head dimension 128, and one query against 32768 cached keys. For comparison only; no test depends on it.

    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 attention/testdata/bench_numpy.py

Debian's python3-numpy calls whatever libblas.so.3 the system provides: the
reference BLAS of libblas3 unless an optimised one (libopenblas0-pthread)
is installed. The figures in the package doc use OpenBLAS 0.3.21 (Debian's
libopenblas0-pthread, put first on LD_LIBRARY_PATH); with the reference
BLAS numpy is about 15 times slower.
"""
import time

import numpy as np


def attend(q, k, v, causal):
    # q [H, Lq, D], k, v [H, Lk, D]
    lq, lk = q.shape[1], k.shape[1]
    s = np.matmul(q, k.transpose(0, 2, 1)) * (1.0 / np.sqrt(q.shape[2]))
    if causal:
        pos = np.arange(lq)[:, None] + (lk - lq)
        s = np.where(np.arange(lk)[None, :] <= pos, s, -np.inf)
    m = s.max(axis=-1, keepdims=True)
    p = np.exp(s - m)
    l = p.sum(axis=-1, keepdims=True)
    return np.matmul(p / l, v), (m + np.log(l))[..., 0]


def best(f, n):
    t = []
    for _ in range(n):
        t0 = time.perf_counter()
        f()
        t.append(time.perf_counter() - t0)
    return min(t)


def main():
    r = np.random.default_rng(7)
    h, l, d = 16, 2048, 128
    q, k, v = (r.uniform(-1, 1, (h, l, d)) for _ in range(3))
    print("numpy %s, threads as configured" % np.__version__)
    print("forward causal B1 H16 L2048 D128: %.3f s (best of 3)" % best(lambda: attend(q, k, v, True), 3))
    print("forward full   B1 H16 L2048 D128: %.3f s (best of 3)" % best(lambda: attend(q, k, v, False), 3))
    lk = 32768
    q1 = r.uniform(-1, 1, (h, 1, d))
    kc, vc = (r.uniform(-1, 1, (h, lk, d)) for _ in range(2))
    print("decode B1 H16 Lq1 Lk32768 D128: %.4f s (best of 5)" % best(lambda: attend(q1, kc, vc, True), 5))


if __name__ == "__main__":
    main()
