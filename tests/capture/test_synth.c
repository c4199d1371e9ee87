/*
 * tests/capture/test_synth.c - the synthetic production line against its
 * own ground truth: determinism, the rendered area and edge position
 * against the truth polygons, every family and defect type, defect sizes
 * measured on the geometry, parts inside the frame, empty frames, noise.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "render.h"
#include "synth.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define FW 640
#define FH 512

/* main dimension of each family, from synth.h (WRONG_SIZE's size) */
static const double main_mm[MB_SYNTH_N_FAMILIES] = {40.0, 34.0, 42.0, 22.0};
/* outlines of each family: outer edge plus holes */
static const int n_outlines[MB_SYNTH_N_FAMILIES] = {2, 6, 1, 1};

static mb_synth *open_gen(mb_synth_family f, mb_synth_config *cfg_out,
                          void (*tweak)(mb_synth_config *))
{
    mb_synth_config c;
    mb_synth_config_default(&c, f);
    c.width = FW;
    c.height = FH;
    if (tweak)
        tweak(&c);
    mb_synth *g = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_synth_open(&c, &g, err);
    if (rc < 0)
        fail_msg("mb_synth_open: %s", err);
    if (cfg_out)
        *cfg_out = c;
    return g;
}

static void clean(mb_synth_config *c)
{
    c->noise_sigma = 0;
    c->blur_sigma = 0;
    c->illumination = 0;
}

/* A copy of a truth's outlines (the generator's buffer is reused). */
typedef struct {
    int n_outlines, counts[MB_MAX_OUTLINES], n;
    double *xy;
} outlines;

static void copy_outlines(const mb_synth_truth *t, outlines *o, int to_mm)
{
    o->n_outlines = t->outlines.n_outlines;
    o->n = 0;
    for (int k = 0; k < o->n_outlines; k++) {
        o->counts[k] = t->outlines.counts[k];
        o->n += o->counts[k];
    }
    o->xy = malloc(sizeof(double) * 2 * (size_t)(o->n > 0 ? o->n : 1));
    assert_non_null(o->xy);
    double c = cos(t->pose.angle), s = sin(t->pose.angle);
    for (int i = 0; i < o->n; i++) {
        double x = t->outlines.xy[2 * i], y = t->outlines.xy[2 * i + 1];
        if (to_mm) { /* inverse pose: image px -> part frame mm */
            double dx = (x - t->pose.tx) / t->pose.scale;
            double dy = (y - t->pose.ty) / t->pose.scale;
            x = c * dx + s * dy;
            y = -s * dx + c * dy;
        }
        o->xy[2 * i] = x;
        o->xy[2 * i + 1] = y;
    }
}

static const double *outline_at(const outlines *o, int k)
{
    int f = 0;
    for (int i = 0; i < k; i++)
        f += o->counts[i];
    return o->xy + 2 * f;
}

static double total_area(const outlines *o)
{
    double a = 0;
    for (int k = 0; k < o->n_outlines; k++)
        a += mb_polygon_area(outline_at(o, k), o->counts[k]);
    return a;
}

static double dist_polyline(const double *b, int nb, double px, double py)
{
    double best = INFINITY;
    for (int j = 0; j < nb; j++) {
        int k = (j + 1) % nb;
        double ax = b[2 * j], ay = b[2 * j + 1], dx = b[2 * k] - ax,
               dy = b[2 * k + 1] - ay, l2 = dx * dx + dy * dy;
        double t = l2 > 0 ? ((px - ax) * dx + (py - ay) * dy) / l2 : 0;
        t = t < 0 ? 0 : (t > 1 ? 1 : t);
        double ex = ax + t * dx - px, ey = ay + t * dy - py;
        best = fmin(best, ex * ex + ey * ey);
    }
    return sqrt(best);
}

/* Largest distance of a's points from b's polylines, outline by outline;
 *wx, *wy get the point. */
static double max_dev(const outlines *a, const outlines *b, double *wx,
                      double *wy)
{
    double worst = 0;
    for (int k = 0; k < a->n_outlines && k < b->n_outlines; k++) {
        const double *pa = outline_at(a, k), *pb = outline_at(b, k);
        for (int i = 0; i < a->counts[k]; i++) {
            double d =
                dist_polyline(pb, b->counts[k], pa[2 * i], pa[2 * i + 1]);
            if (d > worst) {
                worst = d;
                *wx = pa[2 * i];
                *wy = pa[2 * i + 1];
            }
        }
    }
    return worst;
}

static double bilinear(const mb_image *im, double x, double y)
{
    int x0 = (int)floor(x), y0 = (int)floor(y);
    double fx = x - x0, fy = y - y0;
    const uint8_t *p = im->pixels + (size_t)y0 * im->stride + x0;
    return (1 - fy) * ((1 - fx) * p[0] + fx * p[1]) +
           fy * ((1 - fx) * p[im->stride] + fx * p[im->stride + 1]);
}

/* ---- tests */

static void test_names(void **state)
{
    (void)state;
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++)
        assert_int_equal(mb_synth_family_from_name(mb_synth_family_name(f)), f);
    for (int d = 0; d < MB_SYNTH_N_DEFECTS; d++)
        assert_int_equal(mb_synth_defect_from_name(mb_synth_defect_name(d)), d);
    assert_int_equal(mb_synth_lighting_from_name("front"), MB_SYNTH_FRONTLIT);
    assert_int_equal(mb_synth_family_from_name("gasket"), MB_EINVAL);
    assert_int_equal(mb_synth_defect_from_name(NULL), MB_EINVAL);
    assert_string_equal(mb_synth_family_name(9), "?");
    assert_string_equal(mb_synth_part_number(MB_SYNTH_FLANGE), "FG-3426");
}

static void test_bad_config(void **state)
{
    (void)state;
    mb_synth_config c;
    mb_synth *g = (mb_synth *)&c;
    char err[MB_ERR_LEN];
    mb_synth_config_default(&c, MB_SYNTH_RING);
    c.noise_sigma = -1;
    assert_int_equal(mb_synth_open(&c, &g, err), MB_EINVAL);
    assert_null(g);
    assert_non_null(strstr(err, "noise"));
    mb_synth_config_default(&c, (mb_synth_family)7);
    assert_int_equal(mb_synth_open(&c, &g, err), MB_EINVAL);
    mb_synth_config_default(&c, MB_SYNTH_RING);
    c.width = c.height = 300; /* a 40 mm ring at 0.1 mm/px does not fit */
    assert_int_equal(mb_synth_open(&c, &g, err), MB_ERANGE);
    assert_non_null(strstr(err, "300x300"));
    mb_synth_config_default(&c, MB_SYNTH_RING);
    c.mm_per_px = 0.005; /* outlines of 25000 points */
    assert_int_equal(mb_synth_open(&c, &g, err), MB_ERANGE);
    mb_synth_config_default(&c, MB_SYNTH_HOSE);
    c.defect_rate = 0.5;
    c.defect_mask = 0;
    assert_int_equal(mb_synth_open(&c, &g, err), MB_EINVAL);
    mb_synth_close(NULL);

    g = open_gen(MB_SYNTH_HOSE, NULL, NULL);
    mb_image small, frame;
    assert_int_equal(mb_image_alloc(FW - 1, FH, &small), 0);
    assert_int_equal(mb_image_alloc(FW, FH, &frame), 0);
    assert_int_equal(mb_synth_make(g, 0, 0, 0, &small, NULL), MB_ESIZE);
    assert_int_equal(mb_synth_make(g, 0, 0, MB_SYNTH_N_DEFECTS, &frame, NULL),
                     MB_EINVAL);
    assert_int_equal(mb_synth_make(g, 0, -1, 0, &frame, NULL), MB_EINVAL);
    assert_int_equal(mb_synth_make(g, 0, 0, 0, &frame, NULL), 0);
    mb_image_free(&small);
    mb_image_free(&frame);
    mb_synth_close(g);
}

static void rate_half(mb_synth_config *c)
{
    c->defect_rate = 0.5;
}

static void other_seed(mb_synth_config *c)
{
    c->defect_rate = 0.5;
    c->seed = 2;
}

static int frames_equal(const mb_image *a, const mb_image *b)
{
    for (int y = 0; y < a->height; y++)
        if (memcmp(a->pixels + (size_t)y * a->stride,
                   b->pixels + (size_t)y * b->stride, (size_t)a->width))
            return 0;
    return 1;
}

/* Same seed: the same bytes and truth from two generators, whatever the
   order parts are made in; another seed: other frames and parts. */
static void test_determinism(void **state)
{
    (void)state;
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++) {
        mb_synth *a = open_gen(f, NULL, rate_half),
                 *b = open_gen(f, NULL, rate_half);
        mb_synth *c = open_gen(f, NULL, other_seed);
        mb_image fa, fb, fc;
        assert_int_equal(mb_image_alloc(FW, FH, &fa), 0);
        assert_int_equal(mb_image_alloc(FW, FH, &fb), 0);
        assert_int_equal(mb_image_alloc(FW, FH, &fc), 0);
        mb_synth_truth ta, tb, tc;
        assert_int_equal(mb_synth_make(b, 9, 0, MB_SYNTH_DRAW, &fb, &tb), 0);
        for (int i = 0; i < 6; i++) {
            assert_int_equal(mb_synth_next(a, &fa, &ta), 0);
            assert_int_equal(
                mb_synth_make(b, (uint64_t)i, 0, MB_SYNTH_DRAW, &fb, &tb), 0);
            assert_int_equal(
                mb_synth_make(c, (uint64_t)i, 0, MB_SYNTH_DRAW, &fc, &tc), 0);
            assert_true(frames_equal(&fa, &fb));
            assert_false(frames_equal(&fa, &fc));
            assert_int_equal(ta.defect.type, tb.defect.type);
            assert_int_equal(ta.outlines.n_outlines, tb.outlines.n_outlines);
            int n = 0;
            for (int k = 0; k < ta.outlines.n_outlines; k++) {
                assert_int_equal(ta.outlines.counts[k], tb.outlines.counts[k]);
                n += ta.outlines.counts[k];
            }
            assert_memory_equal(ta.outlines.xy, tb.outlines.xy,
                                sizeof(double) * 2 * (size_t)n);
            assert_memory_equal(&ta.pose, &tb.pose, sizeof ta.pose);
            assert_memory_equal(&ta.defect, &tb.defect, sizeof ta.defect);
        }
        /* a good part with another seed is another part */
        assert_int_equal(mb_synth_make(a, 3, 0, MB_SYNTH_NONE, &fa, &ta), 0);
        outlines oa;
        copy_outlines(&ta, &oa, 1);
        assert_int_equal(mb_synth_make(c, 3, 0, MB_SYNTH_NONE, &fc, &tc), 0);
        outlines oc;
        copy_outlines(&tc, &oc, 1);
        double wx, wy;
        assert_true(max_dev(&oa, &oc, &wx, &wy) > 0.01);
        free(oc.xy);
        /* the same part imaged again: same shape, another pose */
        double angle0 = ta.pose.angle;
        assert_int_equal(mb_synth_make(a, 3, 1, MB_SYNTH_NONE, &fa, &ta), 0);
        outlines o2;
        copy_outlines(&ta, &o2, 1);
        assert_true(max_dev(&oa, &o2, &wx, &wy) < 1e-6);
        assert_true(fabs(ta.pose.angle - angle0) > 1e-6);
        free(oa.xy);
        free(o2.xy);
        mb_image_free(&fa);
        mb_image_free(&fb);
        mb_image_free(&fc);
        mb_synth_close(a);
        mb_synth_close(b);
        mb_synth_close(c);
    }
}

/*
 * Ground truth against the image, on frames without noise and uneven
 * illumination. Coverage recovered from the grey levels,
 *     a = (I - B) / (P - B)
 * (B the background: the bright field, or the belt with its texture taken
 * from an empty frame of the same part index and shot, which has the same
 * belt position), summed over the frame, equals the area of the truth
 * polygons; and the coverage interpolated at the truth outline points is
 * one half on average (the edge is where the truth says). Unblurred and
 * blurred (the blur keeps the sum; on curved edges it shifts the half-way
 * level slightly, hence the looser bound there).
 */
static void check_truth_vs_image(mb_synth_family f, mb_synth_lighting light,
                                 double blur, double *area_err, double *mid_err)
{
    mb_synth_config c;
    mb_synth_config_default(&c, f);
    c.width = FW;
    c.height = FH;
    clean(&c);
    c.lighting = light;
    c.blur_sigma = blur;
    mb_synth *g = NULL;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_synth_open(&c, &g, err), 0);
    mb_image im, bg;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    assert_int_equal(mb_image_alloc(FW, FH, &bg), 0);
    *area_err = *mid_err = 0;
    for (int i = 0; i < 6; i++) {
        mb_synth_truth t;
        assert_int_equal(
            mb_synth_make(g, (uint64_t)i, 0, MB_SYNTH_EMPTY, &bg, NULL), 0);
        assert_int_equal(
            mb_synth_make(g, (uint64_t)i, 0, MB_SYNTH_NONE, &im, &t), 0);
        double P = t.grey_part, sum = 0;
        for (int y = 0; y < FH; y++)
            for (int x = 0; x < FW; x++) {
                double B = bg.pixels[y * bg.stride + x];
                sum += (im.pixels[y * im.stride + x] - B) / (P - B);
            }
        outlines o;
        copy_outlines(&t, &o, 0);
        double area = total_area(&o);
        *area_err = fmax(*area_err, fabs(sum - area) / area);
        double mid = 0;
        for (int k = 0; k < o.n; k++) {
            double x = o.xy[2 * k], y = o.xy[2 * k + 1];
            double I = bilinear(&im, x, y), B = bilinear(&bg, x, y);
            mid += (I - B) / (P - B);
        }
        mid /= o.n;
        *mid_err = fmax(*mid_err, fabs(mid - 0.5));
        free(o.xy);
    }
    mb_image_free(&im);
    mb_image_free(&bg);
    mb_synth_close(g);
}

static void test_truth_vs_image(void **state)
{
    (void)state;
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++)
        for (int light = 0; light < 2; light++)
            for (int b = 0; b < 2; b++) {
                double ae, me;
                check_truth_vs_image(f, light, b ? 1.0 : 0.0, &ae, &me);
                printf(
                    "%-8s %s-lit blur %d: coverage sum vs truth area %.5f %%, "
                    "mean coverage on the truth outline 0.5 %+.4f\n",
                    mb_synth_family_name(f), mb_synth_lighting_name(light), b,
                    100 * ae, me);
                /* 0.05 %: 8-bit rounding of the edge pixels (a shift of
                   the whole outline by 0.05 px changes the area by more) */
                assert_true(ae < 5e-4);
                assert_true(me < (b ? 0.02 : 0.01));
            }
}

/* Every family and defect type renders, with the flags and geometry its
   type promises. */
static void test_all_types(void **state)
{
    (void)state;
    mb_image im;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++) {
        mb_synth *g = open_gen(f, NULL, NULL);
        for (int d = 0; d < MB_SYNTH_N_DEFECTS; d++)
            for (int i = 0; i < 4; i++) {
                mb_synth_truth t;
                int rc =
                    mb_synth_make(g, (uint64_t)(100 + 7 * i), 0, d, &im, &t);
                if (rc < 0)
                    fail_msg("%s %s part %d: %s", mb_synth_family_name(f),
                             mb_synth_defect_name(d), i, mb_strerror(rc));
                assert_int_equal(t.defect.type, d);
                assert_string_equal(t.part_number, mb_synth_part_number(f));
                if (d == MB_SYNTH_EMPTY) {
                    assert_int_equal(t.present, 0);
                    assert_int_equal(t.outlines.n_outlines, 0);
                    assert_int_equal(t.good, 0);
                    continue;
                }
                assert_int_equal(t.present, 1);
                assert_int_equal(t.good, d == MB_SYNTH_NONE);
                assert_int_equal(t.in_view, d != MB_SYNTH_CUT);
                int want = n_outlines[f];
                if (d == MB_SYNTH_WRONG_VARIANT && f == MB_SYNTH_FLANGE &&
                    t.defect.outline < 0)
                    want--; /* a bolt hole missing */
                assert_int_equal(t.outlines.n_outlines, want);
                const double *xy = t.outlines.xy;
                int outside = 0;
                for (int k = 0; k < t.outlines.n_outlines; k++) {
                    double a = mb_polygon_area(xy, t.outlines.counts[k]);
                    assert_true(k == 0 ? a > 0 : a < 0);
                    for (int p = 0; p < t.outlines.counts[k]; p++, xy += 2)
                        outside += xy[0] < 0 || xy[0] > FW - 1 || xy[1] < 0 ||
                                   xy[1] > FH - 1;
                }
                assert_int_equal(outside > 0, d == MB_SYNTH_CUT);
                if (d == MB_SYNTH_NONE)
                    assert_true(t.defect.size_mm == 0);
                else
                    assert_true(t.defect.size_mm > 0.1);
            }
        mb_synth_close(g);
    }
    mb_image_free(&im);
}

/*
 * Defect sizes against the geometry: the same part index made good and
 * with a defect, both taken back to the part frame (mm) through their
 * poses; the largest distance of the defective outline from the good one
 * must equal the recorded size (local defects, wrong variant), bound it
 * (deformation: the size is measured from the edge of the good range, so
 * it is at most the distance from this good part), or follow from the
 * area (wrong size). Local defects must sit where recorded.
 */
static void test_defect_sizes(void **state)
{
    (void)state;
    static const int types[] = {MB_SYNTH_NICK,          MB_SYNTH_FLASH,
                                MB_SYNTH_TEAR,          MB_SYNTH_MISSING,
                                MB_SYNTH_DEFORM,        MB_SYNTH_WRONG_SIZE,
                                MB_SYNTH_WRONG_VARIANT, MB_SYNTH_CONTAMINATION};
    mb_image im;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    double worst_local = 0;
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++) {
        mb_synth *g = open_gen(f, NULL, clean);
        for (size_t ti = 0; ti < sizeof types / sizeof types[0]; ti++)
            for (int i = 0; i < 3; i++) {
                int d = types[ti];
                uint64_t index = (uint64_t)(20 + i);
                mb_synth_truth t;
                assert_int_equal(
                    mb_synth_make(g, index, 0, MB_SYNTH_NONE, &im, &t), 0);
                outlines good, bad;
                copy_outlines(&t, &good, 1);
                assert_int_equal(mb_synth_make(g, index, 0, d, &im, &t), 0);
                copy_outlines(&t, &bad, 1);
                double wx = 0, wy = 0, dev = max_dev(&bad, &good, &wx, &wy);
                double size = t.defect.size_mm;
                const char *fn = mb_synth_family_name(f),
                           *dn = mb_synth_defect_name(d);
                if (d <= MB_SYNTH_MISSING) {
                    worst_local = fmax(worst_local, fabs(dev - size));
                    if (fabs(dev - size) > 0.01 + 0.01 * size)
                        fail_msg("%s %s: recorded %.4f mm, geometry %.4f mm",
                                 fn, dn, size, dev);
                    /* located on the good outline, near the deviation */
                    double c = cos(t.pose.angle), s = sin(t.pose.angle);
                    double dx = (t.defect.x - t.pose.tx) / t.pose.scale;
                    double dy = (t.defect.y - t.pose.ty) / t.pose.scale;
                    double lx = c * dx + s * dy, ly = -s * dx + c * dy;
                    int k = t.defect.outline;
                    assert_true(k >= 0 && k < good.n_outlines);
                    assert_true(dist_polyline(outline_at(&good, k),
                                              good.counts[k], lx, ly) < 0.01);
                    assert_true(hypot(wx - lx, wy - ly) <
                                0.5 * t.defect.extent_mm + size + 0.05);
                    /* into the material or out of it */
                    double da = total_area(&bad) - total_area(&good);
                    assert_true(d == MB_SYNTH_FLASH ? da > 0 : da < 0);
                } else if (d == MB_SYNTH_DEFORM) {
                    if (!(size > 0.1 && size <= dev + 0.01))
                        fail_msg("%s deform: recorded %.4f mm, %.4f mm from "
                                 "this part",
                                 fn, size, dev);
                } else if (d == MB_SYNTH_WRONG_SIZE) {
                    double r = sqrt(total_area(&bad) / total_area(&good));
                    double want = fabs(r - 1) * main_mm[f];
                    if (fabs(want - size) > 0.01 * size + 0.005)
                        fail_msg(
                            "%s size: recorded %.4f mm, from the area %.4f mm",
                            fn, size, want);
                } else if (d == MB_SYNTH_WRONG_VARIANT) {
                    if (bad.n_outlines == good.n_outlines) {
                        if (fabs(dev - size) > 0.01 + 0.01 * size)
                            fail_msg("%s variant: recorded %.4f mm, geometry "
                                     "%.4f mm",
                                     fn, size, dev);
                    } else { /* a bolt hole missing: where recorded, its size */
                        assert_int_equal(bad.n_outlines + 1, good.n_outlines);
                        double c = cos(t.pose.angle), s = sin(t.pose.angle);
                        double dx = (t.defect.x - t.pose.tx) / t.pose.scale;
                        double dy = (t.defect.y - t.pose.ty) / t.pose.scale;
                        double lx = c * dx + s * dy, ly = -s * dx + c * dy;
                        int hit = 0;
                        for (int k = 2; k < good.n_outlines; k++) {
                            const double *h = outline_at(&good, k);
                            double hx = 0, hy = 0;
                            for (int p = 0; p < good.counts[k]; p++) {
                                hx += h[2 * p] / good.counts[k];
                                hy += h[2 * p + 1] / good.counts[k];
                            }
                            double diam =
                                2 *
                                sqrt(fabs(mb_polygon_area(h, good.counts[k])) /
                                     M_PI);
                            if (hypot(hx - lx, hy - ly) < 0.01 &&
                                fabs(diam - size) < 0.005)
                                hit++;
                        }
                        assert_int_equal(hit, 1);
                    }
                } else { /* contamination: the part itself is unchanged */
                    assert_true(dev < 1e-6);
                    assert_true(t.defect.outline >= 0);
                }
                free(good.xy);
                free(bad.xy);
            }
        mb_synth_close(g);
    }
    printf("local defects: recorded size vs geometry, worst %.5f mm\n",
           worst_local);
    mb_image_free(&im);
}

/* Contamination shows: on a clean back-lit frame the dark area exceeds the
   part's own area, and the frame is dark next to the recorded spot. */
static void test_contamination_visible(void **state)
{
    (void)state;
    mb_image im;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++) {
        mb_synth *g = open_gen(f, NULL, clean);
        for (int i = 0; i < 4; i++) {
            mb_synth_truth t;
            assert_int_equal(mb_synth_make(g, (uint64_t)i, 0,
                                           MB_SYNTH_CONTAMINATION, &im, &t),
                             0);
            double sum = 0, B = t.grey_background, P = t.grey_part;
            for (int y = 0; y < FH; y++)
                for (int x = 0; x < FW; x++)
                    sum += (im.pixels[y * im.stride + x] - B) / (P - B);
            outlines o;
            copy_outlines(&t, &o, 0);
            double extra = sum - total_area(&o);
            free(o.xy);
            /* the smallest contaminant (a 0.15 mm fibre reaching 1.2 mm out,
               or a blob of 0.5 mm) adds well over 5 px^2 */
            if (extra < 5)
                fail_msg("%s contamination of %.2f mm adds only %.1f px^2",
                         mb_synth_family_name(f), t.defect.size_mm, extra);
        }
        mb_synth_close(g);
    }
    mb_image_free(&im);
}

static void rate_03(mb_synth_config *c)
{
    c->defect_rate = 0.3;
    c->noise_sigma = 0;
}

/* Many parts: the defect rate holds, drawn types are in the mask, every
   part is inside the frame with its margin, and the frame border of a
   frame with a part is exactly the empty frame's border. */
static void test_line(void **state)
{
    (void)state;
    mb_synth_config c;
    mb_synth *g = open_gen(MB_SYNTH_FLANGE, &c, rate_03);
    mb_image im, bg;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    assert_int_equal(mb_image_alloc(FW, FH, &bg), 0);
    int n = 400, bad = 0, count[MB_SYNTH_N_DEFECTS] = {0};
    double m = 3 * c.blur_sigma + 2;
    for (int i = 0; i < n; i++) {
        mb_synth_truth t;
        assert_int_equal(mb_synth_next(g, &im, &t), 0);
        assert_int_equal(t.index, (uint64_t)i);
        count[t.defect.type]++;
        bad += t.defect.type != MB_SYNTH_NONE;
        assert_true(t.defect.type != MB_SYNTH_CUT);
        if (!t.present)
            continue;
        assert_int_equal(t.in_view, 1);
        int np = 0;
        for (int k = 0; k < t.outlines.n_outlines; k++)
            np += t.outlines.counts[k];
        for (int p = 0; p < np; p++) {
            double x = t.outlines.xy[2 * p], y = t.outlines.xy[2 * p + 1];
            assert_true(x >= m && x <= FW - 1 - m && y >= m && y <= FH - 1 - m);
        }
        if (i % 10 == 0) {
            assert_int_equal(
                mb_synth_make(g, (uint64_t)i, 0, MB_SYNTH_EMPTY, &bg, NULL), 0);
            for (int x = 0; x < FW; x++) {
                assert_int_equal(im.pixels[x], bg.pixels[x]);
                assert_int_equal(im.pixels[(FH - 1) * im.stride + x],
                                 bg.pixels[(FH - 1) * bg.stride + x]);
            }
            for (int y = 0; y < FH; y++) {
                assert_int_equal(im.pixels[y * im.stride],
                                 bg.pixels[y * bg.stride]);
                assert_int_equal(im.pixels[y * im.stride + FW - 1],
                                 bg.pixels[y * bg.stride + FW - 1]);
            }
        }
    }
    /* binomial: 0.3 +- 4 standard deviations (0.023) */
    double rate = (double)bad / n;
    printf("defect rate 0.3 asked, %.3f drawn; per type:", rate);
    for (int d = 1; d < MB_SYNTH_N_DEFECTS; d++)
        printf(" %s %d", mb_synth_defect_name(d), count[d]);
    printf("\n");
    assert_true(fabs(rate - 0.3) < 4 * sqrt(0.3 * 0.7 / n));
    for (int d = 1; d < MB_SYNTH_CUT; d++)
        assert_true(count[d] > 0);
    mb_image_free(&im);
    mb_image_free(&bg);
    mb_synth_close(g);
}

static void flat_noisy(mb_synth_config *c)
{
    c->illumination = 0;
}

/* An empty frame: the field at its level, noise of the asked sigma; noise
   free it is exactly the field. Also: uneven illumination darkens the
   corners by about the asked fraction. */
static void test_empty_and_noise(void **state)
{
    (void)state;
    mb_synth_config c;
    mb_synth *g = open_gen(MB_SYNTH_RING, &c, flat_noisy);
    mb_image im;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    mb_synth_truth t;
    assert_int_equal(mb_synth_make(g, 5, 0, MB_SYNTH_EMPTY, &im, &t), 0);
    double s = 0, ss = 0;
    for (int y = 0; y < FH; y++)
        for (int x = 0; x < FW; x++) {
            double v = im.pixels[y * im.stride + x] - t.grey_background;
            s += v;
            ss += v * v;
        }
    double mean = s / (FW * FH), sd = sqrt(ss / (FW * FH) - mean * mean);
    printf("empty frame: mean offset %.4f, noise sd %.4f (asked %.1f; rounding "
           "adds "
           "1/12 in variance)\n",
           mean, sd, c.noise_sigma);
    assert_true(fabs(mean) < 0.02);
    assert_true(fabs(sd - sqrt(c.noise_sigma * c.noise_sigma + 1.0 / 12)) <
                0.03);
    mb_synth_close(g);

    g = open_gen(MB_SYNTH_RING, &c, clean);
    assert_int_equal(mb_synth_make(g, 5, 0, MB_SYNTH_EMPTY, &im, &t), 0);
    for (int y = 0; y < FH; y++)
        for (int x = 0; x < FW; x++)
            assert_int_equal(im.pixels[y * im.stride + x], 215);
    mb_synth_close(g);

    g = open_gen(MB_SYNTH_RING, &c, NULL); /* default: 0.12 darker corners */
    assert_int_equal(mb_synth_make(g, 5, 0, MB_SYNTH_EMPTY, &im, &t), 0);
    /* 5 x 5 blocks: the centre, and each corner 2..6 px in */
    double corners = 0, centre = 0;
    int cx[4] = {2, FW - 7, 2, FW - 7}, cy[4] = {2, 2, FH - 7, FH - 7};
    for (int dy = 0; dy < 5; dy++)
        for (int dx = 0; dx < 5; dx++) {
            centre +=
                im.pixels[(FH / 2 - 2 + dy) * im.stride + FW / 2 - 2 + dx];
            for (int k = 0; k < 4; k++)
                corners += im.pixels[(cy[k] + dy) * im.stride + cx[k] + dx];
        }
    double dark = 1 - (corners / 4) / centre;
    printf("uneven illumination: corners %.3f darker than the centre (asked "
           "%.2f)\n",
           dark, c.illumination);
    assert_true(fabs(dark - c.illumination) < 0.02);
    mb_image_free(&im);
    mb_synth_close(g);
}

static void nominal(mb_synth_config *c)
{
    c->variation = 0;
}

/* Variation 0: every part is the nominal part. Variation 1: sizes spread
   with the family's standard deviation (ring: 0.4 %) and stay within
   3 standard deviations. */
static void test_variation(void **state)
{
    (void)state;
    mb_image im;
    assert_int_equal(mb_image_alloc(FW, FH, &im), 0);
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++) {
        mb_synth *g = open_gen(f, NULL, nominal);
        mb_synth_truth t;
        assert_int_equal(mb_synth_make(g, 0, 0, MB_SYNTH_NONE, &im, &t), 0);
        outlines a;
        copy_outlines(&t, &a, 1);
        assert_int_equal(mb_synth_make(g, 1, 0, MB_SYNTH_NONE, &im, &t), 0);
        outlines b;
        copy_outlines(&t, &b, 1);
        double wx, wy;
        assert_true(max_dev(&a, &b, &wx, &wy) < 1e-6);
        assert_true(t.size == 1.0);
        free(a.xy);
        free(b.xy);
        mb_synth_close(g);
    }
    mb_synth *g = open_gen(MB_SYNTH_RING, NULL, NULL);
    double s = 0, ss = 0;
    int n = 150;
    for (int i = 0; i < n; i++) {
        mb_synth_truth t;
        assert_int_equal(
            mb_synth_make(g, (uint64_t)i, 0, MB_SYNTH_NONE, &im, &t), 0);
        assert_true(fabs(t.size - 1) <= 3 * 0.004 + 1e-12);
        s += t.size;
        ss += t.size * t.size;
    }
    double sd = sqrt(ss / n - (s / n) * (s / n));
    printf("ring size factor: sd %.5f over %d parts (0.004 asked; a normal "
           "truncated "
           "at 3 sd has 0.986 of it)\n",
           sd, n);
    assert_true(sd > 0.0033 && sd < 0.0047);
    mb_image_free(&im);
    mb_synth_close(g);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_names),
        cmocka_unit_test(test_bad_config),
        cmocka_unit_test(test_determinism),
        cmocka_unit_test(test_truth_vs_image),
        cmocka_unit_test(test_all_types),
        cmocka_unit_test(test_defect_sizes),
        cmocka_unit_test(test_contamination_visible),
        cmocka_unit_test(test_line),
        cmocka_unit_test(test_empty_and_noise),
        cmocka_unit_test(test_variation),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
