/*
 * inspect/cmd_calibrate.c - `modeband calibrate`: find the calibration
 * target in one or several frames, fit the camera model of the conveyor
 * plane (calibration/camera.h) and write the calibration document
 * (io/calib_file.h).
 */
#include "calib_file.h"
#include "camera.h"
#include "cli.h"
#include "commands.h"
#include "detect.h"
#include "error.h"
#include "image.h"
#include "image_file.h"
#include "target.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static const char *const calibrate_help =
    "usage: modeband calibrate --pitch MM --rows R --cols C --out CAL.json\n"
    "                          [--max-rms PX] [--radial N] [--no-tangential]\n"
    "                          FRAME...\n"
    "\n"
    "Calibrate the camera for measuring in mm on the conveyor plane, from\n"
    "frames of the target `modeband target` prints, lying flat on the\n"
    "conveyor. Several frames with the target moved and turned to different\n"
    "places (the corners of the view above all) pin the lens distortion down\n"
    "best; the first frame's target position defines the plane coordinates.\n"
    "\n"
    "  --pitch MM       the target's pitch in mm, as printed or as measured\n"
    "                   on the print (within 5 % of the printed value)\n"
    "  --rows R         rows of dots of the target\n"
    "  --cols C         dots per row\n"
    "  --out CAL.json   the calibration document to write\n"
    "  --max-rms PX     reprojection RMS above which the calibration is\n"
    "                   saved only with a warning (default 0.5 px)\n"
    "  --radial N       radial distortion terms: 0, 1 (k1) or 2 (k1, k2;\n"
    "                   default)\n"
    "  --no-tangential  do not estimate tangential distortion (p1, p2)\n"
    "\n"
    "Frames are PGM or PNG, all of the same size; the calibration applies\n"
    "only to frames of that size. Prints the reprojection RMS and the worst\n"
    "dot, the share of the frame the dots covered, the distortion, and the\n"
    "scale (mm per px) at the centre and the corners of the frame.\n"
    "A frame without the whole target, with another grid or pitch, or with\n"
    "the target too small or too oblique is refused with the reason.\n"
    "Exit status: 0 done (also when saved with a warning), 1 failure,\n"
    "2 usage error.\n";

#define MAX_FRAME_ARGS 256

static void print_scale(const mb_calib *cal, const char *where, double x,
                        double y)
{
    mb_calib_scale s;
    if (mb_calib_local_scale(cal, x, y, &s) < 0) {
        printf("  %-13s (%6.1f, %6.1f) px: outside the model's range\n", where,
               x, y);
        return;
    }
    printf("  %-13s (%6.1f, %6.1f) px: %.6f mm/px (%.6f .. %.6f)\n", where, x,
           y, s.mm_per_px, s.mm_per_px_min, s.mm_per_px_max);
}

int mb_cmd_calibrate(int argc, char **argv)
{
    const char *out = NULL;
    const char *frames[MAX_FRAME_ARGS];
    double pitch = 0.0, max_rms = 0.5;
    int rows = 0, cols = 0, radial = 2, no_tan = 0, help = 0, n = 0;
    int seen_pitch = 0, seen_rows = 0, seen_cols = 0;
    char err[MB_ERR_LEN], msg[MB_ERR_LEN + 600];
    const mb_opt opts[] = {
        {"pitch", MB_OPT_DOUBLE, &pitch, &seen_pitch},
        {"rows", MB_OPT_INT, &rows, &seen_rows},
        {"cols", MB_OPT_INT, &cols, &seen_cols},
        {"out", MB_OPT_STRING, &out, NULL},
        {"max-rms", MB_OPT_DOUBLE, &max_rms, NULL},
        {"radial", MB_OPT_INT, &radial, NULL},
        {"no-tangential", MB_OPT_FLAG, &no_tan, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], frames,
                     MAX_FRAME_ARGS, &n, &help, err) < 0)
        return mb_cli_usage_error("calibrate", err);
    if (help) {
        fputs(calibrate_help, stdout);
        return MB_EXIT_OK;
    }
    if (!seen_pitch || !seen_rows || !seen_cols || !out)
        return mb_cli_usage_error("calibrate",
                                  "--pitch, --rows, --cols and --out are "
                                  "required");
    if (n < 1)
        return mb_cli_usage_error("calibrate", "give at least one FRAME");
    if (n > MB_CALIB_MAX_FRAMES) {
        snprintf(err, sizeof err, "at most %d frames", MB_CALIB_MAX_FRAMES);
        return mb_cli_usage_error("calibrate", err);
    }
    if (radial < 0 || radial > 2)
        return mb_cli_usage_error("calibrate", "--radial expects 0, 1 or 2");
    if (!(max_rms > 0.0))
        return mb_cli_usage_error("calibrate", "--max-rms expects a positive "
                                               "number of px");
    mb_target t;
    if (mb_target_init_measured(rows, cols, pitch, &t, err) < 0)
        return mb_cli_usage_error("calibrate", err);

    const int N = rows * cols;
    if ((long)N * n > MB_CALIB_MAX_OBS) {
        snprintf(err, sizeof err,
                 "%d dots x %d frames is more than the %d dots one "
                 "calibration takes; use fewer frames",
                 N, n, MB_CALIB_MAX_OBS);
        return mb_cli_usage_error("calibrate", err);
    }
    double *img_xy = malloc(sizeof *img_xy * 2 * (size_t)N * n);
    double *tgt_xy = malloc(sizeof *tgt_xy * 2 * (size_t)N);
    int width = 0, height = 0, rc = MB_EXIT_FAIL;
    if (!img_xy || !tgt_xy) {
        mb_cli_fail("calibrate", "out of memory");
        goto done;
    }
    for (int r = 0; r < rows; r++)
        for (int c = 0; c < cols; c++) {
            tgt_xy[2 * (r * cols + c)] = c * t.pitch;
            tgt_xy[2 * (r * cols + c) + 1] = r * t.pitch;
        }
    for (int f = 0; f < n; f++) {
        mb_image im;
        mb_detect_info info;
        if (mb_image_load(frames[f], &im, err) < 0) {
            mb_cli_fail("calibrate", err);
            goto done;
        }
        if (f == 0) {
            width = im.width;
            height = im.height;
        } else if (im.width != width || im.height != height) {
            snprintf(msg, sizeof msg,
                     "%s: %dx%d px, but %s is %dx%d px; all frames must come "
                     "from the same camera setting",
                     frames[f], im.width, im.height, frames[0], width, height);
            mb_image_free(&im);
            mb_cli_fail("calibrate", msg);
            goto done;
        }
        int drc = mb_target_detect(&im, &t, NULL, img_xy + 2 * (size_t)N * f,
                                   &info, err);
        mb_image_free(&im);
        if (drc < 0) {
            snprintf(msg, sizeof msg, "%s: %s", frames[f], err);
            mb_cli_fail("calibrate", msg);
            goto done;
        }
        printf("%s: %d x %d dots, %.1f .. %.1f px apart, printed pitch "
               "%.1f mm%s\n",
               frames[f], rows, cols, info.pitch_px_min, info.pitch_px_max,
               info.coded_pitch, info.mirrored ? " (image mirrored)" : "");
    }

    mb_calib_problem prob = {.width = width,
                             .height = height,
                             .n_frames = n,
                             .n_points = N,
                             .target_xy = tgt_xy,
                             .image_xy = img_xy,
                             .dot_radius = 0.5 * t.dot_diameter,
                             .rows = rows,
                             .cols = cols,
                             .pitch = t.pitch};
    mb_calib_options opt;
    mb_calib_options_default(&opt);
    opt.radial_terms = radial;
    opt.tangential = !no_tan;
    mb_calib cal;
    if (mb_calib_estimate(&prob, &opt, &cal, NULL, err) < 0) {
        mb_cli_fail("calibrate", err);
        goto done;
    }
    time_t now = time(NULL);
    struct tm tmv;
    gmtime_r(&now, &tmv);
    strftime(cal.created, sizeof cal.created, "%Y-%m-%dT%H:%M:%SZ", &tmv);

    printf("calibration of %dx%d px frames from %d frame%s, %d dots each\n",
           width, height, n, n == 1 ? "" : "s", N);
    printf("reprojection RMS %.4f px; worst dot row %d, column %d of %s: "
           "%.4f px\n",
           cal.rms_px, cal.worst_point / cols + 1, cal.worst_point % cols + 1,
           frames[cal.worst_frame], cal.worst_px);
    for (int f = 0; f < n && n > 1; f++)
        printf("  %s: RMS %.4f px, target turned %.2f deg, its first dot at "
               "(%.2f, %.2f) mm\n",
               frames[f], cal.frame_rms_px[f], cal.frame_angle_deg[f],
               cal.frame_shift_mm[f][0], cal.frame_shift_mm[f][1]);
    printf("dots covered %.0f %% of the frame\n", 100.0 * cal.coverage);
    printf("distortion k1 %.6g, k2 %.6g, p1 %.6g, p2 %.6g (centre %.1f, "
           "%.1f px, radius %.1f px)\n",
           cal.k1, cal.k2, cal.p1, cal.p2, cal.cx, cal.cy, cal.radius);
    printf("scale:\n");
    print_scale(&cal, "centre", cal.cx, cal.cy);
    print_scale(&cal, "top left", 0, 0);
    print_scale(&cal, "top right", width - 1, 0);
    print_scale(&cal, "bottom left", 0, height - 1);
    print_scale(&cal, "bottom right", width - 1, height - 1);

    if (cal.rms_px > max_rms)
        fprintf(stderr,
                "modeband calibrate: WARNING: the reprojection RMS %.3f px is "
                "above %.3f px: millimetres measured with this calibration "
                "will be poor. Check that the target lay flat on the "
                "conveyor in every frame, that the frames are in focus and "
                "that the camera did not move. Saved anyway to %s.\n",
                cal.rms_px, max_rms, out);
    if (cal.coverage < 0.25 && (radial > 0 || !no_tan))
        fprintf(stderr,
                "modeband calibrate: note: the dots covered only %.0f %% of "
                "the frame; lens distortion outside them is extrapolated. "
                "Add frames with the target near the corners.\n",
                100.0 * cal.coverage);
    if (mb_calib_file_save(out, &cal, err) < 0) {
        mb_cli_fail("calibrate", err);
        goto done;
    }
    printf("wrote %s\n", out);
    rc = MB_EXIT_OK;
done:
    free(img_xy);
    free(tgt_xy);
    return rc;
}
