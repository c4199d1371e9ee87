/*
 * tests/fit/test_procrustes.c - ordinary Procrustes and GPA (fit/procrustes.h).
 *
 * Procrustes: a known similarity is recovered from hand values and random
 * point sets to 1e-12; a non-similar target gives the residual worked out by
 * hand; weights ignore a zero-weight outlier; a mirror-image target gets the
 * best proper rotation (checked against a scan over all angles), never a
 * reflection. GPA: copies of one ellipse under known poses give the
 * analytic answer (every aligned shape equals the first shape standardised;
 * the poses are the known ones); noisy parts give a mean that is a fixed
 * point of the iteration with every shape optimally rotated onto it;
 * convergence and the iteration cap are reported; bad input gets the right
 * code and a sentence naming the shape.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "procrustes.h"
#include "shape_gen.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static void test_procrustes_hand_square(void **state)
{
    (void)state;
    double src[8] = {0, 0, 1, 0, 1, 1, 0, 1}, dst[8];
    mb_pose truth = {3.0, -4.0, 2.5, 0.7}, got;
    mb_pose_apply(&truth, src, 4, dst);
    double res = -1.0;
    assert_int_equal(mb_procrustes_fit(src, dst, 4, NULL, &got, &res), 0);
    TG_NEAR(got.scale, 2.5, 1e-12);
    TG_NEAR(got.angle, 0.7, 1e-12);
    TG_NEAR(got.tx, 3.0, 1e-12);
    TG_NEAR(got.ty, -4.0, 1e-12);
    TG_NEAR(res, 0.0, 1e-24);
}

static void test_procrustes_hand_residual(void **state)
{
    (void)state;
    /* Square (+-1, +-1) onto the rectangle (+-2, +-1): by hand A = 12, B = 0,
       S = 8, so angle 0, scale 1.5, t = 0, and each corner is off by
       (0.5, 0.5): residual 4 * 0.5 = 2. */
    double src[8] = {-1, -1, 1, -1, 1, 1, -1, 1};
    double dst[8] = {-2, -1, 2, -1, 2, 1, -2, 1};
    mb_pose got;
    double res;
    assert_int_equal(mb_procrustes_fit(src, dst, 4, NULL, &got, &res), 0);
    TG_NEAR(got.scale, 1.5, 1e-15);
    TG_NEAR(got.angle, 0.0, 1e-15);
    TG_NEAR(got.tx, 0.0, 1e-15);
    TG_NEAR(got.ty, 0.0, 1e-15);
    TG_NEAR(res, 2.0, 1e-14);
}

static void test_procrustes_random_exact(void **state)
{
    (void)state;
    tg_rng r = {11};
    enum { N = 30 };
    for (int trial = 0; trial < 50; trial++) {
        double src[2 * N], dst[2 * N];
        for (int i = 0; i < 2 * N; i++)
            src[i] = 5.0 * tg_gauss(&r) + 20.0;
        mb_pose truth = tg_random_pose(&r), got;
        mb_pose_apply(&truth, src, N, dst);
        double res;
        assert_int_equal(mb_procrustes_fit(src, dst, N, NULL, &got, &res), 0);
        TG_NEAR(got.scale, truth.scale, 1e-12 * truth.scale);
        TG_NEAR(remainder(got.angle - truth.angle, 2 * M_PI), 0.0, 1e-12);
        TG_NEAR(got.tx, truth.tx, 1e-12 * 1e3);
        TG_NEAR(got.ty, truth.ty, 1e-12 * 1e3);
        assert_true(res < 1e-16 * truth.scale * truth.scale * N * 100.0);
    }
}

static void test_procrustes_weights(void **state)
{
    (void)state;
    tg_rng r = {5};
    enum { N = 12 };
    double src[2 * N], dst[2 * N], w[N];
    for (int i = 0; i < 2 * N; i++)
        src[i] = tg_gauss(&r);
    mb_pose truth = {1.0, 2.0, 3.0, -1.0}, got;
    mb_pose_apply(&truth, src, N, dst);
    dst[2 * 4] += 50.0; /* one outlier */
    for (int i = 0; i < N; i++)
        w[i] = 0.5 + tg_uniform(&r);
    w[4] = 0.0;
    double res;
    assert_int_equal(mb_procrustes_fit(src, dst, N, w, &got, &res), 0);
    TG_NEAR(got.scale, 3.0, 1e-12);
    TG_NEAR(got.angle, -1.0, 1e-12);
    TG_NEAR(got.tx, 1.0, 1e-11);
    TG_NEAR(got.ty, 2.0, 1e-11);
    TG_NEAR(res, 0.0, 1e-20);
    /* Equal weights feel the outlier. */
    assert_int_equal(mb_procrustes_fit(src, dst, N, NULL, &got, &res), 0);
    assert_true(res > 1.0);
}

/* Signed area of a closed polygon (shoelace). */
static double signed_area(const double *p, int n)
{
    double a = 0.0;
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        a += p[2 * i] * p[2 * j + 1] - p[2 * j] * p[2 * i + 1];
    }
    return 0.5 * a;
}

static void test_procrustes_mirror_never_reflects(void **state)
{
    (void)state;
    /* An asymmetric L-shaped outline and its mirror image (x -> -x), moved. */
    enum { N = 6 };
    double src[2 * N] = {0, 0, 4, 0, 4, 1, 1, 1, 1, 3, 0, 3};
    double dst[2 * N];
    for (int i = 0; i < N; i++) {
        dst[2 * i] = -src[2 * i] * 2.0 + 10.0;
        dst[2 * i + 1] = src[2 * i + 1] * 2.0 - 3.0;
    }
    mb_pose got;
    double res;
    assert_int_equal(mb_procrustes_fit(src, dst, N, NULL, &got, &res), 0);
    /* A reflection would fit exactly; a proper rotation cannot. */
    assert_true(res > 1.0);
    double mapped[2 * N];
    mb_pose_apply(&got, src, N, mapped);
    assert_true(signed_area(src, N) > 0.0);
    assert_true(signed_area(mapped, N) > 0.0); /* orientation kept */
    /* Best proper rotation by brute force: scan angles, with the optimal
       scale and translation for each; ours must be at least as good. */
    double best = INFINITY;
    double cs = 0, cd[2] = {0, 0}, sc[2] = {0, 0};
    for (int i = 0; i < N; i++) {
        sc[0] += src[2 * i] / N;
        sc[1] += src[2 * i + 1] / N;
        cd[0] += dst[2 * i] / N;
        cd[1] += dst[2 * i + 1] / N;
    }
    for (int i = 0; i < N; i++)
        cs += pow(src[2 * i] - sc[0], 2) + pow(src[2 * i + 1] - sc[1], 2);
    for (int k = 0; k < 36000; k++) {
        double a = 2 * M_PI * k / 36000, c = cos(a), s = sin(a), num = 0;
        for (int i = 0; i < N; i++) {
            double px = src[2 * i] - sc[0], py = src[2 * i + 1] - sc[1];
            num += (c * px - s * py) * (dst[2 * i] - cd[0]) +
                   (s * px + c * py) * (dst[2 * i + 1] - cd[1]);
        }
        double scale = num / cs, r = 0;
        for (int i = 0; i < N; i++) {
            double px = src[2 * i] - sc[0], py = src[2 * i + 1] - sc[1];
            r += pow(scale * (c * px - s * py) - (dst[2 * i] - cd[0]), 2) +
                 pow(scale * (s * px + c * py) - (dst[2 * i + 1] - cd[1]), 2);
        }
        if (r < best)
            best = r;
    }
    assert_true(res <= best + 1e-12);
    assert_true(res >= best - 1e-3); /* the scan is fine enough to be close */
}

static void test_procrustes_bad_input(void **state)
{
    (void)state;
    double src[6] = {1, 1, 1, 1, 1, 1}, dst[6] = {0, 0, 1, 0, 0, 1};
    double ok[6] = {0, 0, 2, 0, 0, 3}, w[3] = {0, 0, 0};
    mb_pose p;
    double res;
    assert_int_equal(mb_procrustes_fit(src, dst, 3, NULL, &p, NULL),
                     MB_EDEGENERATE);
    assert_int_equal(mb_procrustes_fit(ok, dst, 3, w, &p, NULL),
                     MB_EDEGENERATE);
    w[1] = -1.0;
    assert_int_equal(mb_procrustes_fit(ok, dst, 3, w, &p, NULL), MB_EINVAL);
    assert_int_equal(mb_procrustes_fit(ok, dst, 0, NULL, &p, NULL), MB_EINVAL);
    assert_int_equal(mb_procrustes_fit(NULL, dst, 3, NULL, &p, NULL),
                     MB_EINVAL);
    assert_int_equal(mb_procrustes_fit(ok, dst, 3, NULL, NULL, NULL),
                     MB_EINVAL);
    ok[3] = NAN;
    assert_int_equal(mb_procrustes_fit(ok, dst, 3, NULL, &p, NULL),
                     MB_ENUMERIC);
    ok[3] = 0.0;
    dst[4] = INFINITY;
    assert_int_equal(mb_procrustes_fit(ok, dst, 3, NULL, &p, NULL),
                     MB_ENUMERIC);
    /* A target without spread is a valid question: scale 0. */
    assert_int_equal(mb_procrustes_fit(ok, src, 3, NULL, &p, &res), 0);
    TG_NEAR(p.scale, 0.0, 1e-15);
    TG_NEAR(p.tx, 1.0, 1e-15);
}

/* ---- GPA -------------------------------------------------------------- */

enum { EN = 40, EM = 6 };

static void test_gpa_ellipses_analytic(void **state)
{
    (void)state;
    /* Ellipse E (half axes 3 and 1, evenly spaced, so centred) under known
       poses. Analytic answer: mean = R(a_0) E / |E| with |E| = sqrt(5 N);
       every aligned shape equals the mean; pose j maps the mean back onto
       shape j: scale s_j |E|, angle a_j - a_0, translation t_j. */
    double e[2 * EN], shapes[2 * EN * EM], aligned[2 * EN * EM], mean[2 * EN];
    mb_pose truth[EM], got[EM];
    tg_rng r = {3};
    for (int i = 0; i < EN; i++) {
        double t = 2 * M_PI * i / EN + 0.1;
        e[2 * i] = 3.0 * cos(t);
        e[2 * i + 1] = sin(t);
    }
    for (int j = 0; j < EM; j++) {
        truth[j] = tg_random_pose(&r);
        mb_pose_apply(&truth[j], e, EN, shapes + 2 * EN * j);
    }
    for (int tangent = 0; tangent <= 1; tangent++) {
        mb_gpa_params p;
        mb_gpa_params_default(&p);
        p.tangent = tangent;
        mb_gpa_info info;
        char err[MB_ERR_LEN] = "";
        assert_int_equal(mb_gpa_align(shapes, 2 * EN, EN, EM, &p, aligned,
                                      2 * EN, mean, got, &info, err),
                         0);
        assert_true(info.converged);
        assert_true(info.iterations <= 2);
        double norm_e = sqrt(5.0 * EN);
        mb_pose r0 = {0, 0, 1.0 / norm_e, truth[0].angle};
        double expect[2 * EN];
        mb_pose_apply(&r0, e, EN, expect);
        for (int i = 0; i < 2 * EN; i++)
            TG_NEAR(mean[i], expect[i], 1e-12);
        for (int j = 0; j < EM; j++) {
            for (int i = 0; i < 2 * EN; i++)
                TG_NEAR(aligned[2 * EN * j + i], expect[i], 1e-12);
            TG_NEAR(got[j].scale, truth[j].scale * norm_e,
                    1e-12 * truth[j].scale * norm_e);
            TG_NEAR(remainder(got[j].angle - (truth[j].angle - truth[0].angle),
                              2 * M_PI),
                    0.0, 1e-12);
            TG_NEAR(got[j].tx, truth[j].tx, 1e-10);
            TG_NEAR(got[j].ty, truth[j].ty, 1e-10);
        }
    }
}

enum { PM = 30 };

static void make_parts(double *shapes, int m, uint64_t seed)
{
    tg_rng r = {seed};
    mb_layout l = tg_layout();
    for (int j = 0; j < m; j++) {
        mb_pose pose = tg_random_pose(&r);
        tg_part(&r, 0.05, 0.005, &pose, shapes + (size_t)j * 2 * l.n_points);
    }
}

/* A = sum a . b, B = sum a x b */
static void dot_cross(const double *a, const double *b, int n, double *dot,
                      double *cross)
{
    *dot = *cross = 0.0;
    for (int i = 0; i < n; i++) {
        *dot += a[2 * i] * b[2 * i] + a[2 * i + 1] * b[2 * i + 1];
        *cross += a[2 * i] * b[2 * i + 1] - a[2 * i + 1] * b[2 * i];
    }
}

static void test_gpa_properties(void **state)
{
    (void)state;
    const int n = TG_N_OUTER + TG_N_HOLE, d = 2 * n;
    double *shapes = malloc(sizeof(double) * (size_t)d * PM);
    double *aligned = malloc(sizeof(double) * (size_t)d * PM);
    double mean[2 * (TG_N_OUTER + TG_N_HOLE)],
        avg[2 * (TG_N_OUTER + TG_N_HOLE)];
    mb_pose poses[PM];
    assert_non_null(shapes);
    assert_non_null(aligned);
    make_parts(shapes, PM, 42);
    for (int tangent = 0; tangent <= 1; tangent++) {
        mb_gpa_params p;
        mb_gpa_params_default(&p);
        p.tangent = tangent;
        mb_gpa_info info;
        assert_int_equal(mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean,
                                      poses, &info, NULL),
                         0);
        assert_true(info.converged);
        assert_true(info.last_change < p.tol);
        assert_true(info.iterations >= 2 && info.iterations < p.max_iter);

        double mx = 0, my = 0, mm = 0;
        for (int i = 0; i < n; i++) {
            mx += mean[2 * i];
            my += mean[2 * i + 1];
            mm += mean[2 * i] * mean[2 * i] + mean[2 * i + 1] * mean[2 * i + 1];
        }
        TG_NEAR(mx, 0.0, 1e-13);
        TG_NEAR(my, 0.0, 1e-13);
        TG_NEAR(mm, 1.0, 1e-13);
        /* Orientation: no rotation brings the mean closer to shape 0. */
        double a, b, std0[2 * (TG_N_OUTER + TG_N_HOLE)], c0x = 0, c0y = 0,
                                                         r0 = 0;
        for (int i = 0; i < n; i++) {
            c0x += shapes[2 * i] / n;
            c0y += shapes[2 * i + 1] / n;
        }
        for (int i = 0; i < n; i++) {
            std0[2 * i] = shapes[2 * i] - c0x;
            std0[2 * i + 1] = shapes[2 * i + 1] - c0y;
            r0 += std0[2 * i] * std0[2 * i] + std0[2 * i + 1] * std0[2 * i + 1];
        }
        for (int i = 0; i < d; i++)
            std0[i] /= sqrt(r0);
        dot_cross(mean, std0, n, &a, &b);
        TG_NEAR(b, 0.0, 1e-12);
        assert_true(a > 0.9);

        memset(avg, 0, sizeof avg);
        for (int j = 0; j < PM; j++) {
            const double *z = aligned + (size_t)j * d;
            double sx = 0, sy = 0, zz = 0;
            for (int i = 0; i < n; i++) {
                sx += z[2 * i];
                sy += z[2 * i + 1];
                zz += z[2 * i] * z[2 * i] + z[2 * i + 1] * z[2 * i + 1];
            }
            TG_NEAR(sx, 0.0, 1e-13);
            TG_NEAR(sy, 0.0, 1e-13);
            dot_cross(z, mean, n, &a, &b);
            TG_NEAR(b, 0.0, 1e-12); /* optimally rotated onto the mean */
            if (tangent)
                TG_NEAR(a, 1.0, 1e-12); /* in the tangent plane */
            else
                TG_NEAR(zz, 1.0, 1e-12); /* unit norm */
            /* pose j maps the aligned shape back onto the input */
            double back[2 * (TG_N_OUTER + TG_N_HOLE)];
            mb_pose_apply(&poses[j], z, n, back);
            for (int i = 0; i < d; i++)
                TG_NEAR(back[i], shapes[(size_t)j * d + i], 1e-9);
            for (int i = 0; i < d; i++)
                avg[i] += z[i] / PM;
        }
        /* Fixed point: the normalised average of the aligned shapes is the
           mean (in the tangent space the average is the mean itself). */
        double len = 0.0;
        for (int i = 0; i < d; i++)
            len += avg[i] * avg[i];
        len = sqrt(len);
        for (int i = 0; i < d; i++)
            TG_NEAR(avg[i] / len, mean[i], 1e-9);
        if (tangent)
            TG_NEAR(len, 1.0, 1e-9);
    }
    free(shapes);
    free(aligned);
}

static void test_gpa_iteration_cap(void **state)
{
    (void)state;
    const int n = TG_N_OUTER + TG_N_HOLE, d = 2 * n;
    double *shapes = malloc(sizeof(double) * (size_t)d * PM);
    double *aligned = malloc(sizeof(double) * (size_t)d * PM);
    double mean[2 * (TG_N_OUTER + TG_N_HOLE)];
    assert_non_null(shapes);
    assert_non_null(aligned);
    make_parts(shapes, PM, 43);
    mb_gpa_params p;
    mb_gpa_params_default(&p);
    p.tol = 0.0; /* never met */
    double last[4];
    for (int cap = 1; cap <= 3; cap++) {
        p.max_iter = cap;
        mb_gpa_info info;
        assert_int_equal(mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean,
                                      NULL, &info, NULL),
                         0);
        assert_int_equal(info.iterations, cap);
        assert_int_equal(info.converged, 0);
        assert_true(info.last_change > 0.0 && isfinite(info.last_change));
        last[cap] = info.last_change;
    }
    assert_true(last[3] < last[1]); /* the mean settles */
    /* In place (aligned == shapes) gives the same answer. */
    double mean2[2 * (TG_N_OUTER + TG_N_HOLE)];
    mb_gpa_params_default(&p);
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean, NULL, NULL, NULL),
        0);
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, shapes, d, mean2, NULL, NULL, NULL),
        0);
    for (int i = 0; i < d * PM; i++)
        assert_true(shapes[i] == aligned[i]);
    free(shapes);
    free(aligned);
}

static void test_gpa_bad_input(void **state)
{
    (void)state;
    const int n = TG_N_OUTER + TG_N_HOLE, d = 2 * n;
    double *shapes = malloc(sizeof(double) * (size_t)d * PM);
    double *aligned = malloc(sizeof(double) * (size_t)d * PM);
    double mean[2 * (TG_N_OUTER + TG_N_HOLE)];
    char err[MB_ERR_LEN];
    assert_non_null(shapes);
    assert_non_null(aligned);
    make_parts(shapes, PM, 44);
    mb_gpa_params p;
    mb_gpa_params_default(&p);

    err[0] = '\0';
    assert_int_equal(
        mb_gpa_align(shapes, d, n, 1, &p, aligned, d, mean, NULL, NULL, err),
        MB_EINVAL);
    assert_non_null(strstr(err, "at least 2 shapes"));
    err[0] = '\0';
    assert_int_equal(mb_gpa_align(shapes, d - 1, n, PM, &p, aligned, d, mean,
                                  NULL, NULL, err),
                     MB_EINVAL);
    assert_true(err[0] != '\0');
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, NULL, NULL, NULL, err),
        MB_EINVAL);
    p.max_iter = 0;
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean, NULL, NULL, err),
        MB_EINVAL);
    mb_gpa_params_default(&p);

    double keep = shapes[3 * d + 11];
    shapes[3 * d + 11] = NAN; /* shape 3, point 5 */
    err[0] = '\0';
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean, NULL, NULL, err),
        MB_ENUMERIC);
    assert_non_null(strstr(err, "shape 3"));
    assert_non_null(strstr(err, "point 5"));
    shapes[3 * d + 11] = -INFINITY;
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean, NULL, NULL, err),
        MB_ENUMERIC);
    shapes[3 * d + 11] = keep;

    for (int i = 0; i < n; i++) { /* shape 2 collapses onto one point */
        shapes[2 * d + 2 * i] = 250.0;
        shapes[2 * d + 2 * i + 1] = 125.0;
    }
    err[0] = '\0';
    assert_int_equal(
        mb_gpa_align(shapes, d, n, PM, &p, aligned, d, mean, NULL, NULL, err),
        MB_EDEGENERATE);
    assert_non_null(strstr(err, "shape 2"));
    assert_non_null(strstr(err, "zero size"));
    free(shapes);
    free(aligned);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_procrustes_hand_square),
        cmocka_unit_test(test_procrustes_hand_residual),
        cmocka_unit_test(test_procrustes_random_exact),
        cmocka_unit_test(test_procrustes_weights),
        cmocka_unit_test(test_procrustes_mirror_never_reflects),
        cmocka_unit_test(test_procrustes_bad_input),
        cmocka_unit_test(test_gpa_ellipses_analytic),
        cmocka_unit_test(test_gpa_properties),
        cmocka_unit_test(test_gpa_iteration_cap),
        cmocka_unit_test(test_gpa_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
