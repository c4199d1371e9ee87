/*
 * tests/fit/test_shape.c - outline layouts and the similarity-pose algebra
 * (fit/shape.h): hand values, inverse and composition against applying the
 * poses one after the other, in-place application.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "shape.h"
#include "shape_gen.h"

#include <math.h>

static void test_layout_check(void **state)
{
    (void)state;
    mb_layout l = {3, {10, 4, 3}, 17};
    assert_int_equal(mb_layout_check(&l), 0);
    assert_int_equal(mb_layout_first(&l, 0), 0);
    assert_int_equal(mb_layout_first(&l, 1), 10);
    assert_int_equal(mb_layout_first(&l, 2), 14);
    assert_int_equal(mb_layout_first(&l, 3), -1);
    assert_int_equal(mb_layout_first(&l, -1), -1);

    mb_layout bad = l;
    bad.n_points = 18; /* sum mismatch */
    assert_int_equal(mb_layout_check(&bad), MB_EINVAL);
    bad = l;
    bad.counts[1] = 2; /* an outline needs 3 points */
    bad.n_points = 16;
    assert_int_equal(mb_layout_check(&bad), MB_EINVAL);
    bad = l;
    bad.n_outlines = 0;
    assert_int_equal(mb_layout_check(&bad), MB_EINVAL);
    bad.n_outlines = MB_MAX_OUTLINES + 1;
    assert_int_equal(mb_layout_check(&bad), MB_EINVAL);
    bad = l;
    bad.counts[0] = MB_MAX_OUTLINE_POINTS + 1;
    bad.n_points = MB_MAX_OUTLINE_POINTS + 8;
    assert_int_equal(mb_layout_check(&bad), MB_EINVAL);
    assert_int_equal(mb_layout_check(NULL), MB_EINVAL);
}

static void test_pose_hand_values(void **state)
{
    (void)state;
    /* s = 2, a = 90 degrees, t = (1, 2): (1,0) -> (1,4); (0,1) -> (-1,2). */
    mb_pose p = {1.0, 2.0, 2.0, M_PI / 2};
    double src[4] = {1.0, 0.0, 0.0, 1.0}, dst[4];
    mb_pose_apply(&p, src, 2, dst);
    TG_NEAR(dst[0], 1.0, 1e-15);
    TG_NEAR(dst[1], 4.0, 1e-15);
    TG_NEAR(dst[2], -1.0, 1e-15);
    TG_NEAR(dst[3], 2.0, 1e-15);

    mb_pose id = mb_pose_identity();
    assert_true(id.scale == 1.0 && id.angle == 0.0 && id.tx == 0.0 &&
                id.ty == 0.0);
    mb_pose_apply(&id, src, 2, dst);
    for (int i = 0; i < 4; i++)
        assert_true(dst[i] == src[i]);

    /* Inverse by hand: 1/2, -90 degrees, t' = -(1/2) R(-90)(1,2) = (-1, 0.5).
     */
    mb_pose inv = mb_pose_invert(&p);
    TG_NEAR(inv.scale, 0.5, 1e-15);
    TG_NEAR(inv.angle, -M_PI / 2, 1e-15);
    TG_NEAR(inv.tx, -1.0, 1e-15);
    TG_NEAR(inv.ty, 0.5, 1e-15);
}

static void test_pose_algebra_random(void **state)
{
    (void)state;
    tg_rng r = {7};
    enum { N = 9 };
    for (int trial = 0; trial < 200; trial++) {
        mb_pose a = tg_random_pose(&r), b = tg_random_pose(&r);
        a.angle *= 3.0; /* also angles beyond pi */
        double x[2 * N], ya[2 * N], yba[2 * N], yc[2 * N], back[2 * N];
        for (int i = 0; i < 2 * N; i++)
            x[i] = 10.0 * tg_gauss(&r);
        /* compose(b, a) == apply a, then b */
        mb_pose_apply(&a, x, N, ya);
        mb_pose_apply(&b, ya, N, yba);
        mb_pose c = mb_pose_compose(&b, &a);
        mb_pose_apply(&c, x, N, yc);
        for (int i = 0; i < 2 * N; i++)
            TG_NEAR(yc[i], yba[i], 1e-9 * (1.0 + fabs(yba[i])));
        assert_true(c.angle >= -M_PI && c.angle <= M_PI);
        /* invert(a) undoes a */
        mb_pose ia = mb_pose_invert(&a);
        mb_pose_apply(&ia, ya, N, back);
        for (int i = 0; i < 2 * N; i++)
            TG_NEAR(back[i], x[i], 1e-10 * (1.0 + fabs(x[i])));
        /* a o a^-1 is the identity */
        mb_pose e = mb_pose_compose(&a, &ia);
        TG_NEAR(e.scale, 1.0, 1e-13);
        TG_NEAR(e.angle, 0.0, 1e-13);
        TG_NEAR(e.tx, 0.0, 1e-10);
        TG_NEAR(e.ty, 0.0, 1e-10);
        /* in place */
        double in[2 * N];
        for (int i = 0; i < 2 * N; i++)
            in[i] = x[i];
        mb_pose_apply(&a, in, N, in);
        for (int i = 0; i < 2 * N; i++)
            assert_true(in[i] == ya[i]);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_layout_check),
        cmocka_unit_test(test_pose_hand_values),
        cmocka_unit_test(test_pose_algebra_random),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
