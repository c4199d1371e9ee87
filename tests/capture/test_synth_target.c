/*
 * tests/capture/test_synth_target.c - the target sheet on the synthetic
 * conveyor (capture/synth_target.h): discs where the view puts them, of the
 * right area and grey levels, turned the right way, and bad views refused.
 * References are by hand: the image of a disc of radius r mm at scale s
 * mm/px is a disc of radius r/s px centred at the mapped centre, whose ink
 * (white - grey) summed over the frame is (white - black) pi (r/s)^2.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "image.h"
#include "synth_target.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#define W 200
#define H 160

/* Ink-weighted centroid and ink sum of the window x0..x1, y0..y1. */
static void ink_moments(const mb_image *im, double white, int x0, int y0,
                        int x1, int y1, double *sum, double *cx, double *cy)
{
    double s = 0, sx = 0, sy = 0;
    for (int y = y0; y <= y1; y++)
        for (int x = x0; x <= x1; x++) {
            double ink =
                white - im->pixels[(size_t)y * (size_t)im->stride + (size_t)x];
            s += ink;
            sx += ink * x;
            sy += ink * y;
        }
    *sum = s;
    *cx = sx / s;
    *cy = sy / s;
}

static void view(mb_synth_target_view *v)
{
    mb_synth_target_view_default(v, W, H);
    v->noise = 0;
    v->blur = 0.8;
    v->sheet_mm[0] = -9;
    v->sheet_mm[1] = -7;
    v->sheet_mm[2] = 9;
    v->sheet_mm[3] = 7;
}

static void test_disc_place_and_area(void **state)
{
    (void)state;
    mb_image im;
    assert_int_equal(mb_image_alloc(W, H, &im), 0);
    mb_synth_target_view v;
    view(&v);
    v.angle_deg = 30;
    v.anchor_mm[0] = 1;
    v.anchor_mm[1] = -1;
    /* disc at (5, 2) mm, radius 1.5 mm: 15 px at 0.1 mm/px */
    mb_synth_disc d = {5, 2, 1.5};
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &im, NULL), 0);
    /* (X, Y) - anchor = (4, 3) mm; turned 30 degrees clockwise on screen:
       (4 cos - 3 sin, 4 sin + 3 cos) = (1.964, 4.598) mm, (19.64, 45.98) px
       from the frame centre */
    double ex = (W - 1) / 2.0 + (4 * cos(M_PI / 6) - 3 * sin(M_PI / 6)) / 0.1;
    double ey = (H - 1) / 2.0 + (4 * sin(M_PI / 6) + 3 * cos(M_PI / 6)) / 0.1;
    double sum, cx, cy;
    ink_moments(&im, 220, (int)ex - 25, (int)ey - 25, (int)ex + 25,
                (int)ey + 25, &sum, &cx, &cy);
    printf("disc centroid (%.4f, %.4f) px, expected (%.4f, %.4f); ink %.0f, "
           "expected %.0f\n",
           cx, cy, ex, ey, sum, 195 * M_PI * 225);
    /* rounding to 8 bits moves the centroid by well under 0.01 px */
    assert_true(fabs(cx - ex) < 0.01 && fabs(cy - ey) < 0.01);
    assert_true(fabs(sum / (195 * M_PI * 225) - 1) < 0.005);
    /* grey levels: the sheet white, the conveyor outside it */
    assert_int_equal(im.pixels[(size_t)(H / 2) * (size_t)im.stride + 60], 220);
    assert_int_equal(im.pixels[2 * (size_t)im.stride + 2], 90);
    mb_image_free(&im);
}

static void test_noise_is_seeded(void **state)
{
    (void)state;
    mb_image a, b;
    assert_int_equal(mb_image_alloc(W, H, &a), 0);
    assert_int_equal(mb_image_alloc(W, H, &b), 0);
    mb_synth_target_view v;
    view(&v);
    v.noise = 2;
    mb_synth_disc d = {0, 0, 2};
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &a, NULL), 0);
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &b, NULL), 0);
    int same = 1;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            same &= a.pixels[(size_t)y * (size_t)a.stride + (size_t)x] ==
                    b.pixels[(size_t)y * (size_t)b.stride + (size_t)x];
    assert_true(same);
    v.seed = 2;
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &b, NULL), 0);
    /* sd of the difference of two noise fields: 2 sqrt 2 grey levels */
    double s2 = 0;
    for (int x = 0; x < W; x++) {
        double dd =
            (double)
                a.pixels[(size_t)(H / 2 - 40) * (size_t)a.stride + (size_t)x] -
            b.pixels[(size_t)(H / 2 - 40) * (size_t)b.stride + (size_t)x];
        s2 += dd * dd;
    }
    double sd = sqrt(s2 / W);
    printf("noise difference sd %.2f grey levels (2.83 expected)\n", sd);
    assert_true(sd > 2.0 && sd < 3.8);
    mb_image_free(&a);
    mb_image_free(&b);
}

static void test_refusals(void **state)
{
    (void)state;
    mb_image im;
    assert_int_equal(mb_image_alloc(W, H, &im), 0);
    mb_synth_target_view v;
    view(&v);
    mb_synth_disc d = {0, 0, 1};
    char err[MB_ERR_LEN];
    assert_int_equal(mb_synth_target_frame(NULL, 1, &v, &im, err), MB_EINVAL);
    assert_int_equal(mb_synth_target_frame(&d, 1, NULL, &im, err), MB_EINVAL);
    d.radius = 0;
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &im, err), MB_EINVAL);
    d.radius = 1;
    v.sheet_mm[2] = v.sheet_mm[0];
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &im, err), MB_EINVAL);
    view(&v);
    v.mm_per_px = 0;
    assert_int_equal(mb_synth_target_frame(&d, 1, &v, &im, err), MB_EINVAL);
    mb_image_free(&im);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_disc_place_and_area),
        cmocka_unit_test(test_noise_is_seeded),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
