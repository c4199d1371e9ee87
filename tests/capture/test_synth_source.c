/*
 * tests/capture/test_synth_source.c - the synthetic line as a live source:
 * parts travel by the conveyor speed (in the truth and, measured
 * independently, in the pixels), each part keeps its shape, defect,
 * lateral position and rotation while it crosses, slots and gaps follow
 * the pitch, frames are deterministic, pacing and timeouts follow the
 * frame rate, late callers skip frames with drop_late, and bad
 * configurations are refused.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "source.h"
#include "synth_source.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define FW 480
#define FH 320

static void small_ring(mb_synth_source_config *c)
{
    mb_synth_source_config_default(c, MB_SYNTH_RING);
    c->synth.width = FW;
    c->synth.height = FH;
    c->synth.mm_per_px = 0.2; /* a 40 mm ring is 200 px across */
    c->synth.seed = 7;
    c->speed_px = 60;
}

static mb_source *open_src(const mb_synth_source_config *c)
{
    mb_source *src = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_synth_source_open(c, &src, err);
    if (rc < 0)
        fail_msg("mb_synth_source_open: %s", err);
    return src;
}

static void next_ok(mb_source *src, mb_frame *f)
{
    char err[MB_ERR_LEN] = "";
    int rc = mb_source_next(src, 5000, f, err);
    if (rc < 0)
        fail_msg("mb_source_next: %s (%s)", err, mb_strerror(rc));
}

/* Centroid of the dark (part) pixels, measured on the image alone; the
   number of them in *n. Back-lit: part about 22, field about 215 grey. */
static void dark_centroid(const mb_image *im, double *cx, double *cy, long *n)
{
    double sx = 0, sy = 0;
    long k = 0;
    for (int y = 0; y < im->height; y++)
        for (int x = 0; x < im->width; x++)
            if (im->pixels[(size_t)y * (size_t)im->stride + (size_t)x] < 118) {
                sx += x;
                sy += y;
                k++;
            }
    *n = k;
    *cx = k ? sx / (double)k : NAN;
    *cy = k ? sy / (double)k : NAN;
}

static void test_parts_move_by_the_conveyor_speed(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    mb_source *src = open_src(&c);
    double R = mb_synth_source_radius(src);
    assert_true(R > 100 && R < 160); /* ring radius 100 px plus margins */
    assert_null(mb_synth_source_truth_of(src)); /* no frame yet */

    int64_t prev_part = -2;
    double prev_tx = 0, prev_ty = 0, prev_angle = 0, prev_cx = 0, prev_cy = 0;
    double prev_size = 0;
    int prev_in_view = 0, pairs_truth = 0, pairs_image = 0, parts_in_view = 0;
    for (int k = 0; k < 40; k++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.seq, (uint64_t)k);
        const mb_synth_source_truth *t = mb_synth_source_truth_of(src);
        assert_non_null(t);
        assert_int_equal(t->frame, (uint64_t)k);
        /* every frame holds a slot with the default pitch (W + 2R) */
        assert_true(t->part >= 0);
        assert_true(t->truth.present);
        double cx, cy;
        long n;
        dark_centroid(&f.view, &cx, &cy, &n);
        if (t->part == prev_part) {
            assert_true(fabs(t->truth.pose.tx - prev_tx - 60.0) < 1e-9);
            assert_true(fabs(t->truth.pose.ty - prev_ty) < 1e-12);
            assert_true(fabs(t->truth.pose.angle - prev_angle) < 1e-12);
            assert_true(fabs(t->truth.size - prev_size) < 1e-12);
            pairs_truth++;
            if (prev_in_view && t->truth.in_view) {
                /* the pixels moved by the speed too */
                assert_true(fabs(cx - prev_cx - 60.0) < 0.5);
                assert_true(fabs(cy - prev_cy) < 0.5);
                pairs_image++;
            }
        } else if (k > 0) {
            assert_int_equal(t->part, prev_part + 1); /* the next part */
        }
        if (t->truth.in_view) {
            parts_in_view++;
            /* the dark centroid of a whole ring is its centre */
            assert_true(fabs(cx - t->truth.pose.tx) < 1.0);
            assert_true(fabs(cy - t->truth.pose.ty) < 1.0);
        }
        prev_part = t->part;
        prev_tx = t->truth.pose.tx;
        prev_ty = t->truth.pose.ty;
        prev_angle = t->truth.pose.angle;
        prev_size = t->truth.size;
        prev_in_view = t->truth.in_view;
        prev_cx = cx;
        prev_cy = cy;
    }
    /* 40 frames at 60 px over a pitch of 480 + 2R px: three or four parts,
       each wholly in view in a few frames */
    assert_true(prev_part >= 2 && prev_part <= 3);
    assert_true(pairs_truth >= 30);
    assert_true(pairs_image >= 6);
    assert_true(parts_in_view >= 8);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.frames, 40);
    assert_int_equal(s.dropped, 0);
    assert_string_equal(mb_source_name(src), "synth");
    mb_source_close(src);
}

static void test_pitch_leaves_gaps(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    c.pitch_px = 1200; /* more than W + 2R: empty belt between parts */
    mb_source *src = open_src(&c);
    double R = mb_synth_source_radius(src);
    int gaps = 0, with_part = 0;
    for (int k = 0; k < 30; k++) {
        mb_frame f;
        next_ok(src, &f);
        const mb_synth_source_truth *t = mb_synth_source_truth_of(src);
        double s = 60.0 * k;
        int64_t j = (int64_t)floor(s / 1200.0);
        double x = -R + s - 1200.0 * (double)j;
        double cx, cy;
        long n;
        dark_centroid(&f.view, &cx, &cy, &n);
        if (x >= FW + R) {
            assert_int_equal(t->part, -1);
            assert_false(t->truth.present);
            assert_int_equal(n, 0); /* an empty belt has no dark pixel */
            gaps++;
        } else {
            assert_int_equal(t->part, j);
            assert_true(fabs(t->truth.pose.tx - x) < 1e-9);
            with_part++;
        }
    }
    assert_true(gaps >= 5);
    assert_true(with_part >= 10);
    mb_source_close(src);

    char err[MB_ERR_LEN] = "";
    c.pitch_px = FW; /* two parts would be in view */
    assert_int_equal(mb_synth_source_open(&c, &src, err), MB_EINVAL);
    assert_null(src);
    assert_non_null(strstr(err, "pitch_px"));
}

static void test_deterministic(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    c.synth.defect_rate = 0.5;
    mb_source *a = open_src(&c);
    c.render_ahead = 1; /* drawn by the source's own thread: the same line */
    mb_source *b = open_src(&c);
    c.render_ahead = 0;
    c.synth.seed = 8;
    mb_source *d = open_src(&c);
    int differ = 0;
    for (int k = 0; k < 40; k++) {
        mb_frame fa, fb, fd;
        next_ok(a, &fa);
        next_ok(b, &fb);
        next_ok(d, &fd);
        for (int y = 0; y < FH; y++)
            assert_memory_equal(fa.view.pixels + (size_t)y * fa.view.stride,
                                fb.view.pixels + (size_t)y * fb.view.stride,
                                FW);
        const mb_synth_source_truth *ta = mb_synth_source_truth_of(a),
                                    *tb = mb_synth_source_truth_of(b);
        assert_int_equal(ta->part, tb->part);
        assert_int_equal(ta->frame, tb->frame);
        assert_int_equal(ta->truth.defect.type, tb->truth.defect.type);
        assert_int_equal(ta->truth.outlines.n_outlines,
                         tb->truth.outlines.n_outlines);
        int n = 0;
        for (int o = 0; o < ta->truth.outlines.n_outlines; o++) {
            assert_int_equal(ta->truth.outlines.counts[o],
                             tb->truth.outlines.counts[o]);
            n += ta->truth.outlines.counts[o];
        }
        assert_memory_equal(ta->truth.outlines.xy, tb->truth.outlines.xy,
                            sizeof(double) * 2 * (size_t)n);
        for (int y = 0; y < FH && !differ; y++)
            differ =
                memcmp(fa.view.pixels + (size_t)y * fa.view.stride,
                       fd.view.pixels + (size_t)y * fd.view.stride, FW) != 0;
    }
    assert_true(differ); /* another seed, another line */
    mb_source_close(a);
    mb_source_close(b);
    mb_source_close(d);
}

static void test_defects_stay_with_their_part(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    c.synth.defect_rate = 1.0;
    c.synth.defect_mask |= 1u << MB_SYNTH_CUT; /* must be masked out */
    c.speed_px = 90;
    mb_source *src = open_src(&c);
    int64_t part = -1;
    int type = -1, defective = 0;
    double size = 0;
    for (int k = 0; k < 60; k++) {
        mb_frame f;
        next_ok(src, &f);
        const mb_synth_source_truth *t = mb_synth_source_truth_of(src);
        assert_int_not_equal(t->truth.defect.type, MB_SYNTH_CUT);
        assert_int_not_equal(t->truth.defect.type, MB_SYNTH_NONE);
        if (t->part == part) {
            assert_int_equal(t->truth.defect.type, type);
            assert_true(fabs(t->truth.defect.size_mm - size) < 1e-12);
        }
        part = t->part;
        type = t->truth.defect.type;
        size = t->truth.defect.size_mm;
        defective += t->truth.present && !t->truth.good;
    }
    assert_true(defective > 30);
    mb_source_close(src);
}

static void test_pacing_and_timeout(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    c.fps = 100;
    mb_source *src = open_src(&c);
    mb_frame f;
    int64_t t0 = mb_source_clock_ns(), first = 0;
    for (int k = 0; k < 10; k++) {
        next_ok(src, &f);
        if (k == 0)
            first = f.t_ns;
        /* due times, exactly 10 ms apart */
        assert_true(llabs(f.t_ns - first - (int64_t)k * 10000000) < 2);
        assert_true(mb_source_clock_ns() >= f.t_ns);
    }
    double ms = (double)(mb_source_clock_ns() - t0) / 1e6;
    assert_true(ms >= 89.0 && ms < 400.0);
    mb_source_close(src);

    c.fps = 5; /* 200 ms per frame */
    src = open_src(&c);
    next_ok(src, &f);
    first = f.t_ns;
    char err[MB_ERR_LEN] = "";
    t0 = mb_source_clock_ns();
    assert_int_equal(mb_source_next(src, 50, &f, err), MB_ETIMEOUT);
    ms = (double)(mb_source_clock_ns() - t0) / 1e6;
    assert_true(ms >= 49.0 && ms < 250.0);
    next_ok(src, &f);
    assert_int_equal(f.seq, 1);
    assert_true(llabs(f.t_ns - first - 200000000) < 2);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.timeouts, 1);
    assert_int_equal(s.frames, 2);
    mb_source_close(src);
}

static void test_drop_late_and_max_frames(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    c.fps = 200;
    c.drop_late = 1;
    mb_source *src = open_src(&c);
    mb_frame f;
    next_ok(src, &f);
    assert_int_equal(f.seq, 0);
    mb_source_sleep_until(mb_source_clock_ns() + 60000000, -1); /* busy */
    next_ok(src, &f);
    /* 60 ms at 5 ms per frame: the latest due frame is about 12 */
    assert_true(f.seq >= 11 && f.seq <= 40);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.dropped, f.seq - 1);
    mb_source_close(src);

    char err[MB_ERR_LEN] = "";
    for (int ahead = 0; ahead < 2; ahead++) {
        small_ring(&c);
        c.max_frames = 3;
        c.render_ahead = ahead;
        src = open_src(&c);
        for (int k = 0; k < 3; k++) {
            next_ok(src, &f);
            assert_int_equal(f.seq, k);
        }
        assert_int_equal(mb_source_next(src, 100, &f, err), MB_ENOTFOUND);
        assert_int_equal(mb_source_reopen(src, err), 0); /* nothing to reopen */
        mb_source_close(src);
    }
    /* closed while its thread is drawing ahead: no frame asked for yet */
    small_ring(&c);
    c.render_ahead = 1;
    mb_source_close(open_src(&c));
}

/* mb_synth_make_at at the pose mb_synth_make drew gives the same frame:
   same part, defect and noise, only the placement is the caller's. */
/* A 400 x 400 px flange line at 0.15 mm per px. */
static mb_synth_config small_flange(double defect_rate)
{
    mb_synth_config c;
    mb_synth_config_default(&c, MB_SYNTH_FLANGE);
    c.width = 400;
    c.height = 400;
    c.mm_per_px = 0.15;
    c.defect_rate = defect_rate;
    return c;
}

static void test_make_at_matches_make(void **state)
{
    (void)state;
    mb_synth_config c = small_flange(0.7);
    mb_synth *g = NULL;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(mb_synth_open(&c, &g, err), 0);
    mb_image a, b;
    assert_int_equal(mb_image_alloc(400, 400, &a), 0);
    assert_int_equal(mb_image_alloc(400, 400, &b), 0);
    for (uint64_t i = 0; i < 6; i++) {
        mb_synth_truth ta, tb;
        assert_int_equal(mb_synth_make(g, i, 2, MB_SYNTH_DRAW, &a, &ta), 0);
        mb_pose pose = ta.pose;
        assert_int_equal(
            mb_synth_make_at(g, i, 2, MB_SYNTH_DRAW, &pose, &b, &tb), 0);
        for (int y = 0; y < 400; y++)
            assert_memory_equal(a.pixels + (size_t)y * a.stride,
                                b.pixels + (size_t)y * b.stride, 400);
        assert_int_equal(ta.defect.type, tb.defect.type);
        if (!ta.present)
            continue;
        /* moved by 25 px: the outlines move with it (the generator reuses
           its outline buffer, so keep the first point) */
        double x0 = ta.outlines.xy[0], y0 = ta.outlines.xy[1];
        pose.tx += 25;
        assert_int_equal(
            mb_synth_make_at(g, i, 2, MB_SYNTH_DRAW, &pose, &b, &tb), 0);
        assert_true(fabs(tb.outlines.xy[0] - x0 - 25) < 1e-9);
        assert_true(fabs(tb.outlines.xy[1] - y0) < 1e-9);
        assert_true(fabs(tb.pose.tx - ta.pose.tx - 25) < 1e-9);
    }
    mb_pose bad = {NAN, 10, 1, 0};
    assert_int_equal(mb_synth_make_at(g, 0, 0, MB_SYNTH_NONE, &bad, &b, NULL),
                     MB_EINVAL);
    bad.tx = 100;
    assert_int_equal(mb_synth_make_at(g, 0, 0, MB_SYNTH_CUT, &bad, &b, NULL),
                     MB_EINVAL);
    assert_int_equal(mb_synth_make_at(g, 0, 0, MB_SYNTH_NONE, NULL, &b, NULL),
                     MB_EINVAL);
    /* wholly outside the frame: present, not in view, nothing drawn */
    bad.tx = -1000;
    mb_synth_truth t;
    assert_int_equal(mb_synth_make_at(g, 0, 0, MB_SYNTH_NONE, &bad, &b, &t), 0);
    assert_true(t.present);
    assert_false(t.in_view);
    double cx, cy;
    long n;
    dark_centroid(&b, &cx, &cy, &n);
    assert_int_equal(n, 0);
    mb_image_free(&a);
    mb_image_free(&b);
    mb_synth_close(g);
}

/* Drawing over an empty frame: outside the part's window the empty frame
   is kept. Without noise, back-lit, the frame is mb_synth_make_at's pixel
   for pixel; front-lit (the belt texture is the empty frame's) the part's
   interior, where the texture is covered, is. With noise, the window's
   noise is a fresh draw: the pixels differ from make_at's by noise only. */
static void test_make_over_draws_only_the_window(void **state)
{
    (void)state;
    for (int run = 0; run < 3; run++) {
        int light = run == 1, noisy = run == 2;
        mb_synth_config c = small_flange(0.5);
        c.lighting = light ? MB_SYNTH_FRONTLIT : MB_SYNTH_BACKLIT;
        c.noise_sigma = noisy ? 2 : 0;
        mb_synth *g = NULL;
        char err[MB_ERR_LEN] = "";
        assert_int_equal(mb_synth_open(&c, &g, err), 0);
        mb_image a, e, b;
        assert_int_equal(mb_image_alloc(400, 400, &a), 0);
        assert_int_equal(mb_image_alloc(400, 400, &e), 0);
        assert_int_equal(mb_image_alloc(400, 400, &b), 0);
        const uint64_t under = UINT64_C(1) << 62;
        assert_int_equal(mb_synth_make(g, under, 0, MB_SYNTH_EMPTY, &e, NULL), 0);
        for (uint64_t i = 0; i < 6; i++) {
            mb_synth_truth ta, tb;
            assert_int_equal(mb_synth_make(g, i, 1, MB_SYNTH_DRAW, &a, &ta), 0);
            mb_pose pose = ta.pose;
            for (int y = 0; y < 400; y++)
                memcpy(b.pixels + (size_t)y * b.stride,
                       e.pixels + (size_t)y * e.stride, 400);
            assert_int_equal(mb_synth_make_over(g, i, 1, MB_SYNTH_DRAW, &pose,
                                                under, &b, &tb),
                             0);
            assert_int_equal(ta.defect.type, tb.defect.type);
            assert_int_equal(ta.present, tb.present);
            /* the part's reach: its outline points' bounding box */
            double box[4] = {1e9, -1e9, 1e9, -1e9};
            int n = 0;
            for (int o = 0; o < tb.outlines.n_outlines; o++)
                n += tb.outlines.counts[o];
            for (int k = 0; tb.present && k < n; k++) {
                box[0] = fmin(box[0], tb.outlines.xy[2 * k]);
                box[1] = fmax(box[1], tb.outlines.xy[2 * k]);
                box[2] = fmin(box[2], tb.outlines.xy[2 * k + 1]);
                box[3] = fmax(box[3], tb.outlines.xy[2 * k + 1]);
            }
            long same_a = 0, far_kept = 0, far = 0, inside = 0, n_near = 0;
            double abs_diff = 0;
            for (int y = 0; y < 400; y++)
                for (int x = 0; x < 400; x++) {
                    uint8_t pa = a.pixels[(size_t)y * a.stride + x];
                    uint8_t pb = b.pixels[(size_t)y * b.stride + x];
                    uint8_t pe = e.pixels[(size_t)y * e.stride + x];
                    /* 3 mm room for contamination, 8 px for the blur */
                    double m = 3.0 / c.mm_per_px + 8;
                    int near = tb.present && x > box[0] - m && x < box[1] + m &&
                               y > box[2] - m && y < box[3] + m;
                    if (!near) {
                        far++;
                        far_kept += pb == pe;
                        continue;
                    }
                    n_near++;
                    abs_diff += abs((int)pb - (int)pa);
                    if (noisy) {
                        continue;
                    } else if (!light) {
                        assert_int_equal(pb, pa);
                        same_a += pb != pe;
                    } else if (pa > 120) {
                        /* front-lit part (grey 150 x lighting, belt 72):
                           the texture is covered, so make_at's pixel */
                        inside++;
                        same_a += pb == pa;
                    }
                }
            assert_int_equal(far_kept, far);
            if (tb.present && !light && !noisy)
                assert_true(same_a > 1000); /* the part was drawn */
            /* two draws of N(0, 2): mean |difference| 2 x 2 / sqrt(pi) =
               2.26 grey levels (rounding adds a little) */
            if (tb.present && noisy)
                assert_true(abs_diff / (double)n_near > 1.5 &&
                            abs_diff / (double)n_near < 3.2);
            if (tb.present && light) {
                assert_true(inside > 1000);
                assert_true(same_a >= 0.95 * (double)inside);
            }
        }
        mb_image_free(&a);
        mb_image_free(&e);
        mb_image_free(&b);
        mb_synth_close(g);
    }
}

static void test_bad_configs(void **state)
{
    (void)state;
    mb_synth_source_config c;
    small_ring(&c);
    mb_source *src = NULL;
    char err[MB_ERR_LEN] = "";
    c.speed_px = 0;
    assert_int_equal(mb_synth_source_open(&c, &src, err), MB_EINVAL);
    assert_non_null(strstr(err, "speed_px"));
    small_ring(&c);
    c.fps = -1;
    assert_int_equal(mb_synth_source_open(&c, &src, err), MB_EINVAL);
    assert_non_null(strstr(err, "fps"));
    small_ring(&c);
    c.synth.width = 100; /* the ring does not fit */
    assert_int_equal(mb_synth_source_open(&c, &src, err), MB_ERANGE);
    assert_null(src);
    assert_int_equal(mb_synth_source_open(NULL, &src, err), MB_EINVAL);
    mb_source_close(NULL);
    assert_null(mb_synth_source_truth_of(NULL));
    char e2[MB_ERR_LEN];
    assert_int_equal(mb_source_next(NULL, 0, NULL, e2), MB_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parts_move_by_the_conveyor_speed),
        cmocka_unit_test(test_pitch_leaves_gaps),
        cmocka_unit_test(test_deterministic),
        cmocka_unit_test(test_defects_stay_with_their_part),
        cmocka_unit_test(test_pacing_and_timeout),
        cmocka_unit_test(test_drop_late_and_max_frames),
        cmocka_unit_test(test_make_at_matches_make),
        cmocka_unit_test(test_make_over_draws_only_the_window),
        cmocka_unit_test(test_bad_configs),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
