/*
 * tests/calibration/calib_ref_driver.c - renders frames of the calibration
 * target through a known camera (render_target.c), runs our detection and
 * calibration on them, and writes frames, truth and our results for the
 * OpenCV reference check (ref_calibration.py) and the command-line test.
 *
 * usage:
 *   calib_ref_driver run OUTDIR
 *       two sets of four 800 x 600 frames (clean: no noise, blur 0.7 px;
 *       noisy: noise 2 grey levels, blur 1 px, light falling off 12 % to
 *       the corners) as OUTDIR/clean_N.pgm and OUTDIR/noisy_N.pgm, and
 *       OUTDIR/ref.json with the true camera, true scale and plane position
 *       at test points, our centres and our calibration's figures.
 *   calib_ref_driver frames OUTDIR
 *       only the clean frames (nothing fitted), plus two frames for the
 *       command test: OUTDIR/far_1.pgm (target too small) and
 *       OUTDIR/small_1.pgm (640 x 480, for the frame-size check),
 *       OUTDIR/truth.json, and OUTDIR/centre_scale.txt (the true mm per
 *       px at the frame centre).
 */
#include "camera.h"
#include "detect.h"
#include "error.h"
#include "image_file.h"
#include "render_target.h"
#include "target.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NF 4
static const double poses[NF][3] = {
    {0, 0, 0}, {20, -25, -15}, {-15, 25, 15}, {90, 20, -15}};
static const double test_pts[5][2] = {
    {399.5, 299.5}, {150, 110}, {650, 110}, {150, 490}, {650, 490}};

static cJSON *pair(double a, double b)
{
    cJSON *p = cJSON_CreateArray();
    cJSON_AddItemToArray(p, cJSON_CreateNumber(a));
    cJSON_AddItemToArray(p, cJSON_CreateNumber(b));
    return p;
}

static int render_set(const char *dir, const char *name, rt_scene sc,
                      const mb_target *t, int fit, cJSON *sets)
{
    char path[1024], err[MB_ERR_LEN];
    const int N = t->rows * t->cols;
    double tq[2 * 63], xy[2 * 63 * NF];
    for (int q = 0; q < N; q++) {
        tq[2 * q] = (q % t->cols) * t->pitch;
        tq[2 * q + 1] = (q / t->cols) * t->pitch;
    }
    cJSON *set = cJSON_CreateObject(), *frames = cJSON_CreateArray();
    cJSON *centres = cJSON_CreateArray(), *truth = cJSON_CreateArray();
    cJSON_AddStringToObject(set, "name", name);
    cJSON_AddNumberToObject(set, "noise", sc.noise);
    cJSON_AddNumberToObject(set, "blur", sc.blur);
    cJSON_AddNumberToObject(set, "vignette", sc.vignette);
    cJSON_AddItemToObject(set, "frames", frames);
    cJSON_AddItemToObject(set, "centres", centres);
    cJSON_AddItemToObject(set, "true_centroids", truth);
    cJSON_AddItemToArray(sets, set);
    for (int f = 0; f < NF; f++) {
        mb_image im;
        rt_scene_pose(&sc, t, poses[f][0], poses[f][1], poses[f][2]);
        sc.seed = 1000 + 17 * f;
        if (rt_render(&sc, t, &im) < 0)
            return -1;
        snprintf(path, sizeof path, "%s/%s_%d.pgm", dir, name, f + 1);
        if (mb_image_save_pgm(path, &im, err) < 0) {
            fprintf(stderr, "%s\n", err);
            mb_image_free(&im);
            return -1;
        }
        snprintf(path, sizeof path, "%s_%d.pgm", name, f + 1);
        cJSON_AddItemToArray(frames, cJSON_CreateString(path));
        if (fit) {
            int rc = mb_target_detect(&im, t, NULL, xy + 2 * N * f, NULL, err);
            if (rc < 0) {
                fprintf(stderr, "%s frame %d: %s\n", name, f + 1, err);
                mb_image_free(&im);
                return -1;
            }
            cJSON *fc = cJSON_CreateArray(), *ft = cJSON_CreateArray();
            for (int q = 0; q < N; q++) {
                double x, y;
                cJSON_AddItemToArray(
                    fc, pair(xy[2 * (N * f + q)], xy[2 * (N * f + q) + 1]));
                rt_dot_centroid(&sc, t, q / t->cols, q % t->cols, &x, &y);
                cJSON_AddItemToArray(ft, pair(x, y));
            }
            cJSON_AddItemToArray(centres, fc);
            cJSON_AddItemToArray(truth, ft);
        }
        mb_image_free(&im);
    }
    if (!fit)
        return 0;
    mb_calib_problem P = {
        sc.width, sc.height, NF,      N, tq, xy, 0.5 * t->dot_diameter,
        t->rows,  t->cols,   t->pitch};
    mb_calib c;
    if (mb_calib_estimate(&P, NULL, &c, NULL, err) < 0) {
        fprintf(stderr, "%s: %s\n", name, err);
        return -1;
    }
    cJSON *ours = cJSON_CreateObject(), *k = cJSON_CreateArray();
    cJSON *scale = cJSON_CreateArray(), *plane = cJSON_CreateArray();
    cJSON_AddNumberToObject(ours, "rms", c.rms_px);
    cJSON_AddNumberToObject(ours, "worst", c.worst_px);
    cJSON_AddNumberToObject(ours, "iterations", c.iterations);
    const double kk[4] = {c.k1, c.k2, c.p1, c.p2};
    for (int i = 0; i < 4; i++)
        cJSON_AddItemToArray(k, cJSON_CreateNumber(kk[i]));
    for (int i = 0; i < 5; i++) {
        mb_calib_scale s;
        double X, Y;
        if (mb_calib_local_scale(&c, test_pts[i][0], test_pts[i][1], &s) < 0 ||
            mb_calib_px_to_mm(&c, test_pts[i][0], test_pts[i][1], &X, &Y) < 0)
            return -1;
        cJSON_AddItemToArray(scale, cJSON_CreateNumber(s.mm_per_px));
        cJSON_AddItemToArray(plane, pair(X, Y));
    }
    cJSON_AddItemToObject(ours, "k", k);
    cJSON_AddItemToObject(ours, "scale", scale);
    cJSON_AddItemToObject(ours, "plane", plane);
    cJSON_AddItemToObject(set, "ours", ours);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc != 3 || (strcmp(argv[1], "run") && strcmp(argv[1], "frames"))) {
        fprintf(stderr, "usage: calib_ref_driver run|frames OUTDIR\n");
        return 2;
    }
    const char *dir = argv[2];
    const int fit = !strcmp(argv[1], "run");
    mb_target t;
    char err[MB_ERR_LEN], path[1024];
    if (mb_target_init(7, 9, 10.0, &t, err) < 0)
        return 1;
    rt_scene sc;
    rt_scene_tilted(&sc);
    cJSON *root = cJSON_CreateObject(), *sets = cJSON_CreateArray();
    cJSON_AddNumberToObject(root, "width", sc.width);
    cJSON_AddNumberToObject(root, "height", sc.height);
    cJSON_AddNumberToObject(root, "rows", t.rows);
    cJSON_AddNumberToObject(root, "cols", t.cols);
    cJSON_AddNumberToObject(root, "pitch", t.pitch);
    cJSON_AddNumberToObject(root, "dot_radius", 0.5 * t.dot_diameter);
    cJSON *tr = cJSON_AddObjectToObject(root, "truth");
    cJSON_AddNumberToObject(tr, "f", sc.f);
    cJSON_AddNumberToObject(tr, "cx", 0.5 * (sc.width - 1));
    cJSON_AddNumberToObject(tr, "cy", 0.5 * (sc.height - 1));
    cJSON_AddNumberToObject(tr, "radius", 0.5 * hypot(sc.width, sc.height));
    cJSON *k = cJSON_AddArrayToObject(tr, "k");
    for (int i = 0; i < 4; i++)
        cJSON_AddItemToArray(k, cJSON_CreateNumber(sc.k[i]));
    cJSON *tp = cJSON_AddArrayToObject(root, "test_points");
    cJSON *ts = cJSON_AddArrayToObject(root, "truth_scale");
    cJSON *tpl = cJSON_AddArrayToObject(root, "truth_plane");
    rt_scene_pose(&sc, &t, 0, 0, 0);
    for (int i = 0; i < 5; i++) {
        double X, Y;
        cJSON_AddItemToArray(tp, pair(test_pts[i][0], test_pts[i][1]));
        cJSON_AddItemToArray(ts, cJSON_CreateNumber(rt_mm_per_px(
                                     &sc, &t, test_pts[i][0], test_pts[i][1])));
        rt_plane_of_px(&sc, &t, test_pts[i][0], test_pts[i][1], &X, &Y);
        cJSON_AddItemToArray(tpl, pair(X, Y));
    }
    cJSON_AddItemToObject(root, "sets", sets);
    if (render_set(dir, "clean", sc, &t, fit, sets) < 0)
        return 1;
    if (fit) {
        rt_scene noisy = sc;
        noisy.noise = 2.0;
        noisy.blur = 1.0;
        noisy.vignette = 0.12;
        if (render_set(dir, "noisy", noisy, &t, fit, sets) < 0)
            return 1;
    } else {
        /* For the command test: the target too far away, and a frame of
           another size. */
        mb_image im;
        rt_scene far = sc;
        far.height_mm = 1300.0;
        if (rt_render(&far, &t, &im) < 0)
            return 1;
        snprintf(path, sizeof path, "%s/far_1.pgm", dir);
        if (mb_image_save_pgm(path, &im, err) < 0)
            return 1;
        mb_image_free(&im);
        /* The true scale at the frame centre, as plain text. */
        snprintf(path, sizeof path, "%s/centre_scale.txt", dir);
        FILE *cf = fopen(path, "w");
        if (!cf)
            return 1;
        fprintf(cf, "%.9f\n",
                rt_mm_per_px(&sc, &t, test_pts[0][0], test_pts[0][1]));
        if (fclose(cf) != 0)
            return 1;
        rt_scene small = sc;
        small.width = 640;
        small.height = 480;
        if (rt_render(&small, &t, &im) < 0)
            return 1;
        snprintf(path, sizeof path, "%s/small_1.pgm", dir);
        if (mb_image_save_pgm(path, &im, err) < 0)
            return 1;
        mb_image_free(&im);
    }
    char *s = cJSON_Print(root);
    cJSON_Delete(root);
    snprintf(path, sizeof path, "%s/%s", dir, fit ? "ref.json" : "truth.json");
    FILE *f = fopen(path, "w");
    if (!f || !s || fputs(s, f) < 0 || fclose(f) != 0) {
        fprintf(stderr, "cannot write %s\n", path);
        return 1;
    }
    cJSON_free(s);
    return 0;
}
