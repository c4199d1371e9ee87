/*
 * inspect/teach_images.c - teaching from images of good parts.
 *
 * Stages: (1) read each image, find the part and measure its outlines to
 * sub-pixel (fit/outline); images that cannot be used are listed with the
 * reason; (2) correspondence of all outlines against the evolving mean
 * (fit/correspond); (3) GPA + PCA (fit/shape_model); (4) tolerance bands
 * leave-one-out (bands.c), with training parts that are themselves outliers
 * left out and stages 2-4 run again; (5) grey-level profile models from a
 * second pass over the used images (fit/profile).
 */
#include "teach_images.h"

#include "correspond.h"
#include "error.h"
#include "file_list.h"
#include "image_file.h"
#include "outline.h"
#include "pyramid.h"
#include "verdict.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* The parts stay below min(m - 2, m / 3) modes when k comes from the
   variance fraction: with few parts, per-mode limits are noise. */
#define MODES_PER_PART_DIV 3

void mb_teach_params_default(mb_teach_params *p)
{
    memset(p, 0, sizeof *p);
    p->variance = 0.98;
    p->points = 256;
    mb_bands_params_default(&p->bands);
}

void mb_teach_log_free(mb_teach_log *log)
{
    if (!log)
        return;
    for (int i = 0; i < log->n_used; i++)
        free(log->used[i]);
    free(log->used);
    for (int i = 0; i < log->n_skipped; i++)
        free(log->skips[i].path);
    free(log->skips);
    mb_bands_scores_free(&log->scores);
    memset(log, 0, sizeof *log);
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void progress(FILE *f, int done, int total, const char *what)
{
    if (!f || total <= 0)
        return;
    int width = 30, fill = (int)((long)width * done / total);
    fprintf(f, "\r%-12s [", what);
    for (int i = 0; i < width; i++)
        fputc(i < fill ? '#' : '.', f);
    fprintf(f, "] %d/%d", done, total);
    if (done == total)
        fputc('\n', f);
    fflush(f);
}

static int add_skip(mb_teach_log *log, const char *path, const char *reason)
{
    mb_teach_skip *s = realloc(log->skips, (size_t)(log->n_skipped + 1) * sizeof *s);
    if (!s)
        return MB_ENOMEM;
    log->skips = s;
    s[log->n_skipped].path = strdup(path);
    if (!s[log->n_skipped].path)
        return MB_ENOMEM;
    snprintf(s[log->n_skipped].reason, sizeof s[log->n_skipped].reason, "%s",
             reason);
    log->n_skipped++;
    return MB_OK;
}

/* The measured outlines of one usable image. */
typedef struct {
    int file;          /* index in the folder listing */
    mb_polyline_set set;
    double *xy;        /* owned copy of the points */
    int dark;
    double blur, contrast;
} found_part;

static void free_found(found_part *f, int n)
{
    for (int i = 0; i < n; i++)
        free(f[i].xy);
    free(f);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Stage 1: outlines of every image. */
static int find_outlines(const mb_file_list *files, const mb_teach_params *p,
                         found_part **out, int *n_out, int *w, int *h,
                         mb_teach_log *log, char *err)
{
    found_part *fp = calloc((size_t)files->count, sizeof *fp);
    mb_outliner *ol = NULL;
    mb_outline_config oc;
    mb_outline_config_default(&oc);
    int n = 0, rc = MB_OK;
    if (!fp)
        return mb_err_set(err, MB_ENOMEM, "out of memory");
    *w = *h = 0;
    for (int i = 0; i < files->count; i++) {
        char why[MB_ERR_LEN] = "";
        mb_image img;
        progress(p->progress, i, files->count, "outlines");
        if (mb_image_load(files->paths[i], &img, why) < 0) {
            if ((rc = add_skip(log, files->paths[i], why)) < 0)
                goto fail;
            continue;
        }
        if (!ol) {
            if ((rc = mb_outliner_create(img.width, img.height, &oc, &ol, err)) < 0) {
                mb_image_free(&img);
                goto fail;
            }
            *w = img.width;
            *h = img.height;
        }
        if (img.width != *w || img.height != *h) {
            snprintf(why, sizeof why,
                     "the image is %dx%d px but the first usable image is %dx%d px",
                     img.width, img.height, *w, *h);
            mb_image_free(&img);
            if ((rc = add_skip(log, files->paths[i], why)) < 0)
                goto fail;
            continue;
        }
        mb_outline_result res;
        int orc = mb_outliner_run(ol, &img, &res, why);
        if (orc == 0 && res.candidates >= 2) {
            snprintf(why, sizeof why,
                     "%d parts in view (a second one of %.0f px^2); a teaching "
                     "image must show one part", res.candidates, res.runner_up_area);
            orc = MB_EFORMAT;
        }
        if (orc < 0) {
            mb_image_free(&img);
            if ((rc = add_skip(log, files->paths[i], why)) < 0)
                goto fail;
            continue;
        }
        size_t nv = (size_t)2 * res.layout.n_points;
        fp[n].xy = malloc(nv * sizeof *fp[n].xy);
        if (!fp[n].xy) {
            mb_image_free(&img);
            rc = mb_err_set(err, MB_ENOMEM, "out of memory");
            goto fail;
        }
        memcpy(fp[n].xy, res.points, nv * sizeof *fp[n].xy);
        fp[n].set.n_outlines = res.layout.n_outlines;
        memcpy(fp[n].set.counts, res.layout.counts, sizeof fp[n].set.counts);
        fp[n].set.xy = fp[n].xy;
        fp[n].file = i;
        fp[n].dark = res.part_dark;
        fp[n].blur = res.blur;
        fp[n].contrast = res.contrast;
        n++;
        mb_image_free(&img);
    }
    progress(p->progress, files->count, files->count, "outlines");
    mb_outliner_close(ol);
    *out = fp;
    *n_out = n;
    return MB_OK;
fail:
    mb_outliner_close(ol);
    free_found(fp, n);
    return rc;
}

/* Stages 2-4 on the parts marked in use[]; fills the model and limits. */
static int model_round(const found_part *fp, int n, int *use,
                       const mb_teach_params *p, const mb_file_list *files,
                       mb_part_model *pm, double **shapes_out, int **col_file,
                       int *m_out, mb_teach_log *log, double *t, char *err)
{
    mb_polyline_set *sets = malloc((size_t)n * sizeof *sets);
    int *idx = malloc((size_t)n * sizeof *idx);
    double *shapes = NULL;
    mb_correspond_info info;
    memset(&info, 0, sizeof info);
    int m = 0, rc;
    if (!sets || !idx) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto done;
    }
    for (int i = 0; i < n; i++)
        if (use[i]) {
            sets[m] = fp[i].set;
            idx[m++] = i;
        }
    double t0 = now_s();
    mb_correspond_params cp;
    mb_correspond_params_default(&cp);
    cp.budget = p->points;
    cp.skip_bad = 1;
    cp.min_parts = MB_TEACH_MIN_IMAGES;
    mb_layout layout;
    rc = mb_correspond_run(sets, m, &cp, &layout, &shapes, &info, err);
    t[1] += now_s() - t0;
    /* parts refused by the correspondence are skipped with its reason */
    int *cf = malloc((size_t)m * sizeof *cf);
    if (!cf) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto done;
    }
    for (int j = 0; j < info.n_parts; j++) {
        int file = fp[idx[j]].file;
        if (info.parts[j].status < 0) {
            use[idx[j]] = 0;
            if (add_skip(log, files->paths[file], info.parts[j].reason) < 0) {
                free(cf);
                rc = mb_err_set(err, MB_ENOMEM, "out of memory");
                goto done;
            }
        } else if (info.parts[j].column >= 0 && info.parts[j].column < m) {
            cf[info.parts[j].column] = idx[j];
        }
    }
    if (rc < 0) {
        free(cf);
        goto done;
    }
    int used = info.n_used;

    t0 = now_s();
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    int kcap = used / MODES_PER_PART_DIV;
    if (kcap > used - 2)
        kcap = used - 2;
    if (kcap < 1)
        kcap = 1;
    if (p->modes > 0) {
        pp.fixed_modes = p->modes < used - 2 ? p->modes : used - 2;
    } else {
        pp.variance_fraction = p->variance;
    }
    mb_train_info ti;
    memset(&ti, 0, sizeof ti);
    time_t now = time(NULL);
    struct tm tmv;
    gmtime_r(&now, &tmv);
    strftime(ti.created, sizeof ti.created, "%Y-%m-%dT%H:%M:%SZ", &tmv);
    snprintf(ti.source, sizeof ti.source, "%d images", used);
    ti.variance_fraction = p->modes > 0 ? 0.0 : p->variance;
    ti.fixed_modes = p->modes > 0 ? p->modes : 0;
    mb_shape_model *sm = NULL;
    rc = mb_shape_model_build(shapes, 2 * layout.n_points, &layout, used, NULL,
                              &pp, &ti, &sm, err);
    if (rc == 0 && p->modes <= 0 && mb_shape_model_n_modes(sm) > kcap) {
        mb_shape_model_close(sm);
        sm = NULL;
        pp.fixed_modes = kcap;
        log->modes_capped = 1;
        rc = mb_shape_model_build(shapes, 2 * layout.n_points, &layout, used,
                                  NULL, &pp, &ti, &sm, err);
    }
    t[2] += now_s() - t0;
    if (rc < 0) {
        free(cf);
        goto done;
    }
    mb_shape_model_close(pm->shape);
    pm->shape = sm;

    t0 = now_s();
    mb_limits_free(&pm->limits);
    mb_bands_scores_free(&log->scores);
    rc = mb_bands_learn(shapes, 2 * layout.n_points, &layout, used,
                        mb_shape_model_n_modes(sm), &p->bands, &pm->limits,
                        &log->scores, err);
    t[3] += now_s() - t0;
    if (rc < 0) {
        free(cf);
        goto done;
    }
    pm->has_limits = 1;
    *shapes_out = shapes;
    shapes = NULL;
    *col_file = cf;
    *m_out = used;
done:
    mb_correspond_info_free(&info);
    free(shapes);
    free(sets);
    free(idx);
    return rc;
}

/*
 * Stage 6: measure every used image the way inspection will (search, then
 * the outline measured at full resolution and matched to the landmarks) and
 * build the shape model and the bands again from those outlines. The first
 * outlines came from the outliner, whose edge estimator differs from the
 * search's by a few hundredths of a pixel; on thin parts (a ring's width)
 * that alone moves a mode by a standard deviation, so limits must be learned
 * from the measurements they will judge. Parts the inspection path cannot
 * fit are left out with the reason.
 */
static int remeasure(mb_part_model *pm, const mb_teach_params *p,
                     mb_teach_log *log, char *err)
{
    int m = log->n_used, rc;
    const mb_layout *layout = mb_shape_model_layout(pm->shape);
    mb_layout lay = *layout;
    int d = 2 * lay.n_points, k = mb_shape_model_n_modes(pm->shape), m2 = 0;
    double *shapes = malloc((size_t)d * (m > 0 ? m : 1) * sizeof *shapes);
    int *keep = calloc((size_t)(m > 0 ? m : 1), sizeof *keep);
    mb_inspector *ins = NULL;
    mb_inspect_params ip;
    mb_inspect_params_default(&ip);
    ip.mm_per_px = pm->imaging.mm_per_px;
    ip.calib = p->calib;
    if (!shapes || !keep) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto done;
    }
    if ((rc = mb_inspector_create(pm, &ip, &ins, err)) < 0)
        goto done;
    double gsum[MB_MAX_GAUGES] = {0}, gsq[MB_MAX_GAUGES] = {0};
    int gcount[MB_MAX_GAUGES] = {0};
    for (int j = 0; j < m; j++) {
        mb_image img;
        mb_verdict v;
        progress(p->progress, j, m, "measuring");
        if ((rc = mb_image_load(log->used[j], &img, err)) < 0)
            goto done;
        mb_inspector_run(ins, &img, &v);
        if (v.converged && v.corresponded) {
            memcpy(shapes + (size_t)m2 * d, v.corresponded, (size_t)d * sizeof *shapes);
            keep[j] = 1;
            m2++;
            for (int g = 0; g < v.n_gauges && g < MB_MAX_GAUGES; g++)
                if (isfinite(v.gauges[g].value)) {
                    gsum[g] += v.gauges[g].value;
                    gsq[g] += v.gauges[g].value * v.gauges[g].value;
                    gcount[g]++;
                }
        } else if ((rc = add_skip(log, log->used[j],
                                  "the taught model could not be fitted to it "
                                  "(second pass); left out")) < 0) {
            mb_image_free(&img);
            goto done;
        }
        mb_image_free(&img);
    }
    progress(p->progress, m, m, "measuring");
    mb_inspector_close(ins);
    ins = NULL;
    for (int g = 0; g < pm->n_gauges; g++) {
        int c = gcount[g];
        pm->gauges[g].taught_mean = c > 0 ? gsum[g] / c : 0.0;
        double var = c > 1 ? (gsq[g] - gsum[g] * gsum[g] / c) / (c - 1) : 0.0;
        pm->gauges[g].taught_sd = var > 0 ? sqrt(var) : 0.0;
    }
    if (m2 < MB_TEACH_MIN_IMAGES || k > m2 - 2) {
        rc = mb_err_set(err, MB_EDEGENERATE,
                        "only %d of %d parts could be measured the way inspection "
                        "measures them; at least %d are needed", m2, m,
                        MB_TEACH_MIN_IMAGES);
        goto done;
    }
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    pp.fixed_modes = k;
    mb_train_info ti = *mb_shape_model_info(pm->shape);
    mb_shape_model *sm = NULL;
    if ((rc = mb_shape_model_build(shapes, d, &lay, m2, NULL, &pp, &ti, &sm, err)) < 0)
        goto done;
    mb_limits lim;
    mb_bands_scores sc;
    if ((rc = mb_bands_learn(shapes, d, &lay, m2, k, &p->bands, &lim, &sc, err)) < 0) {
        mb_shape_model_close(sm);
        goto done;
    }
    mb_shape_model_close(pm->shape);
    pm->shape = sm;
    mb_limits_free(&pm->limits);
    pm->limits = lim;
    mb_bands_scores_free(&log->scores);
    log->scores = sc;
    /* the used list follows the parts kept */
    int w = 0;
    for (int j = 0; j < m; j++) {
        if (keep[j])
            log->used[w++] = log->used[j];
        else
            free(log->used[j]);
    }
    log->n_used = w;
    rc = MB_OK;
done:
    mb_inspector_close(ins);
    free(keep);
    free(shapes);
    return rc;
}

int mb_teach_images(const char *dir, const mb_teach_params *p,
                    mb_part_model *pm, mb_teach_log *log, char *err)
{
    static const char *const exts[] = {".pgm", ".png", ".pnm"};
    mb_file_list files = {0, NULL};
    found_part *fp = NULL;
    int n = 0, w = 0, h = 0, rc, *use = NULL, *col = NULL, m = 0;
    double *shapes = NULL, t_start = now_s();
    mb_pyramid *pyr = NULL;
    mb_profile_learner *pl = NULL;
    memset(pm, 0, sizeof *pm);
    memset(log, 0, sizeof *log);

    if ((rc = mb_file_list_dir(dir, exts, 3, &files, err)) < 0)
        return rc;
    log->n_images = files.count;
    if (files.count < MB_TEACH_MIN_IMAGES) {
        rc = mb_err_set(err, MB_EDEGENERATE,
                        "%s: found %d image%s (*.pgm, *.png); teaching needs at "
                        "least %d images of good parts (20 or more advised)",
                        dir, files.count, files.count == 1 ? "" : "s",
                        MB_TEACH_MIN_IMAGES);
        goto fail;
    }
    double t0 = now_s();
    if ((rc = find_outlines(&files, p, &fp, &n, &w, &h, log, err)) < 0)
        goto fail;
    log->seconds[0] = now_s() - t0;
    double mm_per_px = p->mm_per_px;
    if (p->calib) {
        mb_calib_scale sc;
        if ((rc = mb_calib_check_frame(p->calib, w, h, err)) < 0)
            goto fail;
        if ((rc = mb_calib_local_scale(p->calib, (w - 1) / 2.0, (h - 1) / 2.0,
                                       &sc)) < 0) {
            mb_err_set(err, rc, "calibration: no scale at the frame centre");
            goto fail;
        }
        mm_per_px = sc.mm_per_px;
    }

    /* the part's polarity: the majority of the usable images */
    int dark = 0;
    for (int i = 0; i < n; i++)
        dark += fp[i].dark;
    int dark_part = 2 * dark >= n;
    use = malloc((size_t)(n > 0 ? n : 1) * sizeof *use);
    if (!use) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto fail;
    }
    for (int i = 0; i < n; i++) {
        use[i] = fp[i].dark == dark_part;
        if (!use[i] && (rc = add_skip(log, files.paths[fp[i].file],
                                      dark_part ? "the part is brighter than the field, unlike in most images"
                                                : "the part is darker than the field, unlike in most images")) < 0)
            goto fail;
    }
    int usable = 0;
    for (int i = 0; i < n; i++)
        usable += use[i];
    if (usable < MB_TEACH_MIN_IMAGES) {
        rc = mb_err_set(err, MB_EDEGENERATE,
                        "%s: only %d of %d images show a usable part; teaching "
                        "needs at least %d (the skipped images and their reasons "
                        "are listed above)",
                        dir, usable, files.count, MB_TEACH_MIN_IMAGES);
        goto fail;
    }

    for (int round = 0; round < 2; round++) {
        free(shapes);
        free(col);
        shapes = NULL;
        col = NULL;
        if ((rc = model_round(fp, n, use, p, &files, pm, &shapes, &col, &m,
                              log, log->seconds, err)) < 0)
            goto fail;
        if (p->keep_outliers || round == 1)
            break;
        int outl = 0;
        for (int j = 0; j < m; j++)
            outl += log->scores.outlier[j];
        if (outl == 0 || outl * 5 > m)
            break; /* none, or too many to be outliers: keep all */
        for (int j = 0; j < m; j++) {
            if (!log->scores.outlier[j])
                continue;
            char why[256];
            snprintf(why, sizeof why,
                     "left out as an outlier of the good set (T^2 %.1f, "
                     "residual %.3g, local deviation %.1f x its limit)",
                     log->scores.t2[j], log->scores.spe[j],
                     log->scores.local_ratio[j]);
            use[col[j]] = 0;
            log->n_outliers++;
            if ((rc = add_skip(log, files.paths[fp[col[j]].file], why)) < 0)
                goto fail;
        }
    }

    /* the used parts, in model column order */
    log->used = calloc((size_t)(m > 0 ? m : 1), sizeof *log->used);
    if (!log->used) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto fail;
    }
    for (int j = 0; j < m; j++) {
        log->used[j] = strdup(files.paths[fp[col[j]].file]);
        if (!log->used[j]) {
            rc = mb_err_set(err, MB_ENOMEM, "out of memory");
            goto fail;
        }
        log->n_used = j + 1;
    }
    double *bl = malloc((size_t)m * 2 * sizeof *bl);
    if (bl) {
        for (int j = 0; j < m; j++) {
            bl[j] = fp[col[j]].blur;
            bl[m + j] = fp[col[j]].contrast;
        }
        qsort(bl, (size_t)m, sizeof *bl, cmp_double);
        qsort(bl + m, (size_t)m, sizeof *bl, cmp_double);
        log->blur = bl[m / 2];
        log->contrast = bl[m + m / 2];
        free(bl);
    }

    /* stage 5: profile models, second pass over the used images */
    t0 = now_s();
    mb_profile_params prp;
    mb_profile_params_default(&prp);
    const mb_layout *layout = mb_shape_model_layout(pm->shape);
    if ((rc = mb_pyramid_create(w, h, prp.levels, &pyr)) < 0 ||
        (rc = mb_profile_learner_create(layout, &prp, &pl, err)) < 0) {
        mb_err_set(err, rc, "cannot make the profile learner: %s", mb_strerror(rc));
        goto fail;
    }
    for (int j = 0; j < m; j++) {
        mb_image img;
        progress(p->progress, j, m, "profiles");
        if ((rc = mb_image_load(log->used[j], &img, err)) < 0)
            goto fail;
        rc = mb_pyramid_build(pyr, &img);
        if (rc == 0)
            rc = mb_profile_learner_add(pl, pyr, shapes + (size_t)j * 2 * layout->n_points, err);
        mb_image_free(&img);
        if (rc < 0)
            goto fail;
    }
    progress(p->progress, m, m, "profiles");
    if ((rc = mb_profile_learner_finish(pl, &pm->profiles, err)) < 0)
        goto fail;
    log->seconds[4] = now_s() - t0;

    pm->imaging.width = w;
    pm->imaging.height = h;
    pm->imaging.mm_per_px = mm_per_px;
    pm->imaging.dark_part = dark_part;
    if (p->n_gauges > 0) {
        int no = mb_shape_model_layout(pm->shape)->n_outlines;
        for (int g = 0; g < p->n_gauges && g < MB_MAX_GAUGES; g++) {
            const mb_gauge_def *gd = &p->gauges[g];
            if (gd->a >= no || (gd->kind == MB_GAUGE_SPACING && gd->b >= no)) {
                rc = mb_err_set(err, MB_ERANGE,
                                "gauge %s names outline %d but the part has %d "
                                "outlines (0 = outer edge, 1..%d holes)", gd->name,
                                gd->a >= no ? gd->a : gd->b, no, no - 1);
                goto fail;
            }
            pm->gauges[g] = *gd;
        }
        pm->n_gauges = p->n_gauges < MB_MAX_GAUGES ? p->n_gauges : MB_MAX_GAUGES;
    }
    t0 = now_s();
    if ((rc = remeasure(pm, p, log, err)) < 0)
        goto fail;
    log->seconds[6] = now_s() - t0;
    snprintf(pm->name, sizeof pm->name, "%s", p->name ? p->name : dir);
    log->seconds[5] = now_s() - t_start;
    rc = MB_OK;
    goto done;
fail:
    if (p->progress)
        fputc('\n', p->progress);
    mb_part_model_free(pm);
done:
    mb_profile_learner_close(pl);
    mb_pyramid_close(pyr);
    free(shapes);
    free(col);
    free(use);
    free_found(fp, n);
    mb_file_list_free(&files);
    return rc;
}
