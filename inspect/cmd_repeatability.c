/*
 * inspect/cmd_repeatability.c - `modeband repeatability`: a repeatability
 * study of the station's gauges. The same few parts are imaged again and
 * again, re-placed each time; every image is inspected as the line would
 * inspect it, each gauge is collected per part, and the pooled within-part
 * standard deviation and the %GRR against the gauge's tolerance are
 * reported with the AIAG acceptance band (the arithmetic is in grr.h).
 *
 * Part identity comes from the file name: everything before the last '_'
 * of the name without its extension, so ring_0003_02.pgm is shot 02 of
 * part ring_0003 (the names `modeband synth --reimage` writes).
 */
#include "calib_file.h"
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "file_list.h"
#include "gauges.h"
#include "grr.h"
#include "image_file.h"
#include "model_file.h"
#include "verdict.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *const repeat_help =
    "usage: modeband repeatability --model MODEL [--calib CAL.json |\n"
    "                              --mm-per-px F] [--verbose] DIR\n"
    "\n"
    "A repeatability study of the model's drawing gauges. DIR holds images\n"
    "(PGM or PNG) of the same few parts, each imaged several times and\n"
    "re-placed on the conveyor between shots. The part is named by the file\n"
    "name: everything before the last '_' of the name without extension, so\n"
    "name files <part>_<shot>.pgm (ring_0003_02.pgm is shot 02 of part\n"
    "ring_0003; `modeband synth --reimage K` writes such names).\n"
    "\n"
    "Every image is inspected as the station would; each gauge of every\n"
    "converged fit is collected per part, whatever the verdict. Per gauge the\n"
    "table gives the parts and measurements used, the mean, the repeatability\n"
    "standard deviation sd (pooled within-part, with its upper 95 % bound),\n"
    "the tolerance (upper minus lower limit), %GRR = 100 * 6 sd / tolerance\n"
    "and its band: under 10 % acceptable, 10 to 30 % conditionally\n"
    "acceptable, over 30 % not acceptable (AIAG Measurement Systems Analysis,\n"
    "4th edition). AIAG studies use 10 parts x 3 shots or more.\n"
    "\n"
    "  --model MODEL     a model taught from images with --gauges\n"
    "  --calib CAL.json  measure on the conveyor plane through this\n"
    "                    calibration (modeband calibrate); default: the\n"
    "                    model's mm per px\n"
    "  --mm-per-px F     one scale instead of a calibration\n"
    "  --verbose         also print every image's gauge readings, one line\n"
    "                    each: IMAGE (part KEY): NAME = MM; NAME = MM ...\n"
    "\n"
    "Exit status: 0 the study was made (whatever the bands); 1 the model,\n"
    "calibration or images cannot give one (no gauges, no part measured\n"
    "twice); 2 usage error.\n";

/* One inspected image: its part and its gauge readings (NAN: none). */
typedef struct {
    int part;
    double g[MB_MAX_GAUGES];
} reading;

/* The part key of "DIR/name_shot.ext" into key; 0, or -1 without a '_'. */
static int part_key(const char *path, char *key, size_t len)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    const char *dot = strrchr(base, '.');
    size_t n = dot ? (size_t)(dot - base) : strlen(base);
    const char *us = NULL;
    for (size_t i = 0; i < n; i++)
        if (base[i] == '_')
            us = base + i;
    if (!us || us == base)
        return -1;
    n = (size_t)(us - base);
    if (n >= len)
        n = len - 1;
    memcpy(key, base, n);
    key[n] = '\0';
    return 0;
}

int mb_cmd_repeatability(int argc, char **argv)
{
    const char *model = NULL, *calib = NULL, *pos[2] = {NULL, NULL};
    double mm = 0.0;
    int help = 0, npos = 0, seen_mm = 0, verbose = 0;
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"model", MB_OPT_STRING, &model, NULL},
        {"calib", MB_OPT_STRING, &calib, NULL},
        {"mm-per-px", MB_OPT_DOUBLE, &mm, &seen_mm},
        {"verbose", MB_OPT_FLAG, &verbose, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], pos, 2,
                     &npos, &help, err) < 0)
        return mb_cli_usage_error("repeatability", err);
    if (help) {
        fputs(repeat_help, stdout);
        return MB_EXIT_OK;
    }
    if (!model)
        return mb_cli_usage_error("repeatability", "--model MODEL is required");
    if (npos != 1)
        return mb_cli_usage_error("repeatability",
                                  "give one folder DIR of images");
    if (seen_mm && !(mm > 0))
        return mb_cli_usage_error("repeatability",
                                  "--mm-per-px must be positive");
    if (seen_mm && calib)
        return mb_cli_usage_error("repeatability",
                                  "give --mm-per-px or --calib, not both");

    int status = MB_EXIT_FAIL;
    mb_part_model pm;
    memset(&pm, 0, sizeof pm);
    mb_inspector *ins = NULL;
    mb_file_list files = {0, NULL};
    reading *rd = NULL;
    char(*keys)[128] = NULL;
    double *values = NULL;
    int *counts = NULL;
    static const char *const exts[] = {".pgm", ".png", ".pnm"};

    if (mb_part_model_load(model, &pm, err) < 0) {
        mb_cli_fail("repeatability", err);
        goto done;
    }
    if (pm.n_gauges < 1) {
        snprintf(err, sizeof err,
                 "%.300s has no drawing gauges; teach it with "
                 "--gauges FILE",
                 model);
        mb_cli_fail("repeatability", err);
        goto done;
    }
    mb_inspect_params ip;
    mb_inspect_params_default(&ip);
    ip.mm_per_px = mm;
    mb_calib cal;
    if (calib) {
        if (mb_calib_file_load_for(calib, pm.imaging.width, pm.imaging.height,
                                   &cal, err) < 0) {
            mb_cli_fail("repeatability", err);
            goto done;
        }
        ip.calib = &cal;
    } else if (!(mm > 0) && !(pm.imaging.mm_per_px > 0)) {
        snprintf(err, sizeof err,
                 "%.300s has no scale; give --calib CAL.json or "
                 "--mm-per-px F",
                 model);
        mb_cli_fail("repeatability", err);
        goto done;
    }
    char cerr[MB_ERR_LEN];
    if (mb_inspector_create(&pm, &ip, &ins, cerr) < 0) {
        snprintf(err, sizeof err, "%.200s: %.300s", model, cerr);
        mb_cli_fail("repeatability", err);
        goto done;
    }
    if (mb_file_list_dir(pos[0], exts, 3, &files, err) < 0) {
        mb_cli_fail("repeatability", err);
        goto done;
    }
    if (files.count < 2) {
        snprintf(err, sizeof err,
                 "%.300s: found %d image%s; a study needs the "
                 "same parts imaged several times",
                 pos[0], files.count, files.count == 1 ? "" : "s");
        mb_cli_fail("repeatability", err);
        goto done;
    }
    int nf = files.count, ng = pm.n_gauges, n_parts = 0, n_read = 0, unfit = 0;
    rd = malloc((size_t)nf * sizeof *rd);
    keys = malloc((size_t)nf * sizeof *keys);
    values = malloc((size_t)nf * sizeof *values);
    counts = malloc((size_t)nf * sizeof *counts);
    if (!rd || !keys || !values || !counts) {
        mb_cli_fail("repeatability", "out of memory");
        goto done;
    }
    for (int i = 0; i < nf; i++) {
        const char *path = files.paths[i];
        char key[128];
        if (part_key(path, key, sizeof key) < 0) {
            snprintf(err, sizeof err,
                     "%.300s: the name has no '_' before the "
                     "shot; name images <part>_<shot>.pgm",
                     path);
            mb_cli_fail("repeatability", err);
            goto done;
        }
        mb_image img;
        if (mb_image_load(path, &img, err) < 0) {
            fprintf(stderr, "modeband repeatability: %s (left out)\n", err);
            unfit++;
            continue;
        }
        mb_verdict v;
        mb_inspector_run(ins, &img, &v);
        mb_image_free(&img);
        if (!v.converged || v.n_gauges < ng) {
            fprintf(
                stderr, "modeband repeatability: %s: %s%s%s (left out)\n", path,
                v.verdict == MB_VERDICT_FAULT ? "fault" : "no measurement",
                v.n_reasons ? ": " : "", v.n_reasons ? v.reasons[0].text : "");
            unfit++;
            continue;
        }
        int p = 0;
        while (p < n_parts && strcmp(keys[p], key) != 0)
            p++;
        if (p == n_parts)
            memcpy(keys[n_parts++], key, sizeof key);
        reading *r = &rd[n_read++];
        r->part = p;
        for (int g = 0; g < ng; g++)
            r->g[g] = v.gauges[g].value;
        if (verbose) {
            printf("%s (part %s):", path, key);
            for (int g = 0; g < ng; g++)
                printf("%s %s = %.6f", g ? ";" : "", v.gauges[g].name,
                       v.gauges[g].value);
            printf("\n");
        }
    }

    printf("repeatability study: %d images of %d parts (%d left out), measured "
           "%s\n",
           n_read, n_parts, unfit,
           calib ? "through the calibration" : "at one scale (no calibration)");
    printf("%-16s %-10s %5s %5s %9s %10s %10s %9s %7s  %s\n", "gauge", "kind",
           "parts", "n", "mean mm", "sd mm", "sd95 mm", "tol mm", "%GRR",
           "band");
    int done_any = 0;
    for (int g = 0; g < ng; g++) {
        const mb_gauge_def *gd = &pm.gauges[g];
        int nv = 0, np = 0;
        double sum = 0;
        for (int p = 0; p < n_parts; p++) {
            int c = 0;
            for (int i = 0; i < n_read; i++)
                if (rd[i].part == p && isfinite(rd[i].g[g])) {
                    values[nv + c] = rd[i].g[g];
                    sum += rd[i].g[g];
                    c++;
                }
            if (c > 0) {
                counts[np++] = c;
                nv += c;
            }
        }
        mb_grr gr;
        const char *unit = gd->kind == MB_GAUGE_AREA ? " (mm^2)" : "";
        if (np < 1 || mb_grr_compute(values, counts, np,
                                     gd->tol_hi - gd->tol_lo, &gr, err) < 0) {
            printf("%-16.16s %-10.10s %5d %5d  no study: %s\n", gd->name,
                   mb_gauge_kind_name(gd->kind), np, nv,
                   np < 1 ? "no readings" : err);
            continue;
        }
        done_any = 1;
        printf(
            "%-16.16s %-10.10s %5d %5d %9.4f %10.6f %10.6f %9.4f %7.2f  %s%s\n",
            gd->name, mb_gauge_kind_name(gd->kind), gr.parts, gr.measurements,
            sum / nv, gr.sigma, gr.sigma_upper, gr.tolerance, gr.percent_grr,
            mb_grr_band_name(gr.band), unit);
    }
    if (!done_any) {
        mb_cli_fail("repeatability", "no gauge could be studied: no part was "
                                     "measured twice");
        goto done;
    }
    if (n_parts < 10)
        printf(
            "note: %d parts; AIAG studies use 10 parts or more, 3 shots each\n",
            n_parts);
    status = MB_EXIT_OK;
done:
    free(counts);
    free(values);
    free(keys);
    free(rd);
    mb_file_list_free(&files);
    mb_inspector_close(ins);
    mb_part_model_free(&pm);
    return status;
}
