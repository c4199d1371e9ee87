/*
 * tests/capture/test_render.c - exact polygon coverage and the Gaussian
 * blur (capture/render.h) against naive references: point sampling on a
 * fine grid inside each pixel, the shoelace area, direct convolution.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "render.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define W 48
#define H 40

static uint64_t rng = 12345;

static double urand(void)
{
    rng = rng * 6364136223846793005ull + 1442695040888963407ull;
    return (double)(rng >> 11) * 0x1.0p-53;
}

/* Even-odd point-in-polygon test (the reference). */
static int inside(const double *xy, int n, double x, double y)
{
    int in = 0;
    for (int i = 0, j = n - 1; i < n; j = i++) {
        double yi = xy[2 * i + 1], yj = xy[2 * j + 1];
        if ((yi > y) != (yj > y)) {
            double xc =
                xy[2 * j] + (y - yj) * (xy[2 * i] - xy[2 * j]) / (yi - yj);
            if (x < xc)
                in = !in;
        }
    }
    return in;
}

/* A random star-shaped polygon about (cx, cy). */
static int star(double *xy, int n, double cx, double cy, double r0, double r1)
{
    for (int i = 0; i < n; i++) {
        double a = 2 * M_PI * (i + 0.8 * urand()) / n;
        double r = r0 + (r1 - r0) * urand();
        xy[2 * i] = cx + r * cos(a);
        xy[2 * i + 1] = cy + r * sin(a);
    }
    return n;
}

/* Coverage of pixel (x, y) by point sampling on an s x s grid. */
static double sampled(const double *xy, int n, int x, int y, int s)
{
    int hits = 0;
    for (int j = 0; j < s; j++)
        for (int i = 0; i < s; i++)
            hits +=
                inside(xy, n, x - 0.5 + (i + 0.5) / s, y - 0.5 + (j + 0.5) / s);
    return (double)hits / (s * s);
}

static float cells[(W + 2) * H], cells2[(W + 2) * H];

/* Random star polygons, partly outside the window: every pixel within 0.02
   of 64x64 point sampling (whose own error is about 1/64 of the edge length
   in the pixel), and the coverage sum equal to the clipped polygon area. */
static void test_coverage_vs_sampling(void **state)
{
    (void)state;
    double xy[2 * 40];
    double worst = 0;
    for (int trial = 0; trial < 6; trial++) {
        int n = star(xy, 12 + 4 * trial, 10 + 30 * urand(), 8 + 24 * urand(),
                     4 + 3 * urand(), 14 + 10 * urand());
        mb_coverage c;
        mb_coverage_reset(&c, cells, 0, 0, W, H);
        mb_coverage_add(&c, xy, n);
        mb_coverage_resolve(&c);
        for (int y = 0; y < H; y++)
            for (int x = 0; x < W; x++) {
                double d =
                    fabs(cells[y * c.stride + x] - sampled(xy, n, x, y, 64));
                if (d > worst)
                    worst = d;
            }
    }
    printf("coverage vs 64x64 point sampling: worst pixel difference %.4f\n",
           worst);
    assert_true(worst < 0.02);
}

/* A polygon wholly inside the window: coverage sums to its area. */
static void test_coverage_area(void **state)
{
    (void)state;
    double xy[2 * 64];
    for (int trial = 0; trial < 20; trial++) {
        int n = star(xy, 64, 24, 20, 3 + 5 * urand(), 10 + 8 * urand());
        mb_coverage c;
        mb_coverage_reset(&c, cells, 0, 0, W, H);
        mb_coverage_add(&c, xy, n);
        mb_coverage_resolve(&c);
        double sum = 0;
        for (int y = 0; y < H; y++)
            for (int x = 0; x < W; x++)
                sum += cells[y * c.stride + x];
        double a = fabs(mb_polygon_area(xy, n));
        if (fabs(sum - a) > 1e-4 * a)
            fail_msg("coverage sum %.6f, polygon area %.6f", sum, a);
    }
}

/* The same polygon rendered into a small window and a large one: identical
   coverage where they overlap (edges outside the window handled exactly). */
static void test_window_clipping(void **state)
{
    (void)state;
    double xy[2 * 32];
    int n = star(xy, 32, 20, 18, 6, 16);
    mb_coverage big, small;
    mb_coverage_reset(&big, cells, 0, 0, W, H);
    mb_coverage_add(&big, xy, n);
    mb_coverage_resolve(&big);
    mb_coverage_reset(&small, cells2, 17, 12, 9, 7);
    mb_coverage_add(&small, xy, n);
    mb_coverage_resolve(&small);
    for (int y = 0; y < small.height; y++)
        for (int x = 0; x < small.width; x++) {
            double a = cells2[y * small.stride + x];
            double b = cells[(y + 12) * big.stride + x + 17];
            if (fabs(a - b) > 1e-5)
                fail_msg("pixel (%d, %d): window %.6f, full %.6f", x + 17,
                         y + 12, a, b);
        }
}

/* Hand values: a square covering pixel (2, 3) exactly, and one shifted by
   a quarter pixel covering 3/4 of it and 1/4 of its right neighbour. */
static void test_hand_values(void **state)
{
    (void)state;
    mb_coverage c;
    double sq[8] = {1.5, 2.5, 2.5, 2.5, 2.5, 3.5, 1.5, 3.5};
    mb_coverage_reset(&c, cells, 0, 0, 8, 8);
    mb_coverage_add(&c, sq, 4);
    mb_coverage_resolve(&c);
    assert_true(fabs(cells[3 * c.stride + 2] - 1.0) < 1e-6);
    assert_true(fabs(cells[3 * c.stride + 1]) < 1e-6);
    assert_true(fabs(cells[3 * c.stride + 3]) < 1e-6);
    double sh[8] = {1.75, 2.5, 2.75, 2.5, 2.75, 3.5, 1.75, 3.5};
    mb_coverage_reset(&c, cells, 0, 0, 8, 8);
    mb_coverage_add(&c, sh, 4);
    mb_coverage_resolve(&c);
    assert_true(fabs(cells[3 * c.stride + 2] - 0.75) < 1e-6);
    assert_true(fabs(cells[3 * c.stride + 3] - 0.25) < 1e-6);
    /* a triangle with legs 1 along pixel (4, 4)'s diagonal: half of it */
    double tr[6] = {3.5, 3.5, 4.5, 3.5, 4.5, 4.5};
    mb_coverage_reset(&c, cells, 0, 0, 8, 8);
    mb_coverage_add(&c, tr, 3);
    mb_coverage_resolve(&c);
    assert_true(fabs(cells[4 * c.stride + 4] - 0.5) < 1e-6);
}

/* An annulus with the hole running the other way: the hole is empty and
   the sum is the difference of the areas. */
static void test_hole(void **state)
{
    (void)state;
    double xy[2 * 400];
    int n = 200;
    for (int i = 0; i < n; i++) {
        double a = 2 * M_PI * i / n;
        xy[2 * i] = 24 + 15 * cos(a);
        xy[2 * i + 1] = 20 + 15 * sin(a);
        xy[2 * (n + i)] = 24 + 7 * cos(-a);
        xy[2 * (n + i) + 1] = 20 + 7 * sin(-a);
    }
    mb_coverage c;
    mb_coverage_reset(&c, cells, 0, 0, W, H);
    mb_coverage_add(&c, xy, n);
    mb_coverage_add(&c, xy + 2 * n, n);
    mb_coverage_resolve(&c);
    double sum = 0;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            sum += cells[y * c.stride + x];
    double want =
        fabs(mb_polygon_area(xy, n)) - fabs(mb_polygon_area(xy + 2 * n, n));
    assert_true(fabs(sum - want) < 1e-3);
    assert_true(cells[20 * c.stride + 24] < 1e-6);       /* centre: empty */
    assert_true(cells[20 * c.stride + 24 + 11] > 0.999); /* in the band */
}

/* Blur: against a direct 2-D convolution with the same sampled kernel and
   border repetition; sum kept; a point spreads with variance sigma^2. */
static void test_blur(void **state)
{
    (void)state;
    const int w = 30, h = 26, stride = 33;
    static float a[33 * 26], b[33 * 26], work[4096];
    assert_true(mb_blur_work_size(w, h) <= 4096);
    for (int i = 0; i < stride * h; i++)
        a[i] = (float)urand();
    memcpy(b, a, sizeof a);
    double sigma = 1.3;
    mb_blur_gauss(b, w, h, stride, sigma, work);
    int r = (int)ceil(3 * sigma);
    double k[64], ks = 0;
    for (int i = -r; i <= r; i++)
        ks += k[i + r] = exp(-0.5 * i * i / (sigma * sigma));
    double worst = 0;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double s = 0;
            for (int j = -r; j <= r; j++)
                for (int i = -r; i <= r; i++) {
                    int yy = y + j < 0 ? 0 : (y + j >= h ? h - 1 : y + j);
                    int xx = x + i < 0 ? 0 : (x + i >= w ? w - 1 : x + i);
                    s += k[i + r] * k[j + r] / (ks * ks) * a[yy * stride + xx];
                }
            worst = fmax(worst, fabs(s - b[y * stride + x]));
        }
    assert_true(worst < 1e-5);
    /* a point in the middle: unit sum, variance sigma^2 per axis
       (the sampled, truncated kernel's variance is within 1 % of it) */
    memset(a, 0, sizeof a);
    a[13 * stride + 15] = 1;
    mb_blur_gauss(a, w, h, stride, sigma, work);
    double sum = 0, vx = 0;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            sum += a[y * stride + x];
            vx += a[y * stride + x] * (x - 15) * (x - 15);
        }
    assert_true(fabs(sum - 1) < 1e-5);
    if (fabs(vx - sigma * sigma) > 0.01 * sigma * sigma)
        fail_msg("blurred point variance %.4f, sigma^2 %.4f", vx,
                 sigma * sigma);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_hand_values),
        cmocka_unit_test(test_coverage_vs_sampling),
        cmocka_unit_test(test_coverage_area),
        cmocka_unit_test(test_window_clipping),
        cmocka_unit_test(test_hole),
        cmocka_unit_test(test_blur),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
