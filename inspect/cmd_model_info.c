/*
 * inspect/cmd_model_info.c - `modeband model-info`: the summary of a model
 * file, for a person (text) or a program (--json, one object).
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "model_file.h"
#include "shape_model.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

static const char *const info_help =
    "usage: modeband model-info MODEL [--json]\n"
    "\n"
    "Print the summary of a model file: where it was taught from, its\n"
    "outlines and points, the modes kept and the variance each explains.\n"
    "The file is fully checked (format, version, checksum, sizes) first.\n"
    "\n"
    "  --json    print one JSON object instead of text\n"
    "\n"
    "Exit status: 0 done, 1 failure (unreadable or invalid model), 2 usage.\n";

static void print_part(const mb_part_model *pm)
{
    const mb_imaging *im = &pm->imaging;
    if (pm->name[0])
        printf("part:       %s\n", pm->name);
    if (im->width > 0)
        printf("imaging:    %dx%d px frames, %s part, %s\n", im->width,
               im->height, im->dark_part ? "dark" : "bright",
               im->mm_per_px > 0 ? "scale given" : "no scale (sizes in px)");
    if (im->mm_per_px > 0)
        printf("scale:      %.5g mm per px\n", im->mm_per_px);
    if (pm->profiles) {
        const mb_profile_params *pp = mb_profile_model_params(pm->profiles);
        printf("profiles:   %d pyramid levels, %d samples across the edge\n",
               pp->levels, 2 * pp->half_len + 1);
    } else {
        printf("profiles:   none (taught from points: cannot inspect images)\n");
    }
    if (!pm->has_limits) {
        printf("limits:     none\n");
        return;
    }
    const mb_limits *l = &pm->limits;
    double mm = im->mm_per_px;
    printf("limits:     learned from %d good parts for %.2f %% false rejects\n",
           l->n_train, 100.0 * l->alpha);
    printf("  size (RMS radius) %.3f .. %.3f px", l->size_lo, l->size_hi);
    if (mm > 0)
        printf(" (%.3f .. %.3f mm)", l->size_lo * mm, l->size_hi * mm);
    printf("\n");
    for (int q = 0; q < l->n_judged; q++)
        printf("  mode %d within +-%.2f sd\n", q + 1, l->mode_band[q]);
    printf("  T^2 limit %.2f, residual limit %.3g\n", l->t2_limit, l->spe_limit);
    double lo = 1e300, hi = 0;
    for (int j = 0; j < l->n_landmarks; j++) {
        lo = fmin(lo, l->local_limit[j]);
        hi = fmax(hi, l->local_limit[j]);
    }
    printf("  local deviation %.2f .. %.2f px\n", lo, hi);
    printf("  leave-one-out false rejects: %d of %d\n", l->loo_rejects, l->n_train);
}

static void print_text(const char *path, const mb_shape_model *m)
{
    const mb_layout *l = mb_shape_model_layout(m);
    const mb_train_info *ti = mb_shape_model_info(m);
    const double *eig = mb_shape_model_eig(m);
    double total = mb_shape_model_total_var(m), cum = 0.0;
    printf("model:      %s (%s version %d)\n", path, MB_MODEL_FORMAT,
           MB_MODEL_VERSION);
    printf("taught:     %s from %d parts (%s)\n",
           ti->created[0] ? ti->created : "(date unknown)", ti->n_samples,
           ti->source);
    printf("outlines:   %d, points:", l->n_outlines);
    for (int i = 0; i < l->n_outlines; i++)
        printf("%s%d", i ? "+" : " ", l->counts[i]);
    printf(" = %d\n", l->n_points);
    printf("modes kept: %d of %d eigenvalues\n", mb_shape_model_n_modes(m),
           mb_shape_model_n_eig(m));
    printf("  mode  std.dev    variance %%  cumulative %%\n");
    for (int i = 0; i < mb_shape_model_n_modes(m); i++) {
        double f = total > 0 ? eig[i] / total : 0.0;
        cum += f;
        printf("  %4d  %9.3e  %10.2f  %12.2f\n", i + 1, sqrt(eig[i]),
               100.0 * f, 100.0 * cum);
    }
}

static int print_json(const char *path, const mb_part_model *pm)
{
    const mb_shape_model *m = pm->shape;
    const mb_layout *l = mb_shape_model_layout(m);
    const mb_train_info *ti = mb_shape_model_info(m);
    const double *eig = mb_shape_model_eig(m);
    double total = mb_shape_model_total_var(m);
    int k = mb_shape_model_n_modes(m);
    cJSON *o = cJSON_CreateObject();
    cJSON *counts = cJSON_CreateArray();
    cJSON *var = cJSON_CreateArray();
    cJSON *frac = cJSON_CreateArray();
    if (!o || !counts || !var || !frac) {
        cJSON_Delete(o);
        cJSON_Delete(counts);
        cJSON_Delete(var);
        cJSON_Delete(frac);
        return -1;
    }
    cJSON_AddStringToObject(o, "model", path);
    cJSON_AddStringToObject(o, "format", MB_MODEL_FORMAT);
    cJSON_AddNumberToObject(o, "version", MB_MODEL_VERSION);
    cJSON_AddStringToObject(o, "created", ti->created);
    cJSON_AddStringToObject(o, "source", ti->source);
    cJSON_AddNumberToObject(o, "samples", ti->n_samples);
    cJSON_AddNumberToObject(o, "points", l->n_points);
    for (int i = 0; i < l->n_outlines; i++)
        cJSON_AddItemToArray(counts, cJSON_CreateNumber(l->counts[i]));
    cJSON_AddItemToObject(o, "outline_points", counts);
    cJSON_AddNumberToObject(o, "modes", k);
    for (int i = 0; i < k; i++) {
        cJSON_AddItemToArray(var, cJSON_CreateNumber(eig[i]));
        cJSON_AddItemToArray(frac, cJSON_CreateNumber(total > 0 ? eig[i] / total : 0));
    }
    cJSON_AddItemToObject(o, "variances", var);
    cJSON_AddItemToObject(o, "variance_fraction", frac);
    cJSON_AddNumberToObject(o, "total_variance", total);
    cJSON_AddStringToObject(o, "part", pm->name);
    cJSON_AddBoolToObject(o, "profiles", pm->profiles != NULL);
    cJSON_AddNumberToObject(o, "width", pm->imaging.width);
    cJSON_AddNumberToObject(o, "height", pm->imaging.height);
    cJSON_AddNumberToObject(o, "mm_per_px", pm->imaging.mm_per_px);
    if (pm->has_limits) {
        cJSON *lj = cJSON_AddObjectToObject(o, "limits");
        if (lj) {
            cJSON_AddNumberToObject(lj, "alpha", pm->limits.alpha);
            cJSON_AddNumberToObject(lj, "t2", pm->limits.t2_limit);
            cJSON_AddNumberToObject(lj, "residual", pm->limits.spe_limit);
            cJSON_AddNumberToObject(lj, "size_lo_px", pm->limits.size_lo);
            cJSON_AddNumberToObject(lj, "size_hi_px", pm->limits.size_hi);
            cJSON_AddNumberToObject(lj, "loo_rejects", pm->limits.loo_rejects);
            cJSON_AddNumberToObject(lj, "n_train", pm->limits.n_train);
        }
    }
    char *s = cJSON_PrintUnformatted(o);
    cJSON_Delete(o);
    if (!s)
        return -1;
    puts(s);
    cJSON_free(s);
    return 0;
}

int mb_cmd_model_info(int argc, char **argv)
{
    int json = 0, help = 0, npos = 0;
    const char *pos[1];
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {{"json", MB_OPT_FLAG, &json, NULL}};
    if (mb_cli_parse(argc, argv, opts, 1, pos, 1, &npos, &help, err) < 0)
        return mb_cli_usage_error("model-info", err);
    if (help) {
        fputs(info_help, stdout);
        return MB_EXIT_OK;
    }
    if (npos != 1)
        return mb_cli_usage_error("model-info", "give exactly one MODEL file");
    mb_part_model pm;
    if (mb_part_model_load(pos[0], &pm, err) < 0)
        return mb_cli_fail("model-info", err);
    int rc = MB_EXIT_OK;
    if (json) {
        if (print_json(pos[0], &pm) < 0)
            rc = mb_cli_fail("model-info", "out of memory");
    } else {
        print_text(pos[0], pm.shape);
        print_part(&pm);
    }
    mb_part_model_free(&pm);
    return rc;
}
