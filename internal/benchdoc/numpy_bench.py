#!/usr/bin/python3
"""The numpy float64 side of the benchmark harness (internal/benchdoc).

    numpy_bench.py attention Q.npy K.npy V.npy OUT.npy   causal attention forward, output float32
    numpy_bench.py ffn X.npy W1.npy V.npy W2.npy OUT.npy   SwiGLU feed-forward layer, in-by-out weights
    numpy_bench.py kernels                               dgemm and in-memory attention timings

Each mode prints one JSON object on standard output: the BLAS kernel
OpenBLAS chose (openblas_get_corename; "unknown" under another BLAS) and
its timings in seconds. The environment chooses the BLAS
(LD_LIBRARY_PATH, OPENBLAS_NUM_THREADS, OPENBLAS_CORETYPE); the harness
sets it.
"""
import ctypes
import json
import sys
import time

import numpy as np


def corename():
    try:
        lib = ctypes.CDLL("libopenblas.so.0")
        lib.openblas_get_corename.restype = ctypes.c_char_p
        return lib.openblas_get_corename().decode()
    except (OSError, AttributeError):
        return "unknown"


ROWS = 256  # query rows per block: a block's scores are ROWS × (visible keys)


def attend_causal(q, k, v):
    """q, k, v [B, H, L, D]: softmax(q·kᵀ/√D with the causal mask)·v, by
    blocks of query rows, only the keys a block can see, the row maximum
    subtracted before exp (the queries end at the last key)."""
    b, h, lq, d = q.shape
    lk = k.shape[2]
    out = np.empty((b, h, lq, v.shape[3]))
    scale = 1.0 / np.sqrt(d)
    for i in range(b):
        for j in range(h):
            for r0 in range(0, lq, ROWS):
                r1 = min(r0 + ROWS, lq)
                last = r1 - 1 + (lk - lq)  # the last key row r1-1 sees
                s = (q[i, j, r0:r1] @ k[i, j, : last + 1].T) * scale
                pos = np.arange(r0, r1)[:, None] + (lk - lq)
                s = np.where(np.arange(last + 1)[None, :] <= pos, s, -np.inf)
                s -= s.max(axis=1, keepdims=True)
                p = np.exp(s)
                p /= p.sum(axis=1, keepdims=True)
                out[i, j, r0:r1] = p @ v[i, j, : last + 1]
    return out


def silu(a):
    return a / (1.0 + np.exp(-a))


def swiglu(x, w1, v, w2):
    """(SiLU(x·W1) ⊗ x·V)·W2, the weights stored in-by-out."""
    return (silu(x @ w1) * (x @ v)) @ w2


def attend_all(q, k, v, causal):
    """The whole score matrix at once, q, k, v [H, L, D] (as numpy code writes it)."""
    lq, lk = q.shape[1], k.shape[1]
    s = np.matmul(q, k.transpose(0, 2, 1)) * (1.0 / np.sqrt(q.shape[2]))
    if causal:
        pos = np.arange(lq)[:, None] + (lk - lq)
        s = np.where(np.arange(lk)[None, :] <= pos, s, -np.inf)
    s -= s.max(axis=-1, keepdims=True)
    p = np.exp(s)
    return np.matmul(p / p.sum(axis=-1, keepdims=True), v)


def timed(f):
    t0 = time.perf_counter()
    r = f()
    return r, time.perf_counter() - t0


def kernels():
    r = np.random.default_rng(7)
    n = 2048
    a, b = r.uniform(-1, 1, (n, n)), r.uniform(-1, 1, (n, n))
    a @ b
    _, t = timed(lambda: [a @ b for _ in range(5)])
    res = {"dgemm_gflops": 5 * 2 * n**3 / t / 1e9}
    h, l, d = 16, 2048, 128
    q, k, v = (r.uniform(-1, 1, (h, l, d)) for _ in range(3))
    res["forward_causal_s"] = timed(lambda: attend_all(q, k, v, True))[1]
    res["forward_full_s"] = timed(lambda: attend_all(q, k, v, False))[1]
    lk = 32768
    q1 = r.uniform(-1, 1, (h, 1, d))
    kc, vc = (r.uniform(-1, 1, (h, lk, d)) for _ in range(2))
    res["decode_s"] = min(timed(lambda: attend_all(q1, kc, vc, True))[1] for _ in range(3))
    return res


def main(argv):
    mode = argv[1] if len(argv) > 1 else ""
    res = {"kernel": corename(), "numpy": np.__version__}
    if mode == "attention" and len(argv) == 6:
        q, k, v = (np.load(f) for f in argv[2:5])
        o, res["compute_s"] = timed(lambda: attend_causal(q, k, v))
        np.save(argv[5], o.astype(np.float32))
    elif mode == "ffn" and len(argv) == 7:
        x, w1, v, w2 = (np.load(f) for f in argv[2:6])
        y, res["compute_s"] = timed(lambda: swiglu(x, w1, v, w2))
        np.save(argv[6], y)
    elif mode == "kernels" and len(argv) == 2:
        res.update(kernels())
    else:
        sys.exit("usage: numpy_bench.py attention Q K V OUT | ffn X W1 V W2 OUT | kernels")
    print(json.dumps(res))


if __name__ == "__main__":
    main(sys.argv)
