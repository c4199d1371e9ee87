/*
 * tests/calibration/test_grr.c - the repeatability arithmetic
 * (inspect/grr.h) against a worked example computed by hand, the band
 * edges of the AIAG MSA manual (4th edition: under 10 % acceptable, 10 to
 * 30 % conditionally, over 30 % not), and refusals.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "grr.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

/*
 * Worked example, by hand. A gauge (a diameter, mm) read on three parts,
 * each re-placed and imaged again:
 *   part 1: 20.01 20.03 20.02        mean 20.02, deviations -.01 +.01 0
 *   part 2: 19.98 19.99 20.00 19.99  mean 19.99, deviations -.01 0 +.01 0
 *   part 3: 20.05 20.07              mean 20.06, deviations -.01 +.01
 * Sum of squared deviations 3 x 0.0002 = 0.0006 on (3-1) + (4-1) + (2-1)
 * = 6 degrees of freedom: sigma^2 = 0.0001, sigma = 0.01 mm.
 * Tolerance 20 +- 0.1 mm, width 0.2 mm: %GRR = 100 x 6 x 0.01 / 0.2 = 30 %,
 * the top of the "conditionally acceptable" band. Width 0.5 mm: 12 %
 * (conditional); 0.7 mm: 8.571 % (acceptable); 0.15 mm: 40 % (not
 * acceptable).
 * Upper 95 % bound: sigma sqrt(6 / chi2_0.05(6)), with chi2_0.05(6) =
 * 1.635 (lower 5 % point, NIST/SEMATECH e-Handbook, table of critical
 * values of the chi-square distribution): 0.01 x sqrt(6 / 1.635) =
 * 0.01916 mm (the table's 4 digits limit the check to 1e-3).
 */
static const double example[] = {20.01, 20.03, 20.02, 19.98, 19.99,
                                 20.00, 19.99, 20.05, 20.07};
static const int counts[] = {3, 4, 2};

static void test_worked_example(void **state)
{
    (void)state;
    mb_grr g;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_grr_compute(example, counts, 3, 0.2, &g, err), 0);
    printf("sigma %.6f mm (df %d, upper %.5f), %%GRR %.4f %% (%s)\n", g.sigma,
           g.df, g.sigma_upper, g.percent_grr, mb_grr_band_name(g.band));
    assert_int_equal(g.parts, 3);
    assert_int_equal(g.measurements, 9);
    assert_int_equal(g.df, 6);
    assert_true(fabs(g.sigma - 0.01) < 1e-12);
    /* 30 % is the band's edge: the computed value may land a rounding
       error either side, so the band is checked on the edges themselves
       (test_properties) and on the values below. */
    assert_true(fabs(g.percent_grr - 30.0) < 1e-9);
    assert_true(fabs(g.sigma_upper / (0.01 * sqrt(6.0 / 1.635)) - 1.0) < 1e-3);
    const double tol[3] = {0.5, 0.7, 0.15};
    const double pct[3] = {12.0, 600.0 * 0.01 / 0.7, 40.0};
    const mb_grr_band band[3] = {MB_GRR_CONDITIONAL, MB_GRR_ACCEPTABLE,
                                 MB_GRR_NOT_ACCEPTABLE};
    for (int i = 0; i < 3; i++) {
        assert_int_equal(mb_grr_compute(example, counts, 3, tol[i], &g, err),
                         0);
        assert_true(fabs(g.percent_grr - pct[i]) < 1e-9);
        assert_int_equal(g.band, band[i]);
    }
    assert_true(fabs(600.0 * 0.01 / 0.7 - 8.5714285714) < 1e-9);
}

static void test_properties(void **state)
{
    (void)state;
    mb_grr a, b;
    double shifted[9], scaled[9];
    for (int i = 0; i < 9; i++) {
        shifted[i] = example[i] + 1000.0;
        scaled[i] = example[i] * 25.4;
    }
    assert_int_equal(mb_grr_compute(example, counts, 3, 0.2, &a, NULL), 0);
    assert_int_equal(mb_grr_compute(shifted, counts, 3, 0.2, &b, NULL), 0);
    assert_true(fabs(a.sigma - b.sigma) < 1e-9);
    assert_int_equal(mb_grr_compute(scaled, counts, 3, 0.2 * 25.4, &b, NULL),
                     0);
    assert_true(fabs(a.percent_grr - b.percent_grr) < 1e-9);
    /* A part read once adds nothing; a part read zero times neither. */
    double more[10];
    memcpy(more, example, sizeof example);
    more[9] = 55.0;
    const int c4[5] = {3, 4, 2, 1, 0};
    assert_int_equal(mb_grr_compute(more, c4, 5, 0.2, &b, NULL), 0);
    assert_int_equal(b.df, 6);
    assert_true(fabs(a.sigma - b.sigma) < 1e-15);
    /* Band edges. */
    assert_int_equal(mb_grr_band_of(9.999), MB_GRR_ACCEPTABLE);
    assert_int_equal(mb_grr_band_of(10.0), MB_GRR_CONDITIONAL);
    assert_int_equal(mb_grr_band_of(30.0), MB_GRR_CONDITIONAL);
    assert_int_equal(mb_grr_band_of(30.001), MB_GRR_NOT_ACCEPTABLE);
    assert_string_equal(mb_grr_band_name(MB_GRR_NOT_ACCEPTABLE),
                        "not acceptable");
}

static void test_refusals(void **state)
{
    (void)state;
    mb_grr g;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_grr_compute(example, counts, 3, 0.0, &g, err),
                     MB_EINVAL);
    assert_int_equal(mb_grr_compute(example, counts, 3, NAN, &g, err),
                     MB_EINVAL);
    assert_int_equal(mb_grr_compute(example, counts, 0, 0.2, &g, err),
                     MB_EINVAL);
    const int ones[3] = {1, 1, 1};
    assert_int_equal(mb_grr_compute(example, ones, 3, 0.2, &g, err),
                     MB_EDEGENERATE);
    assert_non_null(strstr(err, "twice"));
    double bad[9];
    memcpy(bad, example, sizeof bad);
    bad[4] = INFINITY;
    assert_int_equal(mb_grr_compute(bad, counts, 3, 0.2, &g, err), MB_ENUMERIC);
    assert_non_null(strstr(err, "part 2, measurement 2"));
    const int neg[3] = {3, -1, 2};
    assert_int_equal(mb_grr_compute(example, neg, 3, 0.2, &g, err), MB_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_worked_example),
        cmocka_unit_test(test_properties),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
