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
 * Order of the passes (fit/pyramid_rows.h): for each pair of output rows
 * the seven source rows are summed first (contiguous, vectorises) into two
 * rows of 16-bit sums; the horizontal pass then reads those at every other
 * column. The result is the exact rounded separable convolution, so it can
 * be compared bit for bit with scipy.ndimage (see tests/fit/ref_pyramid.py),
 * and it is the same whichever vector width computes it.
 */
#include "pyramid.h"

#include "error.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* Row buffers: ROW_PAD entries before column 0 and 4 after the last (the
   vector loop loads one past the last clamped entry and drops it). */
#define ROW_PAD 2
#define ROW_LEN(w) ((w) + 6)

static int cpu_wide(void);

struct mb_pyramid {
    int levels;
    int width, height; /* level 0 size the pyramid was made for */
    mb_image level[MB_PYRAMID_MAX_LEVELS]; /* [0] is a view of the frame */
    uint16_t *rows; /* two rows of vertical sums, ROW_LEN(width) each */
    int wide;       /* the 32-byte kernels (mb_pyramid_use_wide) */
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
    pyr->rows = calloc(2 * (size_t)ROW_LEN(width), sizeof *pyr->rows);
    if (!pyr->rows)
        goto fail;
    pyr->wide = cpu_wide();
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
    free(pyr->rows);
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

/* The kernels are written with the vector extension of GCC and clang
 * (lane-wise arithmetic, no intrinsics, no byte-order assumptions): at -O2
 * GCC's cheap cost model leaves the plain loops scalar, and the pyramid is
 * the only part of the per-frame path that reads every pixel. One copy uses
 * 16-byte vectors (every x86-64 and ARM64 CPU has them); on x86 a second
 * copy uses 32-byte vectors for CPUs with AVX2, chosen when the pyramid is
 * made. Other compilers get the plain loops. */
#if defined(__GNUC__) && defined(__has_builtin)
#if __has_builtin(__builtin_convertvector) && __has_builtin(__builtin_shufflevector)
#define PYR_VECTOR 1
#if (defined(__x86_64__) || defined(__i386__)) && !defined(__clang__)
#define PYR_WIDE 1
#endif
#endif
#endif

#define ROWS_NAME(x) x##_8
#define ROWS_TARGET
#ifdef PYR_VECTOR
#define ROWS_LANES 8
#define ROWS_EVEN(a, b) __builtin_shufflevector(a, b, 0, 2, 4, 6, 8, 10, 12, 14)
#define ROWS_ODD(a, b) __builtin_shufflevector(a, b, 1, 3, 5, 7, 9, 11, 13, 15)
#else
#define ROWS_LANES 0
#endif
#include "pyramid_rows.h"
#undef ROWS_LANES
#undef ROWS_NAME
#undef ROWS_TARGET
#undef ROWS_EVEN
#undef ROWS_ODD

#ifdef PYR_WIDE
#define ROWS_LANES 16
#define ROWS_NAME(x) x##_16
#define ROWS_TARGET __attribute__((target("avx2")))
#define ROWS_EVEN(a, b)                                                        \
    __builtin_shufflevector(a, b, 0, 2, 4, 6, 8, 10, 12, 14, 16, 18, 20, 22, 24, 26, 28, 30)
#define ROWS_ODD(a, b)                                                         \
    __builtin_shufflevector(a, b, 1, 3, 5, 7, 9, 11, 13, 15, 17, 19, 21, 23, 25, 27, 29, 31)
#include "pyramid_rows.h"
#undef ROWS_LANES
#undef ROWS_NAME
#undef ROWS_TARGET
#undef ROWS_EVEN
#undef ROWS_ODD
#endif

static int cpu_wide(void)
{
#ifdef PYR_WIDE
    __builtin_cpu_init();
    return __builtin_cpu_supports("avx2") ? 1 : 0;
#else
    return 0;
#endif
}

int mb_pyramid_use_wide(mb_pyramid *pyr, int on)
{
    if (!pyr)
        return 0;
    pyr->wide = on && cpu_wide();
    return pyr->wide;
}

int mb_pyramid_build(mb_pyramid *pyr, const mb_image *frame)
{
    if (!pyr || !frame || !frame->pixels || frame->stride < frame->width)
        return MB_EINVAL;
    if (frame->width != pyr->width || frame->height != pyr->height)
        return MB_ESIZE;
    pyr->level[0] = *frame;
    for (int l = 1; l < pyr->levels; l++) {
#ifdef PYR_WIDE
        if (pyr->wide) {
            reduce_16(&pyr->level[l - 1], &pyr->level[l], pyr->rows);
            continue;
        }
#endif
        reduce_8(&pyr->level[l - 1], &pyr->level[l], pyr->rows);
    }
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
