/*
 * tests/fit/synth_teach.c - teaching from the synthetic line for tests and
 * benchmarks (see synth_teach.h).
 */
#include "synth_teach.h"

#include "correspond.h"
#include "outline.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

double synth_truth_distance(const mb_polyline_set *s, double x, double y)
{
    double best = INFINITY;
    for (int o = 0, first = 0; o < s->n_outlines; o++) {
        const int n = s->counts[o];
        const double *q = s->xy + 2 * first;
        for (int i = 0; i < n; i++) {
            int j = i + 1 == n ? 0 : i + 1;
            double ax = q[2 * i], ay = q[2 * i + 1];
            double dx = q[2 * j] - ax, dy = q[2 * j + 1] - ay;
            double l2 = dx * dx + dy * dy;
            double t = l2 > 0 ? ((x - ax) * dx + (y - ay) * dy) / l2 : 0.0;
            t = t < 0 ? 0 : t > 1 ? 1 : t;
            double d = hypot(x - ax - t * dx, y - ay - t * dy);
            if (d < best)
                best = d;
        }
        first += n;
    }
    return best;
}

void synth_forget(synth_taught *t)
{
    mb_profile_model_close(t->pm);
    mb_shape_model_close(t->sm);
    mb_pyramid_close(t->pyr);
    mb_image_free(&t->img);
    mb_synth_close(t->gen);
    memset(t, 0, sizeof *t);
}

int synth_teach(const mb_synth_config *cfg, int frames, int points,
                double variance, int levels, synth_taught *t, char *err)
{
    memset(t, 0, sizeof *t);
    mb_outliner *ol = NULL;
    mb_profile_learner *pl = NULL;
    mb_polyline_set *sets = calloc((size_t)frames, sizeof *sets);
    double **xy = calloc((size_t)frames, sizeof *xy);
    double *shapes = NULL;
    mb_correspond_info info = {0};
    int rc = sets && xy ? MB_OK : mb_err_set(err, MB_ENOMEM, "out of memory");
    if (rc == MB_OK)
        rc = mb_synth_open(cfg, &t->gen, err);
    if (rc == MB_OK)
        rc = mb_image_alloc(cfg->width, cfg->height, &t->img);
    if (rc == MB_OK)
        rc = mb_pyramid_create(cfg->width, cfg->height, levels, &t->pyr);
    mb_outline_config oc;
    mb_outline_config_default(&oc);
    if (rc == MB_OK)
        rc = mb_outliner_create(cfg->width, cfg->height, &oc, &ol, err);
    for (int i = 0; i < frames && rc == MB_OK; i++) {
        mb_outline_result r;
        rc = mb_synth_make(t->gen, (uint64_t)i, 0, MB_SYNTH_NONE, &t->img, NULL);
        if (rc == MB_OK)
            rc = mb_outliner_run(ol, &t->img, &r, err);
        if (rc != MB_OK)
            break;
        /* copy: the outliner reuses its buffers */
        xy[i] = malloc(sizeof(double) * 2 * (size_t)r.layout.n_points);
        if (!xy[i]) {
            rc = MB_ENOMEM;
            break;
        }
        memcpy(xy[i], r.points, sizeof(double) * 2 * (size_t)r.layout.n_points);
        sets[i] = r.outlines;
        sets[i].xy = xy[i];
    }
    mb_correspond_params cp;
    mb_correspond_params_default(&cp);
    cp.budget = points;
    mb_layout lay = {0};
    if (rc == MB_OK)
        rc = mb_correspond_run(sets, frames, &cp, &lay, &shapes, &info, err);
    const int d = 2 * lay.n_points;
    if (rc == MB_OK) {
        mb_pca_params pca;
        mb_pca_params_default(&pca);
        pca.variance_fraction = variance;
        rc = mb_shape_model_build(shapes, d, &lay, info.n_used, NULL, &pca, NULL,
                                  &t->sm, err);
    }
    mb_profile_params pp;
    mb_profile_params_default(&pp);
    pp.levels = levels;
    if (rc == MB_OK)
        rc = mb_profile_learner_create(&lay, &pp, &pl, err);
    for (int i = 0; i < frames && rc == MB_OK; i++) {
        int col = info.parts[i].column;
        if (col < 0)
            continue;
        rc = mb_synth_make(t->gen, (uint64_t)i, 0, MB_SYNTH_NONE, &t->img, NULL);
        if (rc == MB_OK)
            rc = mb_pyramid_build(t->pyr, &t->img);
        if (rc == MB_OK)
            rc = mb_profile_learner_add(pl, t->pyr, shapes + (size_t)col * d, err);
    }
    if (rc == MB_OK)
        rc = mb_profile_learner_finish(pl, &t->pm, err);
    t->n_used = info.n_used;
    mb_profile_learner_close(pl);
    mb_correspond_info_free(&info);
    free(shapes);
    mb_outliner_close(ol);
    for (int i = 0; xy && i < frames; i++)
        free(xy[i]);
    free(xy);
    free(sets);
    if (rc != MB_OK)
        synth_forget(t);
    return rc;
}
