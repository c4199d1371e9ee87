/*
 * tests/calibration/test_detect.c - the target found in rendered frames
 * (render_target.c: a known camera with tilt and Brown-Conrady distortion,
 * anti-aliased by 8 x 8 supersampling near edges, blurred) and the whole
 * calibration from them, against the renderer's ground truth:
 *
 * - noise-free frames: every dot found in target order, its centre within
 *   0.02 px RMS of the true area centroid of the imaged dot; the fitted
 *   model's reprojection RMS under 0.05 px, its scale (mm per px) within
 *   0.05 % of the truth at the centre and four points between centre and
 *   corners (the figures of issue 6), its distortion close to the truth,
 *   px -> mm -> px within 1e-6 px;
 * - noisy frames (noise 2 grey levels, blur 1 px, light falling off 12 %
 *   to the corners): the same within looser bounds, printed;
 * - orientation: the target turned 180 degrees, a square grid, and a
 *   mirrored image all give dot (0, 0) where the truth has it;
 * - refusals, each with its code and fault: blank frame, target cut by the
 *   frame edge, a dot covered, grid smaller or larger than given, wrong
 *   pitch (and a 4 % print scale accepted), dots too small, target too
 *   oblique, no orientation marks, two targets in view; frames from two
 *   different planes fit badly (RMS over 0.5 px) instead of silently.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "camera.h"
#include "detect.h"
#include "error.h"
#include "render_target.h"
#include "target.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Render and detect; returns the detector's code. */
static int render_detect(const rt_scene *sc, const mb_target *drawn,
                         const mb_target *asked, double *xy,
                         mb_detect_info *info, char *err)
{
    mb_image im;
    assert_int_equal(rt_render(sc, drawn, &im), 0);
    int rc = mb_target_detect(&im, asked, NULL, xy, info, err);
    mb_image_free(&im);
    return rc;
}

/* RMS and largest distance of detected centres from the true centroids. */
static void centre_error(const rt_scene *sc, const mb_target *t,
                         const double *xy, double *rms, double *worst)
{
    double s = 0.0;
    *worst = 0.0;
    for (int r = 0; r < t->rows; r++)
        for (int c = 0; c < t->cols; c++) {
            double x, y;
            rt_dot_centroid(sc, t, r, c, &x, &y);
            const double *p = xy + 2 * (r * t->cols + c);
            double e = hypot(p[0] - x, p[1] - y);
            s += e * e;
            *worst = fmax(*worst, e);
        }
    *rms = sqrt(s / (t->rows * t->cols));
}

#define NF 4
static const double poses[NF][3] = {
    {0, 0, 0}, {20, -25, -15}, {-15, 25, 15}, {90, 20, -15}};

/* Detect the target in NF frames of scene sc and fit the model. */
static void calibrate_scene(rt_scene sc, const char *what, double rms_max,
                            double centre_max, double scale_max, double k1_tol)
{
    mb_target t;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, err), 0);
    const int N = 63;
    double tq[2 * 63], xy[2 * 63 * NF];
    for (int q = 0; q < N; q++) {
        tq[2 * q] = (q % 9) * 10.0;
        tq[2 * q + 1] = (q / 9) * 10.0;
    }
    double crms_all = 0.0, cworst_all = 0.0;
    for (int f = 0; f < NF; f++) {
        mb_detect_info info;
        rt_scene_pose(&sc, &t, poses[f][0], poses[f][1], poses[f][2]);
        sc.seed = 100 + f;
        int rc = render_detect(&sc, &t, &t, xy + 2 * N * f, &info, err);
        if (rc)
            printf("%s frame %d: %s\n", what, f, err);
        assert_int_equal(rc, 0);
        assert_int_equal(info.fault, MB_DETECT_OK);
        assert_true(fabs(info.coded_pitch - 10.0) < 1e-9);
        assert_int_equal(info.mirrored, 0);
        double crms, cworst;
        centre_error(&sc, &t, xy + 2 * N * f, &crms, &cworst);
        crms_all += crms * crms / NF;
        cworst_all = fmax(cworst_all, cworst);
    }
    crms_all = sqrt(crms_all);
    mb_calib_problem P = {
        sc.width, sc.height, NF, N, tq, xy, 0.5 * t.dot_diameter, 7, 9, 10.0};
    mb_calib c;
    int rc = mb_calib_estimate(&P, NULL, &c, NULL, err);
    if (rc)
        printf("%s: %s\n", what, err);
    assert_int_equal(rc, 0);
    rt_scene_pose(&sc, &t, 0, 0, 0);
    const double pts[5][2] = {
        {399.5, 299.5}, {150, 110}, {650, 110}, {150, 490}, {650, 490}};
    double worst_scale = 0.0, worst_pos = 0.0, worst_trip = 0.0;
    for (int i = 0; i < 5; i++) {
        mb_calib_scale s;
        double X, Y, Xt, Yt, x2, y2;
        assert_int_equal(mb_calib_local_scale(&c, pts[i][0], pts[i][1], &s), 0);
        double truth = rt_mm_per_px(&sc, &t, pts[i][0], pts[i][1]);
        worst_scale = fmax(worst_scale, fabs(s.mm_per_px / truth - 1.0));
        assert_int_equal(mb_calib_px_to_mm(&c, pts[i][0], pts[i][1], &X, &Y),
                         0);
        assert_int_equal(
            rt_plane_of_px(&sc, &t, pts[i][0], pts[i][1], &Xt, &Yt), 0);
        worst_pos = fmax(worst_pos, hypot(X - Xt, Y - Yt));
        assert_int_equal(mb_calib_mm_to_px(&c, X, Y, &x2, &y2), 0);
        worst_trip = fmax(worst_trip, hypot(x2 - pts[i][0], y2 - pts[i][1]));
    }
    printf("%s: centres vs true centroids RMS %.4f px (worst %.4f); fit RMS "
           "%.4f px (worst %.4f), scale error %.4f %%, position error %.4f mm, "
           "k1 %.5f (truth %.5f) k2 %.5f (%.5f) p1 %.6f (%.6f) p2 %.6f "
           "(%.6f), round trip %.1e px\n",
           what, crms_all, cworst_all, c.rms_px, c.worst_px,
           100.0 * worst_scale, worst_pos, c.k1, sc.k[0], c.k2, sc.k[1], c.p1,
           sc.k[2], c.p2, sc.k[3], worst_trip);
    assert_true(crms_all < centre_max);
    assert_true(c.rms_px < rms_max);
    assert_true(worst_scale < scale_max);
    assert_true(fabs(c.k1 - sc.k[0]) < k1_tol);
    assert_true(fabs(c.p1 - sc.k[2]) < k1_tol / 10 &&
                fabs(c.p2 - sc.k[3]) < k1_tol / 10);
    assert_true(worst_trip < 1e-6);
}

static void test_noise_free(void **state)
{
    (void)state;
    rt_scene sc;
    rt_scene_tilted(&sc);
    /* Issue 6: scale within 0.05 % of the truth, RMS under 0.05 px. */
    calibrate_scene(sc, "noise-free", 0.05, 0.02, 5e-4, 1e-3);
}

static void test_noisy(void **state)
{
    (void)state;
    rt_scene sc;
    rt_scene_tilted(&sc);
    sc.noise = 2.0;
    sc.blur = 1.0;
    sc.vignette = 0.12;
    calibrate_scene(sc, "noise 2, blur 1, light -12 %", 0.08, 0.06, 1.5e-3,
                    3e-3);
}

/* Position of dot (r, c) in xy against the truth, px. */
static double dot_error(const rt_scene *sc, const mb_target *t,
                        const double *xy, int r, int c)
{
    double x, y;
    rt_dot_centroid(sc, t, r, c, &x, &y);
    return hypot(xy[2 * (r * t->cols + c)] - x,
                 xy[2 * (r * t->cols + c) + 1] - y);
}

static void test_orientation(void **state)
{
    (void)state;
    mb_target t;
    mb_detect_info info;
    char err[MB_ERR_LEN];
    double xy[2 * 81];
    rt_scene sc;
    rt_scene_tilted(&sc);
    sc.width = 640;
    sc.height = 480;
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, NULL), 0);
    /* Turned 180 and 270 degrees. */
    for (int a = 180; a <= 270; a += 90) {
        rt_scene_pose(&sc, &t, a, 0, 0);
        assert_int_equal(render_detect(&sc, &t, &t, xy, &info, err), 0);
        assert_true(dot_error(&sc, &t, xy, 0, 0) < 0.1);
        assert_true(dot_error(&sc, &t, xy, 0, 8) < 0.1);
        assert_true(dot_error(&sc, &t, xy, 6, 0) < 0.1);
    }
    /* A square grid: the handedness picks the reading, not the mirror. */
    mb_target sq;
    assert_int_equal(mb_target_init(8, 8, 8.0, &sq, NULL), 0);
    for (int a = 0; a < 360; a += 135) {
        rt_scene_pose(&sc, &sq, a, 0, 0);
        assert_int_equal(render_detect(&sc, &sq, &sq, xy, &info, err), 0);
        assert_int_equal(info.mirrored, 0);
        assert_true(dot_error(&sc, &sq, xy, 0, 0) < 0.1);
        assert_true(dot_error(&sc, &sq, xy, 0, 1) < 0.1);
        assert_true(dot_error(&sc, &sq, xy, 7, 6) < 0.1);
    }
    /* A mirrored image (camera set to flip): found, flagged, right dots. */
    rt_scene_pose(&sc, &t, 10, 0, 0);
    mb_image im, fl;
    assert_int_equal(rt_render(&sc, &t, &im), 0);
    assert_int_equal(mb_image_alloc(im.width, im.height, &fl), 0);
    for (int y = 0; y < im.height; y++)
        for (int x = 0; x < im.width; x++)
            fl.pixels[y * fl.stride + x] =
                im.pixels[y * im.stride + im.width - 1 - x];
    assert_int_equal(mb_target_detect(&fl, &t, NULL, xy, &info, err), 0);
    assert_int_equal(info.mirrored, 1);
    double x, y;
    rt_dot_centroid(&sc, &t, 0, 0, &x, &y);
    assert_true(hypot(xy[0] - (im.width - 1 - x), xy[1] - y) < 0.1);
    rt_dot_centroid(&sc, &t, 2, 5, &x, &y);
    assert_true(hypot(xy[2 * 23] - (im.width - 1 - x), xy[2 * 23 + 1] - y) <
                0.1);
    mb_image_free(&im);
    mb_image_free(&fl);
}

/* A refusal: code, fault, and a word of the sentence. */
static void expect(int rc, const mb_detect_info *info, const char *err,
                   int code, mb_detect_fault fault, const char *word)
{
    printf("  %-30s -> %d (%s): %s\n", mb_detect_fault_name(fault), rc,
           mb_detect_fault_name(info->fault), err);
    assert_int_equal(rc, code);
    assert_int_equal(info->fault, fault);
    assert_int_equal(mb_detect_fault_code(fault), code);
    assert_non_null(strstr(err, word));
}

static void test_refusals(void **state)
{
    (void)state;
    mb_target t, other;
    mb_detect_info info;
    char err[MB_ERR_LEN];
    double xy[2 * 100];
    rt_scene sc;
    rt_scene_tilted(&sc);
    sc.width = 640;
    sc.height = 480;
    sc.noise = 1.0;
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, NULL), 0);

    /* No target: the sheet fills the frame, no dots (target far away, off
       to the side), then a flat grey frame. */
    mb_image im;
    assert_int_equal(mb_image_alloc(320, 240, &im), 0);
    memset(im.pixels, 128, (size_t)im.stride * im.height);
    int rc = mb_target_detect(&im, &t, NULL, xy, &info, err);
    expect(rc, &info, err, MB_ENOTFOUND, MB_DETECT_NO_TARGET, "no calibration");
    for (int y = 0; y < im.height; y++)
        for (int x = 0; x < im.width; x++)
            im.pixels[y * im.stride + x] =
                (uint8_t)(((x / 40 + y / 40) % 2) ? 200 : 40);
    rc = mb_target_detect(&im, &t, NULL, xy, &info, err);
    expect(rc, &info, err, MB_ENOTFOUND, MB_DETECT_NO_TARGET, "no calibration");
    mb_image_free(&im);

    /* Cut by the frame edge. */
    rt_scene_pose(&sc, &t, 0, -60, 0);
    rc = render_detect(&sc, &t, &t, xy, &info, err);
    expect(rc, &info, err, MB_EEDGE, MB_DETECT_PARTIAL, "partly");

    /* One dot covered (painted white). */
    rt_scene_pose(&sc, &t, 5, 0, 0);
    assert_int_equal(rt_render(&sc, &t, &im), 0);
    {
        double x, y;
        rt_project(&sc, &t, 40.0, 30.0, &x, &y);
        for (int py = (int)y - 12; py <= (int)y + 12; py++)
            for (int px = (int)x - 12; px <= (int)x + 12; px++)
                if (hypot(px - x, py - y) < 11.0)
                    im.pixels[py * im.stride + px] = 220;
    }
    rc = mb_target_detect(&im, &t, NULL, xy, &info, err);
    expect(rc, &info, err, MB_EEDGE, MB_DETECT_PARTIAL, "62 of the");
    mb_image_free(&im);

    /* Grid size: fewer and more than drawn. */
    rt_scene_pose(&sc, &t, 0, 0, 0);
    assert_int_equal(mb_target_init(6, 9, 10.0, &other, NULL), 0);
    rc = render_detect(&sc, &t, &other, xy, &info, err);
    expect(rc, &info, err, MB_ESIZE, MB_DETECT_GRID_SIZE, "7 x 9 dots");
    assert_int_equal(mb_target_init(8, 10, 10.0, &other, NULL), 0);
    rc = render_detect(&sc, &t, &other, xy, &info, err);
    expect(rc, &info, err, MB_ESIZE, MB_DETECT_GRID_SIZE, "--rows 8");

    /* Pitch: 8 mm asked of a 10 mm target; a 4 % print scale is fine. */
    assert_int_equal(mb_target_init(7, 9, 8.0, &other, NULL), 0);
    rc = render_detect(&sc, &t, &other, xy, &info, err);
    expect(rc, &info, err, MB_EINVAL, MB_DETECT_PITCH, "10.0 mm pitch");
    assert_int_equal(mb_target_init_measured(7, 9, 10.4, &other, NULL), 0);
    assert_int_equal(render_detect(&sc, &t, &other, xy, &info, err), 0);

    /* Too small: camera 5.2 times as far, dots about 7.7 px apart. */
    rt_scene far = sc;
    far.height_mm = 1300.0;
    rc = render_detect(&far, &t, &t, xy, &info, err);
    expect(rc, &info, err, MB_ERANGE, MB_DETECT_TOO_SMALL, "too small");

    /* Too oblique: tilted 58 degrees (cells squashed about 1.9:1). */
    rt_scene tilt = sc;
    tilt.tilt_x_deg = 58.0;
    tilt.tilt_y_deg = 0.0;
    tilt.k[0] = tilt.k[1] = tilt.k[2] = tilt.k[3] = 0.0;
    tilt.height_mm = 180.0;
    rc = render_detect(&tilt, &t, &t, xy, &info, err);
    expect(rc, &info, err, MB_EDEGENERATE, MB_DETECT_TOO_OBLIQUE, "obliquely");

    /* No orientation marks: a plain dot grid. */
    rt_scene plain = sc;
    plain.no_marks = 1;
    rc = render_detect(&plain, &t, &t, xy, &info, err);
    expect(rc, &info, err, MB_EFORMAT, MB_DETECT_ORIENTATION, "corner marks");

    /* Two targets side by side (each a 5 x 6 grid at 6 mm). */
    mb_target small;
    assert_int_equal(mb_target_init(5, 6, 6.0, &small, NULL), 0);
    rt_scene a = sc, b = sc;
    rt_scene_pose(&a, &small, 0, -40, 0);
    rt_scene_pose(&b, &small, 0, 40, 0);
    mb_image ia, ib;
    assert_int_equal(rt_render(&a, &small, &ia), 0);
    assert_int_equal(rt_render(&b, &small, &ib), 0);
    /* The two sheets: keep the brighter (paper over conveyor), darker ink. */
    for (int y = 0; y < ia.height; y++)
        for (int x = 0; x < ia.width; x++) {
            uint8_t *p = &ia.pixels[y * ia.stride + x];
            uint8_t q = ib.pixels[y * ib.stride + x];
            if (x >= ia.width / 2)
                *p = q;
        }
    rc = mb_target_detect(&ia, &small, NULL, xy, &info, err);
    expect(rc, &info, err, MB_EMULTIPLE, MB_DETECT_MULTIPLE, "two dot grids");
    mb_image_free(&ia);
    mb_image_free(&ib);

    /* Arguments. */
    assert_int_equal(mb_target_detect(NULL, &t, NULL, xy, &info, err),
                     MB_EINVAL);
    assert_int_equal(mb_target_detect(&im, NULL, NULL, xy, &info, err),
                     MB_EINVAL);
}

/* Frames of the target on two different planes (the second 10 mm nearer
   the camera) are not one plane: the fit must not give a good-looking
   calibration. With the full model the distortion soaks up the difference
   and folds over (refused, with a sentence that says what to check); with
   the distortion left out the fit stands but its RMS gives it away. */
static void test_two_planes(void **state)
{
    (void)state;
    mb_target t;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, NULL), 0);
    rt_scene sc;
    rt_scene_tilted(&sc);
    double tq[2 * 63], xy[2 * 63 * 2];
    for (int q = 0; q < 63; q++) {
        tq[2 * q] = (q % 9) * 10.0;
        tq[2 * q + 1] = (q / 9) * 10.0;
    }
    mb_detect_info info;
    rt_scene_pose(&sc, &t, 0, -15, 0);
    assert_int_equal(render_detect(&sc, &t, &t, xy, &info, err), 0);
    sc.height_mm = 240.0;
    rt_scene_pose(&sc, &t, 30, 15, 0);
    assert_int_equal(render_detect(&sc, &t, &t, xy + 126, &info, err), 0);
    mb_calib_problem P = {800, 600, 2, 63, tq, xy, 2.5, 7, 9, 10.0};
    mb_calib c;
    int rc = mb_calib_estimate(&P, NULL, &c, NULL, err);
    printf("two planes 10 mm apart, full model: %s\n", rc ? err : "fitted");
    assert_true(rc == MB_ERANGE || (rc == 0 && c.rms_px > 0.5));
    if (rc)
        assert_non_null(strstr(err, "flat"));
    mb_calib_options opt;
    mb_calib_options_default(&opt);
    opt.radial_terms = 0;
    opt.tangential = 0;
    assert_int_equal(mb_calib_estimate(&P, &opt, &c, NULL, err), 0);
    printf("two planes 10 mm apart, no distortion terms: RMS %.3f px, worst "
           "%.3f px\n",
           c.rms_px, c.worst_px);
    assert_true(c.rms_px > 0.5);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_noise_free),  cmocka_unit_test(test_noisy),
        cmocka_unit_test(test_orientation), cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_two_planes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
