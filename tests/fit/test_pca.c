/*
 * tests/fit/test_pca.c - PCA of shape vectors (fit/pca.h).
 *
 * Data with an exactly known sample covariance: with m = 2d samples
 * mean +- c_i q_i (q_i orthonormal, c_i^2 = l_i (m-1)/2) the sample
 * covariance is sum l_i q_i q_i^T, so the eigenvalues are l_i and the
 * eigenvectors +-q_i exactly. Checked: eigenvalues, eigenvectors, the sign
 * convention, the total variance, k by variance fraction and by fixed count
 * (worked out by hand), the rank tolerance, and that the covariance and Gram
 * routes agree on the same data for d <= m and for m < d.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "pca.h"
#include "shape_gen.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Random orthonormal columns (Gram-Schmidt of Gaussian vectors). */
static void random_orthonormal(tg_rng *r, int d, int k, double *q)
{
    for (int j = 0; j < k; j++) {
        double *v = q + (size_t)j * d;
        for (int i = 0; i < d; i++)
            v[i] = tg_gauss(r);
        for (int pass = 0; pass < 2; pass++)
            for (int p = 0; p < j; p++) {
                const double *u = q + (size_t)p * d;
                double c = 0;
                for (int i = 0; i < d; i++)
                    c += u[i] * v[i];
                for (int i = 0; i < d; i++)
                    v[i] -= c * u[i];
            }
        double len = 0;
        for (int i = 0; i < d; i++)
            len += v[i] * v[i];
        for (int i = 0; i < d; i++)
            v[i] /= sqrt(len);
    }
}

enum { KD = 6, KM = 2 * KD };
static const double known_l[KD] = {5.0, 3.0, 2.0, 1.0, 0.5, 0.1};

/* m = 2 d samples whose covariance is sum l_i q_i q_i^T (l_i = 0 allowed). */
static void known_data(const double *l, const double *q, double *x)
{
    for (int i = 0; i < KD; i++) {
        double c = sqrt(l[i] * (KM - 1) / 2.0);
        for (int s = 0; s < 2; s++) {
            double *col = x + (size_t)(2 * i + s) * KD;
            for (int r = 0; r < KD; r++)
                col[r] = 10.0 + r + (s ? -c : c) * q[(size_t)i * KD + r];
        }
    }
}

static void test_pca_known_covariance(void **state)
{
    (void)state;
    tg_rng r = {21};
    double q[KD * KD], x[KD * KM];
    random_orthonormal(&r, KD, KD, q);
    known_data(known_l, q, x);
    for (int route = MB_PCA_AUTO; route <= MB_PCA_GRAM; route++) {
        mb_pca_params p;
        mb_pca_params_default(&p);
        p.variance_fraction = 1.0;
        p.route = route;
        mb_pca pca;
        char err[MB_ERR_LEN] = "";
        assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err), 0);
        assert_int_equal(pca.dim, KD);
        assert_int_equal(pca.n_eig, KD); /* min(d, m - 1) */
        assert_int_equal(pca.n_modes, KD);
        TG_NEAR(pca.total_var, 11.6, 1e-12);
        for (int i = 0; i < KD; i++) {
            TG_NEAR(pca.mean[i], 10.0 + i, 1e-13);
            TG_NEAR(pca.eig[i], known_l[i], 1e-12 * known_l[0]);
            const double *u = pca.modes + (size_t)i * KD;
            const double *v = q + (size_t)i * KD;
            double dot = 0, big = 0;
            int imax = 0;
            for (int k = 0; k < KD; k++) {
                dot += u[k] * v[k];
                if (fabs(u[k]) > big) {
                    big = fabs(u[k]);
                    imax = k;
                }
            }
            TG_NEAR(fabs(dot), 1.0, 1e-10);
            assert_true(u[imax] > 0.0); /* sign convention */
        }
        mb_pca_free(&pca);
        assert_null(pca.mean);
    }
}

static void test_pca_choose_k(void **state)
{
    (void)state;
    tg_rng r = {22};
    double q[KD * KD], x[KD * KM];
    random_orthonormal(&r, KD, KD, q);
    known_data(known_l, q, x);
    /* Cumulative fractions of 11.6: 0.431, 0.690, 0.862, 0.948, 0.991, 1. */
    static const struct {
        double fraction;
        int fixed, k;
    } cases[] = {{0.40, 0, 1}, {0.50, 0, 2}, {0.85, 0, 3}, {0.90, 0, 4},
                 {0.98, 0, 5}, {1.00, 0, 6}, {0.98, 3, 3}, {0.98, 10, 6}};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        mb_pca_params p;
        mb_pca_params_default(&p);
        p.variance_fraction = cases[c].fraction;
        p.fixed_modes = cases[c].fixed;
        mb_pca pca;
        assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, NULL), 0);
        if (pca.n_modes != cases[c].k)
            fail_msg("fraction %g fixed %d: k = %d, expected %d",
                     cases[c].fraction, cases[c].fixed, pca.n_modes,
                     cases[c].k);
        mb_pca_free(&pca);
    }
}

static void test_pca_rank_tolerance(void **state)
{
    (void)state;
    /* Rank 2 data in 6 dimensions: nothing past mode 2 is ever kept. */
    tg_rng r = {23};
    double q[KD * KD], x[KD * KM];
    const double l[KD] = {4.0, 1.0, 0, 0, 0, 0};
    random_orthonormal(&r, KD, KD, q);
    known_data(l, q, x);
    mb_pca_params p;
    mb_pca_params_default(&p);
    p.variance_fraction = 1.0;
    mb_pca pca;
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, NULL), 0);
    assert_int_equal(pca.n_modes, 2);
    assert_int_equal(pca.n_eig, KD);
    for (int i = 2; i < KD; i++)
        assert_true(pca.eig[i] >= 0.0 && pca.eig[i] < 1e-12);
    mb_pca_free(&pca);
    p.fixed_modes = 5;
    p.route = MB_PCA_GRAM;
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, NULL), 0);
    assert_int_equal(pca.n_modes, 2);
    mb_pca_free(&pca);
}

/* Random data with a falling spectrum (distinct eigenvalues) plus noise. */
static double *spectrum_data(tg_rng *r, int d, int m, int ld)
{
    double *x = calloc((size_t)ld * m, sizeof *x);
    double *q = malloc(sizeof(double) * (size_t)d * 8);
    if (!x || !q)
        return NULL;
    random_orthonormal(r, d, 8, q);
    for (int j = 0; j < m; j++) {
        double *col = x + (size_t)j * ld;
        for (int i = 0; i < d; i++)
            col[i] = 1.0 + 0.01 * i + 0.01 * tg_gauss(r);
        for (int f = 0; f < 8; f++) {
            double b = tg_gauss(r) * 2.0 / (1.0 + f);
            for (int i = 0; i < d; i++)
                col[i] += b * q[(size_t)f * d + i];
        }
    }
    free(q);
    return x;
}

static void routes_agree(int d, int m)
{
    tg_rng r = {(uint64_t)(d * 1000 + m)};
    int ld = d + 3; /* a leading dimension larger than d */
    double *x = spectrum_data(&r, d, m, ld);
    assert_non_null(x);
    mb_pca a, b;
    mb_pca_params p;
    mb_pca_params_default(&p);
    p.route = MB_PCA_COVARIANCE;
    assert_int_equal(mb_pca_compute(x, ld, d, m, &p, &a, NULL), 0);
    p.route = MB_PCA_GRAM;
    assert_int_equal(mb_pca_compute(x, ld, d, m, &p, &b, NULL), 0);
    assert_int_equal(a.n_eig, d < m - 1 ? d : m - 1);
    assert_int_equal(a.n_eig, b.n_eig);
    assert_int_equal(a.n_modes, b.n_modes);
    assert_true(a.n_modes >= 4);
    TG_NEAR(a.total_var, b.total_var, 1e-11 * a.total_var);
    for (int i = 0; i < a.n_eig; i++)
        TG_NEAR(a.eig[i], b.eig[i], 1e-11 * a.eig[0]);
    for (int i = 0; i < a.n_eig - 1; i++)
        assert_true(a.eig[i] >= a.eig[i + 1]);
    for (int i = 0; i < d; i++)
        TG_NEAR(a.mean[i], b.mean[i], 1e-14);
    /* Same sign convention, so the vectors agree without a sign fix. */
    for (int k = 0; k < a.n_modes; k++)
        for (int i = 0; i < d; i++)
            TG_NEAR(a.modes[(size_t)k * d + i], b.modes[(size_t)k * d + i],
                    1e-8);
    /* Orthonormal columns. */
    for (int k = 0; k < b.n_modes; k++)
        for (int l = 0; l <= k; l++) {
            double s = 0;
            for (int i = 0; i < d; i++)
                s += b.modes[(size_t)k * d + i] * b.modes[(size_t)l * d + i];
            TG_NEAR(s, k == l ? 1.0 : 0.0, 1e-10);
        }
    mb_pca_free(&a);
    mb_pca_free(&b);
    /* The in-place variant gives the same answer. */
    p.route = MB_PCA_AUTO;
    assert_int_equal(mb_pca_compute(x, ld, d, m, &p, &a, NULL), 0);
    assert_int_equal(mb_pca_compute_inplace(x, ld, d, m, &p, &b, NULL), 0);
    assert_int_equal(a.n_modes, b.n_modes);
    for (int i = 0; i < a.n_eig; i++)
        assert_true(a.eig[i] == b.eig[i]);
    mb_pca_free(&a);
    mb_pca_free(&b);
    free(x);
}

static void test_pca_routes_agree_d_le_m(void **state)
{
    (void)state;
    routes_agree(20, 60);
    routes_agree(20, 20);
}

static void test_pca_routes_agree_m_lt_d(void **state)
{
    (void)state;
    routes_agree(80, 30);
}

/* |S u_i - l_i u_i| for every kept mode, S the sample covariance. */
static double eigen_residual(const double *x, int d, int m, const mb_pca *pca)
{
    double worst = 0.0;
    for (int k = 0; k < pca->n_modes; k++) {
        const double *u = pca->modes + (size_t)k * d;
        double r2 = 0.0;
        for (int i = 0; i < d; i++) {
            double su = 0.0;
            for (int j = 0; j < m; j++) {
                const double *col = x + (size_t)j * d;
                double pj = 0.0;
                for (int q = 0; q < d; q++)
                    pj += (col[q] - pca->mean[q]) * u[q];
                su += (col[i] - pca->mean[i]) * pj;
            }
            su /= m - 1;
            r2 += (su - pca->eig[k] * u[i]) * (su - pca->eig[k] * u[i]);
        }
        if (sqrt(r2) > worst)
            worst = sqrt(r2);
    }
    return worst;
}

static void test_pca_ring_pairs(void **state)
{
    (void)state;
    /* A ring bent by cos(k t + phase) with random phases: its modes come in
       pairs of (nearly) equal variance, the hard case for computing a few
       eigenvectors. Each kept pair must still be eigenvectors of S. */
    enum { N = 40, RD = 2 * N };
    for (int mcase = 0; mcase < 2; mcase++) {
        int m = mcase ? 30 : 200; /* Gram and covariance routes */
        double *x = malloc(sizeof(double) * RD * (size_t)m);
        assert_non_null(x);
        tg_rng r = {31 + (uint64_t)m};
        for (int j = 0; j < m; j++)
            for (int i = 0; i < N; i++) {
                double t = 2 * M_PI * i / N, rad = 1.0;
                for (int f = 2; f < 6; f++)
                    rad += 0.02 / f * tg_gauss(&r) * cos(f * t) +
                           0.02 / f * tg_gauss(&r) * sin(f * t);
                x[(size_t)j * RD + 2 * i] = rad * cos(t) + 1e-4 * tg_gauss(&r);
                x[(size_t)j * RD + 2 * i + 1] =
                    rad * sin(t) + 1e-4 * tg_gauss(&r);
            }
        mb_pca_params p;
        mb_pca_params_default(&p);
        p.fixed_modes = 8;
        mb_pca pca;
        assert_int_equal(mb_pca_compute(x, RD, RD, m, &p, &pca, NULL), 0);
        assert_int_equal(pca.n_modes, 8);
        assert_true(eigen_residual(x, RD, m, &pca) < 1e-12 * pca.eig[0]);
        for (int a = 0; a < 8; a++)
            for (int b = 0; b <= a; b++) {
                double s = 0;
                for (int i = 0; i < RD; i++)
                    s += pca.modes[a * RD + i] * pca.modes[b * RD + i];
                TG_NEAR(s, a == b ? 1.0 : 0.0, 1e-12);
            }
        mb_pca_free(&pca);
        free(x);
    }
}

static void test_pca_bad_input(void **state)
{
    (void)state;
    tg_rng r = {24};
    double q[KD * KD], x[KD * KM];
    random_orthonormal(&r, KD, KD, q);
    known_data(known_l, q, x);
    mb_pca pca;
    mb_pca_params p;
    mb_pca_params_default(&p);
    char err[MB_ERR_LEN];

    err[0] = '\0';
    assert_int_equal(mb_pca_compute(x, KD, KD, 1, &p, &pca, err),
                     MB_EDEGENERATE);
    assert_non_null(strstr(err, "at least 2"));
    assert_int_equal(mb_pca_compute(x, KD - 1, KD, KM, &p, &pca, err),
                     MB_EINVAL);
    assert_int_equal(mb_pca_compute(NULL, KD, KD, KM, &p, &pca, err),
                     MB_EINVAL);
    p.variance_fraction = 1.5;
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err), MB_EINVAL);
    p.variance_fraction = 0.98;
    p.route = 7;
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err), MB_EINVAL);
    mb_pca_params_default(&p);

    x[3 * KD + 4] = NAN;
    err[0] = '\0';
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err), MB_ENUMERIC);
    assert_non_null(strstr(err, "vector 3"));
    x[3 * KD + 4] = INFINITY;
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err), MB_ENUMERIC);

    for (int j = 0; j < KM; j++) /* all vectors equal */
        for (int i = 0; i < KD; i++)
            x[j * KD + i] = 1.0 + i;
    err[0] = '\0';
    assert_int_equal(mb_pca_compute(x, KD, KD, KM, &p, &pca, err),
                     MB_EDEGENERATE);
    assert_non_null(strstr(err, "same"));
    assert_null(pca.mean);
    mb_pca_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pca_known_covariance),
        cmocka_unit_test(test_pca_choose_k),
        cmocka_unit_test(test_pca_rank_tolerance),
        cmocka_unit_test(test_pca_routes_agree_d_le_m),
        cmocka_unit_test(test_pca_routes_agree_m_lt_d),
        cmocka_unit_test(test_pca_ring_pairs),
        cmocka_unit_test(test_pca_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
