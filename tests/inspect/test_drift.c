/*
 * tests/inspect/test_drift.c - EWMA charts (inspect/drift.h) and the
 * report's capability figures (inspect/report.h) against textbook worked
 * examples, plus the signal/clear behaviour and the report's handling of
 * odd records.
 */
#include "drift.h"
#include "error.h"
#include "image.h"
#include "report.h"
#include "synth.h"

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

/*
 * NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4 "EWMA Control
 * Charts", worked example: EWMA_0 = 50, lambda = 0.3 (so lambda/(2-lambda)
 * = .1765 and its root .4201: these two figures checked against the page
 * text); s = 2.0539, limits 52.5884 and 47.4115 and the 20 data are from
 * memory. The handbook uses the asymptotic
 * limits; after 20 parts (1 - 0.3)^40 < 1e-6, so ours agree to 4 decimals.
 */
static void test_nist_ewma_example(void **state)
{
    (void)state;
    static const double x[20] = {52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0,
                                 50.1, 51.2, 50.5, 49.6, 47.6, 49.9, 51.3,
                                 47.8, 51.2, 52.6, 52.4, 53.6, 52.1};
    /* first EWMA values, by hand: 0.3*52 + 0.7*50 = 50.6; 0.3*47 + 0.7*50.6
       = 49.52; 0.3*53 + 0.7*49.52 = 50.564. (The handbook's EWMA column as
       remembered disagreed with its data at two points, so only these are
       used; numpy recomputes the whole recursion in ref_report.py.) */
    static const double z[3] = {50.6, 49.52, 50.564};
    mb_drift_config cfg = {0.3, 3.0, 5};
    mb_drift_chart c;
    assert_int_equal(mb_drift_init(&c, &cfg, 50.0, 2.0539), 0);
    for (int i = 0; i < 20; i++) {
        mb_drift_event ev = mb_drift_add(&c, x[i], (uint32_t)i + 1);
        assert_int_equal(ev, MB_DRIFT_NONE); /* in control throughout */
        if (i < 3)
            assert_true(fabs(c.z - z[i]) < 1e-9);
    }
    assert_true(fabs(c.ucl - 52.5884) < 1e-4);
    assert_true(fabs(c.lcl - 47.4115) < 1.5e-4);
    assert_true(fabs(sqrt(0.3 / 1.7) - 0.4201) < 5e-5);
}

/* The time-varying limits against the formula evaluated directly, and the
   first limit L sigma lambda (since 1 - (1-l)^2 = l (2 - l)). */
static void test_limits_formula(void **state)
{
    (void)state;
    mb_drift_config cfg;
    mb_drift_config_default(&cfg);
    assert_true(cfg.lambda == 0.2 && cfg.L == 3.0);
    mb_drift_chart c;
    assert_int_equal(mb_drift_init(&c, &cfg, 10.0, 0.5), 0);
    for (long t = 1; t <= 200; t++) {
        mb_drift_add(&c, 10.0, (uint32_t)t);
        double h = 3.0 * 0.5 * sqrt(0.2 / 1.8 * (1.0 - pow(0.8, 2.0 * t)));
        assert_true(fabs(c.ucl - 10.0 - h) < 1e-12);
        assert_true(fabs(10.0 - c.lcl - h) < 1e-12);
        assert_true(fabs(mb_drift_halfwidth(&cfg, 0.5, t) - h) < 1e-12);
        if (t == 1)
            assert_true(fabs(h - 3.0 * 0.5 * 0.2) < 1e-12);
    }
    assert_int_equal(mb_drift_init(&c, &cfg, 10.0, 0.0), MB_EINVAL);
    mb_drift_config bad = cfg;
    bad.lambda = 1.5;
    assert_int_equal(mb_drift_init(&c, &bad, 10.0, 1.0), MB_EINVAL);
}

/* A step of 1.5 sigma at part 51: the chart signals up within a few tens
   of parts, dates the excursion from the first part z went above the
   target, and clears exactly clear_after parts after it is back inside. */
static void test_signal_and_clear(void **state)
{
    (void)state;
    mb_drift_config cfg = {0.2, 3.0, 10};
    mb_drift_chart c;
    assert_int_equal(mb_drift_init(&c, &cfg, 0.0, 1.0), 0);
    long signal_at = -1, cleared_at = -1, back_inside = -1;
    for (long t = 1; t <= 400; t++) {
        double x = (t > 50 && t <= 150) ? 1.5 : (t > 150 ? -0.02 : 0.0);
        mb_drift_event ev = mb_drift_add(&c, x, (uint32_t)(1000 + t));
        if (ev == MB_DRIFT_SIGNAL && signal_at < 0) {
            signal_at = t;
            assert_int_equal(c.direction, 1);
            assert_int_equal(c.since, 51); /* first part above the target */
            assert_int_equal(c.since_seq, 1051);
        }
        if (signal_at > 0 && back_inside < 0 && c.z <= c.ucl)
            back_inside = t;
        if (ev == MB_DRIFT_CLEARED)
            cleared_at = t;
    }
    /* z = 1.5 (1 - 0.8^k) passes 3 sqrt(0.2/1.8) = 1.0 at k = 5 */
    assert_int_equal(signal_at, 55);
    assert_true(back_inside > 150);
    assert_int_equal(cleared_at, back_inside + 9);
    assert_int_equal(c.signalling, 0);
    /* non-finite values are ignored */
    long t0 = c.t;
    assert_int_equal(mb_drift_add(&c, NAN, 1), MB_DRIFT_NONE);
    assert_int_equal(c.t, t0);
}

static void part(mb_slog_record *r, double value, const char *verdict)
{
    memset(r, 0, sizeof *r);
    r->kind = MB_SLOG_PART;
    r->version = 1;
    r->verdict = !strcmp(verdict, "pass") ? MB_SLOG_PASS : MB_SLOG_REJECT;
    strcpy(r->reason, !strcmp(verdict, "pass") ? "" : "gauge");
    r->t2 = r->size_mm = r->residual = r->cycle_ms = NAN;
    r->t_utc = r->t_local = NAN;
    r->n_gauges = 1;
    strcpy(r->gauges[0].name, "w");
    r->gauges[0].value_mm = value;
    r->gauges[0].nominal_mm = 14.0;
    r->gauges[0].tol_lo_mm = -6.0; /* LSL 8 */
    r->gauges[0].tol_hi_mm = 6.0;  /* USL 20 */
}

/*
 * Cp and Cpk: the textbook definitions of NIST/SEMATECH e-Handbook 6.1.6
 * (Cp = (USL - LSL)/6 sigma, Cpk = min(USL - mu, mu - LSL)/3 sigma). Its
 * worked example as remembered (from memory, not checked against the
 * page): USL 20, LSL 8, mean 16, sigma 2 give Cp = 1 and Cpk = 0.6667.
 * Two parts at 16 -+ sqrt(2) have mean 16 and sample sd 2 exactly.
 */
static void test_cp_cpk_example(void **state)
{
    (void)state;
    mb_report *r;
    assert_int_equal(mb_report_open(&r), 0);
    mb_slog_record *rec = malloc(sizeof *rec);
    assert_non_null(rec);
    part(rec, 16.0 - sqrt(2.0), "pass");
    mb_report_add_record(r, rec);
    part(rec, 16.0 + sqrt(2.0), "pass");
    mb_report_add_record(r, rec);
    assert_int_equal(mb_report_gauge_count(r), 1);
    mb_report_gauge g;
    mb_report_gauge_get(r, 0, &g);
    assert_true(fabs(g.mean - 16.0) < 1e-12);
    assert_true(fabs(g.sd - 2.0) < 1e-12);
    assert_true(fabs(g.lsl - 8.0) < 1e-12 && fabs(g.usl - 20.0) < 1e-12);
    assert_true(fabs(g.cp - 1.0) < 1e-12);
    assert_true(fabs(g.cpk - 2.0 / 3.0) < 1e-12);
    /* one more part makes a reject; the counts follow */
    part(rec, 21.0, "reject");
    mb_report_add_record(r, rec);
    mb_report_totals t;
    mb_report_totals_get(r, &t);
    assert_int_equal(t.parts, 3);
    assert_int_equal(t.passes, 2);
    assert_int_equal(t.rejects, 1);
    assert_true(fabs(t.yield - 2.0 / 3.0) < 1e-12);
    mb_report_gauge_get(r, 0, &g);
    assert_int_equal(g.out_of_tol, 1);
    free(rec);
    mb_report_close(r);
}

/* An empty report prints and draws without a crash and says so. */
static void test_empty_report(void **state)
{
    (void)state;
    mb_report *r;
    assert_int_equal(mb_report_open(&r), 0);
    char *buf = NULL;
    size_t len = 0;
    FILE *f = open_memstream(&buf, &len);
    assert_non_null(f);
    mb_report_print(r, f);
    fclose(f);
    assert_non_null(strstr(buf, "no parts"));
    free(buf);
    char path[] = "/tmp/mb_test_report_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    char err[MB_ERR_LEN];
    assert_int_equal(mb_report_write_html(r, path, ".", "empty", err), 0);
    remove(path);
    mb_report_close(r);
}

/* The synthetic line's slow drift: at variation 0 part I has size factor
   exactly 1 + F * I (held at +-5 %), and the same part index without drift
   is unchanged; a drift out of range is refused. */
static void test_synth_drift(void **state)
{
    (void)state;
    mb_synth_config cfg;
    mb_synth_config_default(&cfg, MB_SYNTH_RING);
    cfg.width = 640;
    cfg.height = 512;
    cfg.mm_per_px = 0.1;
    cfg.variation = 0;
    cfg.drift_per_part = 1e-4;
    mb_synth *g = NULL;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_synth_open(&cfg, &g, err), 0);
    mb_image frame;
    assert_int_equal(mb_image_alloc(cfg.width, cfg.height, &frame), 0);
    mb_synth_truth t;
    static const uint64_t idx[4] = {0, 100, 400, 2000};
    static const double want[4] = {1.0, 1.01, 1.04, 1.05};
    for (int i = 0; i < 4; i++) {
        assert_int_equal(mb_synth_make(g, idx[i], 0, MB_SYNTH_NONE, &frame, &t), 0);
        assert_true(fabs(t.size - want[i]) < 1e-12);
    }
    mb_synth_close(g);
    cfg.drift_per_part = 0.01;
    assert_int_equal(mb_synth_open(&cfg, &g, err), MB_EINVAL);
    assert_non_null(strstr(err, "drift"));
    mb_image_free(&frame);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_nist_ewma_example),
        cmocka_unit_test(test_limits_formula),
        cmocka_unit_test(test_signal_and_clear),
        cmocka_unit_test(test_cp_cpk_example),
        cmocka_unit_test(test_empty_report),
        cmocka_unit_test(test_synth_drift),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
