/*
 * inspect/cmd_synth.c - `modeband synth`: frames from the synthetic
 * production line, written as image files with a labels file holding the
 * exact ground truth of each (io/labels_file.h).
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "image.h"
#include "image_file.h"
#include "labels_file.h"
#include "synth.h"
#include "synth_target.h"
#include "target.h"

#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static const char *const synth_help =
    "usage: modeband synth --family NAME --out DIR [--count N] [--defect-rate "
    "F]\n"
    "                      [--defects LIST] [--lighting back|front] [--seed "
    "S]\n"
    "                      [--size WxH] [--mm-per-px F] [--noise SIGMA]\n"
    "                      [--blur SIGMA] [--illumination F] [--variation F]\n"
    "                      [--start I] [--format pgm|png] [--drift F]\n"
    "                      [--reimage K]\n"
    "       modeband synth --target --pitch MM --rows R --cols C --out DIR\n"
    "                      [--count N] [--size WxH] [--mm-per-px F] [--noise SIGMA]\n"
    "                      [--blur SIGMA] [--seed S] [--format pgm|png]\n"
    "\n"
    "Write frames of the synthetic production line and their ground truth.\n"
    "Every frame is a pure function of the options and its part index, so the\n"
    "same command always writes the same files.\n"
    "\n"
    "  --family NAME      ring (RG-4030 flat ring gasket), flange (FG-3426\n"
    "                     flange gasket, four bolt holes), hose (HS-0642 bent\n"
    "                     hose segment) or lipseal (LS-2218 lip seal "
    "profile);\n"
    "                     invented demo parts\n"
    "  --out DIR          folder to write into (created if missing)\n"
    "  --count N          frames to write (default 20)\n"
    "  --defect-rate F    fraction of defective parts, 0..1 (default 0)\n"
    "  --defects LIST     comma-separated defect types to draw from: nick,\n"
    "                     flash, tear, missing, deform, size, variant,\n"
    "                     contamination, empty, cut (default: all but cut)\n"
    "  --lighting L       back (dark part on a bright field, default) or "
    "front\n"
    "                     (grey part on a textured belt)\n"
    "  --seed S           random seed, 0..2^64-1 (default 1)\n"
    "  --size WxH         frame size in px (default 1280x1024)\n"
    "  --mm-per-px F      scale on the conveyor (default 0.1)\n"
    "  --noise SIGMA      sensor noise, grey levels (default 2)\n"
    "  --blur SIGMA       optical blur, px (default 1)\n"
    "  --illumination F   corners darker than the centre by this fraction\n"
    "                     (default 0.12; 0 = even)\n"
    "  --variation F      scale of the good parts' natural variation\n"
    "                     (default 1; 0 = every part nominal)\n"
    "  --start I          index of the first part (default 0)\n"
    "  --format F         pgm (default) or png\n"
    "  --drift F          slow drift of the line: part I is scaled by\n"
    "                     1 + F * I (held at +-5 %; |F| <= 0.001; default 0)\n"
    "  --reimage K        image each of the --count parts K times (1..1000),\n"
    "                     re-placed at a new pose with new sensor noise each\n"
    "                     time, for a repeatability study (modeband\n"
    "                     repeatability); files NAME_PPPP_SS.pgm (part PPPP,\n"
    "                     shot SS, both from 1)\n"
    "\n"
    "Writes DIR/NAME_0001.pgm ... and DIR/labels.jsonl: one JSON object per\n"
    "frame with the image name, family, good or defect type with its size in\n"
    "mm and location, the pose, and the exact outlines in image px.\n"
    "\n"
    "With --target: frames of the calibration target (modeband target, same\n"
    "--pitch, --rows, --cols) lying on the conveyor, seen by the synthetic\n"
    "line's camera (straight down at --mm-per-px, its blur and noise), the\n"
    "sheet turned and shifted a little from frame to frame: DIR/target_01.pgm\n"
    "... (--count frames, default 3), for modeband calibrate.\n"
    "Exit status: 0 done, 1 failure, 2 usage error.\n";

/* "640x512" -> w, h */
static int parse_size(const char *s, int *w, int *h)
{
    char *end = NULL;
    errno = 0;
    long a = strtol(s, &end, 10);
    if (errno || end == s || (*end != 'x' && *end != 'X'))
        return -1;
    const char *t = end + 1;
    long b = strtol(t, &end, 10);
    if (errno || end == t || *end || a < 1 || b < 1 || a > 100000 || b > 100000)
        return -1;
    *w = (int)a;
    *h = (int)b;
    return 0;
}

/* "nick,flash" -> mask; -1 with the bad name in err */
static int parse_defects(const char *list, unsigned *mask, char *err)
{
    *mask = 0;
    const char *p = list;
    while (*p) {
        const char *comma = strchr(p, ',');
        size_t n = comma ? (size_t)(comma - p) : strlen(p);
        char name[32];
        if (n == 0 || n >= sizeof name)
            return mb_err_set(
                err, -1, "--defects: empty or overlong name in '%s'", list);
        memcpy(name, p, n);
        name[n] = '\0';
        int t = mb_synth_defect_from_name(name);
        if (t <= MB_SYNTH_NONE)
            return mb_err_set(
                err, -1, "--defects: unknown defect type '%s' (see --help)",
                name);
        *mask |= 1u << t;
        p += n + (comma ? 1 : 0);
    }
    return *mask ? 0 : mb_err_set(err, -1, "--defects: no defect type given");
}

static int make_dir(const char *dir, char *err)
{
    struct stat st;
    if (stat(dir, &st) == 0) {
        if (S_ISDIR(st.st_mode))
            return 0;
        return mb_err_set(err, MB_EIO, "%s exists and is not a folder", dir);
    }
    if (mkdir(dir, 0777) != 0)
        return mb_err_set(err, MB_EIO, "cannot create folder %s: %s", dir,
                          strerror(errno));
    return 0;
}

/* `--target`: n frames of the calibration target on the synthetic line. */
static int synth_target(const char *out, int n, int rows, int cols, double pitch,
                        int w, int h, double mm_per_px, double noise, double blur,
                        uint64_t seed, int png)
{
    char err[MB_ERR_LEN];
    mb_target t;
    if (mb_target_init(rows, cols, pitch, &t, err) < 0)
        return mb_cli_usage_error("synth", err);
    mb_synth_disc *discs = malloc((size_t)(rows * cols + (rows - 1) * (cols - 1)) *
                                  sizeof *discs);
    mb_image frame = {0, 0, 0, NULL};
    int nd = 0, status = MB_EXIT_FAIL;
    size_t plen = strlen(out) + 64;
    char *path = malloc(plen);
    if (!discs || !path || mb_image_alloc(w, h, &frame) < 0) {
        mb_cli_fail("synth", "out of memory");
        goto done;
    }
    for (int r = 0; r < rows; r++)
        for (int c = 0; c < cols; c++)
            discs[nd++] = (mb_synth_disc){c * pitch, r * pitch, t.dot_diameter / 2};
    for (int r = 0; r < rows - 1; r++)
        for (int c = 0; c < cols - 1; c++)
            if (mb_target_cell_marked(&t, r, c))
                discs[nd++] = (mb_synth_disc){(c + 0.5) * pitch, (r + 0.5) * pitch,
                                              t.mark_diameter / 2};
    if (make_dir(out, err) < 0) {
        mb_cli_fail("synth", err);
        goto done;
    }
    for (int i = 0; i < n; i++) {
        /* Small turns and shifts, the same for the same frame number. */
        static const double turn[6] = {0, 7, -6, 4, -3, 2};
        static const double move[6][2] = {{0, 0}, {0.3, -0.2}, {-0.3, 0.2},
                                          {0.2, 0.3}, {-0.2, -0.3}, {0.1, 0}};
        mb_synth_target_view v;
        mb_synth_target_view_default(&v, w, h);
        v.mm_per_px = mm_per_px;
        v.noise = noise;
        v.blur = blur;
        v.seed = seed * 1000003u + (uint64_t)i;
        v.angle_deg = turn[i % 6];
        v.anchor_mm[0] = 0.5 * (cols - 1) * pitch;
        v.anchor_mm[1] = 0.5 * (rows - 1) * pitch;
        v.centre_px[0] += move[i % 6][0] * pitch / mm_per_px;
        v.centre_px[1] += move[i % 6][1] * pitch / mm_per_px;
        v.sheet_mm[0] = -1.5 * pitch;
        v.sheet_mm[1] = -1.5 * pitch;
        v.sheet_mm[2] = (cols - 1 + 1.5) * pitch;
        v.sheet_mm[3] = (rows - 1 + 1.5) * pitch;
        /* the dots and their quiet zone must be in view */
        double a = v.angle_deg * M_PI / 180.0;
        for (int k = 0; k < 4; k++) {
            double X = v.sheet_mm[k & 1 ? 2 : 0] - v.anchor_mm[0];
            double Y = v.sheet_mm[k & 2 ? 3 : 1] - v.anchor_mm[1];
            double x = v.centre_px[0] + (cos(a) * X - sin(a) * Y) / mm_per_px;
            double y = v.centre_px[1] + (sin(a) * X + cos(a) * Y) / mm_per_px;
            if (x < 0 || y < 0 || x > w - 1 || y > h - 1) {
                snprintf(err, sizeof err,
                         "the target sheet (%.1f x %.1f mm with its quiet zone) "
                         "does not fit a %dx%d px frame at %g mm/px; choose a "
                         "smaller --pitch or fewer --rows/--cols",
                         v.sheet_mm[2] - v.sheet_mm[0], v.sheet_mm[3] - v.sheet_mm[1],
                         w, h, mm_per_px);
                status = mb_cli_usage_error("synth", err);
                goto done;
            }
        }
        if (mb_synth_target_frame(discs, nd, &v, &frame, err) < 0) {
            mb_cli_fail("synth", err);
            goto done;
        }
        snprintf(path, plen, "%s/target_%02d.%s", out, i + 1, png ? "png" : "pgm");
        if ((png ? mb_image_save_png(path, &frame, err)
                 : mb_image_save_pgm(path, &frame, err)) < 0) {
            mb_cli_fail("synth", err);
            goto done;
        }
    }
    printf("wrote %d frame%s of the %d x %d target, pitch %.1f mm (%dx%d px, "
           "%g mm/px) to %s\n", n, n == 1 ? "" : "s", rows, cols, pitch, w, h,
           mm_per_px, out);
    status = MB_EXIT_OK;
done:
    mb_image_free(&frame);
    free(path);
    free(discs);
    return status;
}

int mb_cmd_synth(int argc, char **argv)
{
    const char *family = NULL, *out = NULL, *lighting = "back", *seed_s = NULL;
    const char *size = NULL, *format = "pgm", *defects = NULL;
    int count = 20, start = 0, help = 0, npos = 0, reimage = 0, seen_reimage = 0;
    int target = 0, rows = 0, cols = 0, seen_count = 0;
    double pitch = 0;
    double rate = 0, mm_per_px = 0.1, noise = 2, blur = 1, illum = 0.12,
           variation = 1, drift = 0;
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"family", MB_OPT_STRING, &family, NULL},
        {"out", MB_OPT_STRING, &out, NULL},
        {"count", MB_OPT_INT, &count, &seen_count},
        {"defect-rate", MB_OPT_DOUBLE, &rate, NULL},
        {"defects", MB_OPT_STRING, &defects, NULL},
        {"lighting", MB_OPT_STRING, &lighting, NULL},
        {"seed", MB_OPT_STRING, &seed_s, NULL},
        {"size", MB_OPT_STRING, &size, NULL},
        {"mm-per-px", MB_OPT_DOUBLE, &mm_per_px, NULL},
        {"noise", MB_OPT_DOUBLE, &noise, NULL},
        {"blur", MB_OPT_DOUBLE, &blur, NULL},
        {"illumination", MB_OPT_DOUBLE, &illum, NULL},
        {"variation", MB_OPT_DOUBLE, &variation, NULL},
        {"drift", MB_OPT_DOUBLE, &drift, NULL},
        {"start", MB_OPT_INT, &start, NULL},
        {"format", MB_OPT_STRING, &format, NULL},
        {"reimage", MB_OPT_INT, &reimage, &seen_reimage},
        {"target", MB_OPT_FLAG, &target, NULL},
        {"pitch", MB_OPT_DOUBLE, &pitch, NULL},
        {"rows", MB_OPT_INT, &rows, NULL},
        {"cols", MB_OPT_INT, &cols, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], NULL, 0,
                     &npos, &help, err) < 0)
        return mb_cli_usage_error("synth", err);
    if (help) {
        fputs(synth_help, stdout);
        return MB_EXIT_OK;
    }
    if (target && family)
        return mb_cli_usage_error("synth", "give --target or --family, not both");
    if (!target && !family)
        return mb_cli_usage_error("synth", "--family is required");
    if (!out)
        return mb_cli_usage_error("synth", "--out is required");
    /* --target: the line's camera defaults (frame size, seed) of any family */
    int fam = mb_synth_family_from_name(target ? "ring" : family);
    if (fam < 0) {
        snprintf(err, sizeof err,
                 "--family: unknown family '%.60s'; expected ring, flange, "
                 "hose or lipseal",
                 family);
        return mb_cli_usage_error("synth", err);
    }
    mb_synth_config cfg;
    mb_synth_config_default(&cfg, (mb_synth_family)fam);
    int light = mb_synth_lighting_from_name(lighting);
    if (light < 0)
        return mb_cli_usage_error("synth", "--lighting expects back or front");
    cfg.lighting = (mb_synth_lighting)light;
    int png = 0;
    if (!strcmp(format, "png"))
        png = 1;
    else if (strcmp(format, "pgm") != 0)
        return mb_cli_usage_error("synth", "--format expects pgm or png");
    if (count < 1 || count > 1000000)
        return mb_cli_usage_error("synth", "--count expects 1..1000000");
    if (seen_reimage && (reimage < 1 || reimage > 1000))
        return mb_cli_usage_error("synth", "--reimage expects 1..1000");
    int shots = seen_reimage ? reimage : 1;
    if ((long long)count * shots > 1000000)
        return mb_cli_usage_error("synth", "--count times --reimage is over 1000000 frames");
    if (start < 0)
        return mb_cli_usage_error("synth",
                                  "--start expects a whole number >= 0");
    if (size && parse_size(size, &cfg.width, &cfg.height) < 0) {
        snprintf(err, sizeof err,
                 "--size expects WIDTHxHEIGHT in px, got '%.40s'", size);
        return mb_cli_usage_error("synth", err);
    }
    if (seed_s) {
        char *end = NULL;
        errno = 0;
        unsigned long long s = strtoull(seed_s, &end, 10);
        if (errno || end == seed_s || *end || seed_s[0] == '-') {
            snprintf(err, sizeof err,
                     "--seed expects a whole number 0..2^64-1, got '%.40s'",
                     seed_s);
            return mb_cli_usage_error("synth", err);
        }
        cfg.seed = s;
    }
    if (target) {
        if (!seen_count)
            count = 3;
        if (count > 1000)
            return mb_cli_usage_error("synth", "with --target, --count expects 1..1000");
        if (!(mm_per_px > 0) || !(noise >= 0) || !(blur >= 0))
            return mb_cli_usage_error("synth", "--mm-per-px must be positive, --noise "
                                               "and --blur not negative");
        return synth_target(out, count, rows, cols, pitch, cfg.width, cfg.height,
                            mm_per_px, noise, blur, cfg.seed, png);
    }
    if (defects && parse_defects(defects, &cfg.defect_mask, err) < 0)
        return mb_cli_usage_error("synth", err);
    cfg.defect_rate = rate;
    cfg.mm_per_px = mm_per_px;
    cfg.noise_sigma = noise;
    cfg.blur_sigma = blur;
    cfg.illumination = illum;
    cfg.variation = variation;
    cfg.drift_per_part = drift;

    mb_synth *gen = NULL;
    int rc = mb_synth_open(&cfg, &gen, err);
    if (rc == MB_EINVAL)
        return mb_cli_usage_error("synth", err);
    if (rc < 0)
        return mb_cli_fail("synth", err);
    mb_image frame = {0, 0, 0, NULL};
    mb_labels_writer *labels = NULL;
    int status = MB_EXIT_FAIL;
    int per_type[MB_SYNTH_N_DEFECTS] = {0};
    size_t plen = strlen(out) + 64;
    char *path = malloc(plen);
    if (!path || mb_image_alloc(cfg.width, cfg.height, &frame) < 0) {
        mb_cli_fail("synth", "out of memory");
        goto done;
    }
    if (make_dir(out, err) < 0) {
        mb_cli_fail("synth", err);
        goto done;
    }
    snprintf(path, plen, "%s/labels.jsonl", out);
    if (mb_labels_writer_open(path, &labels, err) < 0) {
        mb_cli_fail("synth", err);
        goto done;
    }
    for (int f = 0; f < count * shots; f++) {
        int i = f / shots, shot = f % shots;
        uint64_t index = (uint64_t)start + (uint64_t)i;
        mb_synth_truth truth;
        rc = mb_synth_make(gen, index, shot, MB_SYNTH_DRAW, &frame, &truth);
        if (rc < 0) {
            snprintf(err, sizeof err, "part %" PRIu64 " could not be made: %s",
                     index, mb_strerror(rc));
            mb_cli_fail("synth", err);
            goto done;
        }
        char name[64];
        if (seen_reimage)
            snprintf(name, sizeof name, "%s_%04" PRIu64 "_%02d.%s", family,
                     index + 1, shot + 1, png ? "png" : "pgm");
        else
            snprintf(name, sizeof name, "%s_%04" PRIu64 ".%s", family, index + 1,
                     png ? "png" : "pgm");
        snprintf(path, plen, "%s/%s", out, name);
        rc = png ? mb_image_save_png(path, &frame, err)
                 : mb_image_save_pgm(path, &frame, err);
        if (rc < 0 || mb_labels_write(labels, name, &truth, err) < 0) {
            mb_cli_fail("synth", err);
            goto done;
        }
        per_type[truth.defect.type]++;
    }
    rc = mb_labels_writer_close(labels, err);
    labels = NULL;
    if (rc < 0) {
        mb_cli_fail("synth", err);
        goto done;
    }
    printf("wrote %d %s frame%s (%s, %dx%d px, %g mm/px, %s-lit) and "
           "labels.jsonl to %s\n",
           count * shots, family, count * shots == 1 ? "" : "s",
           mb_synth_part_number(fam),
           cfg.width, cfg.height, cfg.mm_per_px, mb_synth_lighting_name(light),
           out);
    printf("good: %d", per_type[MB_SYNTH_NONE]);
    for (int t = 1; t < MB_SYNTH_N_DEFECTS; t++)
        if (per_type[t])
            printf(", %s: %d", mb_synth_defect_name(t), per_type[t]);
    printf("\n");
    status = MB_EXIT_OK;
done:
    mb_labels_writer_close(labels, NULL);
    free(path);
    mb_image_free(&frame);
    mb_synth_close(gen);
    return status;
}
