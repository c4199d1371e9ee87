/*
 * tests/fit/test_outline_synth.c - the outliner (fit/outline.h) on frames
 * of the synthetic production line (capture/synth.h) against the
 * generator's exact ground truth: every family, back-lit and front-lit,
 * 1280 x 1024, blur sigma 1 px, noise sigma 2 grey levels.
 *
 * For good parts: the outline count, winding (truth and ours both give the
 * outer edge a positive shoelace sum and holes a negative one), each hole
 * matched to one true hole by its centroid, and the distance of every
 * measured point to the true outline polygons: RMS, median and 95th
 * percentile printed and bounded. The hose and the lip seal have sharp
 * corners, where the blurred image itself no longer shows the corner (a
 * blurred acute tip ends short of the true one); their RMS is bounded more
 * loosely and their median and 95th percentile as tightly as the others'.
 * Empty frames must give MB_ENOPART and parts cut by the frame edge
 * MB_EEDGE.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "outline.h"
#include "synth.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PARTS 3

static double segment_distance(double px, double py, const double *a,
                               const double *b)
{
    double vx = b[0] - a[0], vy = b[1] - a[1];
    double wx = px - a[0], wy = py - a[1];
    double l2 = vx * vx + vy * vy;
    double t = l2 > 0 ? (wx * vx + wy * vy) / l2 : 0;
    t = t < 0 ? 0 : t > 1 ? 1 : t;
    return hypot(wx - t * vx, wy - t * vy);
}

/* distance from (x, y) to the nearest edge of any true outline */
static double truth_distance(const mb_polyline_set *t, double x, double y)
{
    double best = INFINITY;
    const double *xy = t->xy;
    for (int o = 0; o < t->n_outlines; o++) {
        int n = t->counts[o];
        for (int j = 0; j < n; j++) {
            double d =
                segment_distance(x, y, xy + 2 * j, xy + 2 * ((j + 1) % n));
            if (d < best)
                best = d;
        }
        xy += 2 * n;
    }
    return best;
}

static void centroid(const double *p, int n, double *cx, double *cy,
                     double *area)
{
    double a2 = 0, sx = 0, sy = 0;
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        double c = p[2 * i] * p[2 * j + 1] - p[2 * j] * p[2 * i + 1];
        a2 += c;
        sx += (p[2 * i] + p[2 * j]) * c;
        sy += (p[2 * i + 1] + p[2 * j + 1]) * c;
    }
    *area = 0.5 * a2;
    *cx = sx / (3 * a2);
    *cy = sy / (3 * a2);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static void check_family(int family, int lighting)
{
    mb_synth_config c;
    mb_synth_config_default(&c, (mb_synth_family)family);
    c.lighting = (mb_synth_lighting)lighting;
    c.seed = 77;
    c.defect_mask |= 1u << MB_SYNTH_CUT;
    mb_synth *g;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_synth_open(&c, &g, err), 0);
    mb_image img;
    assert_int_equal(mb_image_alloc(c.width, c.height, &img), 0);
    mb_outliner *o;
    assert_int_equal(mb_outliner_create(c.width, c.height, NULL, &o, err), 0);
    mb_outline_result r;
    mb_outline_config cfg;
    mb_outline_config_default(&cfg);
    double *d = malloc(sizeof(double) * (size_t)cfg.points * PARTS);
    assert_non_null(d);
    int nd = 0;
    double ss = 0;
    for (int p = 0; p < PARTS; p++) {
        mb_synth_truth t;
        assert_int_equal(
            mb_synth_make(g, (uint64_t)p, 0, MB_SYNTH_NONE, &img, &t), 0);
        int rc = mb_outliner_run(o, &img, &r, err);
        if (rc)
            printf("%s\n", err);
        assert_int_equal(rc, 0);
        assert_int_equal(r.layout.n_outlines, t.outlines.n_outlines);
        assert_int_equal(r.part_dark, lighting == MB_SYNTH_BACKLIT);
        /* windings and holes matched one to one by centroid */
        int used[MB_MAX_OUTLINES] = {0};
        for (int i = 0; i < r.layout.n_outlines; i++) {
            double cx, cy, a;
            centroid(r.points + 2 * mb_layout_first(&r.layout, i),
                     r.layout.counts[i], &cx, &cy, &a);
            assert_true(i == 0 ? a > 0 : a < 0);
            int match = -1, off = 0;
            for (int k = 0; k < t.outlines.n_outlines; k++) {
                double tx, ty, ta;
                centroid(t.outlines.xy + 2 * off, t.outlines.counts[k], &tx,
                         &ty, &ta);
                off += t.outlines.counts[k];
                if (hypot(cx - tx, cy - ty) < 1.0 && (k == 0) == (i == 0) &&
                    !used[k]) {
                    assert_true((ta > 0) == (a > 0));
                    match = k;
                }
            }
            assert_true(match >= 0);
            used[match] = 1;
        }
        for (int k = 0; k < r.layout.n_points; k++) {
            double e = truth_distance(&t.outlines, r.points[2 * k],
                                      r.points[2 * k + 1]);
            d[nd++] = e;
            ss += e * e;
        }
    }
    qsort(d, (size_t)nd, sizeof *d, cmp_double);
    double rms = sqrt(ss / nd), med = d[nd / 2], p95 = d[(int)(0.95 * nd)];
    int front = lighting == MB_SYNTH_FRONTLIT;
    int corners = family == MB_SYNTH_HOSE || family == MB_SYNTH_LIPSEAL;
    printf("%-8s %-5s: %d points on %d parts: RMS %.4f px, median %.4f px, "
           "95th percentile %.4f px, max %.3f px\n",
           mb_synth_family_name(family), mb_synth_lighting_name(lighting), nd,
           PARTS, rms, med, p95, d[nd - 1]);
    /* back-lit about 0.017 px RMS on smooth parts; front-lit about 0.075
     * (lower contrast and the belt's texture next to the edge) */
    assert_true(med < (front ? 0.07 : 0.02));
    assert_true(p95 < (front ? 0.20 : 0.05));
    assert_true(rms <
                (corners ? (front ? 0.13 : 0.08) : (front ? 0.10 : 0.03)));

    /* an empty frame, and a part cut by the frame edge */
    mb_synth_truth t;
    assert_int_equal(mb_synth_make(g, 100, 0, MB_SYNTH_EMPTY, &img, &t), 0);
    assert_int_equal(mb_outliner_run(o, &img, &r, err), MB_ENOPART);
    assert_int_equal(mb_synth_make(g, 101, 0, MB_SYNTH_CUT, &img, &t), 0);
    assert_int_equal(t.in_view, 0);
    assert_int_equal(mb_outliner_run(o, &img, &r, err), MB_EEDGE);
    free(d);
    mb_outliner_close(o);
    mb_image_free(&img);
    mb_synth_close(g);
}

static void test_families(void **state)
{
    (void)state;
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++)
        for (int l = 0; l < 2; l++)
            check_family(f, l);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_families),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
