/*
 * test_plumb_npy: writes .npy files with plumb_npy.h into the folder DIR
 * for the Go test bindings_test.go (package bindings_test) to read back
 * bit for bit and hand to plumb, and checks the header's error statuses.
 *
 *   cc -std=c99 -Wall -Wextra -pedantic -I bindings/c bindings/c/test_plumb_npy.c -o test_plumb_npy
 *   ./test_plumb_npy DIR
 *
 * Exit status 0 when every file was written and every error status was
 * the expected one, 1 otherwise (each failure is printed), 2 for a usage
 * error.
 */
#include "plumb_npy.h"

#include <stdlib.h>

static int failures = 0;

static void want(int got, int expected, const char *what) {
    if (got != expected) {
        fprintf(stderr, "FAIL %s: status %d (%s); want %d (%s)\n", what, got, plumb_npy_strerror(got), expected,
                plumb_npy_strerror(expected));
        failures++;
    }
}

static char path_buf[4096];

static const char *in_dir(const char *dir, const char *name) {
    snprintf(path_buf, sizeof path_buf, "%s/%s", dir, name);
    return path_buf;
}

/* The low halves of the dense sample: ties and near-ties of bfloat16
   (0x8000) and of binary16 at every exponent that reaches its subnormals
   (0x1000, 0x2000, 0x4000), and a few others. */
static const uint32_t lows[] = {0x0000, 0x0001, 0x0fff, 0x1000, 0x1001, 0x1fff, 0x2000, 0x2001, 0x3fff,
                                0x4000, 0x4001, 0x7fff, 0x8000, 0x8001, 0xc000, 0xffff, 0x1234, 0xc3a5};
#define NLOWS (sizeof lows / sizeof lows[0])

int main(int argc, char **argv) {
    const char *dir;
    size_t i, n;
    if (argc != 2) {
        fprintf(stderr, "usage: test_plumb_npy DIR\n");
        return 2;
    }
    dir = argv[1];

    {
        double v[6] = {0.1, -0.25, 1e-300, -0.0, 1.0 / 3.0, 6.02e23};
        size_t shape[2] = {2, 3};
        want(plumb_npy_write_f64(in_dir(dir, "f64.npy"), v, shape, 2), PLUMB_NPY_OK, "f64.npy");
    }
    {
        float v[4] = {1.5f, -0.0f, 3.4028234663852886e38f, 1e-45f};
        size_t shape[1] = {4};
        want(plumb_npy_write_f32(in_dir(dir, "f32.npy"), v, shape, 1), PLUMB_NPY_OK, "f32.npy");
    }
    {
        uint16_t v[6] = {0x3c00, 0xc000, 0x7bff, 0x0001, 0x7c00, 0x8000};
        size_t shape[2] = {3, 2};
        want(plumb_npy_write_f16(in_dir(dir, "f16.npy"), v, shape, 2), PLUMB_NPY_OK, "f16.npy");
    }
    {
        float x[8] = {1.0f, -2.0f, 3.14159f, 1e-40f, 65504.0f, -1e30f, 0.1f, 7.0f};
        uint16_t v[8];
        size_t shape[3] = {2, 2, 2};
        for (i = 0; i < 8; i++) {
            v[i] = plumb_bf16_from_f32(x[i]);
            if (plumb_bf16_from_f32(plumb_f32_from_bf16(v[i])) != v[i]) {
                fprintf(stderr, "FAIL bfloat16 %#x does not round-trip\n", (unsigned)v[i]);
                failures++;
            }
        }
        want(plumb_npy_write_bf16(in_dir(dir, "bf16.npy"), v, shape, 3), PLUMB_NPY_OK, "bf16.npy");
    }
    {
        uint8_t v[5] = {0x7e, 0x01, 0x80, 0x38, 0xfe};
        size_t shape[1] = {5};
        want(plumb_npy_write_fp8(in_dir(dir, "fp8.npy"), v, shape, 1), PLUMB_NPY_OK, "fp8.npy");
    }
    {
        float v = 2.5f;
        want(plumb_npy_write_f32(in_dir(dir, "scalar.npy"), &v, NULL, 0), PLUMB_NPY_OK, "scalar.npy");
    }
    {
        size_t shape[2] = {0, 3};
        want(plumb_npy_write_f32(in_dir(dir, "empty.npy"), NULL, shape, 2), PLUMB_NPY_OK, "empty.npy");
    }
    {
        static float v[300 * 7];
        size_t shape[2] = {300, 7};
        for (i = 0; i < 300 * 7; i++) {
            v[i] = (float)i * 0.5f;
        }
        want(plumb_npy_write_f32(in_dir(dir, "big.npy"), v, shape, 2), PLUMB_NPY_OK, "big.npy");
    }

    /* The dense sample and its roundings. */
    n = (size_t)65536 * NLOWS;
    {
        float *x = (float *)malloc(n * sizeof *x);
        uint16_t *bf = (uint16_t *)malloc(n * sizeof *bf);
        uint16_t *h = (uint16_t *)malloc(n * sizeof *h);
        size_t shape[1];
        uint32_t hi;
        if (x == NULL || bf == NULL || h == NULL) {
            fprintf(stderr, "FAIL out of memory\n");
            return 1;
        }
        for (hi = 0, i = 0; hi < 65536; hi++) {
            size_t k;
            for (k = 0; k < NLOWS; k++, i++) {
                uint32_t u = hi << 16 | lows[k];
                memcpy(&x[i], &u, sizeof u);
                bf[i] = plumb_bf16_from_f32(x[i]);
                h[i] = plumb_f16_from_f32(x[i]);
            }
        }
        shape[0] = n;
        want(plumb_npy_write_f32(in_dir(dir, "sample_f32.npy"), x, shape, 1), PLUMB_NPY_OK, "sample_f32.npy");
        want(plumb_npy_write_bf16(in_dir(dir, "sample_bf16.npy"), bf, shape, 1), PLUMB_NPY_OK, "sample_bf16.npy");
        want(plumb_npy_write_f16(in_dir(dir, "sample_f16.npy"), h, shape, 1), PLUMB_NPY_OK, "sample_f16.npy");
        free(x);
        free(bf);
        free(h);
    }

    /* Errors: statuses, and no file left behind. */
    {
        float v[2] = {1, 2};
        size_t shape[2] = {1, 2};
        size_t huge[2] = {(size_t)-1 / 2, 3};
        FILE *f;
        want(plumb_npy_write_f32(NULL, v, shape, 2), PLUMB_NPY_EARG, "NULL path");
        want(plumb_npy_write_f32(in_dir(dir, "x.npy"), NULL, shape, 2), PLUMB_NPY_EARG, "NULL data");
        want(plumb_npy_write(in_dir(dir, "x.npy"), (plumb_npy_kind)9, v, shape, 2), PLUMB_NPY_EARG, "unknown kind");
        want(plumb_npy_write_f32(in_dir(dir, "x.npy"), v, shape, -1), PLUMB_NPY_ESHAPE, "ndim -1");
        want(plumb_npy_write_f32(in_dir(dir, "x.npy"), v, shape, PLUMB_NPY_MAX_DIMS + 1), PLUMB_NPY_ESHAPE, "ndim 33");
        want(plumb_npy_write_f32(in_dir(dir, "x.npy"), v, NULL, 2), PLUMB_NPY_ESHAPE, "NULL shape");
        want(plumb_npy_write_f32(in_dir(dir, "x.npy"), v, huge, 2), PLUMB_NPY_ESHAPE, "overflowing shape");
        want(plumb_npy_write_f32(in_dir(dir, "no/such/dir/x.npy"), v, shape, 2), PLUMB_NPY_EOPEN, "missing folder");
        want(plumb_npy_fwrite(NULL, PLUMB_NPY_F32, v, shape, 2), PLUMB_NPY_EARG, "NULL file");
        f = fopen(in_dir(dir, "x.npy"), "rb");
        if (f != NULL) {
            fprintf(stderr, "FAIL x.npy exists after failed writes\n");
            failures++;
            fclose(f);
        }
        if (strcmp(plumb_npy_strerror(PLUMB_NPY_EOPEN), "unknown status") == 0 || strcmp(plumb_npy_strerror(99), "unknown status") != 0) {
            fprintf(stderr, "FAIL plumb_npy_strerror\n");
            failures++;
        }
    }

    if (failures > 0) {
        fprintf(stderr, "%d failures\n", failures);
        return 1;
    }
    printf("wrote the files into %s\n", dir);
    return 0;
}
