"""Tests of plumbcheck, for unittest or pytest:

    cd bindings/python && python3 -m unittest -v test_plumbcheck

The tests that run plumb need the binary: PLUMBCHECK_BINARY, or plumb on
PATH; without it they are skipped, unless PLUMBCHECK_REQUIRE_BINARY=1
(the Go test that runs this file sets both), when they fail.
"""

import math
import os
import shutil
import sys
import tempfile
import unittest

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import plumbcheck as pc  # noqa: E402


def dense_float32():
    """Float32 values of every sign, exponent and high fraction: each of
    the 65536 top halves with low halves that make ties and near-ties of
    bfloat16 (0x8000 ± 1), plus NaN, ±Inf, ±0 and subnormals."""
    hi = np.arange(1 << 16, dtype=np.uint32) << 16
    lows = np.array([0x0000, 0x0001, 0x7FFF, 0x8000, 0x8001, 0xFFFF, 0x1234, 0xC3A5], dtype=np.uint32)
    u = (hi[:, None] | lows[None, :]).ravel()
    return u.view(np.float32)


def bf16_oracle(x32):
    """bfloat16 of float32 values by integer rounding on the bits, an
    independent construction: add 0x7fff plus the lowest kept bit, and
    drop the low half (NaN: the canonical 0x7fc0)."""
    u = x32.view(np.uint32).astype(np.uint64)
    r = ((u + 0x7FFF + ((u >> 16) & 1)) >> 16).astype(np.uint16)
    return np.where(np.isnan(x32), np.uint16(0x7FC0), r)


class Encode(unittest.TestCase):
    def test_known_patterns(self):
        cases = [
            ("bfloat16", 1.0, 0x3F80),
            ("bfloat16", -2.0, 0xC000),
            ("bfloat16", 1 + 2**-8, 0x3F80),  # the tie goes to the even 1
            ("bfloat16", 1 + 3 * 2**-8, 0x3F82),  # and here to the even 1 + 2^-6
            ("bfloat16", 1 + 2**-8 + 2**-40, 0x3F81),  # above the tie, from float64 in one step
            ("bfloat16", math.inf, 0x7F80),
            ("bfloat16", -math.inf, 0xFF80),
            ("bfloat16", math.nan, 0x7FC0),
            ("bfloat16", -math.nan, 0x7FC0),
            ("bfloat16", 3.3895313892515355e38, 0x7F7F),
            ("bfloat16", 3.4e38, 0x7F80),  # beyond max: overflows
            ("bfloat16", 2.0**-133, 0x0001),  # the smallest subnormal
            ("bfloat16", 2.0**-134, 0x0000),  # its half: the tie goes to 0
            ("bfloat16", -0.0, 0x8000),
            ("e4m3", 448.0, 0x7E),
            ("e4m3", 464.0, 0x7E),  # the tie with 480 (not a value) goes to 448
            ("e4m3", 465.0, 0x7F),  # above: NaN, as E4M3 has no infinity
            ("e4m3", math.inf, 0x7F),
            ("e4m3", math.nan, 0x7F),
            ("e4m3", -448.0, 0xFE),
            ("e4m3", 2.0**-9, 0x01),
            ("e4m3", 2.0**-10, 0x00),
            ("e4m3", 3 * 2.0**-10, 0x02),
            ("e4m3", 2.0**-6, 0x08),  # the smallest normal
            ("e4m3", -0.0, 0x80),
            ("e5m2", 57344.0, 0x7B),
            ("e5m2", 61440.0, 0x7C),  # the tie with 65536 overflows to +Inf
            ("e5m2", math.inf, 0x7C),
            ("e5m2", -math.inf, 0xFC),
            ("e5m2", math.nan, 0x7E),
            ("e5m2", 2.0**-16, 0x01),
            ("e5m2", 1.0, 0x3C),
        ]
        for fmt, x, want in cases:
            with self.subTest(fmt=fmt, x=x):
                got = pc.encode(x, fmt)
                self.assertEqual(int(got), want, "%s(%r) = %#x; want %#x" % (fmt, x, int(got), want))
                self.assertEqual(got.dtype, np.uint16 if fmt == "bfloat16" else np.uint8)

    def test_saturating(self):
        for fmt, big in (("bfloat16", 0x7F7F), ("e4m3", 0x7E), ("e5m2", 0x7B)):
            with self.subTest(fmt=fmt):
                got = pc.encode([math.inf, 1e300, -1e300, -math.inf, math.nan], fmt, saturate=True)
                nan = pc.FORMATS[fmt].nan_bits
                self.assertEqual(got.tolist(), [big, big, big | 1 << (pc.FORMATS[fmt].width - 1), big | 1 << (pc.FORMATS[fmt].width - 1), nan])
        self.assertEqual(int(pc.encode(500.0, "e4m3", saturate=True)), 0x7E)
        self.assertEqual(int(pc.encode(500.0, "e4m3")), 0x7F)

    def test_bfloat16_dense_sample(self):
        x = dense_float32()
        got = pc.encode(x, "bfloat16")
        want = bf16_oracle(x)
        bad = np.flatnonzero(got != want)
        self.assertEqual(bad.size, 0, "first disagreement: %r -> %#x; want %#x" % (
            x[bad[:1]], got[bad[:1]][0] if bad.size else 0, want[bad[:1]][0] if bad.size else 0))
        # From float64: the same as from the float32 it holds.
        with np.errstate(invalid="ignore"):
            x64 = x.astype(np.float64)
        self.assertTrue(np.array_equal(pc.encode(x64, "bfloat16"), got))

    def test_shapes_and_names(self):
        x = np.linspace(-3, 3, 24).reshape(2, 3, 4)
        self.assertEqual(pc.encode(x, "bf16").shape, (2, 3, 4))
        self.assertEqual(pc.encode(x, "fp8-e4m3").dtype, np.uint8)
        self.assertEqual(pc.encode(x, "E5M2").shape, (2, 3, 4))
        with self.assertRaises(ValueError) as e:
            pc.encode(x, "e3m4")
        self.assertIn("want one of bfloat16, e4m3, e5m2", str(e.exception))
        with self.assertRaises(TypeError):
            pc.encode(np.array(["a"]), "e4m3")
        with self.assertRaises(TypeError):
            pc.encode(np.array([1 + 2j]), "e4m3")


class Decode(unittest.TestCase):
    def test_every_pattern(self):
        b = np.arange(1 << 16, dtype=np.uint16)
        v = pc.decode(b, "bfloat16")
        with np.errstate(invalid="ignore"):
            want = (b.astype(np.uint32) << 16).view(np.float32).astype(np.float64)
        self.assertTrue(np.array_equal(v, want, equal_nan=True))
        for fmt in pc.FORMATS:
            with self.subTest(fmt=fmt):
                f = pc.FORMATS[fmt]
                b = np.arange(1 << f.width, dtype=f.dtype)
                v = pc.decode(b, fmt)
                nan = np.isnan(v)
                self.assertTrue(np.array_equal(pc.encode(v[~nan], fmt), b[~nan]), "decode then encode is the identity")
                self.assertEqual(np.nanmax(v[np.isfinite(v)]), f.max)
                self.assertEqual(np.min(v[v > 0]), f.min_subnormal)
                self.assertEqual(int(nan.sum()), {"bfloat16": 2 * 127, "e4m3": 2, "e5m2": 6}[fmt])
        self.assertFalse(np.isinf(pc.decode(np.arange(256), "e4m3")).any(), "E4M3 has no infinities")

    def test_bad_patterns(self):
        with self.assertRaises(ValueError) as e:
            pc.decode([0x100], "e4m3")
        self.assertIn("0x100 is out of range", str(e.exception))
        with self.assertRaises(ValueError):
            pc.decode([-1], "bfloat16")
        with self.assertRaises(TypeError):
            pc.decode([1.5], "bfloat16")


def binary():
    """The plumb binary, or None."""
    try:
        return pc.find_plumb()
    except pc.PlumbError:
        if os.environ.get("PLUMBCHECK_REQUIRE_BINARY") == "1":
            raise
        return None


def softmax32(x, axis=-1):
    x = x.astype(np.float32)
    e = np.exp(x - x.max(axis=axis, keepdims=True))
    return (e / e.sum(axis=axis, keepdims=True)).astype(np.float32)


class Check(unittest.TestCase):
    def setUp(self):
        if binary() is None:
            self.skipTest("no plumb binary (PLUMBCHECK_BINARY or plumb on PATH)")
        rng = np.random.default_rng(7)
        self.x = rng.standard_normal((2, 3, 16))

    def test_a_correct_port_passes(self):
        report = pc.check("softmax", {"x": self.x}, {"y": softmax32(self.x)})
        self.assertTrue(report["pass"])
        (out,) = report["outputs"]
        self.assertEqual(out["output"], "y")
        self.assertTrue(out["pass"])
        self.assertEqual(out["report"]["format"], "float32")
        self.assertIn("yardstick", out["report"]["tolerance"]["basis"])

    def test_a_wrong_port_fails_with_the_summary(self):
        with self.assertRaises(AssertionError) as e:
            pc.check("softmax", {"x": self.x}, {"y": softmax32(self.x, axis=1).astype(np.float32)})
        msg = str(e.exception)
        self.assertTrue(msg.startswith("plumb check softmax: FAIL\n"), msg)
        self.assertIn("  y (", msg)
        self.assertIn("elements exceed the elementwise tolerance", msg)
        self.assertIsInstance(e.exception, pc.CheckFailed)
        self.assertFalse(e.exception.report["pass"])
        self.assertEqual(e.exception.command[1], "check")

    def test_the_diagnosis_names_the_slip(self):
        x = self.x.astype(np.float32)
        sigmoid = (1 / (1 + np.exp(-x))).astype(np.float32)  # the port forgot x· of silu
        with self.assertRaises(pc.CheckFailed) as e:
            pc.check("activation", {"x": x}, {"y": sigmoid}, config={"function": "silu"})
        self.assertIn('"function": "sigmoid"', str(e.exception))

    def test_bit_patterns(self):
        y = softmax32(self.x)
        report = pc.check("softmax", {"x": self.x}, {"y": pc.encode(y, "bfloat16")}, fmt="bfloat16")
        self.assertEqual(report["outputs"][0]["report"]["format"], "bfloat16")
        with self.assertRaises(ValueError) as e:
            pc.check("softmax", {"x": self.x}, {"y": pc.encode(y, "bfloat16")})
        self.assertIn('want fmt="bfloat16"', str(e.exception))
        with self.assertRaises(ValueError):
            pc.check("softmax", {"x": self.x}, {"y": pc.encode(y, "e4m3")}, fmt="bfloat16")

    def test_tolerance_and_workdir(self):
        folder = tempfile.mkdtemp()
        try:
            y = softmax32(self.x)
            report = pc.check("softmax", {"x": self.x}, {"y": y}, tolerance={"abs": 1e-6}, workdir=folder)
            self.assertEqual(report["outputs"][0]["report"]["tolerance"]["abs"], 1e-6)
            self.assertTrue(os.path.exists(os.path.join(folder, "got_y.npy")))
            with self.assertRaises(pc.CheckFailed):
                pc.check("softmax", {"x": self.x}, {"y": y}, tolerance={"abs": 1e-12, "rel": 0}, diagnosis=False)
            with self.assertRaises(ValueError):
                pc.check("softmax", {"x": self.x}, {"y": y}, tolerance={"absolute": 1})
        finally:
            shutil.rmtree(folder)

    def test_plumb_refuses(self):
        with self.assertRaises(pc.PlumbError) as e:
            pc.check("softmax", {"x": self.x}, {"y": softmax32(self.x)}, config={"temperature": 2})
        self.assertIn("temperature", str(e.exception))
        self.assertIn("exit status 2", str(e.exception))
        with self.assertRaises(pc.PlumbError):
            pc.check("no-such-operation", {"x": self.x}, {"y": self.x})
        with self.assertRaises(pc.PlumbError) as e:
            pc.check("softmax", {"x": self.x}, {"y": self.x}, plumb="/nonexistent/plumb")
        self.assertIn("not found", str(e.exception))
        with self.assertRaises(ValueError):
            pc.check("softmax", {"x": self.x}, {})
        with self.assertRaises(ValueError):
            pc.check("softmax", {"x/../y": self.x}, {"y": self.x})


if __name__ == "__main__":
    unittest.main()
