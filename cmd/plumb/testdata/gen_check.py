"""Recompute the first values of `plumb gen` from the algorithm its help
states, with Python's integers and math module only. Prints, one per line,
the first N uniform [0, 1) values and the first N normal values for a seed.

usage: gen_check.py SEED N
"""
import math
import sys

M = 0x2360ED051FC65DA44385DF649FCCF645
A = 0x5851F42D4C957F2D14057B7EF767814F
MASK64 = (1 << 64) - 1


def outputs(seed):
    state = seed << 64  # hi = seed, lo = 0
    while True:
        state = (state * M + A) % (1 << 128)
        h, l = state >> 64, state & MASK64
        h ^= h >> 32
        h = (h * 0xDA942042E4DD58B5) & MASK64
        h ^= h >> 48
        h = (h * (l | 1)) & MASK64
        yield h


def main():
    seed, n = int(sys.argv[1]), int(sys.argv[2])
    g = outputs(seed)
    for _ in range(n):
        print(repr((next(g) >> 11) * 2.0**-53))
    g = outputs(seed)
    normals = []
    while len(normals) < n:
        u1 = ((next(g) >> 11) + 1) * 2.0**-53
        u2 = (next(g) >> 11) * 2.0**-53
        r = math.sqrt(-2 * math.log(u1))
        t = (2 * math.pi) * u2
        normals += [r * math.cos(t), r * math.sin(t)]
    for z in normals[:n]:
        print(repr(z))


if __name__ == "__main__":
    main()
