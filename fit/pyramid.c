/*
 * fit/pyramid.c - Gaussian pyramid by binomial smoothing and decimation, and
 * bilinear sampling of grey levels and central-difference gradients.
 *
 * The 5-tap binomial kernel [1 4 6 4 1]/16 is the generating kernel of Burt
 * and Adelson's pyramid (Burt & Adelson, "The Laplacian pyramid as a compact
 * image code", IEEE Trans. Communications 31(4), 1983, with a = 0.375); it is
 * close to a Gaussian of sigma 1 and separable, so one level costs a vertical
 * 5-row sum and a horizontal 5-tap sum at every other column, all in exact
 * integer arithmetic (the 2-D weights sum to 256).
 *
 * Order of the passes: for each output row the five source rows are summed
 * first (contiguous, vectorises) into a row of 16-bit sums; the horizontal
 * pass then reads that row at every other column. The result is the exact
 * rounded separable convolution, so it can be compared bit for bit with
 * scipy.ndimage (see tests/fit/ref_pyramid.py).
 */
#include "pyramid.h"

#include "error.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

struct mb_pyramid {
    int levels;
    int width, height; /* level 0 size the pyramid was made for */
    mb_image level[MB_PYRAMID_MAX_LEVELS]; /* [0] is a view of the frame */
    uint16_t *row; /* width + 6 column sums: 2 pad before, 4
                      after (the vector loop reads one past
                      the last clamped entry) */
};

int mb_pyramid_create(int width, int height, int levels, mb_pyramid **out)
{
    if (!out)
        return MB_EINVAL;
    *out = NULL;
    if (levels < 1 || levels > MB_PYRAMID_MAX_LEVELS || width < 1 ||
        height < 1 || width > 65536 || height > 65536)
        return MB_EINVAL;
    mb_pyramid *pyr = calloc(1, sizeof *pyr);
    if (!pyr)
        return MB_ENOMEM;
    pyr->levels = levels;
    pyr->width = width;
    pyr->height = height;
    pyr->row = calloc((size_t)width + 6, sizeof *pyr->row);
    if (!pyr->row)
        goto fail;
    int w = width, h = height;
    for (int l = 1; l < levels; l++) {
        w = (w + 1) / 2;
        h = (h + 1) / 2;
        if (mb_image_alloc(w, h, &pyr->level[l]) != MB_OK)
            goto fail;
    }
    *out = pyr;
    return MB_OK;
fail:
    mb_pyramid_close(pyr);
    return MB_ENOMEM;
}

void mb_pyramid_close(mb_pyramid *pyr)
{
    if (!pyr)
        return;
    for (int l = 1; l < pyr->levels; l++)
        mb_image_free(&pyr->level[l]);
    free(pyr->row);
    free(pyr);
}

int mb_pyramid_levels(const mb_pyramid *pyr)
{
    return pyr ? pyr->levels : 0;
}

const mb_image *mb_pyramid_level(const mb_pyramid *pyr, int level)
{
    if (!pyr || level < 0 || level >= pyr->levels)
        return NULL;
    return &pyr->level[level];
}

static int clampi(int v, int lo, int hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

/* The two inner loops are written with the vector extension of GCC and
 * clang (lane-wise arithmetic, no intrinsics, no byte-order assumptions):
 * at -O2 GCC's cheap cost model leaves the plain loops scalar, and the
 * pyramid is the only part of the per-frame path that reads every pixel.
 * Other compilers get the plain loops. */
#if defined(__GNUC__) && defined(__has_builtin)
#if __has_builtin(__builtin_convertvector) &&                                  \
    __has_builtin(__builtin_shufflevector)
#define PYR_VECTOR 1
#endif
#endif

#ifdef PYR_VECTOR
/* 16-byte vectors only: wider ones change the calling convention without
 * AVX (GCC's -Wpsabi) */
typedef uint8_t u8x8 __attribute__((vector_size(8)));
typedef uint16_t u16x8 __attribute__((vector_size(16)));

static u16x8 load_widen(const uint8_t *p)
{
    u8x8 v;
    memcpy(&v, p, sizeof v);
    return __builtin_convertvector(v, u16x8);
}

static u16x8 load8(const uint16_t *p)
{
    u16x8 v;
    memcpy(&v, p, sizeof v);
    return v;
}

/* even and odd lanes of the 16 lanes a:b */
#define EVEN(a, b) __builtin_shufflevector(a, b, 0, 2, 4, 6, 8, 10, 12, 14)
#define ODD(a, b) __builtin_shufflevector(a, b, 1, 3, 5, 7, 9, 11, 13, 15)
#endif

/* One output row: the five source rows summed with weights 1 4 6 4 1 into
 * t[0 .. w-1] (at most 16 * 255, fits 16 bits). */
static void column_sums(const uint8_t *restrict r0, const uint8_t *restrict r1,
                        const uint8_t *restrict r2, const uint8_t *restrict r3,
                        const uint8_t *restrict r4, uint16_t *restrict t, int w)
{
    int x = 0;
#ifdef PYR_VECTOR
    for (; x + 8 <= w; x += 8) {
        u16x8 s = load_widen(r0 + x) + load_widen(r4 + x) +
                  4 * (load_widen(r1 + x) + load_widen(r3 + x)) +
                  6 * load_widen(r2 + x);
        memcpy(t + x, &s, sizeof s);
    }
#endif
    for (; x < w; x++)
        t[x] = (uint16_t)(r0[x] + r4[x] + 4 * (r1[x] + r3[x]) + 6 * r2[x]);
}

/* o[i] = round(sum of t[2i-2 .. 2i+2] weighted 1 4 6 4 1 / 256) for i < n;
 * t must be readable from index -2 to 2n + 1. The sum plus 128 is at most
 * 256 * 255 + 128 < 2^16, so 16-bit lanes are exact. */
static void row_reduce(const uint16_t *restrict t, uint8_t *restrict o, int n)
{
    int i = 0;
#ifdef PYR_VECTOR
    for (; i + 8 <= n; i += 8) {
        const uint16_t *c = t + 2 * i;
        u16x8 a0 = load8(c - 2), b0 = load8(c + 6);  /* t[c-2 .. c+13] */
        u16x8 a2 = load8(c), b2 = load8(c + 8);      /* t[c .. c+15] */
        u16x8 a4 = load8(c + 2), b4 = load8(c + 10); /* t[c+2 .. c+17] */
        u16x8 s = EVEN(a0, b0) + EVEN(a4, b4) +
                  4 * (ODD(a0, b0) + ODD(a2, b2)) + 6 * EVEN(a2, b2) + 128;
        u8x8 b = __builtin_convertvector(s >> 8, u8x8);
        memcpy(o + i, &b, sizeof b);
    }
#endif
    for (; i < n; i++) {
        const uint16_t *c = t + 2 * i;
        uint32_t s =
            (uint32_t)c[-2] + c[2] + 4u * ((uint32_t)c[-1] + c[1]) + 6u * c[0];
        o[i] = (uint8_t)((s + 128u) >> 8);
    }
}

/* dst = decimate(binomial(src)); dst->width == (src->width + 1) / 2 etc.
 * row: scratch of src->width + 6 entries. */
static void reduce(const mb_image *src, mb_image *dst, uint16_t *row)
{
    const int w = src->width, h = src->height;
    uint16_t *t = row + 2; /* t[-2] .. t[w + 1] valid */
    for (int j = 0; j < dst->height; j++) {
        const uint8_t *r[5];
        for (int k = 0; k < 5; k++)
            r[k] = src->pixels +
                   (size_t)clampi(2 * j - 2 + k, 0, h - 1) * src->stride;
        column_sums(r[0], r[1], r[2], r[3], r[4], t, w);
        /* clamp to the nearest edge column */
        t[-2] = t[-1] = t[0];
        t[w] = t[w + 1] = t[w - 1];
        row_reduce(t, dst->pixels + (size_t)j * dst->stride, dst->width);
    }
}

int mb_pyramid_build(mb_pyramid *pyr, const mb_image *frame)
{
    if (!pyr || !frame || !frame->pixels || frame->stride < frame->width)
        return MB_EINVAL;
    if (frame->width != pyr->width || frame->height != pyr->height)
        return MB_ESIZE;
    pyr->level[0] = *frame;
    for (int l = 1; l < pyr->levels; l++)
        reduce(&pyr->level[l - 1], &pyr->level[l], pyr->row);
    return MB_OK;
}

/* Clamp a real coordinate into [0, n-1] and split it into a cell index i0,
 * its right neighbour i1 (== i0 at a one-pixel image) and the weight f of
 * i1. NaN clamps to 0. */
static void cell(double v, int n, int *i0, int *i1, double *f)
{
    if (!(v > 0))
        v = 0;
    if (v > n - 1)
        v = n - 1;
    int i = (int)v;
    if (i > n - 2)
        i = n - 2 < 0 ? 0 : n - 2;
    *i0 = i;
    *i1 = i + 1 < n ? i + 1 : i;
    *f = v - i;
}

double mb_pyramid_sample(const mb_image *img, double x, double y)
{
    int x0, x1, y0, y1;
    double fx, fy;
    cell(x, img->width, &x0, &x1, &fx);
    cell(y, img->height, &y0, &y1, &fy);
    const uint8_t *a = img->pixels + (size_t)y0 * img->stride;
    const uint8_t *b = img->pixels + (size_t)y1 * img->stride;
    double top = a[x0] + fx * (a[x1] - a[x0]);
    double bot = b[x0] + fx * (b[x1] - b[x0]);
    return top + fy * (bot - top);
}

static int pix(const mb_image *img, int x, int y)
{
    x = clampi(x, 0, img->width - 1);
    y = clampi(y, 0, img->height - 1);
    return img->pixels[(size_t)y * img->stride + x];
}

void mb_pyramid_gradient(const mb_image *img, double x, double y, double *gx,
                         double *gy)
{
    int x0, x1, y0, y1;
    double fx, fy;
    cell(x, img->width, &x0, &x1, &fx);
    cell(y, img->height, &y0, &y1, &fy);
    const int xs[2] = {x0, x1}, ys[2] = {y0, y1};
    double dx[2][2], dy[2][2];
    for (int b = 0; b < 2; b++)
        for (int a = 0; a < 2; a++) {
            int i = xs[a], j = ys[b];
            dx[b][a] = 0.5 * (pix(img, i + 1, j) - pix(img, i - 1, j));
            dy[b][a] = 0.5 * (pix(img, i, j + 1) - pix(img, i, j - 1));
        }
    double t = dx[0][0] + fx * (dx[0][1] - dx[0][0]);
    double u = dx[1][0] + fx * (dx[1][1] - dx[1][0]);
    *gx = t + fy * (u - t);
    t = dy[0][0] + fx * (dy[0][1] - dy[0][0]);
    u = dy[1][0] + fx * (dy[1][1] - dy[1][0]);
    *gy = t + fy * (u - t);
}
