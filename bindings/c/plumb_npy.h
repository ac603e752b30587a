/*
 * plumb_npy.h: write NumPy .npy files from a C, C++ or GPU-kernel harness,
 * for plumb diff and plumb check to read. One header, C99 or C++, the C
 * standard library only; every function is static inline, so include it in
 * as many files as you like.
 *
 *   float64            plumb_npy_write_f64   descr '<f8'
 *   float32            plumb_npy_write_f32   descr '<f4'
 *   binary16 patterns  plumb_npy_write_f16   descr '<f2'  (read as float16)
 *   bfloat16 patterns  plumb_npy_write_bf16  descr '<u2'  (plumb ... -format bfloat16)
 *   E4M3/E5M2 patterns plumb_npy_write_fp8   descr '|u1'  (plumb ... -format e4m3 or e5m2)
 *
 * NumPy has no bfloat16 or 8-bit float type, so their bit patterns travel
 * as unsigned integers, and the reader is told the format: plumb's -format
 * flag, or plumbcheck.decode in Python.
 *
 * The file is NumPy's format version 1.0 (the numpy.lib.format
 * documentation, "NPY format"): the magic string "\x93NUMPY", the version
 * bytes 1 0, a 2-byte little-endian header length, and the header, a Python
 * dictionary literal {'descr': ..., 'fortran_order': False, 'shape': (...), }
 * padded with spaces and ended by a newline so that the data start at a
 * multiple of 64 bytes; then the data, row-major (C order), little-endian
 * whatever the host's byte order. The bytes are the ones numpy.save writes
 * for the same array, the spare room it leaves after the dictionary
 * included.
 *
 * Every writer returns PLUMB_NPY_OK (0) or an error status, never aborts:
 * plumb_npy_strerror says what it means, and errno keeps the system's
 * reason when a file could not be opened or written. A file that could not
 * be written whole is removed.
 *
 *   size_t shape[2] = {rows, cols};
 *   int st = plumb_npy_write_f32("out.npy", host_out, shape, 2);
 *   if (st != PLUMB_NPY_OK) fprintf(stderr, "out.npy: %s\n", plumb_npy_strerror(st));
 *
 * The conversions plumb_bf16_from_f32 and plumb_f16_from_f32 round a float
 * to bfloat16 or binary16 to nearest, ties to even, with the bits plumb's
 * compare.BFloat16.Encode and compare.Binary16.Encode give (NaN as the
 * quiet NaN 0x7fc0 or 0x7e00, sign clear; overflow to infinity).
 */
#ifndef PLUMB_NPY_H
#define PLUMB_NPY_H

#include <errno.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Every function is PLUMB_NPY_API: static inline unless defined before the
   header is included. */
#ifndef PLUMB_NPY_API
#define PLUMB_NPY_API static inline
#endif

/* The statuses the writers return. */
enum {
    PLUMB_NPY_OK = 0,
    PLUMB_NPY_EARG = 1,   /* a NULL path, file or data pointer (with elements), or an unknown kind */
    PLUMB_NPY_ESHAPE = 2, /* ndim negative or above PLUMB_NPY_MAX_DIMS, or the byte count overflows size_t */
    PLUMB_NPY_EOPEN = 3,  /* the file could not be opened for writing (errno says why) */
    PLUMB_NPY_EWRITE = 4  /* writing or closing the file failed (errno says why) */
};

/* The most dimensions a shape may have (NumPy's own limit is 64). */
#define PLUMB_NPY_MAX_DIMS 32

/* The element kinds. */
typedef enum {
    PLUMB_NPY_F64 = 0,  /* double                          '<f8' */
    PLUMB_NPY_F32 = 1,  /* float                           '<f4' */
    PLUMB_NPY_F16 = 2,  /* uint16_t binary16 patterns      '<f2' */
    PLUMB_NPY_BF16 = 3, /* uint16_t bfloat16 patterns      '<u2' */
    PLUMB_NPY_FP8 = 4   /* uint8_t E4M3 or E5M2 patterns   '|u1' */
} plumb_npy_kind;

/* plumb_npy_strerror returns a sentence for a status. */
PLUMB_NPY_API const char *plumb_npy_strerror(int status) {
    switch (status) {
    case PLUMB_NPY_OK:
        return "ok";
    case PLUMB_NPY_EARG:
        return "invalid argument: a NULL path, file or data pointer, or an unknown element kind";
    case PLUMB_NPY_ESHAPE:
        return "invalid shape: ndim must be 0 to PLUMB_NPY_MAX_DIMS and the data must fit in size_t bytes";
    case PLUMB_NPY_EOPEN:
        return "the file could not be opened for writing (see errno)";
    case PLUMB_NPY_EWRITE:
        return "writing the file failed (see errno)";
    }
    return "unknown status";
}

/* plumb_bf16_from_f32 rounds x to bfloat16, to nearest, ties to even. */
PLUMB_NPY_API uint16_t plumb_bf16_from_f32(float x) {
    uint32_t u;
    memcpy(&u, &x, sizeof u);
    if ((u & 0x7fffffffu) > 0x7f800000u) {
        return 0x7fc0u; /* NaN */
    }
    /* Add just under half of the dropped part, plus the lowest kept bit so
       that a tie goes to even; a carry moves into the exponent, and past the
       largest finite value into infinity, as rounding does. */
    return (uint16_t)((u + 0x7fffu + ((u >> 16) & 1u)) >> 16);
}

/* plumb_f32_from_bf16 is the float a bfloat16 pattern holds (exact). */
PLUMB_NPY_API float plumb_f32_from_bf16(uint16_t b) {
    uint32_t u = (uint32_t)b << 16;
    float x;
    memcpy(&x, &u, sizeof x);
    return x;
}

/* plumb_f16_from_f32 rounds x to IEEE 754 binary16, to nearest, ties to
   even, in one step. */
PLUMB_NPY_API uint16_t plumb_f16_from_f32(float x) {
    uint32_t u, a, sign, m, h, rem, half;
    int e, shift;
    memcpy(&u, &x, sizeof u);
    sign = (u >> 16) & 0x8000u;
    a = u & 0x7fffffffu;
    if (a > 0x7f800000u) {
        return 0x7e00u; /* NaN */
    }
    if (a >= 0x477ff000u) {
        return (uint16_t)(sign | 0x7c00u); /* at or above 65520, the tie past 65504: infinity */
    }
    if (a >= 0x38800000u) { /* at or above 2^-14: a normal binary16 */
        h = ((((a >> 23) - 127u + 15u) << 10) | ((a & 0x7fffffu) >> 13));
        rem = a & 0x1fffu;
        if (rem > 0x1000u || (rem == 0x1000u && (h & 1u))) {
            h++; /* a carry into the exponent is right */
        }
        return (uint16_t)(sign | h);
    }
    e = (int)(a >> 23) - 127; /* below 2^-14: a subnormal (or 0) in units of 2^-24 */
    if (e < -25) {
        return (uint16_t)sign; /* below half the smallest subnormal (float32 subnormals too) */
    }
    m = (a & 0x7fffffu) | 0x800000u;
    shift = -(e + 1); /* 14 to 24 */
    h = m >> shift;
    rem = m & ((1u << shift) - 1u);
    half = 1u << (shift - 1);
    if (rem > half || (rem == half && (h & 1u))) {
        h++; /* up to 0x400, the smallest normal */
    }
    return (uint16_t)(sign | h);
}

/* plumb_npy_itemsize_ is the size of one element of kind, 0 if unknown. */
PLUMB_NPY_API size_t plumb_npy_itemsize_(plumb_npy_kind kind) {
    switch (kind) {
    case PLUMB_NPY_F64:
        return 8;
    case PLUMB_NPY_F32:
        return 4;
    case PLUMB_NPY_F16:
    case PLUMB_NPY_BF16:
        return 2;
    case PLUMB_NPY_FP8:
        return 1;
    }
    return 0;
}

/* plumb_npy_header_ writes the magic string, version, length and padded
   header into buf (at least 64 + 64·(PLUMB_NPY_MAX_DIMS/2) bytes) and
   returns its length. */
PLUMB_NPY_API size_t plumb_npy_header_(char *buf, plumb_npy_kind kind, const size_t *shape, int ndim) {
    static const char *const descr[] = {"<f8", "<f4", "<f2", "<u2", "|u1"};
    char dict[1024];
    size_t n, total, pad, i;
    int d;
    n = (size_t)sprintf(dict, "{'descr': '%s', 'fortran_order': False, 'shape': (", descr[kind]);
    for (d = 0; d < ndim; d++) {
        n += (size_t)sprintf(dict + n, d > 0 ? ", %llu" : "%llu", (unsigned long long)shape[d]);
    }
    if (ndim == 1) {
        dict[n++] = ',';
    }
    n += (size_t)sprintf(dict + n, "), }");
    if (ndim > 0) { /* numpy's spare room for the first dimension to grow in place */
        char digits[32];
        size_t len = (size_t)sprintf(digits, "%llu", (unsigned long long)shape[0]);
        for (; len < 21; len++) {
            dict[n++] = ' ';
        }
    }
    /* Spaces, 1 to 64 of them, and a newline end the header on a multiple
       of 64 bytes from the file's start (10 bytes precede the dictionary). */
    pad = 64 - (10 + n + 1) % 64;
    total = 10 + n + pad + 1;
    memcpy(buf, "\x93NUMPY\x01\x00", 8);
    buf[8] = (char)((total - 10) & 0xff);
    buf[9] = (char)((total - 10) >> 8);
    memcpy(buf + 10, dict, n);
    for (i = 0; i < pad; i++) {
        buf[10 + n + i] = ' ';
    }
    buf[total - 1] = '\n';
    return total;
}

/* plumb_npy_fwrite writes one array of count = ∏shape elements of kind,
   row-major, to the open file f (opened "wb"). ndim 0 is a scalar: one
   element. */
PLUMB_NPY_API int plumb_npy_fwrite(FILE *f, plumb_npy_kind kind, const void *data, const size_t *shape, int ndim) {
    char head[64 + 64 * (PLUMB_NPY_MAX_DIMS / 2) + 1024];
    unsigned char out[4096];
    size_t size = plumb_npy_itemsize_(kind), count = 1, i, fill = 0, hlen;
    int d;
    if (f == NULL || size == 0) {
        return PLUMB_NPY_EARG;
    }
    if (ndim < 0 || ndim > PLUMB_NPY_MAX_DIMS || (ndim > 0 && shape == NULL)) {
        return PLUMB_NPY_ESHAPE;
    }
    for (d = 0; d < ndim; d++) {
        if (shape[d] != 0 && count > (size_t)-1 / size / shape[d]) {
            return PLUMB_NPY_ESHAPE;
        }
        count *= shape[d];
    }
    if (data == NULL && count > 0) {
        return PLUMB_NPY_EARG;
    }
    hlen = plumb_npy_header_(head, kind, shape, ndim);
    if (fwrite(head, 1, hlen, f) != hlen) {
        return PLUMB_NPY_EWRITE;
    }
    for (i = 0; i < count; i++) {
        uint64_t v = 0;
        size_t k;
        switch (kind) {
        case PLUMB_NPY_F64:
            memcpy(&v, (const double *)data + i, 8);
            break;
        case PLUMB_NPY_F32: {
            uint32_t w;
            memcpy(&w, (const float *)data + i, 4);
            v = w;
            break;
        }
        case PLUMB_NPY_F16:
        case PLUMB_NPY_BF16:
            v = ((const uint16_t *)data)[i];
            break;
        case PLUMB_NPY_FP8:
            v = ((const uint8_t *)data)[i];
            break;
        }
        for (k = 0; k < size; k++) { /* least significant byte first, on any host */
            out[fill++] = (unsigned char)(v >> (8 * k));
        }
        if (fill + 8 > sizeof out) {
            if (fwrite(out, 1, fill, f) != fill) {
                return PLUMB_NPY_EWRITE;
            }
            fill = 0;
        }
    }
    if (fill > 0 && fwrite(out, 1, fill, f) != fill) {
        return PLUMB_NPY_EWRITE;
    }
    return PLUMB_NPY_OK;
}

/* plumb_npy_write writes the array to the file at path, replacing it; on an
   error no partial file is left. */
PLUMB_NPY_API int plumb_npy_write(const char *path, plumb_npy_kind kind, const void *data, const size_t *shape, int ndim) {
    FILE *f;
    int st, saved;
    if (path == NULL || plumb_npy_itemsize_(kind) == 0) {
        return PLUMB_NPY_EARG;
    }
    if (ndim < 0 || ndim > PLUMB_NPY_MAX_DIMS || (ndim > 0 && shape == NULL)) {
        return PLUMB_NPY_ESHAPE; /* before the file is touched */
    }
    f = fopen(path, "wb");
    if (f == NULL) {
        return PLUMB_NPY_EOPEN;
    }
    st = plumb_npy_fwrite(f, kind, data, shape, ndim);
    saved = errno;
    if (fclose(f) != 0 && st == PLUMB_NPY_OK) {
        st = PLUMB_NPY_EWRITE;
        saved = errno;
    }
    if (st != PLUMB_NPY_OK) {
        remove(path);
        errno = saved;
    }
    return st;
}

PLUMB_NPY_API int plumb_npy_write_f64(const char *path, const double *data, const size_t *shape, int ndim) {
    return plumb_npy_write(path, PLUMB_NPY_F64, data, shape, ndim);
}

PLUMB_NPY_API int plumb_npy_write_f32(const char *path, const float *data, const size_t *shape, int ndim) {
    return plumb_npy_write(path, PLUMB_NPY_F32, data, shape, ndim);
}

/* bits: IEEE 754 binary16 patterns (a GPU's half, __half_as_ushort). */
PLUMB_NPY_API int plumb_npy_write_f16(const char *path, const uint16_t *bits, const size_t *shape, int ndim) {
    return plumb_npy_write(path, PLUMB_NPY_F16, bits, shape, ndim);
}

/* bits: bfloat16 patterns; plumb reads them with -format bfloat16. */
PLUMB_NPY_API int plumb_npy_write_bf16(const char *path, const uint16_t *bits, const size_t *shape, int ndim) {
    return plumb_npy_write(path, PLUMB_NPY_BF16, bits, shape, ndim);
}

/* bits: OCP 8-bit E4M3 or E5M2 patterns; plumb reads them with -format e4m3
   or -format e5m2. */
PLUMB_NPY_API int plumb_npy_write_fp8(const char *path, const uint8_t *bits, const size_t *shape, int ndim) {
    return plumb_npy_write(path, PLUMB_NPY_FP8, bits, shape, ndim);
}

#ifdef __cplusplus
}
#endif

#endif /* PLUMB_NPY_H */
