/*
 * tests/fit/test_outline.c - outlines from an image (fit/outline.h).
 *
 * - Otsu's threshold against a brute-force Otsu written here from the paper
 *   (Otsu, IEEE SMC 9(1), 1979: maximise w0 w1 (mu0 - mu1)^2) on random and
 *   hand-made histograms;
 * - the point budget split (mb_outline_counts) on hand values and rules;
 * - rendered parts with anti-aliasing, blur sigma 1 px and noise sigma 2
 *   (tests/fit/outline_scene.c): a flange-like plate with four holes and a
 *   ring, back-lit (dark on bright) and front-lit (bright on a darker
 *   textured belt); counts, polarity, orientation, order, first points,
 *   even spacing, and the RMS distance of the measured points to the true
 *   analytic outline, printed and bounded, separately on straight edges and
 *   on circles;
 * - refusals: no part, one colour, texture only, part cut by the frame
 *   edge, too small, two parts (the larger wins and the other is reported),
 *   more holes than MB_MAX_OUTLINES allows;
 * - no allocation per frame: malloc, calloc and realloc are wrapped.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "alloc_count.h"
#include "error.h"
#include "outline.h"
#include "outline_scene.h"
#include "pyramid.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>


/* ---- Otsu ------------------------------------------------------------- */

/* Between-class variance of the split {g <= t}, {g > t}, straight from the
 * definition, in long double; -1 when a class is empty. */
static long double brute_between(const uint32_t h[256], int t)
{
    long double n0 = 0, n1 = 0, s0 = 0, s1 = 0;
    for (int g = 0; g < 256; g++) {
        if (g <= t) {
            n0 += h[g];
            s0 += (long double)g * h[g];
        } else {
            n1 += h[g];
            s1 += (long double)g * h[g];
        }
    }
    if (n0 == 0 || n1 == 0)
        return -1;
    long double n = n0 + n1, d = s0 / n0 - s1 / n1;
    return n0 / n * (n1 / n) * d * d;
}

static int brute_otsu(const uint32_t h[256], long double *best)
{
    int bt = -1;
    *best = -1;
    for (int t = 0; t < 255; t++) {
        long double v = brute_between(h, t);
        if (v > *best) {
            *best = v;
            bt = t;
        }
    }
    return bt;
}

static void check_otsu(const uint32_t h[256], int *ties)
{
    mb_otsu o;
    long double best;
    int bt = brute_otsu(h, &best);
    int rc = mb_outline_threshold(h, &o);
    if (bt < 0) {
        assert_int_equal(rc, MB_EDEGENERATE);
        return;
    }
    assert_int_equal(rc, 0);
    if (o.threshold != bt) {
        /* only a tie in floating point may choose differently */
        long double mine = brute_between(h, o.threshold);
        assert_true(fabsl(mine - best) <= 1e-12L * best);
        (*ties)++;
    }
    long double n = 0, s = 0, s2 = 0;
    for (int g = 0; g < 256; g++) {
        n += h[g];
        s += (long double)g * h[g];
        s2 += (long double)g * g * h[g];
    }
    long double var = s2 / n - (s / n) * (s / n);
    long double vb = brute_between(h, o.threshold);
    assert_true(fabs(o.eta - (double)(vb / var)) < 1e-9);
    long double n0 = 0, s0 = 0;
    for (int g = 0; g <= o.threshold; g++) {
        n0 += h[g];
        s0 += (long double)g * h[g];
    }
    assert_true(fabs(o.mean_dark - (double)(s0 / n0)) < 1e-9);
    assert_true(fabs(o.mean_bright - (double)((s - s0) / (n - n0))) < 1e-9);
    assert_true(fabs(o.weight_dark - (double)(n0 / n)) < 1e-12);
}

static void test_otsu_against_brute_force(void **state)
{
    (void)state;
    uint64_t r = 11;
    uint32_t h[256];
    int ties = 0, cases = 0;
    for (int k = 0; k < 300; k++, cases++) {
        memset(h, 0, sizeof h);
        int kind = k % 4;
        if (kind == 0) { /* uniform random counts */
            for (int g = 0; g < 256; g++)
                h[g] = (uint32_t)(1000 * scene_uniform(&r));
        } else if (kind == 1) { /* sparse */
            for (int j = 0; j < 1 + k % 7; j++)
                h[(int)(256 * scene_uniform(&r))] +=
                    1 + (uint32_t)(5000 * scene_uniform(&r));
        } else { /* two Gaussian classes, like a part on a field */
            double m0 = 20 + 100 * scene_uniform(&r),
                   m1 = m0 + 30 + 100 * scene_uniform(&r);
            double sd = 1 + 15 * scene_uniform(&r),
                   w = 0.02 + 0.9 * scene_uniform(&r);
            int npx = 20000 + (int)(1e6 * scene_uniform(&r));
            for (int i = 0; i < 4000; i++) {
                double g =
                    (scene_uniform(&r) < w ? m0 : m1) + sd * scene_normal(&r);
                int gi = (int)floor(g + 0.5);
                h[gi < 0 ? 0 : gi > 255 ? 255 : gi] += (uint32_t)(npx / 4000);
            }
        }
        check_otsu(h, &ties);
    }
    printf("Otsu: %d histograms, %d floating-point ties decided differently\n",
           cases, ties);
    assert_true(ties <= 2);

    /* hand values: two grey values, every t between them ties exactly; the
     * smallest is chosen, as numpy.argmax in skimage would */
    memset(h, 0, sizeof h);
    h[50] = 300;
    h[200] = 100;
    mb_otsu o;
    assert_int_equal(mb_outline_threshold(h, &o), 0);
    assert_int_equal(o.threshold, 50);
    assert_true(fabs(o.eta - 1.0) < 1e-12);
    assert_true(o.mean_dark == 50 && o.mean_bright == 200);
    assert_true(fabs(o.weight_dark - 0.75) < 1e-15);
    /* three values 0, 100, 101: the split between 0 and the pair wins */
    memset(h, 0, sizeof h);
    h[0] = h[100] = h[101] = 10;
    assert_int_equal(mb_outline_threshold(h, &o), 0);
    assert_int_equal(o.threshold, 0);
    /* one value, and nothing: no threshold */
    memset(h, 0, sizeof h);
    h[77] = 5;
    assert_int_equal(mb_outline_threshold(h, &o), MB_EDEGENERATE);
    assert_int_equal(o.threshold, 77);
    h[77] = 0;
    assert_int_equal(mb_outline_threshold(h, &o), MB_EDEGENERATE);
    assert_int_equal(mb_outline_threshold(NULL, &o), MB_EINVAL);
    assert_int_equal(mb_outline_threshold(h, NULL), MB_EINVAL);
}

/* ---- point budget ------------------------------------------------------ */

static void test_counts(void **state)
{
    (void)state;
    mb_layout l;
    const double two[2] = {3, 1};
    assert_int_equal(mb_outline_counts(two, 2, 8, 3, &l), 0);
    /* shares 6 and 2; 2 is below the minimum 3, the rest gets 5 */
    assert_int_equal(l.counts[0], 5);
    assert_int_equal(l.counts[1], 3);
    assert_int_equal(l.n_points, 8);
    const double three[3] = {1, 1, 1};
    assert_int_equal(mb_outline_counts(three, 3, 10, 3, &l), 0);
    /* 3.33 each: the remainder goes to the first */
    assert_int_equal(l.counts[0], 4);
    assert_int_equal(l.counts[1], 3);
    assert_int_equal(l.counts[2], 3);

    const double len[6] = {1300.5, 302.1, 125.7, 75.3, 42.9, 10.0};
    for (int budget = 96; budget <= 4096; budget = budget * 3 / 2) {
        assert_int_equal(mb_outline_counts(len, 6, budget, 16, &l), 0);
        assert_int_equal(mb_layout_check(&l), 0);
        assert_int_equal(l.n_points, budget);
        double free_len = 0;
        int free_pts = 0;
        for (int i = 0; i < 6; i++) {
            assert_true(l.counts[i] >= 16);
            if (i)
                assert_true(l.counts[i] <=
                            l.counts[i - 1]); /* longer, not fewer */
            if (l.counts[i] > 16) {
                free_len += len[i];
                free_pts += l.counts[i];
            }
        }
        /* outlines above the minimum share the rest in proportion */
        for (int i = 0; i < 6; i++)
            if (l.counts[i] > 16)
                assert_true(fabs(l.counts[i] - free_pts * len[i] / free_len) <
                            1.0);
    }
    assert_int_equal(mb_outline_counts(len, 6, 95, 16, &l), MB_ERANGE);
    assert_int_equal(mb_outline_counts(len, 6, 96, 2, &l), MB_EINVAL);
    const double zero[2] = {10, 0};
    assert_int_equal(mb_outline_counts(zero, 2, 96, 16, &l), MB_EINVAL);
    assert_int_equal(mb_outline_counts(len, 0, 96, 16, &l), MB_EINVAL);
    assert_int_equal(
        mb_outline_counts(len, 1, MB_MAX_OUTLINE_POINTS + 1, 16, &l),
        MB_ERANGE);
}

/* ---- rendered parts ---------------------------------------------------- */

enum { W = 480, H = 400 };

/* A shape at (u, v) in the frame of a part centred at (cx, cy) turned by
 * angle (clockwise on screen). */
static scene_shape placed(int type, double cx, double cy, double angle,
                          double u, double v, double a, double b, double r)
{
    scene_shape s = {type,
                     cx + cos(angle) * u - sin(angle) * v,
                     cy + sin(angle) * u + cos(angle) * v,
                     a,
                     b,
                     r,
                     angle};
    return s;
}

/* Flange-like plate: rounded rectangle 340 x 240 px, corner radius 30, a
 * rounded-rectangle opening and round holes of radius 20, 12 and 7. */
static void flange_scene(scene *sc, int front_lit, uint64_t seed)
{
    memset(sc, 0, sizeof *sc);
    const double cx = 241.3, cy = 199.6, ang = 0.3;
    sc->n_solid = 1;
    sc->solid[0] = placed(SCENE_RRECT, cx, cy, ang, 0, 0, 170, 120, 30);
    sc->n_hole = 4;
    sc->hole[0] = placed(SCENE_RRECT, cx, cy, ang, 0, 0, 50, 30, 10);
    sc->hole[1] = placed(SCENE_CIRCLE, cx, cy, ang, -110, 0, 20, 0, 0);
    sc->hole[2] = placed(SCENE_CIRCLE, cx, cy, ang, 110, 0, 12, 0, 0);
    sc->hole[3] = placed(SCENE_CIRCLE, cx, cy, ang, 60, 80, 7, 0, 0);
    sc->blur = 1;
    sc->noise = 2;
    sc->seed = seed;
    if (front_lit) { /* grey part on a darker textured belt */
        sc->part = 150;
        sc->back = 72;
        sc->texture = 4;
        sc->ramp = 0.1;
    } else {
        sc->part = 22;
        sc->back = 215;
        sc->ramp = -0.1;
    }
}

static void ring_scene(scene *sc, int front_lit, uint64_t seed)
{
    memset(sc, 0, sizeof *sc);
    sc->n_solid = 1;
    sc->solid[0] = (scene_shape){SCENE_CIRCLE, 240.4, 200.7, 150, 0, 0, 0};
    sc->n_hole = 1;
    sc->hole[0] = (scene_shape){SCENE_CIRCLE, 240.4, 200.7, 100, 0, 0, 0};
    sc->blur = 1;
    sc->noise = 2;
    sc->seed = seed;
    sc->part = front_lit ? 150 : 22;
    sc->back = front_lit ? 72 : 215;
    sc->texture = front_lit ? 4 : 0;
}

typedef struct {
    mb_image img;
    mb_outliner *o;
    mb_outline_result res;
    char err[MB_ERR_LEN];
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    if (!f || mb_image_alloc(W, H, &f->img) != 0)
        return -1;
    mb_outline_config cfg;
    mb_outline_config_default(&cfg);
    if (mb_outliner_create(W, H, &cfg, &f->o, f->err) != 0)
        return -1;
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    mb_outliner_close(f->o);
    mb_image_free(&f->img);
    free(f);
    return 0;
}

static double shoelace(const double *p, int n)
{
    double s = 0;
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        s += p[2 * i] * p[2 * j + 1] - p[2 * j] * p[2 * i + 1];
    }
    return 0.5 * s;
}

/* RMS distance of the points of outline i to the true outline of shape s
 * (s is a hole when hole is 1: the distance is the same). */
static double rms_to(const mb_outline_result *r, int i, const scene_shape *s,
                     double *worst)
{
    const double *p = r->points + 2 * mb_layout_first(&r->layout, i);
    double ss = 0;
    *worst = 0;
    for (int k = 0; k < r->layout.counts[i]; k++) {
        double d = fabs(scene_shape_distance(s, p[2 * k], p[2 * k + 1]));
        ss += d * d;
        if (d > *worst)
            *worst = d;
    }
    return sqrt(ss / r->layout.counts[i]);
}

/* Points of the outer rounded rectangle split into those on its straight
 * sides (at least 3 px from where the corner arcs begin) and on the arcs. */
static void rrect_split_rms(const mb_outline_result *r, const scene_shape *s,
                            double *straight, int *n_straight, double *arcs,
                            int *n_arcs)
{
    const double *p = r->points;
    double ss = 0, sa = 0;
    *n_straight = *n_arcs = 0;
    for (int k = 0; k < r->layout.counts[0]; k++) {
        double dx = p[2 * k] - s->cx, dy = p[2 * k + 1] - s->cy;
        double u = fabs(cos(s->angle) * dx + sin(s->angle) * dy);
        double v = fabs(-sin(s->angle) * dx + cos(s->angle) * dy);
        double d = scene_shape_distance(s, p[2 * k], p[2 * k + 1]);
        if (u < s->a - s->r - 3 || v < s->b - s->r - 3) {
            ss += d * d;
            (*n_straight)++;
        } else if (u > s->a - s->r && v > s->b - s->r) {
            sa += d * d;
            (*n_arcs)++;
        }
    }
    *straight = sqrt(ss / *n_straight);
    *arcs = sqrt(sa / *n_arcs);
}

/* Consecutive points are evenly spaced: every chord within tol px of the
 * arc spacing. The chord of a circle of radius >= 7 px at <= 3 px spacing
 * is shorter than the arc by less than 1 %; the rest is the measurement
 * moving points along their normals, which the caller's tol allows for
 * (about three times the RMS error). */
static void check_spacing(const mb_outline_result *r, double tol)
{
    for (int i = 0; i < r->layout.n_outlines; i++) {
        const double *p = r->points + 2 * mb_layout_first(&r->layout, i);
        int n = r->layout.counts[i];
        double worst = 0, sum = 0;
        for (int k = 0; k < n; k++) {
            int j = (k + 1) % n;
            double d = hypot(p[2 * j] - p[2 * k], p[2 * j + 1] - p[2 * k + 1]);
            sum += d;
            double dev = fabs(d - r->spacing[i]);
            if (dev > worst)
                worst = dev;
        }
        assert_true(fabs(r->spacing[i] * n - r->length[i]) < 1e-9 * sum);
        assert_true(fabs(sum - r->length[i]) < 1e-9 * sum);
        if (worst > tol + 0.01 * r->spacing[i])
            printf("outline %d: a chord is %.3f px off the spacing %.3f px\n",
                   i, worst, r->spacing[i]);
        assert_true(worst < tol + 0.01 * r->spacing[i]);
    }
}

/* On a circle the measurement moves points only radially, so the angles
 * of the points about the centre show the arc-length spacing itself. */
static double circle_spacing_error(const mb_outline_result *r, int i,
                                   const scene_shape *c)
{
    const double *p = r->points + 2 * mb_layout_first(&r->layout, i);
    int n = r->layout.counts[i];
    double worst = 0, step = 2 * M_PI / n;
    for (int k = 0; k < n; k++) {
        int j = (k + 1) % n;
        double a0 = atan2(p[2 * k + 1] - c->cy, p[2 * k] - c->cx);
        double a1 = atan2(p[2 * j + 1] - c->cy, p[2 * j] - c->cx);
        double d = remainder(a1 - a0, 2 * M_PI);
        /* holes run the other way round */
        double rel = fabs(fabs(d) / step - 1);
        if (rel > worst)
            worst = rel;
    }
    return worst;
}

static void run_flange(void **state, int front_lit)
{
    fixture *f = *state;
    scene sc;
    flange_scene(&sc, front_lit, front_lit ? 41 : 40);
    scene_render(&sc, &f->img);
    int rc = mb_outliner_run(f->o, &f->img, &f->res, f->err);
    if (rc)
        printf("run: %s\n", f->err);
    assert_int_equal(rc, 0);
    const mb_outline_result *r = &f->res;
    assert_int_equal(r->part_dark, !front_lit);
    assert_int_equal(r->layout.n_outlines, 5);
    assert_int_equal(mb_layout_check(&r->layout), 0);
    assert_int_equal(r->layout.n_points, 1024);
    assert_int_equal(r->candidates, 1);
    assert_true(r->runner_up_area == 0);
    assert_int_equal(r->holes_dropped, 0);
    assert_int_equal(r->unrefined, 0);
    assert_ptr_equal(r->outlines.xy, r->points);
    /* order: outer, then holes by decreasing area: opening, r 20, 12, 7 */
    const scene_shape *truth[5] = {&sc.solid[0], &sc.hole[0], &sc.hole[1],
                                   &sc.hole[2], &sc.hole[3]};
    const double true_area[5] = {340.0 * 240 - (4 - M_PI) * 900,
                                 100.0 * 60 - (4 - M_PI) * 100, M_PI * 400,
                                 M_PI * 144, M_PI * 49};
    const char *name[5] = {"outer", "opening", "hole r20", "hole r12",
                           "hole r7"};
    double bound = front_lit ? 0.08 : 0.04;
    for (int i = 0; i < 5; i++) {
        const double *p = r->points + 2 * mb_layout_first(&r->layout, i);
        double a = shoelace(p, r->layout.counts[i]);
        /* orientation: part on the right on screen; outer positive */
        assert_true(i == 0 ? a > 0 : a < 0);
        /* the polygon is short of the curve by (2 pi / n)^2 / 6 of the
         * area on a circle of n points; allow that and 0.5 % */
        double short_by = pow(2 * M_PI / r->layout.counts[i], 2) / 6;
        assert_true(fabs(fabs(a) - true_area[i]) <
                    (short_by + 0.005) * true_area[i]);
        assert_true(fabs(r->area[i] - fabs(a)) < 1e-9 * fabs(a));
        double worst, rms = rms_to(r, i, truth[i], &worst);
        printf("flange %s %-8s: %4d points, RMS %.4f px, max %.4f px\n",
               front_lit ? "front-lit" : "back-lit ", name[i],
               r->layout.counts[i], rms, worst);
        assert_true(rms < bound);
        assert_true(worst < 4 * bound);
        /* first point: last crossing of the ray from the centroid to +x */
        double cxh = truth[i]->cx;
        assert_true(p[0] > cxh);
        assert_true(fabs(p[1] - truth[i]->cy) < 0.5);
    }
    double st, arc;
    int nst, narc;
    rrect_split_rms(r, &sc.solid[0], &st, &nst, &arc, &narc);
    printf("flange %s outer straight sides: RMS %.4f px (%d points); corner "
           "arcs r 30: RMS %.4f "
           "px (%d points)\n",
           front_lit ? "front-lit" : "back-lit ", st, nst, arc, narc);
    printf("flange %s: Otsu t %d, eta %.3f, blur %.3f px, contrast %.1f\n",
           front_lit ? "front-lit" : "back-lit ", r->otsu.threshold,
           r->otsu.eta, r->blur, r->contrast);
    assert_true(st < bound && arc < bound);
    /* fitted blur: sqrt(1 + 1/12) for the optics plus the pixel footprint */
    assert_true(fabs(r->blur - sqrt(1 + 1.0 / 12)) < 0.1);
    check_spacing(r, 3 * bound);
}

static void test_flange_back_lit(void **state)
{
    run_flange(state, 0);
}

static void test_flange_front_lit(void **state)
{
    run_flange(state, 1);
}

static void test_ring(void **state)
{
    fixture *f = *state;
    for (int front = 0; front < 2; front++) {
        scene sc;
        ring_scene(&sc, front, 50 + front);
        scene_render(&sc, &f->img);
        assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), 0);
        const mb_outline_result *r = &f->res;
        assert_int_equal(r->layout.n_outlines, 2);
        assert_int_equal(r->part_dark, !front);
        /* lengths 2 pi 150 and 2 pi 100: points in proportion 3 : 2 */
        assert_true(abs(r->layout.counts[0] - 614) <= 1);
        assert_int_equal(r->layout.counts[0] + r->layout.counts[1], 1024);
        assert_true(fabs(r->length[0] - 2 * M_PI * 150) < 2);
        assert_true(fabs(r->length[1] - 2 * M_PI * 100) < 2);
        for (int i = 0; i < 2; i++) {
            const scene_shape *s = i ? &sc.hole[0] : &sc.solid[0];
            double worst, rms = rms_to(r, i, s, &worst);
            /* mean radius: the blur shift of a curved edge is corrected */
            const double *p = r->points + 2 * mb_layout_first(&r->layout, i);
            double mr = 0;
            for (int k = 0; k < r->layout.counts[i]; k++)
                mr += hypot(p[2 * k] - s->cx, p[2 * k + 1] - s->cy);
            mr /= r->layout.counts[i];
            printf("ring %s %s r %3.0f: RMS %.4f px, max %.4f px, mean radius "
                   "error %+.4f px\n",
                   front ? "front-lit" : "back-lit ", i ? "inner" : "outer",
                   s->a, rms, worst, mr - s->a);
            assert_true(rms < (front ? 0.08 : 0.04));
            assert_true(fabs(mr - s->a) < 0.02);
            /* first point at angle 0 from the centre */
            assert_true(fabs(p[0] - (s->cx + s->a)) < 0.1);
            assert_true(fabs(p[1] - s->cy) < 0.1);
            double sp = circle_spacing_error(r, i, s);
            printf("ring %s %s: angular spacing uniform to %.2f %%\n",
                   front ? "front-lit" : "back-lit ", i ? "inner" : "outer",
                   100 * sp);
            assert_true(sp < 0.02);
        }
        check_spacing(r, front ? 0.24 : 0.12);
    }
}

/* The same frame through a caller-built pyramid gives the same points; a
 * given layout resamples the same outlines; nothing is allocated per run. */
static void test_pyramid_resample_and_allocation(void **state)
{
    fixture *f = *state;
    scene sc;
    flange_scene(&sc, 0, 7);
    scene_render(&sc, &f->img);
    long before = mb_allocs();
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), 0);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), 0);
    assert_int_equal(mb_allocs(), before);

    double *copy = malloc(2 * sizeof(double) * (size_t)f->res.layout.n_points);
    assert_non_null(copy);
    memcpy(copy, f->res.points,
           2 * sizeof(double) * (size_t)f->res.layout.n_points);
    mb_layout found = f->res.layout;
    int run_threshold = f->res.otsu.threshold;
    mb_pyramid *pyr;
    assert_int_equal(mb_pyramid_create(W, H, 4, &pyr), 0);
    assert_int_equal(mb_pyramid_build(pyr, &f->img), 0);
    before = mb_allocs();
    assert_int_equal(mb_outliner_run_pyramid(f->o, pyr, &f->res, f->err), 0);
    assert_int_equal(mb_allocs(), before);
    assert_memory_equal(&f->res.layout, &found, sizeof found);
    assert_memory_equal(f->res.points, copy,
                        2 * sizeof(double) * (size_t)found.n_points);

    mb_layout want = {5, {200, 60, 40, 24, 16}, 340};
    before = mb_allocs();
    assert_int_equal(mb_outliner_resample(f->o, &want, &f->res, f->err), 0);
    assert_int_equal(mb_allocs(), before);
    assert_memory_equal(&f->res.layout, &want, sizeof want);
    const scene_shape *truth[5] = {&sc.solid[0], &sc.hole[0], &sc.hole[1],
                                   &sc.hole[2], &sc.hole[3]};
    for (int i = 0; i < 5; i++) {
        double worst, rms = rms_to(&f->res, i, truth[i], &worst);
        printf("resampled outline %d: %d points, RMS %.4f px, max %.4f px\n", i,
               want.counts[i], rms, worst);
        assert_true(rms < 0.05);
        assert_true(
            fabs(f->res.spacing[i] * want.counts[i] - f->res.length[i]) < 1e-9);
    }
    /* what the run found is kept */
    assert_int_equal(f->res.part_dark, 1);
    assert_int_equal(f->res.otsu.threshold, run_threshold);
    assert_int_equal(f->res.candidates, 1);
    mb_layout four = {4, {100, 60, 40, 24}, 224};
    assert_int_equal(mb_outliner_resample(f->o, &four, &f->res, f->err),
                     MB_ESIZE);
    mb_layout big = {5, {1000, 60, 40, 24, 16}, 1140};
    assert_int_equal(mb_outliner_resample(f->o, &big, &f->res, f->err),
                     MB_ESIZE);
    mb_layout bad = {5, {100, 60, 40, 24, 2}, 226};
    assert_int_equal(mb_outliner_resample(f->o, &bad, &f->res, f->err),
                     MB_EINVAL);
    mb_pyramid_close(pyr);
    free(copy);
}

static void fill(mb_image *img, int v)
{
    for (int y = 0; y < img->height; y++)
        memset(img->pixels + (size_t)y * img->stride, v, (size_t)img->width);
}

static void test_no_part(void **state)
{
    fixture *f = *state;
    /* one colour */
    fill(&f->img, 128);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_ENOPART);
    printf("one colour: %s\n", f->err);
    assert_int_equal(f->res.layout.n_outlines, 0);
    fill(&f->img, 0);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_ENOPART);
    /* plain field with noise, and an empty textured belt */
    scene sc;
    memset(&sc, 0, sizeof sc);
    sc.back = 215;
    sc.noise = 2;
    sc.seed = 3;
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_ENOPART);
    printf("noise only: %s\n", f->err);
    sc.back = 72;
    sc.texture = 4;
    sc.ramp = 0.1;
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_ENOPART);
    printf("belt only: %s\n", f->err);
    /* a two-level frame whose dark part is only specks (below min_blob_area) */
    fill(&f->img, 200);
    for (int k = 0; k < 20; k++) {
        int x = 20 + 20 * k, y = 30 + 15 * (k % 5);
        for (int j = 0; j < 3; j++)
            memset(f->img.pixels + (size_t)(y + j) * f->img.stride + x, 30, 3);
    }
    int rc = mb_outliner_run(f->o, &f->img, &f->res, f->err);
    printf("specks only: %s\n", f->err);
    assert_int_equal(rc, MB_ENOPART);
}

static void test_edge_small_and_two_parts(void **state)
{
    fixture *f = *state;
    scene sc;
    memset(&sc, 0, sizeof sc);
    sc.part = 22;
    sc.back = 215;
    sc.blur = 1;
    sc.noise = 2;
    sc.seed = 9;
    sc.n_solid = 1;
    /* cut by the left frame edge */
    sc.solid[0] = (scene_shape){SCENE_CIRCLE, 30, 200, 80, 0, 0, 0};
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), MB_EEDGE);
    printf("cut part: %s\n", f->err);
    assert_int_equal(f->res.layout.n_outlines, 0);
    assert_int_equal(f->res.box[0], 0);
    /* a cut part that is the largest wins over a smaller whole one */
    sc.n_solid = 2;
    sc.solid[1] = (scene_shape){SCENE_CIRCLE, 330, 200, 40, 0, 0, 0};
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), MB_EEDGE);
    /* too small a part: above the speck size, below min_part_area */
    sc.n_solid = 1;
    sc.solid[0] = (scene_shape){SCENE_CIRCLE, 240, 200, 8, 0, 0, 0};
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_EDEGENERATE);
    printf("small part: %s\n", f->err);
    /* two whole parts: the larger one is measured, the other counted */
    sc.n_solid = 2;
    sc.solid[0] = (scene_shape){SCENE_CIRCLE, 150.2, 200.3, 80, 0, 0, 0};
    sc.solid[1] = (scene_shape){SCENE_CIRCLE, 360.6, 190.1, 50, 0, 0, 0};
    scene_render(&sc, &f->img);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err), 0);
    assert_int_equal(f->res.candidates, 2);
    printf("two parts: measured area %.0f px^2, other %.0f px^2 (true %.0f, "
           "%.0f)\n",
           f->res.part_area, f->res.runner_up_area, M_PI * 6400, M_PI * 2500);
    assert_true(fabs(f->res.runner_up_area - M_PI * 2500) < 0.05 * M_PI * 2500);
    assert_true(fabs(f->res.part_area - M_PI * 6400) < 0.05 * M_PI * 6400);
    assert_int_equal(f->res.layout.n_outlines, 1);
    double worst, rms = rms_to(&f->res, 0, &sc.solid[0], &worst);
    assert_true(rms < 0.04);
}

/* 70 holes: the 63 largest are kept, 7 reported as dropped. Level 1 so
 * that holes of radius 6 px are seen. */
static void test_too_many_holes(void **state)
{
    (void)state;
    mb_image img;
    assert_int_equal(mb_image_alloc(W, H, &img), 0);
    scene sc;
    memset(&sc, 0, sizeof sc);
    sc.part = 22;
    sc.back = 215;
    sc.blur = 1;
    sc.noise = 2;
    sc.seed = 12;
    sc.n_solid = 1;
    sc.solid[0] = (scene_shape){SCENE_RRECT, 240, 200, 220, 180, 10, 0};
    for (int row = 0, n = 0; row < 7; row++)
        for (int col = 0; col < 10; col++, n++)
            sc.hole[sc.n_hole++] = (scene_shape){SCENE_CIRCLE,
                                                 60 + 40 * col + 0.3 * row,
                                                 60 + 45 * row,
                                                 5 + 0.1 * n,
                                                 0,
                                                 0,
                                                 0};
    scene_render(&sc, &img);
    mb_outline_config cfg;
    mb_outline_config_default(&cfg);
    cfg.level = 1;
    mb_outliner *o;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_outliner_create(W, H, &cfg, &o, err), 0);
    mb_outline_result res;
    int rc = mb_outliner_run(o, &img, &res, err);
    if (rc)
        printf("%s\n", err);
    assert_int_equal(rc, 0);
    assert_int_equal(res.layout.n_outlines, MB_MAX_OUTLINES);
    assert_int_equal(res.holes_dropped, 70 - (MB_MAX_OUTLINES - 1));
    for (int i = 2; i < res.layout.n_outlines; i++)
        assert_true(res.area[i] <= res.area[i - 1]);
    /* the holes left out are small ones: the choice is by pixel count at
     * level 1, which ranks holes 0.1 px apart in radius only roughly, so
     * every one left out must be among the 20 smallest (radius < 7 px) */
    int missing = 0;
    for (int h = 0; h < sc.n_hole; h++) {
        int found = 0;
        for (int i = 1; i < res.layout.n_outlines; i++) {
            const double *p = res.points + 2 * mb_layout_first(&res.layout, i);
            double mx = 0, my = 0;
            for (int k = 0; k < res.layout.counts[i]; k++) {
                mx += p[2 * k];
                my += p[2 * k + 1];
            }
            mx /= res.layout.counts[i];
            my /= res.layout.counts[i];
            found |= hypot(mx - sc.hole[h].cx, my - sc.hole[h].cy) < 1.0;
        }
        if (!found) {
            missing++;
            assert_true(h < 20);
        }
    }
    assert_int_equal(missing, 7);
    mb_outliner_close(o);
    mb_image_free(&img);
}

static void test_arguments(void **state)
{
    fixture *f = *state;
    mb_outline_config cfg;
    mb_outline_config_default(&cfg);
    mb_outliner *o = (mb_outliner *)&o;
    char err[MB_ERR_LEN];
    cfg.level = 7;
    assert_int_equal(mb_outliner_create(W, H, &cfg, &o, err), MB_EINVAL);
    assert_null(o);
    assert_non_null(strstr(err, "level"));
    mb_outline_config_default(&cfg);
    cfg.edge_across = 0.5;
    assert_int_equal(mb_outliner_create(W, H, &cfg, &o, err), MB_EINVAL);
    assert_non_null(strstr(err, "edge_across"));
    mb_outline_config_default(&cfg);
    cfg.min_points = 2;
    assert_int_equal(mb_outliner_create(W, H, &cfg, &o, err), MB_EINVAL);
    assert_non_null(strstr(err, "min_points"));
    mb_outline_config_default(&cfg);
    cfg.min_hole_area = NAN;
    assert_int_equal(mb_outliner_create(W, H, &cfg, &o, err), MB_EINVAL);
    assert_int_equal(mb_outliner_create(0, H, NULL, &o, err), MB_EINVAL);
    assert_int_equal(mb_outliner_create(W, H, NULL, NULL, err), MB_EINVAL);
    /* NULL config: the defaults */
    assert_int_equal(mb_outliner_create(64, 48, NULL, &o, NULL), 0);
    mb_outliner_close(o);
    mb_outliner_close(NULL);

    mb_image small;
    assert_int_equal(mb_image_alloc(100, 100, &small), 0);
    assert_int_equal(mb_outliner_run(f->o, &small, &f->res, f->err), MB_ESIZE);
    assert_non_null(strstr(f->err, "100 x 100"));
    assert_int_equal(mb_outliner_run(f->o, NULL, &f->res, f->err), MB_EINVAL);
    assert_int_equal(mb_outliner_run(NULL, &small, &f->res, f->err), MB_EINVAL);
    assert_int_equal(mb_outliner_run(f->o, &small, NULL, f->err), MB_EINVAL);
    /* a pyramid with too few levels for the working level 2 */
    mb_pyramid *pyr;
    assert_int_equal(mb_pyramid_create(W, H, 2, &pyr), 0);
    assert_int_equal(mb_pyramid_build(pyr, &f->img), 0);
    assert_int_equal(mb_outliner_run_pyramid(f->o, pyr, &f->res, f->err),
                     MB_EINVAL);
    mb_pyramid_close(pyr);
    /* no resampling after a failed run */
    fill(&f->img, 9);
    assert_int_equal(mb_outliner_run(f->o, &f->img, &f->res, f->err),
                     MB_ENOPART);
    mb_layout l = {1, {16}, 16};
    assert_int_equal(mb_outliner_resample(f->o, &l, &f->res, f->err),
                     MB_EINVAL);
    assert_true(strcmp(mb_strerror(MB_EEDGE), "unknown error code") != 0);
    mb_image_free(&small);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_otsu_against_brute_force),
        cmocka_unit_test(test_counts),
        cmocka_unit_test_setup_teardown(test_flange_back_lit, setup, teardown),
        cmocka_unit_test_setup_teardown(test_flange_front_lit, setup, teardown),
        cmocka_unit_test_setup_teardown(test_ring, setup, teardown),
        cmocka_unit_test_setup_teardown(test_pyramid_resample_and_allocation,
                                        setup, teardown),
        cmocka_unit_test_setup_teardown(test_no_part, setup, teardown),
        cmocka_unit_test_setup_teardown(test_edge_small_and_two_parts, setup,
                                        teardown),
        cmocka_unit_test(test_too_many_holes),
        cmocka_unit_test_setup_teardown(test_arguments, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
