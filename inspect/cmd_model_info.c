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

static int print_json(const char *path, const mb_shape_model *m)
{
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
    mb_shape_model *m = NULL;
    if (mb_model_load(pos[0], &m, err) < 0)
        return mb_cli_fail("model-info", err);
    int rc = MB_EXIT_OK;
    if (json) {
        if (print_json(pos[0], m) < 0)
            rc = mb_cli_fail("model-info", "out of memory");
    } else {
        print_text(pos[0], m);
    }
    mb_shape_model_close(m);
    return rc;
}
