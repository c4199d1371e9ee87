/*
 * inspect/cmd_teach.c - `modeband teach`: build a part model from good
 * samples and save it.
 *
 * From landmark point files (--points DIR): every *.json / *.csv file is one
 * good part; all must have the same outline structure. The shapes are
 * aligned by GPA, PCA gives the modes, and each training part is then fitted
 * back (pose + b, unbounded) to report its Hotelling T^2, the figure a new
 * part will be judged by.
 */
#include "bands.h"
#include "calib_file.h"
#include "cli.h"
#include "gauges.h"
#include "commands.h"
#include "error.h"
#include "file_list.h"
#include "model_file.h"
#include "points_file.h"
#include "shape_model.h"
#include "stats.h"
#include "part_sections.h"
#include "teach_images.h"
#include "teach_report.h"

#include <unistd.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static const char *const teach_help =
    "usage: modeband teach --images DIR --out MODEL [--mm-per-px F]\n"
    "                      [--variance F | --modes K] [--points N]\n"
    "                      [--alpha F] [--keep-outliers] [--name TEXT]\n"
    "                      [--gauges FILE] [--calib CAL.json]\n"
    "                      [--report FILE]\n"
    "       modeband teach --points DIR --out MODEL [--variance F | --modes K]\n"
    "                      [--source TEXT] [--report FILE]\n"
    "\n"
    "Build a part model from good samples and write it to MODEL (JSON).\n"
    "\n"
    "  --images DIR    folder of images of good parts (*.pgm, *.png), one part\n"
    "                  per image, all of one size and lighting. Outlines are\n"
    "                  found and matched automatically; at least 10 images,\n"
    "                  20 or more advised. Images that cannot be used are\n"
    "                  listed with the reason.\n"
    "  --mm-per-px F   scale of the images, to report sizes in mm\n"
    "  --calib CAL.json  a calibration (modeband calibrate) for the images'\n"
    "                  frame size, instead of --mm-per-px: gauges are measured\n"
    "                  on the conveyor plane in mm through it; the model keeps\n"
    "                  its scale at the frame centre as its mm per px\n"
    "  --points N      with --images: landmarks over all outlines (default\n"
    "                  256; --landmarks N is the same)\n"
    "  --alpha F       false-reject target per good part (default 0.002)\n"
    "  --keep-outliers keep training parts that look unusual (default: they\n"
    "                  are listed and left out)\n"
    "  --name TEXT     part name stored in the model (default: the folder)\n"
    "  --gauges FILE   drawing gauges to check, in mm (needs --mm-per-px or\n"
    "                  --calib):\n"
    "                  {\"format\":\"modeband-gauges\",\"version\":1,\"gauges\":\n"
    "                  [{\"name\",\"kind\",\"outline\",\"nominal_mm\",\n"
    "                  \"tol_lo_mm\",\"tol_hi_mm\"}]}; kinds: diameter,\n"
    "                  width-min, width-max, spacing (with outline_b), length,\n"
    "                  area; outline 0 = outer edge, 1.. = holes (largest first)\n"
    "  --points DIR    folder of landmark files, one good part per file:\n"
    "                  *.json {\"format\":\"modeband-points\",\"version\":1,\n"
    "                  \"outlines\":[[[x,y],...], ...]} or *.csv lines\n"
    "                  'outline,x,y' (outline 0 = outer edge, 1.. = holes).\n"
    "                  Every file must have the same outlines and point counts.\n"
    "  --out MODEL     model file to write\n"
    "  --variance F    keep the fewest modes explaining fraction F of the\n"
    "                  shape variance (0 < F <= 1; default 0.98)\n"
    "  --modes K       keep exactly K modes instead\n"
    "  --source TEXT   note stored in the model (default: the folder name)\n"
    "  --report FILE   also write the teach report (HTML with pictures)\n"
    "\n"
    "Prints the modes kept, the variance each explains and the largest\n"
    "training-part T^2. Exit status: 0 done, 1 failure, 2 usage error.\n";

static int same_layout(const mb_layout *a, const mb_layout *b)
{
    if (a->n_outlines != b->n_outlines || a->n_points != b->n_points)
        return 0;
    for (int i = 0; i < a->n_outlines; i++)
        if (a->counts[i] != b->counts[i])
            return 0;
    return 1;
}

static void layout_text(const mb_layout *l, char *buf, size_t len)
{
    size_t used = (size_t)snprintf(buf, len, "%d outline%s (", l->n_outlines,
                                   l->n_outlines == 1 ? "" : "s");
    for (int i = 0; i < l->n_outlines && used < len; i++)
        used += (size_t)snprintf(buf + used, len - used, "%s%d", i ? "+" : "",
                                 l->counts[i]);
    if (used < len)
        snprintf(buf + used, len - used, " points)");
}

/* Load every point file into one 2n x m column-major matrix. */
static int load_point_sets(const mb_file_list *files, mb_layout *layout,
                           double **shapes_out, char *err)
{
    double *shapes = NULL;
    int d = 0;
    for (int j = 0; j < files->count; j++) {
        mb_layout l;
        double *xy = NULL;
        int rc = mb_points_load(files->paths[j], &l, &xy, err);
        if (rc < 0) {
            free(shapes);
            return rc;
        }
        if (j == 0) {
            *layout = l;
            d = 2 * l.n_points;
            shapes = malloc((size_t)d * (size_t)files->count * sizeof *shapes);
            if (!shapes) {
                free(xy);
                return mb_err_set(err, MB_ENOMEM, "out of memory for %d shapes",
                                  files->count);
            }
        } else if (!same_layout(layout, &l)) {
            char a[256], b[256];
            layout_text(&l, a, sizeof a);
            layout_text(layout, b, sizeof b);
            free(xy);
            free(shapes);
            return mb_err_set(err, MB_ESIZE,
                              "%s: has %s but %s has %s; every part must have "
                              "the same outlines and point counts",
                              files->paths[j], a, files->paths[0], b);
        }
        memcpy(shapes + (size_t)j * (size_t)d, xy, (size_t)d * sizeof *xy);
        free(xy);
    }
    *shapes_out = shapes;
    return MB_OK;
}

static void print_summary(const mb_shape_model *m, const mb_file_list *files,
                          const double *t2, const char *out)
{
    const mb_layout *l = mb_shape_model_layout(m);
    const mb_train_info *ti = mb_shape_model_info(m);
    const double *eig = mb_shape_model_eig(m);
    double total = mb_shape_model_total_var(m), cum = 0.0;
    char lt[256];
    layout_text(l, lt, sizeof lt);
    printf("taught from %d parts, %s\n", ti->n_samples, lt);
    printf("alignment (GPA): %d iterations, %s\n", ti->gpa_iterations,
           ti->gpa_converged ? "converged" : "stopped at the iteration cap");
    printf("modes kept: %d of %d", mb_shape_model_n_modes(m),
           mb_shape_model_n_eig(m));
    if (ti->fixed_modes > 0)
        printf(" (asked for %d)\n", ti->fixed_modes);
    else
        printf(" (to explain %.1f %% of the shape variance)\n",
               100.0 * ti->variance_fraction);
    printf("  mode  std.dev    variance %%  cumulative %%\n");
    for (int i = 0; i < mb_shape_model_n_modes(m); i++) {
        double f = total > 0 ? eig[i] / total : 0.0;
        cum += f;
        printf("  %4d  %9.3e  %10.2f  %12.2f\n", i + 1, sqrt(eig[i]),
               100.0 * f, 100.0 * cum);
    }
    int worst = 0;
    for (int j = 1; j < files->count; j++)
        if (t2[j] > t2[worst])
            worst = j;
    printf("largest training-part T^2: %.3f (%s)\n", t2[worst],
           files->paths[worst]);
    printf("model written to %s\n", out);
}

/* Print the learned limits and the leave-one-out false-reject estimate. */
static void print_limits(const mb_limits *lim, int m, int k)
{
    printf("tolerance bands (learned leave-one-out, target false-reject "
           "rate %.2f %% per part):\n", 100.0 * lim->alpha);
    printf("  size (RMS radius): %.3f px, band %.3f .. %.3f px\n",
           lim->size_mean, lim->size_lo, lim->size_hi);
    for (int q = 0; q < lim->n_judged; q++)
        printf("  mode %d: within +-%.2f sd\n", q + 1, lim->mode_band[q]);
    printf("  T^2 over %d modes: limit %.2f (Phase II %.2f x %.2f)\n", k,
           lim->t2_limit, lim->t2_phase2, lim->t2_inflation);
    printf("  residual outside the model: limit %.3g (Jackson-Mudholkar "
           "from the eigenvalues: %.3g)\n", lim->spe_limit, lim->spe_jm);
    double lo = INFINITY, hi = 0.0;
    for (int j = 0; j < lim->n_landmarks; j++) {
        lo = fmin(lo, lim->local_limit[j]);
        hi = fmax(hi, lim->local_limit[j]);
    }
    printf("  local deviation: %.2f .. %.2f px depending on the place\n", lo, hi);
    printf("estimated false-reject rate (leave-one-out): %d of %d good parts "
           "(%.1f %%; 95 %% upper bound %.1f %%)\n",
           lim->loo_rejects, m, 100.0 * lim->frr_loo, 100.0 * lim->frr_upper);
    int want = mb_bands_parts_advised(m, k, lim->alpha, 1.25);
    if (want > m)
        printf("advice: with %d parts the T^2 limit is %.0f %% wider than with "
               "unlimited samples; about %d more good parts would bring it "
               "within 25 %%\n",
               m, 100.0 * (lim->t2_phase2 /
                           mb_stats_chi2_quantile_upper(lim->alpha / (4 + lim->n_judged), k) - 1.0),
               want - m);
}

static int teach_points(const char *dir, const char *out, double variance,
                        int modes, const char *source, const char *report)
{
    char err[MB_ERR_LEN] = "";
    static const char *const exts[] = {".json", ".csv"};
    mb_file_list files = {0, NULL};
    mb_layout layout;
    double *shapes = NULL, *t2 = NULL, *work = NULL, *b = NULL;
    mb_shape_model *m = NULL;
    int status = MB_EXIT_FAIL;

    int rc = mb_file_list_dir(dir, exts, 2, &files, err);
    if (rc < 0)
        goto fail;
    if (files.count < 3) {
        snprintf(err, sizeof err,
                 "%s: found %d point file%s (*.json, *.csv); teaching needs at "
                 "least 3 good parts",
                 dir, files.count, files.count == 1 ? "" : "s");
        goto fail;
    }
    if ((rc = load_point_sets(&files, &layout, &shapes, err)) < 0)
        goto fail;

    mb_pca_params pp;
    mb_pca_params_default(&pp);
    if (modes > 0)
        pp.fixed_modes = modes;
    else
        pp.variance_fraction = variance;
    mb_train_info info;
    memset(&info, 0, sizeof info);
    time_t now = time(NULL);
    struct tm tmv;
    gmtime_r(&now, &tmv);
    strftime(info.created, sizeof info.created, "%Y-%m-%dT%H:%M:%SZ", &tmv);
    snprintf(info.source, sizeof info.source, "%s", source ? source : dir);
    info.variance_fraction = modes > 0 ? 0.0 : variance;
    info.fixed_modes = modes > 0 ? modes : 0;

    int d = 2 * layout.n_points;
    rc = mb_shape_model_build(shapes, d, &layout, files.count, NULL, &pp,
                              &info, &m, err);
    if (rc < 0)
        goto fail;

    /* Fit every training part back, unbounded, for its T^2. */
    int k = mb_shape_model_n_modes(m);
    t2 = malloc((size_t)files.count * sizeof *t2);
    b = malloc((size_t)(k > 0 ? k : 1) * sizeof *b);
    work = malloc((size_t)mb_shape_model_fit_work_size(m) * sizeof *work);
    if (!t2 || !b || !work) {
        snprintf(err, sizeof err, "out of memory");
        goto fail;
    }
    mb_fit_params fp;
    mb_fit_params_default(&fp);
    fp.b_limit = 0.0;
    for (int j = 0; j < files.count; j++) {
        mb_fit_result res;
        memset(b, 0, (size_t)k * sizeof *b);
        rc = mb_shape_model_fit(m, shapes + (size_t)j * (size_t)d, NULL, &fp,
                                b, &res, work);
        if (rc < 0) {
            snprintf(err, sizeof err, "%s: fitting the model back failed: %s",
                     files.paths[j], mb_strerror(rc));
            goto fail;
        }
        t2[j] = mb_shape_model_t2(m, b);
    }
    if ((rc = mb_model_save(out, m, err)) < 0)
        goto fail;
    print_summary(m, &files, t2, out);

    mb_limits lim;
    mb_bands_scores sc;
    memset(&lim, 0, sizeof lim);
    memset(&sc, 0, sizeof sc);
    int have_lim = 0;
    if (files.count >= 5 && k <= files.count - 2) {
        char berr[MB_ERR_LEN] = "";
        if (mb_bands_learn(shapes, d, &layout, files.count, k, NULL, &lim, &sc,
                           berr) == 0) {
            have_lim = 1;
            print_limits(&lim, files.count, k);
        } else {
            printf("tolerance bands not learned: %s\n", berr);
        }
    } else {
        printf("tolerance bands not learned: they need at least 5 parts and "
               "2 more parts than modes\n");
    }
    if (report) {
        mb_report_part *rp = calloc((size_t)files.count, sizeof *rp);
        if (rp) {
            for (int j = 0; j < files.count; j++) {
                const char *slash = strrchr(files.paths[j], '/');
                rp[j].name = slash ? slash + 1 : files.paths[j];
                rp[j].t2 = have_lim ? sc.t2[j] : t2[j];
                rp[j].outlier = 0;
            }
            time_t now2 = time(NULL);
            char when[64];
            strftime(when, sizeof when, "taught %Y-%m-%d %H:%M UTC", gmtime(&now2));
            mb_teach_report r = {0};
            r.title = source ? source : dir;
            r.generated = when;
            r.model = m;
            r.limits = have_lim ? &lim : NULL;
            r.parts = rp;
            r.n_parts = files.count;
            if (mb_teach_report_write(report, &r, err) == 0)
                printf("teach report: %s\n", report);
            else
                fprintf(stderr, "modeband teach: %s\n", err);
            free(rp);
        }
    }
    mb_bands_scores_free(&sc);
    mb_limits_free(&lim);
    status = MB_EXIT_OK;
fail:
    if (status != MB_EXIT_OK)
        mb_cli_fail("teach", err[0] ? err : "teaching failed");
    free(work);
    free(b);
    free(t2);
    free(shapes);
    mb_shape_model_close(m);
    mb_file_list_free(&files);
    return status;
}

static void print_modes(const mb_shape_model *m)
{
    const double *eig = mb_shape_model_eig(m);
    double total = mb_shape_model_total_var(m), cum = 0.0;
    printf("  mode  std.dev    variance %%  cumulative %%\n");
    for (int i = 0; i < mb_shape_model_n_modes(m); i++) {
        double f = total > 0 ? eig[i] / total : 0.0;
        cum += f;
        printf("  %4d  %9.3e  %10.2f  %12.2f\n", i + 1, sqrt(eig[i]),
               100.0 * f, 100.0 * cum);
    }
}

static const char *base_name(const char *path)
{
    const char *s = strrchr(path, '/');
    return s ? s + 1 : path;
}

static void write_images_report(const char *report, const mb_part_model *pm,
                                const mb_teach_log *log, const char *title)
{
    char err[MB_ERR_LEN];
    mb_report_part *rp = calloc((size_t)(log->n_used + 1), sizeof *rp);
    mb_report_skip *rs = calloc((size_t)(log->n_skipped + 1), sizeof *rs);
    char (*notes)[96] = calloc((size_t)(log->n_used + 1), sizeof *notes);
    if (!rp || !rs || !notes) {
        fprintf(stderr, "modeband teach: out of memory for the report\n");
        goto done;
    }
    for (int j = 0; j < log->n_used; j++) {
        rp[j].name = base_name(log->used[j]);
        rp[j].t2 = log->scores.t2[j];
        int f = log->scores.fails[j];
        if (f)
            snprintf(notes[j], sizeof notes[j], "leave-one-out would reject:%s%s%s%s%s",
                     f & MB_BAND_SIZE ? " size" : "", f & MB_BAND_MODE ? " mode" : "",
                     f & MB_BAND_T2 ? " T^2" : "", f & MB_BAND_SPE ? " residual" : "",
                     f & MB_BAND_LOCAL ? " local deviation" : "");
        rp[j].note = notes[j];
    }
    for (int j = 0; j < log->n_skipped; j++) {
        rs[j].name = base_name(log->skips[j].path);
        rs[j].reason = log->skips[j].reason;
    }
    time_t now = time(NULL);
    char when[64];
    strftime(when, sizeof when, "taught %Y-%m-%d %H:%M UTC", gmtime(&now));
    mb_teach_report r = {0};
    r.title = title;
    r.generated = when;
    r.model = pm->shape;
    r.limits = pm->has_limits ? &pm->limits : NULL;
    r.mm_per_px = pm->imaging.mm_per_px;
    r.parts = rp;
    r.n_parts = log->n_used;
    r.skipped = rs;
    r.n_skipped = log->n_skipped;
    if (mb_teach_report_write(report, &r, err) == 0)
        printf("teach report: %s\n", report);
    else
        fprintf(stderr, "modeband teach: %s\n", err);
done:
    free(notes);
    free(rs);
    free(rp);
}

static int teach_from_images(const char *dir, const char *out,
                             const mb_teach_params *tp, const char *report)
{
    char err[MB_ERR_LEN] = "";
    mb_part_model pm;
    mb_teach_log log;
    printf("teaching from the images in %s\n", dir);
    fflush(stdout);
    int rc = mb_teach_images(dir, tp, &pm, &log, err);
    if (log.n_skipped > 0) {
        printf("images not used: %d\n", log.n_skipped);
        for (int i = 0; i < log.n_skipped; i++)
            printf("  %s: %s\n", base_name(log.skips[i].path), log.skips[i].reason);
    }
    if (rc < 0) {
        mb_teach_log_free(&log);
        return mb_cli_fail("teach", err);
    }
    const mb_shape_model *sm = pm.shape;
    const mb_layout *l = mb_shape_model_layout(sm);
    const mb_train_info *ti = mb_shape_model_info(sm);
    int k = mb_shape_model_n_modes(sm);
    char lt[256];
    layout_text(l, lt, sizeof lt);
    printf("images: %d found, %d used, %d skipped (%d of them outliers)\n",
           log.n_images, log.n_used, log.n_skipped, log.n_outliers);
    printf("part: %s on a %s field, %dx%d px frames\n",
           pm.imaging.dark_part ? "dark" : "bright",
           pm.imaging.dark_part ? "bright" : "dark", pm.imaging.width,
           pm.imaging.height);
    if (tp->calib)
        printf("scale: through the calibration, on the conveyor plane (%.6f mm/px "
               "at the frame centre)\n", pm.imaging.mm_per_px);
    printf("outlines: %s (outer edge first, then holes)\n", lt);
    printf("edges: median blur %.2f px, contrast %.0f grey levels\n", log.blur,
           log.contrast);
    printf("alignment (GPA): %d iterations, %s\n", ti->gpa_iterations,
           ti->gpa_converged ? "converged" : "stopped at the iteration cap");
    printf("modes kept: %d", k);
    if (tp->modes > 0)
        printf(" (asked for %d)\n", tp->modes);
    else if (log.modes_capped)
        printf(" (capped at a third of the parts; %.1f %% of the variance "
               "would need more)\n", 100.0 * tp->variance);
    else
        printf(" (to explain %.1f %% of the shape variance)\n", 100.0 * tp->variance);
    print_modes(sm);
    print_limits(&pm.limits, log.n_used, k);
    if (pm.imaging.mm_per_px > 0)
        printf("  size band in mm (RMS radius): %.3f .. %.3f mm\n",
               pm.limits.size_lo * pm.imaging.mm_per_px,
               pm.limits.size_hi * pm.imaging.mm_per_px);
    for (int g = 0; g < pm.n_gauges; g++) {
        const mb_gauge_def *gd = &pm.gauges[g];
        double lo = gd->nominal + gd->tol_lo, hi = gd->nominal + gd->tol_hi;
        double s = gd->taught_sd;
        double cp = s > 0 ? (hi - lo) / (6 * s) : 0;
        double cpk = s > 0 ? fmin(hi - gd->taught_mean, gd->taught_mean - lo) / (3 * s) : 0;
        printf("  gauge %s (%s, outline %d): drawing %.3f %+.3f/%+.3f mm; taught "
               "mean %.3f mm, sd %.4f mm (Cp %.2f, Cpk %.2f)\n", gd->name,
               mb_gauge_kind_name(gd->kind), gd->a, gd->nominal, gd->tol_hi,
               gd->tol_lo, gd->taught_mean, gd->taught_sd, cp, cpk);
    }
    if (log.n_used < MB_TEACH_GOOD_IMAGES)
        printf("warning: only %d good parts were usable; %d or more are "
               "advised for stable limits\n", log.n_used, MB_TEACH_GOOD_IMAGES);
    printf("time: outlines %.2f s, correspondence %.2f s, model %.2f s, "
           "bands %.2f s, profiles %.2f s, second pass %.2f s, total %.2f s\n",
           log.seconds[0], log.seconds[1], log.seconds[2], log.seconds[3],
           log.seconds[4], log.seconds[6], log.seconds[5]);
    int status = MB_EXIT_OK;
    if (mb_part_model_save(out, &pm, err) < 0) {
        status = mb_cli_fail("teach", err);
    } else {
        printf("model written to %s\n", out);
        if (report)
            write_images_report(report, &pm, &log, pm.name);
    }
    mb_part_model_free(&pm);
    mb_teach_log_free(&log);
    return status;
}

int mb_cmd_teach(int argc, char **argv)
{
    const char *points = NULL, *images = NULL, *out = NULL, *source = NULL,
               *report = NULL, *name = NULL, *gauges = NULL, *calib = NULL;
    double variance = 0.98, mm_per_px = 0.0, alpha = 0.002;
    int modes = 0, seen_var = 0, seen_modes = 0, help = 0, npos = 0;
    int budget = 256, keep = 0, seen_mm = 0;
    const char *pos[1];
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"points", MB_OPT_STRING, &points, NULL},
        {"images", MB_OPT_STRING, &images, NULL},
        {"out", MB_OPT_STRING, &out, NULL},
        {"variance", MB_OPT_DOUBLE, &variance, &seen_var},
        {"modes", MB_OPT_INT, &modes, &seen_modes},
        {"source", MB_OPT_STRING, &source, NULL},
        {"report", MB_OPT_STRING, &report, NULL},
        {"mm-per-px", MB_OPT_DOUBLE, &mm_per_px, &seen_mm},
        {"landmarks", MB_OPT_INT, &budget, NULL},
        {"alpha", MB_OPT_DOUBLE, &alpha, NULL},
        {"keep-outliers", MB_OPT_FLAG, &keep, NULL},
        {"name", MB_OPT_STRING, &name, NULL},
        {"gauges", MB_OPT_STRING, &gauges, NULL},
        {"calib", MB_OPT_STRING, &calib, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], pos, 0,
                     &npos, &help, err) < 0)
        return mb_cli_usage_error("teach", err);
    if (help) {
        fputs(teach_help, stdout);
        return MB_EXIT_OK;
    }
    if (images && points) {
        /* with --images, --points is the landmark budget (a number) */
        char *end = NULL;
        long v = strtol(points, &end, 10);
        if (end == points || *end || v < 1 || v > 100000)
            return mb_cli_usage_error("teach", "with --images, --points expects a "
                                               "number of landmarks");
        budget = (int)v;
        points = NULL;
    }
    if (!points == !images)
        return mb_cli_usage_error("teach", "give either --images DIR or --points DIR");
    if (!out)
        return mb_cli_usage_error("teach", "--out MODEL is required");
    if (seen_var && seen_modes)
        return mb_cli_usage_error("teach", "give --variance or --modes, not both");
    if (seen_var && !(variance > 0.0 && variance <= 1.0))
        return mb_cli_usage_error("teach", "--variance must be in (0, 1]");
    if (seen_modes && modes < 1)
        return mb_cli_usage_error("teach", "--modes must be at least 1");
    if (seen_mm && !(mm_per_px > 0.0))
        return mb_cli_usage_error("teach", "--mm-per-px must be a positive number");
    if (seen_mm && calib)
        return mb_cli_usage_error("teach", "give --mm-per-px or --calib, not both");
    if (calib && points)
        return mb_cli_usage_error("teach", "--calib goes with --images");
    if (!(alpha > 0.0 && alpha < 0.5))
        return mb_cli_usage_error("teach", "--alpha must be between 0 and 0.5");
    if (budget < 16 || budget > 4096)
        return mb_cli_usage_error("teach", "--landmarks must be between 16 and 4096");
    if (points)
        return teach_points(points, out, variance, seen_modes ? modes : 0,
                            source, report);
    mb_teach_params tp;
    mb_teach_params_default(&tp);
    tp.variance = variance;
    tp.modes = seen_modes ? modes : 0;
    tp.points = budget;
    tp.mm_per_px = mm_per_px;
    tp.keep_outliers = keep;
    tp.bands.alpha = alpha;
    tp.name = name;
    tp.progress = isatty(STDERR_FILENO) ? stderr : NULL;
    /* The frame size is checked against the images' once they are read. */
    mb_calib cal;
    if (calib) {
        if (mb_calib_file_load(calib, &cal, err) < 0)
            return mb_cli_fail("teach", err);
        tp.calib = &cal;
    }
    mb_gauge_def defs[MB_MAX_GAUGES];
    if (gauges) {
        if (!(mm_per_px > 0) && !calib)
            return mb_cli_usage_error("teach", "--gauges needs --mm-per-px or --calib "
                                               "(gauges are in mm)");
        if (mb_gauges_load(gauges, defs, &tp.n_gauges, err) < 0)
            return mb_cli_fail("teach", err);
        tp.gauges = defs;
    }
    return teach_from_images(images, out, &tp, report);
}
