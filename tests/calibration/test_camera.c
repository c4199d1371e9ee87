/*
 * tests/calibration/test_camera.c - the target's geometry and code
 * (calibration/target.h) and the camera model (calibration/camera.h) on
 * exact, computed points:
 *
 * - pitch code: every 10-bit value round-trips, every single flipped bit of
 *   every code word is caught; the code cells are the 12 cells target.h
 *   says, each used once; the SVG sheet draws the right number of dots and
 *   marks at true scale;
 * - normalised DLT (Hartley & Zisserman, Multiple View Geometry, 2nd ed.,
 *   section 4.4) recovers a known homography from exact points and refuses
 *   collinear ones;
 * - distortion (Brown 1966): undistort(distort(p)) = p, px -> mm -> px
 *   within 1e-6 px over the frame, the local scale against finite
 *   differences;
 * - validation refuses a folding distortion, a horizon inside the frame,
 *   non-finite values; a calibration applied to another frame size is
 *   refused;
 * - the Levenberg-Marquardt fit (More 1978) on exact projections from the
 *   independent renderer's camera (render_target.c) recovers the true
 *   distortion and homography to 1e-7; on exact dot centroids the
 *   centroid-offset correction brings the fit to the truth, and leaving it
 *   out measurably does not (so the test fails if the correction breaks).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "camera.h"
#include "error.h"
#include "render_target.h"
#include "target.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- target ---- */

static void test_code(void **state)
{
    (void)state;
    for (int v = 1; v <= 1023; v++) {
        double pitch = v / 10.0;
        if (pitch < MB_TARGET_MIN_PITCH - 1e-9)
            continue;
        int code = mb_target_code_of_pitch(pitch);
        assert_true(code >= 0 && code < 4096);
        assert_int_equal(code & 1023, v);
        assert_true(fabs(mb_target_pitch_of_code(code) - pitch) < 1e-12);
        for (int b = 0; b < MB_TARGET_CODE_BITS; b++)
            assert_true(mb_target_pitch_of_code(code ^ (1 << b)) < 0.0);
    }
    assert_int_equal(mb_target_code_of_pitch(0.95), -1);
    assert_int_equal(mb_target_code_of_pitch(102.4), -1);
    assert_true(mb_target_pitch_of_code(0) < 0.0);
    assert_true(mb_target_pitch_of_code(4096) < 0.0);
}

static void test_cells(void **state)
{
    (void)state;
    const int sizes[][2] = {{5, 5}, {5, 6}, {7, 9}, {9, 7}, {12, 16}, {64, 5}};
    for (size_t k = 0; k < sizeof sizes / sizeof sizes[0]; k++) {
        mb_target t;
        char err[MB_ERR_LEN];
        assert_int_equal(
            mb_target_init(sizes[k][0], sizes[k][1], 12.5, &t, err), 0);
        int seen[MB_TARGET_CODE_BITS] = {0}, marks = 0, corners = 0;
        for (int r = 0; r < t.rows - 1; r++)
            for (int c = 0; c < t.cols - 1; c++) {
                int bit = mb_target_cell_bit(&t, r, c);
                int corner =
                    (r == 0 || r == t.rows - 2) && (c == 0 || c == t.cols - 2);
                if (corner) {
                    assert_int_equal(bit, -1);
                    corners += mb_target_cell_marked(&t, r, c);
                    continue;
                }
                if (bit >= 0) {
                    seen[bit]++;
                    assert_int_equal(mb_target_cell_marked(&t, r, c),
                                     (t.code >> bit) & 1);
                }
                marks += mb_target_cell_marked(&t, r, c);
            }
        assert_int_equal(corners, 3);
        assert_int_equal(mb_target_cell_marked(&t, t.rows - 2, t.cols - 2), 0);
        assert_int_equal(mb_target_cell_marked(&t, 0, 0), 1);
        for (int b = 0; b < MB_TARGET_CODE_BITS; b++)
            assert_int_equal(seen[b], 1);
        assert_int_equal(marks, __builtin_popcount((unsigned)t.code));
        assert_int_equal(mb_target_cell_bit(&t, -1, 0), -2);
        assert_int_equal(mb_target_cell_bit(&t, 0, t.cols - 1), -2);
    }
    /* 5 x 5: the 12 non-corner cells in raster order are bits 0..11. */
    mb_target t;
    assert_int_equal(mb_target_init(5, 5, 10.0, &t, NULL), 0);
    assert_int_equal(mb_target_cell_bit(&t, 0, 1), 0);
    assert_int_equal(mb_target_cell_bit(&t, 0, 2), 1);
    assert_int_equal(mb_target_cell_bit(&t, 1, 0), 2);
    assert_int_equal(mb_target_cell_bit(&t, 3, 2), 11);
}

static void test_init_refusals(void **state)
{
    (void)state;
    mb_target t;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_target_init(4, 9, 10.0, &t, err), MB_ERANGE);
    assert_non_null(strstr(err, "rows"));
    assert_int_equal(mb_target_init(7, 65, 10.0, &t, err), MB_ERANGE);
    assert_non_null(strstr(err, "cols"));
    assert_int_equal(mb_target_init(7, 9, 0.9, &t, err), MB_ERANGE);
    assert_int_equal(mb_target_init(7, 9, 102.4, &t, err), MB_ERANGE);
    assert_int_equal(mb_target_init(7, 9, 10.05, &t, err), MB_ERANGE);
    assert_non_null(strstr(err, "multiple of 0.1"));
    assert_int_equal(mb_target_init(7, 9, NAN, &t, err), MB_ERANGE);
    assert_int_equal(mb_target_init_measured(7, 9, 10.05, &t, err), 0);
    assert_true(t.pitch == 10.05 && t.code == mb_target_code_of_pitch(10.1));
    assert_int_equal(mb_target_init(7, 9, 10.0, NULL, err), MB_EINVAL);
}

static int count(const char *s, const char *what)
{
    int n = 0;
    for (const char *p = s; (p = strstr(p, what)); p++)
        n++;
    return n;
}

static void test_svg(void **state)
{
    (void)state;
    mb_target t;
    char *svg = NULL;
    size_t len = 0;
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, NULL), 0);
    assert_int_equal(mb_target_svg(&t, &svg, &len, NULL), 0);
    assert_int_equal(len, strlen(svg));
    assert_int_equal(count(svg, "<circle"),
                     63 + 3 + __builtin_popcount((unsigned)t.code));
    /* True scale: width and height in mm and a viewBox of the same size.
       Grid 80 x 60 mm plus 15 mm of paper each side: 110 mm wide. */
    assert_non_null(strstr(svg, "width=\"110.000mm\""));
    assert_non_null(strstr(svg, "viewBox=\"0 0 110.000 "));
    assert_non_null(strstr(svg, "pitch 10.0 mm"));
    assert_non_null(strstr(svg, "7 rows x 9 columns"));
    assert_non_null(strstr(svg, "--pitch 10.0 --rows 7 --cols 9"));
    /* Dot (0, 0) at the margin, radius a quarter pitch. */
    assert_non_null(strstr(svg, "<circle cx=\"15.0000\" cy=\"15.0000\" "
                                "r=\"2.5000\"/>"));
    /* A mark in cell (0, 0): centre half a pitch further, r = pitch / 8. */
    assert_non_null(strstr(svg, "<circle cx=\"20.0000\" cy=\"20.0000\" "
                                "r=\"1.2500\"/>"));
    free(svg);
}

/* ---- homography ---- */

static void test_dlt(void **state)
{
    (void)state;
    const double h[9] = {2.1,     0.13,  1.1e-4, -0.2, 1.9,
                         -2.3e-4, 310.0, 220.0,  1.0};
    double src[2 * 30], dst[2 * 30], g[9];
    for (int i = 0; i < 30; i++) {
        src[2 * i] = (i % 6) * 17.0 - 20.0 + 0.3 * i;
        src[2 * i + 1] = (i / 6) * 13.0 - 9.0;
        mb_calib_homography_apply(h, src[2 * i], src[2 * i + 1], &dst[2 * i],
                                  &dst[2 * i + 1]);
    }
    assert_int_equal(mb_calib_homography_dlt(30, src, dst, g), 0);
    for (int i = 0; i < 9; i++)
        assert_true(fabs(g[i] - h[i]) <= 1e-9 * fmax(fabs(h[i]), 1e-3));
    /* Exactly four points (the first, last and two other corners). */
    double s4[8], d4[8];
    const int pick[4] = {0, 5, 24, 29};
    for (int i = 0; i < 4; i++) {
        s4[2 * i] = src[2 * pick[i]];
        s4[2 * i + 1] = src[2 * pick[i] + 1];
        d4[2 * i] = dst[2 * pick[i]];
        d4[2 * i + 1] = dst[2 * pick[i] + 1];
    }
    assert_int_equal(mb_calib_homography_dlt(4, s4, d4, g), 0);
    for (int i = 0; i < 9; i++)
        assert_true(fabs(g[i] - h[i]) <= 1e-7 * fmax(fabs(h[i]), 1e-3));
    /* Inverse. */
    double hi[9], x, y;
    assert_int_equal(mb_calib_homography_invert(h, hi), 0);
    mb_calib_homography_apply(hi, dst[10], dst[11], &x, &y);
    assert_true(fabs(x - src[10]) < 1e-9 && fabs(y - src[11]) < 1e-9);
    /* Collinear and too few points. */
    double line[2 * 8], img[2 * 8];
    for (int i = 0; i < 8; i++) {
        line[2 * i] = i;
        line[2 * i + 1] = 2.0 * i + 1.0;
        img[2 * i] = 3.0 * i;
        img[2 * i + 1] = 5.0 - i;
    }
    assert_int_equal(mb_calib_homography_dlt(8, line, img, g), MB_EDEGENERATE);
    assert_int_equal(mb_calib_homography_dlt(3, src, dst, g), MB_EDEGENERATE);
    const double sing[9] = {1, 2, 3, 2, 4, 6, 0, 0, 1};
    assert_int_equal(mb_calib_homography_invert(sing, hi), MB_EDEGENERATE);
}

/* ---- the model's maps ---- */

static mb_calib model(double k1, double k2, double p1, double p2)
{
    mb_calib c;
    memset(&c, 0, sizeof c);
    c.width = 800;
    c.height = 600;
    c.cx = 399.5;
    c.cy = 299.5;
    c.radius = 500.0;
    c.k1 = k1;
    c.k2 = k2;
    c.p1 = p1;
    c.p2 = p2;
    /* 4 px per mm, slight perspective, origin at (100, 80) px. */
    const double h[9] = {4.0, 0.1, 2e-4, -0.08, 3.9, 1.5e-4, 100.0, 80.0, 1.0};
    memcpy(c.h, h, sizeof h);
    return c;
}

static void test_round_trips(void **state)
{
    (void)state;
    mb_calib c = model(-0.12, 0.03, 0.002, -0.0015);
    assert_int_equal(mb_calib_validate(&c, NULL), 0);
    double worst_d = 0.0, worst_mm = 0.0, worst_s = 0.0;
    for (int i = 0; i <= 20; i++)
        for (int j = 0; j <= 20; j++) {
            double x = 799.0 * i / 20.0, y = 599.0 * j / 20.0;
            double xu, yu, xd, yd, X, Y, x2, y2;
            assert_int_equal(mb_calib_undistort(&c, x, y, &xu, &yu), 0);
            mb_calib_distort(&c, xu, yu, &xd, &yd);
            worst_d = fmax(worst_d, hypot(xd - x, yd - y));
            assert_int_equal(mb_calib_px_to_mm(&c, x, y, &X, &Y), 0);
            assert_int_equal(mb_calib_mm_to_px(&c, X, Y, &x2, &y2), 0);
            worst_mm = fmax(worst_mm, hypot(x2 - x, y2 - y));
            /* Local scale against central differences of px -> mm. */
            mb_calib_scale s;
            const double e = 1e-3;
            double Xa, Ya, Xb, Yb, Xc, Yc, Xd, Yd;
            assert_int_equal(mb_calib_local_scale(&c, x, y, &s), 0);
            mb_calib_px_to_mm(&c, x + e, y, &Xa, &Ya);
            mb_calib_px_to_mm(&c, x - e, y, &Xb, &Yb);
            mb_calib_px_to_mm(&c, x, y + e, &Xc, &Yc);
            mb_calib_px_to_mm(&c, x, y - e, &Xd, &Yd);
            double j00 = (Xa - Xb) / (2 * e), j10 = (Ya - Yb) / (2 * e);
            double j01 = (Xc - Xd) / (2 * e), j11 = (Yc - Yd) / (2 * e);
            worst_s =
                fmax(worst_s,
                     fabs(s.jacobian[0] - j00) + fabs(s.jacobian[1] - j10) +
                         fabs(s.jacobian[2] - j01) + fabs(s.jacobian[3] - j11));
            assert_true(fabs(s.mm_per_px - sqrt(fabs(j00 * j11 - j01 * j10))) <
                        1e-7);
            assert_true(s.mm_per_px_min <= s.mm_per_px + 1e-12 &&
                        s.mm_per_px <= s.mm_per_px_max + 1e-12);
        }
    printf("round trips over the frame: undistort %.2e px, px->mm->px %.2e "
           "px, scale Jacobian vs differences %.2e mm/px\n",
           worst_d, worst_mm, worst_s);
    assert_true(worst_d < 1e-9);
    assert_true(worst_mm < 1e-6);
    assert_true(worst_s < 1e-7);
    /* Strong barrel distortion, k1 = -0.12: r (1 - 0.12 r^2) peaks at
       1.11 (r = 1.67), beyond the frame corners (1.0), so the model is
       valid; a pixel at 1.2 radii from the centre has no physical
       undistorted position (only the mirrored one beyond the fold) and
       must be refused, not answered. */
    mb_calib b = model(-0.12, 0.0, 0.0, 0.0);
    assert_int_equal(mb_calib_validate(&b, NULL), 0);
    double xu, yu, X, Y, x2, y2;
    assert_int_equal(mb_calib_undistort(&b, 0.0, 0.0, &xu, &yu), 0);
    assert_int_equal(mb_calib_px_to_mm(&b, 0.0, 0.0, &X, &Y), 0);
    assert_int_equal(mb_calib_mm_to_px(&b, X, Y, &x2, &y2), 0);
    assert_true(hypot(x2, y2) < 1e-6);
    assert_int_equal(
        mb_calib_undistort(&b, b.cx + 1.2 * b.radius, b.cy, &xu, &yu),
        MB_ENOCONV);
    b.k1 = -0.15; /* peaks at 0.994: the corners have no undistorted place */
    assert_int_equal(mb_calib_validate(&b, NULL), MB_ERANGE);
    /* Batch conversion equals the single one. */
    double px[6] = {10, 20, 400, 300, 790, 590}, mm[6];
    assert_int_equal(mb_calib_points_to_mm(&c, 3, px, mm), 0);
    for (int i = 0; i < 3; i++) {
        mb_calib_px_to_mm(&c, px[2 * i], px[2 * i + 1], &X, &Y);
        assert_true(X == mm[2 * i] && Y == mm[2 * i + 1]);
    }
}

static void test_validate(void **state)
{
    (void)state;
    char err[MB_ERR_LEN];
    mb_calib c = model(-0.6, 0.0, 0.0, 0.0);
    /* 1 + 3 k1 r^2 = 0 at r = 0.75: folds inside the frame (r = 1 at the
       corners). */
    assert_int_equal(mb_calib_validate(&c, err), MB_ERANGE);
    assert_non_null(strstr(err, "fold"));
    c = model(-0.1, 0.0, 0.0, 0.0);
    assert_int_equal(mb_calib_validate(&c, err), 0);
    c.k2 = NAN;
    assert_int_equal(mb_calib_validate(&c, err), MB_ENUMERIC);
    c = model(0, 0, 0, 0);
    c.h[8] = 2.0;
    assert_int_equal(mb_calib_validate(&c, err), MB_ERANGE);
    c = model(0, 0, 0, 0);
    c.radius = 0.0;
    assert_int_equal(mb_calib_validate(&c, err), MB_ERANGE);
    /* A horizon across the frame: x = 4 X / (0.01 X + 1) tends to 400 px
       as X grows, so the pixels right of x = 400 see nothing of the plane
       (they would map to points behind the camera). */
    c = model(0, 0, 0, 0);
    memset(c.h, 0, sizeof c.h);
    c.h[0] = 4.0;
    c.h[4] = 4.0;
    c.h[2] = 0.01;
    c.h[8] = 1.0;
    double X, Y;
    assert_int_equal(mb_calib_px_to_mm(&c, 200.0, 100.0, &X, &Y), 0);
    assert_int_equal(mb_calib_px_to_mm(&c, 600.0, 100.0, &X, &Y), MB_ERANGE);
    assert_int_equal(mb_calib_mm_to_px(&c, -150.0, 0.0, &X, &Y), MB_ERANGE);
    assert_int_equal(mb_calib_validate(&c, err), MB_ERANGE);
    assert_non_null(strstr(err, "horizon"));
    /* Frame size. */
    c = model(0, 0, 0, 0);
    assert_int_equal(mb_calib_check_frame(&c, 800, 600, err), 0);
    assert_int_equal(mb_calib_check_frame(&c, 640, 480, err), MB_ESIZE);
    assert_non_null(strstr(err, "800x600"));
    assert_non_null(strstr(err, "640x480"));
    assert_int_equal(mb_calib_check_frame(NULL, 640, 480, err), MB_EINVAL);
    assert_int_equal(mb_calib_validate(NULL, err), MB_EINVAL);
}

/* ---- the fit on exact points ---- */

#define FR 3
static const double poses[FR][3] = {{0, 0, 0}, {25, -20, 12}, {-70, 18, -10}};

static void true_scene(rt_scene *sc)
{
    rt_scene_default(sc);
    sc->tilt_x_deg = 7.0;
    sc->tilt_y_deg = -4.0;
    sc->roll_deg = 2.0;
    sc->k[0] = -0.09;
    sc->k[1] = 0.025;
    sc->k[2] = 0.0015;
    sc->k[3] = -0.001;
}

static int fit(const mb_target *t, int centroids, int bias_passes, mb_calib *c,
               double *max_h_err)
{
    rt_scene sc;
    true_scene(&sc);
    const int N = t->rows * t->cols;
    double tq[2 * 63], obs[2 * 63 * FR];
    for (int r = 0; r < t->rows; r++)
        for (int k = 0; k < t->cols; k++) {
            tq[2 * (r * t->cols + k)] = k * t->pitch;
            tq[2 * (r * t->cols + k) + 1] = r * t->pitch;
        }
    for (int f = 0; f < FR; f++) {
        rt_scene_pose(&sc, t, poses[f][0], poses[f][1], poses[f][2]);
        for (int q = 0; q < N; q++) {
            double *o = obs + 2 * (N * f + q);
            if (centroids)
                rt_dot_centroid(&sc, t, q / t->cols, q % t->cols, &o[0], &o[1]);
            else
                rt_project(&sc, t, tq[2 * q], tq[2 * q + 1], &o[0], &o[1]);
        }
    }
    mb_calib_problem P = {800,
                          600,
                          FR,
                          N,
                          tq,
                          obs,
                          centroids ? 0.5 * t->dot_diameter : 0.0,
                          t->rows,
                          t->cols,
                          t->pitch};
    mb_calib_options opt;
    mb_calib_options_default(&opt);
    opt.bias_passes = bias_passes;
    char err[MB_ERR_LEN];
    int rc = mb_calib_estimate(&P, &opt, c, NULL, err);
    if (rc < 0) {
        printf("estimate: %s\n", err);
        return rc;
    }
    /* Compare the fitted plane -> px map with the truth over the target's
       area in frame 0 (h itself is compared through where it sends points:
       its entries mix units). */
    double htrue[9];
    rt_scene_pose(&sc, t, 0, 0, 0);
    rt_homography(&sc, t, htrue);
    *max_h_err = 0.0;
    for (int q = 0; q < N; q++) {
        double x1, y1, x2, y2;
        mb_calib_homography_apply(c->h, tq[2 * q], tq[2 * q + 1], &x1, &y1);
        mb_calib_homography_apply(htrue, tq[2 * q], tq[2 * q + 1], &x2, &y2);
        *max_h_err = fmax(*max_h_err, hypot(x1 - x2, y1 - y2));
    }
    return 0;
}

static void test_fit_exact(void **state)
{
    (void)state;
    mb_target t;
    mb_calib c;
    double herr;
    rt_scene sc;
    true_scene(&sc);
    assert_int_equal(mb_target_init(7, 9, 10.0, &t, NULL), 0);
    assert_int_equal(fit(&t, 0, 0, &c, &herr), 0);
    printf("exact centres: RMS %.2e px, k %.8f %.8f %.8f %.8f (truth %.4f "
           "%.4f %.4f %.4f), H error %.2e px, %d iterations\n",
           c.rms_px, c.k1, c.k2, c.p1, c.p2, sc.k[0], sc.k[1], sc.k[2], sc.k[3],
           herr, c.iterations);
    assert_true(c.rms_px < 1e-7);
    assert_true(fabs(c.k1 - sc.k[0]) < 1e-7 && fabs(c.k2 - sc.k[1]) < 1e-7);
    assert_true(fabs(c.p1 - sc.k[2]) < 1e-8 && fabs(c.p2 - sc.k[3]) < 1e-8);
    assert_true(herr < 1e-5);
    assert_int_equal(c.n_frames, FR);
    assert_int_equal(c.n_points, 63);
    for (int f = 1; f < FR; f++)
        assert_true(fabs(c.frame_angle_deg[f] - poses[f][0]) < 1e-6);
    assert_true(c.coverage > 0.2 && c.coverage < 1.0);
    assert_int_equal(c.width, 800);
    assert_true(c.cx == 399.5 && c.cy == 299.5 && c.radius == 500.0);
    assert_true(c.rows == 7 && c.cols == 9 && c.pitch == 10.0);

    /* Dot centroids: with the correction the fit reaches the truth; without
       it, the offsets (perspective and distortion) stay in the result. */
    mb_calib c0, c2;
    double h0, h2;
    assert_int_equal(fit(&t, 1, 0, &c0, &h0), 0);
    assert_int_equal(fit(&t, 1, 2, &c2, &h2), 0);
    printf("exact dot centroids: without correction RMS %.2e px, k1 error "
           "%.2e, H error %.2e px; with it RMS %.2e px, k1 error %.2e, H "
           "error %.2e px\n",
           c0.rms_px, fabs(c0.k1 - sc.k[0]), h0, c2.rms_px,
           fabs(c2.k1 - sc.k[0]), h2);
    assert_true(c2.rms_px < 1e-5);
    assert_true(h2 < 1e-3);
    assert_true(fabs(c2.k1 - sc.k[0]) < 1e-5);
    assert_true(c0.rms_px > 5.0 * c2.rms_px || h0 > 5.0 * h2);

    /* One frame only, and a model without distortion on distorted data. */
    mb_calib c1;
    double tq[2 * 63], obs[2 * 63];
    for (int q = 0; q < 63; q++) {
        tq[2 * q] = (q % 9) * 10.0;
        tq[2 * q + 1] = (q / 9) * 10.0;
        rt_scene_pose(&sc, &t, 0, 0, 0);
        rt_project(&sc, &t, tq[2 * q], tq[2 * q + 1], &obs[2 * q],
                   &obs[2 * q + 1]);
    }
    mb_calib_problem P = {800, 600, 1, 63, tq, obs, 0.0, 7, 9, 10.0};
    assert_int_equal(mb_calib_estimate(&P, NULL, &c1, NULL, NULL), 0);
    assert_true(c1.rms_px < 1e-6);
    mb_calib_options opt;
    mb_calib_options_default(&opt);
    opt.radial_terms = 0;
    opt.tangential = 0;
    assert_int_equal(mb_calib_estimate(&P, &opt, &c1, NULL, NULL), 0);
    printf("no distortion terms on distorted data: RMS %.3f px\n", c1.rms_px);
    assert_true(c1.rms_px > 0.2);
    assert_true(c1.k1 == 0.0 && c1.p2 == 0.0);
}

static void test_fit_refusals(void **state)
{
    (void)state;
    char err[MB_ERR_LEN];
    double tq[2 * 10], obs[2 * 20];
    for (int q = 0; q < 10; q++) {
        tq[2 * q] = q;
        tq[2 * q + 1] = 2.0 * q; /* collinear */
        obs[2 * q] = 3.0 * q;
        obs[2 * q + 1] = 7.0 * q + 1;
    }
    mb_calib c;
    mb_calib_problem P = {800, 600, 1, 10, tq, obs, 0.0, 0, 0, 0.0};
    assert_int_equal(mb_calib_estimate(&P, NULL, &c, NULL, err),
                     MB_EDEGENERATE);
    P.n_points = 5;
    assert_int_equal(mb_calib_estimate(&P, NULL, &c, NULL, err),
                     MB_EDEGENERATE);
    P.n_points = 10;
    P.n_frames = 0;
    assert_int_equal(mb_calib_estimate(&P, NULL, &c, NULL, err), MB_EINVAL);
    P.n_frames = 1;
    obs[3] = INFINITY;
    assert_int_equal(mb_calib_estimate(&P, NULL, &c, NULL, err), MB_ENUMERIC);
    assert_int_equal(mb_calib_estimate(NULL, NULL, &c, NULL, err), MB_EINVAL);
    /* A frame that shows the target mirrored relative to frame 1. */
    double grid[2 * 20], two[2 * 40];
    for (int q = 0; q < 20; q++) {
        grid[2 * q] = (q % 5) * 10.0;
        grid[2 * q + 1] = (q / 5) * 10.0;
        two[2 * q] = 200 + 4 * grid[2 * q];
        two[2 * q + 1] = 150 + 4 * grid[2 * q + 1];
        two[40 + 2 * q] = 600 - 4 * grid[2 * q];
        two[40 + 2 * q + 1] = 150 + 4 * grid[2 * q + 1];
    }
    mb_calib_problem M = {800, 600, 2, 20, grid, two, 0.0, 4, 5, 10.0};
    assert_int_equal(mb_calib_estimate(&M, NULL, &c, NULL, err),
                     MB_EDEGENERATE);
    assert_non_null(strstr(err, "mirrored"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_code),
        cmocka_unit_test(test_cells),
        cmocka_unit_test(test_init_refusals),
        cmocka_unit_test(test_svg),
        cmocka_unit_test(test_dlt),
        cmocka_unit_test(test_round_trips),
        cmocka_unit_test(test_validate),
        cmocka_unit_test(test_fit_exact),
        cmocka_unit_test(test_fit_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
