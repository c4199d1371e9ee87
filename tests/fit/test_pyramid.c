/*
 * tests/fit/test_pyramid.c - the Gaussian pyramid and the samplers
 * (fit/pyramid.h): each level against a direct 5 x 5 convolution written
 * here from the definition, the coordinate convention between levels on
 * rendered discs, bilinear sampling and gradients on hand values and
 * linear ramps, views with a stride, and argument errors.
 * The comparison with scipy.ndimage is in ref_pyramid.py.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "outline_scene.h"
#include "pyramid.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

static int clampi(int v, int lo, int hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

/* The definition in fit/pyramid.h, as directly as it can be written. */
static int reference_pixel(const mb_image *src, int i, int j)
{
    static const int k[5] = {1, 4, 6, 4, 1};
    long s = 0;
    for (int b = -2; b <= 2; b++)
        for (int a = -2; a <= 2; a++) {
            int x = clampi(2 * i + a, 0, src->width - 1);
            int y = clampi(2 * j + b, 0, src->height - 1);
            s += (long)k[a + 2] * k[b + 2] *
                 src->pixels[(size_t)y * src->stride + x];
        }
    return (int)((s + 128) >> 8);
}

static void fill_random(mb_image *img, uint64_t seed)
{
    for (int y = 0; y < img->height; y++)
        for (int x = 0; x < img->width; x++)
            img->pixels[(size_t)y * img->stride + x] =
                (uint8_t)(256 * scene_uniform(&seed));
}

/* Both kernel widths (mb_pyramid_use_wide) against the definition; the
 * second pass repeats the 16-byte kernels on a CPU without AVX2. */
static void test_levels_match_definition(void **state)
{
    (void)state;
    /* sizes: tiny, odd, not multiples of the 8-, 16- and 32-column blocks,
       odd and even heights (rows are made two at a time) */
    const int sizes[][2] = {{1, 1},   {2, 3},   {5, 4},    {7, 9},    {16, 16},
                            {17, 33}, {64, 48}, {101, 77}, {250, 13}, {97, 2},
                            {129, 35}, {330, 18}};
    for (int wide = 0; wide < 2; wide++)
        for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++) {
            int w = sizes[s][0], h = sizes[s][1];
            mb_image img;
            assert_int_equal(mb_image_alloc(w, h, &img), 0);
            fill_random(&img, 1000 + s);
            mb_pyramid *pyr;
            assert_int_equal(mb_pyramid_create(w, h, 4, &pyr), 0);
            int on = mb_pyramid_use_wide(pyr, wide);
            assert_true(on == 0 || wide);
            if (s == 0)
                printf("pyramid kernels: %s\n", on ? "32-byte (AVX2)" : "16-byte");
            assert_int_equal(mb_pyramid_build(pyr, &img), 0);
            assert_int_equal(mb_pyramid_levels(pyr), 4);
            assert_ptr_equal(mb_pyramid_level(pyr, 0)->pixels, img.pixels);
            int ew = w, eh = h;
            for (int l = 1; l < 4; l++) {
                const mb_image *src = mb_pyramid_level(pyr, l - 1),
                               *lv = mb_pyramid_level(pyr, l);
                ew = (ew + 1) / 2;
                eh = (eh + 1) / 2;
                assert_int_equal(lv->width, ew);
                assert_int_equal(lv->height, eh);
                int bad = 0;
                for (int j = 0; j < eh; j++)
                    for (int i = 0; i < ew; i++)
                        bad += lv->pixels[(size_t)j * lv->stride + i] !=
                               reference_pixel(src, i, j);
                assert_int_equal(bad, 0);
            }
            assert_null(mb_pyramid_level(pyr, 4));
            assert_null(mb_pyramid_level(pyr, -1));
            mb_pyramid_close(pyr);
            mb_image_free(&img);
        }
}

/* Level 0 may be any view with a stride: a sub-rectangle of a bigger image
 * gives the same levels as a tight copy of it. */
static void test_strided_view(void **state)
{
    (void)state;
    mb_image big, tight;
    assert_int_equal(mb_image_alloc(200, 120, &big), 0);
    fill_random(&big, 77);
    mb_image v = mb_image_view(&big, 13, 7, 150, 101);
    assert_int_equal(mb_image_alloc(150, 101, &tight), 0);
    for (int y = 0; y < 101; y++)
        memcpy(tight.pixels + (size_t)y * tight.stride,
               v.pixels + (size_t)y * v.stride, 150);
    mb_pyramid *a, *b;
    assert_int_equal(mb_pyramid_create(150, 101, 3, &a), 0);
    assert_int_equal(mb_pyramid_create(150, 101, 3, &b), 0);
    assert_int_equal(mb_pyramid_build(a, &v), 0);
    assert_int_equal(mb_pyramid_build(b, &tight), 0);
    for (int l = 1; l < 3; l++) {
        const mb_image *x = mb_pyramid_level(a, l), *y = mb_pyramid_level(b, l);
        for (int r = 0; r < x->height; r++)
            assert_memory_equal(x->pixels + (size_t)r * x->stride,
                                y->pixels + (size_t)r * y->stride,
                                (size_t)x->width);
    }
    mb_pyramid_close(a);
    mb_pyramid_close(b);
    mb_image_free(&big);
    mb_image_free(&tight);
}

/* The coordinate convention: a dark disc centred at (cx, cy) at full
 * resolution has its centre at (cx, cy) / 2^L on level L. Measured as the
 * centroid of darkness (255 - grey) over a window around the disc, which
 * the symmetric binomial smoothing leaves in place. The other common
 * convention, (x + 0.5) / 2^L - 0.5, would be off by 0.25, 0.375 and 0.4375
 * level px on levels 1, 2, 3. */
static void test_coordinates_between_levels(void **state)
{
    (void)state;
    const double centres[][2] = {{100.0, 90.0}, {101.3, 87.6}, {99.5, 92.25}};
    for (int c = 0; c < 3; c++) {
        scene sc;
        memset(&sc, 0, sizeof sc);
        sc.part = 20;
        sc.back = 235;
        sc.n_solid = 1;
        sc.solid[0] = (scene_shape){
            SCENE_CIRCLE, centres[c][0], centres[c][1], 30, 0, 0, 0};
        mb_image img;
        assert_int_equal(mb_image_alloc(200, 180, &img), 0);
        scene_render(&sc, &img);
        mb_pyramid *pyr;
        assert_int_equal(mb_pyramid_create(200, 180, 4, &pyr), 0);
        assert_int_equal(mb_pyramid_build(pyr, &img), 0);
        for (int l = 0; l < 4; l++) {
            const mb_image *lv = mb_pyramid_level(pyr, l);
            double s = 0, sx = 0, sy = 0, scale = ldexp(1.0, -l);
            for (int y = 0; y < lv->height; y++)
                for (int x = 0; x < lv->width; x++) {
                    /* a window of radius 45 full-res px around the true
                     * centre keeps the field (darkness 20) symmetric */
                    double dx = x - centres[c][0] * scale,
                           dy = y - centres[c][1] * scale;
                    if (dx * dx + dy * dy > 45.0 * 45.0 * scale * scale)
                        continue;
                    double d = 235.0 - lv->pixels[(size_t)y * lv->stride + x];
                    s += d;
                    sx += d * x;
                    sy += d * y;
                }
            double ex = sx / s / scale,
                   ey = sy / s / scale; /* back to full res */
            printf("disc (%.2f, %.2f) level %d: centre found at (%.3f, %.3f) "
                   "full-res px\n",
                   centres[c][0], centres[c][1], l, ex, ey);
            /* 0.05 full-res px: rounding of the levels to integers; a
             * half-pixel convention error would be 0.5 to 3.5 px */
            assert_true(fabs(ex - centres[c][0]) < 0.05 * (1 << l));
            assert_true(fabs(ey - centres[c][1]) < 0.05 * (1 << l));
        }
        mb_pyramid_close(pyr);
        mb_image_free(&img);
    }
}

static void test_sample_hand_values(void **state)
{
    (void)state;
    mb_image img;
    assert_int_equal(mb_image_alloc(3, 2, &img), 0);
    const uint8_t v[2][3] = {{10, 20, 40}, {50, 70, 100}};
    for (int y = 0; y < 2; y++)
        for (int x = 0; x < 3; x++)
            img.pixels[(size_t)y * img.stride + x] = v[y][x];
    /* pixel centres */
    for (int y = 0; y < 2; y++)
        for (int x = 0; x < 3; x++)
            assert_true(mb_pyramid_sample(&img, x, y) == v[y][x]);
    /* between pixels: bilinear */
    assert_true(fabs(mb_pyramid_sample(&img, 0.5, 0) - 15.0) < 1e-12);
    assert_true(fabs(mb_pyramid_sample(&img, 1.5, 0.5) -
                     (20 + 40 + 70 + 100) / 4.0) < 1e-12);
    assert_true(fabs(mb_pyramid_sample(&img, 0.25, 0.75) -
                     (0.75 * 0.25 * 10 + 0.25 * 0.25 * 20 + 0.75 * 0.75 * 50 +
                      0.25 * 0.75 * 70)) < 1e-12);
    /* outside: the nearest edge (coordinates clamped) */
    assert_true(mb_pyramid_sample(&img, -3, -1) == 10);
    assert_true(mb_pyramid_sample(&img, 7.5, 0.0) == 40);
    assert_true(fabs(mb_pyramid_sample(&img, 2.0, 0.25) - (40 + 0.25 * 60)) <
                1e-12);
    assert_true(mb_pyramid_sample(&img, 2.9, 5.0) == 100);
    assert_true(mb_pyramid_sample(&img, NAN, NAN) ==
                10); /* never out of bounds */

    /* gradient: central differences, edge pixels clamped */
    double gx, gy;
    mb_pyramid_gradient(&img, 1, 0, &gx, &gy);
    assert_true(gx == (40 - 10) / 2.0 && gy == (70 - 20) / 2.0);
    mb_pyramid_gradient(&img, 0, 0, &gx, &gy);
    assert_true(gx == (20 - 10) / 2.0 && gy == (50 - 10) / 2.0);
    mb_pyramid_gradient(&img, 2, 1, &gx, &gy);
    assert_true(gx == (100 - 70) / 2.0 && gy == (100 - 40) / 2.0);
    mb_pyramid_gradient(&img, 0.5, 0.5, &gx, &gy);
    double e = (5 + 15 + 10 + 25) / 4.0;  /* gx at (0,0) (1,0) (0,1) (1,1) */
    double f = (20 + 25 + 20 + 25) / 4.0; /* gy at the same */
    assert_true(fabs(gx - e) < 1e-12 && fabs(gy - f) < 1e-12);
    /* one-pixel image */
    mb_image one;
    assert_int_equal(mb_image_alloc(1, 1, &one), 0);
    one.pixels[0] = 77;
    assert_true(mb_pyramid_sample(&one, 0.3, -0.2) == 77);
    mb_pyramid_gradient(&one, 0.3, 0.7, &gx, &gy);
    assert_true(gx == 0 && gy == 0);
    mb_image_free(&one);
    mb_image_free(&img);
}

/* On a linear ramp I = 3x + 2y + 5 the interpolated grey is exact at any
 * real point and the gradient is (3, 2) wherever the central differences do
 * not touch the border. */
static void test_ramp(void **state)
{
    (void)state;
    mb_image img;
    assert_int_equal(mb_image_alloc(40, 30, &img), 0);
    for (int y = 0; y < 30; y++)
        for (int x = 0; x < 40; x++)
            img.pixels[(size_t)y * img.stride + x] =
                (uint8_t)(3 * x + 2 * y + 5);
    uint64_t r = 5;
    for (int k = 0; k < 500; k++) {
        double x = 1 + 37 * scene_uniform(&r), y = 1 + 27 * scene_uniform(&r),
               gx, gy;
        assert_true(fabs(mb_pyramid_sample(&img, x, y) - (3 * x + 2 * y + 5)) <
                    1e-9);
        mb_pyramid_gradient(&img, x, y, &gx, &gy);
        assert_true(fabs(gx - 3) < 1e-12 && fabs(gy - 2) < 1e-12);
    }
    mb_image_free(&img);
}

static void test_errors(void **state)
{
    (void)state;
    mb_pyramid *pyr = (mb_pyramid *)&pyr;
    assert_int_equal(mb_pyramid_create(10, 10, 0, &pyr), MB_EINVAL);
    assert_null(pyr);
    assert_int_equal(mb_pyramid_create(10, 10, MB_PYRAMID_MAX_LEVELS + 1, &pyr),
                     MB_EINVAL);
    assert_int_equal(mb_pyramid_create(0, 10, 3, &pyr), MB_EINVAL);
    assert_int_equal(mb_pyramid_create(10, -1, 3, &pyr), MB_EINVAL);
    assert_int_equal(mb_pyramid_create(10, 10, 3, NULL), MB_EINVAL);
    assert_int_equal(mb_pyramid_create(10, 10, 3, &pyr), 0);
    mb_image img;
    assert_int_equal(mb_image_alloc(11, 10, &img), 0);
    assert_int_equal(mb_pyramid_build(pyr, &img), MB_ESIZE);
    assert_int_equal(mb_pyramid_build(pyr, NULL), MB_EINVAL);
    assert_int_equal(mb_pyramid_build(NULL, &img), MB_EINVAL);
    mb_image none = {10, 10, 10, NULL};
    assert_int_equal(mb_pyramid_build(pyr, &none), MB_EINVAL);
    assert_int_equal(mb_pyramid_levels(NULL), 0);
    assert_null(mb_pyramid_level(NULL, 0));
    assert_int_equal(mb_pyramid_use_wide(NULL, 1), 0);
    mb_pyramid_close(pyr);
    mb_pyramid_close(NULL);
    mb_image_free(&img);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_levels_match_definition),
        cmocka_unit_test(test_strided_view),
        cmocka_unit_test(test_coordinates_between_levels),
        cmocka_unit_test(test_sample_hand_values),
        cmocka_unit_test(test_ramp),
        cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
