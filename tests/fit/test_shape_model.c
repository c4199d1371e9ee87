/*
 * tests/fit/test_shape_model.c - the point distribution model
 * (fit/shape_model.h; Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995).
 *
 * A model built from synthetic two-outline parts has the documented shape
 * (sizes, sorted variances, orthonormal modes, unit-norm mean, training
 * metadata); project and reconstruct invert each other; T^2 and SPE match
 * values worked out by hand on a hand-made model; the fit recovers the pose
 * and b that generated a target (to 1e-8), also with weights; with every
 * mode kept, fitting a training part gives its PCA score; the bound on
 * |b_i| is respected; the per-frame calls (fit, project, reconstruct, T^2,
 * SPE) allocate nothing; bad input gets the right code and a sentence.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "alloc_count.h"
#include "error.h"
#include "shape_gen.h"
#include "shape_model.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

enum { NP = TG_N_OUTER + TG_N_HOLE, D = 2 * NP, M = 40 };


static double *make_parts(int m, uint64_t seed)
{
    double *x = malloc(sizeof(double) * (size_t)D * m);
    if (!x)
        return NULL;
    tg_rng r = {seed};
    for (int j = 0; j < m; j++) {
        mb_pose pose = tg_random_pose(&r);
        tg_part(&r, 0.05, 0.003, &pose, x + (size_t)j * D);
    }
    return x;
}

static mb_shape_model *build(const double *x, int m, const mb_pca_params *pp)
{
    mb_layout l = tg_layout();
    mb_train_info info;
    memset(&info, 0, sizeof info);
    snprintf(info.created, sizeof info.created, "2024-01-02T03:04:05Z");
    snprintf(info.source, sizeof info.source, "synthetic test parts");
    mb_shape_model *model = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_shape_model_build(x, D, &l, m, NULL, pp, &info, &model, err);
    if (rc < 0)
        fail_msg("build failed: %s", err);
    return model;
}

static void test_build_shape(void **state)
{
    (void)state;
    double *x = make_parts(M, 1);
    assert_non_null(x);
    mb_shape_model *m = build(x, M, NULL);
    int k = mb_shape_model_n_modes(m), n_eig = mb_shape_model_n_eig(m);
    assert_int_equal(mb_shape_model_dim(m), D);
    assert_int_equal(n_eig, M - 1); /* min(d, m - 1) */
    assert_true(k >= 2 && k < n_eig);
    assert_int_equal(mb_shape_model_layout(m)->n_outlines, 2);
    assert_int_equal(mb_shape_model_layout(m)->counts[1], TG_N_HOLE);
    const mb_train_info *ti = mb_shape_model_info(m);
    assert_int_equal(ti->n_samples, M);
    assert_true(ti->gpa_converged);
    assert_true(ti->gpa_iterations >= 1);
    TG_NEAR(ti->variance_fraction, 0.98, 0.0);
    assert_int_equal(ti->fixed_modes, 0);
    assert_string_equal(ti->source, "synthetic test parts");
    assert_string_equal(ti->created, "2024-01-02T03:04:05Z");

    const double *eig = mb_shape_model_eig(m), *mean = mb_shape_model_mean(m);
    const double *p = mb_shape_model_modes(m);
    double total = 0, cum = 0, mm = 0;
    for (int i = 0; i < n_eig; i++) {
        total += eig[i];
        if (i > 0)
            assert_true(eig[i] <= eig[i - 1]);
    }
    TG_NEAR(mb_shape_model_total_var(m), total, 1e-15 * total);
    for (int i = 0; i < k; i++)
        cum += eig[i];
    assert_true(cum >= 0.98 * total);
    assert_true(cum - eig[k - 1] < 0.98 * total); /* the fewest modes */
    for (int i = 0; i < D; i++)
        mm += mean[i] * mean[i];
    TG_NEAR(mm, 1.0, 1e-9);
    for (int a = 0; a < k; a++)
        for (int b = 0; b <= a; b++) {
            double s = 0;
            for (int i = 0; i < D; i++)
                s += p[a * D + i] * p[b * D + i];
            TG_NEAR(s, a == b ? 1.0 : 0.0, 1e-10);
        }
    assert_int_equal(mb_shape_model_fit_work_size(m), 2 * D + k);
    mb_shape_model_close(m);
    mb_shape_model_close(NULL);
    free(x);
}

static void test_project_reconstruct(void **state)
{
    (void)state;
    double *x = make_parts(M, 2);
    assert_non_null(x);
    mb_shape_model *m = build(x, M, NULL);
    int k = mb_shape_model_n_modes(m);
    tg_rng r = {9};
    double b[D], b2[D], y[D], work[D];
    const double *eig = mb_shape_model_eig(m);
    for (int i = 0; i < k; i++)
        b[i] = 2.0 * sqrt(eig[i]) * tg_gauss(&r);
    mb_shape_model_reconstruct(m, b, y);
    mb_shape_model_project(m, y, b2);
    for (int i = 0; i < k; i++)
        TG_NEAR(b2[i], b[i], 1e-13);
    TG_NEAR(mb_shape_model_spe(m, y, work), 0.0, 1e-26);
    double t2 = 0;
    for (int i = 0; i < k; i++)
        t2 += b[i] * b[i] / eig[i];
    TG_NEAR(mb_shape_model_t2(m, b), t2, 1e-12 * t2);
    mb_shape_model_close(m);
    free(x);
}

/* A model made by hand: a triangle (d = 6), modes u1 = (e1 + e2)/sqrt 2,
   u2 = (e3 - e4)/sqrt 2, variances 4, 1 (and a dropped 0.25). */
static mb_shape_model *hand_model(void)
{
    mb_layout l = {1, {3}, 3};
    const double mean[6] = {
        1, 0, -0.5, 0.8660254037844386, -0.5, -0.8660254037844386};
    const double h = sqrt(0.5);
    double modes[2 * 7] = {h, h, 0, 0, 0, 0, 99, 0, 0, h, -h, 0, 0, 99};
    const double eig[3] = {4.0, 1.0, 0.25};
    mb_shape_model *m = NULL;
    char err[MB_ERR_LEN] = "";
    /* ld_modes 7: the padding value 99 must be ignored */
    int rc =
        mb_shape_model_create(&l, 2, mean, modes, 7, 3, eig, NULL, &m, err);
    if (rc < 0)
        fail_msg("create failed: %s", err);
    return m;
}

static void test_t2_spe_by_hand(void **state)
{
    (void)state;
    mb_shape_model *m = hand_model();
    const double h = sqrt(0.5);
    /* T^2 of b = (2, -3): 2^2/4 + 3^2/1 = 10. */
    const double b[2] = {2.0, -3.0};
    TG_NEAR(mb_shape_model_t2(m, b), 10.0, 1e-15);
    /* x = mean + 2 u1 + 0.5 e5: b = (2, 0), SPE = 0.5^2 = 0.25. */
    const double *mean = mb_shape_model_mean(m);
    double x[6], bb[2], work[6];
    for (int i = 0; i < 6; i++)
        x[i] = mean[i];
    x[0] += 2 * h;
    x[1] += 2 * h;
    x[4] += 0.5;
    mb_shape_model_project(m, x, bb);
    TG_NEAR(bb[0], 2.0, 1e-15);
    TG_NEAR(bb[1], 0.0, 1e-15);
    TG_NEAR(mb_shape_model_spe(m, x, work), 0.25, 1e-15);
    TG_NEAR(mb_shape_model_total_var(m), 5.25, 0.0);
    assert_int_equal(mb_shape_model_n_eig(m), 3);
    assert_int_equal(mb_shape_model_n_modes(m), 2);
    mb_shape_model_close(m);
}

static void test_create_bad_input(void **state)
{
    (void)state;
    mb_layout l = {1, {3}, 3};
    double mean[6] = {1, 0, -0.5, 0.8, -0.5, -0.8};
    double modes[12] = {1, 0, 0, 0, 0, 0, 0, 1, 0, 0, 0, 0};
    double eig[3] = {4.0, 1.0, 0.25};
    mb_shape_model *m = NULL;
    char err[MB_ERR_LEN];
#define EXPECT(code, call)                                                     \
    do {                                                                       \
        err[0] = '\0';                                                         \
        int rc_ = (call);                                                      \
        if (rc_ != (code))                                                     \
            fail_msg("%s returned %d, expected %d (%s)", #call, rc_, code,     \
                     err);                                                     \
        assert_true(err[0] != '\0');                                           \
        assert_null(m);                                                        \
    } while (0)
    EXPECT(MB_ESIZE, mb_shape_model_create(&l, 3, mean, modes, 6, 2, eig, NULL,
                                           &m, err)); /* k > n_eig */
    EXPECT(MB_ESIZE, mb_shape_model_create(&l, 2, mean, modes, 6, 7, eig, NULL,
                                           &m, err)); /* n_eig > d */
    EXPECT(MB_ESIZE,
           mb_shape_model_create(&l, 0, mean, modes, 6, 3, eig, NULL, &m, err));
    EXPECT(MB_EINVAL, mb_shape_model_create(&l, 2, mean, modes, 5, 3, eig, NULL,
                                            &m, err)); /* ld < d */
    l.n_points = 4;
    EXPECT(MB_EINVAL, mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL,
                                            &m, err)); /* bad layout */
    l.n_points = 3;
    mean[2] = NAN;
    EXPECT(MB_ENUMERIC,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    mean[2] = -0.5;
    modes[8] = INFINITY;
    EXPECT(MB_ENUMERIC,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    modes[8] = 0.0;
    eig[1] = 5.0; /* not sorted */
    EXPECT(MB_EINVAL,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    eig[1] = 0.0; /* a kept mode with zero variance */
    eig[2] = 0.0;
    EXPECT(MB_EINVAL,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    eig[1] = 1.0;
    eig[2] = -0.25;
    EXPECT(MB_EINVAL,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    eig[2] = 0.25;
    modes[6] = 0.01; /* not orthonormal */
    EXPECT(MB_EINVAL,
           mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err));
    modes[6] = 0.0;
    EXPECT(MB_EINVAL,
           mb_shape_model_create(&l, 2, NULL, modes, 6, 3, eig, NULL, &m, err));
    err[0] = '\0';
    assert_int_equal(
        mb_shape_model_create(&l, 2, mean, modes, 6, 3, eig, NULL, &m, err), 0);
    assert_non_null(m);
    mb_shape_model_close(m);
#undef EXPECT
}

/* Target = pose(mean + P b_true); fit from b = 0. */
static void check_fit_recovers(mb_shape_model *m, const double *w,
                               uint64_t seed)
{
    int k = mb_shape_model_n_modes(m);
    const double *eig = mb_shape_model_eig(m);
    tg_rng r = {seed};
    double btrue[D], b[D], x[D], target[D];
    double *work = malloc(sizeof(double) * mb_shape_model_fit_work_size(m));
    assert_non_null(work);
    for (int trial = 0; trial < 10; trial++) {
        for (int i = 0; i < k; i++)
            btrue[i] = 1.5 * sqrt(eig[i]) * tg_gauss(&r);
        mb_pose pose = tg_random_pose(&r);
        mb_shape_model_reconstruct(m, btrue, x);
        mb_pose_apply(&pose, x, NP, target);
        memset(b, 0, sizeof b);
        mb_fit_params p;
        mb_fit_params_default(&p);
        p.tol = 1e-12;
        mb_fit_result res;
        assert_int_equal(mb_shape_model_fit(m, target, w, &p, b, &res, work),
                         0);
        assert_true(res.converged);
        assert_int_equal(res.clamped, 0);
        for (int i = 0; i < k; i++)
            TG_NEAR(b[i] / sqrt(eig[i]), btrue[i] / sqrt(eig[i]), 1e-8);
        TG_NEAR(res.pose.scale / pose.scale, 1.0, 1e-8);
        TG_NEAR(remainder(res.pose.angle - pose.angle, 2 * M_PI), 0.0, 1e-8);
        TG_NEAR(res.pose.tx, pose.tx, 1e-8 * pose.scale);
        TG_NEAR(res.pose.ty, pose.ty, 1e-8 * pose.scale);
        assert_true(res.rms < 1e-8 * pose.scale);
    }
    free(work);
}

static void test_fit_recovers_pose_and_b(void **state)
{
    (void)state;
    double *x = make_parts(M, 3);
    assert_non_null(x);
    mb_shape_model *m = build(x, M, NULL);
    check_fit_recovers(m, NULL, 100);
    double w[NP];
    tg_rng r = {5};
    for (int i = 0; i < NP; i++)
        w[i] = 0.2 + tg_uniform(&r);
    check_fit_recovers(m, w, 101);
    mb_shape_model_close(m);
    free(x);
}

static void test_fit_fixed_point(void **state)
{
    (void)state;
    /* A target the model cannot represent (noise outside the modes): the
       fit must stop at the fixed point of Cootes et al. 1995, section 4.1:
       T = best pose of x(b) onto Y, y = T^-1(Y) scaled into the tangent
       plane of the mean, b = P^T (y - mean). For a model built in the
       tangent space that scaling is 1 at the fixed point (modes orthogonal
       to a unit mean), so the model here is built without it (modes not
       orthogonal to the mean), where the scaling changes the answer
       (checked, so this test can tell the two apart). */
    double *x = make_parts(M, 7);
    assert_non_null(x);
    mb_layout l = tg_layout();
    mb_gpa_params gp;
    mb_gpa_params_default(&gp);
    gp.tangent = 0;
    mb_shape_model *m = NULL;
    assert_int_equal(
        mb_shape_model_build(x, D, &l, M, &gp, NULL, NULL, &m, NULL), 0);
    int k = mb_shape_model_n_modes(m);
    const double *eig = mb_shape_model_eig(m), *mean = mb_shape_model_mean(m);
    const double *p = mb_shape_model_modes(m);
    double *work = malloc(sizeof(double) * mb_shape_model_fit_work_size(m));
    assert_non_null(work);
    tg_rng r = {77};
    double btrue[D], b[D], y[D], target[D], bt[D], bn[D];
    for (int trial = 0; trial < 5; trial++) {
        for (int i = 0; i < k; i++)
            btrue[i] = 2.0 * sqrt(eig[i]) * tg_gauss(&r);
        mb_shape_model_reconstruct(m, btrue, y);
        for (int i = 0; i < D; i++)
            y[i] += 0.01 * tg_gauss(&r);
        mb_pose pose = tg_random_pose(&r);
        mb_pose_apply(&pose, y, NP, target);
        mb_fit_params fp;
        mb_fit_params_default(&fp);
        fp.tol = 1e-11;
        fp.max_iter = 500;
        mb_fit_result res;
        memset(b, 0, sizeof b);
        assert_int_equal(
            mb_shape_model_fit(m, target, NULL, &fp, b, &res, work), 0);
        assert_true(res.converged);
        mb_pose inv = mb_pose_invert(&res.pose);
        mb_pose_apply(&inv, target, NP, y);
        double ym = 0, mm = 0;
        for (int i = 0; i < D; i++) {
            ym += y[i] * mean[i];
            mm += mean[i] * mean[i];
        }
        double c = ym / mm;
        double gap = 0.0;
        for (int a = 0; a < k; a++) {
            bt[a] = bn[a] = 0.0;
            for (int i = 0; i < D; i++) {
                bt[a] += p[a * D + i] * (y[i] / c - mean[i]);
                bn[a] += p[a * D + i] * (y[i] - mean[i]);
            }
            TG_NEAR(b[a] / sqrt(eig[a]), bt[a] / sqrt(eig[a]), 1e-8);
            double g = fabs(bn[a] - bt[a]) / sqrt(eig[a]);
            if (g > gap)
                gap = g;
        }
        assert_true(gap > 1e-3); /* the tangent scaling matters here */
        assert_true(res.rms > 1e-3 * pose.scale); /* the noise is visible */
    }
    free(work);
    mb_shape_model_close(m);
    free(x);
}

static void test_fit_training_scores(void **state)
{
    (void)state;
    /* Every mode kept: a training part lies in the model, so its fit must
       reproduce its PCA score P^T (aligned - mean) from the GPA. */
    double *x = make_parts(M, 4);
    double *aligned = malloc(sizeof(double) * D * M);
    double gmean[D], b[D], score[D];
    assert_non_null(x);
    assert_non_null(aligned);
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    pp.fixed_modes = M;
    mb_shape_model *m = build(x, M, &pp);
    int k = mb_shape_model_n_modes(m);
    assert_int_equal(k, M - 1);
    assert_int_equal(mb_shape_model_info(m)->fixed_modes, M);
    TG_NEAR(mb_shape_model_info(m)->variance_fraction, 0.0, 0.0);
    assert_int_equal(
        mb_gpa_align(x, D, NP, M, NULL, aligned, D, gmean, NULL, NULL, NULL),
        0);
    double *work = malloc(sizeof(double) * mb_shape_model_fit_work_size(m));
    assert_non_null(work);
    const double *eig = mb_shape_model_eig(m);
    for (int j = 0; j < M; j += 7) {
        mb_shape_model_project(m, aligned + (size_t)j * D, score);
        memset(b, 0, sizeof b);
        mb_fit_result res;
        mb_fit_params p;
        mb_fit_params_default(&p);
        p.tol = 1e-10; /* rounding moves the smallest modes ~1e-13 sd */
        assert_int_equal(
            mb_shape_model_fit(m, x + (size_t)j * D, NULL, &p, b, &res, work),
            0);
        assert_true(res.converged);
        for (int i = 0; i < k; i++)
            TG_NEAR(b[i] / sqrt(eig[i]), score[i] / sqrt(eig[i]), 1e-7);
    }
    free(work);
    free(aligned);
    mb_shape_model_close(m);
    free(x);
}

static void test_fit_bound(void **state)
{
    (void)state;
    double *x = make_parts(M, 5);
    assert_non_null(x);
    mb_shape_model *m = build(x, M, NULL);
    int k = mb_shape_model_n_modes(m);
    const double *eig = mb_shape_model_eig(m);
    double btrue[D], b[D], y[D], target[D];
    double *work = malloc(sizeof(double) * mb_shape_model_fit_work_size(m));
    assert_non_null(work);
    memset(btrue, 0, sizeof btrue);
    btrue[0] = 5.0 * sqrt(eig[0]); /* a defect-sized first mode */
    btrue[1] = -0.5 * sqrt(eig[1]);
    mb_pose pose = {320, 240, 120, 0.4};
    mb_shape_model_reconstruct(m, btrue, y);
    mb_pose_apply(&pose, y, NP, target);

    mb_fit_params p;
    mb_fit_params_default(&p);
    p.b_limit = 3.0;
    mb_fit_result res;
    memset(b, 0, sizeof b);
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work), 0);
    for (int i = 0; i < k; i++)
        assert_true(fabs(b[i]) <= 3.0 * sqrt(eig[i]) * (1 + 1e-15));
    TG_NEAR(b[0], 3.0 * sqrt(eig[0]), 1e-15);
    assert_true(res.clamped >= 1);
    assert_true(res.rms > 1e-3); /* the bound leaves a visible residual */

    /* Unbounded: the defect shows up in b in full. */
    p.b_limit = 0.0;
    memset(b, 0, sizeof b);
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work), 0);
    TG_NEAR(b[0] / sqrt(eig[0]), 5.0, 1e-7);
    assert_int_equal(res.clamped, 0);

    /* The iteration cap is reported. */
    p.max_iter = 1;
    memset(b, 0, sizeof b);
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work), 0);
    assert_int_equal(res.iterations, 1);
    assert_int_equal(res.converged, 0);
    free(work);
    mb_shape_model_close(m);
    free(x);
}

static void test_per_frame_calls_allocate_nothing(void **state)
{
    (void)state;
    double *x = make_parts(M, 9);
    assert_non_null(x);
    mb_shape_model *m = build(x, M, NULL);
    double *work = malloc(sizeof(double) * mb_shape_model_fit_work_size(m));
    double b[D], y[D], spe_work[D];
    assert_non_null(work);
    memset(b, 0, sizeof b);
    mb_fit_params p;
    mb_fit_params_default(&p);
    p.b_limit = 3.0;
    mb_fit_result res;
    long before = mb_allocs();
    int rc = mb_shape_model_fit(m, x + 3 * D, NULL, &p, b, &res, work);
    mb_shape_model_reconstruct(m, b, y);
    mb_shape_model_project(m, y, b);
    double t2 = mb_shape_model_t2(m, b);
    double spe = mb_shape_model_spe(m, y, spe_work);
    long made = mb_allocs() - before;
    assert_int_equal(rc, 0);
    assert_true(isfinite(t2) && isfinite(spe));
    assert_int_equal(made, 0);
    /* The counter itself works: a build allocates. */
    before = mb_allocs();
    mb_shape_model *m2 = build(x, M, NULL);
    assert_true(mb_allocs() - before > 0);
    mb_shape_model_close(m2);
    free(work);
    mb_shape_model_close(m);
    free(x);
}

static void test_fit_bad_input(void **state)
{
    (void)state;
    mb_shape_model *m = hand_model();
    double target[6] = {10, 0, 5, 8, 5, -8}, b[2] = {0, 0}, work[16];
    double w[3] = {0, 0, 0};
    mb_fit_result res;
    mb_fit_params p;
    mb_fit_params_default(&p);
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work), 0);
    assert_int_equal(mb_shape_model_fit(m, target, w, &p, b, &res, work),
                     MB_EDEGENERATE);
    assert_int_equal(mb_shape_model_fit(m, NULL, NULL, &p, b, &res, work),
                     MB_EINVAL);
    p.max_iter = 0;
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work),
                     MB_EINVAL);
    mb_fit_params_default(&p);
    p.b_limit = -1.0;
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work),
                     MB_EINVAL);
    mb_fit_params_default(&p);
    target[3] = NAN;
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work),
                     MB_ENUMERIC);
    for (int i = 0; i < 6; i++) /* all targets on one spot */
        target[i] = 7.0;
    assert_int_equal(mb_shape_model_fit(m, target, NULL, &p, b, &res, work),
                     MB_EDEGENERATE);
    mb_shape_model_close(m);
}

static void test_build_bad_input(void **state)
{
    (void)state;
    double *x = make_parts(M, 6);
    assert_non_null(x);
    mb_layout l = tg_layout();
    mb_shape_model *m = NULL;
    char err[MB_ERR_LEN];
#define EXPECT(code, what, call)                                               \
    do {                                                                       \
        err[0] = '\0';                                                         \
        int rc_ = (call);                                                      \
        if (rc_ != (code))                                                     \
            fail_msg("%s returned %d, expected %d (%s)", #call, rc_, code,     \
                     err);                                                     \
        if (!strstr(err, what))                                                \
            fail_msg("error sentence \"%s\" lacks \"%s\"", err, what);         \
        assert_null(m);                                                        \
    } while (0)
    EXPECT(MB_EINVAL, "at least 3",
           mb_shape_model_build(x, D, &l, 2, NULL, NULL, NULL, &m, err));
    EXPECT(MB_EINVAL, "leading dimension",
           mb_shape_model_build(x, D - 2, &l, M, NULL, NULL, NULL, &m, err));
    mb_layout bad = l;
    bad.counts[1] = TG_N_HOLE + 1; /* does not sum to n_points */
    EXPECT(MB_EINVAL, "layout",
           mb_shape_model_build(x, D, &bad, M, NULL, NULL, NULL, &m, err));
    double keep = x[5 * D + 7];
    x[5 * D + 7] = NAN;
    EXPECT(MB_ENUMERIC, "shape 5",
           mb_shape_model_build(x, D, &l, M, NULL, NULL, NULL, &m, err));
    x[5 * D + 7] = INFINITY;
    EXPECT(MB_ENUMERIC, "shape 5",
           mb_shape_model_build(x, D, &l, M, NULL, NULL, NULL, &m, err));
    x[5 * D + 7] = keep;
    double save[D];
    memcpy(save, x + 4 * D, sizeof save);
    for (int i = 0; i < NP; i++) {
        x[4 * D + 2 * i] = 1.0;
        x[4 * D + 2 * i + 1] = 2.0;
    }
    EXPECT(MB_EDEGENERATE, "shape 4 has zero size",
           mb_shape_model_build(x, D, &l, M, NULL, NULL, NULL, &m, err));
    memcpy(x + 4 * D, save, sizeof save);
    /* All parts the same up to pose: nothing to model. */
    tg_rng r = {8};
    double part[D];
    tg_part(&r, 0.0, 0.0, NULL, part);
    for (int j = 0; j < M; j++) {
        mb_pose pose = tg_random_pose(&r);
        mb_pose_apply(&pose, part, NP, x + (size_t)j * D);
    }
    EXPECT(MB_EDEGENERATE, "same",
           mb_shape_model_build(x, D, &l, M, NULL, NULL, NULL, &m, err));
#undef EXPECT
    free(x);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_build_shape),
        cmocka_unit_test(test_project_reconstruct),
        cmocka_unit_test(test_t2_spe_by_hand),
        cmocka_unit_test(test_create_bad_input),
        cmocka_unit_test(test_fit_recovers_pose_and_b),
        cmocka_unit_test(test_fit_fixed_point),
        cmocka_unit_test(test_fit_training_scores),
        cmocka_unit_test(test_fit_bound),
        cmocka_unit_test(test_per_frame_calls_allocate_nothing),
        cmocka_unit_test(test_fit_bad_input),
        cmocka_unit_test(test_build_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
